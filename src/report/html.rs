//! `report.html`: one self-contained page per run (inline SVG and CSS, no script, nothing
//! fetched), built from the files the command has just written into its output directory:
//! the command line, the settings of its JSON, the engine and why, every table (TSV), every
//! figure (SVG), the notes and warnings, and what the results do and do not say.
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
    body.push_str("<nav><a href=\"#inputs\">Inputs and settings</a> &middot; <a href=\"#engine\">Engine</a> &middot; <a href=\"#tables\">Tables</a> &middot; <a href=\"#figures\">Figures</a> &middot; <a href=\"#notes\">Notes and cautions</a></nav>\n");

    let _ = write!(
        body,
        "<section id=\"inputs\"><h2>Inputs and settings</h2>\n<p>Command line:</p><pre>{}</pre>\n",
        escape(&shell_words(&line))
    );
    // The run record's inputs where the run wrote one, else the arguments that name files.
    let recorded = json.as_ref().and_then(|j| j["run"]["inputs"].as_array()).map(|a| {
        a.iter()
            .map(|i| {
                let path = scalar(&i["path"]).unwrap_or_default();
                (path, i["bytes"].as_u64().unwrap_or(0), scalar(&i["crc32"]).unwrap_or_default())
            })
            .collect::<Vec<_>>()
    });
    let inputs = recorded.unwrap_or_else(|| input_files(&argv[1.min(argv.len())..], out));
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

    let engine = json.as_ref().and_then(engine_text).unwrap_or_else(|| text.engine.to_string());
    let _ = write!(
        body,
        "<section id=\"engine\"><h2>Engine</h2>\n<p>{}</p></section>\n",
        escape(if engine.is_empty() { "Not recorded." } else { &engine })
    );

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
        let _ = write!(
            body,
            "<figure>\n{}\n<figcaption>{}</figcaption></figure>\n",
            inline_svg(&svg),
            escape(&relative(dir, p))
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
th{background:#f0f0f0}td.num{text-align:right;font-variant-numeric:tabular-nums}\
figure{margin:1em 0;border:1px solid #ddd;padding:.5em;display:inline-block;max-width:100%}\
figure svg{max-width:100%;height:auto;display:block}.wide{overflow-x:auto}figcaption{color:#555;font-size:.85em}";

/// The arguments that name existing files (not the output directory): path, size, CRC-32.
fn input_files(args: &[String], out: &Path) -> Vec<(String, u64, String)> {
    let mut seen = Vec::new();
    for a in args {
        let p = Path::new(a);
        if a.starts_with('-') || p == out || !p.is_file() || seen.iter().any(|(s, _, _)| s == a) {
            continue;
        }
        if let Ok((bytes, crc)) = crate::report::record::crc32_file(p) {
            seen.push((a.clone(), bytes, crc));
        }
    }
    seen
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

/// Top-level scalars of the run's JSON, and those of its `settings` and `provenance` objects.
fn settings_rows(j: &serde_json::Value) -> Vec<(String, String)> {
    let mut rows = Vec::new();
    let Some(top) = j.as_object() else { return rows };
    for (k, v) in top.iter().filter(|(k, _)| !matches!(k.as_str(), "notes" | "warnings")) {
        match v {
            // The run record: its seed(s) and settings (its inputs have their own table).
            serde_json::Value::Object(m) if k == "run" => {
                let seed = match m.get("seed") {
                    Some(serde_json::Value::Array(each)) => Some(
                        each.iter()
                            .map(|e| format!("{} = {}", scalar(&e["name"]).unwrap_or_default(), e["seed"]))
                            .collect::<Vec<_>>()
                            .join(", "),
                    ),
                    Some(s) => scalar(s),
                    None => None,
                };
                rows.extend(seed.map(|s| ("run.seed".to_string(), s)));
                for (k2, v2) in m.get("settings").and_then(|s| s.as_object()).into_iter().flatten() {
                    let text = scalar(v2)
                        .or_else(|| v2.as_array().map(|a| a.iter().filter_map(scalar).collect::<Vec<_>>().join(", ")));
                    rows.extend(text.map(|t| (format!("run.settings.{k2}"), t)));
                }
            }
            serde_json::Value::Object(m) if matches!(k.as_str(), "settings" | "provenance" | "costs") => {
                for (k2, v2) in m {
                    if let Some(s) = scalar(v2) {
                        rows.push((format!("{k}.{k2}"), s));
                    }
                }
            }
            v => {
                if let Some(s) = scalar(v) {
                    rows.push((k.clone(), s));
                } else if let Some(a) = v.as_array().filter(|a| a.len() <= 12 && a.iter().all(|x| scalar(x).is_some()))
                {
                    let items: Vec<String> = a.iter().filter_map(scalar).collect();
                    rows.push((k.clone(), items.join(", ")));
                }
            }
        }
    }
    rows
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
    for key in ["notes", "warnings"] {
        for n in j.get(key).and_then(|v| v.as_array()).into_iter().flatten() {
            let text = n.as_str().map(String::from).or_else(|| n.get("message").and_then(scalar));
            if let Some(t) = text {
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
    fn report_holds_command_settings_tables_figures_and_cautions() {
        let dir = std::env::temp_dir().join(format!("seedline-html-{}", std::process::id()));
        let _ = fs::remove_dir_all(&dir);
        fs::create_dir_all(dir.join("figures")).unwrap();
        fs::write(dir.join("test.tsv"), "statistic\tp_value\npi\t0.04\n").unwrap();
        fs::write(
            dir.join("test.json"),
            r#"{"seed": 5, "settings": {"replicates": 100}, "notes": ["a <note>"], "engine": {"kind": "exact", "reason": "small N"}}"#,
        )
        .unwrap();
        fs::write(dir.join("figures/pi.svg"), "<?xml version=\"1.0\"?>\n<svg width=\"10\" height=\"10\"></svg>")
            .unwrap();
        let input = dir.with_extension("input.yaml");
        fs::write(&input, "abc").unwrap();
        let argv: Vec<String> =
            vec!["seedline".into(), "test".into(), "obs dir/observed.json".into(), input.display().to_string()];
        let page = render_report(&dir, Path::new("runs/test"), "test", &argv).unwrap();
        assert!(page.starts_with("<!DOCTYPE html>"));
        assert!(page.contains("<pre>seedline test &#39;obs dir/observed.json&#39; "));
        // CRC-32 of "abc" (the check value of the IEEE polynomial, RFC 1952 / zlib).
        assert!(page.contains("<td class=\"num\">3</td><td><code>352441c2</code></td>"), "{page}");
        assert!(page.contains("<th>settings.replicates</th><td>100</td>"));
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
