//! An import watched through `Progress`: the counts reach the size of the file, and an import
//! told to stop says so instead of returning a partial trace.

use std::sync::Arc;

use diffusor_trace::{ImportError, ImportOptions, Progress, import_bytes};

/// About 6 MiB of a plain two-column export: six blocks of the parser.
fn big() -> String {
    let mut text = String::from("time_s,current_A\n");
    for k in 0..300_000 {
        let t = 1e-4 * f64::from(k + 1);
        text.push_str(&format!("{t:.6e},{:.9e}\n", 1e-5 / t.sqrt()));
    }
    text
}

#[test]
fn the_parsed_count_reaches_the_size_of_the_file() {
    let text = big();
    let progress = Arc::new(Progress::default());
    let options = ImportOptions {
        progress: Some(Arc::clone(&progress)),
        ..ImportOptions::default()
    };
    let trace = import_bytes("big.csv", text.as_bytes(), &options).expect("imports");
    assert_eq!(trace.time_s.len(), 300_000);
    assert_eq!(progress.total(), text.len() as u64);
    // Every byte is counted once: the header and preamble with the data region's start, the
    // rest block by block.
    assert_eq!(progress.parsed(), text.len() as u64);
    assert!(!progress.is_cancelled());
}

#[test]
fn a_cancelled_import_returns_cancelled_and_no_trace() {
    let text = big();
    let progress = Arc::new(Progress::default());
    progress.cancel();
    let options = ImportOptions {
        progress: Some(Arc::clone(&progress)),
        threads: 2,
        ..ImportOptions::default()
    };
    let err = import_bytes("big.csv", text.as_bytes(), &options).unwrap_err();
    assert!(matches!(err, ImportError::Cancelled { .. }), "{err:?}");
    assert_eq!(err.to_string(), "reading was cancelled: big.csv");
    // It stopped at the first block: one block (1 MiB) per worker, two workers, was counted.
    assert!(
        progress.parsed() < text.len() as u64 / 2,
        "{}",
        progress.parsed()
    );
}
