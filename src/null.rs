//! Null distributions in bulk: many replicates of a scenario's statistics, streamed to disk
//! in chunks, resumable, splittable into shards and mergeable.
//!
//! A run in `DIR` writes `null.json` (the manifest: scenario, seed, replicates, shard,
//! chunk size, columns) and `chunk_000000.tsv`, `chunk_000001.tsv`, ... Each chunk holds
//! `chunk` consecutive replicates of the shard, one row each: the columns of
//! `replicates.tsv` (see [`crate::report::replicate_columns`]) followed by the summed SFS
//! `xi_1..xi_{n-1}`. A chunk is written to a temporary name and renamed when complete, so
//! the directory only ever holds complete chunks under their final names; a rerun of the
//! same command skips every complete chunk (resume) and refuses a directory made with other
//! settings. Replicate i always uses the stream of (seed, i): `--shard I/K` runs the
//! replicates with i mod K == I, and [`merge`] of the K shards gives the same `null.tsv`,
//! byte for byte, as the merge of one unsharded run.

use crate::batch::{self, BatchConfig, Keep};
use crate::engine::{Engine, EngineChoice, EngineKind, Scratch};
use crate::mutation::Count;
use crate::report::{StreamFile, replicate_columns, replicate_values, write_atomic};
use crate::scenario::Scenario;
use anyhow::{Context, Result, bail, ensure};
use serde::{Deserialize, Serialize};
use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The manifest `null.json` of a null run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// seedline version.
    pub seedline: String,
    /// Random generator.
    pub generator: String,
    /// The validated scenario (after `--like`), as JSON.
    pub scenario: serde_json::Value,
    /// Master seed.
    pub seed: u64,
    /// Total replicates B over all shards.
    pub replicates: u64,
    /// This shard's index I.
    pub shard: u64,
    /// Number of shards K.
    pub shards: u64,
    /// Replicates per chunk file.
    pub chunk: u64,
    /// Mutation count: `poisson` or `fixed S`.
    pub mutations: String,
    /// Column names of every row.
    pub columns: Vec<String>,
    /// The engine that made the rows (runs older than this field were exact).
    #[serde(default = "exact_engine")]
    pub engine: EngineKind,
    /// Why that engine, in words.
    #[serde(default)]
    pub engine_reason: String,
}

fn exact_engine() -> EngineKind {
    EngineKind::Exact
}

/// A directory holds a null run made with another engine: resuming it would mix two nulls.
#[derive(Debug, thiserror::Error)]
#[error(
    "{} holds a null run made with the {was} engine, and this run would use the {now} engine: \
     rerun with --engine {was}, or use another --out", dir.display()
)]
pub struct EngineMismatch {
    /// The directory.
    pub dir: PathBuf,
    /// The engine of the rows already there.
    pub was: EngineKind,
    /// The engine this run resolved to.
    pub now: EngineKind,
}

/// A directory holds a null run made with other settings: resuming it would mix two nulls.
#[derive(Debug, thiserror::Error)]
#[error("{} holds a null run with other settings (scenario, seed, replicates, shard, chunk or mutations differ): use another --out", dir.display())]
pub struct SettingsMismatch {
    /// The directory.
    pub dir: PathBuf,
}

/// Settings of a null run.
#[derive(Debug, Clone, Copy)]
pub struct NullConfig {
    /// Total replicates B.
    pub replicates: u64,
    /// This shard I of K.
    pub shard: (u64, u64),
    /// Replicates per chunk.
    pub chunk: u64,
    /// Poisson mutations or a fixed number.
    pub count: Count,
    /// Stop after this many new chunks (for time-limited slots); the rest is done by a rerun.
    pub max_new_chunks: Option<u64>,
    /// The engine asked for (`--engine`); the one that runs is part of the settings.
    pub engine: EngineChoice,
}

/// What a run did.
#[derive(Debug, Clone, Serialize)]
pub struct NullReport {
    /// Chunks found complete and skipped.
    pub resumed_chunks: u64,
    /// Chunks written now.
    pub written_chunks: u64,
    /// Chunks of the shard in all.
    pub total_chunks: u64,
    /// Replicates of this shard.
    pub shard_replicates: u64,
    /// The engine that ran and why.
    pub engine: crate::engine::EngineDecision,
}

