//! The approximate engine against exact theory values and against the exact engine in the
//! overlap (large N, short dormancy). Every expected value names its source; all seeds are
//! fixed, so the tests are deterministic. Run with `--nocapture` to see the grid table.

use seedline::batch::{BatchConfig, master_key, replicate_rng};
use seedline::engine::approx::{self, ApproxModel};
use seedline::engine::{self as engines, Engine, EngineChoice, EngineKind};
use seedline::genealogy::Genealogy;
use seedline::scenario::Scenario;
use seedline::theory::{kingman, seedbank_coalescent::SeedBankCoalescent, structured};

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

/// Per replicate: T_MRCA, total length, then the total length of branches subtending i
/// leaves, i = 1..n-1.
fn stats(g: &Genealogy) -> Vec<f64> {
    let n = g.n_samples();
    let counts = g.leaf_counts();
    let mut classes = vec![0.0; n.saturating_sub(1)];
    for e in g.graph().edge_indices() {
        let (_, child) = g.graph().edge_endpoints(e).unwrap();
        let c = counts[child.index()] as usize;
        if (1..n).contains(&c) {
            classes[c - 1] += g.graph()[e].length as f64;
        }
    }
    let mut out = vec![g.tmrca().expect("a tree") as f64, g.total_length() as f64];
    out.extend(classes);
    out
}

fn exact_runs(s: &Scenario, reps: u64) -> Vec<Vec<f64>> {
    let idx: Vec<u64> = (0..reps).collect();
    let mut out = Vec::with_capacity(reps as usize);
    seedline::batch::run(
        s,
        &idx,
        BatchConfig::default(),
        |sim, sc, _, rng| stats(&Engine::exact(sc).simulate_tree(sim, rng)),
        |_, v| {
            out.push(v);
            Ok(())
        },
    )
    .unwrap();
    out
}

/// Approx replicates use streams offset from the exact ones, so that the two samples are
/// independent.
fn approx_runs(s: &Scenario, reps: u64) -> Vec<Vec<f64>> {
    let model = ApproxModel::new(s).unwrap();
    let key = master_key(s.seed());
    (0..reps).map(|r| stats(&model.simulate(&mut replicate_rng(&key, 1 << 40 | r)))).collect()
}

fn mean_se(xs: impl Iterator<Item = f64> + Clone) -> (f64, f64) {
    let n = xs.clone().count() as f64;
    let m = xs.clone().sum::<f64>() / n;
    let v = xs.map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (v / n).sqrt())
}

fn column(runs: &[Vec<f64>], k: usize) -> (f64, f64) {
    mean_se(runs.iter().map(|r| r[k]))
}

/// Compares every column of exact and approx runs; returns the z-scores (difference / its se).
fn compare(name: &str, yaml: &str, exact_reps: u64, approx_reps: u64) -> Vec<f64> {
    let s = scenario(yaml);
    let ex = exact_runs(&s, exact_reps);
    let ap = approx_runs(&s, approx_reps);
    let mut zs = Vec::new();
    let mut line = format!("{name:<28}");
    for k in 0..ex[0].len() {
        let ((me, se), (ma, sa)) = (column(&ex, k), column(&ap, k));
        let z = (ma - me) / (se * se + sa * sa).sqrt();
        if k < 2 {
            line.push_str(&format!(
                " | {} exact {me:.1}±{se:.1} approx {ma:.1}±{sa:.1} z {z:+.2}",
                ["tmrca", "length"][k]
            ));
        }
        zs.push(z);
    }
    let worst = zs[2..].iter().fold(0.0f64, |a, z| a.max(z.abs()));
    println!("{line} | max |z| over SFS classes {worst:.2}");
    for (k, z) in zs.iter().enumerate() {
        assert!(z.abs() < 4.0, "{name}: column {k} differs by z = {z:.2} (0 tmrca, 1 length, 1+i class i)");
    }
    zs
}

// --- the approximate engine alone against theory ----------------------------------------

fn approx_column(yaml: &str, reps: u64, k: usize) -> (f64, f64) {
    let s = scenario(yaml);
    column(&approx_runs(&s, reps), k)
}

fn assert_within(what: &str, (m, se): (f64, f64), expected: f64) {
    assert!((m - expected).abs() <= 4.0 * se, "{what}: approx mean {m} ± {se}, expected {expected} (4 se)");
}

