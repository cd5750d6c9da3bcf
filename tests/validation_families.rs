//! Families of a time block against renewal theory. Every expected value comes from outside
//! the simulation: the theory reference (/work/shared/reference/theory.md §4, §7.4) or the
//! crate's `theory::relatedness`, which is tested against that reference on its own. Seeds
//! are fixed, so the tests are deterministic; tolerances are multiples of Monte-Carlo
//! standard errors estimated over replicates (pairs of one replicate are strongly correlated:
//! one family covers much of a block).

use seedline::batch::BatchConfig;
use seedline::dormancy::{Dormancy, Pareto};
use seedline::families::{self, Colours, FamiliesReport, Options};
use seedline::scenario::Scenario;
use seedline::theory::relatedness::{self, Relatedness};
use seedline::theory::renewal::{Regime, classify};
use std::sync::OnceLock;

const ALPHA: f64 = 0.3;
/// Multiples of the standard error allowed.
const K_SE: f64 = 4.0;

fn block_yaml(size: u64, len: u64, horizon: &str, replicates: u64, seed: u64) -> String {
    format!(
        "seed: {seed}\nreplicates: {replicates}\nhorizon: {horizon}\n\
         demes: [{{name: t, size: {size}, dormancy: {{law: pareto, alpha: {ALPHA}}}}}]\n\
         samples: [{{deme: t, block: {{from: 0, to: {}}}}}]\n",
        len - 1
    )
}

fn run(yaml: &str, options: &Options, threads: usize) -> FamiliesReport {
    let s = Scenario::from_yaml_str(yaml, "test").unwrap();
    families::run(&s, "test", BatchConfig { threads, ..BatchConfig::default() }, options, &|| {}).unwrap()
}

/// N = 1, pareto alpha 0.3 (law B of the reference), block of 300, horizon 1e7, 2000 replicates.
fn main_run() -> &'static FamiliesReport {
    static CELL: OnceLock<FamiliesReport> = OnceLock::new();
    CELL.get_or_init(|| run(&block_yaml(1, 300, "1.0e7", 2000, 11), &Options::default(), 0))
}

fn law_b() -> Relatedness {
    Relatedness::new(&Dormancy::Pareto(Pareto::new(ALPHA, None).unwrap()), Relatedness::DEFAULT_LEN).unwrap()
}

/// Checks `sim` against the prediction within the horizon, want (1 - bias), to K_SE se,
/// `bias` being the exact finite-horizon shortfall reported by the run.
fn assert_within_horizon(what: &str, sim: f64, se: f64, want: f64, bias: f64) {
    assert!(se > 0.0, "{what}: zero standard error");
    let expect = want * (1.0 - bias);
    assert!(
        (sim - expect).abs() <= K_SE * se,
        "{what}: simulated {sim} ± {se}, expected {expect} ({want} less {bias})"
    );
}

/// Checks `sim` against `want`: at most K_SE se above, and at most K_SE se plus a relative
/// `bias` below (the horizon can only lower related fractions).
fn assert_below_bias(what: &str, sim: f64, se: f64, want: f64, bias: f64) {
    assert!(se > 0.0, "{what}: zero standard error");
    let (lo, hi) = (want * (1.0 - bias) - K_SE * se, want + K_SE * se);
    assert!(sim >= lo && sim <= hi, "{what}: simulated {sim} ± {se}, expected {want} (allowed [{lo}, {hi}])");
}

#[test]
fn relatedness_of_law_b_at_lags_10_and_100() {
    // Source: theory reference §7.4, law B table, alpha = 0.3: P(0~10) = 0.116017790286,
    // P(0~100) = 0.0465764554892 (N = 1), lowered by the finite-horizon shortfall (about
    // 0.08% and 0.14% for horizon 1e7, `theory::horizon`, itself tested against the §7.4
    // truncated meeting probability).
    let r = main_run();
    for (lag, want) in [(10usize, 0.116017790286), (100, 0.0465764554892)] {
        let row = &r.relatedness[lag - 1];
        assert_eq!(row.lag, lag);
        // The module's prediction is the reference value (FFT autocorrelation / S).
        assert!((row.predicted.unwrap() - want).abs() < 1e-8 * want, "predicted {:?}", row.predicted);
        let bias = row.horizon_bias.unwrap();
        assert!(bias > 0.0 && bias < 0.01, "horizon bias {bias}");
        assert_within_horizon(&format!("P(0~{lag})"), row.simulated, row.se.unwrap(), want, bias);
    }
}

