//! Engine unit tests: determinism, structure, and the cases that must draw no random numbers.

use super::*;
use crate::batch::{master_key, replicate_rng};
use rand::{TryRng, rand_core::Infallible};

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

/// Panics on use: proves that a path draws no random numbers (as rand_distr's `VoidRng`).
struct VoidRng;

impl TryRng for VoidRng {
    type Error = Infallible;
    fn try_next_u32(&mut self) -> Result<u32, Infallible> {
        panic!("this path must not draw random numbers")
    }
    fn try_next_u64(&mut self) -> Result<u64, Infallible> {
        panic!("this path must not draw random numbers")
    }
    fn try_fill_bytes(&mut self, _: &mut [u8]) -> Result<(), Infallible> {
        panic!("this path must not draw random numbers")
    }
}

#[test]
fn one_sample_is_its_own_root_without_randomness() {
    let s = scenario("demes: [{name: a, size: 10}]\nsamples: [{deme: a, count: 1, generations_ago: 4}]\n");
    let g = Simulator::new().simulate(&s, &mut VoidRng);
    assert_eq!(g.tmrca(), Some(4));
    assert_eq!(g.total_length(), 0);
    assert_eq!(g.steps(), 0);
}

#[test]
fn one_individual_per_generation_without_dormancy_is_deterministic() {
    // N = 1 and R = 1: the two samples of generations 0 and 3 are on one line of descent;
    // the younger's ancestor at generation 3 is the older sample itself. No draw is needed
    // except none: R = 1 always and there is only one individual to choose.
    let s = scenario(
        "demes: [{name: a, size: 1}]\nsamples: [{deme: a, count: 1}, {deme: a, count: 1, generations_ago: 3}]\n",
    );
    let g = Simulator::new().simulate(&s, &mut VoidRng);
    assert_eq!(g.tmrca(), Some(3));
    assert_eq!(g.total_length(), 3);
    assert_eq!(g.n_merge_nodes(), 0, "the older sample is a sampled ancestor");
    let edge = g.graph().edge_weights().next().unwrap();
    assert_eq!((edge.length, edge.jumps), (3, 3));
}

#[test]
fn same_stream_same_genealogy() {
    let s = scenario(crate::scenario::DEMO_YAML);
    let key = master_key(s.seed());
    let mut sim = Simulator::new();
    let a = sim.simulate(&s, &mut replicate_rng(&key, 3));
    let b = sim.simulate(&s, &mut replicate_rng(&key, 3));
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let (mut na, mut nb) = (String::new(), String::new());
    a.write_newick(&labels, 3, &mut na);
    b.write_newick(&labels, 3, &mut nb);
    assert_eq!(na, nb);
    assert_eq!(a.steps(), b.steps());
}

#[test]
fn heavy_tail_without_truncation_ends_as_a_forest() {
    // alpha = 0.2 < 1/2: lineages meet with probability (S-1)/(N+S-1) ~ 5e-4 for N = 100
    // (theory reference §4), so with 10 lineages a forest is all but certain. The run must
    // stop at the horizon.
    let s = scenario(
        "horizon: 1.0e7\ndemes: [{name: a, size: 100, dormancy: {law: pareto, alpha: 0.2}}]\nsamples: [{deme: a, count: 10}]\n",
    );
    let key = master_key(1);
    let mut forests = 0;
    for rep in 0..20 {
        let g = Simulator::new().simulate(&s, &mut replicate_rng(&key, rep));
        forests += usize::from(!g.is_tree());
        assert!(g.roots().len() <= 10);
    }
    assert!(forests >= 18, "{forests} forests of 20");
}

#[test]
fn founders_end_the_genealogy() {
    // since_founding with N = 2: lineages reach the founding generation 30 at the latest;
    // everything older has no parent. Every root lies at or before the founding.
    let s = scenario(
        "demes: [{name: a, size: 2, dormancy: {law: since_founding, founded: 30}}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let key = master_key(9);
    for rep in 0..50 {
        let g = Simulator::new().simulate(&s, &mut replicate_rng(&key, rep));
        for r in g.roots() {
            assert!(g.graph()[*r].time <= 30);
        }
    }
}

#[test]
fn seeds_sampled_from_the_bank_start_older() {
    let s = scenario(
        "demes: [{name: a, size: 1000, dormancy: {law: uniform, max: 5}}]\nsamples: [{deme: a, count: 2, from: seedbank}]\n",
    );
    let key = master_key(2);
    let g = Simulator::new().simulate(&s, &mut replicate_rng(&key, 0));
    assert!(g.is_tree());
    // Each seed's first edge spans age + 1 <= 5 generations with one reproduction.
    assert!(g.steps() >= 2);
}

#[test]
fn infinite_mean_refuses_seedbank_samples() {
    let e = Scenario::from_yaml_str(
        "demes: [{name: a, size: 10, dormancy: {law: pareto, alpha: 0.7}}]\nsamples: [{deme: a, count: 2, from: seedbank}]\n",
        "x.yaml",
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("samples[0].from") && e.contains("infinite mean"), "{e}");
}
