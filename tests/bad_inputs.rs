//! A table of bad inputs across every command: each must exit with code 2, name the file
//! (or flag) and the field in its message, never panic, and leave no file under a final
//! name in its output directory.

mod common;
use common::{files_below, seedline_bounded, tempdir, write};

const BASE: &str = "seed: 3
replicates: 4
demes:
  - {name: pond, size: 100, dormancy: {law: geometric, mean: 2}}
  - {name: lake, size: 80}
migration:
  - {from: pond, to: lake, rate: 0.01}
samples:
  - {deme: pond, count: 4}
  - {deme: lake, count: 3}
mutation: {rate: 1.0e-5, sites: 10000}
";

/// Faults of a scenario file: (replace, by, a word the message must hold).
const FAULTS: [(&str, &str, &str); 34] = [
    ("size: 100,", "size: big,", "size"),
    ("size: 100,", "size: 0,", "demes[0].size"),
    ("size: 100,", "size: -5,", "demes[0].size"),
    ("size: 100,", "size: .nan,", "`size`: a finite number"),
    ("size: 100,", "size: .inf,", "`size`: a finite number"),
    ("law: geometric, mean: 2", "law: forever", "demes[0].dormancy"),
    ("mean: 2", "mean: 0.5", "demes[0].dormancy"),
    ("law: geometric, mean: 2", "law: pareto, alpha: -1", "alpha"),
    ("law: geometric, mean: 2", "law: uniform, max: 0", "max"),
    (
        "law: geometric, mean: 2",
        "law: mixture, parts: [{law: none, weight: -1}, {law: geometric, mean: 3, weight: 1}]",
        "weight",
    ),
    ("to: lake, rate", "to: sea, rate", "migration[0].to"),
    ("rate: 0.01}", "rate: 1.5}", "migration[0].rate"),
    ("rate: 0.01}", "rate: 0.7}\n  - {from: pond, to: lake, rate: 0.6, generations_ago: [5, 9]}", "migration"),
    ("{deme: pond, count: 4}", "{deme: pond, count: 0}", "samples[0].count"),
    ("{deme: pond, count: 4}", "{deme: river, count: 4}", "samples[0].deme"),
    ("{deme: lake, count: 3}", "{deme: lake, count: 300}", "samples"),
    ("seed: 3", "seed: abc", "seed"),
    ("replicates: 4", "replicates: 0", "replicates"),
    ("replicates: 4", "replicates: 4\nhorizon: 0", "horizon"),
    ("replicates: 4", "replicates: 4\nhorizon: 1.0e300", "horizon"),
    ("rate: 1.0e-5, sites", "rate: 2, sites", "mutation.rate"),
    ("sites: 10000", "sites: 0", "mutation.sites"),
    ("mutation: {rate: 1.0e-5, sites: 10000}", "mutation: {sites: 10000}", "mutation"),
    ("seed: 3", "seed: 3\nfoo: 1", "foo"),
    ("seed: 3", "seed: 3\nloci: 0", "loci"),
    ("mutation: {rate: 1.0e-5, sites: 10000}", "recombination: {rate: 0.01}", "recombination"),
    ("{name: lake, size: 80}", "{name: pond, size: 80}", "demes[1].name"),
    ("rate: 0.01}", "rate: 0.01, generations_ago: [10, 5]}", "generations_ago"),
    ("samples:", "samples: [", "line"),
    ("{deme: pond, count: 4}", "{deme: pond, count: 1.5}", "count"),
    ("{deme: pond, count: 4}", "{deme: pond, block: {from: 9, to: 3}}", "block"),
    ("{deme: lake, count: 3}", "{deme: lake, count: 3, from: attic}", "samples[1].from"),
    ("demes:", "demes: 7\nunused:", "demes"),
    ("rate: 1.0e-5, sites", "rate: 1.0e-5, dormant_rate: -1, sites", "mutation.dormant_rate"),
];

struct Case {
    /// Arguments; `OUT` is replaced by this case's output directory.
    args: Vec<String>,
    /// Words the message must hold (the file or flag, and the field).
    words: Vec<String>,
}

fn case(args: &str, words: &[&str]) -> Case {
    Case {
        args: args.split_whitespace().map(String::from).collect(),
        words: words.iter().map(|w| w.to_string()).collect(),
    }
}