/// Parses `I/K`.
pub fn parse_shard(s: &str) -> Result<(u64, u64)> {
    let (i, k) = s.split_once('/').with_context(|| format!("--shard {s}: expected I/K, e.g. 0/4"))?;
    let (i, k): (u64, u64) = (i.trim().parse()?, k.trim().parse()?);
    ensure!(k >= 1 && i < k, "--shard {s}: needs K >= 1 and 0 <= I < K");
    Ok((i, k))
}

fn chunk_name(c: u64) -> String {
    format!("chunk_{c:06}.tsv")
}

/// Runs (or resumes) a null run of `scenario` in `dir`. `progress(done)` is called with the
/// number of replicates of the shard completed so far.
pub fn run(
    scenario: &Scenario,
    cfg: NullConfig,
    batch_config: BatchConfig,
    dir: &Path,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<NullReport> {
    ensure!(
        scenario.mutation().is_some(),
        "a null distribution needs a mutation model: add `mutation:` to the scenario"
    );
    ensure!(cfg.chunk >= 1, "--chunk must be at least 1");
    ensure!(
        scenario.recombination().is_none() || cfg.count == Count::Poisson,
        "a fixed number of mutations is not implemented with recombination: drop `recombination:` or the fixed count"
    );
    let engine = Engine::new(scenario, cfg.engine)?;
    let n = scenario.samples().len();
    let mut columns = replicate_columns(scenario);
    columns.extend((1..n).map(|i| format!("xi_{i}")));
    let manifest = Manifest {
        seedline: env!("CARGO_PKG_VERSION").to_string(),
        generator: batch::GENERATOR.to_string(),
        scenario: serde_json::to_value(scenario.normalized())?,
        seed: scenario.seed(),
        replicates: cfg.replicates,
        shard: cfg.shard.0,
        shards: cfg.shard.1,
        chunk: cfg.chunk,
        mutations: match cfg.count {
            Count::Poisson => "poisson".to_string(),
            Count::Fixed(s) => format!("fixed {s}"),
        },
        columns: columns.clone(),
        engine: engine.kind(),
        engine_reason: engine.decision().reason.clone(),
    };
    fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
    let mpath = dir.join("null.json");
    if mpath.exists() {
        let old: Manifest = serde_json::from_str(&fs::read_to_string(&mpath)?)
            .with_context(|| format!("reading {}", mpath.display()))?;
        if old.engine != manifest.engine {
            return Err(EngineMismatch { dir: dir.to_path_buf(), was: old.engine, now: manifest.engine }.into());
        }
        // The reason is information only: `auto` and `exact` may both run the exact engine.
        if (Manifest { engine_reason: manifest.engine_reason.clone(), ..old }) != manifest {
            return Err(SettingsMismatch { dir: dir.to_path_buf() }.into());
        }
    } else {
        write_atomic(&mpath, serde_json::to_string_pretty(&manifest)?.as_bytes())?;
    }
    // Temporary files of an interrupted run are incomplete by construction.
    for e in fs::read_dir(dir)? {
        let name = e?.file_name().to_string_lossy().into_owned();
        if name.starts_with(".chunk_") && name.ends_with(".tmp") {
            let _ = fs::remove_file(dir.join(name));
        }
    }
    let (shard, shards) = cfg.shard;
    let reps: Vec<u64> = (0..cfg.replicates).filter(|i| i % shards == shard).collect();
    let key = batch::master_key(scenario.seed());
    let labels: Vec<String> = scenario.samples().iter().map(|s| s.label.clone()).collect();
    let n_demes = scenario.demes().len();
    let total_chunks = (reps.len() as u64).div_ceil(cfg.chunk);
    let mut report = NullReport {
        resumed_chunks: 0,
        written_chunks: 0,
        total_chunks,
        shard_replicates: reps.len() as u64,
        engine: engine.decision().clone(),
    };
    let done = std::sync::atomic::AtomicU64::new(0);
    for (c, chunk) in reps.chunks(cfg.chunk as usize).enumerate() {
        let path = dir.join(chunk_name(c as u64));
        if path.exists() {
            report.resumed_chunks += 1;
            done.fetch_add(chunk.len() as u64, std::sync::atomic::Ordering::Relaxed);
            progress(done.load(std::sync::atomic::Ordering::Relaxed));
            continue;
        }
        if cfg.max_new_chunks.is_some_and(|m| report.written_chunks >= m) {
            break;
        }
        let mut f = StreamFile::create(&path)?;
        writeln!(f.out, "{}", columns.join("\t"))?;
        batch::run(
            scenario,
            chunk,
            batch_config,
            |scratch, _, rep, _| {
                let r = replicate_with(&engine, scratch, &key, rep, cfg.count, &labels);
                progress(done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1);
                r
            },
            |rep, loci| {
                let loci = loci?;
                let mut values = replicate_values(rep, &loci, n_demes);
                let mut xi = vec![0u64; n.saturating_sub(1)];
                for st in loci.iter().filter_map(|l| l.stats.as_ref()) {
                    for (a, b) in xi.iter_mut().zip(&st.sfs) {
                        *a += b;
                    }
                }
                values.extend(xi.iter().map(|x| Some(*x as f64)));
                let fields: Vec<String> = values.iter().map(|x| crate::report::tsv_value(*x)).collect();
                writeln!(f.out, "{}", fields.join("\t"))?;
                Ok(())
            },
        )?;
        f.finish().with_context(|| format!("writing {}", path.display()))?;
        report.written_chunks += 1;
    }
    Ok(report)
}

/// One replicate with the chosen mutation count (Poisson: as `simulate`).
fn replicate_with(
    engine: &Engine,
    scratch: &mut Scratch,
    key: &[u8; 32],
    rep: u64,
    count: Count,
    labels: &[String],
) -> Result<Vec<batch::LocusOutcome>, crate::mutation::Error> {
    match count {
        Count::Poisson => batch::simulate_replicate(engine, scratch, key, rep, Keep::default(), labels),
        Count::Fixed(s) => {
            // The fixed count applies to the whole replicate: one locus only (no recombination).
            let sc = engine.scenario();
            let mut rng = batch::locus_rng(key, rep, 0);
            let g = engine.simulate_tree(scratch, &mut rng);
            let demes: Vec<u32> = sc.samples().iter().map(|x| x.deme as u32).collect();
            let model = sc.mutation().expect("checked by run");
            let m = crate::mutation::place_with(&g, model, Count::Fixed(s), demes, &mut rng)?;
            let stats = crate::stats::SampleStats::from_haplotypes(&m.haplotypes);
            Ok(vec![batch::LocusOutcome::of_genealogy(&g, Some(stats))])
        }
    }
}

/// Rows of a null distribution: column names and one row of values per replicate, sorted
/// by replicate.
#[derive(Debug, Clone)]
pub struct NullTable {
    /// Column names (the first is `replicate`).
    pub columns: Vec<String>,
    /// Rows as text fields, sorted by replicate.
    pub rows: Vec<(u64, Vec<String>)>,
    /// The manifest of the (first) run.
    pub manifest: Manifest,
}

impl NullTable {
    /// The values of one column (`None` for empty cells).
    pub fn column(&self, name: &str) -> Option<Vec<Option<f64>>> {
        let j = self.columns.iter().position(|c| c == name)?;
        Some(self.rows.iter().map(|(_, r)| r[j].parse().ok()).collect())
    }
}

fn read_rows(path: &Path, columns: &[String], rows: &mut Vec<(u64, Vec<String>)>) -> Result<()> {
    let text = fs::read_to_string(path).with_context(|| format!("reading {}", path.display()))?;
    let mut lines = text.lines();
    let head: Vec<String> = lines.next().unwrap_or("").split('\t').map(String::from).collect();
    ensure!(head == columns, "{}: columns differ from the manifest's", path.display());
    for (i, line) in lines.enumerate() {
        let fields: Vec<String> = line.split('\t').map(String::from).collect();
        ensure!(
            fields.len() == columns.len(),
            "{}, line {}: {} fields, expected {}",
            path.display(),
            i + 2,
            fields.len(),
            columns.len()
        );
        let rep: u64 =
            fields[0].parse().with_context(|| format!("{}, line {}: column replicate", path.display(), i + 2))?;
        rows.push((rep, fields));
    }
    Ok(())
}

fn manifest_of(dir: &Path) -> Result<Manifest> {
    let p = dir.join("null.json");
    let text = fs::read_to_string(&p)
        .with_context(|| format!("{} is not a null run directory (no null.json)", dir.display()))?;
    serde_json::from_str(&text).with_context(|| format!("reading {}", p.display()))
}

/// Loads a null distribution from a run directory: its merged `null.tsv` when present,
/// otherwise its chunk files.
pub fn load(dir: &Path) -> Result<NullTable> {
    let manifest = manifest_of(dir)?;
    let mut rows = Vec::new();
    let merged = dir.join("null.tsv");
    if merged.exists() {
        read_rows(&merged, &manifest.columns, &mut rows)?;
    } else {
        for p in chunk_files(dir)? {
            read_rows(&p, &manifest.columns, &mut rows)?;
        }
    }
    rows.sort_by_key(|r| r.0);
    Ok(NullTable { columns: manifest.columns.clone(), rows, manifest })
}

fn chunk_files(dir: &Path) -> Result<Vec<PathBuf>> {
    let mut v: Vec<PathBuf> = fs::read_dir(dir)?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.file_name().is_some_and(|n| n.to_string_lossy().starts_with("chunk_")))
        .collect();
    v.sort();
    Ok(v)
}

