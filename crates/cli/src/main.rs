//! The `diffusor` command line: batch work on potential-step transients.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};

mod compare;
mod fit;
mod import_args;
mod inspect;
mod quantity;
mod report;

/// Diffusion coefficients from potential-step chronoamperometry. With no command, opens the
/// desktop window.
#[derive(Debug, Parser)]
#[command(name = "diffusor", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Show what was found in each file: dialect, columns and units, rows, time span, step
    /// onset, sign, segments, baseline and warnings.
    Inspect(inspect::Args),
    /// Fit a model to each file (planar Cottrell by default; see --model) and report D (or
    /// n·A·C) with its interval, the window and its reasons, the parameters and warnings.
    Fit(fit::Args),
    /// Fit every file as `fit` does and compare the runs as replicates: mean, SD, RSD, 95 %
    /// interval, weighted mean with the Birge ratio, and Grubbs' outlier test naming the run.
    Compare(fit::Args),
    /// Fit every file as `fit` does and write one self-contained HTML report (`-o FILE`).
    Report(report::Args),
    /// Open the desktop window with these files loaded (the bundled demo set when none are
    /// named).
    Gui {
        /// Files to open: traces, or a session saved from the window (a `.json` file, which
        /// replaces the runs).
        #[arg(value_name = "FILE")]
        files: Vec<PathBuf>,
    },
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Some(Command::Inspect(args)) => inspect::run(&args),
        Some(Command::Fit(args)) => fit::run(&args),
        Some(Command::Compare(args)) => compare::run(&args),
        Some(Command::Report(args)) => report::run(&args),
        Some(Command::Gui { files }) => gui(files),
        None => gui(Vec::new()),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            eprintln!("diffusor: {e:#}");
            ExitCode::from(2)
        }
    }
}

fn gui(files: Vec<PathBuf>) -> anyhow::Result<ExitCode> {
    diffusor_gui::run(files).map_err(|e| {
        anyhow::anyhow!(
            "cannot open the window ({e}); the command line works without one: diffusor --help"
        )
    })?;
    Ok(ExitCode::SUCCESS)
}
