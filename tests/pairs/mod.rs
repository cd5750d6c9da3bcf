//! Readings of simulated genealogies for the prediction tests: the time of the common
//! ancestor of chosen pairs of samples, the expected number of mutations separating them
//! given the genealogy (the mutation model's edge means summed along the path, an unbiased
//! stand-in for π without Poisson noise), T_MRCA, total length and the expected SFS given the
//! genealogy (edge means by number of samples below).
#![allow(dead_code)]

use seedline::batch::{BatchConfig, run};
use seedline::genealogy::Genealogy;
use seedline::scenario::Scenario;

/// What one replicate shows.
#[derive(Debug, Clone)]
pub struct Reading {
    /// Time of the common ancestor of each requested pair.
    pub pair_times: Vec<f64>,
    /// Expected differences of each pair given the genealogy (0 without a mutation model).
    pub pair_diffs: Vec<f64>,
    /// T_MRCA (NaN for a forest).
    pub tmrca: f64,
    /// Total branch length.
    pub length: f64,
    /// Expected ξ_i given the genealogy, i = 1..n-1.
    pub sfs: Vec<f64>,
}

/// Reads one genealogy.
pub fn read(s: &Scenario, g: &Genealogy, pairs: &[(usize, usize)]) -> Reading {
    let graph = g.graph();
    let n = g.n_samples();
    let mean = |len: u64, jumps: u64| s.mutation().map_or(0.0, |m| m.edge_mean(len, jumps));
    let mut parent = vec![None; graph.node_count()];
    let counts = g.leaf_counts();
    let mut sfs = vec![0.0; n.saturating_sub(1)];
    for e in graph.edge_indices() {
        let (p, c) = graph.edge_endpoints(e).unwrap();
        let w = graph[e];
        parent[c.index()] = Some((p.index(), mean(w.length, w.jumps)));
        let k = counts[c.index()] as usize;
        if (1..n).contains(&k) {
            sfs[k - 1] += mean(w.length, w.jumps);
        }
    }
    let up = |start: usize| {
        let mut out = vec![(start, 0.0)];
        let mut v = start;
        let mut acc = 0.0;
        while let Some((p, m)) = parent[v] {
            acc += m;
            out.push((p, acc));
            v = p;
        }
        out
    };
    let mut pair_times = Vec::with_capacity(pairs.len());
    let mut pair_diffs = Vec::with_capacity(pairs.len());
    for &(i, j) in pairs {
        let a = up(i);
        let b = up(j);
        let (t, d) = b
            .iter()
            .find_map(|&(v, mb)| {
                a.iter()
                    .find(|(u, _)| *u == v)
                    .map(|&(_, ma)| (graph[petgraph::graph::NodeIndex::new(v)].time as f64, ma + mb))
            })
            .unwrap_or((f64::NAN, f64::NAN));
        pair_times.push(t);
        pair_diffs.push(d);
    }
    Reading {
        pair_times,
        pair_diffs,
        tmrca: g.tmrca().map_or(f64::NAN, |t| t as f64),
        length: g.total_length() as f64,
        sfs,
    }
}

/// Runs the exact engine for `reps` replicates and reads each genealogy.
pub fn exact_readings(s: &Scenario, reps: u64, pairs: &[(usize, usize)]) -> Vec<Reading> {
    let idx: Vec<u64> = (0..reps).collect();
    let mut out = Vec::with_capacity(reps as usize);
    run(
        s,
        &idx,
        BatchConfig::default(),
        |scratch, sc, _, rng| read(sc, &seedline::engine::Engine::exact(sc).simulate_tree(scratch, rng), pairs),
        |_, r| {
            out.push(r);
            Ok(())
        },
    )
    .unwrap();
    out
}

/// Mean and standard error.
pub fn mean_se(xs: impl Iterator<Item = f64> + Clone) -> (f64, f64) {
    let n = xs.clone().count() as f64;
    let m = xs.clone().sum::<f64>() / n;
    let v = xs.map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (v / n).sqrt())
}

/// F_ST = 1 - (m_aa + m_bb)/(2 m_ab) from per-replicate (x_aa, x_bb, x_ab), with its standard
/// error by the delta method (sample covariance of the three columns).
pub fn fst_delta(rows: &[[f64; 3]]) -> (f64, f64) {
    let n = rows.len() as f64;
    let m: Vec<f64> = (0..3).map(|k| rows.iter().map(|r| r[k]).sum::<f64>() / n).collect();
    let f = 1.0 - (m[0] + m[1]) / (2.0 * m[2]);
    let g = [-1.0 / (2.0 * m[2]), -1.0 / (2.0 * m[2]), (m[0] + m[1]) / (2.0 * m[2] * m[2])];
    let mut var = 0.0;
    for a in 0..3 {
        for b in 0..3 {
            let c = rows.iter().map(|r| (r[a] - m[a]) * (r[b] - m[b])).sum::<f64>() / (n - 1.0);
            var += g[a] * g[b] * c;
        }
    }
    (f, (var / n).sqrt())
}
