//! `seedline observe` through the binary: output files, and malformed inputs exiting with 2
//! and an error naming the file, line, column and sample.

use seedline::observed;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn seedline(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_seedline")).args(args).output().expect("the binary runs")
}

fn tempdir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("seedline-cli-observe-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> String {
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p.display().to_string()
}

const HEAD: &str = "##fileformat=VCFv4.3\n#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\ts1\ts2\ts3\n";
const MAP: &str = "sample\tdeme\ns1\tpond\ns2\tpond\ns3\tlake\n";
const GOOD: &str = "1\t100\t.\tA\tG\t.\tPASS\tAA=A\tGT\t0/1\t0/0\t1/1\n\
                    1\t200\t.\tC\tT\t.\tPASS\t.\tGT\t0/1\t./.\t0/0\n\
                    1\t300\t.\tG\tA\t.\tPASS\tAA=G\tGT\t0/0\t0/1\t0/1\n";

/// Runs `observe` on the VCF text (and map) and returns (exit code, stderr).
fn run(name: &str, vcf: &[u8], vcf_name: &str, map: &str, extra: &[&str]) -> (Option<i32>, String, PathBuf) {
    let d = tempdir(name);
    let v = write(&d, vcf_name, vcf);
    let m = write(&d, "map.tsv", map.as_bytes());
    let out = d.join("out");
    let mut args = vec!["observe", v.as_str(), "--samples", m.as_str(), "--out", out.to_str().unwrap()];
    args.extend(extra);
    let o = seedline(&args);
    (o.status.code(), String::from_utf8_lossy(&o.stderr).into_owned(), out)
}

fn assert_bad(name: &str, vcf: &[u8], map: &str, wants: &[&str]) {
    let (code, err, out) = run(name, vcf, "data.vcf", map, &[]);
    assert_eq!(code, Some(2), "{name}: {err}");
    for w in wants {
        assert!(err.contains(w), "{name}: stderr lacks {w:?}:\n{err}");
    }
    assert!(!out.join("observed.json").exists(), "{name}: no output on error");
}

#[test]
fn observe_writes_the_three_files() {
    let vcf = format!("{HEAD}{GOOD}");
    let (code, err, out) = run("good", vcf.as_bytes(), "data.vcf", MAP, &["--project", "4"]);
    assert_eq!(code, Some(0), "{err}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("observed.json")).unwrap()).unwrap();
    assert_eq!(json["projection"]["m"], 4);
    assert_eq!(json["design"][0]["deme"], "pond");
    assert!(json["statistics"]["tajima_d"].is_number() || json["statistics"]["tajima_d"].is_null());
    let table = std::fs::read_to_string(out.join("observed.tsv")).unwrap();
    assert_eq!(table.lines().next().unwrap().split('\t').collect::<Vec<_>>(), observe_table_header(&["pond", "lake"]));
    let sfs = std::fs::read_to_string(out.join("sfs.tsv")).unwrap();
    assert_eq!(sfs.lines().next().unwrap(), "xi_1\txi_2\txi_3");
    // Projected to M = 4: site 100 (j = 3 of 6) and 300 (j = 2 of 6) are projected, 200 has 4 called
    // (j = 1, no AA -> folded only). ξ from the polarised sites (Marth et al. 2004), C(6,4) = 15:
    // j = 3: P(1) = 3·1/15 = 1/5, P(2) = 3·3/15 = 3/5, P(3) = 1·3/15 = 1/5;
    // j = 2: P(1) = 2·4/15 = 8/15, P(2) = 1·6/15 = 2/5. ξ = (11/15, 1, 1/5).
    let row: Vec<f64> = sfs.lines().nth(1).unwrap().split('\t').map(|x| x.parse().unwrap()).collect();
    for (g, w) in row.iter().zip([11.0 / 15.0, 1.0, 1.0 / 5.0]) {
        assert!((g - w).abs() < 1e-12, "{row:?}");
    }
}

#[test]
fn missing_data_without_a_choice_exits_2() {
    let vcf = format!("{HEAD}{GOOD}");
    assert_bad(
        "missing",
        vcf.as_bytes(),
        MAP,
        &["data.vcf", "line 4", "GT", "sample s2", "--project", "--drop-missing"],
    );
}

#[test]
fn bad_header_names_the_line() {
    // The INFO line lacks its closing `>`: the header parser refuses line 2.
    let vcf = format!("##fileformat=VCFv4.3\n##INFO=<ID=AA,Number=1,Type=String,Description=\"x\"\n{}", &HEAD[21..]);
    assert_bad("header", vcf.as_bytes(), MAP, &["data.vcf", "line 2", "header"]);
}

#[test]
fn wrong_column_count_names_the_line() {
    let vcf = format!("{HEAD}1\t100\t.\tA\tG\t.\tPASS\t.\tGT\t0/1\t0/0\n");
    assert_bad(
        "columns",
        vcf.as_bytes(),
        MAP,
        &["data.vcf", "line 3", "column count", "11 tab-separated columns", "12"],
    );
}

#[test]
fn non_numeric_pos_names_the_column() {
    let vcf = format!("{HEAD}1\t1x0\t.\tA\tG\t.\tPASS\t.\tGT\t0/1\t0/0\t0/0\n");
    assert_bad("pos", vcf.as_bytes(), MAP, &["data.vcf", "line 3", "column POS", "1x0", "whole number"]);
}

#[test]
fn allele_index_out_of_range_names_the_sample() {
    let vcf = format!("{HEAD}1\t100\t.\tA\tG\t.\tPASS\t.\tGT\t0/1\t0/2\t0/0\n");
    assert_bad("allele", vcf.as_bytes(), MAP, &["data.vcf", "line 3", "column GT, sample s2", "allele 2", "0..=1"]);
}

#[test]
fn map_sample_absent_from_the_vcf() {
    let map = "sample\tdeme\ns1\tpond\ns9\tlake\n";
    let vcf = format!("{HEAD}{GOOD}");
    assert_bad("absent", vcf.as_bytes(), map, &["map.tsv", "line 3", "sample s9", "data.vcf"]);
}

#[test]
fn truncated_gzip_exits_2() {
    use std::io::Write;
    let text = format!("{HEAD}{}", GOOD.repeat(200));
    let mut w = noodles::bgzf::io::Writer::new(Vec::new());
    w.write_all(text.as_bytes()).unwrap();
    let full = w.finish().unwrap();
    let cut = &full[..full.len() / 2];
    let (code, err, _) = run("gz", cut, "data.vcf.gz", MAP, &["--drop-missing"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("data.vcf.gz") && err.contains("cannot read"), "{err}");
    // The complete file reads fine.
    let (code, err, _) = run("gz-full", &full, "data.vcf.gz", MAP, &["--drop-missing"]);
    assert_eq!(code, Some(0), "{err}");
}

/// The header of `observed.tsv`: locus key columns, the statistics, the per-site columns.
fn observe_table_header(demes: &[&str]) -> Vec<String> {
    let mut h: Vec<String> = observed::LOCUS_KEY_COLUMNS.iter().map(|s| s.to_string()).collect();
    h.extend(seedline::stats::stat_columns(demes));
    h.extend(observed::PER_SITE_COLUMNS.iter().map(|s| s.to_string()));
    h
}