#[test]
fn a_table_of_bad_inputs_exits_2_names_file_and_field_and_writes_nothing() {
    let d = tempdir("bad-table");
    write(&d, "good.yaml", BASE);
    let nomut: String = BASE.replace("mutation: {rate: 1.0e-5, sites: 10000}\n", "");
    write(&d, "nomut.yaml", &nomut);
    write(&d, "dense.yaml", &BASE.replace("rate: 1.0e-5, sites: 10000", "rate: 0.05, sites: 20"));
    write(&d, "recomb.yaml", &format!("{BASE}recombination: {{rate: 1.0e-4}}\n"));
    write(
        &d,
        "obs.json",
        r#"{"statistics": {"pi": 3.0, "segregating_sites": 10, "tajima_d": 0.2}, "sfs": [4, 3, 1, 1, 0, 1]}"#,
    );
    write(&d, "obs_words.json", r#"{"statistics": {"pi": "high"}}"#);
    write(&d, "obs_noise.json", "pi = 3");
    write(&d, "obs_n5.json", r#"{"statistics": {"pi": 3.0}, "sfs": [1, 1, 1, 1]}"#);
    write(&d, "h_bad.yaml", &BASE.replace("mean: 2", "mean: {prior: uniform, low: 5, high: 2}"));
    write(&d, "h_key.yaml", &BASE.replace("mean: 2", "mean: {prior: uniform, low: 1, high: 4, step: 1}"));
    write(&d, "h_nomut.yaml", &nomut.replace("size: 100,", "size: {prior: uniform, low: 50, high: 150},"));
    write(&d, "designs_empty.yaml", "designs: []\n");
    std::fs::create_dir_all(d.join("adir")).unwrap();
    write(&d, "designs_sites.yaml", "designs:\n  - {name: a, samples: [{deme: pond, count: 4}], sites: 0}\n");
    write(&d, "designs_deme.yaml", "designs:\n  - {name: a, samples: [{deme: sea, count: 4}]}\n");
    write(
        &d,
        "designs_twice.yaml",
        "designs:\n  - {name: a, samples: [{deme: pond, count: 4}]}\n  - {name: a, samples: [{deme: pond, count: 2}]}\n",
    );
    write(&d, "map_nodeme.tsv", "sample\tplace\ns0\tpond\n");
    write(&d, "map_ok.tsv", "sample\tdeme\ns0\tpond\ns1\tpond\n");
    write(&d, "map_ploidy.tsv", "sample\tdeme\tploidy\ns0\tpond\t3\n");
    write(&d, "map_dup.tsv", "sample\tdeme\ns0\tpond\ns0\tlake\n");
    let vcf_head = "##fileformat=VCFv4.3\n##FORMAT=<ID=GT,Number=1,Type=String,Description=\"Genotype\">\n#CHROM\tPOS\tID\tREF\tALT\tQUAL\tFILTER\tINFO\tFORMAT\ts0\ts1\n";
    write(&d, "pos.vcf", &format!("{vcf_head}1\tten\t.\tA\tG\t.\tPASS\t.\tGT\t0\t1\n"));
    write(&d, "gt.vcf", &format!("{vcf_head}1\t10\t.\tA\tG\t.\tPASS\t.\tGT\t0\t7\n"));
    write(&d, "missing_gt.vcf", &format!("{vcf_head}1\t10\t.\tA\tG\t.\tPASS\t.\tGT\t0\t.\n"));
    write(&d, "noheader.vcf", "1\t10\t.\tA\tG\t.\tPASS\t.\tGT\t0\t1\n");
    write(&d, "block_bad.yaml", BASE);
    write(&d, "notadir", "a file");

    let mut cases: Vec<Case> = Vec::new();
    for (i, (from, to, word)) in FAULTS.iter().enumerate() {
        assert!(BASE.contains(from), "fault {i}: `{from}` not in the base scenario");
        let name = format!("fault_{i:02}.yaml");
        write(&d, &name, &BASE.replacen(from, to, 1));
        cases.push(case(&format!("validate {name}"), &[&name, word]));
        cases.push(case(&format!("simulate {name} --out OUT"), &[&name, word]));
        cases.push(case(&format!("null {name} --replicates 5 --out OUT"), &[&name, word]));
        if i % 3 == 0 {
            cases.push(case(&format!("predict {name}"), &[&name, word]));
            cases.push(case(&format!("families {name} --out OUT"), &[&name, word]));
            cases.push(case(
                &format!("compare obs.json --hypotheses {name} --simulations 10 --out OUT"),
                &[&name, word],
            ));
        }
    }
    let more = [
        case("simulate nomut.yaml --vcf --out OUT", &["nomut.yaml", "--vcf", "mutation"]),
        case("simulate good.yaml --replicates 0 --out OUT", &["good.yaml", "replicates"]),
        case("simulate good.yaml --engine warp --out OUT", &["--engine", "warp"]),
        case("simulate good.yaml --threads many --out OUT", &["--threads", "many"]),
        case("simulate dense.yaml --out OUT", &["dense.yaml", "mutation.sites"]),
        case("simulate missing.yaml --out OUT", &["missing.yaml"]),
        case("simulate good.yaml --out notadir", &["--out notadir"]),
        case("simulate good.yaml --diploid --out OUT", &["--diploid", "--vcf"]),
        case("null good.yaml --replicates 0 --out OUT", &["--replicates"]),
        case("null good.yaml --replicates 10 --chunk 0 --out OUT", &["--chunk"]),
        case("null good.yaml --replicates 10 --shard 3/2 --out OUT", &["--shard", "3/2"]),
        case("null good.yaml --replicates 10 --shard x --out OUT", &["--shard", "x"]),
        case("null nomut.yaml --replicates 10 --out OUT", &["nomut.yaml", "mutation"]),
        case("null good.yaml --replicates 10 --like missing.json --out OUT", &["missing.json"]),
        case("null good.yaml --replicates 10 --like obs_noise.json --out OUT", &["obs_noise.json", "JSON"]),
        case("null good.yaml --replicates 10 --condition-on-s --out OUT", &["--condition-on-s", "--like"]),
        case("null recomb.yaml --replicates 10 --like obs.json --condition-on-s --out OUT", &["obs.json", "design"]),
        case("null good.yaml --replicates 10 --out notadir", &["notadir"]),
        case("merge no_such_dir --out OUT", &["no_such_dir", "null.json"]),
        case("merge --out OUT", &["<DIRS>"]),
        case("status no_such_dir", &["no_such_dir"]),
        case("status no_such_dir --json", &["no_such_dir"]),
        case("status good.yaml", &["good.yaml"]),
        case("test obs.json --null no_such_dir --out OUT", &["no_such_dir", "null.json"]),
        case("test missing.json --null no_such_dir --out OUT", &["missing.json"]),
        case("test obs_noise.json --null no_such_dir --out OUT", &["obs_noise.json", "JSON"]),
        case("test obs_words.json --null no_such_dir --out OUT", &["obs_words.json", "statistics.pi"]),
        case("observe missing.vcf --samples map_ok.tsv --out OUT", &["missing.vcf"]),
        case("observe pos.vcf --samples map_nodeme.tsv --out OUT", &["map_nodeme.tsv", "deme"]),
        case("observe pos.vcf --samples map_ploidy.tsv --out OUT", &["map_ploidy.tsv", "ploidy"]),
        case("observe pos.vcf --samples map_dup.tsv --out OUT", &["map_dup.tsv", "s0"]),
        case("observe pos.vcf --samples map_ok.tsv --out OUT", &["pos.vcf", "POS"]),
        case("observe gt.vcf --samples map_ok.tsv --out OUT", &["gt.vcf", "GT"]),
        case("observe missing_gt.vcf --samples map_ok.tsv --out OUT", &["missing_gt.vcf", "--project"]),
        case("observe noheader.vcf --samples map_ok.tsv --out OUT", &["noheader.vcf"]),
        case("observe pos.vcf --samples missing.tsv --out OUT", &["missing.tsv"]),
        case(
            "observe pos.vcf --samples map_ok.tsv --project 1 --drop-missing --out OUT",
            &["--project", "--drop-missing"],
        ),
        case("families block_bad.yaml --out OUT", &["block_bad.yaml", "block"]),
        case("families good.yaml --colours red --out OUT", &["--colours", "red"]),
        case("compare obs.json --hypotheses good.yaml --tolerance 2 --out OUT", &["--tolerance"]),
        case("compare obs.json --hypotheses good.yaml --simulations 1 --out OUT", &["--simulations"]),
        case("compare obs.json --hypotheses h_bad.yaml --out OUT", &["h_bad.yaml", "demes[0].dormancy.mean"]),
        case("compare obs.json --hypotheses h_key.yaml --out OUT", &["h_key.yaml", "step"]),
        case("compare obs.json --hypotheses h_nomut.yaml --out OUT", &["h_nomut.yaml", "mutation"]),
        case("compare obs.json --hypotheses designs_deme.yaml --out OUT", &["designs_deme.yaml", "hypothesis"]),
        case("simulate h_bad.yaml --out OUT", &["h_bad.yaml", "mean", "hypothesis file"]),
        case("observe adir --samples map_ok.tsv --out OUT", &["adir", "directory", "VCF"]),
        case("test adir --null adir --out OUT", &["adir", "observed.json"]),
        case("null good.yaml --replicates 10 --like adir --out OUT", &["--like", "adir"]),
        case("compare obs.json --hypotheses good.yaml --statistics warp --out OUT", &["statistic", "warp"]),
        case("compare obs_n5.json --hypotheses good.yaml --out OUT", &["obs_n5.json", "sample"]),
        case("compare missing.json --hypotheses good.yaml --out OUT", &["missing.json"]),
        case("compare obs.json --hypotheses good.yaml --adjust magic --out OUT", &["--adjust", "magic"]),
        case("compare obs.json --hypotheses good.yaml --simulations 10 --out notadir/x", &["--out notadir/x"]),
        case(
            "design --null good.yaml --alternative good.yaml --designs designs_empty.yaml --out OUT",
            &["designs_empty.yaml", "designs"],
        ),
        case(
            "design --null good.yaml --alternative good.yaml --designs designs_sites.yaml --out OUT",
            &["designs_sites.yaml", "designs[0].sites"],
        ),
        case(
            "design --null good.yaml --alternative good.yaml --designs designs_twice.yaml --out OUT",
            &["designs_twice.yaml", "designs[1].name"],
        ),
        case("design --null good.yaml --alternative good.yaml --designs missing.yaml --out OUT", &["missing.yaml"]),
        case(
            "design --null good.yaml --alternative good.yaml --designs designs_deme.yaml --level 2 --out OUT",
            &["--level"],
        ),
        case(
            "design --null h_bad.yaml --alternative good.yaml --designs designs_deme.yaml --out OUT",
            &["h_bad.yaml", "demes[0].dormancy.mean"],
        ),
        case("validate good.yaml designs_deme.yaml", &["designs_deme.yaml", "samples[0].deme", "sea"]),
        case("validate designs_sites.yaml", &["designs_sites.yaml", "designs[0].sites"]),
        case("validate h_bad.yaml", &["h_bad.yaml", "demes[0].dormancy.mean"]),
        case("validate missing.yaml", &["missing.yaml"]),
        case("predict designs_deme.yaml", &["designs_deme.yaml", "designs file"]),
        case("predict h_bad.yaml", &["h_bad.yaml", "demes[0].dormancy.mean"]),
    ];
    cases.extend(more);
    assert!(cases.len() >= 100, "{} cases", cases.len());

    let mut failures = Vec::new();
    for (i, c) in cases.iter().enumerate() {
        let out = format!("out_{i:03}");
        let args: Vec<String> = c.args.iter().map(|a| if a == "OUT" { out.clone() } else { a.clone() }).collect();
        let argv: Vec<&str> = args.iter().map(String::as_str).collect();
        let r = seedline_bounded(&d, &argv, &[], 300);
        let shown = format!("case {i}: `seedline {}`", args.join(" "));
        let mut why = Vec::new();
        if r.timed_out {
            why.push("did not finish".to_string());
        }
        if r.stderr.contains("panicked") {
            why.push("panicked".to_string());
        }
        if r.code != Some(2) {
            why.push(format!("exited {:?}", r.code));
        }
        for w in &c.words {
            if !r.stderr.contains(w.as_str()) {
                why.push(format!("`{w}` missing"));
            }
        }
        for rust in ["RawSize", "untagged enum", "invalid u64", "struct Raw", "f64", "called `Option"] {
            if r.stderr.contains(rust) {
                why.push(format!("Rust words `{rust}`"));
            }
        }
        let left = files_below(&d.join(&out));
        if !left.is_empty() {
            why.push(format!("left {left:?}"));
        }
        if !why.is_empty() {
            failures.push(format!("{shown}: {}\n{}{}", why.join(", "), r.stdout, r.stderr));
        }
    }
    assert!(failures.is_empty(), "{} of {} cases failed:\n{}", failures.len(), cases.len(), failures.join("\n"));
}
