//! The genome layout end to end through the binary: simulate --vcf with 3 loci, observe,
//! null --like in two shards, merge, test with its per-locus table; and the refusals
//! (a null of other loci, bad windows and BED files, a design that gives its own loci).

mod common;

use common::{seedline, tempdir, write};

const SCENARIO: &str = "name: marsh clover
seed: 4
replicates: 1
demes: [{name: marsh, size: 120, dormancy: {law: geometric, mean: 2}}]
samples: [{deme: marsh, count: 6}]
mutation: {rate: 4.0e-6, sites: 800}
loci: 3
";

fn ok(out: &std::process::Output) -> String {
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(0), "{err}");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn bad(out: &std::process::Output, wants: &[&str]) {
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(2), "{err}");
    for w in wants {
        assert!(err.contains(w), "stderr lacks {w:?}:\n{err}");
    }
}

#[test]
fn simulate_observe_null_like_merge_test() {
    let d = tempdir("cli-genome");
    let p = |x: &str| d.join(x).display().to_string();
    let sc = write(&d, "h0.yaml", SCENARIO);
    ok(&seedline(&["simulate", &sc, "--vcf", "--out", &p("sim")]));
    let map = write(
        &d,
        "map.tsv",
        &(0..6).fold("sample\tdeme\n".into(), |s: String, i| s + &format!("marsh_{i}_t0\tmarsh\n")),
    );
    let vcf = p("sim/vcf/replicate_0.vcf");
    let shown = ok(&seedline(&["observe", &vcf, "--samples", &map, "--out", &p("obs")]));
    assert!(
        shown.contains("6 plants, 6 sequences") && shown.contains("3 loci (contigs), 2400 callable sites"),
        "{shown}"
    );
    let table = std::fs::read_to_string(d.join("obs/observed.tsv")).unwrap();
    assert_eq!(table.lines().count(), 4, "a header and one row per locus:\n{table}");
    let like = p("obs/observed.json");
    for shard in ["0/2", "1/2"] {
        let out = p(&format!("null{}", &shard[..1]));
        ok(&seedline(&[
            "null",
            &sc,
            "--replicates",
            "60",
            "--chunk",
            "20",
            "--shard",
            shard,
            "--like",
            &like,
            "--out",
            &out,
        ]));
    }
    ok(&seedline(&["merge", &p("null0"), &p("null1"), "--out", &p("null")]));
    let loci = std::fs::read_to_string(d.join("null/loci.tsv")).unwrap();
    assert_eq!(loci.lines().count(), 1 + 60 * 3, "one row per locus and replicate");
    let keys: Vec<(u64, u64)> = loci
        .lines()
        .skip(1)
        .map(|l| {
            let mut f = l.split('\t').map(|x| x.parse::<u64>().unwrap());
            (f.next().unwrap(), f.next().unwrap())
        })
        .collect();
    assert!(keys.windows(2).all(|w| w[0] < w[1]), "sorted by replicate and locus");
    let shown = ok(&seedline(&["test", &like, "--null", &p("null"), "--out", &p("test")]));
    assert!(shown.contains("per-locus scan over 3 loci") && shown.contains("pi_locus_var"), "{shown}");
    let scan = std::fs::read_to_string(d.join("test/test_loci.tsv")).unwrap();
    assert_eq!(scan.lines().count(), 1 + 3 * 6, "three loci, six statistics:\n{scan}");
    assert!(scan.lines().next().unwrap().ends_with("p_value\tq_value"));
    // A null of one locus is not a null for three.
    let one = write(&d, "one.yaml", &SCENARIO.replace("loci: 3\n", ""));
    ok(&seedline(&["null", &one, "--replicates", "20", "--out", &p("null-one")]));
    bad(&seedline(&["test", &like, "--null", &p("null-one"), "--out", &p("t2")]), &["3 loci", "simulates 1", "--like"]);
    // design --like takes its loci from the data.
    let designs =
        write(&d, "designs.yaml", "designs:\n  - name: big\n    samples: [{deme: marsh, count: 6}]\n    loci: 4\n");
    let out = seedline(&[
        "design",
        "--null",
        &sc,
        "--alternative",
        &sc,
        "--designs",
        &designs,
        "--like",
        &like,
        "--out",
        &p("pw"),
    ]);
    bad(&out, &["designs[0]", "--like"]);
}

#[test]
fn bad_layout_options_exit_2() {
    let d = tempdir("cli-genome-bad");
    let p = |x: &str| d.join(x).display().to_string();
    let vcf = write(
        &d,
        "v.vcf",
        "##fileformat=VCFv4.3\n#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\tx\ty\nc\t5\t.\tA\tT\t.\tPASS\t.\tGT\t0\t1\n",
    );
    let map = write(&d, "m.tsv", "sample\tdeme\nx\tp\ny\tp\n");
    bad(&seedline(&["observe", &vcf, "--samples", &map, "--windows", "0", "--out", &p("o")]), &["--windows 0"]);
    let bed = write(&d, "r.bed", "c\t10\tx\n");
    bad(
        &seedline(&["observe", &vcf, "--samples", &map, "--regions", &bed, "--out", &p("o")]),
        &["r.bed", "line 1", "end"],
    );
    bad(
        &seedline(&["observe", &vcf, "--samples", &map, "--mask", &p("absent.bed"), "--out", &p("o")]),
        &["absent.bed"],
    );
    let mask = write(&d, "mask.bed", "other\t0\t100\n");
    bad(
        &seedline(&["observe", &vcf, "--samples", &map, "--mask", &mask, "--out", &p("o")]),
        &["no locus has a callable site"],
    );
    assert!(!d.join("o/observed.json").exists(), "nothing written on error");
}
