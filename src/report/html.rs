//! `report.html`: one self-contained page per run (inline SVG and CSS, no script, nothing
//! fetched), built from the files the command has just written into its output directory:
//! the main results its JSON holds (simulate: scenario, summary per column, simulated against
//! predicted; design: the cheapest design per statistic), the command line, the settings of
//! the run record (each flag once), the engine and why (tallies per hypothesis or design),
//! every table (TSV), every figure (SVG), the notes and warnings, and what the results do
//! and do not say.
//!
//! Reading the run's own files keeps the page in step with them: whatever a command writes
//! is what its page shows. Nothing time-dependent goes in, so the same run gives the same page.

use anyhow::Context;
use std::fmt::Write as _;
use std::fs;
use std::path::{Path, PathBuf};

/// File name of the page in every output directory that has one.
pub const REPORT_FILE: &str = "report.html";

/// Tables longer than this show their first rows only (the file holds them all).
const MAX_ROWS: usize = 40;

/// Per-replicate or per-draw tables: named, not shown.
const LISTED_ONLY: [&str; 3] = ["posterior_samples.tsv", "replicates.tsv", "sfs.tsv"];

/// Escapes text for HTML content and attribute values.
pub fn escape(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => s.push_str("&amp;"),
            '<' => s.push_str("&lt;"),
            '>' => s.push_str("&gt;"),
            '"' => s.push_str("&quot;"),
            '\'' => s.push_str("&#39;"),
            c => s.push(c),
        }
    }
    s
}

/// What a command's page says besides its files.
struct CommandText {
    title: &'static str,
    /// The engine, when the run's JSON does not record it.
    engine: &'static str,
    cautions: &'static [&'static str],
}

fn command_text(command: &str) -> CommandText {
    const MC: &str = "Every simulated number carries Monte-Carlo error: read the intervals, not only the point values; rerun with more replicates (or another seed) to see how much they move.";
    const MODEL: &str = "Everything holds under the model only: haploid, discrete generations, neutral, infinite sites, the dormancy laws, sizes and migration as written in the scenario or hypothesis files.";
    match command {
        "test" => CommandText {
            title: "Observed statistics against a null distribution",
            engine: "The null distribution was simulated by `seedline null` (the engine of that run is recorded in its directory); this command only compares.",
            cautions: &[
                "A p-value is the share of null replicates at least as extreme as the data (two-sided, empirical). It measures surprise under this one null model with all its assumptions; it is not the probability that the null hypothesis is true, and a large p-value does not show that the null is right.",
                "Several statistics (and loci) are tested at once: some small p-values are expected by chance. Per-locus q-values (Benjamini-Hochberg) control the expected share of false discoveries among the loci called.",
                "The smallest attainable p-value is about 2/(B+1) for B null replicates.",
                MODEL,
            ],
        },
        "compare" => CommandText {
            title: "Model choice and parameter estimation (ABC)",
            engine: "Every draw from the priors runs on the engine that `--engine` (default auto) picks for it: exact, or a coalescent limit where one is accurate; how many draws ran on each, and why, is in compare.json (`hypotheses[].engine`) and printed by the command.",
            cautions: &[
                "Posterior model probabilities compare only the hypotheses given, under their priors: a hypothesis that wins here may still fit the data badly (see the warnings when the observed value lies outside the accepted simulations).",
                "ABC posteriors depend on the summary statistics, the tolerance and the priors; with few accepted simulations they are rough. The ± values are Monte-Carlo errors of the shares, not the error of the ABC approximation.",
                "A posterior that piles up at the edge of its prior says the data want values beyond the prior, not that the edge is the answer.",
                MODEL,
            ],
        },
        "design" => CommandText {
            title: "Power of candidate sampling designs",
            engine: "Null and alternative datasets run on the engine that `--engine` (default auto) picks for each design and draw (exact, or a coalescent limit where one is accurate), on common random numbers for every design; the tally per design is in design.json and printed by the command.",
            cautions: &[
                "Power is the share of alternative datasets whose empirical p-value is at or below the level; its 95% Wilson interval is Monte-Carlo error only. Designs whose intervals overlap are not shown to differ.",
                "Power holds for the alternative and its priors as written: a different truth gives a different power.",
                MODEL,
            ],
        },
        "simulate" => CommandText {
            title: "Simulated genealogies and diversity",
            engine: "",
            cautions: &[
                "Predictions are labelled exact, limit or approximate; only exact and limit values are tested against the simulation, and where they differ the simulation of the exact model is the reference.",
                "Statistics pool samples of different times as if contemporaneous.",
                MC,
                MODEL,
            ],
        },
        "families" => CommandText {
            title: "Families of a block sample under heavy-tailed dormancy",
            engine: "Block samples run on the engine that `--engine` picks (heavy tails have no coalescent limit, so auto keeps the exact engine); see families.json.",
            cautions: &[
                "Lineages that have not met by the horizon stop there: relatedness and MRCA depths are conditional on that horizon.",
                MC,
                MODEL,
            ],
        },
        _ => CommandText { title: "Results", engine: "", cautions: &[MC, MODEL] },
    }
}

/// Writes [`REPORT_FILE`] into `dir` (a staging directory), from the files already there;
/// `out` is the directory the run will be found in, `argv` the command line (program name
/// first). Returns the path written.
pub fn write_report(dir: &Path, out: &Path, command: &str, argv: &[String]) -> anyhow::Result<PathBuf> {
    let page = render_report(dir, out, command, argv)?;
    let path = dir.join(REPORT_FILE);
    crate::report::write_atomic(&path, page.as_bytes()).with_context(|| format!("cannot write {}", path.display()))?;
    Ok(path)
}

