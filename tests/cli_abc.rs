//! End-to-end tests of `seedline compare` and `seedline design`: files, exit codes,
//! independence of the thread count.

mod common;
use common::{seedline, tempdir, write};

const NONE: &str = "demes:\n  - name: pond\n    size: 60\nsamples:\n  - { deme: pond, count: 6 }\nmutation: { rate: 2.0e-8, sites: 1000000 }\n";
const GEO: &str = "demes:\n  - name: pond\n    size: 60\n    dormancy: { law: geometric, mean: { prior: log_uniform, low: 1, high: 4 } }\nsamples:\n  - { deme: pond, count: 6 }\nmutation: { rate: 2.0e-8, sites: 1000000 }\n";
// The layout written by `seedline observe` (branch observe): n = 6 sequences.
const OBSERVED: &str = r#"{"demes":["pond"],"design":[{"deme":"pond","generations_ago":0,"sequences":6,"sequences_in_data":6}],
 "projection":{"mode":"complete","m":6,"n":6},"columns":["segregating_sites","pi","theta_w","tajima_d","fay_wu_h","fay_wu_h_norm","haplotypes","pi_pond"],
 "statistics":{"segregating_sites":9,"pi":3.6,"theta_w":3.94,"tajima_d":-0.4,"fay_wu_h":-0.5,"fay_wu_h_norm":-0.2,"haplotypes":5,"pi_pond":3.6},
 "xi":[4,2,1,1,1],"eta":[5,3,1]}"#;

