//! Property tests: random traces written in every dialect are read back exactly (bit for bit,
//! since the values are written with Rust's shortest round-trip formatting and in SI units).

use diffusor_trace::{
    DecimalMark, Delimiter, ImportOptions, LineEnding, OnsetChoice, import_bytes,
};
use proptest::prelude::*;

#[derive(Debug, Clone)]
struct Dialect {
    delimiter: Delimiter,
    decimal_comma: bool,
    quoted: bool,
    bom: bool,
    crlf: bool,
    header: u8,
    preamble: Vec<String>,
    trailing_blank: usize,
}

fn dialect() -> impl Strategy<Value = Dialect> {
    (
        prop_oneof![
            Just(Delimiter::Comma),
            Just(Delimiter::Semicolon),
            Just(Delimiter::Tab),
            Just(Delimiter::Whitespace)
        ],
        any::<bool>(),
        any::<bool>(),
        any::<bool>(),
        any::<bool>(),
        0u8..4,
        prop::collection::vec("[A-Z][a-z]{2,8}( [a-z]{1,6})?", 0..4),
        0usize..3,
    )
        .prop_map(
            |(delimiter, comma, quoted, bom, crlf, header, preamble, trailing_blank)| Dialect {
                delimiter,
                // A decimal comma in an unquoted comma-separated file cannot be read by anyone.
                decimal_comma: comma && (delimiter != Delimiter::Comma || quoted),
                quoted: quoted && delimiter != Delimiter::Whitespace,
                bom,
                crlf,
                header,
                preamble,
                trailing_blank,
            },
        )
}

fn series() -> impl Strategy<Value = (Vec<f64>, Vec<f64>)> {
    (10usize..120).prop_flat_map(|n| {
        (
            prop::collection::vec(1e-6f64..1.0, n),
            prop::collection::vec(-1e-2f64..1e-2, n),
            1e-7f64..1e-3,
        )
            .prop_map(|(steps, current, start)| {
                let mut t = start;
                let time = steps
                    .iter()
                    .map(|dt| {
                        let v = t;
                        t += dt;
                        v
                    })
                    .collect();
                (time, current)
            })
    })
}

fn write(d: &Dialect, time: &[f64], current: &[f64]) -> Vec<u8> {
    let sep = match d.delimiter {
        Delimiter::Comma => ",",
        Delimiter::Semicolon => ";",
        Delimiter::Tab => "\t",
        Delimiter::Whitespace => "   ",
    };
    let eol = if d.crlf { "\r\n" } else { "\n" };
    let cell = |s: String| {
        let s = if d.decimal_comma {
            s.replace('.', ",")
        } else {
            s
        };
        if d.quoted { format!("\"{s}\"") } else { s }
    };
    let mut out = String::new();
    if d.bom {
        out.push('\u{feff}');
    }
    for p in &d.preamble {
        out.push_str(&format!("{p} = 1{eol}"));
    }
    let header = match d.header {
        0 => None,
        1 => Some(("time (s)", "current (A)")),
        2 => Some(("t/s", "I/A")),
        _ => Some(("Time_s", "Current_A")),
    };
    if let Some((a, b)) = header {
        let q = |s: &str| {
            if d.quoted {
                format!("\"{s}\"")
            } else {
                s.replace(' ', "")
            }
        };
        out.push_str(&format!("{}{sep}{}{eol}", q(a), q(b)));
    }
    for (t, i) in time.iter().zip(current) {
        out.push_str(&format!(
            "{}{sep}{}{eol}",
            cell(format!("{t:e}")),
            cell(format!("{i:e}"))
        ));
    }
    for _ in 0..d.trailing_blank {
        out.push_str(eol);
    }
    out.into_bytes()
}

/// Whatever comes in, the importer returns a usable trace or an error that names the file.
fn check_outcome(bytes: &[u8], name: &str) -> Result<(), TestCaseError> {
    match import_bytes(name, bytes, &ImportOptions::default()) {
        Ok(t) => {
            prop_assert!(t.rows() >= diffusor_trace::MIN_ROWS);
            prop_assert!(t.time_s.windows(2).all(|w| w[1] > w[0]));
            prop_assert!(t.current_a.iter().all(|c| c.is_finite()));
        }
        Err(e) => prop_assert!(e.to_string().ends_with(name), "{}", e),
    }
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn every_dialect_reads_back_exactly(d in dialect(), (time, current) in series(), threads in 1usize..4) {
        let bytes = write(&d, &time, &current);
        let opts = ImportOptions { onset: OnsetChoice::FileClock, threads, ..ImportOptions::default() };
        let trace = import_bytes("prop.csv", &bytes, &opts)
            .map_err(|e| TestCaseError::fail(format!("{e}\n{}", String::from_utf8_lossy(&bytes))))?;
        prop_assert_eq!(trace.dialect.delimiter, d.delimiter);
        prop_assert_eq!(
            trace.dialect.decimal,
            if d.decimal_comma { DecimalMark::Comma } else { DecimalMark::Point }
        );
        prop_assert_eq!(trace.dialect.line_ending, if d.crlf { LineEnding::CrLf } else { LineEnding::Lf });
        prop_assert_eq!(trace.dialect.header_line.is_some(), d.header != 0);
        prop_assert_eq!(trace.metadata.len(), d.preamble.len());
        prop_assert_eq!(trace.rows(), time.len());
        for k in 0..time.len() {
            prop_assert_eq!(trace.time_s[k].to_bits(), time[k].to_bits(), "time row {}", k);
            prop_assert_eq!(trace.current_a[k].to_bits(), current[k].to_bits(), "current row {}", k);
        }
    }

    #[test]
    fn arbitrary_bytes_give_a_trace_or_a_named_error(bytes in prop::collection::vec(any::<u8>(), 0..2000)) {
        check_outcome(&bytes, "noise.bin")?;
    }

    #[test]
    fn arbitrary_text_gives_a_trace_or_a_named_error(text in "[0-9eE+\\-.,; \t\n\r\"a-z]{0,600}") {
        check_outcome(text.as_bytes(), "noise.txt")?;
    }
}
