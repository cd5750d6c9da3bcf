//! Every `report.html` checked in a real browser: the commands that write one run on the
//! example data (small sizes), then headless Chromium, with every host unresolvable and a
//! dead proxy (no network), renders each page. The page must log nothing to the console,
//! load nothing that fails, hold every figure of its directory, draw each with a non-zero
//! size, and a PNG screenshot is saved beside it (`report.png`, under the test's temp dir).
//!
//! Without Chromium on PATH (or `SEEDLINE_CHROMIUM`) the test says so and passes, unless
//! `SEEDLINE_REQUIRE_BROWSER=1` (set by `tests/browser.sh`, which CI runs) demands it.

use std::path::{Path, PathBuf};
use std::process::Command;

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn chromium() -> Option<PathBuf> {
    if let Some(p) = std::env::var_os("SEEDLINE_CHROMIUM") {
        return Some(PathBuf::from(p));
    }
    let path = std::env::var_os("PATH")?;
    ["chromium", "chromium-browser", "google-chrome"]
        .iter()
        .flat_map(|name| std::env::split_paths(&path).map(move |d| d.join(name)))
        .find(|p| p.is_file())
}

fn seedline(dir: &Path, args: &[&str]) {
    let o = Command::new(env!("CARGO_BIN_EXE_seedline"))
        .args(args)
        .arg("--quiet")
        .current_dir(dir)
        .output()
        .expect("the binary runs");
    assert!(
        o.status.success(),
        "seedline {args:?}: {}\n{}",
        String::from_utf8_lossy(&o.stdout),
        String::from_utf8_lossy(&o.stderr)
    );
}

/// Flags that keep Chromium headless, offline and quiet about itself.
fn browser(chrome: &Path, profile: &Path) -> Command {
    let mut c = Command::new(chrome);
    c.args([
        "--headless",
        "--no-sandbox", // CI runs as root
        "--disable-gpu",
        "--no-first-run",
        "--no-default-browser-check",
        "--disable-extensions",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--host-resolver-rules=MAP * ~NOTFOUND",
        "--proxy-server=127.0.0.1:9",
        "--hide-scrollbars",
        "--enable-logging=stderr",
        "--v=0",
    ]);
    c.arg(format!("--user-data-dir={}", profile.display()));
    c
}

const HEAD_PROBE: &str = "<script>window.__errs=[];window.addEventListener('error',function(e){var t=e.target;window.__errs.push((t&&(t.src||t.href))||e.message)},true);</script>";
const BODY_PROBE: &str = "<script>window.addEventListener('load',function(){var out=[];document.querySelectorAll('figure svg').forEach(function(s,i){var r=s.getBoundingClientRect();out.push(Math.round(r.width)+'x'+Math.round(r.height)+'x'+s.querySelectorAll('*').length)});var p=document.createElement('pre');p.id='probe';p.textContent='FIGURES '+out.join(' ')+' ;HEIGHT '+document.documentElement.scrollHeight+' ;ERRORS '+window.__errs.length+' '+window.__errs.join(' | ');document.body.appendChild(p)});</script>";

struct Probe {
    figures: Vec<(u32, u32, u32)>,
    height: u32,
    errors: String,
}

fn parse_probe(dom: &str) -> Probe {
    let start = dom.find("<pre id=\"probe\">").unwrap_or_else(|| panic!("the probe did not run; DOM:\n{dom}"));
    let text = &dom[start..];
    let text = &text[..text.find("</pre>").unwrap_or(text.len())];
    let field = |name: &str| {
        let i = text.find(name).unwrap() + name.len();
        let rest = &text[i..];
        rest[..rest.find(" ;").unwrap_or(rest.len())].trim().to_string()
    };
    let figures = field("FIGURES")
        .split_whitespace()
        .map(|f| {
            let v: Vec<u32> = f.split('x').map(|x| x.parse().unwrap()).collect();
            (v[0], v[1], v[2])
        })
        .collect();
    Probe { figures, height: field(";HEIGHT").parse().unwrap(), errors: field(";ERRORS") }
}