#[test]
fn kingman_tmrca_and_length() {
    // Source: theory reference §1 (Kingman 1982): E[T_MRCA] = 2N(1 - 1/n), E[L] = 2N a_n.
    let yaml = "demes: [{name: a, size: 10000}]\nsamples: [{deme: a, count: 10}]\n";
    let s = scenario(yaml);
    let runs = approx_runs(&s, 20_000);
    assert_within("E[T_MRCA]", column(&runs, 0), kingman::tmrca_mean(10, 10_000.0));
    assert_within("E[T_MRCA] closed form", column(&runs, 0), 2.0 * 10_000.0 * 0.9);
    assert_within("E[L]", column(&runs, 1), kingman::total_length_mean(10, 10_000.0));
    // Fu 1995 / theory reference §2.1: E[L_i] = 2N / i (E[ξ_i] = θ/i with θ/2 per N generations).
    for i in 1..10 {
        assert_within(&format!("E[L_{i}]"), column(&runs, 1 + i), 2.0 * 10_000.0 / i as f64);
    }
}

#[test]
fn kkl_pair_time() {
    // Source: theory reference §3.2 (Kaj, Krone & Lascoux 2001): E[T_2] = N E[R]^2 / d.
    for (law, factor) in [
        ("{law: uniform, max: 3}", 4.0),              // E[R] = 2
        ("{law: geometric, mean: 5}", 25.0),          // E[R] = 5
        ("{law: table, weights: [0, 1, 0, 1]}", 4.5), // {2, 4}: E[R] = 3, d = 2 (§3.2 table)
    ] {
        let yaml = format!("demes: [{{name: a, size: 5000, dormancy: {law}}}]\nsamples: [{{deme: a, count: 2}}]\n");
        assert_within(law, approx_column(&yaml, 20_000, 0), 5000.0 * factor);
    }
}

#[test]
fn island_within_and_between() {
    // Source: theory reference §6 (Strobeck 1987; Slatkin 1991; continuous approximation):
    // T_within = DN, T_between = DN + (D-1)/(2m).
    let (d, n, m) = (3usize, 1000.0, 0.01);
    let mig = "migration:\n  - {from: a, to: b, rate: 0.005}\n  - {from: a, to: c, rate: 0.005}\n  - {from: b, to: a, rate: 0.005}\n  - {from: b, to: c, rate: 0.005}\n  - {from: c, to: a, rate: 0.005}\n  - {from: c, to: b, rate: 0.005}\n";
    let demes = "demes: [{name: a, size: 1000}, {name: b, size: 1000}, {name: c, size: 1000}]\n";
    let within = format!("{demes}{mig}samples: [{{deme: a, count: 2}}]\n");
    let between = format!("{demes}{mig}samples: [{{deme: a, count: 1}}, {{deme: b, count: 1}}]\n");
    assert_within("T_within", approx_column(&within, 20_000, 0), d as f64 * n);
    assert_within("T_between", approx_column(&between, 20_000, 0), structured::island_between_continuous(d, n, m));
    // With dormancy (derived, module docs of seedline::approx): coalescence at 1/(N E[R]^2)
    // and migration at m/E[R] give, on the time scale u = t/E[R]^2, the island model with
    // migration m E[R]: T_within = E[R]^2 D N, T_between = E[R]^2 D N + E[R] (D-1)/(2m).
    let dorm = demes.replace("size: 1000}", "size: 1000, dormancy: {law: geometric, mean: 2}}");
    let between = format!("{dorm}{mig}samples: [{{deme: a, count: 1}}, {{deme: b, count: 1}}]\n");
    assert_within("T_between with E[R] = 2", approx_column(&between, 20_000, 0), 4.0 * 3000.0 + 2.0 * 2.0 / (2.0 * m));
}

#[test]
fn seedbank_coalescent_tmrca_table() {
    // Source: theory reference §5.2 (Blath, González Casanova, Kurt & Wilke-Berenguer 2016),
    // c = K = 1, n = 10: E[T_MRCA] = 8.070856 N, E[L_active] + E[L_dormant] = 2 · 11.146948 N.
    // Look-back form §5.3 with N = 10^4: g = N/(cK) = 10^4, w = c g / (N (g - 1)) = 1/9999.
    let yaml = "demes: [{name: a, size: 10000, dormancy: {law: mixture, parts: [{weight: 9998, law: none}, {weight: 1, law: geometric, mean: 10000}]}}]\nsamples: [{deme: a, count: 10}]\n";
    let s = scenario(yaml);
    let model = ApproxModel::new(&s).unwrap();
    assert!(matches!(model.demes()[0], approx::DemeModel::SeedBank { .. }));
    let runs = approx_runs(&s, 8000);
    let exp = SeedBankCoalescent::new(1.0, 1.0).unwrap().expectations(10, 0).unwrap();
    assert!((exp.tmrca - 8.070856).abs() < 1e-5);
    assert_within("E[T_MRCA]", column(&runs, 0), 10_000.0 * 8.070856);
    assert_within("E[L]", column(&runs, 1), 10_000.0 * 2.0 * 11.146948);
}

