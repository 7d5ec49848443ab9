//! The page itself. Every string that reaches the markup goes through maud's `(…)` splice, which
//! escapes it; the only unescaped insertions are the stylesheet (a constant of this crate) and
//! the SVG this crate draws (itself built with maud).

use diffusor_fit::analysis::{ModelInputs, ModelKind, ModelResult};
use diffusor_fit::cell::{Cell, Geometry, Measured};
use diffusor_fit::models::kinetics::BackReaction;
use diffusor_fit::models::microdisk::DiskExpression;
use diffusor_fit::planar::{Background, PlanarOptions, PlanarResult};
use diffusor_fit::replicates::{GrubbsOutcome, ReplicateSummary};
use diffusor_fit::window::BoundChoice;
use diffusor_trace::{ColumnInfo, DecimalMark, OnsetMethod, Polarity, Provenance, Trace};
use maud::{DOCTYPE, Markup, PreEscaped, html};

use crate::data::{Processed, data_url, safe_file_name, window_csv};
use crate::figures;
use crate::fmt::{percent, quantity, quantity_interval, quantity_with_se, sci, si};
use crate::{Outcome, Replicates, ReportInput, RunInput, replicates};

const STYLE: &str = include_str!("style.css");

/// What every report says about its own limits, near the top and again at the end.
const CAUTION: &str = "These results depend on the electrode area, the concentration, the number of electrons n and any known diffusion coefficient entered below, and on the fitting window. Validate the procedure against a standard of known diffusion coefficient before relying on it. Make measurements according to your laboratory's rules and the safety data sheets of the reagents you use.";

/// The page's content security policy: nothing may be fetched or run, styles are inline, and
/// `data:` is allowed only for the embedded downloads. It is a second line of defence; the page
/// is built to need none of what it forbids.
const CSP: &str = "default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; form-action 'none'";

pub(crate) fn document(input: &ReportInput<'_>) -> Markup {
    let rep = replicates(input.runs);
    let fitted = input
        .runs
        .iter()
        .filter(|r| matches!(r.outcome, Outcome::Fitted { .. }))
        .count();
    html! {
        (DOCTYPE)
        html lang="en" {
            head {
                meta charset="utf-8";
                meta http-equiv="Content-Security-Policy" content=(CSP);
                meta name="viewport" content="width=device-width, initial-scale=1";
                meta name="generator" content={ "Diffusor " (input.version) };
                title { "Diffusion coefficient report — " (run_list_title(input.runs)) }
                style { (PreEscaped(STYLE)) }
            }
            body {
                header.masthead {
                    p.kicker { "Diffusor " (input.version) " · potential-step chronoamperometry" }
                    h1 { "Diffusion coefficient report" }
                    p.lede { (what_was_done(input, fitted)) }
                    dl.facts {
                        dt { "Made" } dd { (input.generated_utc) }
                        dt { "Program" } dd { "Diffusor " (input.version) }
                        dt { "Runs" } dd {
                            (input.runs.len()) " file" (plural(input.runs.len()))
                            @if fitted < input.runs.len() {
                                ", " (input.runs.len() - fitted) " could not be analysed"
                            }
                        }
                        @if let Some(json) = input.results_json {
                            dt { "Results as data" }
                            dd {
                                a.download download="diffusor-results.json" href=(data_url("application/json", json)) {
                                    "diffusor-results.json"
                                }
                                "; schema diffusor.fit/1"
                            }
                        }
                    }
                }
                aside.caution role="note" {
                    h2 { "Before you use these numbers" }
                    p { (CAUTION) }
                    p { "The 95 % intervals of the fitted values cover the fit alone; the expanded uncertainty U (k = 2) adds the entered uncertainties of the area and concentration (or of the known D) through the uncertainty budget." }
                }
                (overview(input.runs))
                (inputs_section(input))
                @if let Some(rep) = &rep {
                    (replicate_section(rep, input.runs))
                }
                @for (k, run) in input.runs.iter().enumerate() {
                    (run_section(k + 1, run, input.options))
                }
                footer {
                    p { "Made by Diffusor " (input.version) " on " (input.generated_utc) ". " (CAUTION) }
                }
            }
        }
    }
}

fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