/// The page [`write_report`] writes.
pub fn render_report(dir: &Path, out: &Path, command: &str, argv: &[String]) -> anyhow::Result<String> {
    let text = command_text(command);
    let mut files = list_files(dir)?;
    files.sort();
    let json: Option<serde_json::Value> = files
        .iter()
        .find(|p| p.extension().is_some_and(|e| e == "json") && !is_manifest(p))
        .map(|p| read_json(p))
        .transpose()?;

    let mut body = String::new();
    let line: Vec<String> = std::iter::once("seedline".to_string()).chain(argv.iter().skip(1).cloned()).collect();
    let _ = write!(
        body,
        "<h1>seedline {cmd}: {title}</h1>\n<p class=\"meta\">seedline {ver} &middot; output directory <code>{dir}</code></p>\n",
        cmd = escape(command),
        title = escape(text.title),
        ver = env!("CARGO_PKG_VERSION"),
        dir = escape(&out.display().to_string()),
    );
    body.push_str("<nav><a href=\"#results\">Results</a> &middot; <a href=\"#inputs\">Inputs and settings</a> &middot; <a href=\"#engine\">Engine</a> &middot; <a href=\"#tables\">Tables</a> &middot; <a href=\"#figures\">Figures</a> &middot; <a href=\"#notes\">Notes and cautions</a></nav>\n");

    if let Some(j) = &json {
        // The column order of replicates.tsv (the summary follows it).
        let order: Vec<String> = fs::read_to_string(dir.join("replicates.tsv"))
            .ok()
            .and_then(|t| t.lines().next().map(|h| h.split('\t').map(String::from).collect()))
            .unwrap_or_default();
        let results = results_html(command, j, &order);
        let results =
            if results.is_empty() { "<p>The tables and figures below hold the results.</p>\n".into() } else { results };
        let _ = write!(body, "<section id=\"results\"><h2>Results</h2>\n{results}</section>\n");
    }

    let _ = write!(
        body,
        "<section id=\"inputs\"><h2>Inputs and settings</h2>\n<p>Command line:</p><pre>{}</pre>\n",
        escape(&shell_words(&line))
    );
    // The files as the run record has them (every command that writes a page records its run).
    let inputs: Vec<(String, u64, String)> = json
        .as_ref()
        .and_then(|j| j["run"]["inputs"].as_array())
        .into_iter()
        .flatten()
        .map(|i| {
            let path = scalar(&i["path"]).unwrap_or_default();
            (path, i["bytes"].as_u64().unwrap_or(0), scalar(&i["crc32"]).unwrap_or_default())
        })
        .collect();
    if !inputs.is_empty() {
        body.push_str("<p>Input files (as read for this run):</p>\n<table><thead><tr><th>file</th><th>bytes</th><th>CRC-32</th></tr></thead><tbody>\n");
        for (path, bytes, crc) in inputs {
            let _ = writeln!(
                body,
                "<tr><td><code>{}</code></td><td class=\"num\">{bytes}</td><td><code>{crc}</code></td></tr>",
                escape(&path)
            );
        }
        body.push_str("</tbody></table>\n");
    }
    if let Some(j) = &json {
        let rows = settings_rows(j);
        if !rows.is_empty() {
            body.push_str("<table class=\"kv\"><tbody>\n");
            for (k, v) in rows {
                let _ = writeln!(body, "<tr><th>{}</th><td>{}</td></tr>", escape(&k), escape(&v));
            }
            body.push_str("</tbody></table>\n");
        }
    }
    body.push_str("</section>\n");

    let _ =
        write!(body, "<section id=\"engine\"><h2>Engine</h2>\n{}</section>\n", engine_html(json.as_ref(), text.engine));

    body.push_str("<section id=\"tables\"><h2>Tables</h2>\n");
    for p in files.iter().filter(|p| p.extension().is_some_and(|e| e == "tsv")) {
        body.push_str(&table_html(dir, p)?);
    }
    body.push_str("</section>\n");

    body.push_str("<section id=\"figures\"><h2>Figures</h2>\n");
    let svgs: Vec<&PathBuf> = files.iter().filter(|p| p.extension().is_some_and(|e| e == "svg")).collect();
    if svgs.is_empty() {
        body.push_str("<p>This run drew no figure.</p>\n");
    }
    for p in svgs {
        let svg = fs::read_to_string(p).with_context(|| format!("cannot read {}", p.display()))?;
        let why = match (&json, p.file_name().and_then(|n| n.to_str())) {
            (Some(j), Some("sfs.svg")) if command == "simulate" => no_sfs_prediction(j),
            _ => None,
        };
        let _ = write!(
            body,
            "<figure>\n{}\n<figcaption>{}{}</figcaption></figure>\n",
            inline_svg(&svg),
            escape(&relative(dir, p)),
            why.map_or(String::new(), |w| format!("<br><span class=\"why\">{}</span>", escape(&w)))
        );
    }
    body.push_str("</section>\n");

    body.push_str("<section id=\"notes\"><h2>Notes and cautions</h2>\n");
    let notes = json.as_ref().map(notes_of).unwrap_or_default();
    if !notes.is_empty() {
        body.push_str("<h3>Notes and warnings of this run</h3>\n<ul>\n");
        for n in notes {
            let _ = writeln!(body, "<li>{}</li>", escape(&n));
        }
        body.push_str("</ul>\n");
    }
    body.push_str("<h3>What these results do and do not say</h3>\n<ul>\n");
    for c in text.cautions {
        let _ = writeln!(body, "<li>{}</li>", escape(c));
    }
    body.push_str("</ul>\n</section>\n");

    Ok(format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>seedline {} report</title>\n<style>{STYLE}</style>\n</head>\n<body>\n{body}</body>\n</html>\n",
        escape(command)
    ))
}

