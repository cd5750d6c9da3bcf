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
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::approx::ApproxModel;
use seedline::engine::approx_arg::{ApproxArgSimulator, ArgModel, visible_breakpoints};
use seedline::engine::arg::{Arg, ArgSimulator};
use seedline::engine::hybrid::HybridSimulator;
use seedline::genealogy::Genealogy;
use seedline::scenario::Scenario;
use seedline::stats::Haplotypes;
use seedline::stats::ld::ld_decay;

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

/// Size classes of the SFS compared: xi_1, xi_2, xi_3, then the sum of the larger classes.
fn sfs_classes(sfs: &[u64]) -> Vec<f64> {
    let mut out: Vec<f64> = sfs.iter().take(3).map(|&x| x as f64).collect();
    if sfs.len() > 3 {
        out.push(sfs[3..].iter().sum::<u64>() as f64);
    }
    out
}

/// Per replicate: breakpoints, tree crossovers, T(0), T(L-1), T(0) T(L-1), mean pair time over
/// the sites, the SFS classes, then mean r² per distance bin (NaN when the bin has no pair).
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
        arg.trees(),
        s.mutation().unwrap(),
        demes,
        &mut replicate_rng(&master_key(99), rng_seed),
    )
    .unwrap();
    out.extend(sfs_classes(&seedline::stats::SampleStats::from_haplotypes(&m.haplotypes).sfs));
    let h: &Haplotypes = &m.haplotypes;
    let rows: Vec<Vec<u8>> = (0..n).map(|i| (0..h.sites()).map(|j| u8::from(h.get(i, j))).collect()).collect();
    out.extend(ld_decay(&m.positions, &rows, &bins(arg.sites())).iter().map(|b| b.mean_r2));
    out
}

