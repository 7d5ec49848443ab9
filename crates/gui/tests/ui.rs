//! The window driven headless through egui_kittest: what a user sees and does, queried by the
//! accessibility tree, with the fits done by the real engine on the real background thread.

use std::path::PathBuf;
use std::sync::Arc;
use std::time::{Duration, Instant};

use diffusor_fit::planar::{PlanarOptions, analyze};
use diffusor_fit::replicates::{GrubbsOutcome, RunEstimate, summarize};
use diffusor_gui::files_window::Notice;
use diffusor_gui::format::{sci, sci_interval};
use diffusor_gui::runs::{Import, Run};
use diffusor_gui::{DiffusorApp, Prefs, ThemeChoice, View};
use eframe::egui::accesskit::Role;
use eframe::egui::{self, Key, Modifiers};
use egui_kittest::kittest::Queryable;
use egui_kittest::{Harness, SnapshotOptions};

/// A file dropped onto the window: a path that does not exist on disk, so the bytes are read
/// through the handle, as for a file dropped from a browser or an archive.
#[derive(Debug)]
struct FakeFile {
    path: PathBuf,
    bytes: Vec<u8>,
}

impl egui::DroppedFile for FakeFile {
    fn path(&self) -> &std::path::Path {
        &self.path
    }
    fn bytes(&self) -> Result<Vec<u8>, String> {
        Ok(self.bytes.clone())
    }
}

fn harness(app: DiffusorApp) -> Harness<'static, DiffusorApp> {
    Harness::builder()
        .with_size(egui::vec2(1280.0, 800.0))
        .with_theme(egui::Theme::Light)
        .build_ui_state(|ui, app: &mut DiffusorApp| app.ui(ui), app)
}

/// Steps frames until the background worker has answered everything, then lets the layout
/// settle (which also runs kittest's check that every input has an accessible name).
fn settle(h: &mut Harness<'_, DiffusorApp>) {
    let start = Instant::now();
    loop {
        h.step();
        if !h.state().is_busy() {
            break;
        }
        assert!(
            start.elapsed() < Duration::from_secs(180),
            "the worker did not finish"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
    h.run();
}

fn run_named<'a>(h: &'a Harness<'_, DiffusorApp>, name: &str) -> &'a Run {
    h.state()
        .runs()
        .iter()
        .find(|r| r.name == name)
        .unwrap_or_else(|| panic!("no run {name}"))
}

fn d_cm2_s(run: &Run) -> f64 {
    run.fit_view()
        .and_then(|f| f.result.diffusion_m2_s)
        .expect("a fitted D")
        .value
        * 1e4
}

/// Replaces the text of the field labelled `label` and presses Enter, as a user would.
fn retype(h: &mut Harness<'_, DiffusorApp>, label: &str, text: &str) {
    h.get_by_label(label).focus();
    h.step();
    h.key_press_modifiers(Modifiers::COMMAND, Key::A);
    h.step();
    h.get_by_label(label).type_text(text);
    h.step();
    h.key_press(Key::Enter);
    h.step();
}

const REP1: &[u8] = include_bytes!("../../../sample-data/planar-rep1.csv");
const REP3: &[u8] = include_bytes!("../../../sample-data/planar-rep3.csv");

/// The demo's first replicate read by the importer, its step and the demo cell: what the
/// window fits, for calling the engine directly.
fn rep1_for_the_engine() -> (
    diffusor_trace::Trace,
    diffusor_trace::Segment,
    diffusor_fit::cell::Cell,
) {
    let trace =
        diffusor_trace::import_bytes("planar-rep1.csv", REP1, &Default::default()).expect("import");
    let step = trace.steps().next().expect("a step").clone();
    let cell = diffusor_gui::cell_form::CellForm::demo()
        .cell()
        .expect("demo cell");
    (trace, step, cell)
}

#[test]
fn the_demo_is_fitted_on_first_start_and_shows_d() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let runs = h.state().runs();
    assert_eq!(runs.len(), diffusor_gui::demo::FILES.len());
    assert!(
        runs.iter().all(|r| r.fit_view().is_some()),
        "every demo run is fitted"
    );

    // The engine, called directly on the same bytes with the demo's cell and default options,
    // gives the number the window shows.
    let (trace, step, cell) = rep1_for_the_engine();
    let direct = analyze(&trace, &step, &cell, &PlanarOptions::default()).expect("fit");
    let direct_d = direct.diffusion_m2_s.expect("D").value * 1e4;
    let rep1 = run_named(&h, "planar-rep1.csv (demo)");
    assert_eq!(d_cm2_s(rep1), direct_d);
    // sample-data/README.md, "True values": D_app = 7.0105 × 10⁻⁶ cm²/s for planar-rep1 with
    // the nominal A and C; the fit's own uncertainty is far below 0.1 %.
    assert!((direct_d / 7.0105e-6 - 1.0).abs() < 1e-3, "D = {direct_d}");

    // The Result panel shows it, with its interval, and the demo is said to be synthetic.
    let ci = direct.diffusion_m2_s.expect("D").ci95;
    h.get_by_label(&format!("D = {} cm²/s", sci(direct_d, 4)));
    h.get_by_label(&format!(
        "95 % interval {} cm²/s",
        sci_interval(ci[0] * 1e4, ci[1] * 1e4, 4)
    ));
    assert!(
        h.query_all_by_label_contains("synthetic").count() >= 1,
        "the demo says it is synthetic"
    );
}

#[test]
fn a_dropped_file_is_imported_and_fitted() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    h.input_mut().dropped_files.push(Arc::new(FakeFile {
        path: PathBuf::from("/no/such/dir/dropped-rep3.csv"),
        bytes: REP3.to_vec(),
    }));
    settle(&mut h);
    let run = run_named(&h, "dropped-rep3.csv");
    assert_eq!(
        h.state().focused().map(|r| r.id),
        Some(run.id),
        "the new run is in focus"
    );
    // sample-data/README.md: D_app = 6.8636 × 10⁻⁶ cm²/s for planar-rep3 (nominal A and C).
    let d = d_cm2_s(run);
    assert!((d / 6.8636e-6 - 1.0).abs() < 1e-3, "D = {d}");
    h.get_by_role_and_label(Role::Button, "dropped-rep3.csv");
    h.get_by_label(&format!("D = {} cm²/s", sci(d, 4)));
}

