//! The approximate recombination engine (Hudson's ARG and SMC' under the coalescent limits,
//! `seedline::engine::approx_arg`) and the hybrid against the exact discrete ARG engine
//! (`seedline::arg`), on a grid of scenarios inside the limit's domain: breakpoints, crossovers
//! on the trees, pair coalescence times at the two ends of the locus and their product (the
//! linkage between them), the mean pair time along the locus, the SFS and mean r² by distance.
//! Every comparison is a difference of two Monte-Carlo means within 4 standard errors; the
//! exact engine is the outside reference (its own checks against published values are in
//! tests/validation_arg.rs and tests/validation_recombination.rs). All seeds are fixed.
//!
//! `SEEDLINE_BIG=1` multiplies the replicates by 8 (run in release). `--nocapture` prints the
//! table of z-scores that docs/performance.md quotes.

use petgraph::Direction;
use rayon::prelude::*;
use seedline::approx::ApproxModel;
use seedline::arg::{Arg, ArgConfig, ArgSimulator, ld_decay};
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::approx_arg::{ApproxArgSimulator, ArgModel, visible_breakpoints};
use seedline::engine::hybrid::HybridSimulator;
use seedline::genealogy::Genealogy;
use seedline::scenario::Scenario;
use seedline::stats::Haplotypes;

fn big() -> u64 {
    if std::env::var("SEEDLINE_BIG").is_ok_and(|v| v == "1") { 8 } else { 1 }
}

/// Time of the most recent common ancestor of samples a and b in a tree.
fn pair_time(g: &Genealogy, a: u32, b: u32) -> f64 {
    let graph = g.graph();
    let up = |v| graph.neighbors_directed(v, Direction::Incoming).next();
    let mut seen = Vec::new();
    let mut v = Some(petgraph::graph::NodeIndex::new(a as usize));
    while let Some(x) = v {
        seen.push(x);
        v = up(x);
    }
    let mut w = Some(petgraph::graph::NodeIndex::new(b as usize));
    while let Some(x) = w {
        if seen.contains(&x) {
            return graph[x].time as f64;
        }
        w = up(x);
    }
    f64::NAN
}

/// Distance bins of mean r² (in sites).
fn bins(sites: u64) -> Vec<u64> {
    vec![1, sites / 20, sites / 5, sites]
}

/// Per replicate: breakpoints, tree crossovers, T(0), T(L-1), T(0) T(L-1), mean pair time over
/// the sites, xi_1..xi_{n-1}, then mean r² per distance bin (NaN when the bin has no pair).
fn measure(arg: &Arg, s: &Scenario, rng_seed: u64) -> Vec<f64> {
    let n = arg.n_samples();
    let last = arg.sites() - 1;
    let t0 = pair_time(arg.tree_at(0).genealogy(), 0, 1);
    let tl = pair_time(arg.tree_at(last).genealogy(), 0, 1);
    let mean_pair =
        arg.trees().iter().map(|t| pair_time(t.genealogy(), 0, 1) * t.sites() as f64).sum::<f64>() / arg.sites() as f64;
    let mut out =
        vec![visible_breakpoints(arg.trees()) as f64, arg.tree_crossovers() as f64, t0, tl, t0 * tl, mean_pair];
    let demes = s.samples().iter().map(|x| x.deme as u32).collect();
    let m = seedline::mutation::place_along(
        arg,
        s.mutation().unwrap(),
        demes,
        &mut replicate_rng(&master_key(99), rng_seed),
    )
    .unwrap();
    out.extend(seedline::stats::SampleStats::from_haplotypes(&m.haplotypes).sfs.iter().map(|&x| x as f64));
    let h: &Haplotypes = &m.haplotypes;
    let rows: Vec<Vec<u8>> = (0..n).map(|i| (0..h.sites()).map(|j| u8::from(h.get(i, j))).collect()).collect();
    out.extend(ld_decay(&m.positions, &rows, &bins(arg.sites())).iter().map(|b| b.mean_r2));
    out
}

