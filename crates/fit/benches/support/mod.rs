//! What the benches share: running a Python peer on our own data.

use std::io::Write;
use std::process::{Command, Stdio};

/// Runs `script` with `python3 -c`, the columns piped to its standard input one after another as
/// little-endian f64, and returns what it printed; `Err` says in a line why the peer was not
/// measured.
pub fn run_python_peer(script: &str, columns: &[&[f64]]) -> Result<String, String> {
    let mut child = Command::new("python3")
        .arg("-c")
        .arg(script)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .map_err(|e| format!("python3 not available ({e})"))?;
    let bytes: Vec<u8> = columns
        .iter()
        .flat_map(|c| c.iter())
        .flat_map(|v| v.to_le_bytes())
        .collect();
    if let Some(mut stdin) = child.stdin.take() {
        // A peer that stops reading early (numpy missing) closes the pipe; its stderr says why.
        let _ = stdin.write_all(&bytes);
    }
    let out = child
        .wait_with_output()
        .map_err(|e| format!("not measured ({e})"))?;
    if !out.status.success() {
        return Err(format!(
            "not measured ({}); `pip install numpy scipy` to measure it",
            String::from_utf8_lossy(&out.stderr)
                .lines()
                .last()
                .unwrap_or("")
        ));
    }
    Ok(String::from_utf8_lossy(&out.stdout).into_owned())
}