#[test]
fn relatedness_at_other_lags_against_h_over_s() {
    // Source: P(0~l) = H_l / S from `theory::relatedness::Relatedness::related` (first-meeting
    // identity, theory reference §7.1; the function is tested against §7.4 law A values).
    let r = main_run();
    let theory = law_b();
    for lag in [1usize, 2, 5, 20, 50, 200, 299] {
        let row = &r.relatedness[lag - 1];
        let want = theory.related(lag).unwrap();
        assert!((row.predicted.unwrap() - want).abs() < 1e-9, "lag {lag}");
        assert_within_horizon(&format!("P(0~{lag})"), row.simulated, row.se.unwrap(), want, row.horizon_bias.unwrap());
    }
}

/// N, alpha 0.45 (shortfalls of 5-30%), block of 200, 2000 replicates.
fn heavy_run(size: u64, horizon: &str, seed: u64) -> FamiliesReport {
    let yaml = block_yaml(1, 200, horizon, 2000, seed).replace(&format!("alpha: {ALPHA}"), "alpha: 0.45");
    let yaml = yaml.replace("size: 1,", &format!("size: {size},"));
    run(&yaml, &Options { bootstrap: 0, ..Options::default() }, 0)
}

/// The N = 1, horizon 1e8 run, shared by two tests.
fn heavy_main() -> &'static FamiliesReport {
    static CELL: OnceLock<FamiliesReport> = OnceLock::new();
    CELL.get_or_init(|| heavy_run(1, "1.0e8", 21))
}

#[test]
fn horizon_shortfall_matches_simulation_for_alpha_0_45() {
    // Source: P(0~l) = H_l / (N + S - 1) (theory reference §4, §7.1) times 1 minus the
    // finite-horizon shortfall P(D > horizon - t | 0~l) of `theory::horizon` (first-meeting
    // law G_l / (Q2 + N - 1), exact sum for small rooms, singular expansion for large ones;
    // tested there against the §7.4 truncated meeting probability of law A). Three cases:
    // N = 1 and horizon 1e8 (expansion; the case where the BetaPrime-tail estimate said
    // 13.7% at lag 1 while simulation falls 5.6% short), N = 1 and horizon 1000 (exact sums,
    // a different room for every pair), N = 3 and horizon 1e6. Tolerance K_SE se over
    // replicates.
    let law = Dormancy::Pareto(Pareto::new(0.45, None).unwrap());
    for (size, horizon, seed) in [(1u64, "1.0e8", 21u64), (1, "1000", 22), (3, "1.0e6", 23)] {
        let own;
        let r = if seed == 21 {
            heavy_main()
        } else {
            own = heavy_run(size, horizon, seed);
            &own
        };
        let theory = Relatedness::new(&law, Relatedness::DEFAULT_LEN).unwrap();
        for lag in [1usize, 10, 100] {
            let row = &r.relatedness[lag - 1];
            let want = theory.meet_apart(lag, size).unwrap();
            assert!((row.predicted.unwrap() - want).abs() < 1e-9);
            let bias = row.horizon_bias.unwrap();
            eprintln!(
                "N {size} horizon {horizon} lag {lag}: simulated {:.4} ± {:.4}, predicted {want:.4}, shortfall {bias:.4}, \
                 z {:.2}",
                row.simulated,
                row.se.unwrap(),
                (row.simulated - want * (1.0 - bias)) / row.se.unwrap()
            );
            assert!(bias > 0.04, "N {size} horizon {horizon} lag {lag}: shortfall {bias}");
            assert_within_horizon(
                &format!("N={size} horizon {horizon} P(0~{lag})"),
                row.simulated,
                row.se.unwrap(),
                want,
                bias,
            );
        }
    }
}

