//! Recombination within a locus through `simulate` (`batch::simulate_replicate`,
//! `report::simulate_to_dir`): theory against simulation, exact identities, validation
//! messages and determinism. Every expected value has its source beside the check;
//! tolerances are multiples of the Monte-Carlo standard error and all seeds are fixed.

use rayon::prelude::*;
use seedline::batch::{self, BatchConfig, Keep, LocusOutcome, locus_rng, master_key, simulate_replicate};
use seedline::engine::arg::{ArgConfig, ArgSimulator};
use seedline::engine::{Engine, Scratch};
use seedline::scenario::{Error, Scenario};
use seedline::stats::harmonic;
use seedline::stats::ld::ld_decay;
use seedline::theory::kingman;
use std::path::PathBuf;
mod common;
use common::{assert_close, mean_se};

/// One deme of `n_pop` haploids without dormancy, `n` samples, `sites` sites, mutation rate
/// `mu` per site per generation and recombination rate `r` per gap per generation.
fn scenario(seed: u64, n_pop: u64, n: u64, sites: u64, mu: f64, r: f64) -> Scenario {
    let yaml = format!(
        "seed: {seed}\ndemes: [{{name: a, size: {n_pop}}}]\nsamples: [{{deme: a, count: {n}}}]\n\
         mutation: {{rate: {mu:e}, sites: {sites}}}\nrecombination: {{rate: {r:e}}}\n"
    );
    Scenario::from_yaml_str(&yaml, "test").unwrap()
}

/// r for a population-scaled rate rho = 2 N r (L - 1) over the whole sequence.
fn rate_for(rho: f64, n_pop: u64, sites: u64) -> f64 {
    rho / (2.0 * n_pop as f64 * (sites - 1) as f64)
}

/// The single locus of replicates 0..reps, in parallel, in replicate order.
fn outcomes(s: &Scenario, reps: u64, keep: Keep) -> Vec<LocusOutcome> {
    let key = master_key(s.seed());
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let engine = Engine::exact(s);
    (0..reps)
        .into_par_iter()
        .map_init(Scratch::default, |sim, r| {
            simulate_replicate(&engine, sim, &key, r, keep, &labels).unwrap().remove(0)
        })
        .collect()
}

/// Sample variance and its standard error sqrt((m4 - s^4) / R) (delta method).
fn var_se(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    let m = xs.iter().sum::<f64>() / n;
    let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    let m4 = xs.iter().map(|x| (x - m).powi(4)).sum::<f64>() / n;
    (v, ((m4 - v * v) / n).sqrt())
}

#[test]
fn crossovers_on_the_marginal_trees_follow_hudson_kaplan_through_simulate() {
    // Hudson & Kaplan (1985, Genetics 111:147) [M: from memory, not in the theory reference]:
    // E[recombination events on the genealogy of the sample] = rho a_n. In this model
    // E[tree_crossovers] = r (L - 1) E[J] exactly, J the jumps of one site's genealogy (the
    // derivation is in tests/validation_arg.rs); without dormancy E[J] = E[L_tot], which lies
    // within 0.02% of 2 N a_n at N = 1000 (theory reference §1 table: 5658.66 vs 5657.94 for
    // n = 10), far below the Monte-Carlo error here (about 2%).
    // N = 1000, n = 4, rho = 10: rho a_4 = 10 * 11/6 = 18.3333.
    let sites = 101;
    let s = scenario(5, 1000, 4, sites, 0.0, rate_for(10.0, 1000, sites));
    let out = outcomes(&s, 1000, Keep::default());
    for o in &out {
        // A crossover changes the tree only if it is visible: breakpoints <= crossovers.
        assert!(o.breakpoints.unwrap() <= o.tree_crossovers.unwrap(), "more breakpoints than crossovers");
    }
    let x: Vec<f64> = out.iter().map(|o| o.tree_crossovers.unwrap() as f64).collect();
    eprintln!("tree crossovers {:?} (mean, se), expected {}", mean_se(&x), 10.0 * harmonic(4));
    assert_close("crossovers on the marginal trees", &x, 10.0 * harmonic(4), 4.0);
    // Some crossovers are invisible (both sides end in equal trees): strictly fewer on average.
    let b: f64 = out.iter().map(|o| o.breakpoints.unwrap() as f64).sum();
    assert!(b < x.iter().sum::<f64>(), "no invisible crossover in 1000 replicates");
}