#[test]
fn size_changes_follow_the_integrated_hazard() {
    // Two epochs: N1 = 1000 for t < 500, N2 = 5000 after. P(T_2 > t) = exp(-∫ du/N(u)), so
    // E[T_2] = N1 (1 - e^{-500/N1}) + N2 e^{-500/N1}   (hand-derived from the hazard).
    let yaml = "demes: [{name: a, size: [{generations_ago: 0, size: 1000}, {generations_ago: 500, size: 5000}]}]\nsamples: [{deme: a, count: 2}]\n";
    let q = (-0.5f64).exp();
    assert_within("piecewise E[T_2]", approx_column(yaml, 30_000, 0), 1000.0 * (1.0 - q) + 5000.0 * q);
    // Exponential: N(t) = N0 e^{-g t}, P(T_2 > t) = exp(-(e^{g t} - 1)/(g N0)); E[T_2] by
    // quadrature of the survival function (independent of the engine's closed-form inverse).
    let (n0, g) = (5000.0f64, 0.0005f64);
    let surv = |t: f64| (-((g * t).exp_m1()) / (g * n0)).exp();
    let h = 1.0;
    let expected: f64 = (0..200_000).map(|k| surv((k as f64 + 0.5) * h) * h).sum();
    let yaml = "demes: [{name: a, size: [{generations_ago: 0, size: 5000, growth: 0.0005}]}]\nsamples: [{deme: a, count: 2}]\n";
    assert_within("exponential E[T_2]", approx_column(yaml, 30_000, 0), expected);
}

#[test]
fn auto_rule() {
    let pick = |yaml: &str| approx::choose(&scenario(yaml)).0;
    let one = |size: &str, law: &str| {
        format!("demes: [{{name: a, size: {size}, dormancy: {law}}}]\nsamples: [{{deme: a, count: 5}}]\n")
    };
    assert_eq!(pick(&one("1000", "{law: none}")), EngineKind::Approx);
    assert_eq!(pick(&one("1000", "{law: geometric, mean: 5}")), EngineKind::Approx);
    assert_eq!(pick(&one("150", "{law: none}")), EngineKind::Exact, "small N");
    assert_eq!(pick(&one("1000", "{law: pareto, alpha: 0.7}")), EngineKind::Exact, "infinite mean");
    assert_eq!(pick(&one("100000", "{law: pareto, alpha: 0.7, max: 1000}")), EngineKind::Approx, "truncated");
    assert_eq!(pick(&one("1000", "{law: uniform, max: 300}")), EngineKind::Exact, "look-back > N/10");
    assert_eq!(pick(&one("1000", "{law: since_founding, founded: 5000}")), EngineKind::Exact);
    // The seed-bank form with g = N: accepted despite its long look-back.
    let sb = "{law: mixture, parts: [{weight: 998, law: none}, {weight: 1, law: geometric, mean: 1000}]}";
    assert_eq!(pick(&one("1000", sb)), EngineKind::Approx);
    // An exponential epoch that shrinks below 200 going back.
    assert_eq!(
        pick(&one("[{generations_ago: 0, size: 1000, growth: 0.01}, {generations_ago: 300, size: 50}]", "{law: none}")),
        EngineKind::Exact
    );
    // Forced approx outside the domain is an error; exact always resolves.
    let s = scenario(&one("1000", "{law: pareto, alpha: 0.7}"));
    assert!(engines::resolve(EngineChoice::Approx, &s).is_err());
    assert!(approx::simulate_approx(&s, &mut replicate_rng(&master_key(1), 0)).is_err());
    assert_eq!(engines::resolve(EngineChoice::Exact, &s).unwrap().kind, EngineKind::Exact);
}

// --- exact against approximate in the overlap --------------------------------------------

#[test]
fn grid_single_deme_laws() {
    let one = |law: &str, n: u32| {
        format!("seed: 3\ndemes: [{{name: a, size: 1000, dormancy: {law}}}]\nsamples: [{{deme: a, count: {n}}}]\n")
    };
    compare("none N=1000 n=10", &one("{law: none}", 10), 800, 4000);
    compare("uniform{1..3} n=10", &one("{law: uniform, max: 3}", 10), 600, 4000);
    compare("geometric mean 2 n=10", &one("{law: geometric, mean: 2}", 10), 600, 4000);
    compare("geometric mean 5 n=5", &one("{law: geometric, mean: 5}", 5), 500, 4000);
    compare("table [.5,.3,.2] n=10", &one("{law: table, weights: [0.5, 0.3, 0.2]}", 10), 600, 4000);
}

