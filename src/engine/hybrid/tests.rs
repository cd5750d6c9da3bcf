//! Unit tests of the hybrid: the switch rule on worked cases, and its two limits (switch at 0
//! is the approximate engine; a switch beyond the MRCA is the exact engine, draw for draw).

use super::*;
use crate::batch::{master_key, replicate_rng};

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

#[test]
fn switch_rule_by_hand() {
    // One deme of N = 10^4 without dormancy, n = 50: k* = floor(2 sqrt(0.01 * 10^4)) = 20 and
    // E[time from 50 to 20 lineages] = 2 N (1/20 - 1/50) = 600 generations (Kingman).
    let s = scenario("demes: [{name: a, size: 10000}]\nsamples: [{deme: a, count: 50}]\n");
    let p = plan(&s).unwrap();
    assert_eq!((p.size_part, p.lineage_part, p.switch), (0, 600, 600));
    // Geometric dormancy of mean 3: N_e = 9 N, k* = floor(2 sqrt(900)) = 60 >= 50: no exact part.
    let s = scenario(
        "demes: [{name: a, size: 10000, dormancy: {law: geometric, mean: 3}}]\nsamples: [{deme: a, count: 50}]\n",
    );
    assert_eq!(plan(&s).unwrap().switch, 0);
    // A bottleneck of N = 50 for 100 generations, then N = 10^4: T_size = 100; with n = 10
    // (k* = 2 at N_e = 10^4 ... no: k* = 20 >= 10) no lineage part.
    let s = scenario(
        "demes: [{name: a, size: [{generations_ago: 0, size: 50}, {generations_ago: 100, size: 10000}]}]\n\
         samples: [{deme: a, count: 10}]\n",
    );
    let p = plan(&s).unwrap();
    assert_eq!((p.size_part, p.lineage_part, p.switch), (100, 0, 100));
    // A small population in the oldest epoch: no limit in the distant past, no hybrid.
    let s = scenario(
        "demes: [{name: a, size: [{generations_ago: 0, size: 5000}, {generations_ago: 100, size: 50}]}]\n\
         samples: [{deme: a, count: 10}]\n",
    );
    assert!(plan(&s).is_err());
}

#[test]
fn auto_picks_the_hybrid_only_with_recombination() {
    let recomb = "mutation: {rate: 0, sites: 1000}\nrecombination: {rate: 1.0e-6}\n";
    let bottleneck = "demes: [{name: a, size: [{generations_ago: 0, size: 50}, {generations_ago: 100, size: 10000}]}]\n\
                      samples: [{deme: a, count: 10}]\n";
    let auto = |yaml: &str| crate::engine::resolve(crate::engine::EngineChoice::Auto, &scenario(yaml)).unwrap();
    assert_eq!(auto(bottleneck).kind, EngineKind::Exact);
    let d = auto(&format!("{bottleneck}{recomb}"));
    assert_eq!((d.kind, d.switch), (EngineKind::Hybrid, Some(100)));
    let large = "demes: [{name: a, size: 10000}]\nsamples: [{deme: a, count: 50}]\n";
    assert_eq!(auto(large).kind, EngineKind::Approx);
    assert_eq!(auto(&format!("{large}{recomb}")).switch, Some(600));
    let small = "demes: [{name: a, size: 10000}]\nsamples: [{deme: a, count: 10}]\n";
    assert_eq!(auto(&format!("{small}{recomb}")).kind, EngineKind::Approx);
    let tiny = "demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 10}]\n";
    assert_eq!(auto(&format!("{tiny}{recomb}")).kind, EngineKind::Exact);
    let err = crate::engine::resolve(crate::engine::EngineChoice::Hybrid, &scenario(tiny)).unwrap_err();
    assert!(err.to_string().contains("distant past"), "{err}");
}