#[test]
fn recombination_leaves_the_mean_site_frequency_spectrum_unchanged() {
    // Every site has the genealogy of the model without recombination, and the SFS is a sum
    // over sites, so E[xi_i] = theta / i (Fu 1995; theory reference §2.1) for any rho.
    // N = 500, n = 5, L = 10001, theta = 2 N mu L = 5, rho = 20. Discrete Wright-Fisher
    // differs from the coalescent limit by O(1/N) = 0.2%, below the Monte-Carlo error (~2%).
    let (n_pop, sites, theta) = (500, 10_001, 5.0);
    let mu = theta / (2.0 * n_pop as f64 * sites as f64);
    let s = scenario(6, n_pop, 5, sites, mu, rate_for(20.0, n_pop, sites));
    let out = outcomes(&s, 1500, Keep::default());
    let expected = kingman::expected_sfs(5, theta);
    for (i, e) in expected.iter().enumerate() {
        let xi: Vec<f64> = out.iter().map(|o| o.stats.as_ref().unwrap().sfs[i] as f64).collect();
        eprintln!("xi_{} {:?} (mean, se), expected {e}", i + 1, mean_se(&xi));
        assert_close(&format!("xi_{}", i + 1), &xi, *e, 4.0);
    }
    // The breakpoints are there: about rho a_n crossovers, most of them visible.
    let (b, _) = mean_se(&out.iter().map(|o| o.breakpoints.unwrap() as f64).collect::<Vec<_>>());
    assert!(b > 10.0, "mean breakpoints {b} at rho = 20");
}

#[test]
fn the_variance_of_pi_falls_as_recombination_decorrelates_sites() {
    // rho = 0: Var[pi] = b1 theta + b2 theta^2 (Tajima 1983; theory reference §2.1).
    // Any rho: the law of total variance splits Var[pi] = E[Var(pi | genealogies)] +
    // Var(E[pi | genealogies]). Given the local trees, mutations on each edge are Poisson,
    // so the first term is a sum over sites of one-site quantities, the same for every rho;
    // at rho = 0 it is the part linear in theta, b1 theta. Hence b1 theta <= Var[pi] for every
    // rho (derived here), and the quadratic part shrinks as sites decorrelate (for n = 2 the
    // two-locus covariance (rho + 18)/(rho^2 + 13 rho + 18) of Kaplan & Hudson 1985 [M], over
    // pairs of positions at rho = 50, leaves roughly a third of it).
    // N = 200, n = 6, theta = 5, L = 10001: b1 = 7/15, b2 = 1/3, Var[pi] = 2.3333 + 8.3333.
    let (n_pop, n, sites, theta) = (200, 6, 10_001, 5.0);
    let mu = theta / (2.0 * n_pop as f64 * sites as f64);
    let pis = |r: f64| -> Vec<f64> {
        let s = scenario(7, n_pop, n, sites, mu, r);
        outcomes(&s, 3000, Keep::default()).iter().map(|o| o.stats.as_ref().unwrap().theta_pi.unwrap()).collect()
    };
    let exact = kingman::pi_variance(n as u32, theta).unwrap();
    let b1_theta = (n as f64 + 1.0) / (3.0 * (n as f64 - 1.0)) * theta;
    let (v0, se0) = var_se(&pis(0.0));
    assert!((v0 - exact).abs() <= 4.0 * se0, "rho = 0: Var[pi] = {v0} ± {se0}, Tajima 1983 gives {exact}");
    let (v50, se50) = var_se(&pis(rate_for(50.0, n_pop, sites)));
    eprintln!("Var[pi]: rho 0 {v0} ± {se0}, rho 50 {v50} ± {se50}, Tajima {exact}, b1 theta {b1_theta}");
    assert!(v50 < 0.7 * exact, "rho = 50: Var[pi] = {v50} ± {se50} is not clearly below {exact}");
    assert!(v50 + 4.0 * se50 < v0 - 4.0 * se0, "rho = 50: {v50} ± {se50} against rho = 0: {v0} ± {se0}");
    assert!(v50 + 4.0 * se50 >= b1_theta, "rho = 50: Var[pi] = {v50} ± {se50} below the bound b1 theta = {b1_theta}");
}

