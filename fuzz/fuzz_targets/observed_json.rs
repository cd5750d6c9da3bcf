//! Observed statistics (observed.json, or a plain {"statistics": {...}}), read by test and compare.
#![no_main]
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    if let Ok(o) = seedline::abc::parse_observed(text, "fuzz.json") {
        for name in &o.names {
            let _ = o.value(name);
        }
    }
});
