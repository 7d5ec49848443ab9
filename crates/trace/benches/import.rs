//! Import of a generated 10-million-row, two-column current–time file (about 230 MB), with the
//! peer a user would otherwise reach for (`pandas.read_csv`) timed on the same file in the same
//! run, and the peak memory of one import measured in a child process.
//!
//! Run with `cargo bench -p diffusor-trace --bench import`. The file is written once to
//! `$DIFFUSOR_BENCH_DIR` (default: the system temporary directory) and reused.

use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use criterion::Criterion;
use diffusor_trace::{ImportOptions, import_path};

const ROWS: usize = 10_000_000;

fn bench_file() -> PathBuf {
    let dir = std::env::var_os("DIFFUSOR_BENCH_DIR").map_or_else(
        || std::env::temp_dir().join("diffusor-bench"),
        PathBuf::from,
    );
    std::fs::create_dir_all(&dir).expect("bench directory");
    let path = dir.join("transient-10M.csv");
    if std::fs::metadata(&path).is_ok_and(|m| m.len() > 250_000_000) {
        return path;
    }
    eprintln!("writing {} ...", path.display());
    let mut w = BufWriter::with_capacity(1 << 20, std::fs::File::create(&path).expect("create"));
    writeln!(w, "time_s,current_A").expect("write");
    // A Cottrell-like decay sampled every 10 µs with a little deterministic ripple, written in
    // the scientific notation instruments use.
    for i in 0..ROWS {
        let t = (i + 1) as f64 * 1e-5;
        let ripple = ((i * 2_654_435_761) % 1000) as f64 * 1e-12;
        let current = 2.0e-5 / t.sqrt() * 1e-2 + ripple;
        writeln!(w, "{t:.6e},{current:.6e}").expect("write");
    }
    w.flush().expect("flush");
    path
}

fn status_kb(field: &str) -> Option<u64> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = status.lines().find(|l| l.starts_with(field))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// In the child: one import, then the peak resident memory it needed.
fn child(path: &Path) {
    let before = status_kb("VmRSS:").unwrap_or(0);
    let start = Instant::now();
    let trace = import_path(path, &ImportOptions::default()).expect("import");
    let secs = start.elapsed().as_secs_f64();
    let peak = status_kb("VmHWM:").unwrap_or(0);
    let column_bytes = (trace.time_s.len() + trace.current_a.len()) * 8;
    println!(
        "{} {} {} {} {secs}",
        trace.rows(),
        before,
        peak,
        column_bytes
    );
}

fn memory(path: &Path) {
    let exe = std::env::current_exe().expect("exe");
    let out = Command::new(exe)
        .env("DIFFUSOR_BENCH_CHILD", path)
        .output()
        .expect("child");
    let text = String::from_utf8_lossy(&out.stdout);
    let v: Vec<f64> = text
        .split_whitespace()
        .filter_map(|s| s.parse().ok())
        .collect();
    if let [rows, before_kb, peak_kb, column_bytes, secs] = v[..] {
        let used_mb = (peak_kb - before_kb) / 1024.0;
        let columns_mb = column_bytes / (1024.0 * 1024.0);
        println!(
            "memory: {rows} rows; peak resident {used_mb:.0} MiB above start for {columns_mb:.0} MiB of f64 columns = {:.2}x (target <= 2x); cold-process import {secs:.3} s",
            used_mb / columns_mb
        );
    } else {
        println!(
            "memory: child failed: {text} {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
}

fn pandas(path: &Path) {
    let script = "import sys, time\nimport pandas as pd\nbest = 1e9\nfor _ in range(3):\n    t = time.perf_counter()\n    df = pd.read_csv(sys.argv[1])\n    best = min(best, time.perf_counter() - t)\nprint(best, len(df))\n";
    match Command::new("python3")
        .arg("-c")
        .arg(script)
        .arg(path)
        .output()
    {
        Ok(out) if out.status.success() => {
            let text = String::from_utf8_lossy(&out.stdout);
            println!(
                "peer: pandas.read_csv best of 3: {} s (rows {})",
                text.split_whitespace().next().unwrap_or("?"),
                text.split_whitespace().nth(1).unwrap_or("?")
            );
        }
        Ok(out) => println!(
            "peer: pandas not available ({}); install it with `pip install pandas` to measure the peer",
            String::from_utf8_lossy(&out.stderr)
                .lines()
                .last()
                .unwrap_or("")
        ),
        Err(e) => println!("peer: python3 not available ({e})"),
    }
}

fn main() {
    if let Some(path) = std::env::var_os("DIFFUSOR_BENCH_CHILD") {
        child(Path::new(&path));
        return;
    }
    let path = bench_file();
    memory(&path);
    pandas(&path);
    let mut c = Criterion::default()
        .sample_size(10)
        .measurement_time(Duration::from_secs(12))
        .configure_from_args();
    c.bench_function("import 10M rows (230 MB)", |b| {
        b.iter(|| import_path(&path, &ImportOptions::default()).expect("import"));
    });
    c.final_summary();
}
