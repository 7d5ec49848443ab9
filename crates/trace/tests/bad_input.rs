//! Bad input gets a clear error naming the file, the line and what was expected; recoverable
//! problems become warnings that count and locate every skipped row. The messages asserted here
//! are the ones a user sees.

use diffusor_trace::{ImportError, ImportOptions, WarningKind, import_bytes};

fn good_rows(n: usize) -> String {
    (1..=n)
        .map(|k| format!("{},{}\n", k as f64 * 0.01, 1e-5 / (k as f64).sqrt()))
        .collect()
}

fn err(bytes: &[u8]) -> String {
    match import_bytes("bad.csv", bytes, &ImportOptions::default()) {
        Ok(t) => panic!("expected an error, got {} rows", t.rows()),
        Err(e) => e.to_string(),
    }
}

#[test]
fn empty_and_blank_files() {
    assert_eq!(err(b""), "the file is empty: bad.csv");
    assert_eq!(err(b"\n\n  \r\n"), "the file is empty: bad.csv");
}

#[test]
fn header_only() {
    assert_eq!(
        err(b"time (s),current (A)\n"),
        "the header on line 1 has no data rows under it: bad.csv"
    );
}

#[test]
fn text_garbage() {
    assert_eq!(
        err(b"Lorem ipsum dolor sit amet\nconsectetur adipiscing elit\n"),
        "no table of numbers found in the first 2 lines (expected rows of at least two numeric columns, such as time and current): bad.csv"
    );
}

#[test]
fn binary_bytes() {
    let mut bytes = b"PK\x03\x04".to_vec();
    bytes.extend((0..=255u8).cycle().take(4096));
    let e = err(&bytes);
    assert!(
        e.starts_with("this is not a text file (binary byte 0x"),
        "{e}"
    );
    assert!(
        e.ends_with("export the trace as CSV or text: bad.csv"),
        "{e}"
    );
}

#[test]
fn broken_utf16_is_refused() {
    // A byte-order mark, then an odd number of bytes.
    assert_eq!(
        err(&[0xFF, 0xFE, b't', 0, b',']),
        "cannot decode the text (UTF-16 text with an odd number of bytes): bad.csv"
    );
    // An unpaired surrogate.
    assert_eq!(
        err(&[0xFF, 0xFE, 0x00, 0xD8, b'1', 0]),
        "cannot decode the text (unpaired UTF-16 surrogate at byte 2): bad.csv"
    );
}

#[test]
fn single_column() {
    let text: String = (1..30).map(|k| format!("{k}\n")).collect();
    assert_eq!(
        err(text.as_bytes()),
        "only one numeric column from line 1; a trace needs time and current (check the separator): bad.csv"
    );
}

#[test]
fn fewer_rows_than_a_fit_needs() {
    let text = format!("t (s),I (A)\n{}", good_rows(4));
    assert_eq!(
        err(text.as_bytes()),
        "only 4 data rows; a fit needs at least 10 (was the export cut short?): bad.csv"
    );
}

#[test]
fn one_or_two_rows_of_numbers_are_too_few_not_a_header() {
    // Too short to find a table in: a preamble, a header, one row and a broken one (decimal
    // commas, semicolons). The last line was once reported as "the header on line 5".
    let text = "Messy export, written by hand for a test\nrun;2\nzeit [ms];strom [nA]\n0,5;12,1\n1,5;abc\n";
    assert_eq!(
        err(text.as_bytes()),
        "only 1 data row; a fit needs at least 10 (was the export cut short?): bad.csv"
    );
    let text = format!("t (s),I (A)\n{}", good_rows(2));
    assert_eq!(
        err(text.as_bytes()),
        "only 2 data rows; a fit needs at least 10 (was the export cut short?): bad.csv"
    );
}

#[test]
fn nan_and_inf_cells_are_located() {
    let mut text = format!("t (s),I (A)\n{}", good_rows(20));
    text.push_str("0.21,NaN\n0.22,inf\n");
    text.push_str(&good_rows(20).replace("0.", "1."));
    let trace =
        import_bytes("nan.csv", text.as_bytes(), &ImportOptions::default()).expect("import");
    let w = &trace.warnings[0];
    assert_eq!(w.kind, WarningKind::SkippedRows);
    assert_eq!(w.lines, vec![22, 23]);
    assert_eq!(
        w.message,
        "skipped 2 unreadable rows (lines 22, 23); the first: column 2, expected a finite number, found \"NaN\""
    );
    // Too many of them is an error naming the first.
    let many: String = (0..20)
        .map(|k| format!("{},nan\n", 2.0 + k as f64))
        .collect();
    let text = format!("t (s),I (A)\n{}{many}", good_rows(20));
    assert_eq!(
        err(text.as_bytes()),
        "line 22, column 2: expected a finite number, found \"nan\" (20 of 40 data rows unreadable, more than the 3 allowed): bad.csv"
    );
}