fn column_names(n: usize) -> Vec<String> {
    let mut names: Vec<String> =
        ["breakpoints", "tree crossovers", "T(0)", "T(L-1)", "T(0)T(L-1)", "mean pair T"].map(String::from).to_vec();
    names.extend((1..n.min(4)).map(|i| format!("xi_{i}")));
    if n > 4 {
        names.push(format!("xi_4..{}", n - 1));
    }
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
        let exact = runs(&s, Engine::Exact, 400 * big(), 0);
        let te = t.elapsed().as_secs_f64();
        let t = std::time::Instant::now();
        let hudson = runs(&s, Engine::Approx(ArgModel::Hudson), 1000 * big(), 1 << 32);
        let smc = runs(&s, Engine::Approx(ArgModel::SmcPrime), 1000 * big(), 2 << 32);
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

/// T(0) and T(L-1) of samples 0 and 1, over `reps` replicates of `process`.
fn end_pair_times(s: &Scenario, process: ArgModel, reps: u64) -> Vec<(f64, f64, f64)> {
    let config = *s.recombination().unwrap();
    let key = master_key(s.seed());
    let model = ApproxModel::new(s).unwrap();
    (0..reps)
        .into_par_iter()
        .map_init(ApproxArgSimulator::new, |sim, r| {
            let rec = sim.simulate_with(&model, &config, process, &mut replicate_rng(&key, r));
            let crossovers = rec.tree_crossovers() as f64;
            let arg = rec.into_arg();
            let t0 = pair_time(arg.tree_at(0).genealogy(), 0, 1);
            let tl = pair_time(arg.tree_at(arg.sites() - 1).genealogy(), 0, 1);
            (t0, tl, crossovers)
        })
        .collect()
}

#[test]
fn linkage_of_two_sites_follows_the_scaled_rho() {
    // Two lineages, coalescence times T_a and T_b at two sites with population-scaled
    // recombination rate R between them: Corr(T_a, T_b) = (R + 18)/(R² + 13 R + 18)
    // (Griffiths 1981; Kaplan & Hudson 1985, Genetics 111:147; from memory). With
    // T ~ Exp(1/N_e), N_e = N E[R]²/d (KKL; theory reference §3.2, exact for a pair):
    //   E[T_a T_b] / N_e² = 1 + Corr.
    // The scaled R between the two ends is the module's rho = 2 N r (L - 1) E[R]/d (derived in
    // src/engine/approx_arg): a rate that forgot the factor E[R] = 3 would give R/3 and a
    // correlation 0.689 instead of 0.417 at R = 2. N = 10^5, geometric mean 3, L = 1001.
    // SMC' is the sequentially Markov approximation: its correlation is printed, and checked
    // only loosely (0.05; Marjoram & Wall 2006 report close two-site agreement, from memory).
    let (n_pop, mean, sites) = (100_000.0, 3.0, 1001u64);
    let n_e = n_pop * mean * mean;
    let reps = 20_000 * big();
    for big_r in [2.0, 10.0] {
        let r = big_r / (2.0 * n_pop * mean * (sites - 1) as f64);
        let yaml = format!(
            "seed: 21\ndemes: [{{name: a, size: {n_pop}, dormancy: {{law: geometric, mean: {mean}}}}}]\n\
             samples: [{{deme: a, count: 2}}]\nmutation: {{rate: 0, sites: {sites}}}\nrecombination: {{rate: {r:e}}}\n"
        );
        let s = Scenario::from_yaml_str(&yaml, "test").unwrap();
        let corr = (big_r + 18.0) / (big_r * big_r + 13.0 * big_r + 18.0);
        for process in [ArgModel::Hudson, ArgModel::SmcPrime] {
            let xs = end_pair_times(&s, process, reps);
            let col = |f: &dyn Fn(&(f64, f64, f64)) -> f64| xs.iter().map(f).collect::<Vec<f64>>();
            let prod = col(&|x| x.0 * x.1 / (n_e * n_e));
            let t0 = col(&|x| x.0 / n_e);
            let (m, se) = common_mean_se(&prod);
            let (mt, st) = common_mean_se(&t0);
            eprintln!(
                "R = {big_r}: {process:?} E[T_a T_b]/N_e² = {m:.4} ± {se:.4} (Hudson-Kaplan {:.4}), E[T_a]/N_e = {mt:.4} ± {st:.4}",
                1.0 + corr
            );
            assert!((mt - 1.0).abs() <= 4.0 * st, "{process:?}: E[T]/N_e = {mt} ± {st}, expected 1");
            match process {
                ArgModel::Hudson => {
                    assert!((m - 1.0 - corr).abs() <= 4.0 * se, "R = {big_r}: {m} ± {se} vs {}", 1.0 + corr)
                }
                ArgModel::SmcPrime => {
                    assert!((m - 1.0 - corr).abs() <= 0.05 + 4.0 * se, "SMC' R = {big_r}: {m} ± {se}")
                }
            }
        }
    }
}

#[test]
fn crossovers_on_the_trees_are_the_scaled_rho_times_a_n() {
    // Hudson & Kaplan (1985, Genetics 111:147; from memory): E[recombination events on the
    // genealogy of n samples] = rho a_n, with rho the scaled rate of the locus (here the
    // module's 2 N r (L - 1) E[R]/d) and a_n = sum_{i<n} 1/i (theory reference §0).
    // N = 10^5, uniform look-back 1..3 (E[R] = 2, d = 1), n = 6, rho = 30: 30 * 137/60 = 68.5.
    let (n_pop, mean, sites, rho) = (100_000.0, 2.0, 10_001u64, 30.0);
    let r = rho / (2.0 * n_pop * mean * (sites - 1) as f64);
    let yaml = format!(
        "seed: 22\ndemes: [{{name: a, size: {n_pop}, dormancy: {{law: uniform, max: 3}}}}]\n\
         samples: [{{deme: a, count: 6}}]\nmutation: {{rate: 0, sites: {sites}}}\nrecombination: {{rate: {r:e}}}\n"
    );
    let s = Scenario::from_yaml_str(&yaml, "test").unwrap();
    let expected = rho * seedline::stats::harmonic(6);
    for process in [ArgModel::Hudson, ArgModel::SmcPrime] {
        let xs: Vec<f64> = end_pair_times(&s, process, 3000 * big()).iter().map(|x| x.2).collect();
        let (m, se) = common_mean_se(&xs);
        eprintln!("{process:?}: tree crossovers {m:.3} ± {se:.3}, rho a_n = {expected:.3}");
        assert!((m - expected).abs() <= 4.0 * se, "{process:?}: {m} ± {se} vs {expected}");
    }
}

fn common_mean_se(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    let m = xs.iter().sum::<f64>() / n;
    let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (v / n).sqrt())
}