const STYLE: &str = "body{font-family:sans-serif;max-width:1100px;margin:1em auto;padding:0 1em;color:#222;line-height:1.4}\
h1{font-size:1.5em}h2{border-bottom:1px solid #ccc;margin-top:1.6em}.meta{color:#555}\
pre{background:#f5f5f5;padding:.5em;overflow-x:auto;white-space:pre-wrap}\
table{border-collapse:collapse;margin:.5em 0 1em;font-size:.9em}td,th{border:1px solid #ccc;padding:2px 6px;text-align:left}\
th{background:#f0f0f0}td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}\
figure{margin:1em 0;border:1px solid #ddd;padding:.5em;display:inline-block;max-width:100%}\
figure svg{max-width:100%;height:auto;display:block}.wide{overflow-x:auto}figcaption{color:#555;font-size:.85em}.why{color:#8a4b00}";

/// The main results a command's JSON holds beyond its tables: for `simulate` the scenario,
/// the summary of every column and the comparison with theory; for `design` the conclusion.
fn results_html(command: &str, j: &serde_json::Value, order: &[String]) -> String {
    let mut s = String::new();
    match command {
        "simulate" => {
            s.push_str(&scenario_html(&j["scenario"]));
            s.push_str(&summary_html(&j["columns"], j["replicates"].as_u64(), order));
            s.push_str(&comparison_html(&j["comparison"]));
        }
        "design" => s.push_str(&conclusion_html(j)),
        _ => {}
    }
    s
}

/// A JSON value as short text: numbers to six significant digits, lists in brackets,
/// objects as `key value` pairs.
fn compact(v: &serde_json::Value) -> String {
    match v {
        serde_json::Value::Number(n) => {
            let t = n.to_string();
            n.as_f64().map_or(t.clone(), |x| short_number(&t, x))
        }
        serde_json::Value::Array(a) => format!("[{}]", a.iter().map(compact).collect::<Vec<_>>().join(", ")),
        serde_json::Value::Object(m) => m
            .iter()
            .filter(|(_, v)| !v.is_null())
            .map(|(k, v)| format!("{k} {}", compact(v)))
            .collect::<Vec<_>>()
            .join(", "),
        v => scalar(v).unwrap_or_default(),
    }
}

/// A share (power, probability) to three significant digits.
fn sig3(v: &serde_json::Value) -> String {
    v.as_f64().map_or_else(|| compact(v), |x| crate::abc::plot::sig(x, 3))
}

/// A number cell (right-aligned), or `-` when absent.
fn num_cell(v: &serde_json::Value) -> String {
    match v.as_f64() {
        Some(x) => format!("<td class=\"num\">{}</td>", escape(&short_number(&format!("{x}"), x))),
        None => "<td>-</td>".to_string(),
    }
}

/// The scenario as run: its demes (size, dormancy law), samples and the other settings.
fn scenario_html(sc: &serde_json::Value) -> String {
    let Some(m) = sc.as_object() else { return String::new() };
    let mut s = String::from("<h3>Scenario</h3>\n");
    if let Some(name) = m.get("name").and_then(|v| v.as_str()) {
        let _ = writeln!(s, "<p>{}</p>", escape(name));
    }
    if let Some(demes) = m.get("demes").and_then(|v| v.as_array()).filter(|a| !a.is_empty()) {
        s.push_str("<table><thead><tr><th>deme</th><th>size N</th><th>dormancy law</th></tr></thead><tbody>\n");
        for d in demes {
            let dormancy = match d["dormancy"].as_object() {
                None => "none (no dormancy)".to_string(),
                // The law's name, then its parameters.
                Some(law) => {
                    let rest: serde_json::Map<String, serde_json::Value> =
                        law.iter().filter(|(k, _)| *k != "law").map(|(k, v)| (k.clone(), v.clone())).collect();
                    let name = law.get("law").map(compact).unwrap_or_default();
                    if rest.is_empty() {
                        name
                    } else {
                        format!("{name}: {}", compact(&serde_json::Value::Object(rest)))
                    }
                }
            };
            let _ = writeln!(
                s,
                "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
                escape(&compact(&d["name"])),
                escape(&compact(&d["size"])),
                escape(&dormancy)
            );
        }
        s.push_str("</tbody></table>\n");
    }
    if let Some(samples) = m.get("samples").and_then(|v| v.as_array()).filter(|a| !a.is_empty()) {
        s.push_str("<table><thead><tr><th>sample of deme</th><th>count</th><th>generations ago</th><th>other</th></tr></thead><tbody>\n");
        for x in samples {
            let other = x
                .as_object()
                .map(|o| {
                    o.iter()
                        .filter(|(k, v)| !matches!(k.as_str(), "deme" | "count" | "generations_ago") && !v.is_null())
                        .map(|(k, v)| format!("{k}: {}", compact(v)))
                        .collect::<Vec<_>>()
                        .join("; ")
                })
                .unwrap_or_default();
            let ago = if x["generations_ago"].is_null() { "0".to_string() } else { compact(&x["generations_ago"]) };
            let _ = writeln!(
                s,
                "<tr><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
                escape(&compact(&x["deme"])),
                escape(&compact(&x["count"])),
                escape(&ago),
                escape(&other)
            );
        }
        s.push_str("</tbody></table>\n");
    }
    let rest: Vec<(&String, &serde_json::Value)> = m
        .iter()
        // Seed and replicates are settings of the run (shown there once).
        .filter(|(k, v)| !matches!(k.as_str(), "name" | "demes" | "samples" | "seed" | "replicates") && !v.is_null())
        .filter(|(_, v)| !v.as_array().is_some_and(|a| a.is_empty()))
        .collect();
    if !rest.is_empty() {
        s.push_str("<table class=\"kv\"><tbody>\n");
        for (k, v) in rest {
            let _ = writeln!(s, "<tr><th>{}</th><td>{}</td></tr>", escape(k), escape(&compact(v)));
        }
        s.push_str("</tbody></table>\n");
    }
    s
}