/// Merges shard directories into `out/null.tsv` (rows sorted by replicate) and
/// `out/null.json`. The shards must come from the same scenario, seed, replicates and
/// mutation setting, and together hold every replicate exactly once.
pub fn merge(dirs: &[PathBuf], out: &Path) -> Result<u64> {
    ensure!(!dirs.is_empty(), "merge needs at least one run directory");
    let first = manifest_of(&dirs[0])?;
    let mut rows = Vec::new();
    for d in dirs {
        let m = manifest_of(d)?;
        let same = m.scenario == first.scenario
            && m.seed == first.seed
            && m.replicates == first.replicates
            && m.mutations == first.mutations
            && m.columns == first.columns
            && m.engine == first.engine;
        ensure!(
            same,
            "{} was made with other settings than {}: shards must share scenario, seed, replicates, mutations and engine",
            d.display(),
            dirs[0].display()
        );
        let t = load(d)?;
        rows.extend(t.rows);
    }
    rows.sort_by_key(|r| r.0);
    for w in rows.windows(2) {
        ensure!(w[0].0 != w[1].0, "replicate {} appears twice: the same shard was given twice", w[0].0);
    }
    let have = rows.len() as u64;
    if have != first.replicates {
        bail!(
            "the runs hold {have} of {} replicates: some shard is missing or unfinished (rerun it to resume)",
            first.replicates
        );
    }
    fs::create_dir_all(out)?;
    let mut text = first.columns.join("\t");
    text.push('\n');
    for (_, r) in &rows {
        text.push_str(&r.join("\t"));
        text.push('\n');
    }
    write_atomic(&out.join("null.tsv"), text.as_bytes())?;
    let merged = Manifest { shard: 0, shards: 1, chunk: first.replicates.max(1), ..first };
    write_atomic(&out.join("null.json"), serde_json::to_string_pretty(&merged)?.as_bytes())?;
    Ok(have)
}

