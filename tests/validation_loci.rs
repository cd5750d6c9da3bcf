//! Calibration of the genome layout: datasets drawn from a scenario with 20 loci, read back by
//! `observe`, tested against a null of the same layout (`null --like`). Under the null the
//! p-values of the across-locus mean of π, variance of π and mean of Tajima's D are uniform
//! (Kolmogorov-Smirnov), and the per-locus Benjamini-Hochberg q-values reject at most the
//! nominal FDR. Small n and θ keep it fast; `SEEDLINE_BIG=1` runs 1000 datasets against
//! B = 1999.

mod common;

use seedline::abc::parse_observed;
use seedline::batch::BatchConfig;
use seedline::mutation::Count;
use seedline::null::{self, NullConfig};
use seedline::observed::{self, Missing};
use seedline::report::{SimulateOptions, simulate_to_dir};
use seedline::scenario::{Scenario, parse_raw};

const YAML: &str = "name: bog rush
seed: 101
demes: [{name: bog, size: 100, dormancy: {law: geometric, mean: 2}}]
samples: [{deme: bog, count: 6}]
mutation: {rate: 5.0e-6, sites: 500}
loci: 20
";

/// Largest distance between the empirical CDF of `ps` and U(0, 1).
fn ks_uniform(ps: &mut [f64]) -> f64 {
    ps.sort_by(f64::total_cmp);
    let n = ps.len() as f64;
    ps.iter().enumerate().map(|(i, p)| ((i + 1) as f64 / n - p).abs().max((p - i as f64 / n).abs())).fold(0.0, f64::max)
}

#[test]
fn layout_null_is_calibrated() {
    let big = std::env::var("SEEDLINE_BIG").is_ok_and(|v| v == "1");
    let (datasets, b) = if big { (1000, 1999) } else { (200, 999) };
    let d = common::tempdir("loci-calibration");
    // The datasets: replicates of the scenario under another seed, written as VCF.
    let data = Scenario::from_yaml_str(&YAML.replace("seed: 101", &format!("seed: 7\nreplicates: {datasets}")), "data")
        .unwrap();
    let opts = SimulateOptions { vcf: true, ..SimulateOptions::default() };
    simulate_to_dir(&data, "data", BatchConfig::default(), opts, &d.join("sim"), &|| {}).unwrap();
    let map = d.join("map.tsv");
    std::fs::write(&map, (0..6).fold("sample\tdeme\n".to_string(), |s, i| s + &format!("bog_{i}_t0\tbog\n"))).unwrap();
    let read = |rep: u64| {
        let vcf = d.join("sim").join("vcf").join(format!("replicate_{rep}.vcf"));
        let o = observed::observe_files(&vcf, &map, Missing::Refuse).unwrap();
        parse_observed(&serde_json::to_string(&o).unwrap(), &format!("replicate {rep}")).unwrap()
    };
    // The null of the same layout, made as `null --like` makes it.
    let first = read(0);
    assert_eq!(first.layout(), Some(vec![500; 20]));
    let mut raw = parse_raw(YAML, "null").unwrap();
    null::like(&mut raw, &first, "null").unwrap();
    let s = Scenario::from_raw(raw, "null").unwrap();
    assert_eq!(s.locus_lengths(), Some(&[500u64; 20][..]));
    let cfg = NullConfig {
        replicates: b,
        shard: (0, 1),
        chunk: 100,
        count: Count::Poisson,
        max_new_chunks: None,
        engine: seedline::engine::EngineChoice::Exact,
    };
    null::run(&s, cfg, None, BatchConfig::default(), &d.join("null"), &|_| {}).unwrap();
    let table = null::load(&d.join("null")).unwrap();
    assert!(!table.loci_files.is_empty(), "per-locus rows are written with several loci");

    let names = ["pi_locus_mean", "pi_locus_var", "tajima_d_locus_mean"];
    let mut ps: Vec<Vec<f64>> = vec![Vec::new(); names.len()];
    let alpha = 0.1;
    let mut any_rejection = [0u32; 2];
    for rep in 0..datasets {
        let obs = if rep == 0 { first.clone() } else { read(rep) };
        let r = null::test(&obs, &table).unwrap();
        for (k, name) in names.iter().enumerate() {
            let t = r.statistics.iter().find(|t| t.statistic == *name).unwrap();
            if let Some(p) = t.p_value {
                ps[k].push(p);
            }
        }
        for (k, stat) in ["pi", "tajima_d"].iter().enumerate() {
            let rows: Vec<_> = r.loci.iter().filter(|t| t.statistic == *stat).collect();
            assert_eq!(rows.len(), 20);
            any_rejection[k] += u32::from(rows.iter().any(|t| t.q_value.is_some_and(|q| q <= alpha)));
        }
    }
    // Kolmogorov (1933) / Smirnov: asymptotic critical value 1.63/sqrt(n) at level 0.01
    // (common practice); two-sided p-values on the 1/(B+1) grid are slightly conservative.
    for (k, name) in names.iter().enumerate() {
        let n = ps[k].len();
        assert!(n as u64 >= datasets * 9 / 10, "{name}: {n} defined p-values");
        let ks = ks_uniform(&mut ps[k]);
        eprintln!("{name}: KS distance {ks:.4} over {n} p-values (critical {:.4})", 1.63 / (n as f64).sqrt());
        assert!(ks < 1.63 / (n as f64).sqrt(), "{name}: KS distance {ks} over {n} p-values");
    }
    // All 20 nulls are true, so the FDR is P(any rejection) <= alpha for independent loci
    // (Benjamini & Hochberg 1995). Binomial band: alpha + 3 sqrt(alpha (1 - alpha) / datasets).
    let band = alpha + 3.0 * (alpha * (1.0 - alpha) / datasets as f64).sqrt();
    for (k, stat) in ["pi", "tajima_d"].iter().enumerate() {
        let rate = f64::from(any_rejection[k]) / datasets as f64;
        eprintln!("{stat}: {rate:.3} of datasets with a per-locus q <= {alpha} (band {band:.3})");
        assert!(rate <= band, "{stat}: datasets with a per-locus rejection at q <= {alpha}: {rate} > {band}");
    }
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn benjamini_hochberg_by_hand() {
    // Source: Benjamini & Hochberg (1995), J. R. Stat. Soc. B 57:289, step-up procedure.
    // p = (0.01, 0.04, 0.03, 0.20), m = 4: sorted 0.01, 0.03, 0.04, 0.20;
    // m p_(j)/j = 0.04, 0.06, 0.05333, 0.20; running minimum from the top: 0.04, 0.05333,
    // 0.05333, 0.20.
    let q = null::benjamini_hochberg(&[Some(0.01), Some(0.04), None, Some(0.03), Some(0.20)]);
    let want = [Some(0.04), Some(0.16 / 3.0), None, Some(0.16 / 3.0), Some(0.20)];
    for (a, b) in q.iter().zip(want) {
        match (a, b) {
            (Some(x), Some(y)) => assert!((x - y).abs() < 1e-12, "{q:?}"),
            (x, y) => assert_eq!(*x, y),
        }
    }
}