fn check_page(chrome: &Path, report: &Path) {
    let dir = report.parent().unwrap();
    let html = std::fs::read_to_string(report).unwrap();
    assert!(!html.contains("<script"), "{}: the page must need no script", report.display());
    let without_ns = html.replace("http://www.w3.org/2000/svg", "").replace("http://www.w3.org/1999/xlink", "");
    assert!(
        !without_ns.contains("http://") && !without_ns.contains("https://"),
        "{}: refers to the network",
        report.display()
    );
    let svg_files = count_svgs(dir);
    assert_eq!(html.matches("<figure>").count(), svg_files, "{}: one figure per SVG file", report.display());

    // A copy with probes measures the figures in the browser.
    let probe = dir.join("probe.html");
    let probed = html.replacen("<head>", &format!("<head>{HEAD_PROBE}"), 1).replacen(
        "</body>",
        &format!("{BODY_PROBE}</body>"),
        1,
    );
    std::fs::write(&probe, probed).unwrap();
    let profile = dir.join("chromium-profile");
    let o = browser(chrome, &profile)
        .args(["--virtual-time-budget=5000", "--dump-dom"])
        .arg(format!("file://{}", probe.display()))
        .output()
        .expect("chromium runs");
    let dom = String::from_utf8_lossy(&o.stdout);
    assert!(o.status.success(), "chromium --dump-dom failed: {}", String::from_utf8_lossy(&o.stderr));
    let p = parse_probe(&dom);
    assert!(p.errors.starts_with('0'), "{}: resources failed to load: {}", report.display(), p.errors);
    assert_eq!(p.figures.len(), svg_files, "{}: figures drawn", report.display());
    for (i, &(w, h, elements)) in p.figures.iter().enumerate() {
        assert!(
            w > 0 && h > 0 && elements > 0,
            "{}: figure {i} drawn {w}x{h} with {elements} elements",
            report.display()
        );
    }
    std::fs::remove_file(&probe).unwrap();

    // The page itself: no console message, and a screenshot of all of it.
    let png = dir.join("report.png");
    let height = p.height.clamp(600, 16000);
    let o = browser(chrome, &profile)
        .arg(format!("--window-size=1200,{height}"))
        .arg(format!("--screenshot={}", png.display()))
        .arg(format!("file://{}", report.display()))
        .output()
        .expect("chromium runs");
    let log = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "chromium --screenshot failed: {log}");
    let console: Vec<&str> = log.lines().filter(|l| l.contains("CONSOLE")).collect();
    assert!(console.is_empty(), "{}: console messages:\n{}", report.display(), console.join("\n"));
    let bytes = std::fs::read(&png).unwrap_or_else(|_| panic!("no screenshot {}: {log}", png.display()));
    assert!(bytes.starts_with(b"\x89PNG") && bytes.len() > 10_000, "{}: screenshot too small", png.display());
    let _ = std::fs::remove_dir_all(&profile);
    eprintln!("{}: {} figures drawn, screenshot {}", report.display(), p.figures.len(), png.display());
}

fn count_svgs(dir: &Path) -> usize {
    let mut n = 0;
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() && p.file_name().is_some_and(|n| n != "vcf") {
            n += count_svgs(&p);
        } else if p.extension().is_some_and(|e| e == "svg") {
            n += 1;
        }
    }
    n
}

