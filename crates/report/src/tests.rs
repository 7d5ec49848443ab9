//! Tests of the whole page on synthetic transients: escaping, the absence of anything that
//! could make a request, the embedded data, and the sections.

use base64::Engine as _;
use diffusor_fit::analysis::{ModelInputs, ModelKind, ModelResult, analyze_model};
use diffusor_fit::cell::{Cell, Geometry, Measured};
use diffusor_fit::models::microdisk::{DiskExpression, microdisk_current_a};
use diffusor_fit::planar::{Background, PlanarOptions};
use diffusor_trace::{ImportOptions, Segment, Trace, import_bytes};

use crate::{MAX_CSV_ROWS, Outcome, ReportInput, RunInput, render, replicates};

/// A small deterministic generator (xorshift64*), so the tests need no random-number crate.
struct Noise(u64);

impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Roughly normal with unit variance: the sum of 12 uniforms minus 6.
    fn normal(&mut self) -> f64 {
        (0..12).map(|_| self.uniform()).sum::<f64>() - 6.0
    }
}

/// A synthetic transient as a CSV file: `pre` samples at rest, then `post` samples after a
/// potential step at t = 0, every `dt` s. Current I = sign·(S/√t + b + charging) + noise, with
/// S = 10 µA·s^½ (D ≈ 7 × 10⁻⁶ cm²/s for A = 0.0707 cm², C = 1 mM, n = 1), b = 20 nA, and a
/// charging term 2 mA·e^(−t/0.2 ms). Times in ms, current in µA, as instruments often write.
fn transient(pre: usize, post: usize, dt: f64, sign: f64, header: &str, preamble: &str) -> String {
    let mut noise = Noise(0x9E37_79B9_7F4A_7C15);
    let mut csv = String::from(preamble);
    csv.push_str(header);
    csv.push('\n');
    for k in 0..pre + post {
        let t = (k as f64 - pre as f64 + 1.0) * dt;
        let (e, i) = if t > 0.0 {
            let faradaic = 1e-5 / t.sqrt() + 2e-8 + 2e-3 * (-t / 2e-4).exp();
            (0.45, sign * faradaic + 5e-9 * noise.normal())
        } else {
            (0.0, 1.5e-9 + 5e-9 * noise.normal())
        };
        csv.push_str(&format!("{},{e},{}\n", t * 1e3, i * 1e6));
    }
    csv
}

fn cell() -> Cell {
    Cell {
        area_m2: Some(Measured::new(7.07e-6, 7e-8)),
        conc_mol_m3: Some(Measured::new(1.0, 0.01)),
        ..Cell::default()
    }
}

struct Run {
    label: String,
    trace: Trace,
    step: Segment,
    result: ModelResult,
}

fn fitted(label: &str, csv: &str, options: &PlanarOptions) -> Run {
    let trace = import_bytes(label, csv.as_bytes(), &ImportOptions::default()).expect("imports");
    let step = trace.steps().next().expect("a step").clone();
    let result = analyze_model(
        &trace,
        &step,
        &cell(),
        options,
        None,
        &ModelInputs::default(),
    )
    .expect("fits");
    Run {
        label: label.to_owned(),
        trace,
        step,
        result,
    }
}

fn inputs(runs: &[Run]) -> Vec<RunInput<'_>> {
    runs.iter()
        .map(|r| RunInput {
            label: &r.label,
            sha256: Some("00ff"),
            outcome: Outcome::Fitted {
                trace: &r.trace,
                segment: &r.step,
                result: &r.result,
            },
        })
        .collect()
}

fn page(runs: &[RunInput<'_>], options: &PlanarOptions) -> String {
    let cell = cell();
    render(&ReportInput {
        version: "0.0.0-test",
        generated_utc: "2026-01-02 03:04:05 UTC",
        cell: &cell,
        options,
        model_inputs: &ModelInputs::default(),
        import_notes: &["current unit given: µA".to_owned()],
        runs,
        results_json: Some("{\"schema\": \"diffusor.fit/1\"}"),
    })
}

const HEADER: &str = "t (ms),E (V),I (µA)";

/// Every attribute value in the page, as written between double quotes (maud quotes them all).
fn attribute_values(html: &str) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let mut rest = html;
    while let Some(pos) = rest.find("=\"") {
        let name: String = rest[..pos]
            .chars()
            .rev()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '-' || *c == ':')
            .collect::<Vec<_>>()
            .into_iter()
            .rev()
            .collect();
        let after = &rest[pos + 2..];
        let end = after.find('"').unwrap_or(after.len());
        out.push((name, after[..end].to_owned()));
        rest = &after[end..];
    }
    out
}