#[test]
fn changing_n_changes_d_by_one_over_n_squared() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    // Fix the window first: the automatic end depends on D through the edge-diffusion rule,
    // and the ratio below holds for the same slope.
    retype(&mut h, "Start (s)", "0.01");
    settle(&mut h);
    retype(&mut h, "End (s)", "5");
    settle(&mut h);
    let before = d_cm2_s(run_named(&h, "planar-rep1.csv (demo)"));
    let s_before = slope(run_named(&h, "planar-rep1.csv (demo)"));

    retype(&mut h, "n (electrons)", "2");
    settle(&mut h);
    let rep1 = run_named(&h, "planar-rep1.csv (demo)");
    let after = d_cm2_s(rep1);
    assert_eq!(
        slope(rep1),
        s_before,
        "the same window gives the same slope"
    );
    // D = π·(S/(n·F·A·C))² (Cottrell, Z. Phys. Chem. 42 (1903) 385): n = 2 divides D by 4.
    assert!((after / before - 0.25).abs() < 1e-12, "{after} / {before}");
    h.get_by_label(&format!("D = {} cm²/s", sci(after, 4)));
    // Every run was refitted, not only the one in focus.
    for r in h.state().runs() {
        assert!(r.fit.latest_generation >= 2, "{} refitted", r.name);
    }
}

fn slope(run: &Run) -> f64 {
    run.fit_view()
        .and_then(|f| f.result.params.iter().find(|p| p.symbol == "S"))
        .expect("slope")
        .estimate
        .value
}

#[test]
fn typing_a_window_bound_refits_and_the_automatic_window_comes_back() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let name = "planar-rep1.csv (demo)";
    let auto = run_named(&h, name).fit_view().expect("fit").clone();
    assert!(auto.result.window.lo.automatic);

    retype(&mut h, "Start (s)", "0.5");
    settle(&mut h);
    let typed = run_named(&h, name).fit_view().expect("fit").clone();
    let w = &typed.result.window;
    assert_eq!(w.lo.time_s, 0.5);
    assert!(!w.lo.automatic && w.hi.automatic);
    assert!(w.points < auto.result.window.points, "fewer points");
    assert_ne!(
        typed.result.diffusion_m2_s.map(|d| d.value),
        auto.result.diffusion_m2_s.map(|d| d.value),
        "a new D"
    );
    h.get_by_label_contains("(set by you)");

    h.get_by_label("Automatic window").click();
    settle(&mut h);
    let back = run_named(&h, name).fit_view().expect("fit").clone();
    // The engine is deterministic: the same inputs give the same numbers.
    assert_eq!(back.result.window, auto.result.window);
    assert_eq!(back.result.diffusion_m2_s, auto.result.diffusion_m2_s);
}

#[test]
fn dragging_the_window_start_on_the_transient_refits() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let name = "planar-rep1.csv (demo)";
    let before = run_named(&h, name).fit_view().expect("fit").clone();
    let lo = before.result.window.lo.time_s;
    let grab = h
        .state()
        .plots()
        .transient_point(lo)
        .expect("transient drawn");
    let to = grab + egui::vec2(40.0, 0.0);
    let target = h
        .state()
        .plots()
        .transient_time_at(to.x)
        .expect("transient drawn");
    // Press on the line, move right in steps, let go: the plot must not pan meanwhile.
    h.hover_at(grab);
    h.step();
    h.drag_at(grab);
    h.step();
    for dx in [10.0, 20.0, 30.0, 40.0] {
        h.hover_at(grab + egui::vec2(dx, 0.0));
        h.step();
    }
    h.drop_at(to);
    h.step();
    settle(&mut h);
    let after = run_named(&h, name).fit_view().expect("fit").clone();
    let w = &after.result.window;
    assert!(!w.lo.automatic, "the start is now the user's");
    assert!(w.hi.automatic, "the end stays automatic");
    // The bound lands where the pointer was let go (the view did not move under it).
    assert!(
        (w.lo.time_s / target - 1.0).abs() < 1e-9,
        "{} vs {target}",
        w.lo.time_s
    );
    assert!(w.lo.time_s > lo && w.points < before.result.window.points);
    h.get_by_label(&format!(
        "Window starts at {} (set by you)",
        diffusor_gui::format::time(w.lo.time_s)
    ));
}

