//! Table tests of the scenario parser: every rule, with the key path and line it reports.

use super::*;

fn issues(yaml: &str) -> Vec<Issue> {
    match Scenario::from_yaml_str(yaml, "t.yaml") {
        Ok(_) => panic!("expected the scenario to be refused:\n{yaml}"),
        Err(Error::Invalid { issues, .. }) => issues,
        Err(e) => panic!("expected validation issues, got {e}"),
    }
}

fn has(issues: &[Issue], path: &str, needle: &str) -> bool {
    issues.iter().any(|i| i.path == path && i.message.contains(needle))
}

const DEME: &str = "demes:\n  - name: a\n    size: 10\n";

#[test]
fn every_shipped_scenario_is_valid() {
    for entry in std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios")).unwrap() {
        let p = entry.unwrap().path();
        let text = std::fs::read_to_string(&p).unwrap();
        if let Err(e) = Scenario::from_yaml_str(&text, &p.display().to_string()) {
            panic!("{e}");
        }
    }
    let demo = Scenario::demo();
    assert!(demo.samples().len() >= 2);
}

#[test]
fn defaults() {
    let s = Scenario::from_yaml_str(&format!("{DEME}samples: [{{deme: a, count: 3}}]\n"), "t").unwrap();
    assert_eq!((s.seed(), s.replicates(), s.horizon()), (DEFAULT_SEED, DEFAULT_REPLICATES, DEFAULT_HORIZON));
    assert!(s.demes()[0].dormancy().is_none());
    assert_eq!(s.samples().iter().map(|x| x.label.as_str()).collect::<Vec<_>>(), ["a_0", "a_1", "a_2"]);
}

#[test]
fn unknown_keys_are_refused_with_a_line() {
    let e = Scenario::from_yaml_str(&format!("{DEME}samples: [{{deme: a, count: 3}}]\nmigrations: []\n"), "t.yaml")
        .unwrap_err()
        .to_string();
    assert!(e.starts_with("t.yaml:") && e.contains("migrations") && e.contains("line 5"), "{e}");
}

#[test]
fn type_errors_name_the_line() {
    let e = Scenario::from_yaml_str("demes:\n  - name: a\n    size: many\nsamples: []\n", "t.yaml")
        .unwrap_err()
        .to_string();
    assert!(e.contains("t.yaml") && e.contains("line 3"), "{e}");
}

#[test]
fn sizes() {
    let i = issues("demes:\n  - name: a\n    size: 0\nsamples: [{deme: a, count: 1}]\n");
    assert!(has(&i, "demes[0].size", "size is a number of individuals >= 1"));
    assert_eq!(i[0].line, Some(2));
    let i = issues("demes:\n  - name: a\n    size: -5\nsamples: [{deme: a, count: 1}]\n");
    assert!(has(&i, "demes[0].size", ">= 1"));
    let i = issues("demes:\n  - name: a\n    size: [{generations_ago: 10, size: 5}]\nsamples: [{deme: a, count: 1}]\n");
    assert!(has(&i, "demes[0].size[0].generations_ago", "must start at 0"));
    let i = issues(
        "demes:\n  - name: a\n    size: [{generations_ago: 0, size: 5}, {generations_ago: 0, size: 6}]\nsamples: [{deme: a, count: 1}]\n",
    );
    assert!(has(&i, "demes[0].size", "strictly increasing"));
}