/// Observed statistics as read from `observed.json` (one reader for the whole tool).
pub use crate::abc::{ObservedData, load_observed};

/// Replaces the scenario's samples by the observed sampling design (`--like`): one sample
/// group per (deme, time) with the observed number of sequences.
pub fn like(raw: &mut crate::scenario::RawScenario, observed: &ObservedData, origin: &str) -> Result<()> {
    ensure!(!observed.design.is_empty(), "{origin}: the observed data have no sampling design");
    let loc = serde_saphyr::Location::UNKNOWN;
    raw.samples = observed
        .design
        .iter()
        .filter(|(_, _, n)| *n > 0)
        .map(|(deme, t, n)| {
            serde_saphyr::Spanned::new(
                crate::scenario::raw::RawSample {
                    deme: deme.clone(),
                    count: Some(u64::from(*n)),
                    generations_ago: Some(*t as f64),
                    block: None,
                    from: None,
                },
                loc,
                loc,
            )
        })
        .collect();
    Ok(())
}

/// One statistic of the observed data against its null distribution.
#[derive(Debug, Clone, Serialize)]
pub struct StatTest {
    /// Statistic name.
    pub statistic: String,
    /// Observed value.
    pub observed: Option<f64>,
    /// Null replicates where the statistic is defined.
    pub null_replicates: usize,
    /// Null mean.
    pub null_mean: Option<f64>,
    /// Null 2.5% quantile.
    pub null_low: Option<f64>,
    /// Null 97.5% quantile.
    pub null_high: Option<f64>,
    /// Two-sided empirical p-value.
    pub p_value: Option<f64>,
}