#[test]
fn without_recombination_r_squared_does_not_depend_on_distance() {
    // Exact symmetry (derived): positions are drawn uniformly without replacement and given
    // to the mutations at random, so, given the tree, the mutations and the set of positions,
    // which pairs are near and which are far is a uniformly relabelled choice; the mean r² of
    // near pairs and of far pairs then both have the mean r² over all pairs as expectation.
    // So per replicate E[near - far] = 0 at rho = 0. (The decay at rho > 0 is checked on
    // ld.tsv in `simulate_writes_ld_decay_and_is_identical_for_any_thread_count`.)
    let (n_pop, sites) = (200, 10_001);
    let mu = 10.0 / (2.0 * n_pop as f64 * sites as f64);
    let s = scenario(8, n_pop, 10, sites, mu, 0.0);
    let out = outcomes(&s, 1000, Keep { mutations: true, ..Keep::default() });
    let bins = [1, 1000, 5000, sites];
    let diffs: Vec<f64> = out
        .iter()
        .filter_map(|o| {
            let m = o.mutations.as_ref().unwrap();
            let h = &m.haplotypes;
            let rows: Vec<Vec<u8>> =
                (0..h.samples()).map(|i| (0..h.sites()).map(|j| u8::from(h.get(i, j))).collect()).collect();
            let ld = ld_decay(&m.positions, &rows, &bins);
            (ld[0].pairs > 0 && ld[2].pairs > 0).then(|| ld[0].mean_r2 - ld[2].mean_r2)
        })
        .collect();
    assert!(diffs.len() > 800, "too few replicates with near and far pairs: {}", diffs.len());
    eprintln!("near - far r² at rho = 0: {:?} over {} replicates", mean_se(&diffs), diffs.len());
    assert_close("near - far mean r² at rho = 0", &diffs, 0.0, 4.0);
}

#[test]
fn at_rate_zero_the_recombination_path_reproduces_the_plain_engine() {
    // Exact: at r = 0 the ARG engine draws from the stream exactly as the plain engine
    // (src/arg/mod.rs), so its single local tree is the plain engine's, replicate by
    // replicate. (The mutations then have the same law but not the same draws: the two
    // genealogies list their edges in different orders.)
    let yaml = "seed: 9\ndemes: [{name: a, size: 300, dormancy: {law: geometric, mean: 2}}]\n\
                samples: [{deme: a, count: 7}]\nmutation: {rate: 2.0e-6, sites: 5000}\n";
    let plain = Scenario::from_yaml_str(yaml, "test").unwrap();
    let zero = Scenario::from_yaml_str(&format!("{yaml}recombination: {{rate: 0}}\n"), "test").unwrap();
    let a = outcomes(&plain, 50, Keep::default());
    let b = outcomes(&zero, 50, Keep::default());
    for (x, y) in a.iter().zip(&b) {
        assert_eq!(x.tmrca, y.tmrca);
        assert_eq!(x.total_length, y.total_length);
        assert_eq!(x.roots, y.roots);
        assert_eq!(y.breakpoints, Some(0));
        assert_eq!(x.breakpoints, None);
    }
}

#[test]
fn mutations_along_the_sequence_sit_on_their_local_tree() {
    // Exact structure: positions strictly increase within 1..=L, and the carriers of the
    // mutation at position p (1-based) are the samples below one edge of the local tree of
    // site p - 1. Locus means are weighted by the sites of each tree (by hand from the trees).
    let sites = 2000;
    let s = scenario(10, 100, 6, sites, 2.0e-5, rate_for(30.0, 100, sites));
    let key = master_key(s.seed());
    let config = *s.recombination().unwrap();
    assert_eq!(config, ArgConfig::new(sites, rate_for(30.0, 100, sites)).unwrap());
    for rep in 0..20 {
        let mut rng = locus_rng(&key, rep, 0);
        let arg = ArgSimulator::new().simulate(&s, &config, &mut rng);
        let m = seedline::mutation::place_along(arg.trees(), s.mutation().unwrap(), vec![0; 6], &mut rng).unwrap();
        assert!(m.positions.windows(2).all(|w| w[0] < w[1]));
        assert!(m.positions.iter().all(|&p| (1..=sites).contains(&p)));
        for (j, &p) in m.positions.iter().enumerate() {
            let g = arg.tree_at(p - 1).genealogy();
            let carriers: Vec<usize> = (0..6).filter(|&i| m.haplotypes.get(i, j)).collect();
            let clade = g.postorder().into_iter().any(|v| {
                let mut below = Vec::new();
                let mut stack = vec![v];
                while let Some(u) = stack.pop() {
                    below.extend(g.graph()[u].sample.map(|x| x as usize));
                    stack.extend(g.children(u).map(|(c, _)| c));
                }
                below.sort_unstable();
                g.graph().neighbors_directed(v, petgraph::Direction::Incoming).next().is_some() && below == carriers
            });
            assert!(clade, "replicate {rep}: site at {p} is not carried by a clade of its tree");
        }
        let o = LocusOutcome::of_arg(&arg, None);
        let w: f64 = arg.trees().iter().map(|t| t.genealogy().total_length() as f64 * t.sites() as f64).sum();
        assert!((o.total_length - w / sites as f64).abs() < 1e-9 * w);
        assert_eq!(o.breakpoints, Some(arg.trees().len() as u64 - 1));
    }
}