/// The summary of every column of `replicates.tsv`: mean, its 95% interval, sd, quantiles.
/// `order`: the columns in the order of `replicates.tsv` (JSON objects are read sorted by key).
fn summary_html(columns: &serde_json::Value, replicates: Option<u64>, order: &[String]) -> String {
    let Some(cols) = columns.as_object().filter(|c| !c.is_empty()) else { return String::new() };
    let mut cols: Vec<(&String, &serde_json::Value)> = cols.iter().collect();
    cols.sort_by_key(|(k, _)| order.iter().position(|o| o == *k).unwrap_or(usize::MAX));
    let mut s = String::from("<h3 id=\"summary\">Summary over replicates</h3>\n");
    if let Some(r) = replicates {
        let _ = writeln!(
            s,
            "<p>Per column of <code>replicates.tsv</code>, over {r} replicates: the mean with the 95% interval of the mean (mean &plusmn; 1.96 standard errors), the standard deviation and the central 95% of the replicates.</p>"
        );
    }
    s.push_str("<div class=\"wide\"><table class=\"summary\"><thead><tr><th>column</th><th>mean</th><th>95% interval of the mean</th><th>sd</th><th>2.5%</th><th>median</th><th>97.5%</th><th>min</th><th>max</th><th>count</th><th>missing</th></tr></thead><tbody>\n");
    for (name, c) in cols {
        let interval = match (c["mean"].as_f64(), c["se"].as_f64()) {
            (Some(m), Some(se)) => {
                let (lo, hi) = (m - 1.96 * se, m + 1.96 * se);
                format!("[{}, {}]", short_number(&format!("{lo}"), lo), short_number(&format!("{hi}"), hi))
            }
            _ => "-".to_string(),
        };
        let q = &c["quantiles"];
        let _ = writeln!(
            s,
            "<tr><td><code>{}</code></td>{}<td class=\"num\">{}</td>{}{}{}{}{}{}{}{}</tr>",
            escape(name),
            num_cell(&c["mean"]),
            escape(&interval),
            num_cell(&c["sd"]),
            num_cell(&q["2.5%"]),
            num_cell(&q["50%"]),
            num_cell(&q["97.5%"]),
            num_cell(&c["min"]),
            num_cell(&c["max"]),
            num_cell(&c["count"]),
            num_cell(&c["missing"]),
        );
    }
    s.push_str("</tbody></table></div>\n");
    s
}

/// Simulated means against what theory predicts, with the kind of each prediction and the verdict.
fn comparison_html(cmp: &serde_json::Value) -> String {
    let Some(rows) = cmp.as_array().filter(|r| !r.is_empty()) else {
        return "<h3>Simulated against predicted</h3>\n<p>No prediction applies to this scenario (see the notes of the run).</p>\n".into();
    };
    let mut s = String::from(
        "<h3 id=\"comparison\">Simulated against predicted</h3>\n<div class=\"wide\"><table><thead><tr><th>quantity</th><th>simulated mean</th><th>95% interval</th><th>predicted</th><th>kind</th><th>verdict</th><th>source</th></tr></thead><tbody>\n",
    );
    for r in rows {
        let interval = match r["interval"].as_array() {
            Some(a) if a.len() == 2 => compact(&r["interval"]),
            _ => "-".to_string(),
        };
        let _ = writeln!(
            s,
            "<tr><td><code>{}</code></td>{}<td class=\"num\">{}</td>{}<td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(&compact(&r["quantity"])),
            num_cell(&r["simulated"]),
            escape(&interval),
            num_cell(&r["predicted"]),
            escape(&compact(&r["kind"])),
            escape(&compact(&r["verdict"])),
            escape(&compact(&r["source"])),
        );
    }
    s.push_str("</tbody></table></div>\n");
    s
}

/// design's conclusion: per statistic the cheapest design that reaches the target power, or
/// that none does (then the design with the highest power).
fn conclusion_html(j: &serde_json::Value) -> String {
    let Some(each) = j["cheapest_reaching_target"].as_array().filter(|a| !a.is_empty()) else { return String::new() };
    let target = j["target"].as_f64().map_or("the target".to_string(), |t| short_number(&format!("{t}"), t));
    let level =
        j["level"].as_f64().map_or(String::new(), |l| format!(" at level {}", short_number(&format!("{l}"), l)));
    let rows = j["rows"].as_array().cloned().unwrap_or_default();
    let mut s = format!(
        "<h3 id=\"conclusion\">Conclusion</h3>\n<p>The cheapest design that reaches power {target}{level}, per statistic:</p>\n<ul class=\"conclusion\">\n"
    );
    for c in each {
        let stat = compact(&c["statistic"]);
        let line = match c["design"].as_str() {
            Some(design) => format!("{stat}: {design} (cost {}, power {})", compact(&c["cost"]), sig3(&c["power"])),
            None => {
                let best = rows
                    .iter()
                    .filter(|r| r["statistic"] == c["statistic"])
                    .max_by(|a, b| a["power"].as_f64().unwrap_or(0.0).total_cmp(&b["power"].as_f64().unwrap_or(0.0)));
                match best {
                    Some(b) => format!(
                        "{stat}: no design reaches power {target}; the highest is {} with {} (95% [{}, {}]), cost {}",
                        compact(&b["design"]),
                        sig3(&b["power"]),
                        sig3(&b["low_95"]),
                        sig3(&b["high_95"]),
                        compact(&b["cost"])
                    ),
                    None => format!("{stat}: no design reaches power {target}"),
                }
            }
        };
        let _ = writeln!(s, "<li>{}</li>", escape(&line));
    }
    s.push_str("</ul>\n");
    s
}

