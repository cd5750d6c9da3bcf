//! Theory against simulation for the exact engine. Every expected value comes from outside
//! the project; the source is named beside each check. Tolerances are stated as multiples
//! of the Monte-Carlo standard error; all seeds are fixed, so the tests are deterministic.
//! Set SEEDLINE_BIG=1 for larger runs (tighter intervals).

use seedline::batch::{BatchConfig, master_key, replicate_rng};
use seedline::dormancy::LookBack;
use seedline::engine::Engine;
use seedline::engine::Simulator;
use seedline::scenario::Scenario;
use statrs::distribution::{ChiSquared, ContinuousCDF};
mod common;
use common::{assert_close, mean_se};

fn scale() -> u64 {
    if std::env::var_os("SEEDLINE_BIG").is_some() { 10 } else { 1 }
}

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

/// Runs `reps` replicates in parallel and returns f(genealogy) per replicate.
fn collect<T: Send>(s: &Scenario, reps: u64, f: impl Fn(&seedline::genealogy::Genealogy) -> T + Sync) -> Vec<T> {
    let idx: Vec<u64> = (0..reps).collect();
    let mut out = Vec::with_capacity(reps as usize);
    seedline::batch::run(
        s,
        &idx,
        BatchConfig::default(),
        |sim, sc, _, rng| f(&Engine::exact(sc).simulate_tree(sim, rng)),
        |_, v| {
            out.push(v);
            Ok(())
        },
    )
    .unwrap();
    out
}

#[test]
fn wright_fisher_pair_time_is_geometric() {
    // Source: no dormancy, one deme of N haploids: T_2 ~ Geometric(1/N) on {1,2,..}, exactly
    // (theory reference §1, "exact discrete facts"; Kingman 1982 for the limit).
    let n = 20.0;
    let s = scenario("demes: [{name: a, size: 20}]\nsamples: [{deme: a, count: 2}]\n");
    let reps = 20_000 * scale();
    let t: Vec<f64> = collect(&s, reps, |g| g.tmrca().unwrap() as f64);
    assert_close("E[T_2]", &t, n, 4.0);
    // Chi-square goodness of fit on classes 1..=60 and a tail class; level 0.001.
    let classes = 60usize;
    let mut obs = vec![0.0; classes + 1];
    for &x in &t {
        obs[(x as usize).min(classes + 1) - 1] += 1.0;
    }
    let p = 1.0 / n;
    let mut stat = 0.0;
    for (k, o) in obs.iter().enumerate() {
        let prob = if k < classes { p * (1.0 - p).powi(k as i32) } else { (1.0 - p).powi(classes as i32) };
        let e = prob * reps as f64;
        stat += (o - e).powi(2) / e;
    }
    let pval = 1.0 - ChiSquared::new(classes as f64).unwrap().cdf(stat);
    assert!(pval > 0.001, "chi-square {stat}, p = {pval}");
}

#[test]
fn wright_fisher_tmrca_and_length_match_the_exact_discrete_chain() {
    // Source: theory reference §1, exact discrete Wright–Fisher table (N = 100, n = 10):
    // E[T_MRCA] = 179.521098 and E[L] = 566.535976 generations; the Kingman values
    // 2N(1-1/n) = 180 and 2N a_n = 565.79 (Kingman 1982) are within 0.3%.
    let s = scenario("demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 10}]\n");
    let reps = 6_000 * scale();
    let rows: Vec<(f64, f64)> = collect(&s, reps, |g| (g.tmrca().unwrap() as f64, g.total_length() as f64));
    let t: Vec<f64> = rows.iter().map(|r| r.0).collect();
    let l: Vec<f64> = rows.iter().map(|r| r.1).collect();
    assert_close("E[T_MRCA]", &t, 179.521098, 4.0);
    assert_close("E[L]", &l, 566.535976, 4.0);
}

#[test]
fn finite_mean_dormancy_pair_time_is_n_mean_squared_over_gcd() {
    // Source: theory reference §3.2 (exact for every N; the large-N form is Kaj, Krone &
    // Lascoux 2001, J. Appl. Probab. 38:285): E[T_2] = N E[R]^2 / d, d = gcd of the support.
    let laws = [
        ("{law: none}", 1.0, 1.0),
        ("{law: uniform, max: 4}", 2.5, 1.0),
        ("{law: geometric, mean: 3.5}", 3.5, 1.0),
        ("{law: table, weights: [0.5, 0.3, 0.2]}", 1.7, 1.0),
        ("{law: table, weights: [0, 1, 0, 1]}", 3.0, 2.0),
        (
            "{law: mixture, parts: [{weight: 0.9, law: none}, {weight: 0.1, law: uniform, max: 19}]}",
            0.9 + 0.1 * 10.0,
            1.0,
        ),
    ];
    for (i, (law, mean, d)) in laws.iter().enumerate() {
        let s = scenario(&format!(
            "seed: {i}\ndemes: [{{name: a, size: 15, dormancy: {law}}}]\nsamples: [{{deme: a, count: 2}}]\n"
        ));
        let m = s.demes()[0].dormancy().mean().unwrap();
        assert!((m - mean).abs() < 1e-12, "{law}: mean {m}");
        assert_eq!(s.demes()[0].dormancy().support_gcd() as f64, *d, "{law}");
        let t: Vec<f64> = collect(&s, 20_000 * scale(), |g| g.tmrca().unwrap() as f64);
        assert_close(law, &t, 15.0 * mean * mean / d, 4.0);
    }
}