#[test]
fn every_report_renders_in_a_headless_browser() {
    let Some(chrome) = chromium() else {
        assert!(
            std::env::var_os("SEEDLINE_REQUIRE_BROWSER").is_none(),
            "SEEDLINE_REQUIRE_BROWSER is set but no chromium is on PATH (tests/browser.sh installs it)"
        );
        eprintln!("skipped: no chromium on PATH (tests/browser.sh installs Debian's chromium and runs this test)");
        return;
    };
    // Kept after the run (one directory, emptied first) for a look at the screenshots.
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("report-browser");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for d in ["examples", "scenarios"] {
        std::os::unix::fs::symlink(Path::new(ROOT).join(d), dir.join(d)).unwrap();
    }
    let runs: [&[&str]; 7] = [
        &["simulate", "scenarios/no-dormancy-baseline.yaml", "--replicates", "60", "--out", "simulate"],
        &["families", "scenarios/single-lineage-block.yaml", "--replicates", "4", "--out", "families"],
        &["observe", "examples/data.vcf.gz", "--samples", "examples/map.tsv", "--out", "observed"],
        &[
            "null",
            "examples/null-no-dormancy.yaml",
            "--replicates",
            "200",
            "--like",
            "observed/observed.json",
            "--out",
            "null",
        ],
        &["test", "observed/observed.json", "--null", "null", "--out", "test"],
        &[
            "compare",
            "observed/observed.json",
            "--hypotheses",
            "examples/h-none.yaml",
            "examples/h-pareto.yaml",
            "--simulations",
            "150",
            "--tolerance",
            "0.2",
            "--out",
            "compare",
        ],
        &[
            "design",
            "--null",
            "examples/h-none.yaml",
            "--alternative",
            "examples/h-pareto.yaml",
            "--designs",
            "examples/designs.yaml",
            "--replicates",
            "60",
            "--power-replicates",
            "40",
            "--out",
            "design",
        ],
    ];
    for args in runs {
        seedline(&dir, args);
    }
    for out in ["simulate", "families", "test", "compare", "design"] {
        let report = dir.join(out).join("report.html");
        assert!(report.is_file(), "{out} wrote no report.html");
        check_page(&chrome, &report);
    }
}

