//! `diffusor fit` on the demo data and on bad input: exit codes, the JSON schema, messages.

use crate::{diffusor, stderr, stdout};

/// The keys `diffusor.fit/1` promises for every run, spelled so.
const RUN_KEYS: [&str; 17] = [
    "file",
    "sha256",
    "ok",
    "error",
    "model",
    "geometry",
    "t0_s",
    "window_s",
    "window_reason",
    "points",
    "D_cm2_s",
    "C_mM",
    "nAC_mol_cm",
    "area_cm2",
    "params",
    "diagnostics",
    "warnings",
];

#[test]
fn json_follows_the_schema_on_the_demo_replicates() {
    let out = diffusor(&[
        "fit",
        "--json",
        "--area",
        "0.0707+-0.0007",
        "--conc",
        "1.00+-0.01",
        "sample-data/planar-rep1.csv",
        "sample-data/planar-rep2.csv",
        "sample-data/planar-rep3.csv",
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    assert_eq!(doc["schema"], "diffusor.fit/1");
    assert_eq!(doc["version"], env!("CARGO_PKG_VERSION"));
    let runs = doc["runs"].as_array().expect("runs");
    assert_eq!(runs.len(), 3);
    for run in runs {
        for key in RUN_KEYS {
            assert!(run.get(key).is_some(), "missing {key} in {run}");
        }
        assert_eq!(run["ok"], true);
        assert!(run["error"].is_null());
        assert_eq!(run["sha256"].as_str().map(str::len), Some(64));
        let d = &run["D_cm2_s"];
        let (v, lo, hi) = (
            d["value"].as_f64().expect("D"),
            d["ci95"][0].as_f64().expect("lo"),
            d["ci95"][1].as_f64().expect("hi"),
        );
        assert!(lo < v && v < hi, "{d}");
        // The demo's scenario (sample-data/README.md) puts D near 7 × 10⁻⁶ cm²/s; this checks the
        // units of the output, not a reference value.
        assert!((6e-6..8e-6).contains(&v), "{v}");
        assert!(run["diagnostics"]["r2"].as_f64().expect("r2") > 0.99);
        assert!(run["diagnostics"]["residual_sd_A"].as_f64().is_some());
        assert!(run["window_reason"]["lo"].is_string() && run["window_reason"]["hi"].is_string());
    }
}

#[test]
fn a_failed_file_is_reported_and_the_others_still_fit() {
    let dir = tempfile::tempdir().expect("tempdir");
    let bad = dir.path().join("garbage.csv");
    std::fs::write(&bad, "no numbers here\nat all\n").expect("write");
    let bad = bad.display().to_string();
    let out = diffusor(&[
        "fit",
        "--json",
        "--area",
        "0.0707",
        "--conc",
        "1",
        "sample-data/planar-rep1.csv",
        &bad,
    ]);
    assert_eq!(out.status.code(), Some(1));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    let runs = doc["runs"].as_array().expect("runs");
    assert_eq!(runs[0]["ok"], true);
    assert_eq!(runs[1]["ok"], false);
    let message = runs[1]["error"].as_str().expect("message");
    assert!(
        message.starts_with("no table of numbers found") && message.ends_with("garbage.csv"),
        "{message}"
    );
    assert!(stderr(&out).contains("1 of 2 files could not be fitted"));
}

#[test]
fn inverse_mode_reports_nac_and_the_area() {
    let out = diffusor(&[
        "fit",
        "--json",
        "--D",
        "7.0e-6",
        "--conc",
        "1mM",
        "sample-data/planar-rep1.csv",
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    let run = &doc["runs"][0];
    assert!(run["D_cm2_s"].is_null());
    assert!(run["nAC_mol_cm"]["value"].as_f64().is_some());
    let area = run["area_cm2"]["value"].as_f64().expect("area");
    // With D given, A follows from the slope: n·A·C = S·√π/(F·√D); the demo electrode is a
    // 3 mm disk, so A must come out near 0.07 cm² if the units are right.
    assert!((0.06..0.08).contains(&area), "{area}");
}

#[test]
fn usage_errors_exit_2_and_say_what_is_wrong() {
    let out = diffusor(&["fit", "--area=-3", "sample-data/planar-rep1.csv"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("--area: \"-3\" must be positive"),
        "{}",
        stderr(&out)
    );
    let out = diffusor(&["fit", "--window", "1..x", "sample-data/planar-rep1.csv"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("--window"), "{}", stderr(&out));
    let out = diffusor(&["fit", "--conc", "2 furlongs", "sample-data/planar-rep1.csv"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("unknown unit"), "{}", stderr(&out));
}

#[test]
fn csv_has_a_row_per_run() {
    let out = diffusor(&[
        "fit",
        "--csv",
        "--area",
        "0.0707",
        "--conc",
        "1",
        "sample-data/planar-rep1.csv",
        "sample-data/planar-rep2.csv",
    ]);
    assert_eq!(out.status.code(), Some(0));
    let text = stdout(&out);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 3);
    assert!(lines[0].starts_with("file,ok,D_cm2_s"));
    assert!(lines[1].starts_with("\"sample-data/planar-rep1.csv\",true,"));
}
