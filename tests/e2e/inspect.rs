//! `diffusor inspect` on the demo data, on every dialect, and on bad files.

use std::io::Write;

use crate::{demo_files, diffusor, stderr, stdout};

#[test]
fn reads_every_demo_file() {
    let files = demo_files();
    assert!(files.len() >= 5, "demo data missing: {files:?}");
    let mut args = vec!["inspect", "--json"];
    args.extend(files.iter().map(String::as_str));
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    assert_eq!(doc["schema"], "diffusor.inspect/1");
    let reported = doc["files"].as_array().expect("files");
    assert_eq!(reported.len(), files.len());
    for f in reported {
        assert_eq!(f["ok"], true, "{f}");
        assert!(f["rows"].as_u64().unwrap_or(0) >= 1000, "{f}");
        assert!(f["polarity"].is_string(), "{f}");
    }
}

#[test]
fn text_output_names_what_it_found() {
    let out = diffusor(&["inspect", "sample-data/messy-export.txt"]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let text = stdout(&out);
    for needle in [
        "semicolon-separated, decimal comma, UTF-8 with BOM, CRLF line endings",
        "→ time in ms",
        "→ current in mA",
        "step onset",
        "skipped 1 unreadable row",
    ] {
        assert!(text.contains(needle), "missing {needle:?} in\n{text}");
    }
}

/// Writes each dialect (the same twelve samples) to a file and reads them all in one run.
#[test]
fn reads_every_dialect() {
    let dir = tempfile::tempdir().expect("tempdir");
    let rows: Vec<(f64, f64)> = (1..=30)
        .map(|k| (k as f64, 100.0 / (k as f64).sqrt()))
        .collect();
    let table = |sep: &str, comma: bool, eol: &str, quote: bool| -> String {
        rows.iter()
            .map(|(t, i)| {
                let (t, i) = (format!("{t:.1}"), format!("{i:.4}"));
                let (t, i) = if comma {
                    (t.replace('.', ","), i.replace('.', ","))
                } else {
                    (t, i)
                };
                if quote {
                    format!("\"{t}\"{sep}\"{i}\"{eol}")
                } else {
                    format!("{t}{sep}{i}{eol}")
                }
            })
            .collect()
    };
    let mut files: Vec<(&str, Vec<u8>)> = vec![
        ("comma.csv", format!("t (ms),I (µA)\n{}", table(",", false, "\n", false)).into_bytes()),
        ("semicolon-comma.csv", format!("t (ms);I (µA)\n{}", table(";", true, "\n", false)).into_bytes()),
        ("tab-comma.txt", format!("Time/ms\tCurrent/uA\n{}", table("\t", true, "\n", false)).into_bytes()),
        ("whitespace.dat", format!("time_ms current_uA\n{}", table("  ", false, "\n", false)).into_bytes()),
        ("quoted-crlf.csv", format!("\"t [ms]\",\"I [µA]\"\r\n{}", table(",", false, "\r\n", true)).into_bytes()),
        ("bom-preamble.csv", format!("\u{feff}Synthetic file for a test\nOperator = nobody\nRate: 1 kHz\n\nt (ms);I (µA)\n{}\n\n", table(";", true, "\n", false)).into_bytes()),
        ("no-header.csv", table(",", false, "\n", false).into_bytes()),
        ("units-row.csv", format!("Time;Current\nms;µA\n{}", table(";", true, "\n", false)).into_bytes()),
    ];
    let text = format!("t (ms)\tI (µA)\r\n{}", table("\t", false, "\r\n", false));
    let mut utf16 = vec![0xFF, 0xFE];
    utf16.extend(text.encode_utf16().flat_map(u16::to_le_bytes));
    files.push(("utf16.txt", utf16));
    let mut paths = Vec::new();
    for (name, bytes) in &files {
        let p = dir.path().join(name);
        std::fs::File::create(&p)
            .and_then(|mut f| f.write_all(bytes))
            .expect("write");
        paths.push(p.display().to_string());
    }
    let mut args = vec![
        "inspect",
        "--json",
        "--time-unit",
        "ms",
        "--current-unit",
        "uA",
    ];
    args.extend(paths.iter().map(String::as_str));
    let out = diffusor(&args);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}\n{}",
        stdout(&out),
        stderr(&out)
    );
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    for f in doc["files"].as_array().expect("files") {
        assert_eq!(f["rows"], 30, "{f}");
        // The first sample: 1 ms and 100 µA, whatever the dialect.
        let cols = f["columns"].as_array().expect("columns");
        assert_eq!(cols.len(), 2, "{f}");
        assert_eq!(f["time_span_s"][0], 1e-3, "{}", f["file"]);
    }
}

#[test]
fn bad_files_fail_with_their_names_and_the_good_are_still_reported() {
    let dir = tempfile::tempdir().expect("tempdir");
    let good = dir.path().join("good.csv");
    let body: String = (1..=20)
        .map(|k| format!("{},{}\n", k as f64 * 0.01, 1e-5 / (k as f64).sqrt()))
        .collect();
    std::fs::write(&good, format!("t (s),I (A)\n{body}")).expect("write");
    let cases: Vec<(&str, Vec<u8>, &str)> = vec![
        ("empty.csv", Vec::new(), "the file is empty"),
        (
            "header-only.csv",
            b"t (s),I (A)\n".to_vec(),
            "has no data rows under it",
        ),
        (
            "garbage.txt",
            b"hello there\nnothing to see\n".to_vec(),
            "no table of numbers found",
        ),
        (
            "binary.bin",
            vec![0u8, 159, 146, 150, 0, 1, 2, 3],
            "this is not a text file",
        ),
        (
            "one-column.csv",
            (1..30)
                .map(|k| format!("{k}\n"))
                .collect::<String>()
                .into_bytes(),
            "only one numeric column",
        ),
        (
            "short.csv",
            b"t (s),I (A)\n0.1,1\n0.2,2\n".to_vec(),
            "only 2 data rows",
        ),
        (
            "backwards.csv",
            format!("t (s),I (A)\n{body}0.01,1\n").into_bytes(),
            "time goes backwards",
        ),
        (
            "duplicate.csv",
            format!("t (s),I (A)\n{body}0.2,1\n").into_bytes(),
            "duplicate timestamp",
        ),
        ("long-line.csv", vec![b'9'; 2 << 20], "with no line break"),
    ];
    let mut args = vec!["inspect".to_owned(), good.display().to_string()];
    for (name, bytes, _) in &cases {
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).expect("write");
        args.push(p.display().to_string());
    }
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(1));
    let text = stdout(&out);
    assert!(text.contains("good.csv\n  dialect"), "{text}");
    for (name, _, message) in &cases {
        let line = text
            .lines()
            .find(|l| l.contains("error") && l.ends_with(name))
            .unwrap_or_else(|| panic!("no error line for {name} in\n{text}"));
        assert!(line.contains(message), "{name}: {line}");
    }
    assert!(stderr(&out).contains(&format!(
        "{} of {} files could not be read",
        cases.len(),
        cases.len() + 1
    )));
}

#[test]
fn usage_errors_exit_2() {
    assert_eq!(diffusor(&["inspect"]).status.code(), Some(2));
    let out = diffusor(&["inspect", "--current-unit", "mV", "x.csv"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("mV measures potential, not current"),
        "{}",
        stderr(&out)
    );
    assert_eq!(diffusor(&["frobnicate"]).status.code(), Some(2));
}
