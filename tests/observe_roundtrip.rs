//! `observe` on the VCF that `simulate --vcf` wrote reproduces that replicate's statistics:
//! every statistic column of `replicates.tsv` (genome-wide values and the across-locus mean
//! and variance) and every per-locus statistic of `loci.tsv`, for 1 and 5 loci, haploid and
//! diploid. Both sides compute the published formulas (Tajima 1983, 1989; Watterson 1975;
//! Fay & Wu 2000; Zeng et al. 2006; Hudson, Slatkin & Maddison 1992) from the same
//! genotypes, so they must agree to rounding: integers exactly, real values to 1e-12
//! relative (sums taken in another order).

mod common;

use seedline::batch::BatchConfig;
use seedline::observed::{self, Missing, Observed};
use seedline::report::{SimulateOptions, simulate_to_dir};
use seedline::scenario::Scenario;
use std::collections::HashMap;
use std::path::Path;

const YAML: &str = "name: roundtrip
seed: 5
replicates: 4
demes:
  - {name: north, size: 200, dormancy: {law: geometric, mean: 2}}
  - {name: south, size: 150}
migration:
  - {from: north, to: south, rate: 0.01}
  - {from: south, to: north, rate: 0.01}
samples:
  - {deme: north, count: 6}
  - {deme: south, count: 4}
mutation: {rate: 3.0e-6, sites: 1000}
";

fn table(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let head = lines.next().unwrap().split('\t').map(String::from).collect();
    (head, lines.map(|l| l.split('\t').map(String::from).collect()).collect())
}

/// A sample map from the VCF sample names `deme_index_t<time>` (or `deme_i+j_t<time>`).
fn map_of(vcf: &Path) -> String {
    let text = std::fs::read_to_string(vcf).unwrap();
    let head = text.lines().find(|l| l.starts_with("#CHROM")).unwrap();
    let mut map = String::from("sample\tdeme\tgenerations_ago\n");
    for name in head.split('\t').skip(9) {
        let deme = name.split('_').next().unwrap();
        let t = name.rsplit("_t").next().unwrap().trim_end_matches("_seed");
        map.push_str(&format!("{name}\t{deme}\t{t}\n"));
    }
    map
}

fn same(what: &str, got: Option<f64>, want: &str) {
    let want: Option<f64> = want.parse().ok();
    match (got, want) {
        (Some(g), Some(w)) => assert!((g - w).abs() <= 1e-12 * w.abs().max(1.0), "{what}: observe {g}, simulate {w}"),
        (g, w) => assert_eq!(g, w, "{what}"),
    }
}

fn roundtrip(name: &str, loci: u64, diploid: bool) {
    let yaml = format!("{YAML}loci: {loci}\n");
    let s = Scenario::from_yaml_str(&yaml, name).unwrap();
    let dir = common::tempdir(name);
    let opts = SimulateOptions { vcf: true, diploid, loci_table: true, ..SimulateOptions::default() };
    simulate_to_dir(&s, name, BatchConfig::default(), opts, &dir, &|| {}).unwrap();
    let (cols, rows) = table(&dir.join("replicates.tsv"));
    let (lcols, lrows) = table(&dir.join("loci.tsv"));
    let mut checked = 0;
    for row in &rows {
        let rep = &row[0];
        let vcf = dir.join("vcf").join(format!("replicate_{rep}.vcf"));
        let map = map_of(&vcf);
        let map_path = dir.join(format!("map_{rep}.tsv"));
        std::fs::write(&map_path, &map).unwrap();
        let o: Observed = observed::observe_files(&vcf, &map_path, Missing::Refuse).unwrap();
        assert_eq!(o.loci.len() as u64, loci, "one locus per contig, also those without a site");
        // Every statistic column of the replicate's row (the first five are genealogy columns).
        for (c, v) in cols.iter().zip(row).skip(5) {
            assert!(o.statistics.contains_key(c), "observe lacks {c}");
            same(&format!("{name} replicate {rep} {c}"), o.statistics[c], v);
            checked += 1;
        }
        assert_eq!(o.columns, cols[5..], "same statistic columns in the same order");
        // Every per-locus statistic of loci.tsv.
        let idx: HashMap<&str, usize> = lcols.iter().enumerate().map(|(i, c)| (c.as_str(), i)).collect();
        for lr in lrows.iter().filter(|r| r[0] == *rep) {
            let l: usize = lr[1].parse().unwrap();
            let locus = &o.loci[l - 1];
            assert_eq!((locus.contig.as_str(), locus.start, locus.end), (format!("locus_{l}").as_str(), 0, 1000));
            assert_eq!(locus.callable_sites, 1000);
            for stat in ["segregating_sites", "pi", "tajima_d", "theta_w", "fay_wu_h", "haplotypes"] {
                let j = o.locus_columns.iter().position(|c| c == stat).unwrap();
                same(&format!("{name} replicate {rep} locus {l} {stat}"), locus.values[j], &lr[idx[stat]]);
            }
        }
    }
    assert_eq!(checked, rows.len() * (cols.len() - 5), "every statistic of every replicate compared");
    assert_eq!(rows.len(), 4);
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn one_locus_haploid() {
    roundtrip("rt-1-haploid", 1, false);
}

#[test]
fn one_locus_diploid() {
    roundtrip("rt-1-diploid", 1, true);
}

#[test]
fn five_loci_haploid() {
    roundtrip("rt-5-haploid", 5, false);
}

#[test]
fn five_loci_diploid() {
    roundtrip("rt-5-diploid", 5, true);
}
