//! The importer's messages in the window's terms. The importer speaks to the command line
//! ("name it with the --current-col option"); the window has no such flags, so each hint is
//! replaced by what to do here. The importer's own wording stays the source: this module only
//! swaps the hint and adds advice, so a new importer message still reaches the user.

use diffusor_trace::{ImportError, Quantity};

/// A header that names a column so the importer recognises it.
fn header_example(q: Quantity) -> &'static str {
    match q {
        Quantity::Time => "t (s)",
        Quantity::Current => "I (µA)",
        Quantity::Potential => "E (V)",
        Quantity::Charge => "Q (µC)",
    }
}

/// The command-line flag that picks the column, for those who also use the command line.
fn flag(q: Quantity) -> &'static str {
    match q {
        Quantity::Time => "--time-col",
        Quantity::Current => "--current-col",
        Quantity::Potential => "--potential-col",
        Quantity::Charge => "--charge-col",
    }
}

const QUANTITIES: [Quantity; 4] = [
    Quantity::Time,
    Quantity::Current,
    Quantity::Potential,
    Quantity::Charge,
];

/// What to do in the window when the file cannot be read, or `None` when the importer's
/// message already says it.
fn advice(e: &ImportError) -> Option<String> {
    match e {
        ImportError::MissingColumn { quantity, .. } => Some(format!(
            "Name the {} column under Columns below (its position from 1, or its header) and press Read again. Or, in a copy of the file, give it a header such as “{}” and open the copy.",
            quantity.name(),
            header_example(*quantity),
        )),
        ImportError::SingleColumn { .. } | ImportError::NoTable { .. } => Some(
            "Open the file in a text editor: the window reads tables of numbers with a time and a current column, separated by commas, semicolons, tabs or spaces. Export the trace again as CSV or text if it is something else, then open that file.".to_owned(),
        ),
        ImportError::WrongUnit { .. } => Some(
            "The column's header was read as naming that unit (“Kanal A” reads as amperes). In a copy of the file, give the column a header such as “t (s)” or “I (µA)” and open the copy.".to_owned(),
        ),
        ImportError::BadRows { .. } => Some(
            "Look at the line named: a stray text row or a cell the instrument wrote as text. Delete or fix such rows in a copy of the file and open the copy.".to_owned(),
        ),
        ImportError::TimeBackwards { .. } | ImportError::DuplicateTime { .. } => Some(
            "The file may hold several records one after the other: save each in a file of its own and open them one by one.".to_owned(),
        ),
        _ => None,
    }
}

/// Replaces the command-line hint of the importer's error `message` by the window's terms,
/// keeping the file name at its end.
fn swap_flag_hint(message: &str) -> String {
    let mut m = message.to_owned();
    for q in QUANTITIES {
        m = m.replace(
            &format!("; name it with the {} option", flag(q)),
            &format!(" (give it a header such as “{}”)", header_example(q)),
        );
    }
    m
}

/// A message of [`import_error`] split into the importer's sentence and the advice after it.
pub fn split(message: &str) -> (&str, Option<&str>) {
    match message.split_once('\n') {
        Some((what, todo)) => (what, Some(todo)),
        None => (message, None),
    }
}

/// The message to show beside a run whose file could not be read: the importer's, in the
/// window's terms, then (after a line break) what to do.
pub fn import_error(e: &ImportError) -> String {
    let m = swap_flag_hint(&e.to_string());
    match advice(e) {
        Some(a) => format!("{m}\n{a}"),
        None => m,
    }
}

/// An importer warning in the window's terms: "choose another with --time-col" becomes what to
/// do here.
pub fn import_warning(message: &str) -> String {
    let mut m = message.to_owned();
    for q in QUANTITIES {
        m = m.replace(
            &format!("choose another with {}", flag(q)),
            &format!(
                "if that is wrong, give the right column a header such as “{}” and open the file again",
                header_example(q)
            ),
        );
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_message_shown_in_the_window_names_a_command_line_flag() {
        // Two columns whose headers name neither time nor current nor their units.
        let bytes = b"alpha,beta\n1,0.5\n2,0.25\n3,0.125\n4,0.0625\n5,0.03\n6,0.01\n";
        let e = diffusor_trace::import_bytes("odd.csv", bytes, &Default::default());
        let shown = match e {
            Err(e) => import_error(&e),
            Ok(t) => t
                .warnings
                .iter()
                .map(|w| import_warning(&w.message))
                .collect::<Vec<_>>()
                .join("\n"),
        };
        assert!(!shown.contains("--"), "{shown}");
    }

    #[test]
    fn a_missing_column_says_what_to_do_in_the_window() {
        let e = ImportError::MissingColumn {
            file: "x.csv".to_owned(),
            quantity: Quantity::Current,
            available: "“t”, “u”".to_owned(),
        };
        let shown = import_error(&e);
        assert_eq!(
            shown.lines().next(),
            Some(
                "no current column found among “t”, “u” (give it a header such as “I (µA)”): x.csv"
            )
        );
        assert!(shown.contains("under Columns below"), "{shown}");
        assert!(!shown.contains("--"), "{shown}");
    }

    #[test]
    fn a_column_warning_loses_its_flag() {
        let w = "column 2 taken as current (the header does not name one); choose another with --current-col";
        assert_eq!(
            import_warning(w),
            "column 2 taken as current (the header does not name one); if that is wrong, give the right column a header such as “I (µA)” and open the file again"
        );
    }
}