#[test]
fn an_impossible_entry_is_flagged_where_it_is_typed_and_the_results_are_marked() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let before = d_cm2_s(run_named(&h, "planar-rep1.csv (demo)"));
    retype(&mut h, "Area A", "-1");
    settle(&mut h);
    // Cell::validate's message, quoting the number as typed, under the field.
    h.get_by_label("the area must be positive, not -1");
    h.get_by_label_contains("The cell entries have a problem");
    // Nothing was refitted with the impossible cell; the last good result stays.
    assert_eq!(d_cm2_s(run_named(&h, "planar-rep1.csv (demo)")), before);
}

#[test]
fn a_known_d_gives_the_electroactive_area() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    h.get_by_label("use it (inverse mode: find n·A·C)").click();
    h.run();
    // sample-data/README.md: with the nominal A and C the fit returns D_app = 7.0105 × 10⁻⁶
    // cm²/s for planar-rep1; taking that D as known must give back the nominal 0.0707 cm².
    retype(&mut h, "D", "7.0105e-6");
    settle(&mut h);
    let r = &run_named(&h, "planar-rep1.csv (demo)")
        .fit_view()
        .expect("fit")
        .result;
    assert_eq!(r.mode, "inverse");
    let area_cm2 = r.area_m2.expect("area").value * 1e4;
    assert!((area_cm2 / 0.0707 - 1.0).abs() < 1e-3, "A = {area_cm2}");
    h.get_by_label(&format!("A (electroactive) = {} cm²", sci(area_cm2, 4)));
}

#[test]
fn shortcuts_switch_views_and_restore_the_automatic_window() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    h.key_press_modifiers(Modifiers::COMMAND, Key::Num2);
    h.run();
    assert_eq!(h.state().view(), View::Replicates);
    h.key_press_modifiers(Modifiers::COMMAND, Key::Num1);
    h.run();
    assert_eq!(h.state().view(), View::Fit);

    let name = "planar-rep1.csv (demo)";
    retype(&mut h, "Start (s)", "0.5");
    settle(&mut h);
    assert!(
        !run_named(&h, name)
            .fit_view()
            .expect("fit")
            .result
            .window
            .lo
            .automatic
    );
    h.key_press_modifiers(Modifiers::COMMAND | Modifiers::SHIFT, Key::R);
    settle(&mut h);
    assert!(
        run_named(&h, name)
            .fit_view()
            .expect("fit")
            .result
            .window
            .lo
            .automatic
    );

    let theme = h.ctx.theme();
    h.key_press_modifiers(Modifiers::COMMAND, Key::T);
    h.run();
    assert_ne!(h.ctx.theme(), theme, "Ctrl+T switches the theme");

    h.key_press(Key::F1);
    h.run();
    h.get_by_label("Help & notes");
}

#[test]
fn a_broken_file_shows_its_error_beside_the_run() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let mut text = String::from("time (s),current (uA)\n");
    for t in [
        0.0, 0.001, 0.002, 0.0015, 0.003, 0.004, 0.005, 0.006, 0.007, 0.008, 0.009,
    ] {
        text.push_str(&format!("{t},{}\n", 10.0 + t));
    }
    h.input_mut().dropped_files.push(Arc::new(FakeFile {
        path: PathBuf::from("broken.csv"),
        bytes: text.into_bytes(),
    }));
    settle(&mut h);
    // The importer's message (crates/trace, TimeNotIncreasing), shown in the list beside the
    // run and in the Result panel.
    // The importer's message (crates/trace, TimeBackwards), then what to do in the window.
    let message = "line 5: time goes backwards (0.0015 s after 0.002 s); a trace must be in time order: broken.csv\nThe file may hold several records one after the other: save each in a file of its own and open them one by one.";
    assert_eq!(run_named(&h, "broken.csv").error(), Some(message));
    assert!(
        !run_named(&h, "broken.csv").selected,
        "an unreadable file is left out of the overlays and the comparison"
    );
    let (what, todo) = message.split_once('\n').expect("an error, then advice");
    h.get_by_label(&format!("cannot read: {what}"));
    h.get_by_label(&format!("The file could not be read: {what}"));
    h.get_by_label("What to do");
    h.get_by_label(todo);
    // The other runs are untouched.
    assert!(d_cm2_s(run_named(&h, "planar-rep1.csv (demo)")) > 0.0);
}