#[test]
fn compare_writes_its_files_and_does_not_depend_on_threads() {
    let d = tempdir("compare");
    let obs = write(&d, "observed.json", OBSERVED);
    let h0 = write(&d, "none.yaml", NONE);
    let h1 = write(&d, "geo.yaml", GEO);
    let mut texts = Vec::new();
    for threads in ["1", "2"] {
        let out = d.join(format!("out{threads}"));
        let o = seedline(&[
            "compare",
            &obs,
            "--hypotheses",
            &h0,
            &h1,
            "--simulations",
            "200",
            "--tolerance",
            "0.1",
            "--adjust",
            "logistic",
            "--threads",
            threads,
            "--out",
            out.to_str().unwrap(),
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        for f in [
            "model_probabilities.tsv",
            "posterior.tsv",
            "posterior_samples.tsv",
            "compare.json",
            "model_probabilities.svg",
            "posterior_geo_demes_0_dormancy_mean.svg",
        ] {
            assert!(out.join(f).exists(), "missing {f}");
        }
        let mp = std::fs::read_to_string(out.join("model_probabilities.tsv")).unwrap();
        let lines: Vec<&str> = mp.lines().collect();
        assert_eq!(lines[0], "hypothesis\tfile\taccepted\tprobability\tmc_error\tlogistic_probability\tlogistic_se");
        // 10% of 400 simulations accepted, split between the two hypotheses.
        let accepted: usize = lines[1..].iter().map(|l| l.split('\t').nth(2).unwrap().parse::<usize>().unwrap()).sum();
        assert_eq!(accepted, 40);
        let post = std::fs::read_to_string(out.join("posterior.tsv")).unwrap();
        assert!(post.lines().nth(1).unwrap().starts_with("geo\tdemes[0].dormancy.mean\t"), "{post}");
        assert!(std::fs::read_to_string(out.join("model_probabilities.svg")).unwrap().starts_with("<svg"));
        texts.push((mp, post, std::fs::read_to_string(out.join("posterior_samples.tsv")).unwrap()));
    }
    assert_eq!(texts[0], texts[1], "results must not depend on --threads");
}

#[test]
fn compare_warns_in_print_and_json_when_few_are_accepted() {
    // Source: the warning rules (fewer than 50 accepted; an observed statistic beyond the
    // accepted simulations). 100 simulations per hypothesis at tolerance 0.1: 20 accepted
    // in model choice, 10 in the estimation of geo (too few for a regression on the
    // statistics). The observed S = 400 is far beyond what N = 60 produces.
    let d = tempdir("compare-warn");
    let far = OBSERVED.replace("\"segregating_sites\":9", "\"segregating_sites\":400");
    let obs = write(&d, "observed.json", &far);
    let (h0, h1) = (write(&d, "none.yaml", NONE), write(&d, "geo.yaml", GEO));
    let out = d.join("out");
    let args = ["compare", &obs, "--hypotheses", &h0, &h1, "--simulations", "100", "--tolerance", "0.1", "--out"];
    let o = seedline(&[&args[..], &[out.to_str().unwrap()]].concat());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("warning: model choice: only 20 simulations accepted"), "{text}");
    assert!(text.contains("warning: geo: posterior from only 10 accepted simulations"), "{text}");
    assert!(text.contains("warning: geo: observed segregating_sites = 400 lies outside"), "{text}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("compare.json")).unwrap()).unwrap();
    let w = json["warnings"].as_array().unwrap();
    let has = |kind: &str, h: Option<&str>| w.iter().any(|x| x["kind"] == kind && x["hypothesis"].as_str() == h);
    assert!(has("few_accepted", None) && has("few_accepted", Some("geo")), "{w:?}");
    assert!(has("no_regression", Some("geo")) && has("observed_outside_accepted", Some("geo")), "{w:?}");
    let outside = w.iter().find(|x| x["kind"] == "observed_outside_accepted" && x["hypothesis"] == "geo").unwrap();
    assert_eq!(outside["statistic"], "segregating_sites");
    assert_eq!(outside["observed"], 400.0);
    // Every posterior summary lies inside the prior [1, 4].
    let post = std::fs::read_to_string(out.join("posterior.tsv")).unwrap();
    for v in post.lines().nth(1).unwrap().split('\t').skip(2).take(4) {
        let v: f64 = v.parse().unwrap();
        assert!((1.0..=4.0).contains(&v), "{post}");
    }
}

#[test]
fn bad_input_exits_2_with_file_and_key_path() {
    let d = tempdir("bad");
    let obs = write(&d, "observed.json", OBSERVED);
    let bad = write(&d, "bad.yaml", &GEO.replace("low: 1, high: 4", "low: 4, high: 1"));
    let o = seedline(&["compare", &obs, "--hypotheses", &bad, "--out", d.join("o").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("bad.yaml") && err.contains("demes[0].dormancy.mean"), "{err}");
    // A plain statistics file of 6 sequences (no design to apply) against a hypothesis sampling 8.
    let h8 = write(&d, "h8.yaml", &NONE.replace("count: 6", "count: 8"));
    let plain =
        write(&d, "plain.json", r#"{"statistics": {"pi": 3.6, "segregating_sites": 9}, "sfs": [4, 2, 1, 1, 1]}"#);
    let o = seedline(&["compare", &plain, "--hypotheses", &h8, "--out", d.join("o").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("6 sequences"), "{}", String::from_utf8_lossy(&o.stderr));
    // With observe's file the hypothesis simulates the observed design (6 sequences) instead.
    let o = seedline(&[
        "compare",
        &obs,
        "--hypotheses",
        &h8,
        "--simulations",
        "40",
        "--tolerance",
        "0.5",
        "--out",
        d.join("o8").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(0), "{}", String::from_utf8_lossy(&o.stderr));
    let h0 = write(&d, "none.yaml", NONE);
    let designs = write(&d, "designs.yaml", "designs:\n  - name: x\n    samples: [{deme: lake, count: 3}]\n");
    let o = seedline(&[
        "design",
        "--null",
        &h0,
        "--alternative",
        &h0,
        "--designs",
        &designs,
        "--out",
        d.join("p").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("designs.yaml") && err.contains("designs[0]") && err.contains("lake"), "{err}");
}

#[test]
fn design_writes_power_table_and_figures() {
    let d = tempdir("design");
    let h0 = write(&d, "none.yaml", NONE);
    let h1 = write(&d, "geo.yaml", &GEO.replace("{ prior: log_uniform, low: 1, high: 4 }", "3"));
    let designs = write(
        &d,
        "designs.yaml",
        "designs:\n  - name: four\n    samples: [{deme: pond, count: 4}]\n  - name: eight\n    samples: [{deme: pond, count: 4}, {deme: pond, count: 4, generations_ago: 20}]\n    loci: 2\ncosts: {per_individual: 1, per_layer: 10}\n",
    );
    let out = d.join("out");
    let o = seedline(&[
        "design",
        "--null",
        &h0,
        "--alternative",
        &h1,
        "--designs",
        &designs,
        "--replicates",
        "99",
        "--power-replicates",
        "50",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let t = std::fs::read_to_string(out.join("power.tsv")).unwrap();
    let mut lines = t.lines();
    assert_eq!(lines.next().unwrap(), "design\tstatistic\tpower\tlow_95\thigh_95\tcost");
    // Costs: four = 4·1 + 1 layer·10 = 14; eight = 8·1 + 2 layers·10 = 28.
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split('\t').collect()).collect();
    assert_eq!(rows.len(), 12, "6 statistics x 2 designs");
    assert!(rows.iter().filter(|r| r[0] == "four").all(|r| r[5] == "14"));
    assert!(rows.iter().filter(|r| r[0] == "eight").all(|r| r[5] == "28"));
    for f in ["design.json", "power_segregating_sites.svg", "power_sfs_chi2.svg"] {
        assert!(out.join(f).exists(), "missing {f}");
    }
}