#[test]
fn limit_law_tail_overstates_the_horizon_shortfall() {
    // Source: the BetaPrime(alpha, 1 - 2 alpha) limit of D / l (theory reference §7.1) is
    // the law of D for l -> infinity; at lag 1 its tail 1 - F((horizon - t) / l) is 13.7%
    // for alpha = 0.45 and horizon 1e8. Simulation rejects it by far (this is the check that
    // caught the old estimate), and the finite-horizon value is well below it.
    let row = &heavy_main().relatedness[0];
    let limit_tail = 1.0 - relatedness::beta_prime_cdf(0.45, (1.0e8 - 199.0) / 1.0).unwrap();
    assert!((limit_tail - 0.137).abs() < 0.001, "{limit_tail}");
    let pred = row.predicted.unwrap();
    assert!(row.simulated - pred * (1.0 - limit_tail) > 10.0 * row.se.unwrap());
    assert!(row.horizon_bias.unwrap() < 0.6 * limit_tail);
}

#[test]
fn mrca_depth_given_related_at_lag_10() {
    // Source: exact finite-n P(D <= x n | 0~n) from `Relatedness::mrca_depth_cdf` for law B
    // (the reference tabulates law A only; the function reproduces those to 6e-6, see its
    // unit test). Depth below the older individual, x = 0.1, 0.5, 1, 2, 5. Tolerance K_SE se
    // (ratio-estimator se over replicates) plus 0.5% of the value for the horizon, which can
    // only remove related pairs with large D (CDF biased up, by at most the lag-10 bias).
    let r = main_run();
    let want = law_b().mrca_depth_cdf(10, &families::DEPTH_XS).unwrap();
    let rows: Vec<_> = r.mrca_depth.iter().filter(|d| d.lag == 10).collect();
    assert_eq!(rows.len(), 5);
    for (row, w) in rows.iter().zip(&want) {
        let sim = row.simulated_cdf.unwrap();
        let se = row.se.unwrap();
        assert!((row.exact_cdf.unwrap() - w).abs() < 1e-12);
        assert!(row.related_pairs > 10_000);
        assert!((sim - w).abs() <= K_SE * se + 0.005 * w, "x = {}: {sim} ± {se} vs exact {w}", row.x);
    }
    // The BetaPrime(0.3, 0.4) limit (reference §7.4: CDF(0.1) = 0.32176) is far from the
    // lag-10 law: the finite-n values must be used.
    assert!((rows[0].limit_cdf.unwrap() - 0.32176).abs() < 6e-6);
    assert!(rows[0].simulated_cdf.unwrap() - rows[0].limit_cdf.unwrap() > 10.0 * rows[0].se.unwrap());
}

#[test]
fn coloured_variance_against_exact_theory() {
    // Source: Var(S_m) = m + 2 sum_{d<m} (m-d) P(0~d) (theory reference §7.1) from
    // `Relatedness::coloured_variance` (tested against §7.4 law A values). Tolerance K_SE se
    // of the mean of S_m^2 over replicates, plus up to 1% below for the horizon (every
    // covariance term is lowered by at most ~0.5% at lags <= 300).
    let r = main_run();
    let theory = law_b();
    for m in [10usize, 32, 100, 300] {
        let row = r.coloured.iter().find(|c| c.m == m).unwrap();
        let want = theory.coloured_variance(m).unwrap();
        assert!((row.exact_var.unwrap() - want).abs() < 1e-9 * want);
        assert_below_bias(&format!("Var(S_{m})"), row.simulated_var, row.se.unwrap(), want, 0.01);
    }
    // m = 1: a single ±1 type, variance exactly 1 in every replicate.
    assert_eq!(r.coloured[0].m, 1);
    assert_eq!(r.coloured[0].simulated_var, 1.0);
}

