//! Every figure the commands draw is well-formed SVG (parsed by roxmltree, an independent
//! XML parser) and names what it must: titles, axis labels, legends with the observed value
//! and its p-value, hypothesis names on the model-probability bars, a log axis for a
//! log-uniform prior, labelled median and interval, designs with their costs and the target.

use std::path::{Path, PathBuf};
use std::process::Command;

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn seedline(dir: &Path, args: &[&str]) {
    let o = Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(args)
        .arg("--quiet")
        .current_dir(dir)
        .output()
        .expect("the binary runs");
    assert!(o.status.success(), "seedline {args:?}: {}", String::from_utf8_lossy(&o.stderr));
}

/// The texts of an SVG file, after checking that it parses, is an `svg` root and has a size.
fn svg_texts(path: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let doc =
        roxmltree::Document::parse(&text).unwrap_or_else(|e| panic!("{} is not well-formed XML: {e}", path.display()));
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg", "{}", path.display());
    for dim in ["width", "height"] {
        let v: f64 = root.attribute(dim).and_then(|v| v.parse().ok()).unwrap_or(0.0);
        assert!(v > 0.0, "{}: {dim} {v}", path.display());
    }
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| n.text())
        .map(|t| t.trim().to_string())
        .collect()
}

fn assert_names(path: &Path, texts: &[String], wanted: &[&str]) {
    for w in wanted {
        assert!(texts.iter().any(|t| t.contains(w)), "{}: no label containing `{w}` among {texts:?}", path.display());
    }
}

fn svgs_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            out.extend(svgs_under(&p));
        } else if p.extension().is_some_and(|e| e == "svg") {
            out.push(p);
        }
    }
    out
}

#[test]
fn every_figure_parses_and_names_its_labels() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("figures-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for d in ["examples", "scenarios"] {
        std::os::unix::fs::symlink(Path::new(ROOT).join(d), dir.join(d)).unwrap();
    }
    seedline(&dir, &["simulate", "scenarios/no-dormancy-baseline.yaml", "--replicates", "40", "--out", "simulate"]);
    seedline(&dir, &["families", "scenarios/single-lineage-block.yaml", "--replicates", "6", "--out", "families"]);
    seedline(&dir, &["observe", "examples/data.vcf.gz", "--samples", "examples/map.tsv", "--out", "observed"]);
    let like = ["--like", "observed/observed.json"];
    seedline(
        &dir,
        &[&["null", "examples/null-no-dormancy.yaml", "--replicates", "150", "--out", "null"][..], &like].concat(),
    );
    seedline(&dir, &["test", "observed/observed.json", "--null", "null", "--out", "test"]);
    seedline(
        &dir,
        &[
            "compare",
            "observed/observed.json",
            "--hypotheses",
            "examples/h-none.yaml",
            "examples/h-pareto.yaml",
            "--simulations",
            "120",
            "--tolerance",
            "0.25",
            "--out",
            "compare",
        ],
    );
    seedline(
        &dir,
        &[
            "design",
            "--null",
            "examples/h-none.yaml",
            "--alternative",
            "examples/h-pareto.yaml",
            "--designs",
            "examples/designs.yaml",
            "--replicates",
            "40",
            "--power-replicates",
            "30",
            "--statistics",
            "pi",
            "--out",
            "design",
        ],
    );

    let mut seen = 0;
    for out in ["simulate", "families", "test", "compare", "design"] {
        for p in svgs_under(&dir.join(out)) {
            let texts = svg_texts(&p);
            assert!(!texts.is_empty(), "{}: no text at all", p.display());
            seen += 1;
        }
    }
    assert!(seen >= 13, "only {seen} figures");

    let p = dir.join("families/relatedness.svg");
    assert_names(
        &p,
        &svg_texts(&p),
        &["Relatedness by lag", "lag l (generations)", "predicted (renewal theory)", "simulated"],
    );
    let p = dir.join("families/coloured.svg");
    assert_names(&p, &svg_texts(&p), &["Var(S_m)", "m (individuals summed)", "exact Var(S_m)", "fitted slope 2H = "]);
    let p = dir.join("families/mrca_depth.svg");
    assert_names(&p, &svg_texts(&p), &["MRCA depth of related pairs at lag", "x = depth / lag", "limit law"]);

    let p = dir.join("simulate/sfs.svg");
    assert_names(
        &p,
        &svg_texts(&p),
        &[
            "simulated (40 replicates) against predicted",
            "derived-allele count",
            "predicted (",
            "simulated mean",
            "95% interval",
        ],
    );

    let p = dir.join("test/figures/pi.svg");
    assert_names(
        &p,
        &svg_texts(&p),
        &[
            "pi: observed against the null (two-sided p = ",
            "observed ",
            ", p = ",
            "null central 95%",
            "null replicates (of 150)",
        ],
    );
    let p = dir.join("test/figures/sfs.svg");
    assert_names(
        &p,
        &svg_texts(&p),
        &[
            "Observed unfolded SFS against the null, fit p = ",
            "null central 95%",
            "null mean",
            "observed",
            "derived-allele count",
        ],
    );

    let p = dir.join("compare/model_probabilities.svg");
    assert_names(
        &p,
        &svg_texts(&p),
        &["h-none", "h-pareto", "hypothesis", "posterior probability", "± 2 Monte-Carlo errors"],
    );
    // demes[0].size has a log-uniform prior; dormancy.alpha a uniform one.
    let p = dir.join("compare/posterior_h-pareto_demes_0_size.svg");
    let texts = svg_texts(&p);
    assert_names(
        &p,
        &texts,
        &["demes[0].size (log scale)", "prior (log-uniform)", "median ", "95% interval [", "prior range [200, 3000]"],
    );
    // Ticks on the log axis are values of θ: between the prior bounds, and not all equally spaced.
    let ticks: Vec<f64> = texts.iter().filter_map(|t| t.parse().ok()).filter(|v| *v >= 150.0).collect();
    assert!(ticks.len() >= 3, "{}: log-axis ticks {ticks:?}", p.display());
    let p = dir.join("compare/posterior_h-pareto_demes_0_dormancy_alpha.svg");
    let texts = svg_texts(&p);
    assert_names(&p, &texts, &["prior (uniform)", "median ", "95% interval ["]);
    assert!(!texts.iter().any(|t| t.contains("log scale")), "{}: a uniform prior on a log axis", p.display());

    let p = dir.join("design/power_pi.svg");
    assert_names(
        &p,
        &svg_texts(&p),
        &[
            "twelve-today (cost",
            "thirty-today (cost",
            "twelve-today-16-loci (cost",
            "target power 0.8",
            "Wilson 95% interval",
            "power",
        ],
    );
    let _ = std::fs::remove_dir_all(&dir);
}
