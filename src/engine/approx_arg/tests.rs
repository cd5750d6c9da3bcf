//! Unit tests of the approximate ARG: structure, the streamed trees against the exact engine's
//! sweep, mutations placed tree by tree, determinism.

use super::*;
use crate::batch::{master_key, replicate_rng};
use crate::scenario::Scenario;

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

fn newick(g: &crate::genealogy::Genealogy) -> String {
    let labels: Vec<String> = (0..g.n_samples()).map(|i| format!("s{i}")).collect();
    let mut s = String::new();
    g.write_newick(&labels, 0, &mut s);
    s
}

/// Scenarios covering every path: one deme, dormancy, migration, seed-bank coalescent, seeds
/// and ancient samples, size changes.
const CASES: [&str; 5] = [
    "demes: [{name: a, size: 10000, dormancy: {law: geometric, mean: 3}}]\nsamples: [{deme: a, count: 8}]\n",
    "demes: [{name: a, size: 5000}, {name: b, size: 3000, dormancy: {law: uniform, max: 3}}]\n\
     migration: [{from: a, to: b, rate: 0.001}, {from: b, to: a, rate: 0.002}]\nsamples: [{deme: a, count: 4}, {deme: b, count: 3, from: seedbank}]\n",
    "demes: [{name: a, size: 1000, dormancy: {law: mixture, parts: [{weight: 0.999, law: none}, \
     {weight: 0.001, law: geometric, mean: 1000}]}}]\nsamples: [{deme: a, count: 5}, {deme: a, count: 2, from: seedbank}]\n",
    "demes: [{name: a, size: 2000}]\nsamples: [{deme: a, count: 5}, {deme: a, count: 3, generations_ago: 900}]\n",
    "demes: [{name: a, size: [{generations_ago: 0, size: 3000, growth: 0.001}, {generations_ago: 500, size: 8000}]}]\n\
     samples: [{deme: a, count: 6}]\n",
];

#[test]
fn streamed_trees_are_the_exact_engines_cut_of_the_records() {
    // The streaming sweep must give exactly the trees that the exact engine's sweep
    // (crate::arg, via into_arg) cuts from the same records, and mark as breakpoints exactly
    // the neighbours that differ in topology or branch lengths.
    let key = master_key(4);
    let mut sim = ApproxArgSimulator::new();
    for (yaml, process) in CASES.iter().flat_map(|y| [(y, ArgModel::Hudson), (y, ArgModel::SmcPrime)]) {
        let s = scenario(yaml);
        let model = ApproxModel::new(&s).unwrap();
        let config = ArgConfig::new(20_000, 2e-8).unwrap();
        for rep in 0..8 {
            let records = sim.simulate_with(&model, &config, process, &mut replicate_rng(&key, rep));
            let mut streamed = Vec::new();
            let mut visible = 0;
            records.for_each_tree(|t, v| {
                streamed.push((t.left(), t.right(), newick(t.genealogy())));
                visible += usize::from(v);
            });
            let arg = records.clone().into_arg();
            let cut: Vec<_> = arg.trees().iter().map(|t| (t.left(), t.right(), newick(t.genealogy()))).collect();
            assert_eq!(streamed, cut, "replicate {rep} of\n{yaml}");
            assert_eq!(visible, visible_breakpoints(arg.trees()));
            assert_eq!(visible, records.breakpoints());
            assert!(visible <= arg.breakpoints());
        }
    }
}

