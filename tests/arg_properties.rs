//! Property tests of the ARG engine on small random cases: every local tree is a valid
//! genealogy of all samples, neighbouring trees differ, trees change only where adjacent
//! sites were separated, and a gap separated once changes the tree by one prune-and-regraft.

use proptest::prelude::*;
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::arg::{Arg, ArgConfig, ArgSimulator};
use seedline::genealogy::Genealogy;
use seedline::scenario::Scenario;
use std::collections::BTreeSet;

fn law() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("{law: none}".to_string()),
        (1u64..5).prop_map(|m| format!("{{law: uniform, max: {m}}}")),
        (1.0f64..4.0).prop_map(|m| format!("{{law: geometric, mean: {m}}}")),
        (5u64..30).prop_map(|f| format!("{{law: since_founding, founded: {f}}}")),
    ]
}

/// YAML of one or two demes, samples now and 3 generations ago (sampled ancestors), seeds from
/// the bank, migration, and sometimes a short horizon (forests).
fn scenario() -> impl Strategy<Value = String> {
    (
        proptest::collection::vec((2u64..25, law(), 1u64..4, 0u64..3), 1..3),
        0.0f64..0.2,
        prop_oneof![Just(0u64), 5u64..200],
    )
        .prop_map(|(demes, m, horizon)| {
            let mut y = if horizon > 0 { format!("horizon: {horizon}\ndemes:\n") } else { "demes:\n".to_string() };
            let mut samples = String::new();
            for (i, (n, law, now, old)) in demes.iter().enumerate() {
                y.push_str(&format!("  - {{name: d{i}, size: {n}, dormancy: {law}}}\n"));
                samples.push_str(&format!("  - {{deme: d{i}, count: {}}}\n", now.min(n)));
                if *old > 0 {
                    samples.push_str(&format!("  - {{deme: d{i}, count: {}, generations_ago: 3}}\n", old.min(n)));
                }
            }
            if demes.len() == 2 && m > 0.0 {
                y.push_str(&format!(
                    "migration:\n  - {{from: d0, to: d1, rate: {m}}}\n  - {{from: d1, to: d0, rate: {m}}}\n"
                ));
            }
            y.push_str("samples:\n");
            y + &samples
        })
}

/// Parent of every node (None for roots).
fn parents(g: &Genealogy) -> Vec<Option<usize>> {
    let mut p = vec![None; g.graph().node_count()];
    for e in g.graph().edge_indices() {
        let (a, b) = g.graph().edge_endpoints(e).unwrap();
        assert!(p[b.index()].is_none(), "node {} has two parents", b.index());
        p[b.index()] = Some(a.index());
    }
    p
}

/// Time of the most recent common ancestor of samples i and j (None in different trees).
fn mrca_times(g: &Genealogy) -> Vec<Vec<Option<u64>>> {
    let p = parents(g);
    let n = g.n_samples();
    let path = |mut v: usize| {
        let mut out = vec![v];
        while let Some(u) = p[v] {
            out.push(u);
            v = u;
        }
        out
    };
    let paths: Vec<Vec<usize>> = (0..n).map(path).collect();
    let mut m = vec![vec![None; n]; n];
    for i in 0..n {
        for j in 0..n {
            let on_j: BTreeSet<usize> = paths[j].iter().copied().collect();
            m[i][j] =
                paths[i].iter().find(|v| on_j.contains(v)).map(|&v| g.graph()[petgraph::graph::NodeIndex::new(v)].time);
        }
    }
    m
}

/// The tree as a set of (samples below, time, jumps above) per node: equal iff same dated,
/// labelled tree with the same jumps.
fn shape(g: &Genealogy) -> BTreeSet<(Vec<usize>, u64, u64)> {
    let p = parents(g);
    let k = g.graph().node_count();
    let mut below: Vec<Vec<usize>> = vec![Vec::new(); k];
    for i in 0..g.n_samples() {
        let mut v = Some(i);
        while let Some(u) = v {
            below[u].push(i);
            v = p[u];
        }
    }
    let jumps_above = |v: usize| {
        g.graph()
            .edges_directed(petgraph::graph::NodeIndex::new(v), petgraph::Direction::Incoming)
            .map(|e| e.weight().jumps)
            .next()
            .unwrap_or(0)
    };
    (0..k).map(|v| (below[v].clone(), g.graph()[petgraph::graph::NodeIndex::new(v)].time, jumps_above(v))).collect()
}