#[test]
fn the_replicate_view_summarises_the_ticked_runs() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    h.get_by_label("Replicates").click();
    h.run();
    assert_eq!(h.state().view(), View::Replicates);
    h.get_by_label("Replicate comparison");
    // The demo ticks the three replicates, not the convection run: the summary is theirs, as
    // replicates::summarize gives it for their D values and standard errors.
    let ticked: Vec<&Run> = h.state().runs().iter().filter(|r| r.selected).collect();
    let names: Vec<&str> = ticked.iter().map(|r| r.name.as_str()).collect();
    assert_eq!(
        names,
        [
            "planar-rep1.csv (demo)",
            "planar-rep2.csv (demo)",
            "planar-rep3.csv (demo)"
        ]
    );
    let estimates: Vec<RunEstimate> = ticked
        .iter()
        .map(|r| {
            let d = r
                .fit_view()
                .and_then(|f| f.result.diffusion_m2_s)
                .expect("D");
            // In cm²/s, the unit the view passes on (so its sentences quote the table's numbers).
            RunEstimate {
                label: r.name.clone(),
                value: d.value * 1e4,
                std_error: d.std_error * 1e4,
            }
        })
        .collect();
    let summary = summarize(&estimates).expect("three runs");
    // sample-data/README.md: across the three replicates D_app has a mean of 6.998 × 10⁻⁶
    // cm²/s and a spread of about ±1.8 %.
    assert!((summary.mean / 6.998e-6 - 1.0).abs() < 1e-3);
    h.get_by_label(&format!("{} cm²/s", sci(summary.mean, 4)));
    let birge = summary.weighted.as_ref().expect("weighted").birge_ratio;
    h.get_by_label("Birge ratio");
    h.get_by_label(&format!("{birge:.2}"));
    match &summary.grubbs {
        GrubbsOutcome::Tested(g) => {
            h.get_by_label(&g.statement);
        }
        GrubbsOutcome::NotApplicable { reason } => {
            h.get_by_label(reason);
        }
    }
}

fn themed(theme: ThemeChoice) -> DiffusorApp {
    DiffusorApp::demo().with_prefs(Prefs {
        theme,
        ..Prefs::default()
    })
}

/// Two runs of the same snapshot once differed in 6 anti-aliased pixels along the dashed fit
/// line (the fitted numbers were bit-identical; how many frames pass before the worker answers
/// varies with the machine's load, the likely cause). A change of layout or content moves
/// thousands, so a hundred are let through.
fn snapshot_options() -> SnapshotOptions {
    SnapshotOptions::new().max_failed_pixels(100)
}

#[test]
fn snapshot_of_the_demo_fit_view() {
    let mut h = harness(themed(ThemeChoice::Light));
    settle(&mut h);
    h.snapshot_options("demo_fit_view", &snapshot_options());
}

#[test]
fn snapshot_of_the_replicate_view() {
    let mut h = harness(themed(ThemeChoice::Dark));
    settle(&mut h);
    h.get_by_label("Replicates").click();
    h.run();
    h.snapshot_options("demo_replicates", &snapshot_options());
}

/// Opens the Save & export window, picks `kind` and saves to `path` through the typed-path
/// field, as a user without a desktop portal (no save dialog) would.
fn save_through_the_window(h: &mut Harness<'_, DiffusorApp>, kind: &str, path: &std::path::Path) {
    if !h.state().files_window().open {
        h.get_by_label("Save & export…").click();
        h.run();
    }
    h.get_by_label(kind).click();
    h.run();
    retype(h, "Save to", &path.display().to_string());
    h.get_by_role_and_label(Role::Button, "Save").click();
    // The report and the CSV are written on a thread of their own: wait for it.
    settle(h);
}

fn open_session_through_the_window(h: &mut Harness<'_, DiffusorApp>, path: &std::path::Path) {
    if !h.state().files_window().open {
        h.get_by_label("Save & export…").click();
        h.run();
    }
    retype(h, "Session file", &path.display().to_string());
}

fn notice(h: &Harness<'_, DiffusorApp>) -> String {
    match &h.state().files_window().notice {
        Some(Notice::Done(t) | Notice::Failed(t)) => t.clone(),
        None => panic!("no notice"),
    }
}

#[test]
fn the_report_is_written_from_the_window_with_the_d_it_shows() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("demo-report.html");
    save_through_the_window(&mut h, "Report (HTML, every run)", &path);
    assert!(
        matches!(h.state().files_window().notice, Some(Notice::Done(_))),
        "{}",
        notice(&h)
    );
    let html = std::fs::read_to_string(&path).expect("the report exists");
    assert!(html.starts_with("<!DOCTYPE html>"), "an HTML page");
    // The Result panel shows D = m × 10ᵉ cm²/s; the report quotes the same mantissa.
    let d = d_cm2_s(run_named(&h, "planar-rep1.csv (demo)"));
    let shown = sci(d, 4);
    h.get_by_label(&format!("D = {shown} cm²/s"));
    let mantissa = shown.split(" ×").next().expect("a mantissa");
    assert!(html.contains(mantissa), "the report has {mantissa}");
    assert!(html.contains("planar-rep1.csv (demo)"));
}

