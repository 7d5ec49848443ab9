//! `diffusor report` on the demo data and on a hostile file name; then the pages in headless
//! Chromium: a screenshot, a print to PDF, the DOM after loading, and Chromium's own network log.
//!
//! How "no network requests" is checked: Chromium writes every URL request it starts to a net
//! log (`--log-net-log`), with the request's initiator. Requests the browser makes for itself
//! (component updates and the like, which the flags below do not all silence) carry the
//! initiator "not an origin"; requests a page makes carry the page's origin ("null" for a
//! file). The test counts the page's requests in the report's log and requires none, after
//! checking on a control page with one loopback image that the same count finds exactly that
//! one. `--host-resolver-rules` makes every host name fail to resolve, so nothing leaves the
//! machine whatever any page or the browser tries.

use std::path::{Path, PathBuf};
use std::process::Command;

use base64::Engine as _;
use sha2::{Digest, Sha256};

use crate::{diffusor, repo, stderr, stdout};

const REPLICATES: [&str; 3] = [
    "sample-data/planar-rep1.csv",
    "sample-data/planar-rep2.csv",
    "sample-data/planar-rep3.csv",
];
const HOSTILE: &str = "<img src=x onerror=alert(1)>.csv";
const CHROMIUM: &str = "/usr/bin/chromium";

fn cell_args() -> Vec<&'static str> {
    vec!["--area", "0.0707+-0.0007", "--conc", "1.00+-0.01"]
}

/// Runs `report` on `files` into `out`.
fn report(files: &[&str], out: &Path) -> std::process::Output {
    let out = out.to_str().expect("utf-8 path");
    let mut args = vec!["report"];
    args.extend(cell_args());
    args.extend(["-o", out]);
    args.extend(files);
    diffusor(&args)
}

/// The `data:` payloads of a media type in the page, decoded.
fn embedded(html: &str, media_type: &str) -> Vec<String> {
    let marker = format!("href=\"data:{media_type};base64,");
    html.split(marker.as_str())
        .skip(1)
        .map(|s| {
            let b64 = &s[..s.find('"').expect("closing quote")];
            let bytes = base64::engine::general_purpose::STANDARD
                .decode(b64)
                .expect("base64");
            String::from_utf8(bytes).expect("utf-8")
        })
        .collect()
}

#[test]
fn demo_replicates_give_a_complete_report() {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("report.html");
    let out = report(&REPLICATES, &path);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert!(stdout(&out).starts_with("wrote "), "{}", stdout(&out));
    let html = std::fs::read_to_string(&path).expect("report written");
    for needle in [
        "<h2>Replicates</h2>",
        "Results at a glance",
        "Before you use these numbers",
        "safety data sheets",
        "standard of known diffusion coefficient",
        "Uncertainty budget",
        "Processing log",
        "(they agree)",
        " UTC",
        concat!("Diffusor ", env!("CARGO_PKG_VERSION")),
    ] {
        assert!(html.contains(needle), "missing {needle:?}");
    }
    assert_eq!(html.matches("<section class=\"run\"").count(), 3);
    // Each file's SHA-256, computed here from the file itself.
    for f in REPLICATES {
        let bytes = std::fs::read(repo().join(f)).expect("demo file");
        let sha = format!("{:x}", Sha256::digest(&bytes));
        assert!(html.contains(&sha), "no SHA-256 for {f}");
    }
    // The embedded results are `fit --json`'s numbers, and the embedded CSVs hold every point of
    // each window (the demo windows are below the 20 000-row limit).
    let json = embedded(&html, "application/json");
    assert_eq!(json.len(), 1);
    let doc: serde_json::Value = serde_json::from_str(&json[0]).expect("json");
    assert_eq!(doc["schema"], "diffusor.fit/1");
    assert_eq!(doc["replicates"]["summary"]["n"], 3);
    let mut args = vec!["fit", "--json"];
    args.extend(cell_args());
    args.extend(REPLICATES);
    let fit: serde_json::Value = serde_json::from_str(&stdout(&diffusor(&args))).expect("fit json");
    let csvs = embedded(&html, "text/csv");
    assert_eq!(csvs.len(), 3);
    for k in 0..3 {
        assert_eq!(doc["runs"][k]["D_cm2_s"], fit["runs"][k]["D_cm2_s"]);
        let points = doc["runs"][k]["points"].as_u64().expect("points") as usize;
        assert_eq!(csvs[k].lines().count(), points + 1, "run {k}");
        assert!(csvs[k].starts_with("time_s,current_A,fitted_A,residual_A\n"));
    }
}