#[test]
fn dormancy_laws() {
    let cases: &[(&str, &str, &str)] = &[
        ("{law: pareto, alpha: 0}", "demes[0].dormancy", "alpha = 0"),
        ("{law: pareto, alpha: -1}", "demes[0].dormancy", "alpha = -1"),
        ("{law: pareto}", "demes[0].dormancy.alpha", "needs the key `alpha`"),
        ("{law: geometric, mean: 0.5}", "demes[0].dormancy", "mean = 0.5"),
        ("{law: geometric, alpha: 2}", "demes[0].dormancy.alpha", "does not belong to law `geometric`"),
        ("{law: weibull}", "demes[0].dormancy.law", "unknown law `weibull`"),
        ("{law: uniform, max: 2.5}", "demes[0].dormancy.max", "whole number"),
        ("{law: table, weights: [0, 0]}", "demes[0].dormancy", "positive weight"),
        ("{law: mixture, parts: [{law: none}]}", "demes[0].dormancy.parts[0].weight", "needs a `weight`"),
        (
            "{law: mixture, parts: [{weight: 1, law: since_founding, founded: 5}]}",
            "demes[0].dormancy",
            "cannot be a part",
        ),
        ("{law: none, weight: 1}", "demes[0].dormancy.weight", "only allowed inside the parts"),
    ];
    for (law, path, needle) in cases {
        let i = issues(&format!(
            "demes:\n  - name: a\n    size: 10\n    dormancy: {law}\nsamples: [{{deme: a, count: 1}}]\n"
        ));
        assert!(has(&i, path, needle), "{law}: {i:?}");
        assert_eq!(i[0].line, Some(4), "{law}");
    }
}

#[test]
fn migration_rules() {
    let two = "demes:\n  - {name: a, size: 10}\n  - {name: b, size: 10}\nsamples: [{deme: a, count: 1}]\n";
    let i = issues(&format!("{two}migration:\n  - {{from: a, to: c, rate: 0.1}}\n"));
    assert!(has(&i, "migration[0].to", "unknown deme `c`"));
    assert_eq!(i[0].line, Some(6));
    let i = issues(&format!("{two}migration:\n  - {{from: a, to: b, rate: 1.5}}\n"));
    assert!(has(&i, "migration[0].rate", "not a probability"));
    let i = issues(&format!("{two}migration:\n  - {{from: a, to: b, rate: -0.1}}\n"));
    assert!(has(&i, "migration[0].rate", "not a probability"));
    let three = "demes:\n  - {name: a, size: 10}\n  - {name: b, size: 10}\n  - {name: c, size: 10}\nsamples: [{deme: a, count: 1}]\n";
    let i = issues(&format!(
        "{three}migration:\n  - {{from: a, to: b, rate: 0.6}}\n  - {{from: a, to: c, rate: 0.6, generations_ago: [10, 20]}}\n"
    ));
    assert!(has(&i, "migration", "sum to 1.2 in [10, 20)"), "{i:?}");
    let i = issues(&format!("{two}migration:\n  - {{from: a, to: a, rate: 0.1}}\n"));
    assert!(has(&i, "migration[0]", "same deme"));
}

#[test]
fn migration_epochs_build_full_rows() {
    let s = Scenario::from_yaml_str(
        "demes:\n  - {name: a, size: 10}\n  - {name: b, size: 10}\nsamples: [{deme: a, count: 1}]\nmigration:\n  - {from: a, to: b, rate: 0.25, generations_ago: [5, 9]}\n",
        "t",
    )
    .unwrap();
    let m = s.migration();
    assert_eq!(m.matrix_at(0)[0], vec![1.0, 0.0]);
    assert_eq!(m.matrix_at(5)[0], vec![0.75, 0.25]);
    assert_eq!(m.matrix_at(8)[0], vec![0.75, 0.25]);
    assert_eq!(m.matrix_at(9)[0], vec![1.0, 0.0]);
}