#[test]
fn scenario_errors_name_the_key_and_the_line() {
    let issues = |yaml: &str| match Scenario::from_yaml_str(yaml, "grass.yaml") {
        Err(Error::Invalid { issues, .. }) => issues,
        other => panic!("expected a validation error, got {other:?}"),
    };
    // Without mutation.sites there is no sequence length.
    let i = issues("demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 4}]\nrecombination: {rate: 1.0e-6}\n");
    assert_eq!(i.len(), 1);
    assert_eq!((i[0].path.as_str(), i[0].line), ("recombination", Some(3)));
    assert!(i[0].message.contains("mutation.sites"), "{}", i[0].message);
    // A negative rate, and a rate above 1, are refused with what is allowed.
    for bad in ["-1.0e-8", "1.5"] {
        let i = issues(&format!(
            "demes: [{{name: a, size: 100}}]\nsamples: [{{deme: a, count: 4}}]\n\
             mutation: {{rate: 1.0e-8, sites: 1000}}\nrecombination:\n  rate: {bad}\n"
        ));
        assert_eq!(i.len(), 1, "{i:?}");
        assert_eq!((i[0].path.as_str(), i[0].line), ("recombination.rate", Some(5)));
        assert!(i[0].message.contains("[0, 1]"), "{}", i[0].message);
    }
    // Both problems at once are both reported; the rendered error names the file and line.
    let yaml = "demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 4}]\nrecombination: {rate: .nan}\n";
    let e = Scenario::from_yaml_str(yaml, "grass.yaml").unwrap_err().to_string();
    assert!(e.contains("grass.yaml:3: recombination.rate"), "{e}");
    assert!(e.contains("grass.yaml:3: recombination: "), "{e}");
    // Unknown keys inside the section are refused by the parser.
    let yaml = "demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 4}]\n\
                mutation: {rate: 0, sites: 10}\nrecombination: {rho: 5}\n";
    assert!(matches!(Scenario::from_yaml_str(yaml, "grass.yaml"), Err(Error::Syntax { .. })));
}

#[test]
fn validate_prints_the_recombination_rate() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(["validate", concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/fog-grass-recombining.yaml")])
        .output()
        .unwrap();
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("recombination rate 1e-8 per adjacent pair of sites"), "{text}");
    // rho = 2 N r (L - 1) = 2 * 5000 * 1e-8 * 49999 = 4.9999 (by hand).
    assert!(text.contains("rho = 2 N r (L - 1) = 4.9999"), "{text}");
}

fn temp_dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("seedline-recomb-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    d
}

