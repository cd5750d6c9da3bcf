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

#[test]
fn skip_ahead_without_dormancy_has_the_law_of_step_by_step() {
    // The skip-ahead draws one geometric waiting time per merge event instead of every
    // parent of every generation (the discrete Wright–Fisher chain, theory reference §1).
    // Compare with the generation-by-generation engine in distribution: N = 6 and n = 5
    // make multiple mergers common; horizon 12 makes forests common. Two-sample chi-square
    // (Press et al., Numerical Recipes §14.3) on T_MRCA (forest = 13) and total length,
    // each at level 0.001.
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    let s = scenario("horizon: 12\ndemes: [{name: a, size: 6}]\nsamples: [{deme: a, count: 5}]\n");
    let key = master_key(21);
    let reps = 6000u64;
    let run = |mut sim: Simulator, offset: u64| -> Vec<(u64, u64, u64)> {
        (0..reps)
            .map(|r| {
                let g = sim.simulate(&s, &mut replicate_rng(&key, r + offset));
                (g.tmrca().unwrap_or(13), g.total_length(), g.steps())
            })
            .collect()
    };
    let fast = run(Simulator::new(), 0);
    let slow = run(Simulator::step_by_step(), reps);
    let p_value = |a: Vec<u64>, b: Vec<u64>| {
        let max = *a.iter().chain(&b).max().unwrap() as usize;
        let (mut ca, mut cb) = (vec![0.0; max + 1], vec![0.0; max + 1]);
        a.iter().for_each(|&x| ca[x as usize] += 1.0);
        b.iter().for_each(|&x| cb[x as usize] += 1.0);
        let (mut stat, mut df) = (0.0, -1.0);
        for (x, y) in ca.iter().zip(&cb) {
            if x + y > 0.0 {
                stat += (x - y) * (x - y) / (x + y);
                df += 1.0;
            }
        }
        1.0 - ChiSquared::new(df).unwrap().cdf(stat)
    };
    let p_t = p_value(fast.iter().map(|x| x.0).collect(), slow.iter().map(|x| x.0).collect());
    let p_l = p_value(fast.iter().map(|x| x.1 / 4).collect(), slow.iter().map(|x| x.1 / 4).collect());
    assert!(p_t > 0.001 && p_l > 0.001, "p(T_MRCA) = {p_t}, p(length) = {p_l}");
    // Steps are accounted, not drawn, by the skip-ahead: the same mean.
    let mean = |v: &[(u64, u64, u64)]| v.iter().map(|x| x.2 as f64).sum::<f64>() / v.len() as f64;
    let (a, b) = (mean(&fast), mean(&slow));
    assert!((a - b).abs() < 0.05 * b, "steps {a} vs {b}");
}
