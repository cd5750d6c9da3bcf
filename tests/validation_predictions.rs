//! Issue 18: predictions for every scenario where a coalescent limit holds, against the exact
//! engine. A grid of scenarios with size changes, growth, migration, ancient samples, seeds
//! from the bank and the seed-bank coalescent, each at N large enough for the rule of
//! `--engine auto` (`theory::limits::check`) to hold. For every pair of sample classes: the
//! mean time of the common ancestor, its distribution at 5 quantiles (the empirical
//! P(T <= t_q) against q) and the expected differences; E[π] over the sample and per deme and
//! F_ST (delta method on the ratio of means); T_MRCA, total length and the expected SFS where
//! predicted. Every check: within 4 standard errors. The predictions are limits (large N); the
//! finite-N bias at these sizes is O(1/N) and O(E[R]/N), well below the Monte-Carlo error.
//! `SEEDLINE_BIG=1` runs ten times more replicates. Run with `--nocapture` for the table.

mod pairs;

use seedline::scenario::{SampleKind, Scenario};
use seedline::theory::predict::{Kind, QUANTILES, predict};

fn reps(base: u64) -> u64 {
    if std::env::var_os("SEEDLINE_BIG").is_some() { 10 * base } else { base }
}

fn label(s: &Scenario, i: usize) -> String {
    let x = &s.samples()[i];
    let mut l = s.demes()[x.deme].name().to_string();
    if x.time > 0 {
        l.push_str(&format!("@{}", x.time));
    }
    if x.kind == SampleKind::Seedbank {
        l.push_str(" seed");
    }
    l
}

fn within(what: &str, (m, se): (f64, f64), want: f64) {
    println!("    {what:<40} simulated {m:12.4} ± {se:9.4}   predicted {want:12.4}   z {:+.2}", (m - want) / se);
    assert!((m - want).abs() <= 4.0 * se, "{what}: simulated {m} ± {se}, predicted {want} (4 se)");
}

fn grid(name: &str, yaml: &str, base_reps: u64) {
    let s = Scenario::from_yaml_str(yaml, name).unwrap();
    let pr = predict(&s);
    let (holds, why) = pr.limit_holds.clone().unwrap();
    assert!(holds, "{name}: the grid sits where the limit holds: {why}");
    let n = s.samples().len();
    let all: Vec<(usize, usize)> = (0..n).flat_map(|i| (i + 1..n).map(move |j| (i, j))).collect();
    let runs = pairs::exact_readings(&s, reps(base_reps), &all);
    println!("{name} ({} replicates)", runs.len());
    // One pair of samples per pair of classes.
    let mut seen: Vec<(String, String)> = Vec::new();
    for (k, &(i, j)) in all.iter().enumerate() {
        let (a, b) = (label(&s, i), label(&s, j));
        if seen.iter().any(|(x, y)| (x == &a && y == &b) || (x == &b && y == &a)) {
            continue;
        }
        seen.push((a.clone(), b.clone()));
        let p = pr
            .pair_times
            .iter()
            .find(|p| (p.a == a && p.b == b) || (p.a == b && p.b == a))
            .unwrap_or_else(|| panic!("{name}: no prediction for {a} - {b}: {:?}", pr.notes));
        assert!(matches!(p.mean.kind, Kind::Limit | Kind::Exact), "{name}: {a}-{b} is {:?}", p.mean.kind);
        within(&format!("E[T] {a} - {b}"), pairs::mean_se(runs.iter().map(|r| r.pair_times[k])), p.mean.value);
        if let Some(d) = &p.differences {
            within(&format!("E[diff] {a} - {b}"), pairs::mean_se(runs.iter().map(|r| r.pair_diffs[k])), d.value);
        }
        assert_eq!(p.quantiles.len(), QUANTILES.len());
        for &(q, t) in &p.quantiles {
            let below = runs.iter().filter(|r| r.pair_times[k] <= t).count() as f64 / runs.len() as f64;
            let se = (q * (1.0 - q) / runs.len() as f64).sqrt();
            within(&format!("P(T <= t_{q}) {a} - {b}"), (below, se), q);
        }
    }
    // π over the sample and per deme; F_ST from the ratio of means.
    let pi = |r: &pairs::Reading, sel: &dyn Fn(usize, usize) -> bool| -> f64 {
        let v: Vec<f64> = all.iter().zip(&r.pair_diffs).filter(|((i, j), _)| sel(*i, *j)).map(|(_, d)| *d).collect();
        v.iter().sum::<f64>() / v.len() as f64
    };
    let deme = |i: usize| s.samples()[i].deme;
    within("E[pi]", pairs::mean_se(runs.iter().map(|r| pi(r, &|_, _| true))), pr.pi_mean.as_ref().unwrap().value);
    for (dname, p) in &pr.deme_pi {
        let d = s.deme_index(dname).unwrap();
        within(
            &format!("E[pi_{dname}]"),
            pairs::mean_se(runs.iter().map(|r| pi(r, &|i, j| deme(i) == d && deme(j) == d))),
            p.value,
        );
    }
    for (an, bn, p) in &pr.sample_fst {
        let (a, b) = (s.deme_index(an).unwrap(), s.deme_index(bn).unwrap());
        let rows: Vec<[f64; 3]> = runs
            .iter()
            .map(|r| {
                [
                    pi(r, &|i, j| deme(i) == a && deme(j) == a),
                    pi(r, &|i, j| deme(i) == b && deme(j) == b),
                    pi(r, &|i, j| (deme(i) == a && deme(j) == b) || (deme(i) == b && deme(j) == a)),
                ]
            })
            .collect();
        within(&format!("F_ST {an}-{bn}"), pairs::fst_delta(&rows), p.value);
    }
    // The whole sample.
    let t = pr.tmrca_mean.as_ref().unwrap_or_else(|| panic!("{name}: no T_MRCA: {:?}", pr.notes));
    within("E[T_MRCA]", pairs::mean_se(runs.iter().map(|r| r.tmrca)), t.value);
    within(
        "E[total length]",
        pairs::mean_se(runs.iter().map(|r| r.length)),
        pr.total_length_mean.as_ref().unwrap().value,
    );
    let sfs = pr.sfs_expected.as_ref().unwrap();
    for (i, x) in sfs.iter().enumerate() {
        within(&format!("E[xi_{}]", i + 1), pairs::mean_se(runs.iter().map(|r| r.sfs[i])), *x);
    }
    let s_sum: f64 = sfs.iter().sum();
    within("E[S]", pairs::mean_se(runs.iter().map(|r| r.sfs.iter().sum())), s_sum);
}