#[test]
fn a_switch_beyond_every_mrca_is_the_exact_engine() {
    // With T far beyond every MRCA the exact part does everything: same stream, same trees
    // as the exact engine itself (the approximate part gets nothing to do).
    let yaml = "demes: [{name: a, size: 300, dormancy: {law: geometric, mean: 2}}]\n\
                samples: [{deme: a, count: 6}, {deme: a, count: 2, from: seedbank}]\n";
    let s = scenario(yaml);
    let model = ApproxModel::new(&s).unwrap();
    let config = ArgConfig::new(400, 2e-4).unwrap();
    let key = master_key(6);
    let mut h = HybridSimulator::new();
    for rep in 0..20 {
        let exact = ArgSimulator::new().simulate(&s, &config, &mut replicate_rng(&key, rep));
        let hybrid = h.simulate(&model, &config, 1 << 40, &mut replicate_rng(&key, rep)).into_arg();
        let show = |a: &crate::engine::arg::Arg| {
            a.trees()
                .iter()
                .map(|t| {
                    let mut s = String::new();
                    let labels: Vec<String> = (0..8).map(|i| i.to_string()).collect();
                    t.genealogy().write_newick(&labels, 0, &mut s);
                    (t.left(), s)
                })
                .collect::<Vec<_>>()
        };
        assert_eq!(show(&exact), show(&hybrid), "replicate {rep}");
        assert_eq!(exact.tree_crossovers(), hybrid.tree_crossovers());
    }
}

#[test]
fn hand_over_keeps_every_site_and_makes_trees() {
    // Switches inside the genealogy: every local tree is a tree over all samples whose nodes
    // are older than their children, whatever part made them.
    let s = scenario(
        "demes: [{name: a, size: [{generations_ago: 0, size: 60}, {generations_ago: 40, size: 3000}], \
         dormancy: {law: uniform, max: 3}}]\nsamples: [{deme: a, count: 12}, {deme: a, count: 2, generations_ago: 80}]\n",
    );
    let model = ApproxModel::new(&s).unwrap();
    let config = ArgConfig::new(2000, 5e-6).unwrap();
    let key = master_key(7);
    let mut h = HybridSimulator::new();
    for switch in [0, 10, 40, 79, 200] {
        for rep in 0..6 {
            let arg = h.simulate(&model, &config, switch, &mut replicate_rng(&key, rep)).into_arg();
            assert_eq!(arg.trees().last().unwrap().right(), 2000);
            for t in arg.trees() {
                let g = t.genealogy();
                assert!(g.is_tree(), "switch {switch}, replicate {rep}");
                assert_eq!(g.leaf_counts()[g.roots()[0].index()], 14);
                for e in g.graph().edge_indices() {
                    let (p, c) = g.graph().edge_endpoints(e).unwrap();
                    assert!(g.graph()[p].time > g.graph()[c].time);
                    let w = g.graph()[e];
                    assert!(w.jumps >= 1 && w.jumps <= w.length);
                }
            }
        }
    }
    // Without recombination: one genealogy.
    let g = h.genealogy(&model, 40, &mut replicate_rng(&key, 0));
    assert!(g.is_tree());
    assert!(g.steps() > 0);
}

#[test]
fn value_stability() {
    // Golden values (see approx_arg's): (events + steps, breakpoints, T_MRCA of site 0).
    let s = scenario(
        "demes: [{name: a, size: [{generations_ago: 0, size: 60}, {generations_ago: 40, size: 3000}]}]\n\
         samples: [{deme: a, count: 8}]\n",
    );
    let model = ApproxModel::new(&s).unwrap();
    let config = ArgConfig::new(5000, 1e-6).unwrap();
    let r = HybridSimulator::new().simulate(&model, &config, 40, &mut replicate_rng(&master_key(78), 2));
    let arg = r.clone().into_arg();
    let got = (r.steps(), r.breakpoints(), arg.trees()[0].genealogy().tmrca().unwrap());
    assert_eq!(got, GOLDEN);
}

/// Golden (steps, breakpoints, T_MRCA at site 0), rand 0.10.4.
const GOLDEN: (u64, usize, u64) = (516, 66, 8657);