#[test]
fn hurst_exponent_fit() {
    // Source: H = alpha + 1/2 (Hammond & Sheffield 2013, theory reference §7), reached only
    // as m -> infinity. On the fitted grid m in [10, 300] the exact Var(S_m) has a smaller
    // slope, so the bootstrap interval must contain the exact-theory fit on the same grid,
    // and 2 alpha + 1 within the interval widened by that finite-m offset.
    let r = main_run();
    let f = r.fit.as_ref().unwrap();
    assert_eq!(r.predicted_h, Some(ALPHA + 0.5));
    assert_eq!(f.m_range, [10, 300]);
    let [lo, hi] = f.h_ci95.unwrap();
    assert!(lo < f.h && f.h < hi && hi - lo < 0.1, "H {} in [{lo}, {hi}]", f.h);
    let exact_h = f.exact_two_h.unwrap() / 2.0;
    assert!(lo <= exact_h && exact_h <= hi, "exact finite-m H {exact_h} outside [{lo}, {hi}]");
    let offset = (exact_h - (ALPHA + 0.5)).abs();
    assert!(offset < 0.03, "finite-m offset {offset}");
    assert!(lo - offset <= ALPHA + 0.5 && ALPHA + 0.5 <= hi + offset);
}

#[test]
fn exact_variance_grows_like_m_to_the_2h() {
    // Source: Var(S_m) ~ C m^(2H)/(H(2H-1)), H = alpha + 1/2 (theory reference §7.1). Pure
    // theory: the local slope of ln Var(S_m) in ln m from `coloured_variance` approaches
    // 2 alpha + 1 = 1.6 as m grows (the remainder decays like a power of m).
    let theory = law_b();
    let slope = |a: usize, b: usize| {
        let (va, vb) = (theory.coloured_variance(a).unwrap(), theory.coloured_variance(b).unwrap());
        families::fit_exponent(&[a, b], &[va, vb]).unwrap()
    };
    let (s1, s2, s3) = (slope(10, 30), slope(300, 1000), slope(5000, 10000));
    let target = 2.0 * ALPHA + 1.0;
    assert!((s3 - target).abs() < 0.01, "slope at 5e3..1e4 = {s3}");
    assert!((s3 - target).abs() < (s2 - target).abs() && (s2 - target).abs() < (s1 - target).abs(), "{s1} {s2} {s3}");
}

#[test]
fn regime_is_forest_for_alpha_0_3() {
    // Source: theory reference §4, §7.1: alpha < 1/2 gives sum q^2 < infinity, a forest.
    let law = Dormancy::Pareto(Pareto::new(ALPHA, None).unwrap());
    assert_eq!(classify(&law).unwrap().regime, Regime::Forest);
    let r = main_run();
    assert_eq!(r.regime.as_deref(), Some("forest"));
    assert!(families::render_summary(r).contains("regime: forest"));
    // A forest: many families per block of 300.
    assert!(r.mean_families > 10.0);
    let counted: u64 = r.family_sizes.iter().map(|[s, c]| s * c).sum();
    assert_eq!(counted, 300 * 2000);
}

#[test]
fn normal_colours_have_the_same_variance() {
    // Source: with centred unit-variance types, Cov(X_i, X_j) = P(i ~ j) whatever the type
    // law, so Var(S_m) is the same exact value (theory reference §7.1). 600 replicates.
    let o = Options { colours: Colours::Normal, bootstrap: 0, ..Options::default() };
    let r = run(&block_yaml(1, 100, "1.0e7", 600, 5), &o, 0);
    let theory = law_b();
    for m in [10usize, 46, 100] {
        let row = r.coloured.iter().find(|c| c.m == m).unwrap();
        assert_below_bias(
            &format!("Var(S_{m})"),
            row.simulated_var,
            row.se.unwrap(),
            theory.coloured_variance(m).unwrap(),
            0.01,
        );
    }
    // Normal types: S_1^2 is not identically 1.
    assert!(r.coloured[0].se.unwrap() > 0.0);
}

