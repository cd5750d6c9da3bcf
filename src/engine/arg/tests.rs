//! ARG unit tests: the exact coupling with the engine at r = 0, hand-checked small cases and
//! hand-computed linkage disequilibrium.

use super::*;
use crate::batch::{master_key, replicate_rng};
use crate::engine::Simulator;

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

fn newick(g: &crate::genealogy::Genealogy) -> String {
    let labels: Vec<String> = (0..g.n_samples()).map(|i| format!("s{i}")).collect();
    let mut s = String::new();
    g.write_newick(&labels, 0, &mut s);
    s
}

#[test]
fn config_is_checked() {
    assert_eq!(ArgConfig::new(0, 0.1), Err(ArgError::NoSites));
    assert_eq!(ArgConfig::new(10, -1.0), Err(ArgError::BadRate(-1.0)));
    assert!(matches!(ArgConfig::new(10, f64::NAN), Err(ArgError::BadRate(_))));
    assert_eq!(ArgConfig::new((1 << 53) + 1, 0.0), Err(ArgError::TooManySites((1 << 53) + 1)));
    assert_eq!(ArgConfig::new(7, 0.5).unwrap().sites(), 7);
}

#[test]
fn without_recombination_the_one_tree_is_the_engines_genealogy() {
    // Same model, same stream: with r = 0 the ARG engine draws exactly the engine's random
    // numbers in the engine's order, so the single local tree must be the engine's genealogy,
    // replicate by replicate (dormancy, migration, seed-bank samples, sampled ancestors,
    // horizon forests, founders). The engine runs step by step: its skip-ahead without
    // dormancy draws other numbers for the same law.
    let cases = [
        crate::scenario::DEMO_YAML,
        "demes: [{name: a, size: 30, dormancy: {law: geometric, mean: 2.5}}]\nsamples: [{deme: a, count: 6}, {deme: a, count: 2, generations_ago: 7}]\n",
        "demes: [{name: a, size: 3}]\nsamples: [{deme: a, count: 3}, {deme: a, count: 2, generations_ago: 2}, {deme: a, count: 1, generations_ago: 3}]\n",
        "demes: [{name: a, size: 40, dormancy: {law: uniform, max: 4}}]\nsamples: [{deme: a, count: 4, from: seedbank}, {deme: a, count: 3}]\n",
        "horizon: 40\ndemes: [{name: a, size: 50}]\nsamples: [{deme: a, count: 6}]\n",
        "demes: [{name: a, size: 2, dormancy: {law: since_founding, founded: 12}}]\nsamples: [{deme: a, count: 2}, {deme: a, count: 2, generations_ago: 1}]\n",
    ];
    let config = ArgConfig::new(25, 0.0).unwrap();
    let key = master_key(11);
    let (mut engine, mut arg) = (Simulator::step_by_step(), ArgSimulator::new());
    for yaml in cases {
        let s = scenario(yaml);
        for rep in 0..40 {
            let g = engine.simulate(&s, &mut replicate_rng(&key, rep));
            let a = arg.simulate(&s, &config, &mut replicate_rng(&key, rep));
            assert_eq!(a.trees().len(), 1);
            let t = &a.trees()[0];
            assert_eq!((t.left(), t.right()), (0, 25));
            assert_eq!(newick(t.genealogy()), newick(&g), "replicate {rep} of\n{yaml}");
            assert_eq!(t.genealogy().roots().len(), g.roots().len());
            let jumps = |g: &crate::genealogy::Genealogy| g.graph().edge_weights().map(|e| e.jumps).sum::<u64>();
            assert_eq!(jumps(t.genealogy()), jumps(&g));
            assert_eq!((a.breakpoints(), a.recombination_events(), a.tree_crossovers()), (0, 0, 0));
        }
    }
}

#[test]
fn one_parent_per_generation_makes_every_crossover_invisible() {
    // N = 1, no dormancy: both parents of every individual are the one individual of the
    // previous generation, so the samples of generations 0 and 1 (one each) meet at
    // generation 1 at every site whatever the crossovers: the older sample is the parent of
    // the younger at every site, one tree (s1 ancestor of s0, edge of 1), no breakpoint. With
    // r = 5 per gap and 40 gaps the young sample recombines (P(no switch) = ((1 + e^-10)/2)^40
    // ~ 1e-12).
    let s = scenario(
        "demes: [{name: a, size: 1}]\nsamples: [{deme: a, count: 1}, {deme: a, count: 1, generations_ago: 1}]\n",
    );
    let config = ArgConfig::new(41, 5.0).unwrap();
    let a = simulate(&s, &config, &mut replicate_rng(&master_key(3), 0));
    assert_eq!(a.breakpoints(), 0);
    assert_eq!(newick(a.trees()[0].genealogy()), "[replicate 0](s0:1)s1;\n");
    assert_eq!(a.recombination_events(), 1);
    assert!(a.tree_crossovers() > 0);
    let mut out = String::new();
    a.write_newick(&["x".into(), "y".into()], 4, &mut out);
    assert_eq!(out, "[replicate 4 sites 0-40](x:1)y;\n");
}

#[test]
fn one_sample_is_one_leaf_everywhere() {
    let s = scenario("demes: [{name: a, size: 10}]\nsamples: [{deme: a, count: 1, generations_ago: 3}]\n");
    let a = simulate(&s, &ArgConfig::new(9, 1.0).unwrap(), &mut replicate_rng(&master_key(1), 0));
    assert_eq!(a.trees().len(), 1);
    assert_eq!(a.trees()[0].genealogy().tmrca(), Some(3));
    assert_eq!(a.steps(), 0);
}

#[test]
fn local_trees_tile_the_sequence_and_are_lookups() {
    let s = scenario(
        "demes: [{name: a, size: 200, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 6}]\n",
    );
    let config = ArgConfig::new(1000, 2e-5).unwrap();
    let mut sim = ArgSimulator::new();
    let mut changed = 0;
    for rep in 0..10 {
        let a = sim.simulate(&s, &config, &mut replicate_rng(&master_key(5), rep));
        assert_eq!(a.trees()[0].left(), 0);
        assert_eq!(a.trees().last().unwrap().right(), 1000);
        for w in a.trees().windows(2) {
            assert_eq!(w[0].right(), w[1].left());
        }
        for t in a.trees() {
            assert!(std::ptr::eq(a.tree_at(t.left()), t) && std::ptr::eq(a.tree_at(t.right() - 1), t));
            assert!(t.genealogy().is_tree());
        }
        changed += a.breakpoints();
        assert!(a.breakpoints() as u64 <= a.splits().iter().map(|&(_, c)| c as u64).sum::<u64>());
    }
    // E[tree crossovers] = r (L-1) E[J] ~ 2e-5 * 999 * 2 N E[R] a_6 = 2e-5 * 999 * 800 * 2.28 ~ 36
    // per replicate (theory reference §3.3 per lineage; Kingman shape); most are visible.
    assert!(changed > 10, "{changed} breakpoints in 10 replicates");
}
