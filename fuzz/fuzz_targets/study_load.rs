//! Any bytes as a study file: loading and expanding the cases returns a plan or an
//! error, never panics. A `base` path is resolved against the examples folder.
#![no_main]

use std::path::Path;

use libfuzzer_sys::fuzz_target;
use stepflux::scenario::document;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = document::decode(data.to_vec(), "fuzz-study.json") else {
        return;
    };
    let dir = Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/../scenarios"));
    let _ = stepflux::batch::plan_text(&text, dir, "fuzz-study.json");
});