/// The embedded window CSVs, decoded.
fn embedded_csvs(html: &str) -> Vec<String> {
    html.split("href=\"data:text/csv;base64,")
        .skip(1)
        .map(|s| {
            let b64 = &s[..s.find('"').expect("closing quote")];
            String::from_utf8(
                base64::engine::general_purpose::STANDARD
                    .decode(b64)
                    .expect("base64"),
            )
            .expect("utf-8")
        })
        .collect()
}

#[test]
fn hostile_text_appears_only_as_text() {
    let options = PlanarOptions::default();
    let preamble = "# note: <script>alert(2)</script>\n# operator = \"><svg onload=alert(3)>\n";
    let header = "t (ms),E (V),I <b>bold</b> (µA)";
    let name = "<img src=x onerror=alert(1)>.csv";
    let runs = [fitted(
        name,
        &transient(50, 3000, 1e-3, 1.0, header, preamble),
        &options,
    )];
    let mut list = inputs(&runs);
    // A failed run whose message carries markup too.
    list.push(RunInput {
        label: "a&b<i>\".csv",
        sha256: None,
        outcome: Outcome::Failed {
            trace: None,
            error: "bad row <tr onmouseover=alert(4)>: a&b<i>.csv",
        },
    });
    let html = page(&list, &options);
    for bad in [
        "<img",
        "<script",
        "<svg onload",
        "<b>",
        "<i>",
        "<tr onmouseover",
    ] {
        assert!(!html.contains(bad), "{bad} reached the markup unescaped");
    }
    for text in [
        "&lt;img src=x onerror=alert(1)&gt;.csv",
        "&lt;script&gt;alert(2)&lt;/script&gt;",
        // The importer drops the quote that opens a preamble value; the rest is kept as text.
        "&gt;&lt;svg onload=alert(3)&gt;",
        "a&amp;b&lt;i&gt;&quot;.csv",
        "I &lt;b&gt;bold&lt;/b&gt; (µA)",
        "bad row &lt;tr onmouseover=alert(4)&gt;: a&amp;b&lt;i&gt;.csv",
    ] {
        assert!(html.contains(text), "{text} is not shown as text");
    }
    // The download names are reduced to tame characters.
    assert!(html.contains("download=\"img_src_x_onerror_alert_1-window.csv\""));
}

#[test]
fn nothing_in_the_page_can_make_a_request() {
    let options = PlanarOptions::default();
    let runs = [
        fitted(
            "one.csv",
            &transient(50, 3000, 1e-3, 1.0, HEADER, ""),
            &options,
        ),
        fitted(
            "two.csv",
            &transient(50, 4000, 1e-3, 1.0, HEADER, ""),
            &options,
        ),
    ];
    let html = page(&inputs(&runs), &options);
    assert!(html.starts_with("<!DOCTYPE html>"));
    let lower = html.to_lowercase();
    for bad in [
        "http:",
        "https:",
        "ftp:",
        "<script",
        "<link",
        "<iframe",
        "<img",
        "<object",
        "<embed",
        "<base",
        "<form",
        "@import",
        "javascript:",
        "srcset",
    ] {
        assert!(!lower.contains(bad), "the page contains {bad}");
    }
    // Base64 can hold "//", so URLs are checked where URLs live: in attribute values and CSS.
    let attrs = attribute_values(&html);
    assert!(attrs.len() > 100, "only {} attributes found", attrs.len());
    for (name, value) in &attrs {
        assert!(name != "src", "a src attribute: {value}");
        assert!(!name.starts_with("on"), "an event handler {name}");
        assert!(!value.starts_with("//"), "{name}={value} is a network path");
        assert!(!value.contains("://"), "{name}={value} is a URL");
        if name == "href" {
            assert!(
                value.starts_with('#') || value.starts_with("data:"),
                "href={value}"
            );
        }
        if value.contains("url(") {
            assert!(value.starts_with("url(#"), "{name}={value}");
        }
    }
    for (i, _) in lower.match_indices("url(") {
        assert!(
            lower[i..].starts_with("url(#"),
            "a CSS url(): {}",
            &lower[i..i + 20]
        );
    }
    // The policy forbids fetching anything even if a future change let something in.
    assert!(html.contains("default-src &#x27;none&#x27;") || html.contains("default-src 'none'"));
}