/// A number as the page shows it: six significant digits, trailing zeros dropped (written
/// here independently of the page's own code).
fn six_digits(x: f64) -> String {
    let decimals = (5 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// What each page says, read against the JSON the run wrote (no browser needed): simulate's
/// summary, comparison, scenario and notes; design's conclusion; the engine tallies of compare
/// and design; settings shown once each by flag name; compare's adjustment said plainly.
#[test]
fn every_report_states_its_results_engines_and_settings() {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("report-content-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for d in ["examples", "scenarios"] {
        std::os::unix::fs::symlink(Path::new(ROOT).join(d), dir.join(d)).unwrap();
    }
    seedline(&dir, &["simulate", "scenarios/no-dormancy-baseline.yaml", "--replicates", "30", "--out", "simulate"]);
    // 36 sequences: beyond the lineage chain, so no SFS prediction (the pair ones remain).
    seedline(&dir, &["simulate", "scenarios/lake-resting-eggs.yaml", "--replicates", "4", "--out", "lake"]);
    seedline(&dir, &["observe", "examples/data.vcf.gz", "--samples", "examples/map.tsv", "--out", "observed"]);
    seedline(
        &dir,
        &[
            "compare",
            "observed/observed.json",
            "--hypotheses",
            "examples/h-none.yaml",
            "examples/h-pareto.yaml",
            "--simulations",
            "60",
            "--tolerance",
            "0.5",
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
            "30",
            "--power-replicates",
            "20",
            "--statistics",
            "pi,tajima_d",
            "--out",
            "design",
        ],
    );
    let page = |out: &str| std::fs::read_to_string(dir.join(out).join("report.html")).unwrap();

    // simulate: the summary row of pi carries the mean of summary.json.
    let summary = json(&dir.join("simulate/summary.json"));
    let sim = page("simulate");
    let mean = summary["columns"]["pi"]["mean"].as_f64().unwrap();
    let row = format!("<tr><td><code>pi</code></td><td class=\"num\">{}</td>", six_digits(mean));
    assert!(sim.contains("Summary over replicates") && sim.contains(&row), "no summary row {row}");
    let sd = summary["columns"]["tmrca"]["sd"].as_f64().unwrap();
    assert!(sim.contains(&format!("<td class=\"num\">{}</td>", six_digits(sd))), "the sd of tmrca");
    // The comparison: every quantity with its verdict.
    assert!(sim.contains("Simulated against predicted"));
    for c in summary["comparison"].as_array().unwrap() {
        let q = c["quantity"].as_str().unwrap();
        let v = c["verdict"].as_str().unwrap();
        assert!(sim.contains(&format!("<td><code>{q}</code></td>")) && sim.contains(v), "comparison of {q}");
    }
    // The scenario: deme, its size and dormancy, the sample.
    assert!(sim.contains("<th>deme</th><th>size N</th><th>dormancy law</th>"));
    assert!(sim.contains("<td>plain</td>"), "the deme of the baseline scenario");
    // Settings: each flag once, by name; no raw dump.
    assert_eq!(sim.matches("<th>--replicates</th><td>30</td>").count(), 1);
    for raw in ["run.seed", "run.settings", "provenance.", "<th>replicates</th>"] {
        assert!(!sim.contains(raw), "simulate settings still show {raw}");
    }

    // simulate without an SFS prediction: the note of the prediction, the figure says so.
    let lake = page("lake");
    let summary = json(&dir.join("lake/summary.json"));
    let note = summary["prediction"]["notes"][0].as_str().unwrap();
    assert!(note.contains("n <= 25"), "{note}");
    assert!(
        lake.contains(&format!("<li>{}</li>", note.replace('<', "&lt;").replace('>', "&gt;"))),
        "the prediction's note"
    );
    assert!(lake.contains("No predicted SFS is drawn: T_MRCA, length and SFS"));
    let sfs = std::fs::read_to_string(dir.join("lake/sfs.svg")).unwrap();
    assert!(sfs.contains("no prediction drawn") && !sfs.contains("against predicted"), "sfs.svg's title");
    assert!(sfs.contains("no predicted SFS for this sample"), "sfs.svg's legend");
    assert!(lake.contains("no prediction drawn"), "the figure is in the page");

    // design: the conclusion per statistic, and the engine tallies per design.
    let d = json(&dir.join("design/design.json"));
    let des = page("design");
    assert!(des.contains("<h3 id=\"conclusion\">Conclusion</h3>"));
    for c in d["cheapest_reaching_target"].as_array().unwrap() {
        let stat = c["statistic"].as_str().unwrap();
        let said = match c["design"].as_str() {
            Some(design) => format!("<li>{stat}: {design} (cost "),
            None => format!("<li>{stat}: no design reaches power 0.8"),
        };
        assert!(des.contains(&said), "design conclusion: {said}");
    }
    for e in d["engines"].as_array().unwrap() {
        for side in ["null", "alternative"] {
            let runs = e[side]["runs"].as_object().unwrap();
            let total: u64 = runs.values().map(|n| n.as_u64().unwrap()).sum();
            for (engine, n) in runs {
                assert!(des.contains(&format!("{engine} for {n} of {total} runs")), "design engine tally {e}");
            }
        }
    }
    assert!(des.contains("null: no dormancy") && des.contains("alternative: power-law resting eggs"));

    // compare: the tallies per hypothesis, the hypothesis names, the adjustment said plainly.
    let c = json(&dir.join("compare/compare.json"));
    let cmp = page("compare");
    for h in c["hypotheses"].as_array().unwrap() {
        let runs = h["engine"]["runs"].as_object().unwrap();
        let total: u64 = runs.values().map(|n| n.as_u64().unwrap()).sum();
        for (engine, n) in runs {
            assert!(cmp.contains(&format!("{engine} for {n} of {total} runs")), "compare engine tally {h}");
        }
    }
    assert!(cmp.contains("h-none: no dormancy") && cmp.contains("h-pareto: power-law resting eggs"));
    assert!(
        cmp.contains(
            "model-choice adjustment: none (rejection shares); parameters: local-linear regression adjustment"
        )
    );
    assert!(!cmp.contains("<th>adjust</th>") && !cmp.contains("run.settings"));

    // test: the Engine section names the null and the engine that made it, from test.json.
    let like = ["--like", "observed/observed.json"];
    seedline(
        &dir,
        &[&["null", "examples/null-no-dormancy.yaml", "--replicates", "60", "--out", "null"][..], &like].concat(),
    );
    seedline(&dir, &["test", "observed/observed.json", "--null", "null", "--out", "test"]);
    let t = json(&dir.join("test/test.json"));
    let (engine, name) = (t["null"]["engine"].as_str().unwrap(), t["null"]["scenario_name"].as_str().unwrap());
    let tp = page("test");
    assert!(tp.contains(&format!("of &quot;{name}&quot; (in null) was made by the {engine} engine")), "test engine");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn probe_output_is_parsed() {
    let p = parse_probe("<pre id=\"probe\">FIGURES 720x480x31 640x400x9 ;HEIGHT 2400 ;ERRORS 0 </pre>");
    assert_eq!(p.figures, [(720, 480, 31), (640, 400, 9)]);
    assert_eq!(p.height, 2400);
    assert!(p.errors.starts_with('0'));
}
