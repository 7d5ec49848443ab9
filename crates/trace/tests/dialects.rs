//! Every dialect the importer promises to read, written out by hand as instruments write them.

use diffusor_trace::{
    ColumnChoice, DecimalMark, Delimiter, ImportOptions, LineEnding, OnsetMethod, Polarity,
    Provenance, Quantity, SegmentKind, TextEncoding, Unit, WarningKind, import_bytes,
};

/// Twelve samples of a decaying current after a step at t = 0 (values invented for the test).
const T_MS: [f64; 12] = [
    1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0, 11.0, 12.0,
];
const I_UA: [f64; 12] = [
    80.0, 56.6, 46.2, 40.0, 35.8, 32.7, 30.2, 28.3, 26.7, 25.3, 24.1, 23.1,
];

fn table(sep: &str, decimal_comma: bool, eol: &str) -> String {
    let mut s = String::new();
    for (t, i) in T_MS.iter().zip(I_UA) {
        let row = format!("{t:.1}{sep}{i:.1}");
        let row = if decimal_comma {
            row.replace('.', ",")
        } else {
            row
        };
        s.push_str(&row);
        s.push_str(eol);
    }
    s
}

fn read(text: &str) -> diffusor_trace::Trace {
    import_bytes("test.csv", text.as_bytes(), &ImportOptions::default())
        .unwrap_or_else(|e| panic!("{e}\n---\n{text}"))
}

fn assert_values(trace: &diffusor_trace::Trace) {
    assert_eq!(trace.rows(), 12);
    for k in 0..12 {
        // The file starts at the step, so its clock is kept: t = 1 ms is the first sample.
        assert!((trace.time_s[k] - T_MS[k] * 1e-3).abs() < 1e-15, "t[{k}]");
        assert!(
            (trace.current_a[k] - I_UA[k] * 1e-6).abs() < 1e-18,
            "i[{k}]"
        );
    }
}

#[test]
fn comma_semicolon_tab_whitespace_with_units_in_the_header() {
    let cases = [
        (
            "t (ms),I (µA)\n",
            ",",
            false,
            Delimiter::Comma,
            DecimalMark::Point,
        ),
        (
            "t (ms);I (µA)\n",
            ";",
            true,
            Delimiter::Semicolon,
            DecimalMark::Comma,
        ),
        (
            "t (ms);I (µA)\n",
            ";",
            false,
            Delimiter::Semicolon,
            DecimalMark::Point,
        ),
        (
            "t (ms)\tI (µA)\n",
            "\t",
            true,
            Delimiter::Tab,
            DecimalMark::Comma,
        ),
        (
            "t (ms)\tI (µA)\n",
            "\t",
            false,
            Delimiter::Tab,
            DecimalMark::Point,
        ),
        (
            "time/ms   current/uA\n",
            "   ",
            false,
            Delimiter::Whitespace,
            DecimalMark::Point,
        ),
    ];
    for (header, sep, comma, delimiter, decimal) in cases {
        let text = format!("{header}{}", table(sep, comma, "\n"));
        let trace = read(&text);
        assert_eq!(trace.dialect.delimiter, delimiter, "{header:?}");
        assert_eq!(trace.dialect.decimal, decimal, "{header:?}");
        assert_eq!(trace.dialect.header_line, Some(1));
        assert_values(&trace);
        assert_eq!(trace.onset.method, OnsetMethod::FileStart);
        assert_eq!(trace.polarity, Some(Polarity::Anodic));
    }
}

#[test]
fn crlf_bom_quotes_and_trailing_blank_lines() {
    let mut text = String::from("\u{feff}\"Time (ms)\",\"Current (uA)\"\r\n");
    for (t, i) in T_MS.iter().zip(I_UA) {
        text.push_str(&format!("\"{t:.1}\",\"{i:.1}\"\r\n"));
    }
    text.push_str("\r\n\r\n\n");
    let trace = read(&text);
    assert_eq!(trace.dialect.encoding, TextEncoding::Utf8Bom);
    assert_eq!(trace.dialect.line_ending, LineEnding::CrLf);
    assert!(trace.dialect.quoted);
    assert_values(&trace);
    assert!(trace.warnings.is_empty(), "{:?}", trace.warnings);
}

#[test]
fn quoted_decimal_commas_inside_comma_separated_fields() {
    let mut text = String::from("t/ms,I/µA\n");
    for (t, i) in T_MS.iter().zip(I_UA) {
        text.push_str(&format!(
            "\"{}\",\"{}\"\n",
            format!("{t:.1}").replace('.', ","),
            format!("{i:.1}").replace('.', ",")
        ));
    }
    // The quotes keep the fields apart, and the numbers are read with the mark they use.
    let trace = read(&text);
    assert_eq!(trace.dialect.delimiter, Delimiter::Comma);
    assert_eq!(trace.dialect.decimal, DecimalMark::Comma);
    assert_values(&trace);
}