/// How many runs each engine took and why: `{requested, runs: {engine: n}, reasons: {engine: why}}`.
fn tally_text(e: &serde_json::Value) -> String {
    let runs = e["runs"].as_object();
    let total: u64 = runs.into_iter().flatten().filter_map(|(_, n)| n.as_u64()).sum();
    let parts: Vec<String> = runs
        .into_iter()
        .flatten()
        .map(|(engine, n)| {
            let why = e["reasons"][engine].as_str().map_or(String::new(), |r| format!(" ({r})"));
            format!("{engine} for {} of {total} runs{why}", compact(n))
        })
        .collect();
    let requested = e["requested"].as_str().map_or(String::new(), |r| format!("--engine {r}: "));
    format!("{requested}{}", parts.join("; "))
}

/// The Engine section: the engine and why, with compare's tally per hypothesis and
/// design's per design (null and alternative).
fn engine_html(j: Option<&serde_json::Value>, fallback: &str) -> String {
    let mut s = String::new();
    let Some(j) = j else {
        return format!("<p>{}</p>\n", escape(if fallback.is_empty() { "Not recorded." } else { fallback }));
    };
    if let Some(hyps) = j["hypotheses"].as_array().filter(|h| h.iter().any(|h| h.get("engine").is_some())) {
        s.push_str("<table class=\"engines\"><thead><tr><th>hypothesis</th><th>file</th><th>engine runs (and why)</th></tr></thead><tbody>\n");
        for h in hyps {
            let label = compact(&h["name"]);
            let file = h["file"].as_str().unwrap_or_default();
            let name = match h["title"].as_str() {
                Some(n) if n != label => format!("{label}: {n}"),
                _ => label,
            };
            let _ = writeln!(
                s,
                "<tr><td>{}</td><td><code>{}</code></td><td>{}</td></tr>",
                escape(&name),
                escape(file),
                escape(&tally_text(&h["engine"]))
            );
        }
        s.push_str("</tbody></table>\n");
    }
    if let Some(designs) = j["engines"].as_array().filter(|d| !d.is_empty()) {
        let named = |key: &str| {
            let file = j[key].as_str().unwrap_or_default();
            match j[format!("{key}_title")].as_str() {
                Some(n) => format!("{key}: {} (<code>{}</code>)", escape(n), escape(file)),
                None => format!("{key}: <code>{}</code>", escape(file)),
            }
        };
        let _ = writeln!(s, "<p>Hypotheses: {}; {}.</p>", named("null"), named("alternative"));
        s.push_str("<table class=\"engines\"><thead><tr><th>design</th><th>null datasets</th><th>alternative datasets</th></tr></thead><tbody>\n");
        for d in designs {
            let _ = writeln!(
                s,
                "<tr><td>{}</td><td>{}</td><td>{}</td></tr>",
                escape(&compact(&d["design"])),
                escape(&tally_text(&d["null"])),
                escape(&tally_text(&d["alternative"]))
            );
        }
        s.push_str("</tbody></table>\n");
    }
    // test.json names the null it compared against, with the engine that made it.
    if let Some(engine) = j["null"]["engine"].as_str() {
        let name = j["null"]["scenario_name"].as_str().map_or(String::new(), |n| format!(" of \"{n}\""));
        let reason = j["null"]["engine_reason"].as_str().unwrap_or_default();
        let _ = writeln!(
            s,
            "<p>{}</p>",
            escape(&format!(
                "The null distribution{name} (in {}) was made by the {engine} engine: {reason}. This command only compares.",
                compact(&j["null"]["dir"])
            ))
        );
        return s;
    }
    if s.is_empty() {
        let engine = engine_text(j).unwrap_or_else(|| fallback.to_string());
        s = format!("<p>{}</p>\n", escape(if engine.is_empty() { "Not recorded." } else { &engine }));
    } else {
        s = format!("<p>{}</p>\n{s}", escape(fallback));
    }
    s
}

/// Why simulate's SFS figure has no predicted line, when it has none: the prediction's note
/// on the SFS, else that no prediction of the SFS applies.
fn no_sfs_prediction(j: &serde_json::Value) -> Option<String> {
    let predicted = j["comparison"]
        .as_array()
        .into_iter()
        .flatten()
        .any(|r| r["quantity"].as_str().is_some_and(|q| q.starts_with("xi_")) && r["predicted"].is_number());
    if predicted {
        return None;
    }
    let note = j["prediction"]["notes"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|n| n.as_str())
        .find(|n| n.contains("SFS"))
        .map(String::from);
    Some(format!(
        "No predicted SFS is drawn: {}",
        note.unwrap_or_else(|| "no prediction of the SFS applies to this scenario".to_string())
    ))
}

fn is_manifest(p: &Path) -> bool {
    p.file_name().is_some_and(|n| n == crate::report::output::MANIFEST)
}

fn read_json(p: &Path) -> anyhow::Result<serde_json::Value> {
    let text = fs::read_to_string(p).with_context(|| format!("cannot read {}", p.display()))?;
    serde_json::from_str(&text).with_context(|| format!("cannot parse {}", p.display()))
}

