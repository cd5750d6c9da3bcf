//! Designs files: parse, then apply every design to a fixed hypothesis.
#![no_main]
use libfuzzer_sys::fuzz_target;
use seedline::abc::{Hypothesis, design};

const H: &str = "demes: [{name: pond, size: {prior: uniform, low: 50, high: 500}}, {name: lake, size: 80}]\nmigration: [{from: pond, to: lake, rate: 0.01}]\nsamples: [{deme: pond, count: 4}]\nmutation: {rate: 1.0e-4, sites: 1000}\n";

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let Ok(file) = design::parse_designs(text, "fuzz.yaml") else { return };
    let h = Hypothesis::from_yaml_str(H, "h.yaml", "h").expect("the fixed hypothesis is valid");
    for d in &file.designs {
        if let Ok(hd) = h.with_design(&d.samples, d.sites, d.loci) {
            let _ = hd.example();
        }
    }
});