#[test]
fn embedded_csv_is_the_window_with_fit_and_residual() {
    let options = PlanarOptions::default();
    let run = fitted(
        "one.csv",
        &transient(50, 3000, 1e-3, 1.0, HEADER, ""),
        &options,
    );
    let html = page(&inputs(std::slice::from_ref(&run)), &options);
    let csvs = embedded_csvs(&html);
    assert_eq!(csvs.len(), 1);
    let mut lines = csvs[0].lines();
    assert_eq!(lines.next(), Some("time_s,current_A,fitted_A,residual_A"));
    let rows: Vec<[f64; 4]> = lines
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|x| x.parse().expect("number")).collect();
            [v[0], v[1], v[2], v[3]]
        })
        .collect();
    let r = &run.result;
    assert_eq!(rows.len(), r.window.points, "every window point");
    assert!(
        rows.iter()
            .all(|w| w[0] >= r.window.lo.time_s && w[0] <= r.window.hi.time_s)
    );
    // The currents are the file's, in A: the rows' times pick out the same samples of the trace.
    for w in rows.iter().step_by(97) {
        let k = run.trace.time_s.partition_point(|&t| t < w[0]);
        assert_eq!(run.trace.time_s[k], w[0]);
        assert_eq!(run.trace.current_a[k], w[1]);
        assert_eq!(w[2], r.predict_a(w[0]));
        assert_eq!(w[3], w[1] - w[2]);
    }
    // The residuals are the fit's: √(Σr²/(n − 2)) with 2 line parameters is the residual SD the
    // fit reports. The fit sums its squares from moments, which agrees with the direct sum to
    // about 10⁻⁸; a missed sign, origin or 1.5 nA baseline would change it by per cent.
    let rss: f64 = rows.iter().map(|w| w[3] * w[3]).sum();
    let sd = (rss / (rows.len() - 2) as f64).sqrt();
    assert!(
        (sd - r.residual_sd).abs() < 1e-6 * sd,
        "{sd} against {}",
        r.residual_sd
    );
    assert!(html.contains("(they agree)"));
    assert!(html.contains("Every point of the window is included."));
}

#[test]
fn long_windows_are_thinned_and_say_so() {
    let options = PlanarOptions::default();
    // 45 000 samples at 0.2 ms: the window holds more than twice the CSV limit.
    let run = fitted(
        "long.csv",
        &transient(20, 45_000, 2e-4, 1.0, HEADER, ""),
        &options,
    );
    assert!(run.result.window.points > 2 * MAX_CSV_ROWS);
    let html = page(&inputs(std::slice::from_ref(&run)), &options);
    let csv = &embedded_csvs(&html)[0];
    let rows = csv.lines().count() - 1;
    let stride = run.result.window.points.div_ceil(MAX_CSV_ROWS);
    assert_eq!(stride, 3);
    assert_eq!(rows, run.result.window.points.div_ceil(stride));
    assert!(rows <= MAX_CSV_ROWS);
    assert!(html.contains(&format!(
        "The window holds {} points; to keep the file small every {stride}th was written.",
        run.result.window.points
    )));
}

#[test]
fn cathodic_runs_with_a_baseline_are_reconstructed_as_fitted() {
    // The report rebuilds the fitted data itself (sign, baseline subtraction, time origin); the
    // residual SD it recomputes must be the fit's.
    let options = PlanarOptions {
        background: Background::Baseline,
        ..PlanarOptions::default()
    };
    let run = fitted(
        "cathodic.csv",
        &transient(200, 4000, 1e-3, -1.0, HEADER, ""),
        &options,
    );
    let data = crate::data::Processed::new(&run.trace, &run.step, &options.background, &run.result);
    let sd = data.residual_sd(run.result.planar().expect("a Cottrell run"));
    let fit_sd = run.result.residual_sd;
    assert!((sd - fit_sd).abs() < 1e-6 * fit_sd, "{sd} against {fit_sd}");
    let html = page(&inputs(std::slice::from_ref(&run)), &options);
    assert!(html.contains("multiplied by −1 for the fit"));
    assert!(html.contains("pre-step baseline mean"));
    assert!(html.contains("(they agree)"));
}

#[test]
fn sections_follow_the_runs() {
    let options = PlanarOptions::default();
    let runs = [
        fitted(
            "a.csv",
            &transient(50, 3000, 1e-3, 1.0, HEADER, ""),
            &options,
        ),
        fitted(
            "b.csv",
            &transient(50, 3500, 1e-3, 1.0, HEADER, ""),
            &options,
        ),
        fitted(
            "c.csv",
            &transient(50, 4000, 1e-3, 1.0, HEADER, ""),
            &options,
        ),
    ];
    let list = inputs(&runs);
    let html = page(&list, &options);
    for needle in [
        "Diffusion coefficient report",
        "2026-01-02 03:04:05 UTC",
        "Diffusor 0.0.0-test",
        "Before you use these numbers",
        "validate the procedure against a standard of known diffusion coefficient",
        "safety data sheets",
        "Replicates",
        "Grubbs",
        "Birge ratio",
        "Uncertainty budget",
        "expanded uncertainty U = k·u_c",
        "Processing log",
        "current unit given: µA",
        "diffusor-results.json",
    ] {
        assert!(
            html.to_lowercase().contains(&needle.to_lowercase()),
            "missing {needle:?}"
        );
    }
    assert_eq!(html.matches("<section class=\"run\"").count(), 3);
    // Six figures per run (transient, Cottrell, residuals, I·√t, two sensitivity curves) and
    // the replicate plot.
    assert_eq!(html.matches("<svg").count(), 3 * 6 + 1);
    // The replicate statistics are those of the runs' D in cm²/s.
    let rep = replicates(&list).expect("three runs");
    let s = rep.summary.expect("statistics");
    let ds: Vec<f64> = runs
        .iter()
        .map(|r| r.result.diffusion_m2_s.expect("D").value * 1e4)
        .collect();
    let mean = ds.iter().sum::<f64>() / 3.0;
    assert!((s.mean - mean).abs() < 1e-12 * mean);
    // A single run has no replicate section.
    let one = page(&list[..1], &options);
    assert!(!one.contains("<h2>Replicates</h2>"));
    assert!(html.contains("<h2>Replicates</h2>"));
}