#[test]
fn the_data_csv_holds_the_fit_and_residuals_and_a_bad_path_gives_a_message() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("rep1");
    save_through_the_window(&mut h, "Data of the run in focus (CSV)", &path);
    // No extension typed: .csv is added.
    let text = std::fs::read_to_string(dir.path().join("rep1.csv")).expect("the CSV exists");
    let header = text
        .lines()
        .find(|l| !l.starts_with('#'))
        .expect("a header");
    assert_eq!(
        header,
        "time_s,current_A,fitted_current_A,residual_A,in_window"
    );
    let run = run_named(&h, "planar-rep1.csv (demo)");
    let data = run.data().expect("data");
    let fit = run.fit_view().expect("fit");
    let rows: Vec<Vec<&str>> = text
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    assert_eq!(rows.len(), data.time_s.len());
    // Every row is the sample, the model at its time and their difference, bit for bit.
    let k = rows.len() / 2;
    let num = |s: &str| s.parse::<f64>().expect("a number");
    assert_eq!(num(rows[k][0]), data.time_s[k]);
    assert_eq!(num(rows[k][1]), data.current_a[k]);
    assert_eq!(num(rows[k][2]), fit.result.predict_a(data.time_s[k]));
    assert_eq!(num(rows[k][3]), fit.residual_a[k]);
    let inside = rows.iter().filter(|r| r[4] == "1").count();
    assert_eq!(
        inside, fit.result.window.points,
        "the window flag marks the fitted points"
    );

    // A folder that does not exist: a message, no panic, and the window says where.
    let bad = dir.path().join("no-such-folder").join("x.csv");
    save_through_the_window(&mut h, "Data of the run in focus (CSV)", &bad);
    let n = notice(&h);
    assert!(n.starts_with("no such folder: "), "{n}");
    h.get_by_label(&n);
}

#[test]
fn a_saved_session_reopens_the_same_inputs_windows_and_results() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    retype(&mut h, "Start (s)", "0.01");
    settle(&mut h);
    retype(&mut h, "n (electrons)", "2");
    settle(&mut h);
    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("review.json");
    save_through_the_window(
        &mut h,
        "Session (runs, cell entries, windows; to reopen later)",
        &path,
    );
    let text = std::fs::read_to_string(&path).expect("saved");
    assert!(text.contains("\"schema\": \"diffusor.session/1\""));
    let before: Vec<(String, f64, bool)> = h
        .state()
        .runs()
        .iter()
        .map(|r| (r.name.clone(), d_cm2_s(r), r.selected))
        .collect();

    // A fresh window with something else open, then the session.
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    h.query_all_by_label("×")
        .next()
        .expect("a remove button")
        .click();
    settle(&mut h);
    assert_eq!(h.state().runs().len(), diffusor_gui::demo::FILES.len() - 1);
    open_session_through_the_window(&mut h, &path);
    settle(&mut h);
    assert_eq!(h.state().cell_panel().form.n, "2");
    let rep1 = run_named(&h, "planar-rep1.csv (demo)");
    assert_eq!(rep1.lo.choice, diffusor_fit::window::BoundChoice::At(0.01));
    assert!(!rep1.fit_view().expect("fit").result.window.lo.automatic);
    let after: Vec<(String, f64, bool)> = h
        .state()
        .runs()
        .iter()
        .map(|r| (r.name.clone(), d_cm2_s(r), r.selected))
        .collect();
    // Same files, same entries, same windows: the same numbers, bit for bit.
    assert_eq!(after, before);
    assert!(h.state().runs().iter().all(|r| r.notice.is_none()));
}

/// Picks `model` in the Result panel's model list, as a user would.
fn choose_model(h: &mut Harness<'_, DiffusorApp>, model: &str) {
    h.get_by_role_and_label(Role::ComboBox, "Model").click();
    h.run();
    h.get_by_label(model).click();
    // The refit starts at once: the spinner keeps the window repainting until it is done.
    h.step();
}