#[test]
fn simulate_writes_ld_decay_and_is_identical_for_any_thread_count() {
    // Two loci per replicate, rho = 50 over 10001 sites, theta = 10: r² must decay with
    // distance (linked sites share their genealogy; Hill & Robertson 1968 [M] give
    // E[r²] ~ 1/(1 + rho_d) for the distance's own rho_d, here 0.5 below 100 sites and
    // above 25 beyond 5000): pooled near pairs against the last bin.
    let (n_pop, sites) = (200, 10_001);
    let mu = 10.0 / (2.0 * n_pop as f64 * sites as f64);
    let yaml = format!(
        "seed: 11\nreplicates: 60\nloci: 2\ndemes: [{{name: a, size: {n_pop}}}]\nsamples: [{{deme: a, count: 10}}]\n\
         mutation: {{rate: {mu:e}, sites: {sites}}}\nrecombination: {{rate: {:e}}}\n",
        rate_for(50.0, n_pop, sites)
    );
    let s = Scenario::from_yaml_str(&yaml, "test").unwrap();
    let run = |threads: usize| {
        let dir = temp_dir(&format!("t{threads}"));
        let config = BatchConfig { threads, chunk: 16 };
        let options = seedline::report::SimulateOptions { ld: true, ..Default::default() };
        seedline::report::simulate_to_dir(&s, "test", config, options, &dir, &|| ()).unwrap();
        let read = |f: &str| std::fs::read_to_string(dir.join(f)).unwrap();
        let files = (read("replicates.tsv"), read("trees.nwk"), read("ld.tsv"));
        std::fs::remove_dir_all(&dir).unwrap();
        files
    };
    let one = run(1);
    assert_eq!(one, run(2), "outputs differ between 1 and 2 threads");
    let (table, trees, ld) = one;
    let header: Vec<&str> = table.lines().next().unwrap().split('\t').collect();
    assert_eq!(&header[header.len() - 2..], &["breakpoints", "crossovers"]);
    assert_eq!(&header[..5], &["replicate", "tmrca", "roots", "total_length", "jumps"]);
    assert!(trees.lines().next().unwrap().starts_with("[replicate 0 locus 1 sites 0-"), "{}", &trees[..60]);
    let rows: Vec<(u64, u64, u64, Option<f64>)> = ld
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split('\t').collect();
            (f[0].parse().unwrap(), f[1].parse().unwrap(), f[2].parse().unwrap(), f[3].parse().ok())
        })
        .collect();
    assert_eq!(ld.lines().next(), Some("bin_low\tbin_high\tpairs\tmean_r2"));
    assert_eq!(rows.iter().map(|r| r.0).chain([rows.last().unwrap().1]).collect::<Vec<_>>(), batch::ld_bins(sites));
    let near: Vec<_> = rows.iter().filter(|r| r.1 <= 100 && r.2 > 0).collect();
    let pairs: u64 = near.iter().map(|r| r.2).sum();
    let near_r2 = near.iter().map(|r| r.3.unwrap() * r.2 as f64).sum::<f64>() / pairs as f64;
    let last = rows.last().unwrap();
    assert!(pairs >= 100 && last.2 >= 1000, "too few pairs: {pairs} near, {} far", last.2);
    eprintln!("r² near (<= 100 sites) {near_r2} over {pairs} pairs, last bin {:?} over {}", last.3, last.2);
    assert!(near_r2 > 2.0 * last.3.unwrap(), "r² does not decay: {near_r2} near, {:?} far", last.3);
}

#[test]
fn distance_bins_cover_the_sequence() {
    // By hand: 1, 2, 5, 10, ... up to L/2, then L.
    assert_eq!(batch::ld_bins(50_000), [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10_000, 20_000, 50_000]);
    assert_eq!(batch::ld_bins(10_001), [1, 2, 5, 10, 20, 50, 100, 200, 500, 1000, 2000, 5000, 10_001]);
    assert_eq!(batch::ld_bins(11), [1, 2, 5, 11]);
    assert_eq!(batch::ld_bins(10), [1, 2, 5, 10]);
    assert_eq!(batch::ld_bins(2), [1, 2]);
    assert_eq!(batch::ld_bins(1), [1, 2]);
}

/// Expected invisible crossovers per unit of rho: sum_{k=2}^n F(k)/(k-1), with F(k) the
/// chance that a lineage detached from a branch while k lineages exist re-joins that branch
/// before the branch ends (see `breakpoints_follow_the_smc_prime_rate_without_dormancy`).
fn invisible_per_rho(n: u32) -> f64 {
    let mut f = 0.0;
    let mut sum = 0.0;
    for k in 2..=n {
        let k = k as f64;
        f = 2.0 / (k * (k + 1.0)) + (k - 1.0) * (k - 2.0) / (k * (k + 1.0)) * f;
        sum += f / (k - 1.0);
    }
    sum
}

