//! Issue 11 item 1: pair coalescence times within and between demes, and F_ST, with dormancy
//! and migration counted per look-back (one parent-deme draw per parent pick). `predict`'s
//! `deme_pair_times` and `fst` — here from the exact discrete two-lineage chain — against the
//! exact engine, within 4 standard errors. Two samples per deme: the common-ancestor time of
//! samples (2a, 2a+1) estimates T(a, a), of (2a, 2b) T(a, b). Seeds are fixed, so the tests
//! are deterministic; run with `--nocapture` for the table.

mod pairs;

use seedline::scenario::Scenario;
use seedline::theory::predict::{Kind, predict};

fn check(name: &str, yaml: &str, reps: u64) {
    let s = Scenario::from_yaml_str(yaml, name).unwrap();
    let names: Vec<&str> = s.demes().iter().map(|d| d.name()).collect();
    let d = names.len();
    let mut which = Vec::new();
    for a in 0..d {
        for b in a..d {
            which.push(if a == b { (2 * a, 2 * a + 1) } else { (2 * a, 2 * b) });
        }
    }
    let pr = predict(&s);
    let (kind, _) = pr.deme_pair_source.clone().expect("pair times predicted");
    assert_eq!(kind, Kind::Exact, "{name}: the exact chain applies (constant sizes, short look-backs)");
    let runs = pairs::exact_readings(&s, reps, &which);
    let index = |a: usize, b: usize| {
        which.iter().position(|&(i, j)| (i, j) == if a == b { (2 * a, 2 * a + 1) } else { (2 * a, 2 * b) }).unwrap()
    };
    let mut k = 0;
    for a in 0..d {
        for b in a..d {
            let (m, se) = pairs::mean_se(runs.iter().map(|r| r.pair_times[k]));
            let want = pr.deme_pair_times.iter().find(|(x, y, _)| x == names[a] && y == names[b]).unwrap().2;
            println!("{name:<22} T({}, {}) simulated {m:9.1} ± {se:5.1}, predicted {want:9.1}", names[a], names[b]);
            assert!((m - want).abs() <= 4.0 * se, "{name}: T({}, {}) {m} ± {se} vs {want}", names[a], names[b]);
            k += 1;
        }
    }
    for a in 0..d {
        for b in a + 1..d {
            let rows: Vec<[f64; 3]> = runs
                .iter()
                .map(|r| [r.pair_times[index(a, a)], r.pair_times[index(b, b)], r.pair_times[index(a, b)]])
                .collect();
            let (f, se) = pairs::fst_delta(&rows);
            let want = pr.fst.iter().find(|(x, y, _)| x == names[a] && y == names[b]).unwrap().2;
            println!("{name:<22} F_ST({}, {}) simulated {f:.4} ± {se:.4}, predicted {want:.4}", names[a], names[b]);
            assert!((f - want).abs() <= 4.0 * se, "{name}: F_ST {f} ± {se} vs {want}");
        }
    }
}

#[test]
fn two_demes_uniform_dormancy() {
    // The worked example of issue 11 (before the fix predict said 4776 between demes and
    // F_ST 0.330; both engines simulate about 3594 and 0.11).
    check(
        "two demes, uniform 1..7",
        "seed: 31\ndemes: [{name: a, size: 100, dormancy: {law: uniform, max: 7}}, {name: b, size: 100, dormancy: {law: uniform, max: 7}}]\nmigration: [{from: a, to: b, rate: 0.005}, {from: b, to: a, rate: 0.005}]\nsamples: [{deme: a, count: 2}, {deme: b, count: 2}]\n",
        3000,
    );
}

#[test]
fn three_demes_geometric_asymmetric() {
    check(
        "three demes, geometric",
        "seed: 32\ndemes: [{name: a, size: 60, dormancy: {law: geometric, mean: 2.5}}, {name: b, size: 90, dormancy: {law: geometric, mean: 2.5}}, {name: c, size: 120, dormancy: {law: geometric, mean: 2.5}}]\nmigration: [{from: a, to: b, rate: 0.01}, {from: b, to: c, rate: 0.006}, {from: c, to: a, rate: 0.004}, {from: b, to: a, rate: 0.002}]\nsamples: [{deme: a, count: 2}, {deme: b, count: 2}, {deme: c, count: 2}]\n",
        3000,
    );
}

#[test]
fn two_demes_different_laws_asymmetric() {
    check(
        "uniform vs geometric",
        "seed: 33\ndemes: [{name: a, size: 150, dormancy: {law: uniform, max: 5}}, {name: b, size: 60, dormancy: {law: geometric, mean: 3}}]\nmigration: [{from: a, to: b, rate: 0.002}, {from: b, to: a, rate: 0.012}]\nsamples: [{deme: a, count: 2}, {deme: b, count: 2}]\n",
        3000,
    );
}

#[test]
fn three_ponds_scenario_file() {
    // scenarios/island-three-ponds.yaml with two samples per pond instead of six.
    let text =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/island-three-ponds.yaml")).unwrap();
    let cut = text.find("samples:").unwrap();
    let yaml = format!(
        "{}samples:\n  - {{ deme: kell_a, count: 2 }}\n  - {{ deme: kell_b, count: 2 }}\n  - {{ deme: kell_c, count: 2 }}\n",
        &text[..cut]
    );
    check("three ponds", &yaml, 1500);
}
