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

/// The texts of an SVG with their y coordinate (pixels from the top).
fn svg_texts_at(path: &Path) -> Vec<(String, f64)> {
    let text = std::fs::read_to_string(path).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|n| Some((n.text()?.trim().to_string(), n.attribute("y")?.parse().ok()?)))
        .collect()
}

/// Tick labels of a log axis are round (1, 2 or 5 times a power of ten) and each printed once
/// per axis (x and y labels may share a value, so at most twice in all).
fn assert_round_log_ticks(path: &Path, texts: &[String]) {
    let ticks: Vec<f64> = texts.iter().filter_map(|t| t.parse::<f64>().ok()).filter(|v| *v > 0.0).collect();
    assert!(ticks.len() >= 3, "{}: ticks {ticks:?}", path.display());
    for t in &ticks {
        let m = t / 10f64.powf(t.log10().floor());
        assert!(
            [1.0, 2.0, 5.0, 10.0].iter().any(|r| (m - r).abs() < 1e-6),
            "{}: tick {t} is not 1-2-5 round: {ticks:?}",
            path.display()
        );
        assert!(ticks.iter().filter(|u| *u == t).count() <= 2, "{}: tick {t} printed again: {texts:?}", path.display());
    }
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

    // Log axes of the families figures: round ticks, each once (no "0.1" twice, no "0.9 1 1").
    for f in ["relatedness", "mrca_depth", "coloured"] {
        let p = dir.join(format!("families/{f}.svg"));
        assert_round_log_ticks(&p, &svg_texts(&p));
    }
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
    // Each histogram says how its genome-wide value is formed: only additive statistics are
    // summed over loci (stats::combined_column_values); the legend sits below the plot.
    let label = |stat: &str| {
        let p = dir.join(format!("test/figures/{stat}.svg"));
        let texts = svg_texts(&p);
        assert!(!texts.iter().any(|t| t.contains("where it adds up")), "{}: {texts:?}", p.display());
        texts
            .into_iter()
            .find(|t| t.starts_with(stat) && t.contains(':') && !t.contains("observed against"))
            .unwrap_or_else(|| panic!("{}: no axis label", p.display()))
    };
    for stat in ["segregating_sites", "pi", "theta_w", "fay_wu_h"] {
        assert!(label(stat).contains("summed over loci"), "{stat}: {}", label(stat));
    }
    let hap = label("haplotypes");
    assert!(hap.contains("mean over loci") && !hap.contains("summed"), "{hap}");
    for stat in ["tajima_d", "fay_wu_h_norm"] {
        assert!(label(stat).contains("no unit") && !label(stat).contains("summed over loci"), "{}", label(stat));
    }
    assert!(label("pi_locus_mean").contains("mean over loci of the per-locus"));
    assert!(label("tajima_d_locus_var").contains("variance across loci of the per-locus"));
    let p = dir.join("test/figures/fay_wu_h_norm.svg");
    let at = svg_texts_at(&p);
    let axis_y = at.iter().find(|t| t.0.starts_with("fay_wu_h_norm:")).unwrap().1;
    for key in ["observed ", "null central 95%", "null distribution ("] {
        let y = at.iter().find(|t| t.0.starts_with(key)).unwrap_or_else(|| panic!("{}: no {key}", p.display())).1;
        assert!(
            y > axis_y,
            "{}: legend entry {key} at y {y} is not below the plot (axis label at {axis_y})",
            p.display()
        );
    }

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
    // At round values (200, 500, 1000, 2000), not at round logarithms (251, 316, 398, ...).
    let big: Vec<String> = ticks.iter().map(|t| t.to_string()).collect();
    assert_round_log_ticks(&p, &big);
    let p = dir.join("compare/posterior_h-pareto_demes_0_dormancy_alpha.svg");
    let texts = svg_texts(&p);
    assert_names(&p, &texts, &["prior (uniform)", "median ", "95% interval ["]);
    assert!(!texts.iter().any(|t| t.contains("log scale")), "{}: a uniform prior on a log axis", p.display());

    // The legend below the designs, no empty slot above the top design.
    let p = dir.join("design/power_pi.svg");
    let at = svg_texts_at(&p);
    let lowest_design = at.iter().filter(|t| t.0.contains("(cost ")).map(|t| t.1).fold(0.0, f64::max);
    let legend = at.iter().find(|t| t.0.starts_with("target power")).unwrap().1;
    assert!(legend > lowest_design, "{}: legend at {legend} above the designs ({lowest_design})", p.display());
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