/// A temp dir holding a copy of the first demo replicate under the hostile name.
fn hostile_copy() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("temp dir");
    std::fs::copy(repo().join(REPLICATES[0]), dir.path().join(HOSTILE)).expect("copy");
    dir
}

fn hostile_report(dir: &Path) -> (PathBuf, String) {
    let file = dir.join(HOSTILE);
    let path = dir.join("hostile.html");
    let out = report(&[file.to_str().expect("utf-8")], &path);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let html = std::fs::read_to_string(&path).expect("report written");
    (path, html)
}

#[test]
fn a_hostile_file_name_is_only_text() {
    let dir = hostile_copy();
    let (_, html) = hostile_report(dir.path());
    assert!(!html.contains("<img"), "an img element in the page");
    assert!(html.contains("&lt;img src=x onerror=alert(1)&gt;.csv"));
    assert!(!html.contains("<script"));
    assert!(!html.contains("http:") && !html.contains("https:"));
}

#[test]
fn failed_files_are_reported_and_the_exit_code_says_so() {
    let dir = tempfile::tempdir().expect("temp dir");
    let empty = dir.path().join("empty.csv");
    std::fs::write(&empty, "").expect("write");
    let path = dir.path().join("report.html");
    let out = report(&[REPLICATES[0], empty.to_str().expect("utf-8")], &path);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert!(stderr(&out).contains("1 of 2 files could not be analysed"));
    let html = std::fs::read_to_string(&path).expect("report still written");
    assert!(html.contains("Not analysed: "));
    assert!(html.contains("empty.csv"));
    assert_eq!(html.matches("<section class=\"run\"").count(), 2);
}

#[test]
fn usage_errors_exit_2() {
    let mut args = vec!["report"];
    args.extend(cell_args());
    args.push(REPLICATES[0]);
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(2), "no -o: {}", stderr(&out));
    assert!(stderr(&out).contains("--output"), "{}", stderr(&out));
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("r.html");
    let mut args = vec!["report", "--json", "-o", path.to_str().expect("utf-8")];
    args.push(REPLICATES[0]);
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("--json: report writes HTML"),
        "{}",
        stderr(&out)
    );
    assert!(!path.exists());
    let missing = dir.path().join("no-such-dir").join("r.html");
    let mut args = vec!["report", "-o", missing.to_str().expect("utf-8")];
    args.push(REPLICATES[0]);
    let out = diffusor(&args);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("cannot write the report: "),
        "{}",
        stderr(&out)
    );
}

/// Runs headless Chromium on `page` with `extra` arguments and a fresh profile; returns its
/// standard output.
fn chromium(page: &Path, extra: &[String]) -> String {
    let profile = tempfile::tempdir().expect("profile dir");
    let out = Command::new(CHROMIUM)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--hide-scrollbars",
            // Every host name fails to resolve: nothing can leave the machine.
            "--host-resolver-rules=MAP * ~NOTFOUND",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .args(extra)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("run chromium");
    assert!(out.status.success(), "chromium failed: {}", stderr(&out));
    stdout(&out)
}