fn check_tree(g: &Genealogy, n: usize, forest_allowed: bool) {
    assert_eq!(g.n_samples(), n);
    for i in 0..n {
        assert_eq!(g.graph()[petgraph::graph::NodeIndex::new(i)].sample, Some(i as u32));
    }
    let p = parents(g);
    let mut sum = 0;
    for e in g.graph().edge_indices() {
        let (a, b) = g.graph().edge_endpoints(e).unwrap();
        let w = g.graph()[e];
        let (ta, tb) = (g.graph()[a].time, g.graph()[b].time);
        assert!(ta > tb, "time must increase towards the root");
        assert_eq!(w.length, ta - tb);
        assert!(w.jumps >= 1 && w.jumps <= w.length);
        sum += ta - tb;
    }
    assert_eq!(g.total_length(), sum);
    let roots: Vec<usize> = g.roots().iter().map(|r| r.index()).collect();
    for (v, pv) in p.iter().enumerate() {
        assert_eq!(pv.is_none(), roots.contains(&v), "node {v}: roots are exactly the parentless nodes");
        let kids = g.children(petgraph::graph::NodeIndex::new(v)).count();
        if v >= n {
            assert!(kids >= 2, "merge node {v} has {kids} children");
        }
    }
    let counts = g.leaf_counts();
    assert_eq!(roots.iter().map(|&r| counts[r] as usize).sum::<usize>(), n, "every sample below one root");
    if !forest_allowed {
        assert!(g.is_tree());
    }
}

/// Whether `b` is `a` with one subtree (a cluster S of `a`) pruned and regrafted: the MRCA
/// times within S and within its complement are unchanged.
fn one_prune_and_regraft(a: &Genealogy, b: &Genealogy) -> bool {
    let (ma, mb) = (mrca_times(a), mrca_times(b));
    let n = a.n_samples();
    shape(a).into_iter().map(|(s, _, _)| s).any(|s| {
        let inside: Vec<bool> = (0..n).map(|i| s.contains(&i)).collect();
        (0..n).all(|i| (0..n).all(|j| inside[i] != inside[j] || ma[i][j] == mb[i][j]))
    })
}

fn check_arg(arg: &Arg, n: usize, sites: u64, forest_allowed: bool) {
    assert_eq!(arg.trees().first().unwrap().left(), 0);
    assert_eq!(arg.trees().last().unwrap().right(), sites);
    for t in arg.trees() {
        check_tree(t.genealogy(), n, forest_allowed);
    }
    for w in arg.trees().windows(2) {
        assert_eq!(w[0].right(), w[1].left());
        assert_ne!(shape(w[0].genealogy()), shape(w[1].genealogy()), "equal neighbours must be one interval");
        let gap = w[1].left();
        let splits = arg.splits().iter().find(|&&(g, _)| g == gap).map_or(0, |&(_, c)| c);
        assert!(splits >= 1, "the tree changed at gap {gap} where no individual separated the sites");
        if splits == 1 {
            assert!(one_prune_and_regraft(w[0].genealogy(), w[1].genealogy()), "gap {gap}: not one SPR");
        }
    }
    assert!(arg.breakpoints() as u64 <= arg.splits().iter().map(|&(_, c)| c as u64).sum::<u64>());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn local_trees_are_genealogies_linked_by_prune_and_regraft(
        yaml in scenario(), sites in 1u64..30, r in prop_oneof![Just(0.0), 0.001f64..0.3], seed in 0u64..1000,
    ) {
        let s = Scenario::from_yaml_str(&yaml, "prop").unwrap();
        let config = ArgConfig::new(sites, r).unwrap();
        let arg = ArgSimulator::new().simulate(&s, &config, &mut replicate_rng(&master_key(seed), 0));
        let forest_allowed = yaml.contains("horizon") || yaml.contains("since_founding");
        check_arg(&arg, s.samples().len(), sites, forest_allowed);
        if r == 0.0 {
            prop_assert_eq!(arg.trees().len(), 1);
        }
    }
}