#[test]
fn scientific_notation_and_cr_only_line_endings() {
    let mut text = String::from("time_s,current_A\r");
    for (t, i) in T_MS.iter().zip(I_UA) {
        text.push_str(&format!("{:e},{:E}\r", t * 1e-3, i * 1e-6));
    }
    let trace = read(&text);
    assert_eq!(trace.dialect.line_ending, LineEnding::Cr);
    assert_values(&trace);
}

#[test]
fn preamble_is_kept_as_metadata() {
    let text = format!(
        "Synthetic step experiment, invented for this test\nOperator = nobody\nElectrode: 3 mm disk\nStep;0.0 V to 0.5 V\n\nt (ms);I (µA)\n{}",
        table(";", true, "\n")
    );
    let trace = read(&text);
    assert_eq!(trace.dialect.header_line, Some(6));
    assert_eq!(trace.metadata.len(), 4);
    assert_eq!(trace.metadata[0].key, None);
    assert_eq!(trace.metadata[1].key.as_deref(), Some("Operator"));
    assert_eq!(trace.metadata[1].value, "nobody");
    assert_eq!(trace.metadata[2].key.as_deref(), Some("Electrode"));
    assert_eq!(trace.metadata[3].key.as_deref(), Some("Step"));
    assert_eq!(trace.metadata[3].line, 4);
    assert_values(&trace);
}

#[test]
fn separate_units_row() {
    let text = format!("Time;Current\nms;µA\n{}", table(";", true, "\n"));
    let trace = read(&text);
    assert_eq!(trace.dialect.units_line, Some(2));
    assert_values(&trace);
}

#[test]
fn no_header_first_increasing_column_is_time() {
    let text = table(",", false, "\n");
    let trace = read(&text);
    assert_eq!(trace.dialect.header_line, None);
    let time = trace.column(Quantity::Time).expect("time");
    assert_eq!(time.number, 1);
    assert_eq!(time.role_provenance, Provenance::Assumed);
    assert!(
        trace
            .warnings
            .iter()
            .any(|w| w.kind == WarningKind::UnitAssumed)
    );
    // Without units the values are taken as SI, which the user then corrects.
    let opts = ImportOptions {
        time_unit: Unit::parse("ms"),
        current_unit: Unit::parse("uA"),
        ..ImportOptions::default()
    };
    let trace = import_bytes("n.csv", text.as_bytes(), &opts).expect("import");
    assert_values(&trace);
}

#[test]
fn no_header_current_first_then_time() {
    // Current in column 1 (decreasing), time in column 2: the increasing one is time.
    let mut text = String::new();
    for (t, i) in T_MS.iter().zip(I_UA) {
        text.push_str(&format!("{i} {t}\n"));
    }
    let opts = ImportOptions {
        time_unit: Unit::parse("ms"),
        current_unit: Unit::parse("µA"),
        ..ImportOptions::default()
    };
    let trace = import_bytes("swap.txt", text.as_bytes(), &opts).expect("import");
    assert_eq!(trace.column(Quantity::Time).map(|c| c.number), Some(2));
    assert_values(&trace);
}

#[test]
fn overrides_beat_guessing() {
    let mut text = String::from("a,b,c\n");
    for (t, i) in T_MS.iter().zip(I_UA) {
        text.push_str(&format!("{t},{},{i}\n", t * 7.0));
    }
    let opts = ImportOptions {
        time_column: Some(ColumnChoice::parse("a")),
        current_column: Some(ColumnChoice::parse("3")),
        time_unit: Unit::parse("ms"),
        current_unit: Unit::parse("uA"),
        ..ImportOptions::default()
    };
    let trace = import_bytes("o.csv", text.as_bytes(), &opts).expect("import");
    assert_eq!(trace.column(Quantity::Current).map(|c| c.number), Some(3));
    assert_eq!(
        trace.column(Quantity::Current).map(|c| c.role_provenance),
        Some(Provenance::Override)
    );
    assert_values(&trace);
    let bad = ImportOptions {
        current_column: Some(ColumnChoice::parse("7")),
        ..ImportOptions::default()
    };
    let err = import_bytes("o.csv", text.as_bytes(), &bad).unwrap_err();
    assert_eq!(
        err.to_string(),
        "the current column \"7\" is not in the file (columns: 1 \"a\", 2 \"b\", 3 \"c\"): o.csv"
    );
}

#[test]
fn header_words_in_other_languages() {
    for header in [
        "Zeit (ms);Strom (µA)",
        "Temps (ms);Courant (µA)",
        "Tiempo (ms);Corriente (uA)",
    ] {
        let text = format!("{header}\n{}", table(";", true, "\n"));
        let trace = read(&text);
        assert_eq!(
            trace.column(Quantity::Time).map(|c| c.number),
            Some(1),
            "{header}"
        );
        assert_eq!(
            trace.column(Quantity::Current).map(|c| c.number),
            Some(2),
            "{header}"
        );
        assert_values(&trace);
    }
}

