//! Hypothesis files (scenarios with priors): parse, check both ends of every prior, build
//! the scenario at the medians.
#![no_main]
use libfuzzer_sys::fuzz_target;
use seedline::abc::Hypothesis;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let Ok(h) = Hypothesis::from_yaml_str(text, "fuzz.yaml", "h") else { return };
    let medians: Vec<f64> = h.priors.iter().map(|p| p.median()).collect();
    if let Ok(s) = h.scenario_with(&medians) {
        let _ = s.to_string();
    }
});