#[test]
fn sample_rules() {
    let i = issues(&format!("{DEME}samples: [{{deme: a, count: 11}}]\n"));
    assert!(has(&i, "samples", "holds only 10"));
    let i = issues(&format!("{DEME}samples: [{{deme: a, count: 6}}, {{deme: a, count: 5}}]\n"));
    assert!(has(&i, "samples", "11 individuals sampled"), "{i:?}");
    let i = issues(&format!("{DEME}samples: [{{deme: z, count: 1}}]\n"));
    assert!(has(&i, "samples[0].deme", "unknown deme `z`"));
    let i = issues(&format!("{DEME}samples: [{{deme: a, count: 0}}]\n"));
    assert!(has(&i, "samples[0].count", "count must be"));
    let i = issues(&format!("{DEME}samples: [{{deme: a, block: {{from: 5, to: 2}}}}]\n"));
    assert!(has(&i, "samples[0].block", "from <= to"));
    let i = issues(&format!("{DEME}samples: [{{deme: a, count: 1, from: soil}}]\n"));
    assert!(has(&i, "samples[0].from", "population or seedbank"));
    let i = issues(&format!("{DEME}samples: []\n"));
    assert!(has(&i, "samples", "at least one"));
    let i = issues(&format!("horizon: 100\n{DEME}samples: [{{deme: a, count: 1, generations_ago: 200}}]\n"));
    assert!(has(&i, "samples[0].generations_ago", "whole number"));
}

#[test]
fn block_samples_expand_one_per_generation() {
    let s =
        Scenario::from_yaml_str("demes: [{name: a, size: 1}]\nsamples: [{deme: a, block: {from: 3, to: 7}}]\n", "t")
            .unwrap();
    assert_eq!(s.samples().iter().map(|x| x.time).collect::<Vec<_>>(), [3, 4, 5, 6, 7]);
}

#[test]
fn all_problems_reported_at_once() {
    let i = issues("demes:\n  - {name: 'a b', size: 0}\nsamples: [{deme: a, count: 1}]\nreplicates: 0\n");
    assert!(i.len() >= 3, "{i:?}");
}

#[test]
fn loci_as_a_list_of_lengths() {
    let base = format!("{DEME}samples: [{{deme: a, count: 3}}]\n");
    let s = Scenario::from_yaml_str(
        &format!("{base}mutation: {{rate: 1.0e-3}}\nloci: [120, 80, 300]\nrecombination: {{rate: 1.0e-4}}\n"),
        "t",
    )
    .unwrap();
    assert_eq!((s.loci(), s.locus_lengths()), (3, Some(&[120u64, 80, 300][..])));
    assert_eq!((s.locus_sites(1), s.total_sites()), (Some(80), Some(500)));
    assert_eq!(s.locus_mutation(2).unwrap().sites(), 300);
    assert_eq!(s.locus_recombination(1).unwrap().sites(), 80);
    assert_eq!(s.mutation().unwrap().sites(), 300, "the longest locus");
    let count =
        Scenario::from_yaml_str(&format!("{base}mutation: {{rate: 1.0e-3, sites: 50}}\nloci: 4\n"), "t").unwrap();
    assert_eq!((count.locus_lengths(), count.locus_sites(3), count.total_sites()), (None, Some(50), Some(200)));
    let i = issues(&format!("{base}mutation: {{rate: 1.0e-3, sites: 50}}\nloci: [10, 20]\n"));
    assert!(has(&i, "mutation.sites", "given twice"), "{i:?}");
    let i = issues(&format!("{base}mutation: {{rate: 1.0e-3}}\n"));
    assert!(has(&i, "mutation.sites", "missing"), "{i:?}");
    let i = issues(&format!("{base}mutation: {{rate: 1.0e-3}}\nloci: [10, 0, 2.5]\n"));
    assert!(has(&i, "loci[1]", "whole number") && has(&i, "loci[2]", "whole number"), "{i:?}");
    assert!(!i.iter().any(|x| x.path == "mutation.sites"), "a bad list reports only itself: {i:?}");
    let i = issues(&format!("{base}mutation: {{rate: 1.0e-3, sites: 5}}\nloci: 0\n"));
    assert!(has(&i, "loci", "1..="), "{i:?}");
    let i = issues(&format!("{base}mutation: {{rate: 1.0e-3}}\nloci: []\n"));
    assert!(has(&i, "loci", "list"), "{i:?}");
}
