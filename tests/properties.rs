//! Property tests: every scenario that validates simulates without panic, and every
//! genealogy is well formed.

use proptest::prelude::*;
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::Simulator;
use seedline::scenario::Scenario;

fn law() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("{law: none}".to_string()),
        (1u64..6).prop_map(|m| format!("{{law: uniform, max: {m}}}")),
        (1.0f64..6.0).prop_map(|m| format!("{{law: geometric, mean: {m}}}")),
        (0.15f64..2.0, proptest::option::of(1u64..400)).prop_map(|(a, m)| match m {
            Some(m) => format!("{{law: pareto, alpha: {a}, max: {m}}}"),
            None => format!("{{law: pareto, alpha: {a}}}"),
        }),
        proptest::collection::vec(0.0f64..1.0, 1..5)
            .prop_filter("positive", |w| w.iter().sum::<f64>() > 0.01)
            .prop_map(|w| format!("{{law: table, weights: {w:?}}}")),
        (0.0f64..1.0, 2.0f64..30.0).prop_map(|(w, m)| format!(
            "{{law: mixture, parts: [{{weight: {}, law: none}}, {{weight: {w}, law: geometric, mean: {m}}}]}}",
            1.0 - w
        )),
        (1u64..40).prop_map(|f| format!("{{law: since_founding, founded: {f}}}")),
    ]
}

fn scenario() -> impl Strategy<Value = String> {
    (proptest::collection::vec((1u64..30, law(), 0u64..5, 0u64..4, 0u64..3), 1..4), 0.0f64..0.3, 0u64..1000, 1u64..2000)
        .prop_map(|(demes, m, seed, horizon)| {
            let mut y = format!("seed: {seed}\nhorizon: {horizon}\ndemes:\n");
            let mut samples = String::new();
            for (i, (n, law, now, old, seeds)) in demes.iter().enumerate() {
                y.push_str(&format!("  - {{name: d{i}, size: {n}, dormancy: {law}}}\n"));
                if *now > 0 {
                    samples.push_str(&format!("  - {{deme: d{i}, count: {}}}\n", now.min(n)));
                }
                if *old > 0 {
                    samples.push_str(&format!("  - {{deme: d{i}, count: {}, generations_ago: 3}}\n", old.min(n)));
                }
                if *seeds > 0 {
                    samples.push_str(&format!("  - {{deme: d{i}, count: {seeds}, from: seedbank}}\n"));
                }
            }
            if samples.is_empty() {
                samples.push_str("  - {deme: d0, count: 1}\n");
            }
            if demes.len() > 1 {
                y.push_str("migration:\n");
                for i in 0..demes.len() {
                    y.push_str(&format!("  - {{from: d{i}, to: d{}, rate: {m}}}\n", (i + 1) % demes.len()));
                }
            }
            y.push_str("samples:\n");
            y.push_str(&samples);
            y
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn valid_scenarios_give_well_formed_genealogies(yaml in scenario(), rep in 0u64..1000) {
        // Scenarios that the parser refuses (e.g. seed-bank samples under an infinite mean)
        // are not this property's business.
        let Ok(s) = Scenario::from_yaml_str(&yaml, "prop") else { return Ok(()) };
        let g = Simulator::new().simulate(&s, &mut replicate_rng(&master_key(s.seed()), rep));
        let n = s.samples().len();
        prop_assert!(g.n_merge_nodes() <= n.saturating_sub(1));
        prop_assert!(!g.roots().is_empty() && g.roots().len() <= n);
        let graph = g.graph();
        let mut sum = 0;
        for e in graph.edge_indices() {
            let (p, c) = graph.edge_endpoints(e).unwrap();
            let w = graph[e];
            // Times increase toward the roots, and a link spans at least one generation.
            prop_assert!(graph[p].time > graph[c].time);
            prop_assert_eq!(w.length, graph[p].time - graph[c].time);
            prop_assert!(w.jumps >= 1 && w.jumps <= w.length);
            sum += w.length;
        }
        prop_assert_eq!(g.total_length(), sum);
        // Every node except the roots has exactly one parent; every sample is in some tree.
        let counts = g.leaf_counts();
        let covered: u32 = g.roots().iter().map(|r| counts[r.index()]).sum();
        prop_assert_eq!(covered as usize, n);
        for v in graph.node_indices() {
            let parents = graph.neighbors_directed(v, petgraph::Direction::Incoming).count();
            prop_assert_eq!(parents, usize::from(!g.roots().contains(&v)));
        }
        if let Some(t) = g.tmrca() {
            prop_assert!(t <= s.horizon());
        }
    }
}