/// Two-sided empirical p-value of `x` among the **sorted** null values:
///
/// ```text
/// p = min(1, 2 min(r_low + 1, r_high + 1) / (B + 1)),
/// r_low = #{null <= x},  r_high = #{null >= x}
/// ```
/// Each one-sided value (r + 1)/(B + 1) counts the observation as one more draw from the
/// null (Davison & Hinkley 1997, Bootstrap Methods, §4.2); doubling the smaller is the usual
/// two-sided form.
pub fn p_two_sided(null_sorted: &[f64], x: f64) -> f64 {
    let b = null_sorted.len() as f64;
    let le = null_sorted.partition_point(|&v| v <= x) as f64;
    let ge = (null_sorted.len() - null_sorted.partition_point(|&v| v < x)) as f64;
    (2.0 * ((le + 1.0) / (b + 1.0)).min((ge + 1.0) / (b + 1.0))).min(1.0)
}

/// Upper one-sided empirical p-value (#{null >= x} + 1)/(B + 1) of the sorted null values
/// (Davison & Hinkley 1997).
pub fn p_upper(null_sorted: &[f64], x: f64) -> f64 {
    let ge = (null_sorted.len() - null_sorted.partition_point(|&v| v < x)) as f64;
    (ge + 1.0) / (null_sorted.len() as f64 + 1.0)
}

/// [`p_two_sided`] for unsorted null values.
pub fn empirical_p(obs: f64, null: &[f64]) -> f64 {
    let mut v = null.to_vec();
    v.sort_by(f64::total_cmp);
    p_two_sided(&v, obs)
}

/// The SFS goodness-of-fit statistic: a chi-square distance of a spectrum to the null's
/// mean spectrum m, G = Σ_i (x_i - m_i)² / m_i over classes with m_i > 0. Its p-value
/// comes from the same statistic computed for every null replicate (one-sided, large G
/// is a poor fit): (#{G_null >= G_obs} + 1)/(B + 1).
pub fn sfs_distance(x: &[f64], mean: &[f64]) -> f64 {
    x.iter().zip(mean).filter(|(_, m)| **m > 0.0).map(|(a, m)| (a - m).powi(2) / m).sum()
}

/// Folded spectrum η_i = ξ_i + ξ_{n-i} (i < n/2), η_{n/2} = ξ_{n/2}, from ξ_1..ξ_{n-1}.
pub fn fold(xi: &[f64]) -> Vec<f64> {
    let n = xi.len() + 1;
    (1..=n / 2).map(|i| if 2 * i == n { xi[i - 1] } else { xi[i - 1] + xi[n - i - 1] }).collect()
}

/// The observed data against a null distribution: every statistic, and the SFS fit.
#[derive(Debug, Clone, Serialize)]
pub struct TestReport {
    /// One line per statistic present in both.
    pub statistics: Vec<StatTest>,
    /// SFS goodness of fit: which spectrum (`unfolded`/`folded`), G observed, p-value.
    pub sfs_fit: Option<(String, f64, f64)>,
    /// Null replicates.
    pub replicates: usize,
    /// Notes.
    pub notes: Vec<String>,
}

