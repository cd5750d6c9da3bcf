//! Scenario files that validate, simulated: one replicate with the exact engine (and the
//! approximate one where it applies), mutations and statistics. The horizon is capped at
//! 10^4 generations and large scenarios are skipped, so every run ends quickly.
#![no_main]
use libfuzzer_sys::fuzz_target;
use seedline::scenario::{Scenario, parse_raw};

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let Ok(mut raw) = parse_raw(text, "fuzz.yaml") else { return };
    let cap = 1.0e4;
    let loc = serde_saphyr::Location::UNKNOWN;
    let h = raw.horizon.as_ref().map_or(cap, |h| h.value.min(cap));
    raw.horizon = Some(serde_saphyr::Spanned::new(h, loc, loc));
    let Ok(s) = Scenario::from_raw(raw, "fuzz.yaml") else { return };
    let small = s.samples().len() <= 30
        && s.demes().len() <= 6
        && s.loci() <= 3
        && s.demes().iter().all(|d| d.size().epochs().iter().all(|e| e.size <= 1.0e5))
        && s.mutation().is_none_or(|m| m.sites() <= 1_000_000)
        && s.recombination().is_none_or(|r| r.recombination_rate() * r.sites() as f64 <= 0.01);
    if !small {
        return;
    }
    let key = seedline::batch::master_key(s.seed());
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let keep = seedline::batch::Keep { trees: true, mutations: true, ld: s.recombination().is_some() };
    let mut sim = seedline::engine::Simulator::new();
    let _ = seedline::batch::simulate_replicate(&mut sim, &s, &key, 0, keep, &labels, None);
    if let Ok(model) = seedline::approx::ApproxModel::new(&s) {
        let _ = seedline::batch::simulate_replicate(&mut sim, &s, &key, 1, keep, &labels, Some(&model));
    }
});
