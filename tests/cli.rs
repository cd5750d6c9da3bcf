//! End-to-end tests of the `seedline` binary: files, columns, exit codes, determinism.

mod common;
use common::{seedline, tempdir, write};

#[test]
fn simulate_the_embedded_demo() {
    let d = tempdir("demo");
    let out = d.join("run");
    let o = seedline(&["simulate", "--replicates", "5", "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let table = std::fs::read_to_string(out.join("replicates.tsv")).unwrap();
    let mut lines = table.lines();
    let header: Vec<&str> = lines.next().unwrap().split('\t').collect();
    for col in ["replicate", "tmrca", "roots", "total_length", "jumps"] {
        assert!(header.contains(&col), "missing column {col}");
    }
    assert_eq!(lines.count(), 5);
    let trees = std::fs::read_to_string(out.join("trees.nwk")).unwrap();
    assert!(trees.lines().all(|l| l.starts_with("[replicate ") && l.ends_with(';')));
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["seed"], 7);
    assert!(summary["provenance"]["generator"].as_str().unwrap().contains("ChaCha8"));
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(stdout.contains("95% interval"), "{stdout}");
    // No temporary file is left behind.
    assert!(std::fs::read_dir(&out).unwrap().all(|e| !e.unwrap().file_name().to_string_lossy().ends_with(".tmp")));
}

#[test]
fn output_is_identical_for_any_thread_count() {
    let d = tempdir("threads");
    let (a, b) = (d.join("a"), d.join("b"));
    for (dir, t) in [(&a, "1"), (&b, "2")] {
        let o = seedline(&[
            "simulate",
            "--replicates",
            "30",
            "--seed",
            "5",
            "--threads",
            t,
            "--out",
            dir.to_str().unwrap(),
        ]);
        assert!(o.status.success());
    }
    for f in ["replicates.tsv", "trees.nwk", "summary.json"] {
        assert_eq!(std::fs::read(a.join(f)).unwrap(), std::fs::read(b.join(f)).unwrap(), "{f} differs");
    }
}

#[test]
fn bad_input_exits_with_2_and_names_file_key_and_line() {
    let d = tempdir("bad");
    let p = write(
        &d,
        "bad.yaml",
        "demes:\n  - name: a\n    size: 10\n    dormancy: {law: pareto, alpha: -1}\nsamples: [{deme: a, count: 2}]\n",
    );
    let o = seedline(&["simulate", &p, "--out", d.join("x").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("bad.yaml:4") && err.contains("demes[0].dormancy") && err.contains("alpha"), "{err}");
    assert!(!d.join("x").join("replicates.tsv").exists());

    let o = seedline(&["validate", d.join("missing.yaml").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("missing.yaml"));

    let o = seedline(&["simulate", "--replicates", "many"]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn validate_prints_the_parsed_scenario() {
    let o = seedline(&["validate", concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/demo.yaml")]);
    assert!(o.status.success());
    let s = String::from_utf8_lossy(&o.stdout);
    assert!(s.contains("valid") && s.contains("deme north") && s.contains("geometric"), "{s}");
}

#[test]
fn help_shows_examples() {
    let o = seedline(&["simulate", "--help"]);
    assert!(o.status.success());
    assert!(String::from_utf8_lossy(&o.stdout).contains("Examples:"));
}

#[test]
fn vcf_read_back_with_noodles_gives_the_same_sfs() {
    use noodles::vcf;
    use noodles::vcf::variant::record::samples::Series as _;
    use noodles::vcf::variant::record::samples::series::Value;
    let d = tempdir("vcf");
    let scenario = write(
        &d,
        "s.yaml",
        "seed: 3\nreplicates: 3\ndemes: [{name: a, size: 300, dormancy: {law: uniform, max: 3}}, {name: b, size: 200}]\nmigration: [{from: a, to: b, rate: 0.01}, {from: b, to: a, rate: 0.01}]\nsamples: [{deme: a, count: 4}, {deme: b, count: 4, generations_ago: 20}]\nmutation: {rate: 1.0e-6, sites: 20000}\n",
    );
    let out = d.join("run");
    let o = seedline(&["simulate", &scenario, "--vcf", "--diploid", "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let sfs = std::fs::read_to_string(out.join("sfs.tsv")).unwrap();
    for (rep, line) in sfs.lines().skip(1).enumerate() {
        let expected: Vec<u64> = line.split('\t').skip(1).map(|x| x.parse().unwrap()).collect();
        let mut reader =
            vcf::io::reader::Builder::default().build_from_path(out.join(format!("vcf/replicate_{rep}.vcf"))).unwrap();
        let header = reader.read_header().unwrap();
        assert_eq!(header.sample_names().len(), 4, "8 haplotypes paired into 4 diploids");
        let mut xi = vec![0u64; 7];
        for rec in reader.records() {
            let rec = rec.unwrap();
            let samples = rec.samples();
            let gt = samples.select("GT").unwrap();
            let mut derived = 0;
            for v in gt.iter(&header) {
                if let Some(Value::Genotype(g)) = v.unwrap() {
                    for allele in g.iter() {
                        let (pos, _) = allele.unwrap();
                        derived += usize::from(pos == Some(1));
                    }
                }
            }
            xi[derived - 1] += 1;
        }
        assert_eq!(xi, expected, "replicate {rep}");
    }
}

#[test]
fn predict_prints_json_with_the_fixed_keys() {
    let o =
        seedline(&["predict", concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/no-dormancy-baseline.yaml"), "--json"]);
    assert!(o.status.success());
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    for k in ["pair_time_mean", "tmrca_mean", "sfs_expected", "segregating_sites_mean", "pi_mean", "notes"] {
        assert!(v.get(k).is_some(), "missing {k}");
    }
    // Source: Kingman (1982) / exact discrete chain: E[T_2] = N = 1000 generations.
    assert_eq!(v["pair_time_mean"], 1000.0);
    assert_eq!(v["sfs_expected"].as_array().unwrap().len(), 19);
}

#[test]
fn linkage_disequilibrium_only_on_request() {
    let d = tempdir("ld");
    let scenario = write(
        &d,
        "s.yaml",
        "demes: [{name: a, size: 300}]\nsamples: [{deme: a, count: 6}]\n\
         mutation: {rate: 2.0e-6, sites: 5000}\nrecombination: {rate: 2.0e-6}\n",
    );
    let run = |name: &str, extra: &[&str]| {
        let out = d.join(name);
        let mut args = vec!["simulate", scenario.as_str(), "--replicates", "5", "--out", out.to_str().unwrap()];
        args.extend_from_slice(extra);
        (seedline(&args), out)
    };
    let (o, plain) = run("plain", &[]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(!plain.join("ld.tsv").exists(), "ld.tsv written without --ld");
    let (o, with) = run("with", &["--ld"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let ld = std::fs::read_to_string(with.join("ld.tsv")).unwrap();
    assert!(ld.lines().count() > 2, "{ld}");
    // The other outputs do not depend on --ld.
    for f in ["replicates.tsv", "trees.nwk", "sfs.tsv"] {
        assert_eq!(std::fs::read(plain.join(f)).unwrap(), std::fs::read(with.join(f)).unwrap(), "{f} differs");
    }
    // --ld without a mutation model is bad input.
    let bare = write(&d, "bare.yaml", "demes: [{name: a, size: 300}]\nsamples: [{deme: a, count: 6}]\n");
    let o = seedline(&["simulate", bare.as_str(), "--ld", "--out", d.join("bare").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stderr).contains("--ld needs a mutation model"));
}

#[test]
fn every_command_records_its_engine() {
    let d = tempdir("engines");
    let large = write(
        &d,
        "large.yaml",
        "replicates: 20\ndemes: [{name: a, size: 50000, dormancy: {law: geometric, mean: 3}}]\n\
         samples: [{deme: a, count: 8}]\nmutation: {rate: 1.0e-9, sites: 10000}\n",
    );
    let json = |p: std::path::PathBuf| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(p).unwrap()).unwrap()
    };
    // simulate: the decision with what was asked and why.
    let out = d.join("sim");
    let o = seedline(&["simulate", large.as_str(), "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let s = json(out.join("summary.json"));
    assert_eq!((s["engine"]["kind"].as_str(), s["engine"]["requested"].as_str()), (Some("approx"), Some("auto")));
    assert!(s["engine"]["reason"].as_str().unwrap().contains("Kingman"));
    // null: in the manifest, and printed.
    let out = d.join("null");
    let o =
        seedline(&["null", large.as_str(), "--replicates", "10", "--engine", "exact", "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stdout).contains("engine: exact engine (requested)"));
    assert_eq!(json(out.join("null.json"))["engine"], "exact");
    // An unknown engine name is bad input.
    let o = seedline(&["simulate", large.as_str(), "--engine", "quick", "--out", d.join("x").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    // compare: a tally per hypothesis (prior on N: draws below 200 individuals run exact).
    let h = write(
        &d,
        "h.yaml",
        "demes: [{name: a, size: {prior: uniform, low: 50, high: 5000}}]\nsamples: [{deme: a, count: 8}]\n\
         mutation: {rate: 1.0e-7, sites: 10000}\n",
    );
    let obs = write(&d, "obs.json", r#"{"statistics": {"segregating_sites": 5, "pi": 2.0}}"#);
    let out = d.join("cmp");
    let o = seedline(&[
        "compare",
        obs.as_str(),
        "--hypotheses",
        h.as_str(),
        "--simulations",
        "100",
        "--tolerance",
        "0.2",
        "--statistics",
        "segregating_sites,pi",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let c = json(out.join("compare.json"));
    let runs = &c["hypotheses"][0]["engine"]["runs"];
    let (exact, approx) = (runs["exact"].as_u64().unwrap(), runs["approx"].as_u64().unwrap());
    assert_eq!(exact + approx, 100);
    // N uniform on [50, 5000]: P(N < 200) = 150/4950, so some of each (by hand: ~3 exact).
    assert!(exact >= 1 && approx >= 90, "exact {exact}, approx {approx}");
    assert!(String::from_utf8_lossy(&o.stdout).contains("engine for h: --engine auto:"));
}

#[test]
fn engines_for_a_recombining_locus_are_chosen_and_reported() {
    // A fog-grass chromosome arm (invented): N = 50 000, geometric dormancy of mean 2, 200 kb
    // at r = 1e-8: rho on the coalescent clock 2 N r (L - 1) E[R] = 400, so auto runs the
    // approximate ARG (Hudson's process below rho = 1000) and says so; a recent bottleneck
    // of 40 plants makes it the hybrid, with its switch time in summary.json.
    let d = tempdir("engines-rec");
    let arm = "seed: 3\nreplicates: 4\ndemes: [{name: slope, size: 50000, dormancy: {law: geometric, mean: 2}}]\n\
               samples: [{deme: slope, count: 6}]\nmutation: {rate: 1.0e-9, sites: 200000}\nrecombination: {rate: 1.0e-8}\n";
    let run = |name: &str, yaml: &str, engine: &str| {
        let p = write(&d, &format!("{name}.yaml"), yaml);
        let out = d.join(name);
        let o = seedline(&["simulate", &p, "--engine", engine, "--out", out.to_str().unwrap()]);
        (o, out)
    };
    let (o, out) = run("arm", arm, "auto");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["engine"]["kind"], "approx");
    let reason = summary["engine"]["reason"].as_str().unwrap();
    assert!(reason.contains("Hudson's ARG") && reason.contains("rho = 399.99"), "{reason}");
    assert!(String::from_utf8_lossy(&o.stdout).contains("engine: approximate engine"));
    let table = std::fs::read_to_string(out.join("replicates.tsv")).unwrap();
    assert!(table.lines().next().unwrap().ends_with("breakpoints\tcrossovers"));
    assert_eq!(table.lines().count(), 5);

    let neck =
        arm.replace("size: 50000,", "size: [{generations_ago: 0, size: 40}, {generations_ago: 30, size: 50000}],");
    let (o, out) = run("neck", &neck, "auto");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["engine"]["kind"], "hybrid");
    assert_eq!(summary["engine"]["switch"], 30);

    // The hybrid asked for where no limit holds even in the distant past: exit 2, with why.
    let tiny = arm.replace("size: 50000,", "size: 60,");
    let (o, _) = run("tiny", &tiny, "hybrid");
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("slope") && err.contains("distant past"), "{err}");
    // validate prints rho on the coalescent clock of the dormancy too.
    let p = write(&d, "arm_v.yaml", arm);
    let o = seedline(&["validate", &p]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("rho = 2 N r (L - 1) = 199.9990"), "{text}");
    assert!(text.contains("2 N r (L - 1) E[R]/d = 399.9980"), "{text}");
    let (o, _) = run("arm2", arm, "fastest");
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("exact, approx, auto or hybrid"));
}

/// Type-7 quantile of sorted data (Hyndman & Fan 1996, definition 7), written out here
/// independently of the library.
fn quantile7(sorted: &[f64], p: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * p;
    let (lo, frac) = (h.floor() as usize, h - h.floor());
    if lo + 1 < sorted.len() { sorted[lo] + frac * (sorted[lo + 1] - sorted[lo]) } else { sorted[lo] }
}

#[test]
fn summary_columns_are_keyed_by_name_and_leaves_carry_their_sampling_time() {
    let d = tempdir("keyed");
    let out = d.join("lake");
    let scen = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/lake-resting-eggs.yaml");
    let o = seedline(&["simulate", scen, "--replicates", "12", "--vcf", "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let table = std::fs::read_to_string(out.join("replicates.tsv")).unwrap();
    let header: Vec<&str> = table.lines().next().unwrap().split('\t').collect();
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let cols = s["columns"].as_object().expect("columns is an object keyed by column name");
    // Every numeric column of replicates.tsv, by name; its quantiles labelled by level and equal
    // to the type-7 quantiles of the column as written.
    for (j, name) in header.iter().enumerate().skip(1) {
        let c = &cols[*name];
        let mut xs: Vec<f64> = table.lines().skip(1).filter_map(|l| l.split('\t').nth(j)?.parse().ok()).collect();
        if xs.is_empty() {
            continue;
        }
        xs.sort_by(f64::total_cmp);
        assert_eq!(c["count"], xs.len() as u64, "{name}");
        for (label, p) in [("2.5%", 0.025), ("25%", 0.25), ("50%", 0.5), ("75%", 0.75), ("97.5%", 0.975)] {
            let got = c["quantiles"][label].as_f64().unwrap_or_else(|| panic!("{name}: no quantile {label}"));
            let want = quantile7(&xs, p);
            assert!((got - want).abs() <= 1e-9 * want.abs().max(1.0), "{name} {label}: {got} vs {want}");
        }
    }
    // Newick leaves are named as the VCF columns, with the generations ago of their sampling;
    // the map written beside the VCFs gives the same time for each.
    let map = std::fs::read_to_string(out.join("vcf/samples.tsv")).unwrap();
    let times: std::collections::BTreeMap<String, u64> = map
        .lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split('\t').collect();
            (f[0].to_string(), f[2].parse().unwrap())
        })
        .collect();
    assert_eq!(times.len(), 36);
    let trees = std::fs::read_to_string(out.join("trees.nwk")).unwrap();
    let first = trees.lines().next().unwrap();
    let body = &first[first.find(']').unwrap() + 1..];
    let leaves: Vec<&str> = body
        .split(['(', ')', ','])
        .map(|t| t.split(':').next().unwrap())
        .filter(|t| !t.is_empty() && !t.ends_with(';'))
        .collect();
    assert_eq!(leaves.len(), 36, "{first}");
    for leaf in leaves {
        let t = times.get(leaf).unwrap_or_else(|| panic!("leaf {leaf} is no VCF sample: {:?}", times.keys()));
        assert!(leaf.ends_with(&format!("_t{t}")), "{leaf} sampled {t} generations ago");
    }
    // 16 of today, 10 from each dated layer.
    assert_eq!(times.values().filter(|&&t| t == 40).count(), 10);
    assert_eq!(times.values().filter(|&&t| t == 120).count(), 10);
    let _ = std::fs::remove_dir_all(&d);
}