#[test]
fn local_trees_tile_the_sequence_and_every_tree_is_a_tree() {
    let key = master_key(5);
    let mut sim = ApproxArgSimulator::new();
    let mut recombined = [0, 0];
    for (yaml, process) in CASES.iter().flat_map(|y| [(y, ArgModel::Hudson), (y, ArgModel::SmcPrime)]) {
        let s = scenario(yaml);
        let model = ApproxModel::new(&s).unwrap();
        let n = s.samples().len();
        let config = ArgConfig::new(5000, 1e-7).unwrap();
        for rep in 0..5 {
            let arg = sim.simulate_with(&model, &config, process, &mut replicate_rng(&key, rep)).into_arg();
            assert_eq!(arg.trees()[0].left(), 0);
            assert_eq!(arg.trees().last().unwrap().right(), 5000);
            for w in arg.trees().windows(2) {
                assert_eq!(w[0].right(), w[1].left());
            }
            for t in arg.trees() {
                let g = t.genealogy();
                assert!(g.is_tree(), "{yaml}");
                assert_eq!(g.n_merge_nodes(), n - 1, "binary merges only");
                for e in g.graph().edge_indices() {
                    let (p, c) = g.graph().edge_endpoints(e).unwrap();
                    let w = g.graph()[e];
                    assert!(g.graph()[p].time > g.graph()[c].time);
                    assert!(w.jumps >= 1 && w.jumps <= w.length);
                }
            }
            assert!(arg.breakpoints() as u64 <= arg.splits().iter().map(|&(_, c)| c as u64).sum::<u64>());
            assert!(visible_breakpoints(arg.trees()) as u64 <= arg.tree_crossovers());
            recombined[usize::from(process == ArgModel::SmcPrime)] += arg.breakpoints();
        }
    }
    assert!(recombined.iter().all(|&b| b > 50), "{recombined:?} breakpoints");
}

#[test]
fn without_recombination_there_is_one_tree() {
    let s = scenario(CASES[0]);
    let model = ApproxModel::new(&s).unwrap();
    let configs =
        [ArgConfig::new(1, 0.0).unwrap(), ArgConfig::new(1000, 0.0).unwrap(), ArgConfig::new(1, 0.5).unwrap()];
    for (config, process) in configs.into_iter().flat_map(|c| [(c, ArgModel::Hudson), (c, ArgModel::SmcPrime)]) {
        let r =
            ApproxArgSimulator::new().simulate_with(&model, &config, process, &mut replicate_rng(&master_key(1), 0));
        assert_eq!((r.breakpoints(), r.recombination_events(), r.tree_crossovers()), (0, 0, 0));
        let arg = r.into_arg();
        assert_eq!(arg.trees().len(), 1);
        assert!(arg.trees()[0].genealogy().is_tree());
    }
}

#[test]
fn deterministic_given_the_stream_and_reusable() {
    let s = scenario(CASES[1]);
    let model = ApproxModel::new(&s).unwrap();
    let config = ArgConfig::new(10_000, 1e-7).unwrap();
    let key = master_key(9);
    let mut sim = ApproxArgSimulator::new();
    for process in [ArgModel::Hudson, ArgModel::SmcPrime] {
        let shapes = |sim: &mut ApproxArgSimulator, rep| {
            let arg = sim.simulate_with(&model, &config, process, &mut replicate_rng(&key, rep)).into_arg();
            arg.trees().iter().map(|t| newick(t.genealogy())).collect::<Vec<_>>()
        };
        let a = shapes(&mut sim, 3);
        let _ = shapes(&mut sim, 4);
        assert_eq!(a, shapes(&mut sim, 3));
        assert_eq!(a, shapes(&mut ApproxArgSimulator::new(), 3));
    }
}

#[test]
fn horizon_leaves_a_forest_on_every_tree() {
    let s = scenario("horizon: 50\ndemes: [{name: a, size: 100000}]\nsamples: [{deme: a, count: 4}]\n");
    let model = ApproxModel::new(&s).unwrap();
    let config = ArgConfig::new(100, 1e-3).unwrap();
    for process in [ArgModel::Hudson, ArgModel::SmcPrime] {
        let arg = ApproxArgSimulator::new()
            .simulate_with(&model, &config, process, &mut replicate_rng(&master_key(1), 0))
            .into_arg();
        // E[first merge] = N/6 ~ 16667 generations > 50: almost surely no merge at any site.
        assert!(arg.trees().iter().all(|t| t.genealogy().roots().len() == 4));
    }
}