/// The files of `dir` and of its subdirectories one level down (as `figures/`).
fn list_files(dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for e in fs::read_dir(dir).with_context(|| format!("cannot list {}", dir.display()))? {
        let p = e?.path();
        let name = p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        if name.starts_with('.') {
            continue;
        }
        if p.is_dir() {
            if name == "vcf" {
                continue;
            }
            for f in fs::read_dir(&p).with_context(|| format!("cannot list {}", p.display()))? {
                let f = f?.path();
                if f.is_file() {
                    out.push(f);
                }
            }
        } else {
            out.push(p);
        }
    }
    Ok(out)
}

fn relative(dir: &Path, p: &Path) -> String {
    p.strip_prefix(dir).unwrap_or(p).display().to_string()
}

fn shell_words(words: &[String]) -> String {
    let quote = |w: &String| {
        if !w.is_empty() && w.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c)) {
            w.clone()
        } else {
            format!("'{}'", w.replace('\'', "'\\''"))
        }
    };
    words.iter().map(quote).collect::<Vec<_>>().join(" ")
}

/// The settings of a run, readable: from the run record each flag once by its name
/// (`--replicates`), the seed(s), the versions on one line, then the other top-level values
/// of the JSON that repeat neither a flag nor an input file (lists of numbers paired with
/// the statistics they belong to).
fn settings_rows(j: &serde_json::Value) -> Vec<(String, String)> {
    let mut rows = Vec::new();
    let Some(top) = j.as_object() else { return rows };
    let run = top.get("run").and_then(|r| r.as_object());
    let settings = run.and_then(|r| r.get("settings")).and_then(|s| s.as_object());
    let inputs: Vec<String> = run
        .and_then(|r| r.get("inputs"))
        .and_then(|i| i.as_array())
        .map(|a| a.iter().filter_map(|i| i["path"].as_str().map(String::from)).collect())
        .unwrap_or_default();
    let command = run.and_then(|r| r.get("command")).and_then(|c| c.as_str()).unwrap_or_default();
    if let Some(seed) = run.and_then(|r| r.get("seed")).or_else(|| top.get("seed")) {
        rows.push(("seed".to_string(), seed_text(seed)));
    }
    for (flag, v) in settings.into_iter().flatten() {
        let text = if command == "compare" && flag == "adjust" {
            adjust_text(j, v)
        } else {
            match v {
                serde_json::Value::Null => "not given (default)".to_string(),
                serde_json::Value::Bool(true) => "on".to_string(),
                serde_json::Value::Bool(false) => "off".to_string(),
                v => compact(v),
            }
        };
        let label = if command == "compare" && flag == "adjust" {
            "--adjust (model choice)".to_string()
        } else {
            format!("--{}", flag.replace('_', "-"))
        };
        rows.push((label, text));
    }
    // Top-level values that only repeat a flag under another name.
    let alias = |k: &str| match k {
        "null_replicates" => Some("replicates"),
        "simulations_per_hypothesis" => Some("simulations"),
        _ => None,
    };
    let statistics: Vec<String> = top
        .get("statistics")
        .and_then(|s| s.as_array())
        .map(|a| a.iter().filter_map(|x| x.as_str().map(String::from)).collect())
        .unwrap_or_default();
    for (k, v) in top {
        if matches!(k.as_str(), "run" | "seed" | "seeds" | "provenance" | "notes" | "warnings" | "engine" | "engines")
            || settings.is_some_and(|st| st.contains_key(k) || alias(k).is_some_and(|a| st.contains_key(a)))
        {
            continue;
        }
        let label = match k.as_str() {
            "forests" => "forests (replicates that ended without an MRCA)".to_string(),
            k => k.replace('_', " "),
        };
        match v {
            serde_json::Value::String(s) if inputs.contains(s) => {}
            serde_json::Value::Object(m) if m.values().all(|x| scalar(x).is_some()) && !m.is_empty() => {
                let items: Vec<String> =
                    m.iter().map(|(k2, v2)| format!("{} {}", k2.replace('_', " "), compact(v2))).collect();
                rows.push((label, items.join(", ")));
            }
            serde_json::Value::Array(a) if !a.is_empty() && a.iter().all(|x| x.is_number()) => {
                // Unnamed numbers are one per statistic where the lengths agree.
                let items: Vec<String> = if a.len() == statistics.len() && k != "statistics" {
                    statistics.iter().zip(a).map(|(n, x)| format!("{n} {}", compact(x))).collect()
                } else {
                    a.iter().map(compact).collect()
                };
                rows.push((label, items.join(", ")));
            }
            serde_json::Value::Array(a) if !a.is_empty() && a.len() <= 40 && a.iter().all(|x| x.is_string()) => {
                rows.push((label, a.iter().filter_map(scalar).collect::<Vec<_>>().join(", ")));
            }
            v => {
                if let Some(s) = scalar(v).filter(|_| !v.is_null()) {
                    rows.push((label, if v.is_number() { compact(v) } else { s }));
                }
            }
        }
    }
    if let Some(p) = top.get("provenance").and_then(|p| p.as_object()) {
        let versions: Vec<String> = p
            .iter()
            .filter(|(k, _)| *k == "seedline")
            .chain(p.iter().filter(|(k, _)| !matches!(k.as_str(), "generator" | "seedline")))
            .filter_map(|(k, v)| scalar(v).map(|v| format!("{k} {v}")))
            .collect();
        rows.push(("versions".to_string(), versions.join(", ")));
        if let Some(g) = p.get("generator").and_then(scalar) {
            rows.push(("random streams".to_string(), g));
        }
    } else if let Some(v) = run.and_then(|r| r.get("seedline")).and_then(scalar) {
        rows.push(("versions".to_string(), format!("seedline {v}")));
    }
    rows
}

