//! The engine choice: parsing, the rule of `auto`, refusals, and one call for every engine.

use super::*;
use crate::batch::{master_key, replicate_rng};

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

const LARGE: &str =
    "demes: [{name: a, size: 100000, dormancy: {law: geometric, mean: 5}}]\nsamples: [{deme: a, count: 6}]\n";
const SMALL: &str =
    "demes: [{name: a, size: 50, dormancy: {law: geometric, mean: 5}}]\nsamples: [{deme: a, count: 6}]\n";
const RECOMBINING: &str = "demes: [{name: a, size: 100000}]\nsamples: [{deme: a, count: 4}]\n\
                           mutation: {rate: 1.0e-9, sites: 1000}\nrecombination: {rate: 1.0e-9}\n";

#[test]
fn choices_parse_and_print() {
    for (text, choice) in
        [("exact", EngineChoice::Exact), ("approx", EngineChoice::Approx), ("auto", EngineChoice::Auto)]
    {
        assert_eq!(text.parse::<EngineChoice>().unwrap(), choice);
        assert_eq!(choice.to_string(), text);
    }
    assert_eq!("fast".parse::<EngineChoice>(), Err(Error::UnknownEngine("fast".to_string())));
    assert_eq!(EngineChoice::default(), EngineChoice::Auto);
}

#[test]
fn auto_picks_approx_only_inside_a_limit() {
    let large = scenario(LARGE);
    let e = Engine::new(&large, EngineChoice::Auto).unwrap();
    assert_eq!((e.kind(), e.decision().requested), (EngineKind::Approx, EngineChoice::Auto));
    assert!(e.decision().reason.contains("Kingman"), "{}", e.decision().reason);
    let small = scenario(SMALL);
    assert_eq!(Engine::new(&small, EngineChoice::Auto).unwrap().kind(), EngineKind::Exact);
    // Forced exact always runs; forced approx runs where a limit model exists, with a warning
    // in the reason when auto would not have picked it.
    assert_eq!(Engine::new(&large, EngineChoice::Exact).unwrap().kind(), EngineKind::Exact);
    let forced = Engine::new(&small, EngineChoice::Approx).unwrap();
    assert_eq!(forced.kind(), EngineKind::Approx);
    assert!(forced.decision().reason.contains("auto would pick exact"), "{}", forced.decision().reason);
}

#[test]
fn recombination_in_the_limit_runs_the_approximate_arg() {
    let s = scenario(RECOMBINING);
    let e = Engine::new(&s, EngineChoice::Auto).unwrap();
    assert_eq!(e.kind(), EngineKind::Approx);
    assert!(e.decision().reason.contains("ARG"), "{}", e.decision().reason);
    let mut rng = replicate_rng(&master_key(1), 0);
    assert!(matches!(e.simulate(&mut Scratch::default(), 0, &mut rng), Ancestry::Records(_)));
    let exact = Engine::new(&s, EngineChoice::Exact).unwrap();
    assert!(matches!(exact.simulate(&mut Scratch::default(), 0, &mut rng), Ancestry::Sequence(_)));
    // The genealogy of one site comes from the engine without recombination.
    let g = e.simulate_tree(&mut Scratch::default(), &mut replicate_rng(&master_key(1), 0));
    assert_eq!(g.n_samples(), 4);
}

#[test]
fn forced_approx_outside_every_limit_is_an_error_naming_the_deme() {
    let s = scenario(
        "demes: [{name: cave, size: 1000, dormancy: {law: pareto, alpha: 0.7}}]\nsamples: [{deme: cave, count: 3}]\n",
    );
    let err = Engine::new(&s, EngineChoice::Approx).unwrap_err();
    assert!(matches!(err, Error::Approx { .. }));
    assert!(err.to_string().contains("`cave`"), "{err}");
    // Auto falls back to the exact engine and says why.
    let e = Engine::new(&s, EngineChoice::Auto).unwrap();
    assert_eq!(e.kind(), EngineKind::Exact);
    assert!(e.decision().reason.contains("infinite mean"), "{}", e.decision().reason);
}

#[test]
fn each_engine_draws_only_from_the_given_stream() {
    for yaml in [LARGE, SMALL, RECOMBINING] {
        let s = scenario(yaml);
        for choice in [EngineChoice::Exact, EngineChoice::Auto] {
            let e = Engine::new(&s, choice).unwrap();
            let newick = |a: Ancestry| {
                let labels: Vec<String> = (0..s.samples().len()).map(|i| format!("s{i}")).collect();
                let mut out = String::new();
                match a {
                    Ancestry::Tree(g) => g.write_newick(&labels, 0, &mut out),
                    Ancestry::Sequence(arg) => arg.write_newick(&labels, 0, &mut out),
                    Ancestry::Records(r) => r.into_arg().write_newick(&labels, 0, &mut out),
                }
                out
            };
            // The same stream gives the same ancestry, with fresh or reused buffers.
            let mut scratch = Scratch::default();
            let a = newick(e.simulate(&mut scratch, 0, &mut replicate_rng(&master_key(2), 5)));
            let _ = e.simulate(&mut scratch, 0, &mut replicate_rng(&master_key(2), 6));
            let b = newick(e.simulate(&mut scratch, 0, &mut replicate_rng(&master_key(2), 5)));
            let c = newick(e.simulate(&mut Scratch::default(), 0, &mut replicate_rng(&master_key(2), 5)));
            assert_eq!(a, b);
            assert_eq!(a, c);
        }
    }
}

#[test]
fn tally_counts_runs_and_keeps_one_reason_per_engine() {
    let mut t = EngineTally::new(EngineChoice::Auto);
    let large = scenario(LARGE);
    let small = scenario(SMALL);
    for s in [&large, &small, &large] {
        t.add(Engine::new(s, EngineChoice::Auto).unwrap().decision());
    }
    assert_eq!(t.runs[&EngineKind::Approx], 2);
    assert_eq!(t.runs[&EngineKind::Exact], 1);
    assert_eq!(t.reasons.len(), 2);
    assert_eq!(t.summary(), "--engine auto: exact for 1, approx for 2 of 3 runs");
    let json = serde_json::to_value(&t).unwrap();
    assert_eq!(json["runs"]["approx"], 2);
    assert_eq!(json["requested"], "auto");
}
