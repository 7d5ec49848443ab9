//! `--model` on `fit`, `compare` and `report`: the microdisk demo file through the disk model,
//! the double-step demo file through the double-step model, and a model missing its input.
//!
//! The demo files are synthetic (sample-data/README.md): the microdisk file was made with the
//! Shoup–Szabo expression for r = 5.00 µm, C = 1.000 mM and D = 7.00 × 10⁻⁶ cm²/s, with a
//! −4 pA background at the step; the double-step file with D_app = 6.9602 × 10⁻⁶ cm²/s for the
//! nominal A and C and the stable-product ratio 1 − 1/√2 = 0.2929 (Schwarz & Shain 1965).

use crate::{diffusor, stderr, stdout};

const MICRODISK: &str = "sample-data/microdisk-r5um.csv";

fn disk_args(form: &'static str) -> Vec<&'static str> {
    vec![
        "fit",
        "--json",
        "--model",
        "microdisk",
        "--disk-form",
        form,
        "--geometry",
        "microdisk",
        "--radius",
        "5um",
        MICRODISK,
    ]
}

#[test]
fn the_microdisk_demo_through_the_disk_model() {
    let out = diffusor(&disk_args("shoup-szabo"));
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    assert_eq!(doc["schema"], "diffusor.fit/1");
    let run = &doc["runs"][0];
    assert_eq!(run["ok"], true, "{run}");
    assert_eq!(run["model"], "microdisk_shoup_szabo");
    assert_eq!(run["model_option"], "microdisk");
    assert!(
        run["equation"]
            .as_str()
            .expect("equation")
            .contains("τ = 4Dt/r²")
    );
    assert!(run["source"].as_str().expect("source").contains("Shoup"));
    let d = run["D_cm2_s"]["value"].as_f64().expect("D");
    // The file's D is 7.00e-6 cm²/s; its −4 pA background on a current of 1.35–4.7 nA is not
    // modelled, so 2 % is allowed (a tolerance of this test, not a published figure).
    assert!((d / 7.0e-6 - 1.0).abs() < 0.02, "D = {d}");
    let c = run["C_mM"]["value"].as_f64().expect("C");
    assert!((c - 1.0).abs() < 0.03, "C = {c}");
    assert_eq!(run["C_mM"]["entered"], false);
    for key in ["D", "nC", "C"] {
        assert!(
            run["params"][key]["ci95"].is_array(),
            "{key}: {}",
            run["params"]
        );
    }
    assert!(run["diagnostics"]["r2"].as_f64().expect("r2") > 0.99);

    // The default on a microdisk is the disk model, with the Mahon–Oldham expression. The file
    // was made with Shoup–Szabo, which differs from Mahon–Oldham by up to 0.67 % in the current
    // (tests of the fit crate); in D that became 3.4 % here (measured), so 5 % is allowed.
    let args: Vec<&str> = vec![
        "fit",
        "--json",
        "--geometry",
        "microdisk",
        "--radius",
        "5um",
        MICRODISK,
    ];
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    let run = &doc["runs"][0];
    assert_eq!(run["model"], "microdisk_mahon_oldham");
    assert_eq!(run["model_choice"]["by_default"], true);
    let d_mo = run["D_cm2_s"]["value"].as_f64().expect("D");
    assert!((d_mo / d - 1.0).abs() < 0.05, "{d_mo} against {d}");
}

#[test]
fn the_table_and_csv_show_the_model() {
    let out = diffusor(&["fit", "--model", "microdisk", "--radius", "5um", MICRODISK]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let text = stdout(&out);
    assert!(
        text.contains("model      microdisk (microdisk_mahon_oldham)"),
        "{text}"
    );
    assert!(text.contains("Mahon"), "{text}");
    let out = diffusor(&[
        "fit",
        "--csv",
        "--model",
        "microdisk",
        "--radius",
        "5um",
        MICRODISK,
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let text = stdout(&out);
    let lines: Vec<&str> = text.lines().collect();
    assert!(lines[0].ends_with(",error,model,C_mM"), "{}", lines[0]);
    assert!(lines[1].contains(",microdisk,"), "{}", lines[1]);
}

#[test]
fn a_model_missing_its_input_fails_that_file_and_says_what_is_missing() {
    let out = diffusor(&[
        "fit",
        "--model",
        "slab",
        "--area",
        "0.0707",
        "sample-data/planar-rep1.csv",
    ]);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert!(
        stdout(&out).contains(
            "error      the slab model needs the film thickness L: sample-data/planar-rep1.csv"
        ),
        "{}",
        stdout(&out)
    );
    assert!(
        stderr(&out).contains("1 of 1 file could not be fitted"),
        "{}",
        stderr(&out)
    );
    // The kinetic model needs the back reaction; JSON carries the message.
    let out = diffusor(&[
        "fit",
        "--json",
        "--model",
        "kinetic",
        "--area",
        "0.0707",
        "--conc",
        "1",
        "sample-data/planar-rep1.csv",
    ]);
    assert_eq!(out.status.code(), Some(1));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    assert_eq!(doc["runs"][0]["ok"], false);
    assert_eq!(
        doc["runs"][0]["error"],
        "the kinetic model needs the back reaction at the stepped potential (irreversible, or kb/kf): sample-data/planar-rep1.csv"
    );
    // A flag value that makes no sense is a usage error.
    let out = diffusor(&[
        "fit",
        "--model",
        "slab",
        "--film",
        "thick",
        "sample-data/planar-rep1.csv",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("--film"), "{}", stderr(&out));
}

#[test]
fn the_double_step_demo_through_the_double_step_model() {
    let out = diffusor(&[
        "fit",
        "--json",
        "--model",
        "double-step",
        "--area",
        "0.0707",
        "--conc",
        "1",
        "sample-data/double-step.csv",
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
    let run = &doc["runs"][0];
    let ratio = run["params"]["ratio"]["value"].as_f64().expect("ratio");
    // 1 − 1/√2 (Schwarz & Shain 1965); the file's backgrounds and charging move it a little,
    // so 2 % is allowed (a tolerance of this test).
    assert!((ratio / 0.292_893 - 1.0).abs() < 0.02, "ratio {ratio}");
    let d = run["D_cm2_s"]["value"].as_f64().expect("D");
    // sample-data/README.md: D_app = 6.9602e-6 cm²/s for the nominal A and C.
    assert!((d / 6.9602e-6 - 1.0).abs() < 0.02, "D {d}");
}

#[test]
fn compare_and_report_take_the_model() {
    let out = diffusor(&[
        "compare",
        "--model",
        "microdisk",
        "--radius",
        "5um",
        MICRODISK,
        MICRODISK,
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert!(
        stdout(&out).contains("replicates       2 runs"),
        "{}",
        stdout(&out)
    );

    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("disk.html");
    let out = diffusor(&[
        "report",
        "--model",
        "microdisk",
        "--radius",
        "5um",
        "--csv",
        "-o",
        path.to_str().expect("utf-8"),
        MICRODISK,
    ]);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let html = std::fs::read_to_string(&path).expect("report");
    for needle in [
        "Mahon",
        "Anal. Chem. 77 (2005) 6100",
        "microdisk fit over the window",
        "valid for",
        "inside that range",
        "Fitted parameters",
    ] {
        assert!(html.contains(needle), "missing {needle:?}");
    }
    assert!(!html.contains("Cottrell plot over the window"));
    let csv = std::fs::read_to_string(dir.path().join("disk.csv")).expect("csv beside it");
    assert!(csv.starts_with("file,ok,D_cm2_s"), "{csv}");
    assert_eq!(csv.lines().count(), 2);
}

#[test]
fn the_planar_demo_through_cottrell_plus_charging() {
    // Every point from the first sample on, the charging decay fitted with the Cottrell
    // current (Cottrell 1903; RC charging as in Bard & Faulkner 2001) and the onset free. The
    // generator's values (sample-data/README.md): D_app for the nominal A and C, Ru·Cdl and
    // Ru, with a step of 0.450 V whose instant lies half a sample before the importer's onset.
    // With the onset held at the importer's, this model gave D 29 % low on replicate 1
    // (measured before the onset was fitted).
    for (file, d_app, ru_cdl, ru) in [
        ("sample-data/planar-rep1.csv", 7.0105e-6, 232e-6, 148.0),
        ("sample-data/planar-rep2.csv", 7.1204e-6, 280e-6, 162.0),
        ("sample-data/planar-rep3.csv", 6.8636e-6, 205e-6, 139.0),
    ] {
        let out = diffusor(&[
            "fit",
            "--json",
            "--model",
            "cottrell-charging",
            "--area",
            "0.0707",
            "--conc",
            "1.00",
            file,
        ]);
        assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
        let doc: serde_json::Value = serde_json::from_str(&stdout(&out)).expect("json");
        let run = &doc["runs"][0];
        assert_eq!(run["ok"], true, "{run}");
        let d = run["D_cm2_s"]["value"].as_f64().expect("D");
        // 0.1 %: the noise of these files gives a standard error of about 0.01 % in D
        // (a tolerance of this test).
        assert!((d / d_app - 1.0).abs() < 1e-3, "{file}: D = {d}");
        let tau = run["params"]["τ"]["value"].as_f64().expect("τ");
        assert!((tau / ru_cdl - 1.0).abs() < 0.05, "{file}: τ = {tau}");
        let ci = &run["params"]["Ru"]["ci95"];
        let (lo, hi) = (ci[0].as_f64().expect("lo"), ci[1].as_f64().expect("hi"));
        assert!(lo < ru && ru < hi, "{file}: Ru interval [{lo}, {hi}]");
        let t0 = run["params"]["t0"]["value"].as_f64().expect("t0");
        assert!((t0 + 0.5e-3).abs() < 0.05e-3, "{file}: t0 = {t0}");
        assert!(run["diagnostics"]["r2"].as_f64().expect("r2") > 0.9999);
    }
}