#[test]
fn a_run_takes_another_model_and_a_session_keeps_it() {
    use diffusor_fit::analysis::ModelKind;
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let name = "planar-rep1.csv (demo)";
    let planar = run_named(&h, name).fit_view().expect("fit").clone();
    assert_eq!(planar.result.model, ModelKind::Cottrell);
    assert!(planar.result.choice.by_default);

    choose_model(&mut h, "Planar + charging decay, every point");
    settle(&mut h);
    let run = run_named(&h, name);
    assert_eq!(run.model.kind, Some(ModelKind::CottrellCharging));
    let fit = run.fit_view().expect("refitted").clone();
    assert_eq!(fit.result.model, ModelKind::CottrellCharging);
    assert!(!fit.result.choice.by_default);
    // This model starts at the first sample after the step (it fits the charging decay).
    assert!(fit.result.window.points > planar.result.window.points);
    // The window shows what the engine gives for the same bytes, cell and model.
    let (trace, step, cell) = rep1_for_the_engine();
    let direct = diffusor_fit::analysis::analyze_model(
        &trace,
        &step,
        &cell,
        &PlanarOptions::default(),
        Some(ModelKind::CottrellCharging),
        &Default::default(),
    )
    .expect("fit");
    assert_eq!(fit.result.diffusion_m2_s, direct.diffusion_m2_s);
    let d = fit.result.diffusion_m2_s.expect("D").value * 1e4;
    h.get_by_label(&format!("D = {} cm²/s", sci(d, 4)));
    // The other runs keep their own model.
    let rep2 = run_named(&h, "planar-rep2.csv (demo)");
    assert_eq!(rep2.model.kind, None);
    assert_eq!(
        rep2.fit_view().expect("fit").result.model,
        ModelKind::Cottrell
    );
    // The model's equation and source are shown with it.
    h.get_by_label_contains("Equation and validity");

    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("models.json");
    save_through_the_window(
        &mut h,
        "Session (runs, cell entries, windows; to reopen later)",
        &path,
    );
    let text = std::fs::read_to_string(&path).expect("saved");
    assert!(text.contains("\"model\": \"cottrell-charging\""), "{text}");
    assert!(text.contains("\"model\": \"geometry-default\""), "{text}");

    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    open_session_through_the_window(&mut h, &path);
    settle(&mut h);
    let back = run_named(&h, name);
    assert_eq!(back.model.kind, Some(ModelKind::CottrellCharging));
    let again = back.fit_view().expect("fit").result.diffusion_m2_s;
    assert_eq!(
        again, fit.result.diffusion_m2_s,
        "the same numbers, bit for bit"
    );

    // Named on the command line (`diffusor gui models.json`), the session opens the same way.
    let mut h = harness(DiffusorApp::new(std::slice::from_ref(&path)));
    settle(&mut h);
    let back = run_named(&h, name);
    assert_eq!(back.model.kind, Some(ModelKind::CottrellCharging));
    assert_eq!(
        back.fit_view().expect("fit").result.diffusion_m2_s,
        fit.result.diffusion_m2_s
    );
    assert_eq!(
        h.state().runs().len(),
        diffusor_gui::demo::FILES.len(),
        "the session's runs, not a run named models.json"
    );
}

#[test]
fn corrupt_foreign_and_newer_sessions_are_refused_and_change_nothing() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    retype(&mut h, "n (electrons)", "3");
    settle(&mut h);
    let dir = tempfile::tempdir().expect("a temporary folder");
    let good = dir.path().join("good.json");
    save_through_the_window(
        &mut h,
        "Session (runs, cell entries, windows; to reopen later)",
        &good,
    );
    let saved = std::fs::read_to_string(&good).expect("saved");
    retype(&mut h, "n (electrons)", "1");
    settle(&mut h);
    let state = |h: &Harness<'_, DiffusorApp>| {
        (
            h.state().cell_panel().form.clone(),
            h.state()
                .runs()
                .iter()
                .map(|r| (r.id, r.name.clone(), r.lo.choice, d_cm2_s(r)))
                .collect::<Vec<_>>(),
        )
    };
    let before = state(&h);
    let cases = [
        (
            "corrupt.json",
            saved[..saved.len() / 2].to_owned(),
            "not a session file: it is not valid JSON",
        ),
        (
            "foreign.json",
            "{\"schema\": \"diffusor.fit/1\", \"version\": \"0.1.0\", \"runs\": []}".to_owned(),
            "not a Diffusor session file (its schema is “diffusor.fit/1”",
        ),
        (
            "newer.json",
            saved.replace("diffusor.session/1", "diffusor.session/2"),
            "this session was saved by a newer Diffusor (diffusor.session/2",
        ),
    ];
    for (name, text, start) in cases {
        let p = dir.path().join(name);
        std::fs::write(&p, text).expect("written");
        open_session_through_the_window(&mut h, &p);
        settle(&mut h);
        let n = notice(&h);
        assert!(n.starts_with(start), "{name}: {n}");
        assert!(n.ends_with(". Nothing was changed."), "{n}");
        h.get_by_label(&n);
        assert_eq!(state(&h), before, "{name} changed the window");
    }
}

#[test]
fn a_file_changed_since_the_session_loads_with_a_warning() {
    let dir = tempfile::tempdir().expect("a temporary folder");
    let data = dir.path().join("rep1.csv");
    std::fs::write(&data, REP1).expect("written");
    let mut h = harness(DiffusorApp::new(std::slice::from_ref(&data)));
    settle(&mut h);
    let session = dir.path().join("s.json");
    save_through_the_window(
        &mut h,
        "Session (runs, cell entries, windows; to reopen later)",
        &session,
    );
    // The same data with one more comment line: other bytes, another SHA-256.
    let mut changed = REP1.to_vec();
    changed.extend_from_slice(b"\n");
    std::fs::write(&data, changed).expect("rewritten");
    open_session_through_the_window(&mut h, &session);
    settle(&mut h);
    let run = run_named(&h, "rep1.csv");
    let warning = run.notice.clone().expect("a warning");
    assert!(
        warning.starts_with("this file has changed since the session was saved (SHA-256 now "),
        "{warning}"
    );
    assert!(run.fit_view().is_some(), "it still loads and fits");
    h.get_by_label(&format!("▲ {warning}"));
}