const MUT: &str = "mutation: {reproduction_rate: 1.0e-3, dormant_rate: 2.0e-4, sites: 1}\n";

#[test]
fn size_step_one_deme() {
    grid(
        "size step (Polanski-Kimmel)",
        &format!(
            "seed: 41\ndemes: [{{name: a, size: [{{generations_ago: 0, size: 400}}, {{generations_ago: 300, size: 1600}}], dormancy: {{law: uniform, max: 3}}}}]\nsamples: [{{deme: a, count: 6}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn exponential_growth_one_deme() {
    grid(
        "exponential growth (Polanski-Kimmel)",
        &format!(
            "seed: 42\ndemes: [{{name: a, size: [{{generations_ago: 0, size: 3000, growth: 0.0004}}], dormancy: {{law: geometric, mean: 1.5}}}}]\nsamples: [{{deme: a, count: 6}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn asymmetric_migration_two_demes() {
    grid(
        "migration per look-back",
        &format!(
            "seed: 43\ndemes: [{{name: a, size: 300, dormancy: {{law: geometric, mean: 2}}}}, {{name: b, size: 300, dormancy: {{law: geometric, mean: 2}}}}]\nmigration: [{{from: a, to: b, rate: 0.004}}, {{from: b, to: a, rate: 0.001}}]\nsamples: [{{deme: a, count: 2}}, {{deme: b, count: 2}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn ancient_samples() {
    grid(
        "ancient samples",
        &format!(
            "seed: 44\ndemes: [{{name: a, size: 500, dormancy: {{law: uniform, max: 3}}}}]\nsamples: [{{deme: a, count: 3}}, {{deme: a, count: 2, generations_ago: 400}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn seeds_from_the_bank() {
    grid(
        "seeds from the bank",
        &format!(
            "seed: 45\ndemes: [{{name: a, size: 400, dormancy: {{law: geometric, mean: 3}}}}]\nsamples: [{{deme: a, count: 3}}, {{deme: a, count: 2, from: seedbank}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn seed_bank_coalescent() {
    // Rare dormancy of order N (theory reference §5.3 form): c = N w (g-1)/g = 1.995,
    // K = N/(c g) = 0.501; three plants and one seed.
    grid(
        "seed-bank coalescent",
        &format!(
            "seed: 46\ndemes: [{{name: a, size: 400, dormancy: {{law: mixture, parts: [{{weight: 0.995, law: none}}, {{weight: 0.005, law: geometric, mean: 400}}]}}}}]\nsamples: [{{deme: a, count: 3}}, {{deme: a, count: 1, from: seedbank}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn size_change_migration_and_ancient() {
    grid(
        "size change, migration, ancient",
        &format!(
            "seed: 47\ndemes: [{{name: a, size: [{{generations_ago: 0, size: 300}}, {{generations_ago: 200, size: 900}}], dormancy: {{law: uniform, max: 2}}}}, {{name: b, size: 500, dormancy: {{law: uniform, max: 2}}}}]\nmigration: [{{from: a, to: b, rate: 0.003}}, {{from: b, to: a, rate: 0.003}}]\nsamples: [{{deme: a, count: 2}}, {{deme: b, count: 1}}, {{deme: a, count: 1, generations_ago: 100}}]\n{MUT}"
        ),
        2000,
    );
}

#[test]
fn growth_seeds_and_migration() {
    grid(
        "growth, seeds, migration",
        &format!(
            "seed: 48\ndemes: [{{name: a, size: [{{generations_ago: 0, size: 1500, growth: 0.0001}}], dormancy: {{law: uniform, max: 4}}}}, {{name: b, size: 400}}]\nmigration: [{{from: a, to: b, rate: 0.002}}, {{from: b, to: a, rate: 0.005}}]\nsamples: [{{deme: a, count: 2}}, {{deme: b, count: 2}}, {{deme: a, count: 1, from: seedbank}}]\n{MUT}"
        ),
        2000,
    );
}
