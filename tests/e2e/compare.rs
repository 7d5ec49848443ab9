//! `diffusor compare`: the replicate statistics on the demo replicates.

use crate::{diffusor, stderr, stdout};

#[test]
fn replicates_object_and_table() {
    let files = [
        "sample-data/planar-rep1.csv",
        "sample-data/planar-rep2.csv",
        "sample-data/planar-rep3.csv",
    ];
    let mut args = vec![
        "compare",
        "--json",
        "--area",
        "0.0707+-0.0007",
        "--conc",
        "1.00+-0.01",
    ];
    args.extend(files);
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    assert_eq!(doc["schema"], "diffusor.fit/1");
    let rep = &doc["replicates"];
    assert_eq!(rep["quantity"], "D");
    let s = &rep["summary"];
    assert_eq!(s["n"], 3);
    // The mean and SD must be those of the three per-run values the same document reports.
    let values: Vec<f64> = doc["runs"]
        .as_array()
        .expect("runs")
        .iter()
        .map(|r| r["D_cm2_s"]["value"].as_f64().expect("D"))
        .collect();
    let mean = values.iter().sum::<f64>() / 3.0;
    let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / 2.0).sqrt();
    assert!((s["mean"].as_f64().expect("mean") - mean).abs() < 1e-12 * mean);
    assert!((s["sd"].as_f64().expect("sd") - sd).abs() < 1e-9 * sd);
    assert!(s["weighted"]["birge_ratio"].as_f64().is_some());
    assert_eq!(s["grubbs"]["kind"], "tested");
    let text = stdout(&diffusor(&{
        let mut a = vec!["compare", "--area", "0.0707", "--conc", "1"];
        a.extend(files);
        a
    }));
    for needle in [
        "replicates       3 runs",
        "RSD",
        "Birge ratio",
        "Grubbs' test",
    ] {
        assert!(text.contains(needle), "missing {needle:?} in\n{text}");
    }
}
