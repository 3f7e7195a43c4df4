//! Any bytes as a scenario file: loading returns a scenario or an error, never panics
//! or hangs, and a valid scenario's cost estimate is finite.
#![no_main]

use libfuzzer_sys::fuzz_target;
use stepflux::scenario::{document, load_str};

fuzz_target!(|data: &[u8]| {
    let Ok(text) = document::decode(data.to_vec(), "fuzz.json") else {
        return;
    };
    if let Ok(loaded) = load_str(&text, "fuzz.json") {
        let cost = stepflux::budget::estimate(&loaded);
        assert!(cost.periods.is_finite() && cost.output_bytes.is_finite());
    }
});
