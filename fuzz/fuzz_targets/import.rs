//! Any bytes in: a usable trace or an error that names the file, never a panic or a hang.
#![no_main]

use diffusor_trace::{ImportOptions, import_bytes};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    match import_bytes("fuzz.csv", data, &ImportOptions::default()) {
        Ok(trace) => {
            assert!(trace.rows() >= diffusor_trace::MIN_ROWS);
            assert!(trace.time_s.windows(2).all(|w| w[1] > w[0]));
            assert!(trace.current_a.iter().all(|c| c.is_finite()));
            assert_eq!(trace.time_s.len(), trace.current_a.len());
        }
        Err(e) => assert!(e.to_string().ends_with("fuzz.csv")),
    }
});