fn run_list_title(runs: &[RunInput<'_>]) -> String {
    match runs {
        [] => "no runs".to_owned(),
        [one] => base_name(one.label).to_owned(),
        [first, ..] => format!("{} and {} more", base_name(first.label), runs.len() - 1),
    }
}

fn base_name(label: &str) -> &str {
    label.rsplit(['/', '\\']).next().unwrap_or(label)
}

/// The models the fitted runs used, in order of first use.
fn models_used(runs: &[RunInput<'_>]) -> Vec<&'static str> {
    let mut out: Vec<&'static str> = Vec::new();
    for r in runs {
        if let Outcome::Fitted { result, .. } = r.outcome
            && !out.contains(&result.model.name())
        {
            out.push(result.model.name());
        }
    }
    out
}

fn what_was_done(input: &ReportInput<'_>, fitted: usize) -> String {
    let models = models_used(input.runs);
    let planar_only = models.iter().all(|m| *m == ModelKind::Cottrell.name());
    let inverse = input.cell.known_d_m2_s.is_some() && planar_only;
    let target = if inverse {
        "n·A·C (and, with a concentration, the electroactive area) from the entered diffusion coefficient"
    } else {
        "the diffusion coefficient D from the slope, the entered area, concentration and n"
    };
    let how = if planar_only {
        format!(
            "analysed as planar semi-infinite diffusion: the current was fitted with the Cottrell equation over a window chosen to leave out double-layer charging and late departures such as natural convection, and {target} was derived with its uncertainty"
        )
    } else {
        format!(
            "fitted with the {} model{} (equation, source and range of validity in each run's section) over a window chosen to leave out double-layer charging, and the diffusion coefficient D was derived with its uncertainty",
            models.join(", "),
            plural(models.len())
        )
    };
    format!(
        "The first potential step of each of {} file{} was {how}. {} of {} run{} gave a result.",
        input.runs.len(),
        plural(input.runs.len()),
        fitted,
        input.runs.len(),
        plural(input.runs.len()),
    )
}

/// The headline quantity of a result with its display unit: (name, estimate, SI unit).
fn headline(
    r: &ModelResult,
) -> Option<(&'static str, diffusor_fit::planar::Estimate, &'static str)> {
    headline_of(r.diffusion_m2_s, r.area_m2, r.nac_mol_m)
}

/// [`headline`] of the planar analysis.
fn planar_headline(
    r: &PlanarResult,
) -> Option<(&'static str, diffusor_fit::planar::Estimate, &'static str)> {
    headline_of(r.diffusion_m2_s, r.area_m2, r.nac_mol_m)
}

fn headline_of(
    d: Option<diffusor_fit::planar::Estimate>,
    area: Option<diffusor_fit::planar::Estimate>,
    nac: Option<diffusor_fit::planar::Estimate>,
) -> Option<(&'static str, diffusor_fit::planar::Estimate, &'static str)> {
    if let Some(d) = d {
        return Some(("D", d, "m²/s"));
    }
    if let Some(a) = area {
        return Some(("A", a, "m²"));
    }
    nac.map(|e| ("n·A·C", e, "mol/m"))
}

fn expanded(r: &ModelResult) -> Option<String> {
    r.planar()?
        .budget
        .as_ref()
        .map(|b| quantity(b.expanded_uncertainty, b.unit, 2))
}

fn overview(runs: &[RunInput<'_>]) -> Markup {
    html! {
        section.overview {
            h2 { "Results at a glance" }
            table.grid {
                thead { tr {
                    th { "#" } th { "file" } th { "result ± standard error (fit)" }
                    th { "95 % interval (fit)" } th { "U (k = 2), with inputs" } th { "window" } th.num { "warnings" }
                } }
                tbody {
                    @for (k, run) in runs.iter().enumerate() {
                        tr {
                            td { a href={ "#run-" (k + 1) } { (k + 1) } }
                            td.file { (base_name(run.label)) }
                            @match run.outcome {
                                Outcome::Fitted { result, .. } => {
                                    @if let Some((name, e, unit)) = headline(result) {
                                        td { (name) " = " (quantity_with_se(e.value, e.std_error, unit)) }
                                        td { (quantity_interval(e.ci95[0], e.ci95[1], e.value, e.std_error, unit)) }
                                        td { (expanded(result).unwrap_or_else(|| "—".to_owned())) }
                                    } @else {
                                        td colspan="3" { "slope only: enter the area and concentration for D" }
                                    }
                                    td { (si(result.window.lo.time_s, "s", 3)) " – " (si(result.window.hi.time_s, "s", 3)) }
                                    td.num { (result.warnings.len()) }
                                },
                                Outcome::Failed { error, .. } => {
                                    td.failed colspan="5" { "not analysed: " (error) }
                                },
                            }
                        }
                    }
                }
            }
        }
    }
}

fn measured_row(name: &str, m: Option<Measured>, si_unit: &str, note: &str) -> Markup {
    html! {
        tr {
            th scope="row" { (name) }
            @match m {
                Some(m) => {
                    td { (quantity(m.value, si_unit, 4)) }
                    td { @if m.u > 0.0 { (quantity(m.u, si_unit, 2)) } @else { "0 (taken as exact)" } }
                    td { @if m.u > 0.0 { (percent(100.0 * m.relative())) } @else { "—" } }
                },
                None => {
                    td.muted colspan="3" { "not entered" }
                },
            }
            td.muted { (note) }
        }
    }
}

/// The geometry in words; `planar_fit` says every run was fitted with the planar Cottrell
/// analysis, which a non-planar electrode should hear about.
fn geometry_text(g: Geometry, planar_fit: bool) -> &'static str {
    match (g, planar_fit) {
        (Geometry::Planar, _) => {
            "planar (a macro electrode; edge diffusion checked against the radius)"
        }
        (Geometry::Microdisk, true) => "microdisk (fitted here with the planar model)",
        (Geometry::Sphere, true) => "sphere (fitted here with the planar model)",
        (Geometry::Hemisphere, true) => "hemisphere (fitted here with the planar model)",
        (Geometry::Microdisk, false) => "microdisk",
        (Geometry::Sphere, false) => "sphere",
        (Geometry::Hemisphere, false) => "hemisphere",
    }
}

fn bound_rule(choice: BoundChoice, lower: bool, o: &PlanarOptions) -> String {
    let w = &o.window;
    match choice {
        BoundChoice::At(t) => format!("set by the user at {}", si(t, "s", 4)),
        BoundChoice::Auto if lower => {
            let mut s = format!(
                "automatic: {} × the charging time constant τ = Ru·Cdl, and no earlier than where the fitted charging current falls below {} % of the faradaic current or below a tenth of the noise of the current; when τ cannot be resolved, after the leading points whose current exceeds the Cottrell line significantly",
                w.k_tau,
                w.charging_fraction * 100.0
            );
            if let (Some(ru), Some(cdl)) = (w.ru_ohm, w.cdl_f) {
                s.push_str(&format!(
                    "; τ from the entered Ru = {} and Cdl = {}",
                    si(ru, "Ω", 3),
                    si(cdl, "F", 3)
                ));
            }
            if let Some(rise) = w.rise_time_s {
                s.push_str(&format!(
                    "; no earlier than {} × the instrument rise time {}",
                    w.k_tau,
                    si(rise, "s", 3)
                ));
            }
            s
        }
        BoundChoice::Auto => format!(
            "automatic: before I·√t leaves its plateau (log-time bins, 10 per decade; the first of two bins in a row more than {} standard errors from the plateau fitted to the bins before them), and before the edge share √(πDt)/r of a disk reaches {} %",
            w.departure_z,
            w.edge_share_limit * 100.0
        ),
    }
}

/// The models' extra inputs that the fitted runs used, in words.
fn model_input_rows(m: &ModelInputs, runs: &[RunInput<'_>]) -> Vec<(&'static str, String)> {
    let used = models_used(runs);
    let uses = |k: ModelKind| used.contains(&k.name());
    let mut rows = Vec::new();
    if uses(ModelKind::Microdisk) {
        rows.push((
            "disk expression",
            match m.disk_expression {
                DiskExpression::MahonOldham => "Mahon–Oldham (2005)".to_owned(),
                DiskExpression::ShoupSzabo => "Shoup–Szabo (1982)".to_owned(),
            },
        ));
    }
    if uses(ModelKind::Slab)
        && let Some(l) = m.thickness_m
    {
        rows.push(("film thickness L", si(l, "m", 4)));
    }
    if uses(ModelKind::Kinetic) {
        rows.push((
            "back reaction",
            match m.back_reaction {
                Some(BackReaction::Irreversible) | None => {
                    "none (irreversible at this potential)".to_owned()
                }
                Some(BackReaction::QuasiReversible {
                    kb_over_kf,
                    dr_over_do,
                }) => format!("kb/kf = {kb_over_kf}, D_R/D_O = {dr_over_do}"),
            },
        ));
    }
    if uses(ModelKind::CottrellCharging) {
        rows.push((
            "step height ΔE",
            m.step_v
                .map_or("from the file's potential column".to_owned(), |v| {
                    si(v, "V", 4)
                }),
        ));
    }
    if (uses(ModelKind::Anson) || uses(ModelKind::DoubleStep))
        && let Some(q) = m.double_layer_charge_c
    {
        rows.push((
            "double-layer charge Q_dl",
            format!("{} ± {}", si(q.value, "C", 4), si(q.u, "C", 2)),
        ));
    }
    rows
}

fn background_rule(b: &Background) -> String {
    match b {
        Background::None => "none subtracted".to_owned(),
        Background::Baseline => "the mean of the pre-step baseline subtracted".to_owned(),
        Background::Constant { current_a } => {
            format!("a constant {} subtracted", si(*current_a, "A", 4))
        }
        Background::Blank { time_s, .. } => {
            format!("a blank trace of {} samples subtracted", time_s.len())
        }
    }
}

fn inputs_section(input: &ReportInput<'_>) -> Markup {
    let c: &Cell = input.cell;
    let o = input.options;
    let area_note = if c.area_m2.is_none() && c.radius_m.is_some() {
        "from the radius"
    } else {
        "electroactive area used by the fit"
    };
    html! {
        section.inputs {
            h2 { "Inputs and rules" }
            div.two {
                div {
                    h3 { "What was entered" }
                    table.grid {
                        thead { tr { th { "input" } th { "value" } th { "standard uncertainty" } th { "relative" } th { "note" } } }
                        tbody {
                            tr {
                                th scope="row" { "electrons per molecule, n" }
                                td { (c.n) } td { "exact" } td { "—" } td.muted { "" }
                            }
                            tr {
                                th scope="row" { "geometry" }
                                td colspan="4" { (geometry_text(c.geometry, models_used(input.runs).iter().all(|m| *m == ModelKind::Cottrell.name()))) }
                            }
                            (measured_row("area, A", c.effective_area_m2(), "m²", area_note))
                            @if c.radius_m.is_some() {
                                (measured_row("radius, r", c.radius_m, "m", "as entered"))
                            }
                            (measured_row("concentration, C", c.conc_mol_m3, "mol/m³", "bulk"))
                            @if c.known_d_m2_s.is_some() {
                                (measured_row("known diffusion coefficient, D", c.known_d_m2_s, "m²/s", "switches to n·A·C"))
                            }
                            @if let Some(t) = c.temperature_k {
                                tr { th scope="row" { "temperature" } td { (format!("{t:.2} K")) } td colspan="3" { "for the record only" } }
                            }
                        }
                    }
                }
                div {
                    h3 { "Model and window rules" }
                    dl.rules {
                        dt { "model" }
                        @if models_used(input.runs).iter().all(|m| *m == ModelKind::Cottrell.name()) {
                            dd { "planar Cottrell, I = n·F·A·C·√D / √(π·(t − t0)) + b (F. G. Cottrell, Z. Phys. Chem. 42 (1903) 385); F = 96 485.332 12 C/mol (CODATA 2018)" }
                        } @else {
                            dd { (models_used(input.runs).join(", ")) "; each run's section gives the equation, its source and its range of validity; F = 96 485.332 12 C/mol (CODATA 2018)" }
                        }
                        @for (name, value) in model_input_rows(input.model_inputs, input.runs) {
                            dt { (name) } dd { (value) }
                        }
                        @let planar_only = models_used(input.runs).iter().all(|m| *m == ModelKind::Cottrell.name());
                        @if !planar_only {
                            dt { "these rules" } dd { "are the planar analysis's; the disk, sphere, kinetic and slab models take only its charging lower bound (no earlier than 50 sampling intervals) and run to the end of the data, at the importer's onset, and Cottrell plus charging starts at the first sample and fits its own onset; each run's Window says what it used" }
                        }
                        dt { "window start" } dd { (bound_rule(o.window.lo, true, o)) }
                        dt { "window end" } dd { (bound_rule(o.window.hi, false, o)) }
                        dt { "fewest points" } dd { (o.window.min_points) " in the window" }
                        dt { "background" } dd { (background_rule(&o.background)) }
                        dt { "intercept b" } dd { @if o.intercept { "fitted (a constant background current)" } @else { "not fitted (held at zero)" } }
                        dt { "step onset t0" } dd { @if o.refine_t0 && !o.interval_average { "refined in the fit" } @else { "kept as the importer found it" } }
                        dt { "regressor" } dd { @if o.interval_average { "interval-averaged Cottrell current" } @else { "I against (t − t0)^−½" } }
                        dt { "weighting" } dd { (o.weighting.description()) }
                        dt { "uncertainty" } dd { "sandwich covariance for white plus AR(1) noise; 95 % intervals from Student's t with the effective number of points; budget after the GUM (JCGM 100:2008), U = 2·u_c" }
                        @if !input.import_notes.is_empty() {
                            dt { "import settings" }
                            dd { @for (k, note) in input.import_notes.iter().enumerate() { @if k > 0 { "; " } (note) } }
                        }
                    }
                }
            }
        }
    }
}

fn summary_rows(s: &ReplicateSummary, rep: &Replicates) -> Markup {
    let u = rep.unit;
    let v = |x: f64| format!("{} {u}", sci(x, 5));
    html! {
        dl.rules {
            dt { "runs compared" } dd { (s.n) }
            dt { "mean" } dd { (v(s.mean)) }
            dt { "standard deviation" } dd {
                (v(s.sd))
                @if let Some(r) = s.rsd_percent { " (RSD " (percent(r)) ")" }
            }
            dt { "95 % interval of the mean" } dd {
                (sci(s.ci95.lower, 5)) " … " (v(s.ci95.upper))
                " (Student's t = " (format!("{:.3}", s.ci95.t_critical)) " on " (s.ci95.dof) " degrees of freedom; standard error of the mean " (v(s.sem)) ")"
            }
            @match &s.weighted {
                Some(w) => {
                    dt { "weighted mean" } dd {
                        (v(w.mean)) " ± " (sci(w.internal_std_error, 2)) " (internal)"
                        @if let Some(e) = w.external_std_error { ", ± " (sci(e, 2)) " scaled by the Birge ratio" }
                    }
                    // The statement carries the ratio, χ², the degrees of freedom and p.
                    dt { "Birge ratio" } dd { (format!("{:.2}", w.birge_ratio)) ": " (w.statement) }
                },
                None => {
                    @if let Some(o) = &s.weighted_omitted {
                        dt { "weighted mean" } dd { "not computed: " (o.reason) }
                    }
                },
            }
            @if let Some(f) = &s.fit_vs_scatter {
                dt { "fit against scatter" } dd {
                    "the runs' own standard errors (RMS " (sci(f.rms_std_error, 2)) ") against their SD " (sci(f.sd, 2)) ": the scatter is " (format!("{:.1}", f.scatter_to_fit_ratio)) " × the fit uncertainty"
                }
            }
            dt { "Grubbs' test" } dd {
                // The statement carries G, the critical value, α and the run farthest out.
                @match &s.grubbs {
                    GrubbsOutcome::Tested(g) => { (g.statement) },
                    GrubbsOutcome::NotApplicable { reason } => { "not applicable: " (reason) },
                }
            }
        }
    }
}

fn replicate_section(rep: &Replicates, runs: &[RunInput<'_>]) -> Markup {
    // The per-run intervals come from each run's own fit, in the replicate unit.
    let scale = if rep.quantity == "D" { 1e4 } else { 1e-2 };
    let intervals: Vec<(f64, f64)> = rep
        .run_index
        .iter()
        .filter_map(|&k| match runs.get(k).map(|r| r.outcome) {
            Some(Outcome::Fitted { result, .. }) => {
                let e = if rep.quantity == "D" {
                    result.diffusion_m2_s
                } else {
                    result.nac_mol_m
                }?;
                Some((e.ci95[0] * scale, e.ci95[1] * scale))
            }
            _ => None,
        })
        .collect();
    let plot = figures::replicate_plot(rep, &intervals);
    let hidden = figures::replicate_range(rep, &intervals)
        .is_some_and(|axis| figures::intervals_hidden(&intervals, axis));
    // One power of ten for the whole table, from the largest value, so the columns line up.
    let largest = rep
        .estimates
        .iter()
        .map(|e| e.value.abs())
        .fold(0.0, f64::max);
    let exponent = if largest > 0.0 && largest.is_finite() {
        largest.log10().floor() as i32
    } else {
        0
    };
    let factor = 10f64.powi(exponent);
    let factor_text = if exponent == 0 {
        rep.unit.to_owned()
    } else {
        format!("{} {}", crate::ticks::power_of_ten(exponent), rep.unit)
    };
    html! {
        section.replicates {
            h2 { "Replicates" }
            p { "The runs are compared as replicates of one measurement of " (rep.quantity) ". Values in " (rep.unit) "; each run's interval is its own fit's." }
            div.two {
                div {
                    table.grid {
                        thead { tr {
                            th { "run" } th { "file" } th.num { (rep.quantity) " / (" (factor_text) ")" }
                            th.num { "standard error" } th { "95 % interval" }
                        } }
                        tbody {
                            @for (j, e) in rep.estimates.iter().enumerate() {
                                tr {
                                    td { (j + 1) }
                                    td.file { (base_name(&e.label)) }
                                    td.num { (sci(e.value / factor, 6)) }
                                    td.num { (sci(e.std_error / factor, 2)) }
                                    td { @if let Some((a, b)) = intervals.get(j) { (sci(*a / factor, 6)) " … " (sci(*b / factor, 6)) } }
                                }
                            }
                        }
                    }
                    @match &rep.summary {
                        Ok(s) => { (summary_rows(s, rep)) },
                        Err(e) => { p.muted { "No replicate statistics: " (e) } },
                    }
                }
                @if let Some(p) = plot {
                    figure {
                        (p.render())
                        figcaption {
                            "Each run's " (rep.quantity) " with the 95 % interval of its fit; the line and band are the mean of the runs and its 95 % interval. Run numbers as in the table."
                            @if hidden {
                                " The runs' own intervals are shorter than the markers here: the runs differ by far more than any one fit's uncertainty."
                            }
                        }
                    }
                }
            }
        }
    }
}

fn dialect_text(t: &Trace) -> String {
    let d = &t.dialect;
    let mut s = format!(
        "{}-separated, decimal {}, {}, {} line endings",
        d.delimiter.name(),
        match d.decimal {
            DecimalMark::Point => "point",
            DecimalMark::Comma => "comma",
        },
        d.encoding.name(),
        d.line_ending.name()
    );
    if d.quoted {
        s.push_str(", quoted fields");
    }
    match d.header_line {
        Some(h) => s.push_str(&format!(", column names on line {h}")),
        None => s.push_str(", no header"),
    }
    if let Some(u) = d.units_line {
        s.push_str(&format!(", units on line {u}"));
    }
    s.push_str(&format!(", numbers from line {}", d.first_data_line));
    s
}

fn provenance(p: Provenance) -> &'static str {
    match p {
        Provenance::Header => "from the header",
        Provenance::Assumed => "assumed",
        Provenance::Override => "given by the user",
    }
}

fn column_row(c: &ColumnInfo) -> Markup {
    html! {
        tr {
            td { (c.number) }
            td.file { @if c.header.is_empty() { span.muted { "(no header)" } } @else { (c.header) } }
            @match (&c.role, &c.unit) {
                (Some(role), Some(unit)) => {
                    td { (role.name()) }
                    td { (unit.symbol) }
                    td { @if unit.to_si == 1.0 { "already SI" } @else { "× " (sci(unit.to_si, 4)) " to " (role.si_symbol()) } }
                    td.muted { "role " (provenance(c.role_provenance)) ", unit " (provenance(c.unit_provenance)) }
                },
                _ => { td.muted colspan="4" { "not used" } },
            }
        }
    }
}

fn onset_text(t: &Trace) -> String {
    let how = match &t.onset.method {
        OnsetMethod::PotentialJump { from_v, to_v } => format!(
            "from the jump of the potential, {} → {}",
            si(*from_v, "V", 3),
            si(*to_v, "V", 3)
        ),
        OnsetMethod::CurrentJump => {
            "from the jump of the current (no usable potential column)".to_owned()
        }
        OnsetMethod::FileStart => "the file starts at the step; its clock was kept".to_owned(),
        OnsetMethod::AssumedOneSampleBefore => {
            "assumed one sampling interval before the first sample".to_owned()
        }
        OnsetMethod::Given => "given by the user".to_owned(),
    };
    format!(
        "{how}; at {} on the file's clock (sample {}), midway between the samples either side; times below are measured from it",
        si(t.onset.file_time_s, "s", 5),
        t.onset.index + 1
    )
}

fn sign_text(t: &Trace, seg: &diffusor_trace::Segment) -> &'static str {
    match seg.polarity.or(t.polarity) {
        Some(Polarity::Anodic) => {
            "anodic (positive current, oxidation, IUPAC sign); fitted as it is"
        }
        Some(Polarity::Cathodic) => {
            "cathodic (negative current, reduction, IUPAC sign); multiplied by −1 for the fit"
        }
        None => "undetermined (no net current); fitted as it is",
    }
}

fn processing_log(
    t: &Trace,
    segment: Option<&diffusor_trace::Segment>,
    result: Option<&PlanarResult>,
    check: Option<(f64, f64)>,
) -> Markup {
    let steps = t.steps().count();
    html! {
        dl.rules {
            dt { "file format" } dd { (dialect_text(t)) }
            dt { "rows read" } dd {
                (t.rows()) ", " (si(t.time_s.first().copied().unwrap_or(f64::NAN), "s", 4)) " to "
                (si(t.time_s.last().copied().unwrap_or(f64::NAN), "s", 4)) " after the step, sampled every "
                (si(t.sampling_interval_s(), "s", 3)) " (median)"
            }
            dt { "step onset" } dd { (onset_text(t)) }
            @if let Some(seg) = segment {
                dt { "step analysed" } dd {
                    @let number = t.steps().position(|s| s == seg).map_or(1, |k| k + 1);
                    "step " (number) " of " (steps) ", samples " (seg.start + 1) "–" (seg.end)
                    @if let Some(v) = seg.potential_v { " at " (si(v, "V", 3)) }
                }
                dt { "sign" } dd { (sign_text(t, seg)) }
            }
            dt { "baseline" } dd {
                @match &t.baseline {
                    Some(b) => { "pre-step mean " (si(b.mean_a, "A", 3)) ", SD " (si(b.sd_a, "A", 2)) " over " (b.points) " samples" },
                    None => { "none (no samples before the step)" },
                }
            }
            @if let Some(r) = result {
                dt { "background" } dd { (r.background) }
                dt { "onset refined" } dd {
                    @if r.t0_refined {
                        "t0 = " (si(r.t0.value, "s", 4)) " ± " (si(r.t0.std_error, "s", 2)) " relative to the importer's onset (fitted with S and b)"
                    } @else {
                        "no; t0 = 0 (the importer's onset)"
                    }
                }
            }
            @if let Some((recomputed, fitted)) = check {
                dt { "data check" } dd {
                    "the residual SD recomputed from the embedded data is " (si(recomputed, "A", 4))
                    "; the fit reported " (si(fitted, "A", 4))
                    @if (recomputed - fitted).abs() <= 1e-6 * fitted.abs().max(f64::MIN_POSITIVE) { " (they agree)" } @else { " — they differ: the data below may not be exactly what was fitted" }
                }
            }
        }
        h4 { "Columns" }
        table.grid.compact {
            thead { tr { th { "#" } th { "header" } th { "role" } th { "unit" } th { "conversion" } th { "how decided" } } }
            tbody { @for c in &t.columns { (column_row(c)) } }
        }
        @if !t.metadata.is_empty() {
            details {
                summary { "Preamble of the file (" (t.metadata.len()) " line" (plural(t.metadata.len())) ")" }
                table.grid.compact {
                    tbody {
                        @for m in &t.metadata {
                            tr {
                                td.num { (m.line) }
                                td { @if let Some(k) = &m.key { (k) } }
                                td.file { (m.value) }
                            }
                        }
                    }
                }
            }
        }
        @if !t.warnings.is_empty() {
            h4 { "Import warnings" }
            ul.warnings { @for w in &t.warnings { li { (w.message) } } }
        }
    }
}

fn figure(number: &str, plot: Option<Markup>, caption: &Markup) -> Markup {
    html! {
        @if let Some(svg) = plot {
            figure {
                (svg)
                figcaption { strong { "Figure " (number) ". " } (caption) }
            }
        }
    }
}

fn params_table(r: &PlanarResult) -> Markup {
    html! {
        table.grid {
            thead { tr { th { "parameter" } th { "symbol" } th { "value ± standard error" } th { "95 % interval" } } }
            tbody {
                @for p in &r.params {
                    tr {
                        td { (p.name) }
                        td { (p.symbol) }
                        td { (quantity_with_se(p.estimate.value, p.estimate.std_error, p.unit)) }
                        td { (quantity_interval(p.estimate.ci95[0], p.estimate.ci95[1], p.estimate.value, p.estimate.std_error, p.unit)) }
                    }
                }
                @if let Some((name, e, unit)) = planar_headline(r) {
                    tr.derived {
                        td { "derived: " (match name { "D" => "diffusion coefficient", "A" => "electroactive area", _ => "n·A·C" }) }
                        td { (name) }
                        td { (quantity_with_se(e.value, e.std_error, unit)) }
                        td { (quantity_interval(e.ci95[0], e.ci95[1], e.value, e.std_error, unit)) }
                    }
                }
                @if r.mode == "inverse" && r.area_m2.is_some() {
                    @if let Some(e) = r.nac_mol_m {
                        tr.derived {
                            td { "derived: n·A·C" } td { "n·A·C" }
                            td { (quantity_with_se(e.value, e.std_error, "mol/m")) }
                            td { (quantity_interval(e.ci95[0], e.ci95[1], e.value, e.std_error, "mol/m")) }
                        }
                    }
                }
            }
        }
        @if r.correlations.len() > 1 {
            p.muted {
                "Correlations: "
                @for i in 0..r.correlations.len() {
                    @for j in (i + 1)..r.correlations.len() {
                        @if let (Some(a), Some(b)) = (r.params.get(i), r.params.get(j)) {
                            "r(" (a.symbol) ", " (b.symbol) ") = " (format!("{:.3}", r.correlations[i][j])) "; "
                        }
                    }
                }
                "intervals of the parameters are from the fit alone."
            }
        }
    }
}

fn budget_table(r: &PlanarResult) -> Markup {
    let Some(b) = &r.budget else {
        return html! { p.muted { "No budget: the inputs needed for D (or n·A·C) were not entered." } };
    };
    html! {
        table.grid {
            thead { tr {
                th { "input" } th { "value" } th { "standard uncertainty" } th.num { "relative" }
                th.num { "relative sensitivity" } th { "contribution to u(" (b.quantity) ")" } th.num { "share of u²" }
            } }
            tbody {
                @for e in &b.entries {
                    tr {
                        td { (e.input) }
                        td { (quantity(e.value, e.unit, 5)) }
                        td { (quantity(e.standard_uncertainty, e.unit, 2)) }
                        td.num { (percent(100.0 * e.standard_uncertainty / e.value.abs())) }
                        // ∂ln y/∂ln x = c·x/y: unit-free, and ±2 or ±½ for the Cottrell relations.
                        td.num { (format!("{:+.2}", e.sensitivity * e.value / b.value).replace('-', "−")) }
                        td { (quantity(e.contribution, b.unit, 2)) }
                        td.num { (percent(e.share_percent)) }
                    }
                }
            }
            tfoot {
                tr { th colspan="5" { "combined standard uncertainty u_c(" (b.quantity) ")" } td { (quantity(b.combined_standard_uncertainty, b.unit, 2)) } td.num { (percent(100.0 * b.combined_standard_uncertainty / b.value.abs())) } }
                tr { th colspan="5" { "expanded uncertainty U = k·u_c, k = " (b.coverage_factor) } td { strong { (quantity(b.expanded_uncertainty, b.unit, 2)) } } td.num { (percent(100.0 * b.expanded_uncertainty / b.value.abs())) } }
            }
        }
        p.muted { (b.note) }
    }
}

fn quality(r: &PlanarResult) -> Markup {
    let d = &r.diagnostics;
    html! {
        dl.rules {
            dt { "R²" } dd { (format!("{:.7}", d.r2)) }
            dt { "residual SD" } dd { (si(d.residual_sd_a, "A", 3)) }
            dt { "Durbin–Watson" } dd { (format!("{:.3}", d.durbin_watson)) " (2 for independent residuals)" }
            dt { "lag-1 autocorrelation" } dd { (format!("{:.3}", d.lag1_autocorrelation)) }
            dt { "runs test" } dd { "z = " (format!("{:.1}", d.runs_z)) " (near 0 when the signs of the residuals alternate at random)" }
            dt { "effective points" } dd { (format!("{:.0}", d.effective_points)) " of " (r.window.points) "; " (format!("{:.0}", d.degrees_of_freedom)) " degrees of freedom" }
            dt { "standard error widened" } dd { "× " (format!("{:.2}", d.se_inflation)) " for correlated residuals and the free onset" }
            dt { "method" } dd { (d.autocorrelation_method) }
            dt { "regression" } dd { (d.regressor) "; " (d.weighting) }
        }
    }
}

fn run_section(k: usize, run: &RunInput<'_>, options: &PlanarOptions) -> Markup {
    let id = format!("run-{k}");
    match run.outcome {
        Outcome::Failed { trace, error } => html! {
            section.run id=(id) {
                h2 { "Run " (k) " · " span.file { (base_name(run.label)) } }
                p.failed { "Not analysed: " (error) }
                (identity(run))
                @if let Some(t) = trace {
                    h3 { "What was read" }
                    (processing_log(t, None, None, None))
                }
            }
        },
        Outcome::Fitted {
            trace,
            segment,
            result,
        } => match result.planar() {
            Some(planar) => planar_section(k, &id, run, (trace, segment), result, planar, options),
            None => model_section(k, &id, run, (trace, segment), result, options),
        },
    }
}

/// A Cottrell run: the whole planar analysis.
fn planar_section(
    k: usize,
    id: &str,
    run: &RunInput<'_>,
    (trace, segment): (&Trace, &diffusor_trace::Segment),
    m: &ModelResult,
    result: &PlanarResult,
    options: &PlanarOptions,
) -> Markup {
    let id = id.to_owned();
    let data = Processed::new(trace, segment, &options.background, result);
    let check = (data.residual_sd(result), result.diagnostics.residual_sd_a);
    let csv = window_csv(&data, result);
    let transient = figures::transient(&id, &data, result, "Cottrell fit over the window");
    let hidden = transient.as_ref().map_or(0, |t| t.1);
    let z = options.window.departure_z;
    html! {
        section.run id=(id) {
            h2 { "Run " (k) " · " span.file { (base_name(run.label)) } }
            @if let Some((name, e, unit)) = headline(m) {
                p.answer {
                    (name) " = " strong { (quantity_with_se(e.value, e.std_error, unit)) }
                    " (fit), 95 % interval " (quantity_interval(e.ci95[0], e.ci95[1], e.value, e.std_error, unit))
                    @if let Some(u) = expanded(m) { "; expanded uncertainty with the inputs U = " (u) " (k = 2)" }
                }
            }
            (identity(run))
            h3 { "Processing log" }
            (processing_log(trace, Some(segment), Some(result), Some(check)))
            h3 { "Window" }
            dl.rules {
                dt { "from" } dd { (si(result.window.lo.time_s, "s", 4)) ": " (result.window.lo.description) }
                dt { "to" } dd { (si(result.window.hi.time_s, "s", 4)) ": " (result.window.hi.description) }
                dt { "points" } dd { (result.window.points) }
                @if let Some(c) = &result.charging {
                    dt { "charging" } dd {
                        "τ = " (si(c.tau_s, "s", 3))
                        @if let Some(se) = c.tau_std_error_s { " ± " (si(se, "s", 2)) }
                        @if let Some(a) = c.amplitude_a { ", amplitude " (si(a, "A", 3)) }
                        @if c.fitted { " (exponential plus Cottrell fitted to the first " (c.points) " points)" } @else { " (from the entered Ru and Cdl)" }
                    }
                }
                dt { "plateau test" } dd { (result.plateau.criterion) }
            }
            h3 { "Figures" }
            div.figures {
                (figure(&format!("{k}.1"), transient.map(|t| t.0.render()), &html! {
                    "The transient on logarithmic axes. Shaded: the parts left out of the fit, with the reason; the dark line is the fit over the window."
                    @if hidden > 0 { " " (hidden) " samples with zero or negative current cannot be shown on the log axis." }
                }))
                (figure(&format!("{k}.2"), figures::cottrell(&id, &data, result).map(|p| p.render()), &html! {
                    "Cottrell plot over the window, with the fitted line drawn from the origin of the axis; the intercept is the background b. The onset t0 is the fitted one."
                }))
                (figure(&format!("{k}.3"), figures::residuals(&id, &data, result, result.diagnostics.residual_sd_a).map(|p| p.render()), &html! {
                    "Residuals over the window. Structure here (a trend, waves, steps) means the model or the window does not suit the data, whatever the intervals say."
                }))
                (figure(&format!("{k}.4"), figures::plateau(&id, &data, result, z).map(|p| p.render()), &html! {
                    "I·√(t − t0) on a log-time axis: flat for Cottrell behaviour. Bin means (10 per decade, ± 1 standard error) are those of the window-end test, computed with the provisional onset; open squares are bins more than " (z) " SE from the plateau fitted to the bins before them."
                }))
                (figure(&format!("{k}.5"), figures::sensitivity(&id, result, false).map(|p| p.render()), &html! {
                    "The result refitted with the window's lower bound moved and the upper bound held (± 1 SE, without the autocorrelation correction)."
                }))
                (figure(&format!("{k}.6"), figures::sensitivity(&id, result, true).map(|p| p.render()), &html! {
                    "The result refitted with the upper bound moved and the lower bound held. A plateau around the bound used means the result does not hinge on it."
                    @if let Some(s) = &result.sensitivity { " (" (s.note) ".)" }
                }))
            }
            h3 { "Model" }
            p { code { (result.equation) } " — " (result.source) ". Geometry: " (result.geometry.name()) "; " (result.mode) " mode." }
            h3 { "Fitted parameters" }
            (params_table(result))
            h3 { "Uncertainty budget" }
            (budget_table(result))
            h3 { "Fit quality" }
            (quality(result))
            h3 { "Warnings" }
            @if result.warnings.is_empty() {
                p.muted { "None from the fit." }
            } @else {
                ul.warnings { @for w in &result.warnings { li { (w.message) } } }
            }
            h3 { "Data" }
            p {
                a.download download={ (safe_file_name(run.label)) "-window.csv" } href=(data_url("text/csv", &csv.text)) {
                    "Download the fitted data (CSV, " (csv.rows) " rows)"
                }
                ". Columns: time after the importer's onset (s), current as fitted (A, faradaic direction positive, background removed), fitted current and residual (A), for the window "
                (si(result.window.lo.time_s, "s", 4)) " to " (si(result.window.hi.time_s, "s", 4)) ". "
                @if csv.stride > 1 {
                    "The window holds " (csv.window_points) " points; to keep the file small every " (csv.stride) "th was written."
                } @else {
                    "Every point of the window is included."
                }
                " The fitted current uses t0 = " (si(result.t0.value, "s", 6)) "."
            }
        }
    }
}

/// The parameters of any model, with their correlations.
fn model_params_table(r: &ModelResult) -> Markup {
    html! {
        table.grid {
            thead { tr { th { "parameter" } th { "symbol" } th { "value ± standard error" } th { "95 % interval" } } }
            tbody {
                @for p in &r.params {
                    tr {
                        td { (p.name) }
                        td { (p.symbol) }
                        td { (quantity_with_se(p.estimate.value, p.estimate.std_error, p.unit)) }
                        td { (quantity_interval(p.estimate.ci95[0], p.estimate.ci95[1], p.estimate.value, p.estimate.std_error, p.unit)) }
                    }
                }
            }
        }
        @if r.correlations.len() > 1 {
            p.muted {
                "Correlations of the fitted parameters: "
                @for i in 0..r.correlations.len() {
                    @for j in (i + 1)..r.correlations.len() {
                        @if let (Some(a), Some(b)) = (r.params.get(i), r.params.get(j)) {
                            "r(" (a.symbol) ", " (b.symbol) ") = " (format!("{:.3}", r.correlations[i][j])) "; "
                        }
                    }
                }
                "derived parameters follow from them; intervals are from the fit alone."
            }
        }
    }
}

/// A run fitted with a model other than Cottrell's: its answer, window, transient with the
/// fitted curve, residuals, the model with its source and validity, parameters, fit quality
/// and warnings.
fn model_section(
    k: usize,
    id: &str,
    run: &RunInput<'_>,
    (trace, segment): (&Trace, &diffusor_trace::Segment),
    m: &ModelResult,
    options: &PlanarOptions,
) -> Markup {
    let data = Processed::new(trace, segment, &options.background, m);
    let csv = window_csv(&data, m);
    let label = format!("{} fit over the window", m.model.name());
    let transient = figures::transient(id, &data, m, &label);
    let hidden = transient.as_ref().map_or(0, |t| t.1);
    let current = m.fitted_quantity == "current";
    let (sd_unit, sd_what) = if current {
        ("A", "current")
    } else {
        ("C", "charge")
    };
    html! {
        section.run id=(id) {
            h2 { "Run " (k) " · " span.file { (base_name(run.label)) } }
            @if let Some((name, e, unit)) = headline(m) {
                p.answer {
                    (name) " = " strong { (quantity_with_se(e.value, e.std_error, unit)) }
                    " (fit), 95 % interval " (quantity_interval(e.ci95[0], e.ci95[1], e.value, e.std_error, unit))
                    @if let Some(c) = m.conc_mol_m3 {
                        "; C = " (quantity_with_se(c.value, c.std_error, "mol/m³"))
                    }
                }
            }
            (identity(run))
            h3 { "Processing log" }
            (processing_log(trace, Some(segment), None, None))
            h3 { "Window" }
            dl.rules {
                dt { "from" } dd { (si(m.window.lo.time_s, "s", 4)) ": " (m.window.lo.description) }
                dt { "to" } dd { (si(m.window.hi.time_s, "s", 4)) ": " (m.window.hi.description) }
                dt { "points" } dd { (m.points) }
                dt { "background" } dd { (m.background) }
                dt { "onset" } dd { (model_onset(m)) }
            }
            h3 { "Model" }
            dl.rules {
                dt { "model" } dd { (m.model.name()) " (" (m.variant) ")" }
                dt { "equation" } dd { code { (m.equation) } }
                dt { "source" } dd { (m.source) }
                dt { "valid for" } dd { (m.validity) }
                dt { "these data" } dd {
                    @if m.in_validity_range { "inside that range: " } @else { strong { "outside that range: " } }
                    (m.validity_check)
                }
                dt { "why this model" } dd { (m.choice.reason) }
            }
            h3 { "Figures" }
            div.figures {
                (figure(&format!("{k}.1"), transient.map(|t| t.0.render()), &html! {
                    "The transient on logarithmic axes. Shaded: the parts left out of the fit, with the reason; the dark line is the " (m.model.name()) " model with the fitted parameters over the window."
                    @if !current { " The Anson fit is to the charge; the line is the current its charge line implies, m/(2√t)." }
                    @if hidden > 0 { " " (hidden) " samples with zero or negative current cannot be shown on the log axis." }
                }))
                @if current {
                    (figure(&format!("{k}.2"), figures::residuals(id, &data, m, m.residual_sd).map(|p| p.render()), &html! {
                        "Residuals over the window. Structure here (a trend, waves, steps) means the model or the window does not suit the data, whatever the intervals say."
                    }))
                }
            }
            h3 { "Fitted parameters" }
            (model_params_table(m))
            p.muted { "No uncertainty budget for this model: the intervals are the fit's; the entered inputs' own uncertainties are not propagated." }
            h3 { "Fit quality" }
            dl.rules {
                dt { "R²" } dd { (format!("{:.7}", m.r2)) " (of the " (sd_what) ")" }
                dt { "residual SD" } dd { (si(m.residual_sd, sd_unit, 3)) }
                dt { "degrees of freedom" } dd { (format!("{:.0}", m.degrees_of_freedom)) " (effective points less parameters, for Student's t)" }
                dt { "solver" } dd {
                    @if m.iterations == 0 { "closed-form lines" } @else { (m.iterations) " Levenberg–Marquardt iterations" }
                    @if m.converged { ", converged" } @else { ", not converged" }
                }
            }
            h3 { "Warnings" }
            @if m.warnings.is_empty() {
                p.muted { "None from the fit." }
            } @else {
                ul.warnings { @for w in &m.warnings { li { (w) } } }
            }
            h3 { "Data" }
            p {
                a.download download={ (safe_file_name(run.label)) "-window.csv" } href=(data_url("text/csv", &csv.text)) {
                    "Download the fitted data (CSV, " (csv.rows) " rows)"
                }
                ". Columns: time after the importer's onset (s), current as fitted (A, faradaic direction positive, background removed), fitted current and residual (A), for the window "
                (si(m.window.lo.time_s, "s", 4)) " to " (si(m.window.hi.time_s, "s", 4)) ". "
                @if csv.stride > 1 {
                    "The window holds " (csv.window_points) " points; to keep the file small every " (csv.stride) "th was written."
                } @else {
                    "Every point of the window is included."
                }
            }
        }
    }
}

fn identity(run: &RunInput<'_>) -> Markup {
    html! {
        dl.rules.identity {
            dt { "file" } dd.file { (run.label) }
            dt { "SHA-256" } dd { code { (run.sha256.unwrap_or("not available")) } }
        }
    }
}

/// Where a model's times start: its own fitted onset (Cottrell plus charging), the Cottrell
/// analysis's refined one (Anson, double step), or the importer's (the others).
fn model_onset(m: &ModelResult) -> String {
    match m.model {
        ModelKind::CottrellCharging => format!(
            "fitted with the model: t0 = {} from the importer's onset",
            si(m.t0_s, "s", 4)
        ),
        _ if m.t0_s != 0.0 => format!(
            "refined by the Cottrell analysis: t0 = {} from the importer's onset",
            si(m.t0_s, "s", 4)
        ),
        _ => "the importer's (the disk, sphere, kinetic and slab models keep it, and their window starts late enough for half a sample not to matter)".to_owned(),
    }
}