/// Scenarios outside the approximate engine's domain near the present: a sample comparable to
/// N, recent small sizes. The hybrid (exact up to its switch time, `hybrid::plan`) must match
/// the exact engine (the approximate engine alone: `where_the_approximate_arg_parts`).
const HYBRID_GRID: [(&str, &str); 5] = [
    ("n = 60 of N = 300", "demes: [{name: a, size: 300}]\nsamples: [{deme: a, count: 60}]\n"),
    (
        "N = 40 for 40 generations",
        "demes: [{name: a, size: [{generations_ago: 0, size: 40}, {generations_ago: 40, size: 2000}], \
         dormancy: {law: geometric, mean: 1.5}}]\nsamples: [{deme: a, count: 12}]\n",
    ),
    (
        "N = 100 for 100 generations, n = 30",
        "demes: [{name: a, size: [{generations_ago: 0, size: 100}, {generations_ago: 100, size: 1500}]}]\n\
         samples: [{deme: a, count: 30}]\n",
    ),
    (
        "n = 80 of N = 400, geometric 2",
        "demes: [{name: a, size: 400, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 80}]\n",
    ),
    (
        "small recent deme, migration",
        "demes: [{name: a, size: [{generations_ago: 0, size: 60}, {generations_ago: 50, size: 1000}]}, {name: b, size: 1000}]\n\
         migration: [{from: a, to: b, rate: 0.01}, {from: b, to: a, rate: 0.01}]\n\
         samples: [{deme: a, count: 6}, {deme: b, count: 6}]\n",
    ),
];

#[test]
fn hybrid_matches_the_exact_arg_where_the_limit_fails_near_the_present() {
    let sites = 100_001;
    for (i, (name, yaml)) in HYBRID_GRID.iter().enumerate() {
        let plain = Scenario::from_yaml_str(yaml, "grid").unwrap();
        let n_pop = plain.demes()[0].size().epochs().last().unwrap().size;
        let s = with_sequence(yaml, 200 + i as u64, n_pop, sites, 8.0, 4.0);
        let plan = seedline::engine::hybrid::plan(&s).unwrap();
        assert!(plan.switch > 0, "{name}: {}", plan.reason);
        let n = s.samples().len();
        let exact = runs(&s, Engine::Exact, 400 * big(), 0);
        let hybrid = runs(&s, Engine::Hybrid(plan.switch), 800 * big(), 1 << 32);
        eprintln!("{name}: switch at generation {} ({})", plan.switch, plan.reason);
        for (what, z) in compare(name, "hybrid", &exact, &hybrid, n) {
            assert!(z.abs() <= 4.0, "{name}: hybrid {what}: z = {z:.2}");
        }
    }
}

/// Measures the approximate engine against the exact one where auto does not pick it (small N,
/// a sample comparable to N, dormancy comparable to N) and prints the z-scores quoted in
/// docs/performance.md (`SEEDLINE_BIG=1` for the precise figures). Asserts only auto's decision:
/// these are measurements, not agreement checks.
#[test]
fn where_the_approximate_arg_parts() {
    use seedline::engine::{EngineChoice, EngineKind, resolve};
    let sites = 100_001;
    let cases = [
        ("N = 20, n = 10", "demes: [{name: a, size: 20}]\nsamples: [{deme: a, count: 10}]\n", EngineKind::Exact),
        ("n = 150 of N = 200", "demes: [{name: a, size: 200}]\nsamples: [{deme: a, count: 150}]\n", EngineKind::Hybrid),
        (
            "N = 50, geometric 5, n = 10",
            "demes: [{name: a, size: 50, dormancy: {law: geometric, mean: 5}}]\nsamples: [{deme: a, count: 10}]\n",
            EngineKind::Exact,
        ),
    ];
    for (i, (name, yaml, kind)) in cases.iter().enumerate() {
        let n_pop = Scenario::from_yaml_str(yaml, "grid").unwrap().demes()[0].size().epochs()[0].size;
        let s = with_sequence(yaml, 300 + i as u64, n_pop, sites, 8.0, 4.0);
        assert_eq!(resolve(EngineChoice::Auto, &s).unwrap().kind, *kind, "{name}");
        let exact = runs(&s, Engine::Exact, 300 * big(), 0);
        let approx = runs(&s, Engine::Approx(ArgModel::Hudson), 600 * big(), 2 << 32);
        let zs = compare(name, "approx", &exact, &approx, s.samples().len());
        let worst = zs.iter().max_by(|a, b| a.1.abs().total_cmp(&b.1.abs())).unwrap();
        eprintln!("{name}: largest |z| {:.2} ({})", worst.1.abs(), worst.0);
    }
}
