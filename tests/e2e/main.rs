//! End-to-end tests: the built `diffusor` binary on the demo data and on deliberately bad files.

mod compare;
mod fit;
mod inspect;
mod models;
mod readme;
mod report;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The repository root (this file lives in `tests/e2e/`).
pub fn repo() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

/// Runs the binary with `args` from the repository root.
pub fn diffusor(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_diffusor"))
        .args(args)
        .current_dir(repo())
        .output()
        .expect("run diffusor")
}

/// The demo files, as paths relative to the repository root.
pub fn demo_files() -> Vec<String> {
    let mut files: Vec<String> = std::fs::read_dir(repo().join("sample-data"))
        .expect("sample-data")
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".csv") || n.ends_with(".txt"))
        .map(|n| format!("sample-data/{n}"))
        .collect();
    files.sort();
    files
}

pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}
