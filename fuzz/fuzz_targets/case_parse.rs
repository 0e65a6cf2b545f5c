//! Arbitrary bytes as a case file: parsing and validation must either
//! succeed or return a `CaseError`, never panic, hang or abort.
#![no_main]

use libfuzzer_sys::fuzz_target;
use std::path::Path;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    // The base folder has no block files, so `blocks` cases that name files
    // stop at a file error; everything else runs through validation.
    if let Ok(case) = qheat::case::Case::parse(text, "fuzz.toml", Path::new("/nonexistent")) {
        let resolved = case.resolve().expect("a parsed case resolves");
        let _ = resolved.memory_estimate_bytes();
        let _ = resolved.describe();
        let _ = case.to_toml_string();
    }
});
