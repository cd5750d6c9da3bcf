//! `predict` and the simulated-versus-predicted table end to end: the embedded demo gets real
//! predictions (issue 18), and approximate predictions are never judged "differs" (issue 11
//! item 7).

mod common;

use common::{seedline, tempdir, write};

#[test]
fn demo_predicts_pair_times_pi_and_fst() {
    let o = seedline(&["predict", "--json"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    // The run record names the embedded demo as the input and no seed (nothing is drawn).
    assert_eq!(v["run"]["command"], "predict");
    assert_eq!(v["run"]["inputs"][0]["path"], "<embedded demo>");
    assert!(v["run"]["seed"].is_null());
    // The keys of earlier versions stay.
    for k in [
        "pair_time_mean",
        "tmrca_mean",
        "sfs_expected",
        "segregating_sites_mean",
        "pi_mean",
        "notes",
        "sources",
        "exact",
        "deme_pair_times",
        "fst",
        "regime",
    ] {
        assert!(v.get(k).is_some(), "missing {k}");
    }
    assert!(v["pi_mean"].as_f64().unwrap() > 0.0);
    assert_eq!(v["kinds"]["pi_mean"], "approximate", "the demo's south deme is outside the limit's condition");
    assert!(v["conditions"]["pi_mean"].as_str().unwrap().contains("not met"));
    let pairs = v["pair_times"].as_array().unwrap();
    assert_eq!(pairs.len(), 10);
    for p in pairs {
        assert!(p["mean"].as_f64().unwrap() > 0.0);
        assert_eq!(p["quantiles"].as_object().unwrap().len(), 5);
    }
    assert_eq!(v["fst"].as_array().unwrap().len(), 1);
    assert_eq!(v["deme_pi"].as_array().unwrap().len(), 2);
    assert_eq!(v["limit"]["holds"], false);
    let text = seedline(&["predict"]);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(text.contains("pairs of sampled lineages") && text.contains("north seed"), "{text}");
}

#[test]
fn approximate_predictions_are_never_differs() {
    // Source: under Kingman's coalescent E[Tajima's D] is not 0: a Monte Carlo of n = 10,
    // theta = 10 gives -0.075 ± 0.004 (independent recomputation reported with issue 11), so
    // with 20000 replicates the plug-in value 0 is many standard errors away. Here
    // theta = 2 N mu L = 2 · 5000 · 1e-6 · 1000 = 10, n = 10.
    let dir = tempdir("approx-verdict");
    let scen = write(
        &dir,
        "kingman.yaml",
        "seed: 5\ndemes: [{name: a, size: 5000}]\nsamples: [{deme: a, count: 10}]\nmutation: {rate: 1.0e-6, sites: 1000}\n",
    );
    let out = dir.join("out");
    let o =
        seedline(&["simulate", &scen, "--replicates", "20000", "--engine", "approx", "--out", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let rows = summary["comparison"].as_array().unwrap();
    let d = rows.iter().find(|r| r["quantity"] == "tajima_d").expect("a tajima_d row");
    assert_eq!(d["kind"], "approximate");
    assert_ne!(d["verdict"], "differs");
    let (lo, hi) = (d["interval"][0].as_f64().unwrap(), d["interval"][1].as_f64().unwrap());
    assert!(hi < 0.0 && lo > -0.2, "the simulated E[D] ({lo}, {hi}) sits clearly below 0");
    // Exact and limit rows are still judged: S agrees with theta a_n (Watterson 1975).
    let s = rows.iter().find(|r| r["quantity"] == "segregating_sites").unwrap();
    assert_eq!(s["kind"], "limit");
    assert_eq!(s["verdict"], "agrees");
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("approximate: not tested") || text.contains("agrees"), "{text}");
    let _ = std::fs::remove_dir_all(&dir);
}