/// The URLs of the requests a page started, from a Chromium net log: URL_REQUEST_START_JOB
/// events whose initiator is an origin (the browser's own requests have "not an origin").
fn page_requests(net_log: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(net_log).expect("net log");
    let log: serde_json::Value = serde_json::from_str(&text).expect("net log is JSON");
    let start_job = log["constants"]["logEventTypes"]["URL_REQUEST_START_JOB"]
        .as_u64()
        .expect("event type");
    let events = log["events"].as_array().expect("events");
    assert!(!events.is_empty(), "an empty net log proves nothing");
    events
        .iter()
        .filter(|e| e["type"].as_u64() == Some(start_job))
        .filter(|e| e["params"]["initiator"].as_str() != Some("not an origin"))
        .filter_map(|e| e["params"]["url"].as_str().map(str::to_owned))
        .collect()
}

/// Tags in a serialized DOM: in the serialization every `<` in text is `&lt;`, so each `<`
/// followed by a letter starts a real element.
fn elements(dom: &str) -> Vec<&str> {
    dom.match_indices('<')
        .filter(|(i, _)| {
            dom[i + 1..]
                .chars()
                .next()
                .is_some_and(|c| c.is_ascii_alphabetic())
        })
        .map(|(i, _)| &dom[i..i + dom[i..].find('>').unwrap_or(dom.len() - i)])
        .collect()
}

/// The attribute names of a tag (`<name a="…" b>`), skipping quoted values.
fn attribute_names(tag: &str) -> Vec<String> {
    let mut names = Vec::new();
    let mut quote: Option<char> = None;
    let mut current = String::new();
    let mut in_name = false;
    // Skip the element's own name.
    let body = tag.trim_start_matches('<');
    let body = body.find(char::is_whitespace).map_or("", |i| &body[i..]);
    for c in body.chars() {
        match quote {
            Some(q) if c == q => quote = None,
            None if c == '"' || c == '\'' => quote = Some(c),
            None if c.is_whitespace() || c == '=' || c == '/' => {
                if in_name && !current.is_empty() {
                    names.push(std::mem::take(&mut current));
                }
                in_name = c.is_whitespace();
            }
            None if in_name => current.push(c.to_ascii_lowercase()),
            // Inside a quoted value, or an unquoted value after `=`.
            _ => {}
        }
    }
    if in_name && !current.is_empty() {
        names.push(current);
    }
    names
}

#[test]
fn attribute_names_skip_values() {
    assert_eq!(
        attribute_names("<svg class=\"plot\" aria-label=\"I on log axes\" onload=x"),
        ["class", "aria-label", "onload"]
    );
    assert_eq!(
        attribute_names("<img src=x onerror=alert(1)"),
        ["src", "onerror"]
    );
    assert!(attribute_names("<p").is_empty());
}

/// Width and height from a PNG's IHDR chunk.
fn png_size(png: &[u8]) -> (u32, u32) {
    assert!(
        png.len() > 24 && png.starts_with(b"\x89PNG\r\n\x1a\n"),
        "not a PNG"
    );
    assert_eq!(&png[12..16], b"IHDR");
    let be = |b: &[u8]| u32::from_be_bytes([b[0], b[1], b[2], b[3]]);
    (be(&png[16..20]), be(&png[20..24]))
}

/// Pages in a PDF as Chromium writes it (one `/Type /Page` object each, not compressed away).
fn pdf_pages(pdf: &[u8]) -> usize {
    let needle = b"/Type /Page";
    pdf.windows(needle.len() + 1)
        .filter(|w| &w[..needle.len()] == needle && w[needle.len()] != b's')
        .count()
}