/// The seed(s) of a run: one number, none, or one per named part, each with the stream key
/// derived from it where the record gives one (a number or a decimal string).
fn seed_text(seed: &serde_json::Value) -> String {
    match seed {
        serde_json::Value::Null => "none (nothing drawn at random)".to_string(),
        serde_json::Value::Array(each) => each
            .iter()
            .map(|e| {
                let name = scalar(&e["name"]).unwrap_or_default();
                let seed = scalar(&e["seed"]).unwrap_or_default();
                match scalar(&e["stream"]).filter(|_| !e["stream"].is_null()) {
                    Some(stream) => format!("{name}: {seed} (stream key {stream})"),
                    None => format!("{name}: {seed}"),
                }
            })
            .collect::<Vec<_>>()
            .join("; "),
        v => scalar(v).unwrap_or_default(),
    }
}

/// compare's `--adjust` concerns the model probabilities only: parameters are adjusted by
/// local-linear regression whatever it says.
fn adjust_text(j: &serde_json::Value, v: &serde_json::Value) -> String {
    let choice = match v.as_str() {
        Some("none") => "none (rejection shares)".to_string(),
        _ => compact(v),
    };
    let flags: Vec<bool> = j["hypotheses"]
        .as_array()
        .into_iter()
        .flatten()
        .flat_map(|h| h["estimation"]["parameters"].as_array().into_iter().flatten())
        .filter_map(|p| p["regression"].as_bool())
        .collect();
    let parameters = if flags.iter().all(|r| *r) {
        "local-linear regression adjustment"
    } else {
        "local-linear regression adjustment where it could be fitted (the others: the weighted rejection sample; see posterior.tsv)"
    };
    format!("model-choice adjustment: {choice}; parameters: {parameters}")
}

fn scalar(v: &serde_json::Value) -> Option<String> {
    match v {
        serde_json::Value::String(s) => Some(s.clone()),
        serde_json::Value::Number(n) => Some(n.to_string()),
        serde_json::Value::Bool(b) => Some(b.to_string()),
        serde_json::Value::Null => Some("-".to_string()),
        _ => None,
    }
}

fn engine_text(j: &serde_json::Value) -> Option<String> {
    let e = j.get("engine")?;
    match e {
        serde_json::Value::String(s) => Some(s.clone()),
        serde_json::Value::Object(m) => {
            let kind = m.get("kind").and_then(scalar).unwrap_or_default();
            let reason = m.get("reason").and_then(scalar).unwrap_or_default();
            Some(format!("{kind}: {reason}").trim_start_matches(": ").to_string())
        }
        _ => None,
    }
}

fn notes_of(j: &serde_json::Value) -> Vec<String> {
    let mut out = Vec::new();
    // simulate keeps the notes of its prediction inside `prediction`.
    for (key, list) in [("notes", &j["notes"]), ("notes", &j["prediction"]["notes"]), ("warnings", &j["warnings"])] {
        for n in list.as_array().into_iter().flatten() {
            let text = n.as_str().map(String::from).or_else(|| n.get("message").and_then(scalar));
            if let Some(t) = text.filter(|t| !out.iter().any(|o: &String| o == t)) {
                out.push(if key == "warnings" { format!("warning: {t}") } else { t });
            }
        }
    }
    out
}

fn table_html(dir: &Path, p: &Path) -> anyhow::Result<String> {
    let name = relative(dir, p);
    let text = fs::read_to_string(p).with_context(|| format!("cannot read {}", p.display()))?;
    let mut lines = text.lines();
    let Some(head) = lines.next() else { return Ok(String::new()) };
    let rows: Vec<&str> = lines.collect();
    let file_name = p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    if LISTED_ONLY.contains(&file_name.as_str()) {
        return Ok(format!(
            "<h3>{}</h3>\n<p>{} rows of columns <code>{}</code> (one per replicate or draw; in the file).</p>\n",
            escape(&name),
            rows.len(),
            escape(&head.replace('\t', " "))
        ));
    }
    let mut s = format!("<h3>{}</h3>\n<div class=\"wide\"><table><thead><tr>", escape(&name));
    for h in head.split('\t') {
        let _ = write!(s, "<th>{}</th>", escape(h));
    }
    s.push_str("</tr></thead><tbody>\n");
    for r in rows.iter().take(MAX_ROWS) {
        s.push_str("<tr>");
        for c in r.split('\t') {
            match c.parse::<f64>() {
                Ok(x) => {
                    let _ = write!(s, "<td class=\"num\">{}</td>", escape(&short_number(c, x)));
                }
                Err(_) => {
                    let _ = write!(s, "<td>{}</td>", escape(c));
                }
            }
        }
        s.push_str("</tr>\n");
    }
    s.push_str("</tbody></table></div>\n");
    if rows.len() > MAX_ROWS {
        let _ =
            writeln!(s, "<p>First {MAX_ROWS} of {} rows; all are in <code>{}</code>.</p>", rows.len(), escape(&name));
    }
    Ok(s)
}