#[test]
fn replicate_statements_read_as_prose() {
    // Three runs of the same transient with different lengths and one noise stream: their D
    // differ by far more than their tiny standard errors, so p underflows towards zero.
    let options = PlanarOptions::default();
    let runs: Vec<Run> = [3000, 3500, 4000]
        .iter()
        .map(|&n| {
            fitted(
                &format!("{n}.csv"),
                &transient(50, n, 1e-3, 1.0, HEADER, ""),
                &options,
            )
        })
        .collect();
    let html = page(&inputs(&runs), &options);
    assert!(!html.contains('`'), "a backtick in the page");
    assert!(!html.contains("p = 0.00e0"));
    assert!(
        html.contains("p < 0.001") || html.contains("p = 0."),
        "no p-value"
    );
}

#[test]
fn a_disk_run_shows_its_model_and_fitted_curve() {
    // Mahon & Oldham, Anal. Chem. 77 (2005) 6100 (`microdisk_current_a`): r = 5 µm,
    // D = 7e-10 m²/s, C = 1 mol/m³, 1 ms sampling for 5 s, 3 pA of noise.
    let mut noise = Noise(0x1234_5678_9ABC_DEF1);
    let mut csv = String::from("t (s),E (V),I (A)\n");
    for k in 0..5050 {
        let t = (k as f64 - 49.5) * 1e-3;
        let (e, i) = if t > 0.0 {
            let i = microdisk_current_a(1.0, 5e-6, 1.0, 7e-10, t, DiskExpression::MahonOldham);
            (0.45, i + 3e-12 * noise.normal())
        } else {
            (0.0, 3e-12 * noise.normal())
        };
        csv.push_str(&format!("{:.6},{e},{i:e}\n", k as f64 * 1e-3));
    }
    let trace =
        import_bytes("disk.csv", csv.as_bytes(), &ImportOptions::default()).expect("imports");
    let step = trace.steps().next().expect("a step").clone();
    let cell = Cell {
        geometry: Geometry::Microdisk,
        radius_m: Some(Measured::exact(5e-6)),
        ..Cell::default()
    };
    let options = PlanarOptions::default();
    let inputs = ModelInputs::default();
    let result = analyze_model(&trace, &step, &cell, &options, None, &inputs).expect("fits");
    assert_eq!(result.model, ModelKind::Microdisk);
    let runs = [RunInput {
        label: "disk.csv",
        sha256: None,
        outcome: Outcome::Fitted {
            trace: &trace,
            segment: &step,
            result: &result,
        },
    }];
    let html = render(&ReportInput {
        version: "0.0.0-test",
        generated_utc: "2026-01-02 03:04:05 UTC",
        cell: &cell,
        options: &options,
        model_inputs: &inputs,
        import_notes: &[],
        runs: &runs,
        results_json: None,
    });
    for needle in [
        result.equation,
        "P. J. Mahon &amp; K. B. Oldham",
        "microdisk fit over the window",
        "valid for",
        "why this model",
        "Fitted parameters",
        "disk expression",
        "Mahon–Oldham (2005)",
    ] {
        assert!(html.contains(needle), "missing {needle:?}");
    }
    // The planar figures are not drawn for a disk: the transient and the residuals only.
    assert!(!html.contains("Cottrell plot over the window"));
    assert_eq!(html.matches("<svg").count(), 2);
    // The transient holds the fitted curve: the figure's fit line is the model, which the
    // embedded CSV's fitted column reproduces.
    let csv = embedded_csvs(&html);
    assert_eq!(csv.len(), 1);
    let row: Vec<f64> = csv[0]
        .lines()
        .nth(100)
        .expect("a row")
        .split(',')
        .map(|v| v.parse().expect("number"))
        .collect();
    assert!((row[2] / result.predict_a(row[0]) - 1.0).abs() < 1e-12);
}