#[test]
fn one_sample_is_one_leaf() {
    let s = scenario("demes: [{name: a, size: 1000}]\nsamples: [{deme: a, count: 1, generations_ago: 3}]\n");
    let model = ApproxModel::new(&s).unwrap();
    let arg = ApproxArgSimulator::new()
        .simulate(&model, &ArgConfig::new(9, 1.0).unwrap(), &mut replicate_rng(&master_key(1), 0))
        .into_arg();
    assert_eq!(arg.trees().len(), 1);
    assert_eq!(arg.trees()[0].genealogy().tmrca(), Some(3));
}

#[test]
fn mutations_streamed_are_those_placed_on_the_cut_trees() {
    // Same stream, same trees in the same order: `locus` must place exactly the mutations that
    // mutation::place_along places on into_arg, and summarise the trees as LocusOutcome::of_arg
    // (breakpoints aside: the stream counts visible changes only).
    let s = scenario(
        "demes: [{name: a, size: 20000, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 7}]\n\
         mutation: {reproduction_rate: 2.0e-8, dormant_rate: 1.0e-9, sites: 100000}\nrecombination: {rate: 1.0e-8}\n",
    );
    let model = ApproxModel::new(&s).unwrap();
    let config = *s.recombination().unwrap();
    let key = master_key(12);
    let demes = vec![0u32; 7];
    for rep in 0..5 {
        let records = ApproxArgSimulator::new().simulate(&model, &config, &mut replicate_rng(&key, rep));
        let mut text = String::new();
        let labels: Vec<String> = (0..7).map(|i| format!("x{i}")).collect();
        let (out, m) = records
            .locus(s.mutation(), &demes, Some((&labels, "tag", &mut text)), &mut replicate_rng(&key, 100 + rep))
            .unwrap();
        let arg = records.clone().into_arg();
        let again = crate::mutation::place_along(
            arg.trees(),
            s.mutation().unwrap(),
            demes.clone(),
            &mut replicate_rng(&key, 100 + rep),
        )
        .unwrap();
        let m = m.unwrap();
        assert_eq!(m.positions, again.positions);
        assert!(!m.positions.is_empty());
        for site in 0..m.haplotypes.sites() {
            assert_eq!(m.haplotypes.site_bits(site), again.haplotypes.site_bits(site));
        }
        let of_arg = crate::batch::LocusOutcome::of_arg(&arg, None);
        assert_eq!((out.tmrca, out.total_length, out.roots), (of_arg.tmrca, of_arg.total_length, of_arg.roots));
        assert_eq!(out.breakpoints, Some(visible_breakpoints(arg.trees()) as u64));
        let mut expected = String::new();
        arg.write_newick_tagged(&labels, "tag", &mut expected);
        assert_eq!(text, expected);
    }
}

#[test]
fn value_stability() {
    // Golden values: a change here changes every result of these engines for a given seed;
    // update deliberately (and say so in the changelog of the commit).
    let s = scenario(CASES[1]);
    let model = ApproxModel::new(&s).unwrap();
    let config = ArgConfig::new(50_000, 2e-8).unwrap();
    let mut got = Vec::new();
    for process in [ArgModel::Hudson, ArgModel::SmcPrime] {
        let r =
            ApproxArgSimulator::new().simulate_with(&model, &config, process, &mut replicate_rng(&master_key(77), 5));
        let arg = r.clone().into_arg();
        got.push((r.steps(), r.breakpoints(), arg.trees()[0].genealogy().tmrca().unwrap(), r.tree_crossovers()));
    }
    assert_eq!(got, GOLDEN);
}

/// (events, breakpoints, T_MRCA of site 0, crossovers on the trees) of Hudson and SMC', rand 0.10.4.
const GOLDEN: [(u64, usize, u64, u64); 2] = [(700, 51, 32823, 70), (529, 23, 28075, 33)];