/// Tests the observed statistics against the null table.
pub fn test(observed: &ObservedData, null: &NullTable) -> Result<TestReport> {
    let mut notes = Vec::new();
    let mut statistics = Vec::new();
    for (name, obs) in observed.names.iter().zip(&observed.values) {
        let Some(col) = null.column(name) else {
            notes.push(format!("{name}: not in the null distribution (different demes?)"));
            continue;
        };
        let mut xs: Vec<f64> = col.into_iter().flatten().collect();
        xs.sort_by(f64::total_cmp);
        let summary = crate::report::ColumnSummary::new(&xs.iter().map(|x| Some(*x)).collect::<Vec<_>>());
        statistics.push(StatTest {
            statistic: name.clone(),
            observed: *obs,
            null_replicates: xs.len(),
            null_mean: summary.mean,
            null_low: summary.quantiles.map(|q| q[0]),
            null_high: summary.quantiles.map(|q| q[4]),
            p_value: obs.filter(|_| !xs.is_empty()).map(|o| p_two_sided(&xs, o)),
        });
    }
    let xi_cols: Vec<Vec<f64>> = (1..)
        .map_while(|i| null.column(&format!("xi_{i}")))
        .map(|c| c.into_iter().map(|x| x.unwrap_or(0.0)).collect())
        .collect();
    let b = null.rows.len();
    let mut sfs_fit = None;
    if !xi_cols.is_empty() && b > 0 {
        let rows: Vec<Vec<f64>> = (0..b).map(|r| xi_cols.iter().map(|c| c[r]).collect()).collect();
        let (kind, obs, rows) = match (&observed.sfs, &observed.eta) {
            (Some(xi), _) if xi.len() == xi_cols.len() => ("unfolded", xi.clone(), rows),
            (_, Some(eta)) if eta.len() == xi_cols.len().div_ceil(2) => {
                ("folded", eta.clone(), rows.iter().map(|r| fold(r)).collect())
            }
            _ => {
                notes.push(format!(
                    "SFS fit skipped: the observed spectrum has another sample size than the null ({} sequences); use `null --like`",
                    xi_cols.len() + 1
                ));
                ("", Vec::new(), Vec::new())
            }
        };
        if !obs.is_empty() {
            let k = obs.len();
            let mean: Vec<f64> = (0..k).map(|i| rows.iter().map(|r| r[i]).sum::<f64>() / b as f64).collect();
            let g_obs = sfs_distance(&obs, &mean);
            let mut g_null: Vec<f64> = rows.iter().map(|r| sfs_distance(r, &mean)).collect();
            g_null.sort_by(f64::total_cmp);
            sfs_fit = Some((kind.to_string(), g_obs, p_upper(&g_null, g_obs)));
        }
    }
    Ok(TestReport { statistics, sfs_fit, replicates: b, notes })
}

/// Renders the test table for the terminal.
pub fn render_test(r: &TestReport) -> String {
    use crate::report::fmt_num;
    let f = |x: Option<f64>| x.map_or("-".to_string(), fmt_num);
    let mut s =
        format!("observed against {} null replicates (two-sided empirical p-values, (r+1)/(B+1))\n", r.replicates);
    s.push_str(&format!(
        "{:<20} {:>12} {:>12} {:>12} {:>12} {:>9}\n",
        "statistic", "observed", "null mean", "null 2.5%", "null 97.5%", "p"
    ));
    for t in &r.statistics {
        s.push_str(&format!(
            "{:<20} {:>12} {:>12} {:>12} {:>12} {:>9}\n",
            t.statistic,
            f(t.observed),
            f(t.null_mean),
            f(t.null_low),
            f(t.null_high),
            f(t.p_value)
        ));
    }
    if let Some((kind, g, p)) = &r.sfs_fit {
        s.push_str(&format!(
            "SFS fit ({kind} spectrum, chi-square distance to the null mean): G = {}, p = {}\n",
            fmt_num(*g),
            fmt_num(*p)
        ));
    }
    for n in &r.notes {
        s.push_str(&format!("note: {n}\n"));
    }
    s.push_str("A p-value measures surprise under this one null model (neutral, haploid, one non-recombining locus unless stated); it is not the probability that the hypothesis is true.\n");
    s
}

/// Writes `test.tsv`, `test.json` and one SVG histogram per statistic into `dir`.
pub fn write_test(r: &TestReport, null: &NullTable, dir: &Path) -> Result<()> {
    fs::create_dir_all(dir.join("figures"))?;
    let mut tsv =
        String::from("statistic\tobserved\tnull_replicates\tnull_mean\tnull_low_2.5\tnull_high_97.5\tp_value\n");
    for t in &r.statistics {
        let v = crate::report::tsv_value;
        tsv.push_str(&format!(
            "{}\t{}\t{}\t{}\t{}\t{}\t{}\n",
            t.statistic,
            v(t.observed),
            t.null_replicates,
            v(t.null_mean),
            v(t.null_low),
            v(t.null_high),
            v(t.p_value)
        ));
        if let Some(col) = null.column(&t.statistic) {
            let xs: Vec<f64> = col.into_iter().flatten().collect();
            if !xs.is_empty() {
                let svg = crate::report::figures::null_histogram(&t.statistic, &xs, t.observed)?;
                write_atomic(&dir.join("figures").join(format!("{}.svg", t.statistic)), svg.as_bytes())?;
            }
        }
    }
    write_atomic(&dir.join("test.tsv"), tsv.as_bytes())?;
    write_atomic(&dir.join("test.json"), serde_json::to_string_pretty(r)?.as_bytes())?;
    Ok(())
}