#[test]
fn time_going_backwards() {
    let text = format!("t (s),I (A)\n{}0.05,1e-6\n", good_rows(12));
    assert_eq!(
        err(text.as_bytes()),
        "line 14: time goes backwards (0.05 s after 0.12 s); a trace must be in time order: bad.csv"
    );
}

#[test]
fn times_too_large_for_their_spacing() {
    // Found by the fuzzer: huge clock values whose spacing vanishes once the origin moves to
    // the step. It must be refused, not returned with equal times.
    let bytes = include_bytes!("data/fuzz-time-resolution.bin");
    let e = err(bytes);
    assert!(
        e.contains("the times are too large for their spacing"),
        "{e}"
    );
}

#[test]
fn duplicate_timestamps() {
    let text = format!("t (s),I (A)\n{}0.12,1e-6\n", good_rows(12));
    assert_eq!(
        err(text.as_bytes()),
        "line 14: duplicate timestamp 0.12 s (same as the row before); each sample needs its own time: bad.csv"
    );
}

#[test]
fn ragged_rows() {
    // A few are skipped with a warning that names them...
    let text = format!(
        "t (s),I (A)\n{}0.5,1,2\n{}",
        good_rows(10),
        good_rows(10).replace("0.", "9.")
    );
    let trace = import_bytes("r.csv", text.as_bytes(), &ImportOptions::default()).expect("import");
    assert_eq!(trace.warnings[0].lines, vec![12]);
    assert!(
        trace.warnings[0]
            .message
            .contains("expected 2 fields, found \"3 fields\""),
        "{}",
        trace.warnings[0].message
    );
    // ...many are an error.
    let ragged: String = (0..10)
        .map(|k| format!("{},1,2\n", 5.0 + k as f64))
        .collect();
    let text = format!("t (s),I (A)\n{}{ragged}", good_rows(12));
    assert_eq!(
        err(text.as_bytes()),
        "line 14, column 3: expected 2 fields, found \"3 fields\" (10 of 22 data rows unreadable, more than the 3 allowed): bad.csv"
    );
}

#[test]
fn truncated_last_row_is_a_warning() {
    let text = format!("t (s),I (A)\n{}0.13,1.2e", good_rows(12));
    let trace =
        import_bytes("cut.csv", text.as_bytes(), &ImportOptions::default()).expect("import");
    assert_eq!(trace.rows(), 12);
    assert_eq!(trace.warnings.len(), 1);
    assert_eq!(trace.warnings[0].kind, WarningKind::TruncatedLastRow);
    assert_eq!(
        trace.warnings[0].message,
        "the last row (line 14) is cut short and was skipped; the export may be incomplete"
    );
    // A last row with a missing field is cut short too.
    let text = format!("t (s),I (A)\n{}0.13,", good_rows(12));
    let trace =
        import_bytes("cut.csv", text.as_bytes(), &ImportOptions::default()).expect("import");
    assert_eq!(trace.warnings[0].kind, WarningKind::TruncatedLastRow);
}

#[test]
fn multi_megabyte_line_without_newline() {
    let bytes = vec![b'7'; 3 << 20];
    assert_eq!(
        err(&bytes),
        "line 1 is longer than 1048576 bytes with no line break; this does not look like a current–time table: bad.csv"
    );
    // The same after a good start.
    let mut bytes = format!("t (s),I (A)\n{}", good_rows(12)).into_bytes();
    bytes.extend(std::iter::repeat_n(b'1', 3 << 20));
    bytes.extend(b"\n0.5,1\n");
    match import_bytes("long.csv", &bytes, &ImportOptions::default()) {
        Err(ImportError::LineTooLong { line, .. }) => assert_eq!(line, 14),
        other => panic!("{other:?}"),
    }
}

#[test]
fn missing_current_column_says_which_option_to_use() {
    let text: String = (1..20)
        .map(|k| format!("{k},{}\n", k as f64 * 0.5))
        .collect();
    let text = format!("Time (s),Time (ms)\n{text}");
    assert_eq!(
        err(text.as_bytes()),
        "no current column found among 1 \"Time (s)\", 2 \"Time (ms)\"; name it with the --current-col option: bad.csv"
    );
}

#[test]
fn wrong_unit_for_a_column() {
    let text = format!("t (s),I (mV)\n{}", good_rows(12));
    let opts = ImportOptions {
        current_column: Some(diffusor_trace::ColumnChoice::Number(2)),
        ..ImportOptions::default()
    };
    match import_bytes("u.csv", text.as_bytes(), &opts) {
        Err(e) => assert_eq!(
            e.to_string(),
            "the unit \"mV\" does not measure current: u.csv"
        ),
        Ok(_) => panic!("accepted a potential unit for current"),
    }
}