#[test]
fn deme_of_three_relatedness_uses_meet_apart() {
    // Source: P(lineages n apart ever meet) = H_n / (N + S - 1) (theory reference §4), from
    // `Relatedness::meet_apart` (tested against the §4 law A table). N = 3, block of 100.
    let r = run(&block_yaml(3, 100, "1.0e7", 800, 9), &Options { bootstrap: 0, ..Options::default() }, 0);
    let theory = law_b();
    for lag in [1usize, 10, 50] {
        let row = &r.relatedness[lag - 1];
        let want = theory.meet_apart(lag, 3).unwrap();
        assert!((row.predicted.unwrap() - want).abs() < 1e-9);
        let bias = row.horizon_bias.unwrap();
        assert!(bias > 0.0 && bias < 0.01, "{bias}");
        assert_within_horizon(&format!("N=3 P(0~{lag})"), row.simulated, row.se.unwrap(), want, bias);
    }
    assert!(r.mrca_depth.iter().all(|d| d.exact_cdf.is_none()), "the depth law is for N = 1 only");
}

#[test]
fn results_do_not_depend_on_threads() {
    // Source: architecture invariant (one stream per replicate, serial reduction).
    let yaml = block_yaml(1, 120, "1.0e6", 40, 2);
    let o = Options::default();
    let (a, b) = (run(&yaml, &o, 1), run(&yaml, &o, 2));
    assert_eq!(families::tables(&a), families::tables(&b));
    assert_eq!(serde_json::to_string(&a).unwrap(), serde_json::to_string(&b).unwrap());
}

#[test]
fn non_block_designs_are_refused() {
    // Source: the module's contract (one individual per generation of a range, one deme).
    for samples in [
        "[{deme: t, count: 5}]",
        "[{deme: t, block: {from: 0, to: 9}}, {deme: t, block: {from: 20, to: 29}}]",
        "[{deme: t, block: {from: 0, to: 9}}, {deme: t, count: 1, generations_ago: 3}]",
        "[{deme: t, block: {from: 0, to: 9}, from: seedbank}]",
    ] {
        let yaml =
            format!("demes: [{{name: t, size: 10, dormancy: {{law: geometric, mean: 2}}}}]\nsamples: {samples}\n");
        let s = Scenario::from_yaml_str(&yaml, "test").unwrap();
        let e = families::run(&s, "test", BatchConfig::default(), &Options::default(), &|| {}).unwrap_err();
        assert!(e.is_bad_input(), "{samples}: {e}");
    }
    // Two adjacent blocks listed out of order make one block.
    let yaml = "demes: [{name: t, size: 1, dormancy: {law: pareto, alpha: 0.3}}]\n\
                samples: [{deme: t, block: {from: 10, to: 19}}, {deme: t, block: {from: 0, to: 9}}]\n";
    let b = families::Block::of(&Scenario::from_yaml_str(yaml, "test").unwrap()).unwrap();
    assert_eq!((b.first(), b.last(), b.len()), (0, 19, 20));
}

fn seedline(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_seedline")).args(args).output().unwrap()
}

#[test]
fn cli_writes_the_files_and_exits_2_on_a_non_block() {
    // Source: the CLI contract (files, summary, exit code 2 for bad input).
    let dir = std::env::temp_dir().join(format!("seedline-families-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let scen = dir.join("b.yaml");
    std::fs::write(&scen, block_yaml(1, 60, "1.0e6", 10, 1)).unwrap();
    let out = dir.join("out");
    let o = seedline(&["families", scen.to_str().unwrap(), "--replicates", "12", "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("regime: forest") && text.contains("12 replicates") && text.contains("predicted"), "{text}");
    for f in families::FILES {
        assert!(out.join(f).exists(), "{f}");
    }
    let rel = std::fs::read_to_string(out.join("relatedness.tsv")).unwrap();
    assert!(rel.starts_with("lag\tpairs\trelated\tsimulated\tpredicted"));
    assert_eq!(rel.lines().count(), 60);
    let fam = std::fs::read_to_string(out.join("families.tsv")).unwrap();
    assert_eq!(fam.lines().count(), 13);

    std::fs::write(&scen, "demes: [{name: t, size: 10}]\nsamples: [{deme: t, count: 4}]\n").unwrap();
    let o = seedline(&["families", scen.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("block sample"));
    let o = seedline(&["families", scen.to_str().unwrap(), "--colours", "purple"]);
    assert_eq!(o.status.code(), Some(2));
    std::fs::remove_dir_all(&dir).unwrap();
}
