//! Fuzz target: any bytes as a case file. Parsing and validation must never panic (a
//! panic, an overflow caught by debug assertions or a hang is a finding); when the case
//! is valid, the `deepdry check` summary must not panic either. CSV files named by the
//! case are looked up in `tests/case_data` (those present there are read).
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    let base = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/case_data");
    match deepdry::case::parse(text, "fuzz.toml", &base) {
        Ok(model) => {
            let _ = deepdry::case::summary(&model);
        }
        Err(e) => {
            // Every refusal is one line.
            assert!(!e.to_string().contains('\n'), "{e}");
        }
    }
});