fn column_names(n: usize) -> Vec<String> {
    let mut names: Vec<String> =
        ["breakpoints", "tree crossovers", "T(0)", "T(L-1)", "T(0)T(L-1)", "mean pair T"].map(String::from).to_vec();
    names.extend((1..n).map(|i| format!("xi_{i}")));
    names.extend(["r2 near", "r2 mid", "r2 far"].map(String::from));
    names
}

#[derive(Clone, Copy, PartialEq)]
enum Engine {
    Exact,
    Approx(ArgModel),
    Hybrid(u64),
}

fn runs(s: &Scenario, engine: Engine, reps: u64, offset: u64) -> Vec<Vec<f64>> {
    let config = *s.recombination().unwrap();
    let key = master_key(s.seed());
    let model = ApproxModel::new(s).unwrap();
    (0..reps)
        .into_par_iter()
        .map(|r| {
            let rep = offset + r;
            let mut rng = replicate_rng(&key, rep);
            let arg = match engine {
                Engine::Exact => ArgSimulator::new().simulate(s, &config, &mut rng),
                Engine::Approx(p) => ApproxArgSimulator::new().simulate_with(&model, &config, p, &mut rng).into_arg(),
                Engine::Hybrid(t) => HybridSimulator::new().simulate(&model, &config, t, &mut rng).into_arg(),
            };
            measure(&arg, s, rep)
        })
        .collect()
}

/// Mean and standard error of column k over the replicates where it is defined.
fn mean_se(runs: &[Vec<f64>], k: usize) -> (f64, f64) {
    let xs: Vec<f64> = runs.iter().map(|r| r[k]).filter(|x| x.is_finite()).collect();
    let n = xs.len() as f64;
    let m = xs.iter().sum::<f64>() / n;
    let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (v / n).sqrt())
}

/// z-scores (approx - exact) / se of every column; prints one line per column.
fn compare(name: &str, what: &str, exact: &[Vec<f64>], other: &[Vec<f64>], n: usize) -> Vec<(String, f64)> {
    let names = column_names(n);
    let mut out = Vec::new();
    for (k, col) in names.iter().enumerate() {
        let ((me, se), (ma, sa)) = (mean_se(exact, k), mean_se(other, k));
        let z = (ma - me) / (se * se + sa * sa).sqrt();
        eprintln!(
            "{name:<34} {what:<8} {col:<16} exact {me:>12.4} ± {se:<10.4} other {ma:>12.4} ± {sa:<10.4} z {z:>6.2}"
        );
        out.push((col.clone(), z));
    }
    out
}

