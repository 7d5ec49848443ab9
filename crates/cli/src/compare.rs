//! `diffusor compare`: the replicate view — every run's D with its interval, then the mean, SD,
//! RSD, 95 % interval, weighted mean with the Birge ratio and Grubbs' outlier test.

use std::fmt::Write as _;
use std::process::ExitCode;

use diffusor_fit::replicates::{GrubbsOutcome, ReplicateSummary, RunEstimate, format_p, summarize};
use diffusor_report::json::replicates_json;

use crate::fit::{self, Run};

/// Which result the runs are compared on, with its reporting unit.
struct Target {
    name: &'static str,
    unit: &'static str,
    scale: f64,
}

fn target(runs: &[Run]) -> Target {
    let inverse = runs
        .iter()
        .filter_map(|r| r.result.as_ref().ok())
        .any(|r| r.mode == "inverse");
    if inverse {
        Target {
            name: "n·A·C",
            unit: "mol/cm",
            scale: 1e-2,
        }
    } else {
        Target {
            name: "D",
            unit: "cm²/s",
            scale: 1e4,
        }
    }
}

fn estimates(runs: &[Run], t: &Target) -> Vec<RunEstimate> {
    runs.iter()
        .filter_map(|r| {
            let res = r.result.as_ref().ok()?;
            let e = if t.name == "D" {
                res.diffusion_m2_s?
            } else {
                res.nac_mol_m?
            };
            Some(RunEstimate {
                label: r.file.clone(),
                value: e.value * t.scale,
                std_error: e.std_error * t.scale,
            })
        })
        .collect()
}

pub fn run(args: &fit::Args) -> anyhow::Result<ExitCode> {
    let v = fit::Validated::of(args)?;
    let runs = fit::fit_all(args.files(), args.import(), &v.setup());
    let t = target(&runs);
    let ests = estimates(&runs, &t);
    let summary = summarize(&ests);
    if args.json_output() {
        let error = summary.as_ref().err().map(ToString::to_string);
        let replicates = replicates_json(
            t.name,
            t.unit,
            summary
                .as_ref()
                .map_err(|_| error.as_deref().unwrap_or_default()),
        );
        println!("{}", fit::document_text(&runs, &v.cell, Some(replicates)));
    } else {
        let mut out = String::new();
        let width = runs
            .iter()
            .map(|r| r.file.chars().count())
            .max()
            .unwrap_or(4)
            .max(4);
        let _ = writeln!(
            out,
            "{:<width$}  {:>12}  {:>10}  {:>27}",
            "run",
            format!("{} ({})", t.name, t.unit),
            "std error",
            "95 % interval"
        );
        for r in &runs {
            match &r.result {
                Ok(res) => {
                    let e = if t.name == "D" {
                        res.diffusion_m2_s
                    } else {
                        res.nac_mol_m
                    };
                    match e {
                        Some(e) => {
                            let _ = writeln!(
                                out,
                                "{:<width$}  {:>12.5e}  {:>10.2e}  {:>12.5e} … {:>12.5e}",
                                r.file,
                                e.value * t.scale,
                                e.std_error * t.scale,
                                e.ci95[0] * t.scale,
                                e.ci95[1] * t.scale
                            );
                        }
                        None => {
                            let _ = writeln!(
                                out,
                                "{:<width$}  (no {}: enter the area and concentration)",
                                r.file, t.name
                            );
                        }
                    }
                }
                Err(e) => {
                    let _ = writeln!(out, "{:<width$}  error: {e}", r.file);
                }
            }
        }
        out.push('\n');
        match &summary {
            Ok(s) => summary_text(&mut out, s, &t),
            Err(e) => {
                let _ = writeln!(out, "no replicate statistics: {e}");
            }
        }
        print!("{out}");
    }
    Ok(fit::exit_status(&runs))
}

fn summary_text(out: &mut String, s: &ReplicateSummary, t: &Target) {
    let u = t.unit;
    let _ = writeln!(out, "replicates       {} runs", s.n);
    let _ = writeln!(
        out,
        "mean             {:.5e} {u}, SD {:.3e} {u}{}",
        s.mean,
        s.sd,
        s.rsd_percent
            .map(|r| format!(", RSD {r:.2} %"))
            .unwrap_or_default()
    );
    let _ = writeln!(
        out,
        "95 % interval    {:.5e} … {:.5e} {u} (Student's t, {} degrees of freedom; standard error {:.2e})",
        s.ci95.lower, s.ci95.upper, s.ci95.dof, s.sem
    );
    match &s.weighted {
        Some(w) => {
            let _ = writeln!(
                out,
                "weighted mean    {:.5e} {u} ± {:.2e} (internal){}",
                w.mean,
                w.internal_std_error,
                w.external_std_error
                    .map(|e| format!(", ± {e:.2e} scaled by the Birge ratio"))
                    .unwrap_or_default()
            );
            let _ = writeln!(
                out,
                "Birge ratio      {:.2} (χ² = {:.3} on {} dof, {}): {}",
                w.birge_ratio,
                w.chi_squared,
                w.dof,
                format_p(w.p_value),
                w.statement
            );
        }
        None => {
            if let Some(o) = &s.weighted_omitted {
                let _ = writeln!(out, "weighted mean    not computed: {}", o.reason);
            }
        }
    }
    if let Some(f) = &s.fit_vs_scatter {
        let _ = writeln!(
            out,
            "fit vs scatter   the runs' own standard errors (RMS {:.2e}) against their SD {:.2e}: scatter is {:.1}× the fit uncertainty",
            f.rms_std_error, f.sd, f.scatter_to_fit_ratio
        );
    }
    match &s.grubbs {
        GrubbsOutcome::Tested(g) => {
            let _ = writeln!(
                out,
                "Grubbs' test     G = {:.3} against {:.3} at α = {}: {}",
                g.statistic, g.critical_value, g.alpha, g.statement
            );
        }
        GrubbsOutcome::NotApplicable { reason } => {
            let _ = writeln!(out, "Grubbs' test     not applicable: {reason}");
        }
    }
}