#[test]
fn island_model_within_and_between_deme_pair_times() {
    // Source: theory reference §6. Strobeck (1987), Genetics 117:149: E[T_within] = D N,
    // whatever the migration rate; exact discrete chain: E[T_between] = D N - D + 1/a_X
    // = 247.755668 for D = 3, N = 50, m = 0.01 (a_X = 0.009925).
    let base = "demes:\n  - {name: a, size: 50}\n  - {name: b, size: 50}\n  - {name: c, size: 50}\nmigration:\n";
    let mut mig = String::new();
    for f in ["a", "b", "c"] {
        for t in ["a", "b", "c"] {
            if f != t {
                mig.push_str(&format!("  - {{from: {f}, to: {t}, rate: 0.005}}\n"));
            }
        }
    }
    let within = scenario(&format!("seed: 3\n{base}{mig}samples: [{{deme: a, count: 2}}]\n"));
    let between = scenario(&format!("seed: 4\n{base}{mig}samples: [{{deme: a, count: 1}}, {{deme: b, count: 1}}]\n"));
    let reps = 20_000 * scale();
    let tw: Vec<f64> = collect(&within, reps, |g| g.tmrca().unwrap() as f64);
    let tb: Vec<f64> = collect(&between, reps, |g| g.tmrca().unwrap() as f64);
    assert_close("E[T_within]", &tw, 150.0, 4.0);
    assert_close("E[T_between]", &tb, 247.755668, 4.0);
}

#[test]
fn seed_bank_look_back_of_order_n_gives_the_exact_pair_time() {
    // Source: theory reference §5.3 and §3.2: R_N = 1 w.p. 1 - c/N, else 1 + Geometric with
    // mean N/(cK); E[R_N] = 1 + 1/K, so E[T_2] = N (1 + 1/K)^2 exactly: 400 for N = 100, c = K = 1.
    let s = scenario(
        "demes: [{name: a, size: 100, dormancy: {law: mixture, parts: [{weight: 0.99, law: none}, {weight: 0.01, law: geometric, mean: 101}]}}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let t: Vec<f64> = collect(&s, 20_000 * scale(), |g| g.tmrca().unwrap() as f64);
    assert_close("E[T_2] strong seed bank", &t, 400.0, 4.0);
}

#[test]
fn heavy_tail_forest_probability_for_n_of_one_generation() {
    // Source: theory reference §4: for alpha < 1/2 two lineages of one generation ever meet
    // with probability (S-1)/(N+S-1); law B (our pareto) alpha = 0.4 has S = 1.445129644441
    // (§7.4, "Law B, for comparison"), so with N = 2: 0.445129644/2.445129644 = 0.182048.
    // The horizon (10^7) can only lower the simulated value (meetings after it are lost), so
    // the check allows 0.005 below the exact value for that bias, plus 4 se either way.
    let s = scenario(
        "horizon: 1.0e7\ndemes: [{name: a, size: 2, dormancy: {law: pareto, alpha: 0.4}}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let reps = 4_000 * scale();
    let met: Vec<f64> = collect(&s, reps, |g| f64::from(u8::from(g.is_tree())));
    let (m, se) = mean_se(&met);
    let expected = 0.445129644441 / 2.445129644441;
    assert!(
        m <= expected + 4.0 * se && m >= expected - 0.005 - 4.0 * se,
        "P(meet) simulated {m} ± {se}, exact {expected}"
    );
}

#[test]
fn same_seed_same_results_for_any_thread_count() {
    let s = Scenario::demo();
    let idx: Vec<u64> = (0..40).collect();
    let run = |threads| {
        let mut out = Vec::new();
        seedline::batch::run(
            &s,
            &idx,
            BatchConfig { threads, chunk: 7 },
            |sim, sc, _, rng| {
                let g = Engine::exact(sc).simulate_tree(sim, rng);
                (g.tmrca(), g.total_length(), g.steps())
            },
            |_, v| {
                out.push(v);
                Ok(())
            },
        )
        .unwrap();
        out
    };
    assert_eq!(run(1), run(2));
    // And one replicate alone gives the same as in the batch.
    let key = master_key(s.seed());
    let g = Simulator::new().simulate(&s, &mut replicate_rng(&key, 17));
    assert_eq!(run(1)[17], (g.tmrca(), g.total_length(), g.steps()));
}