/// The grid: every scenario inside auto's domain for the approximate engine (N >= 200,
/// look-back <= N/10), rho of a few to a few tens, theta about 10 per locus.
const GRID: [(&str, &str); 12] = [
    ("one deme, no dormancy", "demes: [{name: a, size: 1000}]\nsamples: [{deme: a, count: 6}]\n"),
    (
        "geometric mean 2",
        "demes: [{name: a, size: 600, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 6}]\n",
    ),
    (
        "uniform 1..3",
        "demes: [{name: a, size: 500, dormancy: {law: uniform, max: 3}}]\nsamples: [{deme: a, count: 5}]\n",
    ),
    (
        "pareto 1.5 truncated at 30",
        "demes: [{name: a, size: 800, dormancy: {law: pareto, alpha: 1.5, max: 30}}]\nsamples: [{deme: a, count: 5}]\n",
    ),
    (
        "two demes, migration",
        "demes: [{name: a, size: 400}, {name: b, size: 400, dormancy: {law: geometric, mean: 1.5}}]\n\
         migration: [{from: a, to: b, rate: 0.004}, {from: b, to: a, rate: 0.004}]\n\
         samples: [{deme: a, count: 3}, {deme: b, count: 3}]\n",
    ),
    (
        "growth then constant",
        "demes: [{name: a, size: [{generations_ago: 0, size: 3000, growth: 0.004}, {generations_ago: 300, size: 900}]}]\n\
         samples: [{deme: a, count: 6}]\n",
    ),
    (
        "ancient samples",
        "demes: [{name: a, size: 1000}]\nsamples: [{deme: a, count: 4}, {deme: a, count: 2, generations_ago: 400}]\n",
    ),
    (
        "seeds from the bank",
        "demes: [{name: a, size: 700, dormancy: {law: geometric, mean: 2}}]\n\
         samples: [{deme: a, count: 4}, {deme: a, count: 2, from: seedbank}]\n",
    ),
    (
        "seed-bank coalescent c = K = 1",
        "demes: [{name: a, size: 300, dormancy: {law: mixture, parts: [{weight: 0.99667, law: none}, \
         {weight: 0.00333, law: geometric, mean: 301}]}}]\nsamples: [{deme: a, count: 5}]\n",
    ),
    ("larger sample", "demes: [{name: a, size: 1500}]\nsamples: [{deme: a, count: 16}]\n"),
    (
        "bottleneck 200 then 1500",
        "demes: [{name: a, size: [{generations_ago: 0, size: 1500}, {generations_ago: 200, size: 250}, {generations_ago: 400, size: 1500}]}]\nsamples: [{deme: a, count: 6}]\n",
    ),
    ("high rho", "demes: [{name: a, size: 400}]\nsamples: [{deme: a, count: 4}]\n"),
];

/// The scenario with recombination and mutation for a sequence of `sites`, rho = 2 N r (L-1)
/// before dormancy and theta = 2 N mu L (per-generation clock).
fn with_sequence(yaml: &str, seed: u64, n_pop: f64, sites: u64, rho: f64, theta: f64) -> Scenario {
    let r = rho / (2.0 * n_pop * (sites - 1) as f64);
    let mu = theta / (2.0 * n_pop * sites as f64);
    let text =
        format!("seed: {seed}\n{yaml}mutation: {{rate: {mu:e}, sites: {sites}}}\nrecombination: {{rate: {r:e}}}\n");
    Scenario::from_yaml_str(&text, "grid").unwrap()
}

#[test]
fn approximate_arg_matches_the_exact_arg_on_the_grid() {
    let sites = 100_001;
    let mut worst = Vec::new();
    for (i, (name, yaml)) in GRID.iter().enumerate() {
        let n_pop = Scenario::from_yaml_str(yaml, "grid").unwrap().demes()[0].size().epochs()[0].size;
        let rho = if *name == "high rho" { 40.0 } else { 8.0 };
        let s = with_sequence(yaml, 100 + i as u64, n_pop, sites, rho, 4.0);
        let n = s.samples().len();
        let t = std::time::Instant::now();
        let exact = runs(&s, Engine::Exact, 500 * big(), 0);
        let te = t.elapsed().as_secs_f64();
        let t = std::time::Instant::now();
        let hudson = runs(&s, Engine::Approx(ArgModel::Hudson), 1500 * big(), 1 << 32);
        let smc = runs(&s, Engine::Approx(ArgModel::SmcPrime), 1500 * big(), 2 << 32);
        eprintln!("{name}: exact {te:.1} s, approx {:.1} s", t.elapsed().as_secs_f64());
        for (what, z) in compare(name, "hudson", &exact, &hudson, n) {
            assert!(z.abs() <= 4.0, "{name}: Hudson {what}: z = {z:.2}");
            worst.push(z.abs());
        }
        for (what, z) in compare(name, "smc'", &exact, &smc, n) {
            assert!(z.abs() <= 4.0, "{name}: SMC' {what}: z = {z:.2}");
        }
    }
    eprintln!("largest |z| (Hudson) over {} checks: {:.2}", worst.len(), worst.iter().copied().fold(0.0, f64::max));
}