#[test]
fn in_a_browser_the_report_fetches_nothing_runs_nothing_and_renders() {
    if !Path::new(CHROMIUM).exists() {
        eprintln!(
            "skipped: {CHROMIUM} is not installed (CI installs it; apt-get install chromium)"
        );
        return;
    }
    let dir = hostile_copy();
    let (hostile, _) = hostile_report(dir.path());
    let demo = dir.path().join("demo.html");
    let out = report(&REPLICATES, &demo);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));

    // The control: a page with one loopback image must show up as exactly one page request.
    let control = dir.path().join("control.html");
    std::fs::write(
        &control,
        "<!DOCTYPE html><p>control</p><img src=\"http://127.0.0.1:9/probe.png\">",
    )
    .expect("write");
    let log = dir.path().join("control-net.json");
    chromium(
        &control,
        &[
            format!("--log-net-log={}", log.display()),
            "--dump-dom".to_owned(),
        ],
    );
    assert_eq!(page_requests(&log), ["http://127.0.0.1:9/probe.png"]);

    // The reports: no request, and the DOM after loading holds the name as text only.
    for page in [&hostile, &demo] {
        let log = dir.path().join("net.json");
        let dom = chromium(
            page,
            &[
                format!("--log-net-log={}", log.display()),
                "--dump-dom".to_owned(),
            ],
        );
        assert_eq!(
            page_requests(&log),
            Vec::<String>::new(),
            "{}",
            page.display()
        );
        assert!(
            dom.contains("Diffusion coefficient report"),
            "DOM not dumped"
        );
        for tag in elements(&dom) {
            let lower = tag.to_lowercase();
            assert!(
                !["<img", "<script", "<iframe", "<object", "<embed", "<link"]
                    .iter()
                    .any(|t| lower.starts_with(t)),
                "element {tag}"
            );
            assert!(
                !attribute_names(tag).iter().any(|a| a.starts_with("on")),
                "event handler in {tag}"
            );
        }
    }
    let dom = chromium(&hostile, &["--dump-dom".to_owned()]);
    assert!(dom.contains("&lt;img src=x onerror=alert(1)&gt;.csv"));

    // A screenshot: the requested size, and far more picture than a blank page of that size.
    let blank = dir.path().join("blank.html");
    std::fs::write(&blank, "<!DOCTYPE html><title>blank</title>").expect("write");
    let shot = |page: &Path, name: &str| -> Vec<u8> {
        let png = dir.path().join(name);
        chromium(
            page,
            &[
                format!("--screenshot={}", png.display()),
                "--window-size=1280,2400".to_owned(),
            ],
        );
        std::fs::read(&png).expect("screenshot written")
    };
    let empty = shot(&blank, "blank.png");
    let picture = shot(&demo, "demo.png");
    assert_eq!(png_size(&picture), (1280, 2400));
    assert!(
        picture.len() > 20 * empty.len(),
        "{} bytes against {} for a blank page",
        picture.len(),
        empty.len()
    );
    if let Ok(keep) = std::env::var("DIFFUSOR_REPORT_SCREENSHOT") {
        std::fs::write(keep, &picture).expect("keep the screenshot");
    }

    // Printed: the title pages, then each of the three runs from a new page.
    let pdf = dir.path().join("demo.pdf");
    chromium(
        &demo,
        &[
            format!("--print-to-pdf={}", pdf.display()),
            "--no-pdf-header-footer".to_owned(),
        ],
    );
    let pages = pdf_pages(&std::fs::read(&pdf).expect("pdf written"));
    assert!(pages >= 4, "{pages} pages");
}

#[test]
fn a_charging_fit_reports_its_own_onset_and_units() {
    // Cottrell plus charging fits its onset; the page must say so (not "the importer's") and
    // give Ru and Cdl with their units.
    let dir = tempfile::tempdir().expect("temp dir");
    let out = dir.path().join("charging.html");
    let path = out.to_str().expect("utf-8 path");
    let mut args = vec!["report", "--model", "cottrell-charging"];
    args.extend(cell_args());
    args.extend(["-o", path, REPLICATES[0]]);
    let run = diffusor(&args);
    assert_eq!(run.status.code(), Some(0), "{}", stderr(&run));
    let html = std::fs::read_to_string(&out).expect("written");
    assert!(html.contains("fitted with the model: t0 = −"), "onset row");
    assert!(!html.contains("t0 is refined only by"), "the old onset row");
    for unit in [" Ω ± ", " µF ± "] {
        assert!(html.contains(unit), "{unit}");
    }
}