#[test]
fn utf16_little_and_big_endian_are_decoded() {
    let text = format!("t (ms)\tI (µA)\r\n{}", table("\t", false, "\r\n"));
    let mut le = vec![0xFF, 0xFE];
    let mut be = vec![0xFE, 0xFF];
    for u in text.encode_utf16() {
        le.extend(u.to_le_bytes());
        be.extend(u.to_be_bytes());
    }
    for bytes in [le, be] {
        let trace = import_bytes("u16.txt", &bytes, &ImportOptions::default()).expect("utf-16");
        assert!(matches!(
            trace.dialect.encoding,
            TextEncoding::Utf16Le | TextEncoding::Utf16Be
        ));
        assert_values(&trace);
    }
}

#[test]
fn latin1_micro_sign_in_the_header() {
    let mut bytes = b"t (ms);I (\xB5A)\n".to_vec();
    bytes.extend(table(";", true, "\n").as_bytes());
    let trace = import_bytes("l1.csv", &bytes, &ImportOptions::default()).expect("latin-1");
    assert_eq!(trace.dialect.encoding, TextEncoding::Latin1);
    assert_values(&trace);
}

#[test]
fn potential_step_sets_the_onset_and_baseline() {
    // 0.1 ms sampling; the potential jumps from 0.0 V to 0.6 V between t = 0.9 and 1.0 ms.
    let mut text = String::from("t/s,E/V,I/A\n");
    for k in 0..40 {
        let t = k as f64 * 1e-4;
        let (e, i) = if k < 10 {
            (0.0, 1e-9 * ((k % 3) as f64 - 1.0))
        } else {
            (0.6, 1e-5 / ((k - 9) as f64).sqrt())
        };
        text.push_str(&format!("{t},{e},{i}\n"));
    }
    let trace = read(&text);
    match &trace.onset.method {
        OnsetMethod::PotentialJump { from_v, to_v } => {
            assert_eq!((*from_v, *to_v), (0.0, 0.6));
        }
        other => panic!("{other:?}"),
    }
    assert_eq!(trace.onset.index, 10);
    assert!((trace.onset.file_time_s - 0.95e-3).abs() < 1e-12);
    assert!((trace.time_s[10] - 0.05e-3).abs() < 1e-12);
    let baseline = trace.baseline.as_ref().expect("baseline");
    assert_eq!(baseline.points, 10);
    assert!(baseline.mean_a.abs() < 1e-9);
    assert_eq!(trace.segments.len(), 2);
    assert_eq!(trace.segments[0].kind, SegmentKind::Baseline);
    assert_eq!(trace.polarity, Some(Polarity::Anodic));
}

#[test]
fn cathodic_double_step_is_split_into_segments() {
    let mut text = String::from("time (s);potential (mV);current (uA)\n");
    for k in 0..90 {
        let t = k as f64 * 0.01;
        let (e, i) = match k {
            0..10 => (200.0, 0.0),
            10..50 => (-300.0, -50.0 / ((k - 9) as f64).sqrt()),
            _ => (200.0, 30.0 / ((k - 49) as f64).sqrt()),
        };
        text.push_str(&format!("{t:.2};{e:.1};{i:.4}\n"));
    }
    let trace = read(&text);
    let steps: Vec<_> = trace.steps().collect();
    assert_eq!(steps.len(), 2);
    assert_eq!((steps[0].start, steps[1].start), (10, 50));
    assert_eq!(steps[0].polarity, Some(Polarity::Cathodic));
    assert_eq!(steps[1].polarity, Some(Polarity::Anodic));
    assert_eq!(trace.polarity, Some(Polarity::Cathodic));
    assert_eq!(steps[0].potential_v, Some(-0.3));
    // The magnitude for fitting is positive and keeps the original values.
    let f = trace.faradaic_current_a(steps[0]);
    assert!((f[0] - 50e-6).abs() < 1e-15);
    assert!(trace.current_a[10] < 0.0);
    // Each step's times are measured from its own onset.
    let t2 = trace.segment_time_s(steps[1]);
    assert!((t2[0] - 0.005).abs() < 1e-12, "{}", t2[0]);
}

#[test]
fn current_jump_without_potential_column() {
    let mut text = String::from("t (s),i (A)\n");
    for k in 0..30 {
        let i = if k < 5 {
            2e-10
        } else {
            1e-5 / ((k - 4) as f64).sqrt()
        };
        text.push_str(&format!("{},{i}\n", k as f64 * 0.01));
    }
    let trace = read(&text);
    assert_eq!(trace.onset.method, OnsetMethod::CurrentJump);
    assert_eq!(trace.onset.index, 5);
    assert_eq!(trace.baseline.as_ref().map(|b| b.points), Some(5));
}

#[test]
fn clock_not_starting_near_zero_assumes_one_interval_and_warns() {
    let mut text = String::from("t (s),i (A)\n");
    for k in 0..30 {
        text.push_str(&format!(
            "{},{}\n",
            100.0 + k as f64 * 0.01,
            1e-5 / ((k + 1) as f64).sqrt()
        ));
    }
    let trace = read(&text);
    assert_eq!(trace.onset.method, OnsetMethod::AssumedOneSampleBefore);
    assert!((trace.time_s[0] - 0.01).abs() < 1e-9);
    assert!(
        trace
            .warnings
            .iter()
            .any(|w| w.kind == WarningKind::OriginAssumed)
    );
}