/// A number as read on screen: six significant digits (the file keeps every digit).
fn short_number(text: &str, x: f64) -> String {
    if !text.contains('.') || !x.is_finite() || x == 0.0 {
        return text.to_string();
    }
    let decimals = (5 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') { s.trim_end_matches('0').trim_end_matches('.').to_string() } else { s }
}

/// An SVG document made ready to sit inside HTML: the XML declaration dropped.
fn inline_svg(svg: &str) -> &str {
    let s = svg.trim_start();
    match (s.starts_with("<?xml"), s.find("?>")) {
        (true, Some(i)) => s[i + 2..].trim_start(),
        _ => s,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escape_covers_the_five_special_characters() {
        assert_eq!(escape(r#"<a href="x">'&'</a>"#), "&lt;a href=&quot;x&quot;&gt;&#39;&amp;&#39;&lt;/a&gt;");
    }

    #[test]
    fn numbers_are_shown_to_six_significant_digits() {
        let cases =
            [("0.051639777949432225", "0.0516398"), ("2959.25854806106", "2959.26"), ("12", "12"), ("1.5", "1.5")];
        for (text, want) in cases {
            assert_eq!(short_number(text, text.parse().unwrap()), want, "{text}");
        }
    }

    #[test]
    fn settings_come_from_the_run_record_once_each_with_flag_names() {
        // Seeds as compare and design write them: the file's seed and the derived stream key,
        // a decimal string (too large for every JSON reader's numbers) or a number.
        let j: serde_json::Value = serde_json::from_str(
            r#"{"run": {"seedline": "9.9.9", "command": "compare", "inputs": [{"role": "hypothesis", "path": "h.yaml", "bytes": 3, "crc32": "352441c2"}],
                "seed": [{"name": "h-a", "seed": 31, "stream": "15517599431202433770"}, {"name": "h-b", "seed": 7, "stream": 12}],
                "settings": {"simulations": 200, "adjust": "none", "statistics": null, "vcf": true}},
               "simulations_per_hypothesis": 200, "hypothesis": "h.yaml", "statistics": ["pi", "tajima_d"],
               "observed_values": [1.5, -0.25], "provenance": {"rand": "0.10.4", "seedline": "9.9.9", "generator": "ChaCha8"}}"#,
        )
        .unwrap();
        let rows = settings_rows(&j);
        let get = |k: &str| rows.iter().filter(|r| r.0 == k).map(|r| r.1.clone()).collect::<Vec<_>>();
        assert_eq!(get("seed"), ["h-a: 31 (stream key 15517599431202433770); h-b: 7 (stream key 12)"]);
        assert_eq!(get("--simulations"), ["200"]);
        assert_eq!(get("--statistics"), ["not given (default)"]);
        assert_eq!(get("--vcf"), ["on"]);
        assert_eq!(
            get("--adjust (model choice)"),
            ["model-choice adjustment: none (rejection shares); parameters: local-linear regression adjustment"]
        );
        assert_eq!(get("observed values"), ["pi 1.5, tajima_d -0.25"]);
        assert_eq!(get("versions"), ["seedline 9.9.9, rand 0.10.4"]);
        assert!(rows.iter().all(|r| !r.0.starts_with("run.") && !r.0.starts_with("provenance")), "{rows:?}");
        assert!(get("simulations per hypothesis").is_empty() && get("hypothesis").is_empty(), "{rows:?}");
    }

    #[test]
    fn report_holds_command_settings_tables_figures_and_cautions() {
        let dir = std::env::temp_dir().join(format!("seedline-html-{}", std::process::id()));
        let _ = fs::remove_dir_all(&dir);
        fs::create_dir_all(dir.join("figures")).unwrap();
        fs::write(dir.join("test.tsv"), "statistic\tp_value\npi\t0.04\n").unwrap();
        fs::write(dir.join("figures/pi.svg"), "<?xml version=\"1.0\"?>\n<svg width=\"10\" height=\"10\"></svg>")
            .unwrap();
        let input = dir.with_extension("input.yaml");
        fs::write(&input, "abc").unwrap();
        // The input table comes from the run record, as the command writes it.
        let run = crate::report::record::RunRecord::new("test").input("observed", &input).unwrap();
        let run = run.with_seed(crate::report::record::Seeds::One(5));
        let mut json: serde_json::Value = serde_json::from_str(
            r#"{"seed": 5, "settings": {"replicates": 100}, "notes": ["a <note>"], "engine": {"kind": "exact", "reason": "small N"}}"#,
        )
        .unwrap();
        json["run"] = serde_json::to_value(run).unwrap();
        fs::write(dir.join("test.json"), json.to_string()).unwrap();
        let argv: Vec<String> =
            vec!["seedline".into(), "test".into(), "obs dir/observed.json".into(), input.display().to_string()];
        let page = render_report(&dir, Path::new("runs/test"), "test", &argv).unwrap();
        assert!(page.starts_with("<!DOCTYPE html>"));
        assert!(page.contains("<pre>seedline test &#39;obs dir/observed.json&#39; "));
        // CRC-32 of "abc" (the check value of the IEEE polynomial, RFC 1952 / zlib).
        assert!(page.contains("<td class=\"num\">3</td><td><code>352441c2</code></td>"), "{page}");
        assert!(page.contains("<th>settings</th><td>replicates 100</td>"), "{page}");
        assert!(page.contains("<th>seed</th><td>5</td>"));
        assert!(page.contains("<td class=\"num\">0.04</td>"));
        assert!(page.contains("output directory <code>runs/test</code>"));
        assert!(page.contains("<figure>\n<svg width=\"10\""), "the XML declaration is dropped");
        assert!(page.contains("exact: small N"));
        assert!(page.contains("<li>a &lt;note&gt;</li>"));
        assert!(page.contains("not the probability that the null hypothesis is true"));
        assert!(!page.contains("<script"), "the page needs no script");
        let _ = fs::remove_dir_all(&dir);
        let _ = fs::remove_file(&input);
    }
}
