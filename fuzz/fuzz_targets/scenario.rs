//! Scenario files: parse, validate, print, and (for small scenarios) predict and cost.
#![no_main]
use libfuzzer_sys::fuzz_target;
use seedline::scenario::Scenario;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let Ok(s) = Scenario::from_yaml_str(text, "fuzz.yaml") else { return };
    let _ = s.to_string();
    let _ = seedline::cost::preflight(&s, "fuzz.yaml", true, 2, Some(1 << 30));
    // Theory is cheap only for small samples and few demes.
    if s.samples().len() <= 12 && s.demes().len() <= 4 {
        let _ = seedline::theory::predict::predict(&s).to_json();
    }
});