#[test]
fn cancelling_a_big_import_leaves_the_window_usable() {
    let dir = tempfile::tempdir().expect("a temporary folder");
    // A million rows: long enough to read that the cancel comes first or during the read.
    let big = dir.path().join("big.csv");
    let mut text = String::from("time (s),current (A)\n");
    for k in 1..=1_000_000_u32 {
        let t = f64::from(k) * 1e-5;
        text.push_str(&format!("{t:e},{:e}\n", 1e-5 / t.sqrt()));
    }
    std::fs::write(&big, text).expect("written");
    let mut h = harness(DiffusorApp::new(std::slice::from_ref(&big)));
    h.step();
    assert!(h.state().is_busy());
    let Import::Loading(progress) = &run_named(&h, "big.csv").import else {
        panic!("big.csv is not being read")
    };
    let progress = Arc::clone(progress);
    h.get_by_role_and_label(Role::Button, "Cancel").click();
    h.step();
    assert!(!h.state().is_busy(), "nothing is left running");
    // The cancel reaches the worker's read and the importer, which stop at their next block.
    assert!(progress.is_cancelled());
    let cancelled = run_named(&h, "big.csv").error().map(str::to_owned);
    assert!(
        cancelled
            .as_deref()
            .is_some_and(|e| e.starts_with("reading was cancelled")),
        "{cancelled:?}"
    );

    // The window still reads and fits: the worker answers after the cancelled read, so by the
    // time this file is fitted the late answer for big.csv has come and been dropped.
    let rep1 = dir.path().join("rep1.csv");
    std::fs::write(&rep1, REP1).expect("written");
    retype(&mut h, "Path", &rep1.display().to_string());
    settle(&mut h);
    // This window started without the demo, so its cell is empty and the fit gives the slope.
    let run = run_named(&h, "rep1.csv");
    assert!(run.fit_view().is_some(), "{:?}", run.error());
    assert_eq!(run_named(&h, "big.csv").error(), cancelled.as_deref());
}

#[test]
fn shortcuts_step_through_runs_and_open_the_export_window() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let ids: Vec<_> = h.state().runs().iter().map(|r| r.id).collect();
    assert_eq!(h.state().focused().map(|r| r.id), Some(ids[0]));
    h.key_press_modifiers(Modifiers::ALT, Key::ArrowDown);
    h.run();
    assert_eq!(h.state().focused().map(|r| r.id), Some(ids[1]));
    h.key_press_modifiers(Modifiers::ALT, Key::ArrowUp);
    h.key_press_modifiers(Modifiers::ALT, Key::ArrowUp);
    h.run();
    assert_eq!(
        h.state().focused().map(|r| r.id),
        ids.last().copied(),
        "previous from the first wraps to the last"
    );
    h.key_press_modifiers(Modifiers::COMMAND, Key::E);
    h.run();
    assert!(h.state().files_window().open);
    h.get_by_label("Save to");
    // Ctrl+S with no session file yet asks where, with the session chosen.
    h.key_press_modifiers(Modifiers::COMMAND, Key::S);
    h.run();
    assert_eq!(
        h.state().files_window().kind,
        diffusor_gui::files_window::SaveKind::Session
    );
}

#[test]
fn cancelled_fits_are_not_redone_behind_the_users_back() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let generations = |h: &Harness<'_, DiffusorApp>| {
        h.state()
            .runs()
            .iter()
            .map(|r| r.fit.latest_generation)
            .collect::<Vec<_>>()
    };
    let before = generations(&h);
    // Ctrl+R queues a fit of every run; the cancel comes before any answer is looked at.
    h.key_press_modifiers(Modifiers::COMMAND, Key::R);
    h.step();
    assert!(h.state().is_busy());
    h.state_mut().cancel_work();
    for _ in 0..30 {
        h.step();
        std::thread::sleep(Duration::from_millis(10));
    }
    assert!(!h.state().is_busy(), "nothing was queued again");
    // Answers to the cancelled requests, if the worker got to them, were dropped.
    assert_eq!(generations(&h), before);
    let rep1 = run_named(&h, "planar-rep1.csv (demo)");
    assert!(
        rep1.fit.outdated && rep1.fit_view().is_some(),
        "the old result stays, marked"
    );
    let mark = "▲ fit cancelled: this result is from before the last change (Refit updates it)";
    assert_eq!(
        h.query_all_by_label(mark).count(),
        h.state().runs().len(),
        "every run says so"
    );
}