#[test]
fn breakpoints_follow_the_smc_prime_rate_without_dormancy() {
    // A crossover on the genealogy of the sample (rho a_n of them: Hudson & Kaplan 1985) changes
    // the tree unless the detached lineage re-joins the branch it left before that branch ends;
    // to first order in the per-gap rate this is exact, and it is the SMC' picture (Marjoram &
    // Wall 2006, BMC Genet. 7:16 [M]). Derived here: a lineage detached at a time when k lineages
    // exist meets each of them (its own branch included) at rate 1, so the chance F(k) to meet
    // its own branch first satisfies, over the rest of the epoch (length Exp(C(k,2))) and the
    // next coalescence (which ends the branch with chance 2/k),
    //   F(k) = 2/(k(k+1)) + (k-1)(k-2)/(k(k+1)) F(k-1),   F(2) = 1/3,
    // and E[breakpoints] = rho (a_n - sum_{k<=n} F(k)/(k-1)) = rho (a_n - 2(n-1)/(3n))
    // (closed form checked against the recursion below): 2 rho / 3 for n = 2.
    for n in [2u32, 3, 6, 12, 40] {
        let closed = 2.0 * (n as f64 - 1.0) / (3.0 * n as f64);
        assert!((invisible_per_rho(n) - closed).abs() < 1e-12, "n = {n}");
    }
    // N = 1000 (discreteness O(1/N) = 0.1%), L = 2001 sites, rho = 8 (0.004 per gap: two
    // crossovers in one gap are negligible).
    let (n_pop, sites, rho) = (1000, 2001, 8.0);
    for (n, seed) in [(2u64, 21), (6, 22)] {
        let s = scenario(seed, n_pop, n, sites, 0.0, rate_for(rho, n_pop, sites));
        let out = outcomes(&s, 2000, Keep::default());
        let b: Vec<f64> = out.iter().map(|o| o.breakpoints.unwrap() as f64).collect();
        let expected = rho * (harmonic(n as u32) - invisible_per_rho(n as u32));
        eprintln!(
            "n = {n}: breakpoints {:?} (mean, se), SMC' {expected}, rho a_n {}",
            mean_se(&b),
            rho * harmonic(n as u32)
        );
        assert_close(&format!("breakpoints, n = {n}"), &b, expected, 4.0);
    }
}

#[test]
fn breakpoints_under_dormancy_count_visible_changes_with_the_scaled_rho() {
    // With dormancy of finite mean the genealogy is the KKL time-changed coalescent (time
    // N E[R]^2/d generations per unit) and crossovers happen only at reproduction events,
    // 1/E[R] per lineage per generation: rho_eff = 2 N r (L-1) E[R] / d (documented on
    // `Arg::breakpoints`). Geometric mean 2 (E[R] = 2, d = 1), N = 1000, n = 4, rho = 4:
    // rho_eff = 8 and E[breakpoints] = 8 (a_4 - 1/2) = 10.667 (formula of the test above).
    // Adjacent trees that differ only in the jumps of an edge are not breakpoints: they
    // exist (the local trees outnumber the breakpoints) but are not counted.
    let (n_pop, sites, rho) = (1000u64, 2001u64, 4.0);
    let yaml = format!(
        "seed: 23\ndemes: [{{name: a, size: {n_pop}, dormancy: {{law: geometric, mean: 2}}}}]\n\
         samples: [{{deme: a, count: 4}}]\nmutation: {{rate: 0.0, sites: {sites}}}\nrecombination: {{rate: {:e}}}\n",
        rate_for(rho, n_pop, sites)
    );
    let s = Scenario::from_yaml_str(&yaml, "test").unwrap();
    let key = master_key(s.seed());
    let config = *s.recombination().unwrap();
    let runs: Vec<(f64, f64)> = (0..2000u64)
        .into_par_iter()
        .map(|r| {
            let arg = ArgSimulator::new().simulate(&s, &config, &mut locus_rng(&key, r, 0));
            (arg.breakpoints() as f64, (arg.trees().len() - 1) as f64)
        })
        .collect();
    let b: Vec<f64> = runs.iter().map(|r| r.0).collect();
    let all: Vec<f64> = runs.iter().map(|r| r.1).collect();
    let rho_eff = rho * 2.0;
    let expected = rho_eff * (harmonic(4) - invisible_per_rho(4));
    eprintln!("breakpoints {:?}, tree changes with jumps {:?}, expected {expected}", mean_se(&b), mean_se(&all));
    assert_close("breakpoints under dormancy", &b, expected, 4.0);
    assert!(mean_se(&all).0 > mean_se(&b).0 + 1.0, "jump-only changes should be frequent under dormancy");
}
