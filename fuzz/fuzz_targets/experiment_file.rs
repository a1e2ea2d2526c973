//! Fuzz target: the experiment-file reader and builder on arbitrary text, with data paths
//! resolved against the test fixtures (so a mutated fixture reaches the data loader and the
//! unit conversions). Holds when no input panics, none gives an internal error, and every
//! input error names the file.
#![no_main]

use std::path::Path;

use fickfit::Error;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|input: &[u8]| {
    let Ok(text) = std::str::from_utf8(input) else {
        return;
    };
    let base = Path::new(env!("CARGO_MANIFEST_DIR")).join("../tests/data/experiments");
    match fickfit::experiment::from_str(text, Path::new("fuzz.toml"), &base) {
        Ok(_) => {}
        Err(Error::Internal(m)) => panic!("internal error: {m}"),
        Err(e) => {
            if let Some(loc) = e.location() {
                assert!(loc.file.is_some(), "input error without a file: {e}");
            }
        }
    }
});