#[test]
fn columns_named_in_the_window_read_a_file_the_importer_could_not() {
    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("swapped.txt");
    // Headers swapped against the data (a hand-edited export): the column called "time" holds
    // the current, decreasing, so the importer refuses the file as out of time order.
    let mut text = String::from("current;time\n");
    for k in -200..5000_i32 {
        let t = f64::from(k) * 1e-3;
        let i = if k <= 0 { 0.0 } else { 1e-5 / t.sqrt() };
        text.push_str(&format!("{t:.4};{i:.6e}\n").replace('.', ","));
    }
    std::fs::write(&path, text).expect("written");
    let mut h = harness(DiffusorApp::new(std::slice::from_ref(&path)));
    settle(&mut h);
    let e = run_named(&h, "swapped.txt")
        .error()
        .expect("unreadable")
        .to_owned();
    assert!(!e.contains("--"), "no command-line flag in the window: {e}");
    retype(&mut h, "Time column", "1");
    retype(&mut h, "Current column", "2");
    h.get_by_label("Read again").click();
    settle(&mut h);
    let run = run_named(&h, "swapped.txt");
    assert!(run.fit_view().is_some(), "{:?}", run.error());
    // The session records the columns, so the file reopens the same way.
    let (session, _) = h.state().session();
    assert_eq!(session.runs[0].time_column, "1");
    assert_eq!(session.runs[0].current_column, "2");
}

#[test]
fn the_results_json_is_the_fit_document_with_the_numbers_shown() {
    let mut h = harness(DiffusorApp::demo());
    settle(&mut h);
    let dir = tempfile::tempdir().expect("a temporary folder");
    let path = dir.path().join("results.json");
    save_through_the_window(&mut h, "Results (JSON, diffusor.fit/1, every run)", &path);
    let text = std::fs::read_to_string(&path).expect("the JSON exists");
    let doc: serde_json::Value = serde_json::from_str(&text).expect("valid JSON");
    assert_eq!(doc["schema"], "diffusor.fit/1");
    let runs = doc["runs"].as_array().expect("runs");
    assert_eq!(runs.len(), h.state().runs().len());
    let rep1 = run_named(&h, "planar-rep1.csv (demo)");
    let first = &runs[0];
    assert_eq!(first["file"], "planar-rep1.csv (demo)");
    assert_eq!(
        first["sha256"].as_str(),
        rep1.data().and_then(|d| d.sha256.as_deref())
    );
    // The document's D is the window's, in cm²/s (up to the last digit of the decimal text).
    let d = first["D_cm2_s"]["value"].as_f64().expect("D");
    assert!((d / d_cm2_s(rep1) - 1.0).abs() < 1e-14, "{d}");
    // The replicate comparison of the report comes with it.
    assert!(doc["replicates"].is_object());
}

#[test]
fn a_disk_fit_keeps_the_result_panel_beside_the_plots() {
    // The disk model's parameters once made the Result panel grow to its widest, and the plots
    // then ran over it. A session of the microdisk demo file, opened from the command line.
    let dir = tempfile::tempdir().expect("a temporary folder");
    std::fs::write(
        dir.path().join("disk.csv"),
        include_bytes!("../../../sample-data/microdisk-r5um.csv"),
    )
    .expect("written");
    let q = |v: &str, u: &str| {
        format!(
            r#"{{"value": "{v}", "unit": "{u}", "uncertainty": "1", "uncertainty_mode": "percent"}}"#
        )
    };
    let session = format!(
        r#"{{"schema": "diffusor.session/1", "program_version": "0", "focus": 0,
  "cell": {{"n": "1", "geometry": "microdisk", "size_kind": "radius", "area": {},
    "length": {}, "conc": {}, "inverse": false, "known_d": {}, "temperature": "25",
    "temperature_unit": "°C"}},
  "choices": {{"intercept": true, "refine_onset": true}},
  "runs": [{{"source": {{"kind": "file", "path": "disk.csv"}}, "sha256": null,
    "selected": true, "window_lo_s": null, "window_hi_s": null, "model": "microdisk"}}]}}"#,
        q("", "cm²"),
        q("5.00", "µm"),
        q("1.000", "mM"),
        q("", "cm²/s"),
    );
    let path = dir.path().join("disk.json");
    std::fs::write(&path, session).expect("written");
    let mut h = harness(DiffusorApp::new(std::slice::from_ref(&path)));
    settle(&mut h);
    let run = run_named(&h, "disk.csv");
    assert!(
        run.fit_view()
            .is_some_and(|f| f.result.model == diffusor_fit::analysis::ModelKind::Microdisk),
        "{:?}",
        run.error()
    );
    h.get_by_label_contains("Parameters");
    let result = h.get_by_label("Result").rect();
    let cottrell = h.get_by_label("Cottrell plot").rect();
    assert!(
        result.min.x > cottrell.max.x,
        "the Result panel at {result:?}, the Cottrell plot's title at {cottrell:?}"
    );
    // The panel keeps about its default width (330 points), far from its 520-point limit.
    assert!(1280.0 - result.min.x < 400.0, "{result:?}");
}