#[test]
fn grid_structure_and_time() {
    compare(
        "two demes m=0.005 geom 2",
        "seed: 4\ndemes: [{name: a, size: 1000, dormancy: {law: geometric, mean: 2}}, {name: b, size: 1000, dormancy: {law: geometric, mean: 2}}]\nmigration: [{from: a, to: b, rate: 0.005}, {from: b, to: a, rate: 0.005}]\nsamples: [{deme: a, count: 4}, {deme: b, count: 4}]\n",
        500,
        4000,
    );
    compare(
        "island D=3 m=0.01",
        "seed: 5\ndemes: [{name: a, size: 1000}, {name: b, size: 1000}, {name: c, size: 1000}]\nmigration: [{from: a, to: b, rate: 0.005}, {from: a, to: c, rate: 0.005}, {from: b, to: a, rate: 0.005}, {from: b, to: c, rate: 0.005}, {from: c, to: a, rate: 0.005}, {from: c, to: b, rate: 0.005}]\nsamples: [{deme: a, count: 3}, {deme: b, count: 3}, {deme: c, count: 3}]\n",
        600,
        4000,
    );
    compare(
        "size change 1000->4000 @500",
        "seed: 6\ndemes: [{name: a, size: [{generations_ago: 0, size: 1000}, {generations_ago: 500, size: 4000}]}]\nsamples: [{deme: a, count: 10}]\n",
        600,
        4000,
    );
    compare(
        "exp growth 5000, g=1e-3 to 1000",
        "seed: 7\ndemes: [{name: a, size: [{generations_ago: 0, size: 5000, growth: 0.001}, {generations_ago: 1000, size: 1839}]}]\nsamples: [{deme: a, count: 10}]\n",
        500,
        4000,
    );
    compare(
        "ancient @500, geom 2",
        "seed: 8\ndemes: [{name: a, size: 1000, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 5}, {deme: a, count: 5, generations_ago: 500}]\n",
        600,
        4000,
    );
}

#[test]
fn grid_seed_banks() {
    compare(
        "seed-bank coal. N=1000 c=K=1",
        "seed: 9\ndemes: [{name: a, size: 1000, dormancy: {law: mixture, parts: [{weight: 998, law: none}, {weight: 1, law: geometric, mean: 1000}]}}]\nsamples: [{deme: a, count: 10}]\n",
        500,
        4000,
    );
    compare(
        "seedbank samples, geom 3",
        "seed: 10\ndemes: [{name: a, size: 1000, dormancy: {law: geometric, mean: 3}}]\nsamples: [{deme: a, count: 5}, {deme: a, count: 5, from: seedbank}]\n",
        400,
        4000,
    );
}

// --- where the two part ------------------------------------------------------------------

/// Measures exact against approx where auto picks the exact engine (small N, dormancy
/// comparable to N) and prints the relative differences (reported in docs/performance.md).
/// Asserts only the auto decision: these are measurements, not agreement checks.
#[test]
fn where_exact_and_approx_part() {
    for (name, yaml, reps) in [
        (
            "N=50 geometric mean 5 n=10",
            "seed: 11\ndemes: [{name: a, size: 50, dormancy: {law: geometric, mean: 5}}]\nsamples: [{deme: a, count: 10}]\n",
            3000,
        ),
        (
            "N=200 uniform{1..100} n=10",
            "seed: 12\ndemes: [{name: a, size: 200, dormancy: {law: uniform, max: 100}}]\nsamples: [{deme: a, count: 10}]\n",
            300,
        ),
        (
            "N=100 seed-bank c=K=1 n=10",
            "seed: 13\ndemes: [{name: a, size: 100, dormancy: {law: mixture, parts: [{weight: 98, law: none}, {weight: 1, law: geometric, mean: 100}]}}]\nsamples: [{deme: a, count: 10}]\n",
            3000,
        ),
    ] {
        let s = scenario(yaml);
        assert_eq!(approx::choose(&s).0, EngineKind::Exact, "{name}");
        let (ex, ap) = (exact_runs(&s, reps), approx_runs(&s, 4000));
        let mut line = format!("{name:<28}");
        for (k, what) in [(0, "tmrca"), (1, "length")] {
            let ((me, se), (ma, sa)) = (column(&ex, k), column(&ap, k));
            line.push_str(&format!(
                " | {what} exact {me:.0}±{se:.0} approx {ma:.0}±{sa:.0} ({:+.1}%, z {:+.1})",
                100.0 * (ma / me - 1.0),
                (ma - me) / (se * se + sa * sa).sqrt()
            ));
        }
        println!("{line}");
    }
}
