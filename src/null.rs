//! Null distributions in bulk: many replicates of a scenario's statistics, streamed to disk
//! in chunks, resumable, splittable into shards and mergeable.
//!
//! A run in `DIR` writes `null.json` (the settings: scenario, seed, replicates, shard, chunk
//! size, columns), `chunk_000000.tsv`, `chunk_000001.tsv`, ... and the chunk manifest
//! `chunks.tsv` (`file rows crc32`, one line appended per finished chunk). Each chunk holds
//! `chunk` consecutive replicates of the shard, one row each: the columns of
//! `replicates.tsv` (see [`crate::report::replicate_columns`]) followed by the summed SFS
//! `xi_1..xi_{n-1}`. A chunk is written to a temporary name and renamed when complete; a
//! rerun of the same command checks every chunk against its row count and CRC-32 in
//! `chunks.tsv`, redoes (and reports) any that is missing from it, truncated or altered,
//! and refuses a directory made with other settings. Replicate i always uses the stream of
//! (seed, i): `--shard I/K` runs the replicates with i mod K == I, and [`merge`] of the K
//! shards gives the same `null.tsv`, byte for byte, as the merge of one unsharded run.
//! The chunks are planned lazily: a run of 10^18 replicates costs nothing before its first
//! chunk.
//!
//! With several loci each chunk also has `loci_000000.tsv`, ... (the columns of `loci.tsv`
//! of `simulate`, one row per locus of each replicate), written and listed in `chunks.tsv`
//! before its chunk, so that a complete chunk always has its per-locus file; [`merge`] joins
//! them into `loci.tsv`. [`test`] reads them as a stream to give per-locus p-values
//! ([`LocusTest`]).

use crate::batch::{self, BatchConfig, Keep};
use crate::engine::{Engine, EngineChoice, EngineKind, Scratch};
use crate::mutation::Count;
use crate::report::record::{RunRecord, Seeds};
use crate::report::{StreamFile, replicate_columns, replicate_values, write_atomic};
use crate::scenario::Scenario;
use anyhow::{Context, Result, bail, ensure};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
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
    /// The run that began the null: version, command, seed, inputs with checksums, settings
    /// (a merged null keeps the record of its first shard: the shards share every setting).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub run: Option<RunRecord>,
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

impl Manifest {
    /// Names of the settings that differ from `other`'s.
    pub fn differences(&self, other: &Manifest) -> Vec<&'static str> {
        let mut d = Vec::new();
        let mut check = |same: bool, name| {
            if !same {
                d.push(name)
            }
        };
        check(self.seedline == other.seedline, "seedline version");
        check(self.generator == other.generator, "generator");
        check(self.scenario == other.scenario, "scenario");
        check(self.seed == other.seed, "seed");
        check(self.replicates == other.replicates, "replicates");
        check((self.shard, self.shards) == (other.shard, other.shards), "shard");
        check(self.chunk == other.chunk, "chunk");
        check(self.mutations == other.mutations, "mutations");
        check(self.columns == other.columns, "columns");
        check(self.engine == other.engine, "engine");
        d
    }

    /// The chunk layout of the run (replicates, shard, chunk size), for reading its files.
    fn layout(&self) -> NullConfig {
        NullConfig {
            replicates: self.replicates,
            shard: (self.shard, self.shards),
            chunk: self.chunk,
            count: Count::Poisson,
            max_new_chunks: None,
            engine: EngineChoice::Auto,
        }
    }

    /// Sample size of the null's scenario (number of `xi_` columns + 1).
    pub fn sample_size(&self) -> usize {
        self.columns.iter().filter(|c| c.starts_with("xi_")).count() + 1
    }

    /// The sampling design of the null's scenario: (deme, generations ago) → sequences.
    pub fn design(&self) -> BTreeMap<(String, u64), u64> {
        let mut out = BTreeMap::new();
        for s in self.scenario.get("samples").and_then(|v| v.as_array()).into_iter().flatten() {
            let deme = s.get("deme").and_then(|v| v.as_str()).unwrap_or("").to_string();
            let t = s.get("generations_ago").and_then(|v| v.as_f64()).unwrap_or(0.0) as u64;
            match (s.get("count").and_then(|v| v.as_u64()), s.get("block")) {
                (Some(c), _) => *out.entry((deme, t)).or_insert(0) += c,
                (None, Some(b)) => {
                    let from = b.get("from").and_then(|v| v.as_f64()).unwrap_or(0.0) as u64;
                    let to = b.get("to").and_then(|v| v.as_f64()).unwrap_or(0.0) as u64;
                    for t in from..=to.min(from.saturating_add(1 << 24)) {
                        *out.entry((deme.clone(), t)).or_insert(0) += 1;
                    }
                }
                _ => {}
            }
        }
        out
    }
}

/// A directory holds a null run made with other settings: resuming it would mix two nulls.
#[derive(Debug, thiserror::Error)]
#[error("{} holds a null run with other settings ({differs} differ): use another --out, or rerun with the settings in its null.json", dir.display())]
pub struct SettingsMismatch {
    /// The directory.
    pub dir: PathBuf,
    /// The settings that differ.
    pub differs: String,
}

/// Why a null run or a null distribution was refused.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum NullError {
    /// `--replicates 0`.
    #[error("--replicates 0: a null distribution needs at least 1 replicate")]
    NoReplicates,
    /// `--chunk 0`.
    #[error("--chunk 0: a chunk holds at least 1 replicate")]
    ZeroChunk,
    /// The scenario has no mutation model.
    #[error("a null distribution needs a mutation model: add `mutation: {{rate: ..., sites: ...}}` to the scenario")]
    NoMutationModel,
    /// A fixed number of mutations with recombination.
    #[error(
        "a fixed number of mutations (--condition-on-s) is not implemented with recombination: drop `recombination:` or --condition-on-s"
    )]
    FixedWithRecombination,
    /// A cell of a null table is not a number.
    #[error(
        "{file}, line {line}, column {column}: `{value}` is not allowed: a finite number (or an empty cell where undefined) is needed"
    )]
    Cell {
        /// File.
        file: String,
        /// Line (1-based, the header is line 1).
        line: usize,
        /// Column name.
        column: String,
        /// The text of the cell.
        value: String,
    },
    /// A null table's layout is wrong (header, field count, replicate index).
    #[error("{file}, line {line}: {message}")]
    Layout {
        /// File.
        file: String,
        /// Line.
        line: usize,
        /// What is wrong.
        message: String,
    },
    /// The chunks of a run are incomplete, damaged or duplicated.
    #[error("{}: {message}", dir.display())]
    Chunks {
        /// Run directory.
        dir: PathBuf,
        /// What is wrong and what to do.
        message: String,
    },
    /// The observed data and the null were made for different settings.
    #[error("{0}")]
    Mismatch(Box<Mismatch>),
}

/// The observed data and a null made for other settings ([`NullError::Mismatch`]).
#[derive(Debug, thiserror::Error)]
#[error("the null in {} was not made for {observed_file}: {setting} differs (observed {observed}, null {null}); {hint}", null_dir.display())]
pub struct Mismatch {
    /// Observed-statistics file.
    pub observed_file: String,
    /// Null run directory.
    pub null_dir: PathBuf,
    /// The setting that differs.
    pub setting: &'static str,
    /// Its value in the observed data.
    pub observed: String,
    /// Its value in the null.
    pub null: String,
    /// What to do.
    pub hint: String,
}

impl NullError {
    /// Whether the error is the user's input being wrong (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        true
    }
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

impl NullConfig {
    /// Replicates of this shard: #{i < B : i mod K == I}.
    pub fn shard_replicates(&self) -> u64 {
        let (i, k) = self.shard;
        if i >= self.replicates || k == 0 { 0 } else { (self.replicates - 1 - i) / k + 1 }
    }

    /// Chunks of this shard.
    pub fn total_chunks(&self) -> u64 {
        self.shard_replicates().div_ceil(self.chunk.max(1))
    }

    /// Replicate indices of chunk `c`: shard-local positions c·chunk.. mapped to i = I + K·j.
    fn chunk_range(&self, c: u64) -> (u64, u64) {
        let from = c.saturating_mul(self.chunk);
        let to = from.saturating_add(self.chunk).min(self.shard_replicates());
        (from, to)
    }

    fn replicate(&self, j: u64) -> u64 {
        self.shard.0 + self.shard.1 * j
    }

    /// Checks the settings that do not depend on the scenario.
    pub fn check(&self) -> Result<(), NullError> {
        if self.replicates == 0 {
            return Err(NullError::NoReplicates);
        }
        if self.chunk == 0 {
            return Err(NullError::ZeroChunk);
        }
        Ok(())
    }
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
    /// Replicates of this shard in complete chunks now (fewer with `--max-chunks`).
    pub done_replicates: u64,
    /// Chunks found damaged (or not in the chunk manifest) and redone, with the reason.
    pub redone: Vec<String>,
    /// The engine that ran and why.
    pub engine: crate::engine::EngineDecision,
}

/// Parses `I/K`.
pub fn parse_shard(s: &str) -> Result<(u64, u64)> {
    let (i, k) = s.split_once('/').with_context(|| format!("--shard {s}: expected I/K, e.g. 0/4"))?;
    let parse = |x: &str| x.trim().parse::<u64>().with_context(|| format!("--shard {s}: `{x}` is not a whole number"));
    let (i, k) = (parse(i)?, parse(k)?);
    anyhow::ensure!(k >= 1 && i < k, "--shard {s}: needs K >= 1 and 0 <= I < K");
    Ok((i, k))
}

fn chunk_name(c: u64) -> String {
    format!("chunk_{c:06}.tsv")
}

fn loci_chunk_name(c: u64) -> String {
    format!("loci_{c:06}.tsv")
}

/// The chunk index of a chunk file name, `chunk_000012.tsv` → 12.
fn chunk_index(name: &str) -> Option<u64> {
    let digits = name.strip_prefix("chunk_")?.strip_suffix(".tsv")?;
    (digits.len() >= 6 && digits.bytes().all(|b| b.is_ascii_digit())).then(|| digits.parse().ok()).flatten()
}

/// The chunk manifest of a run directory.
pub const CHUNK_MANIFEST: &str = "chunks.tsv";

/// The files that identify a null run's contents for a run record: `null.json`, and the chunk
/// manifest (it lists every chunk's CRC-32, checked whenever the run is loaded, so the chunks
/// need not be read again) or the merged `null.tsv` and `loci.tsv`.
pub fn identifying_files(dir: &Path) -> Vec<PathBuf> {
    ["null.json", CHUNK_MANIFEST, "null.tsv", "loci.tsv"].iter().map(|f| dir.join(f)).filter(|p| p.is_file()).collect()
}

/// Rows and CRC-32 of each finished chunk, from the chunk manifest (a torn last line,
/// left by a kill, is ignored: its chunk is redone).
fn read_ledger(dir: &Path) -> BTreeMap<String, (u64, String)> {
    let mut out = BTreeMap::new();
    let Ok(text) = fs::read_to_string(dir.join(CHUNK_MANIFEST)) else { return out };
    for line in text.lines() {
        let f: Vec<&str> = line.split('\t').collect();
        if let [name, rows, crc] = f[..]
            && let Ok(rows) = rows.parse()
            && crc.len() == 8
        {
            out.insert(name.to_string(), (rows, crc.to_string()));
        }
    }
    out
}

/// Rows and CRC-32 of a chunk file's bytes.
fn chunk_facts(bytes: &[u8]) -> (u64, String) {
    let rows = bytes.iter().filter(|&&b| b == b'\n').count().saturating_sub(1) as u64;
    (rows, crate::report::output::crc32_hex(bytes))
}

/// Why a chunk on disk cannot be trusted, or `None` when it matches the chunk manifest.
fn chunk_problem(path: &Path, ledger: &BTreeMap<String, (u64, String)>, expected_rows: u64) -> Option<String> {
    let name = path.file_name()?.to_string_lossy().into_owned();
    let Ok(bytes) = fs::read(path) else { return Some(format!("{name} cannot be read")) };
    let (rows, crc) = chunk_facts(&bytes);
    match ledger.get(&name) {
        None => Some(format!("{name} is not in the chunk manifest ({CHUNK_MANIFEST}): it may be unfinished")),
        Some((r, c)) if *r != rows || *c != crc || rows != expected_rows => Some(format!(
            "{name} holds {rows} rows with CRC-32 {crc}, the chunk manifest says {r} rows with {c} ({expected_rows} expected)"
        )),
        Some(_) => None,
    }
}

/// Appends the rows and CRC-32 of a finished file, read from `contents` (its synced temporary
/// file), to the chunk manifest under the name of `path`, durably.
fn append_ledger(ledger_path: &Path, contents: &Path, path: &Path) -> Result<()> {
    let (rows, crc) = chunk_facts(&fs::read(contents).with_context(|| format!("cannot read {}", contents.display()))?);
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let mut ledger_file = fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(ledger_path)
        .with_context(|| format!("cannot open {} to append", ledger_path.display()))?;
    ledger_file
        .write_all(format!("{name}\t{rows}\t{crc}\n").as_bytes())
        .and_then(|_| ledger_file.sync_all())
        .with_context(|| format!("cannot append to {}", ledger_path.display()))
}

/// Checks that `dir` may receive a null run (see [`crate::report::output::claim`]): empty,
/// a null run (its `null.json`, chunks and chunk manifest are its own), or `force`.
pub fn claim_dir(dir: &Path, force: bool) -> Result<(), crate::report::output::OutputError> {
    let is_run = dir.join("null.json").is_file();
    let own = move |name: &str| {
        is_run
            && (name == "null.json"
                || name == CHUNK_MANIFEST
                || chunk_index(name).is_some()
                || chunk_index(&name.replacen("loci_", "chunk_", 1)).is_some()
                || ((name.starts_with(".chunk_") || name.starts_with(".loci_")) && name.ends_with(".tmp")))
    };
    crate::report::output::claim(dir, "null", force, &own).map(|_| ())
}

/// Runs (or resumes) a null run of `scenario` in `dir`. `progress(done)` is called with the
/// number of replicates of the shard completed so far. `record` goes into a new `null.json`
/// (its seed filled in); a resumed run keeps the record of the run that began it.
pub fn run(
    scenario: &Scenario,
    cfg: NullConfig,
    record: Option<&RunRecord>,
    batch_config: BatchConfig,
    dir: &Path,
    progress: &(dyn Fn(u64) + Sync),
) -> Result<NullReport> {
    cfg.check()?;
    if scenario.mutation().is_none() {
        return Err(NullError::NoMutationModel.into());
    }
    if scenario.recombination().is_some() && cfg.count != Count::Poisson {
        return Err(NullError::FixedWithRecombination.into());
    }
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
        run: record.map(|r| r.with_seed(Seeds::One(scenario.seed()))),
    };
    fs::create_dir_all(dir).with_context(|| format!("cannot create directory {}", dir.display()))?;
    let mpath = dir.join("null.json");
    if mpath.exists() {
        let old = manifest_of(dir)?;
        if old.engine != manifest.engine {
            return Err(EngineMismatch { dir: dir.to_path_buf(), was: old.engine, now: manifest.engine }.into());
        }
        // The reason and the record are information only: `auto` and `exact` may both run the
        // exact engine, and a resumed run may be started from another directory.
        if (Manifest { engine_reason: manifest.engine_reason.clone(), run: manifest.run.clone(), ..old.clone() })
            != manifest
        {
            let differs = old.differences(&manifest).join(", ");
            return Err(SettingsMismatch { dir: dir.to_path_buf(), differs }.into());
        }
    } else {
        write_atomic(&mpath, serde_json::to_string_pretty(&manifest)?.as_bytes())
            .with_context(|| format!("cannot write {}", mpath.display()))?;
    }
    // Temporary files of an interrupted run are incomplete by construction.
    for e in fs::read_dir(dir).with_context(|| format!("cannot list {}", dir.display()))? {
        let name = e?.file_name().to_string_lossy().into_owned();
        if (name.starts_with(".chunk_") || name.starts_with(".loci_")) && name.ends_with(".tmp") {
            let _ = fs::remove_file(dir.join(name));
        }
    }
    let ledger = read_ledger(dir);
    let key = batch::master_key(scenario.seed());
    let labels: Vec<String> = scenario.samples().iter().map(|s| s.name()).collect();
    let n_demes = scenario.demes().len();
    let total_chunks = cfg.total_chunks();
    let mut report = NullReport {
        resumed_chunks: 0,
        written_chunks: 0,
        total_chunks,
        shard_replicates: cfg.shard_replicates(),
        done_replicates: 0,
        redone: Vec::new(),
        engine: engine.decision().clone(),
    };
    let done = std::sync::atomic::AtomicU64::new(0);
    let ledger_path = dir.join(CHUNK_MANIFEST);
    for c in 0..total_chunks {
        let (from, to) = cfg.chunk_range(c);
        let path = dir.join(chunk_name(c));
        if path.exists() {
            let loci_path = dir.join(loci_chunk_name(c));
            let problem = chunk_problem(&path, &ledger, to - from).or_else(|| {
                (scenario.loci() > 1)
                    .then(|| chunk_problem(&loci_path, &ledger, (to - from) * scenario.loci()))
                    .flatten()
            });
            match problem {
                None => {
                    report.resumed_chunks += 1;
                    done.fetch_add(to - from, std::sync::atomic::Ordering::Relaxed);
                    progress(done.load(std::sync::atomic::Ordering::Relaxed));
                    continue;
                }
                Some(why) => {
                    report.redone.push(why);
                    fs::remove_file(&path).with_context(|| format!("cannot remove {}", path.display()))?;
                }
            }
        }
        if cfg.max_new_chunks.is_some_and(|m| report.written_chunks >= m) {
            break;
        }
        let mut f = StreamFile::create(&path).with_context(|| format!("cannot create {}", path.display()))?;
        writeln!(f.out, "{}", columns.join("\t")).with_context(|| format!("cannot write {}", path.display()))?;
        let loci_path = dir.join(loci_chunk_name(c));
        let mut lf = match scenario.loci() > 1 {
            true => {
                let mut lf =
                    StreamFile::create(&loci_path).with_context(|| format!("cannot create {}", loci_path.display()))?;
                writeln!(lf.out, "{}", crate::report::LOCI_COLUMNS.join("\t"))
                    .with_context(|| format!("cannot write {}", loci_path.display()))?;
                Some(lf)
            }
            false => None,
        };
        // Replicates are handed to the workers a slice at a time: a chunk may be huge.
        const SLICE: u64 = 1 << 16;
        let mut j = from;
        while j < to {
            let reps: Vec<u64> = (j..to.min(j + SLICE)).map(|j| cfg.replicate(j)).collect();
            j += reps.len() as u64;
            batch::run(
                scenario,
                &reps,
                batch_config,
                |scratch, _, rep, _| {
                    let r = replicate_with(&engine, scratch, &key, rep, cfg.count, &labels);
                    progress(done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1);
                    r
                },
                |rep, loci| {
                    let loci = loci.map_err(|e| anyhow::Error::new(e).context(format!("replicate {rep}")))?;
                    if let Some(lf) = lf.as_mut() {
                        for (j, l) in loci.iter().enumerate() {
                            let row = crate::report::locus_values(rep, j, l);
                            let fields: Vec<String> = row.iter().map(|x| crate::report::tsv_value(*x)).collect();
                            writeln!(lf.out, "{}", fields.join("\t"))
                                .with_context(|| format!("cannot write {}", loci_path.display()))?;
                        }
                    }
                    let mut values = replicate_values(rep, &loci, n_demes);
                    let mut xi = vec![0u64; n.saturating_sub(1)];
                    for st in loci.iter().filter_map(|l| l.stats.as_ref()) {
                        for (a, b) in xi.iter_mut().zip(&st.sfs) {
                            *a += b;
                        }
                    }
                    values.extend(xi.iter().map(|x| Some(*x as f64)));
                    let fields: Vec<String> = values.iter().map(|x| crate::report::tsv_value(*x)).collect();
                    writeln!(f.out, "{}", fields.join("\t"))
                        .with_context(|| format!("cannot write {}", path.display()))?;
                    Ok(())
                },
            )?;
        }
        // The per-locus file first: a chunk listed in the chunk manifest always has its loci.
        // Each file is listed before it is renamed into place: a kill in between leaves a
        // listed file that is absent (missing, redone by a rerun), never a finished file that
        // is not listed (which would look damaged).
        let finish = |mut file: crate::report::StreamFile, path: &Path| -> Result<()> {
            let tmp = file.sync().with_context(|| format!("cannot write {}", path.display()))?.to_path_buf();
            append_ledger(&ledger_path, &tmp, path)?;
            file.finish().with_context(|| format!("cannot write {}", path.display()))
        };
        if let Some(lf) = lf {
            finish(lf, &loci_path)?;
        }
        finish(f, &path)?;
        report.written_chunks += 1;
    }
    report.done_replicates = done.load(std::sync::atomic::Ordering::Relaxed);
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
            // S mutations over the whole replicate: the genealogies of every locus first, then
            // S split over the loci in proportion to their expected numbers of mutations
            // (multinomial, drawn from locus 0's stream), then each locus's share placed.
            let sc = engine.scenario();
            let demes: Vec<u32> = sc.samples().iter().map(|x| x.deme as u32).collect();
            let mut loci = Vec::new();
            for locus in 0..sc.loci() {
                let mut rng = batch::locus_rng(key, rep, locus);
                let g = engine.simulate_tree(scratch, &mut rng);
                loci.push((g, rng));
            }
            let shares = if loci.len() == 1 {
                vec![s]
            } else {
                let weights: Vec<f64> = (0..)
                    .zip(&loci)
                    .map(|(locus, (g, _))| {
                        crate::mutation::expected_count(g, &sc.locus_mutation(locus).expect("checked by run"))
                    })
                    .collect();
                crate::mutation::split_count(s, &weights, &mut loci[0].1)?
            };
            let mut out = Vec::with_capacity(loci.len());
            for (locus, ((g, mut rng), k)) in (0..).zip(loci.into_iter().zip(shares)) {
                let model = sc.locus_mutation(locus).expect("checked by run");
                let m = crate::mutation::place_with(&g, &model, Count::Fixed(k), demes.clone(), &mut rng)?;
                let stats = crate::stats::SampleStats::from_haplotypes(&m.haplotypes);
                out.push(batch::LocusOutcome::of_genealogy(&g, Some(stats)));
            }
            Ok(out)
        }
    }
}

/// Rows of a null distribution: column names and one row of values per replicate, sorted
/// by replicate. Every cell is empty or a finite number (checked when read).
#[derive(Debug, Clone)]
pub struct NullTable {
    /// Column names (the first is `replicate`).
    pub columns: Vec<String>,
    /// Rows as text fields, sorted by replicate.
    pub rows: Vec<(u64, Vec<String>)>,
    /// The manifest of the (first) run.
    pub manifest: Manifest,
    /// Files of per-locus rows (`loci.tsv` of a merged run, else `loci_*.tsv` of its
    /// complete chunks); empty with one locus.
    pub loci_files: Vec<PathBuf>,
    /// The run directory.
    pub dir: PathBuf,
}

impl NullTable {
    /// The values of one column (`None` for empty cells).
    pub fn column(&self, name: &str) -> Option<Vec<Option<f64>>> {
        let j = self.columns.iter().position(|c| c == name)?;
        Some(self.rows.iter().map(|(_, r)| r[j].parse().ok()).collect())
    }
}

/// Reads the rows of one null table (a chunk or a merged `null.tsv`) from its text, checking
/// the header against `columns`, the field count of every line, and every cell: the
/// replicate a whole number, the others empty or a finite number.
pub fn parse_table(text: &str, file: &str, columns: &[String]) -> Result<Vec<(u64, Vec<String>)>, NullError> {
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap_or("").split('\t').collect();
    if head != columns {
        return Err(NullError::Layout {
            file: file.to_string(),
            line: 1,
            message: format!(
                "the header differs from the columns in null.json ({} columns, expected {})",
                head.len(),
                columns.len()
            ),
        });
    }
    let mut rows = Vec::new();
    for (i, line) in lines.enumerate() {
        let line_no = i + 2;
        let fields: Vec<String> = line.split('\t').map(String::from).collect();
        if fields.len() != columns.len() {
            return Err(NullError::Layout {
                file: file.to_string(),
                line: line_no,
                message: format!("{} fields, expected {} (the columns of its header)", fields.len(), columns.len()),
            });
        }
        let cell = |j: usize| NullError::Cell {
            file: file.to_string(),
            line: line_no,
            column: columns[j].clone(),
            value: fields[j].clone(),
        };
        let rep: u64 = fields[0].parse().map_err(|_| cell(0))?;
        for (j, f) in fields.iter().enumerate().skip(1) {
            if !f.is_empty() && !f.parse::<f64>().is_ok_and(f64::is_finite) {
                return Err(cell(j));
            }
        }
        rows.push((rep, fields));
    }
    Ok(rows)
}

fn read_rows(path: &Path, columns: &[String], rows: &mut Vec<(u64, Vec<String>)>) -> Result<()> {
    let text = fs::read_to_string(path).with_context(|| format!("cannot read {}", path.display()))?;
    rows.extend(parse_table(&text, &path.display().to_string(), columns)?);
    Ok(())
}

fn manifest_of(dir: &Path) -> Result<Manifest, NullError> {
    let p = dir.join("null.json");
    let bad = |message: String| NullError::Chunks { dir: dir.to_path_buf(), message };
    let text = fs::read_to_string(&p).map_err(|e| {
        bad(format!("not a null run directory: cannot read its null.json ({e}); give the --out of `seedline null` or `seedline merge`"))
    })?;
    serde_json::from_str(&text).map_err(|e| bad(format!("null.json was not written by seedline: {e}")))
}

/// Loads a complete null distribution from a run directory: its merged `null.tsv` when
/// present, otherwise its chunk files, each checked against the chunk manifest. Refused:
/// a missing, unfinished, damaged, unlisted or duplicated chunk, a replicate missing or
/// given twice, a cell that is not a finite number.
pub fn load(dir: &Path) -> Result<NullTable> {
    let manifest = manifest_of(dir)?;
    let cfg = manifest.layout();
    let chunks_err = |message: String| NullError::Chunks { dir: dir.to_path_buf(), message };
    let mut rows = Vec::new();
    let merged = dir.join("null.tsv");
    let mut loci_files = Vec::new();
    if merged.exists() {
        read_rows(&merged, &manifest.columns, &mut rows)?;
        if dir.join("loci.tsv").exists() {
            loci_files.push(dir.join("loci.tsv"));
        }
    } else {
        let ledger = read_ledger(dir);
        let n_loci = null_layout(&manifest).len() as u64;
        let files = chunk_files(dir)?;
        let total = cfg.total_chunks();
        for p in &files {
            let name = p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
            let Some(c) = chunk_index(&name).filter(|&c| c < total) else {
                return Err(chunks_err(format!(
                    "{name} is not a chunk of this run (chunks are chunk_000000.tsv .. {}): remove it",
                    chunk_name(total.saturating_sub(1))
                ))
                .into());
            };
            let (from, to) = cfg.chunk_range(c);
            // Cells first (the most precise message), then the chunk against its manifest.
            read_rows(p, &manifest.columns, &mut rows)?;
            if let Some(why) = chunk_problem(p, &ledger, to - from) {
                return Err(chunks_err(format!(
                    "{why}: rerun the same `seedline null` command in this directory to redo it"
                ))
                .into());
            }
            if n_loci > 1 {
                let lp = dir.join(loci_chunk_name(c));
                if let Some(why) = chunk_problem(&lp, &ledger, (to - from) * n_loci) {
                    return Err(chunks_err(format!(
                        "{why}: rerun the same `seedline null` command in this directory to redo it"
                    ))
                    .into());
                }
                loci_files.push(lp);
            }
        }
        if (files.len() as u64) < total {
            let have: std::collections::BTreeSet<u64> =
                files.iter().filter_map(|p| chunk_index(&p.file_name()?.to_string_lossy())).collect();
            let missing: Vec<String> = (0..total).filter(|c| !have.contains(c)).take(3).map(chunk_name).collect();
            return Err(chunks_err(format!(
                "{} of {total} chunks are present (missing: {}{}): finish the run by rerunning the same `seedline null` command",
                files.len(),
                missing.join(", "),
                if total - (files.len() as u64) > 3 { ", ..." } else { "" }
            ))
            .into());
        }
    }
    rows.sort_by_key(|r| r.0);
    for w in rows.windows(2) {
        if w[0].0 == w[1].0 {
            return Err(
                chunks_err(format!("replicate {} appears twice: a chunk or shard is duplicated", w[0].0)).into()
            );
        }
    }
    let expected = if merged.exists() { manifest.replicates } else { cfg.shard_replicates() };
    if rows.len() as u64 != expected {
        return Err(chunks_err(format!("{} rows, expected {expected} replicates", rows.len())).into());
    }
    if let Some((rep, _)) = rows.iter().find(|(r, _)| !merged.exists() && r % cfg.shard.1 != cfg.shard.0) {
        return Err(
            chunks_err(format!("replicate {rep} does not belong to shard {}/{}", cfg.shard.0, cfg.shard.1)).into()
        );
    }
    Ok(NullTable { columns: manifest.columns.clone(), rows, manifest, loci_files, dir: dir.to_path_buf() })
}

fn chunk_files(dir: &Path) -> Result<Vec<PathBuf>> {
    let mut v: Vec<PathBuf> = fs::read_dir(dir)
        .with_context(|| format!("cannot list {}", dir.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.file_name().is_some_and(|n| n.to_string_lossy().starts_with("chunk_")))
        .collect();
    v.sort();
    Ok(v)
}

/// Merges shard directories into `out/null.tsv` (rows sorted by replicate) and
/// `out/null.json`. The shards must come from the same scenario, seed, replicates and
/// mutation setting, be complete, and together hold every replicate exactly once.
pub fn merge(dirs: &[PathBuf], out: &Path) -> Result<u64> {
    anyhow::ensure!(!dirs.is_empty(), "merge needs at least one run directory");
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
        if !same {
            let differs: Vec<&str> =
                m.differences(&first).into_iter().filter(|d| !["shard", "chunk"].contains(d)).collect();
            return Err(NullError::Chunks {
                dir: d.clone(),
                message: format!(
                    "made with other settings than {} ({} differ): shards must share scenario, seed, replicates, mutations and engine",
                    dirs[0].display(),
                    differs.join(", ")
                ),
            }
            .into());
        }
        let t = load(d)?;
        rows.extend(t.rows);
    }
    rows.sort_by_key(|r| r.0);
    // Errors name the directories given (`out` is a staging directory).
    let given = PathBuf::from(dirs.iter().map(|d| d.display().to_string()).collect::<Vec<_>>().join(" "));
    for w in rows.windows(2) {
        if w[0].0 == w[1].0 {
            return Err(NullError::Chunks {
                dir: given.clone(),
                message: format!("replicate {} appears twice: the same shard was given twice", w[0].0),
            }
            .into());
        }
    }
    let have = rows.len() as u64;
    if have != first.replicates {
        return Err(NullError::Chunks {
            dir: given,
            message: format!(
                "the runs hold {have} of {} replicates: some shard is missing (give every shard directory)",
                first.replicates
            ),
        }
        .into());
    }
    fs::create_dir_all(out).with_context(|| format!("cannot create directory {}", out.display()))?;
    let mut text = first.columns.join("\t");
    text.push('\n');
    for (_, r) in &rows {
        text.push_str(&r.join("\t"));
        text.push('\n');
    }
    let p = out.join("null.tsv");
    write_atomic(&p, text.as_bytes()).with_context(|| format!("cannot write {}", p.display()))?;
    let mut loci_rows: Vec<(u64, u64, String)> = Vec::new();
    for d in dirs {
        for p in load(d)?.loci_files {
            let text = fs::read_to_string(&p).with_context(|| format!("cannot read {}", p.display()))?;
            for (i, line) in text.lines().enumerate().skip(1) {
                let mut f = line.split('\t');
                let key = |x: Option<&str>| x.and_then(|v| v.parse::<u64>().ok());
                let (Some(rep), Some(locus)) = (key(f.next()), key(f.next())) else {
                    bail!("{}, line {}: replicate and locus must be whole numbers", p.display(), i + 1);
                };
                loci_rows.push((rep, locus, line.to_string()));
            }
        }
    }
    if !loci_rows.is_empty() {
        loci_rows.sort_by_key(|r| (r.0, r.1));
        let mut text = crate::report::LOCI_COLUMNS.join("\t");
        text.push('\n');
        for (_, _, r) in &loci_rows {
            text.push_str(r);
            text.push('\n');
        }
        let p = out.join("loci.tsv");
        write_atomic(&p, text.as_bytes()).with_context(|| format!("cannot write {}", p.display()))?;
    }
    let merged = Manifest { shard: 0, shards: 1, chunk: first.replicates.max(1), ..first };
    let p = out.join("null.json");
    write_atomic(&p, serde_json::to_string_pretty(&merged)?.as_bytes())
        .with_context(|| format!("cannot write {}", p.display()))?;
    Ok(have)
}

/// Observed statistics as read from `observed.json` (one reader for the whole tool).
pub use crate::abc::{ObservedData, load_observed};

/// Replaces the scenario's samples by the observed sampling design (`--like`): one sample
/// group per (deme, time) with the observed number of sequences; and, when the observed
/// file records loci, its loci by the observed ones: `loci` becomes the list of their
/// callable lengths (so `mutation.sites` is dropped). Recombination keeps the scenario's rate
/// per adjacent pair of sites within each locus.
pub fn like(raw: &mut crate::scenario::RawScenario, observed: &ObservedData, _origin: &str) -> Result<()> {
    anyhow::ensure!(
        !observed.design.is_empty(),
        "--like {}: the observed data have no sampling design (`design`, as written by `seedline observe`)",
        observed.origin
    );
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
    if let Some(lengths) = observed.layout() {
        // The same loci: their callable lengths become the per-locus site counts.
        raw.loci = Some(serde_saphyr::Spanned::new(
            crate::scenario::raw::RawLoci::Lengths(lengths.iter().map(|&x| x as f64).collect()),
            loc,
            loc,
        ));
        if let Some(m) = raw.mutation.as_mut() {
            m.value.sites = None;
        }
    }
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

/// One statistic of one locus against the same locus of every null replicate.
#[derive(Debug, Clone, Serialize)]
pub struct LocusTest {
    /// Locus number, from 1, in the order of `observed.json`.
    pub locus: usize,
    /// Contig.
    pub contig: String,
    /// 0-based start.
    pub start: u64,
    /// End (exclusive).
    pub end: u64,
    /// Callable sites.
    pub callable_sites: u64,
    /// Statistic name.
    pub statistic: String,
    /// Observed value at the locus.
    pub observed: Option<f64>,
    /// Null replicates where the statistic is defined at this locus.
    pub null_replicates: u64,
    /// Null mean at this locus.
    pub null_mean: Option<f64>,
    /// Two-sided empirical p-value ([`p_two_sided`]).
    pub p_value: Option<f64>,
    /// Benjamini–Hochberg adjusted p-value over the loci, for this statistic.
    pub q_value: Option<f64>,
}

/// Per-locus statistics tested locus by locus (the columns of `loci.tsv` that `observe`
/// also writes per locus).
pub const LOCUS_STATISTICS: [&str; 6] = ["segregating_sites", "pi", "theta_w", "tajima_d", "fay_wu_h", "haplotypes"];

/// Benjamini–Hochberg adjusted p-values ("q-values") of one family of tests:
///
/// ```text
/// q_(i) = min over j >= i of  min(1, m p_(j) / j)
/// ```
/// with p_(1) <= ... <= p_(m) the m defined p-values (`None` entries are left out and stay
/// `None`). Rejecting every test with q <= α keeps the false discovery rate at or below α
/// for independent tests. Source: Benjamini & Hochberg (1995), J. R. Stat. Soc. B 57:289.
pub fn benjamini_hochberg(p: &[Option<f64>]) -> Vec<Option<f64>> {
    let mut idx: Vec<usize> = (0..p.len()).filter(|&i| p[i].is_some()).collect();
    idx.sort_by(|&a, &b| p[a].unwrap_or(1.0).total_cmp(&p[b].unwrap_or(1.0)).then(a.cmp(&b)));
    let m = idx.len() as f64;
    let mut q = vec![None; p.len()];
    let mut running = 1.0f64;
    for (rank, &i) in idx.iter().enumerate().rev() {
        let v = (m * p[i].unwrap_or(1.0) / (rank + 1) as f64).min(1.0);
        running = running.min(v);
        q[i] = Some(running);
    }
    q
}

/// The observed loci are not the null's loci.
#[derive(Debug, thiserror::Error)]
#[error(
    "{observed}: the data have {observed_loci} loci but the null in {null} simulates {null_loci}: make the null with `null --like {observed}` so that it simulates the same loci"
)]
pub struct LayoutMismatch {
    /// Observed file.
    pub observed: String,
    /// Null directory.
    pub null: String,
    /// Loci of the data.
    pub observed_loci: usize,
    /// Loci of the null.
    pub null_loci: usize,
}

/// The per-locus site counts of the scenario in a manifest: `loci` as a list, or `loci`
/// copies of `mutation.sites`.
fn null_layout(m: &Manifest) -> Vec<u64> {
    let sc = &m.scenario;
    match sc.get("loci") {
        Some(serde_json::Value::Array(v)) => v.iter().map(|x| x.as_f64().unwrap_or(0.0) as u64).collect(),
        other => {
            let k = other.and_then(serde_json::Value::as_f64).unwrap_or(1.0) as usize;
            let sites = sc.get("mutation").and_then(|x| x.get("sites")).and_then(serde_json::Value::as_f64);
            vec![sites.unwrap_or(0.0) as u64; k]
        }
    }
}

/// Each observed locus against the same locus of the null replicates, streaming the null's
/// per-locus files; q-values by [`benjamini_hochberg`] over the loci, per statistic.
fn locus_tests(observed: &ObservedData, null: &NullTable) -> Result<Vec<LocusTest>> {
    let k = observed.loci.len();
    let stats: Vec<(usize, usize, &str)> = LOCUS_STATISTICS
        .iter()
        .filter_map(|name| {
            let o = observed.locus_columns.iter().position(|c| c == name)?;
            let n = crate::report::LOCI_COLUMNS.iter().position(|c| c == name)?;
            Some((o, n, *name))
        })
        .collect();
    // Per (locus, statistic): #null <= obs, #null >= obs, defined, sum.
    let mut acc = vec![(0u64, 0u64, 0u64, 0.0f64); k * stats.len()];
    for p in &null.loci_files {
        let text = fs::read_to_string(p).with_context(|| format!("reading {}", p.display()))?;
        for (i, line) in text.lines().enumerate().skip(1) {
            let f: Vec<&str> = line.split('\t').collect();
            ensure!(
                f.len() == crate::report::LOCI_COLUMNS.len(),
                "{}, line {}: {} fields, expected {}",
                p.display(),
                i + 1,
                f.len(),
                crate::report::LOCI_COLUMNS.len()
            );
            let locus: usize =
                f[1].parse().with_context(|| format!("{}, line {}: column locus", p.display(), i + 1))?;
            ensure!((1..=k).contains(&locus), "{}, line {}: locus {locus} outside 1..={k}", p.display(), i + 1);
            for (s, &(o, n, _)) in stats.iter().enumerate() {
                let (Some(obs), Ok(v)) = (observed.loci[locus - 1].values[o], f[n].parse::<f64>()) else { continue };
                let a = &mut acc[(locus - 1) * stats.len() + s];
                a.0 += u64::from(v <= obs);
                a.1 += u64::from(v >= obs);
                a.2 += 1;
                a.3 += v;
            }
        }
    }
    let mut out = Vec::with_capacity(k * stats.len());
    for (s, &(o, _, name)) in stats.iter().enumerate() {
        let first = out.len();
        for (l, locus) in observed.loci.iter().enumerate() {
            let (le, ge, b, sum) = acc[l * stats.len() + s];
            let bf = b as f64;
            let p = locus.values[o]
                .filter(|_| b > 0)
                .map(|_| (2.0 * ((le as f64 + 1.0) / (bf + 1.0)).min((ge as f64 + 1.0) / (bf + 1.0))).min(1.0));
            out.push(LocusTest {
                locus: l + 1,
                contig: locus.contig.clone(),
                start: locus.start,
                end: locus.end,
                callable_sites: locus.callable_sites,
                statistic: name.to_string(),
                observed: locus.values[o],
                null_replicates: b,
                null_mean: (b > 0).then(|| sum / bf),
                p_value: p,
                q_value: None,
            });
        }
        let ps: Vec<Option<f64>> = out[first..].iter().map(|t| t.p_value).collect();
        for (t, q) in out[first..].iter_mut().zip(benjamini_hochberg(&ps)) {
            t.q_value = q;
        }
    }
    Ok(out)
}

/// The observed data against a null distribution: every statistic, and the SFS fit.
#[derive(Debug, Clone, Serialize)]
pub struct TestReport {
    /// The null hypothesis the p-values are under.
    pub null: NullModel,
    /// The run that made this file: version, command, seed, inputs with checksums, settings
    /// (set by the command; absent for library callers that give none).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub run: Option<crate::report::record::RunRecord>,
    /// One line per statistic present in both.
    pub statistics: Vec<StatTest>,
    /// Per-locus tests, with several loci in both the data and the null.
    pub loci: Vec<LocusTest>,
    /// SFS goodness of fit: which spectrum (`unfolded`/`folded`), G observed, p-value.
    pub sfs_fit: Option<(String, f64, f64)>,
    /// The spectra the fit compared: kind, observed, one row per null replicate (for figures).
    pub sfs_compared: Option<(String, Vec<f64>, Vec<Vec<f64>>)>,
    /// Null replicates.
    pub replicates: usize,
    /// What `null_low` and `null_high` of each statistic are.
    pub null_interval: &'static str,
    /// Notes.
    pub notes: Vec<String>,
}

/// Checks that the null was made for the observed data: the same sampling design (demes,
/// times and sequences per deme and time), the same sample size, every observed statistic
/// among the null's columns and, for a null with a fixed number of mutations, the same S.
pub fn check_made_for(observed: &ObservedData, null: &NullTable) -> Result<(), NullError> {
    let mismatch = |setting, observed_value: String, null_value: String, hint: &str| {
        NullError::Mismatch(Box::new(Mismatch {
            observed_file: observed.origin.clone(),
            null_dir: null.dir.clone(),
            setting,
            observed: observed_value,
            null: null_value,
            hint: hint.to_string(),
        }))
    };
    let like = "build the null for these data with `seedline null SCENARIO --like OBSERVED.json`";
    let render = |d: &BTreeMap<(String, u64), u64>| {
        d.iter().map(|((deme, t), n)| format!("{n} of {deme} at {t}")).collect::<Vec<_>>().join(", ")
    };
    if !observed.design.is_empty() {
        let mut obs: BTreeMap<(String, u64), u64> = BTreeMap::new();
        for (deme, t, n) in observed.design.iter().filter(|(_, _, n)| *n > 0) {
            *obs.entry((deme.clone(), *t)).or_insert(0) += u64::from(*n);
        }
        let nul = null.manifest.design();
        if obs != nul {
            return Err(mismatch(
                "the sampling design (sequences per deme and generations ago)",
                render(&obs),
                render(&nul),
                like,
            ));
        }
    }
    let n = null.manifest.sample_size();
    if let Some(m) = observed.sample_size
        && m as usize != n
    {
        return Err(mismatch("the sample size", format!("{m} sequences"), format!("{n} sequences"), like));
    }
    let missing: Vec<&str> = observed
        .names
        .iter()
        .zip(&observed.values)
        .filter(|(name, v)| v.is_some() && !null.columns.contains(name))
        .map(|(name, _)| name.as_str())
        .collect();
    if !missing.is_empty() {
        return Err(mismatch(
            "the set of statistics",
            format!("also {}", missing.join(", ")),
            "without them (other demes?)".into(),
            like,
        ));
    }
    if let Some(fixed) = null.manifest.mutations.strip_prefix("fixed ")
        && let Some(s) = observed.value("segregating_sites")
        && fixed.parse::<f64>().ok() != Some(s)
    {
        return Err(mismatch(
            "the number of segregating sites (the null was conditioned on it)",
            format!("S = {s}"),
            format!("S = {fixed}"),
            "build the null with `--condition-on-s` from these data, or without it",
        ));
    }
    Ok(())
}

/// Tests the observed statistics against the null table, after [`check_made_for`].
pub fn test(observed: &ObservedData, null: &NullTable) -> Result<TestReport> {
    // The number of loci first: it explains a differing set of statistics.
    let null_lengths = null_layout(&null.manifest);
    if let Some(lengths) = observed.layout()
        && lengths.len() != null_lengths.len()
    {
        return Err(LayoutMismatch {
            observed: observed.origin.clone(),
            null: null.dir.display().to_string(),
            observed_loci: lengths.len(),
            null_loci: null_lengths.len(),
        }
        .into());
    }
    check_made_for(observed, null)?;
    let mut notes = Vec::new();
    let mut loci = Vec::new();
    if let Some(lengths) = observed.layout() {
        let differ = lengths.iter().zip(&null_lengths).filter(|(a, b)| a != b).count();
        if differ > 0 {
            notes.push(format!(
                "{differ} of {} loci have another callable length in the data than sites in the null: statistics that grow with length are not comparable; make the null with `null --like`",
                lengths.len()
            ));
        }
        if lengths.len() > 1 {
            loci = locus_tests(observed, null)?;
        }
    }
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
    let mut sfs_compared = None;
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
            sfs_compared = Some((kind.to_string(), obs, rows));
        }
    }
    let model = NullModel::of(null);
    if model.shard.1 > 1 {
        notes.push(format!(
            "this null is shard {}/{} alone: {b} of its {} replicates; merge the shards (`seedline merge`) to test against the whole null",
            model.shard.0, model.shard.1, model.replicates
        ));
    }
    Ok(TestReport {
        run: None,
        null: model,
        statistics,
        loci,
        sfs_fit,
        sfs_compared,
        replicates: b,
        null_interval: NULL_INTERVAL,
        notes,
    })
}

/// The meaning of `null_low` and `null_high` in `test.json` (`null_low_2.5`, `null_high_97.5`
/// in `test.tsv`).
pub const NULL_INTERVAL: &str = "null_low, null_high: the 2.5% and 97.5% quantiles (type 7) of the null replicates";

/// What a test's null distribution is: the hypothesis, how it was simulated, which part of it.
#[derive(Debug, Clone, Serialize)]
pub struct NullModel {
    /// The null run directory.
    pub dir: String,
    /// The scenario's `name`, if it has one.
    pub scenario_name: Option<String>,
    /// The scenario file and `--like` file as read by `seedline null` (path as given there,
    /// bytes, CRC-32), when the run recorded them.
    pub inputs: Vec<crate::report::record::InputFile>,
    /// Master seed.
    pub seed: u64,
    /// The engine that made the rows, and why.
    pub engine: EngineKind,
    /// Why that engine.
    pub engine_reason: String,
    /// Mutation count: `poisson`, or `fixed S` (`--condition-on-s`).
    pub mutations: String,
    /// Replicates B of the whole null (over all shards).
    pub replicates: u64,
    /// Shard I of K this directory holds ([0, 1] for a whole or merged null).
    pub shard: (u64, u64),
}

impl NullModel {
    fn of(null: &NullTable) -> Self {
        let m = &null.manifest;
        NullModel {
            dir: null.dir.display().to_string(),
            scenario_name: m.scenario.get("name").and_then(|n| n.as_str()).map(String::from),
            inputs: m.run.as_ref().map(|r| r.inputs.clone()).unwrap_or_default(),
            seed: m.seed,
            engine: m.engine,
            engine_reason: m.engine_reason.clone(),
            mutations: m.mutations.clone(),
            replicates: m.replicates,
            shard: (m.shard, m.shards),
        }
    }
}

/// Renders the test table for the terminal.
pub fn render_test(r: &TestReport) -> String {
    use crate::report::fmt_num;
    let f = |x: Option<f64>| x.map_or("-".to_string(), fmt_num);
    let mut s =
        format!("observed against {} null replicates (two-sided empirical p-values, (r+1)/(B+1))\n", r.replicates);
    let m = &r.null;
    let file = m.inputs.iter().find(|i| i.role == "scenario").map(|i| format!(" ({})", i.path)).unwrap_or_default();
    let name = m.scenario_name.as_deref().map(|n| format!("\"{n}\"")).unwrap_or_else(|| "unnamed scenario".into());
    s.push_str(&format!(
        "null: {name}{file} in {}, seed {}, engine {}, {} mutations\n",
        m.dir, m.seed, m.engine, m.mutations
    ));
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
    if !r.loci.is_empty() {
        let k = r.loci.iter().map(|t| t.locus).max().unwrap_or(0);
        s.push_str(&format!(
            "per-locus scan over {k} loci (Benjamini-Hochberg q-values per statistic, in test_loci.tsv):\n"
        ));
        for name in LOCUS_STATISTICS {
            let rows: Vec<&LocusTest> = r.loci.iter().filter(|t| t.statistic == name).collect();
            if rows.is_empty() {
                continue;
            }
            let hits = |a: f64| rows.iter().filter(|t| t.q_value.is_some_and(|q| q <= a)).count();
            let best = rows
                .iter()
                .filter(|t| t.q_value.is_some())
                .min_by(|a, b| a.q_value.unwrap_or(1.0).total_cmp(&b.q_value.unwrap_or(1.0)));
            s.push_str(&format!(
                "  {:<20} q <= 0.05: {:>4} loci   q <= 0.10: {:>4} loci{}\n",
                name,
                hits(0.05),
                hits(0.10),
                best.map_or(String::new(), |t| format!(
                    "   smallest q {} at {}:{}-{}",
                    fmt_num(t.q_value.unwrap_or(1.0)),
                    t.contig,
                    t.start,
                    t.end
                ))
            ));
        }
    }
    for n in &r.notes {
        s.push_str(&format!("note: {n}\n"));
    }
    s.push_str("A p-value measures surprise under this one null model (its scenario: demes, dormancy, loci and recombination as written there); it is not the probability that the hypothesis is true.\n");
    s
}

/// The per-locus table written by [`write_test`] with several loci.
pub const LOCI_TEST_FILE: &str = "test_loci.tsv";

/// Writes `test.tsv`, `test.json`, with several loci `test_loci.tsv`, and one SVG histogram
/// per statistic into `dir`.
pub fn write_test(r: &TestReport, null: &NullTable, dir: &Path) -> Result<()> {
    let figures = dir.join("figures");
    fs::create_dir_all(&figures).with_context(|| format!("cannot create directory {}", figures.display()))?;
    let write_atomic =
        |p: &Path, bytes: &[u8]| write_atomic(p, bytes).with_context(|| format!("cannot write {}", p.display()));
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
                let svg = crate::report::figures::null_histogram(&t.statistic, &xs, t.observed, t.p_value)?;
                write_atomic(&dir.join("figures").join(format!("{}.svg", t.statistic)), svg.as_bytes())?;
            }
        }
    }
    if let Some((kind, obs, rows)) = &r.sfs_compared {
        let svg = crate::report::figures::sfs_band(kind, obs, rows, r.sfs_fit.as_ref().map(|f| f.2))?;
        write_atomic(&dir.join("figures").join("sfs.svg"), svg.as_bytes())?;
    }
    write_atomic(&dir.join("test.tsv"), tsv.as_bytes())?;
    if !r.loci.is_empty() {
        let v = crate::report::tsv_value;
        let mut text = String::from(
            "locus\tcontig\tstart\tend\tcallable_sites\tstatistic\tobserved\tnull_replicates\tnull_mean\tp_value\tq_value\n",
        );
        for t in &r.loci {
            text.push_str(&format!(
                "{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}\n",
                t.locus,
                t.contig,
                t.start,
                t.end,
                t.callable_sites,
                t.statistic,
                v(t.observed),
                t.null_replicates,
                v(t.null_mean),
                v(t.p_value),
                v(t.q_value)
            ));
        }
        write_atomic(&dir.join(LOCI_TEST_FILE), text.as_bytes())?;
    }
    write_atomic(&dir.join("test.json"), serde_json::to_string_pretty(r)?.as_bytes())?;
    Ok(())
}

/// What [`status`] found in one run directory.
#[derive(Debug, Clone, Serialize)]
pub struct RunStatus {
    /// The directory.
    pub dir: PathBuf,
    /// Shard I of K (0/1 for an unsharded or merged run).
    pub shard: (u64, u64),
    /// A merged directory (`null.tsv`), checked as a whole.
    pub merged: bool,
    /// Replicates the directory must hold.
    pub replicates: u64,
    /// Chunks of the shard in all (1 for a merged directory).
    pub total_chunks: u64,
    /// Chunks present and matching the chunk manifest.
    pub done_chunks: u64,
    /// Absent chunks, as index ranges `from..to`.
    pub missing: Vec<(u64, u64)>,
    /// Files that cannot be trusted, with the reason (a rerun redoes them).
    pub damaged: Vec<String>,
    /// Temporary files lie there: a run is going on, or was killed.
    pub unfinished_files: bool,
}

impl RunStatus {
    /// Every chunk present and undamaged.
    pub fn is_complete(&self) -> bool {
        self.missing.is_empty() && self.damaged.is_empty() && self.done_chunks == self.total_chunks
    }

    /// Absent chunks in all.
    pub fn missing_chunks(&self) -> u64 {
        self.missing.iter().map(|(a, b)| b - a).sum()
    }
}

/// What [`status`] found in a set of run directories: each run, and the shards of K that no
/// directory holds or that two directories hold.
#[derive(Debug, Clone, Serialize)]
pub struct Status {
    /// One entry per run directory, in the order given (a parent's runs sorted by name).
    pub runs: Vec<RunStatus>,
    /// K when every shard directory has the same K.
    pub shards: Option<u64>,
    /// Shard indices of K that no directory holds.
    pub missing_shards: Vec<u64>,
    /// Shard indices that more than one directory holds.
    pub duplicate_shards: Vec<u64>,
    /// With shards of different K: replicates that the directories fall short of in all.
    pub replicates_short: u64,
}

impl Status {
    /// Ready to merge (or merged): every shard present once, every chunk present and undamaged.
    pub fn is_complete(&self) -> bool {
        self.missing_shards.is_empty()
            && self.duplicate_shards.is_empty()
            && self.replicates_short == 0
            && self.runs.iter().all(RunStatus::is_complete)
    }

    /// Shard indices to run again: absent, or with absent or damaged chunks (sorted).
    pub fn to_rerun(&self) -> Vec<u64> {
        let mut v: Vec<u64> = self.missing_shards.clone();
        v.extend(self.runs.iter().filter(|r| !r.merged && !r.is_complete()).map(|r| r.shard.0));
        v.sort_unstable();
        v.dedup();
        v
    }
}

/// The null run is not complete ([`status`]): `seedline status` exits with [`INCOMPLETE_EXIT`].
#[derive(Debug, thiserror::Error)]
#[error("the null run is not complete")]
pub struct Incomplete;

/// Exit code of `seedline status` when shards or chunks are missing or damaged (0: complete,
/// 2: bad input).
pub const INCOMPLETE_EXIT: u8 = 3;

/// The state of one run directory, from its `null.json`, chunk manifest and chunk files.
/// Chunks are found by listing the directory, so a run of 10^18 replicates costs nothing.
fn run_status(dir: &Path) -> Result<RunStatus> {
    let manifest = manifest_of(dir)?;
    if dir.join("null.tsv").exists() {
        let problem = load(dir).err().map(|e| format!("{e:#}"));
        return Ok(RunStatus {
            dir: dir.to_path_buf(),
            shard: (0, 1),
            merged: true,
            replicates: manifest.replicates,
            total_chunks: 1,
            done_chunks: u64::from(problem.is_none()),
            missing: Vec::new(),
            damaged: problem.into_iter().collect(),
            unfinished_files: false,
        });
    }
    let cfg = manifest.layout();
    let total = cfg.total_chunks();
    let ledger = read_ledger(dir);
    let n_loci = null_layout(&manifest).len() as u64;
    let mut present = std::collections::BTreeSet::new();
    let mut status = RunStatus {
        dir: dir.to_path_buf(),
        shard: cfg.shard,
        merged: false,
        replicates: cfg.shard_replicates(),
        total_chunks: total,
        done_chunks: 0,
        missing: Vec::new(),
        damaged: Vec::new(),
        unfinished_files: false,
    };
    for p in chunk_files(dir)? {
        let name = p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        let Some(c) = chunk_index(&name) else { continue };
        if c >= total {
            status.damaged.push(format!("{name} is not a chunk of this run ({total} chunks): remove it"));
            continue;
        }
        present.insert(c);
        let (from, to) = cfg.chunk_range(c);
        let problem = chunk_problem(&p, &ledger, to - from).or_else(|| {
            (n_loci > 1).then(|| chunk_problem(&dir.join(loci_chunk_name(c)), &ledger, (to - from) * n_loci)).flatten()
        });
        match problem {
            None => status.done_chunks += 1,
            Some(why) => status.damaged.push(why),
        }
    }
    let mut next = 0;
    for &c in &present {
        if c > next {
            status.missing.push((next, c));
        }
        next = c + 1;
    }
    if next < total {
        status.missing.push((next, total));
    }
    for e in fs::read_dir(dir).with_context(|| format!("cannot list {}", dir.display()))? {
        let name = e?.file_name().to_string_lossy().into_owned();
        status.unfinished_files |=
            (name.starts_with(".chunk_") || name.starts_with(".loci_")) && name.ends_with(".tmp");
    }
    Ok(status)
}

/// Which shards and chunks of a null run are done, missing or damaged: what to check before
/// [`merge`]. Each of `dirs` is a run directory (`--out` of `seedline null` or `merge`) or a
/// directory whose subdirectories are run directories. Runs of another scenario, seed,
/// replicates or mutation setting than the first are refused, as by [`merge`].
pub fn status(dirs: &[PathBuf]) -> Result<Status> {
    ensure!(!dirs.is_empty(), "status needs at least one run directory");
    let mut run_dirs = Vec::new();
    for d in dirs {
        if d.join("null.json").is_file() {
            run_dirs.push(d.clone());
            continue;
        }
        let mut subs: Vec<PathBuf> = match fs::read_dir(d) {
            Ok(entries) => {
                entries.filter_map(|e| e.ok().map(|e| e.path())).filter(|p| p.join("null.json").is_file()).collect()
            }
            Err(_) => Vec::new(),
        };
        if subs.is_empty() {
            return Err(NullError::Chunks {
                dir: d.clone(),
                message: "neither a null run directory (no null.json) nor a directory holding any: give the --out of `seedline null` or `seedline merge`, or their parent".into(),
            }
            .into());
        }
        subs.sort();
        run_dirs.extend(subs);
    }
    let first = manifest_of(&run_dirs[0])?;
    let mut runs = Vec::new();
    for d in &run_dirs {
        let m = manifest_of(d)?;
        let differs: Vec<&str> =
            m.differences(&first).into_iter().filter(|d| !["shard", "chunk"].contains(d)).collect();
        if !differs.is_empty() {
            return Err(NullError::Chunks {
                dir: d.clone(),
                message: format!(
                    "made with other settings than {} ({} differ): give the shards of one null run",
                    run_dirs[0].display(),
                    differs.join(", ")
                ),
            }
            .into());
        }
        runs.push(run_status(d)?);
    }
    let shard_runs: Vec<&RunStatus> = runs.iter().filter(|r| !r.merged).collect();
    let ks: std::collections::BTreeSet<u64> = shard_runs.iter().map(|r| r.shard.1).collect();
    let (mut missing_shards, mut duplicate_shards, mut replicates_short) = (Vec::new(), Vec::new(), 0);
    let shards = match ks.len() {
        1 => ks.first().copied(),
        _ => None,
    };
    if let Some(k) = shards {
        let mut seen = BTreeMap::new();
        for r in &shard_runs {
            *seen.entry(r.shard.0).or_insert(0u32) += 1;
        }
        duplicate_shards = seen.iter().filter(|(_, n)| **n > 1).map(|(i, _)| *i).collect();
        // Listed one by one: K is the number of jobs, never astronomically large.
        missing_shards = (0..k).filter(|i| !seen.contains_key(i)).collect();
    } else if ks.len() > 1 {
        // Shards of different K: complete only if they add up to the replicates (merge checks
        // that each replicate appears once).
        let held: u64 = shard_runs.iter().map(|r| r.replicates).sum();
        replicates_short = first.replicates.saturating_sub(held);
    }
    Ok(Status { runs, shards, missing_shards, duplicate_shards, replicates_short })
}

/// [`Status`] as `seedline status --json` prints it: every field, plus `complete`, each run's
/// `state` (`done`, `partial`, `damaged`), and the shard indices to run again (`rerun`, and
/// as a job-array specification `rerun_array`, e.g. `"1-3,7"`).
pub fn status_json(s: &Status) -> serde_json::Value {
    let mut v = serde_json::to_value(s).unwrap_or_default();
    if let Some(runs) = v["runs"].as_array_mut() {
        for (j, r) in runs.iter_mut().zip(&s.runs) {
            j["state"] = run_state(r).into();
        }
    }
    v["complete"] = s.is_complete().into();
    v["rerun"] = s.to_rerun().into();
    v["rerun_array"] = array_spec(&s.to_rerun()).into();
    v
}

fn run_state(r: &RunStatus) -> &'static str {
    if r.is_complete() {
        "done"
    } else if r.damaged.is_empty() {
        "partial"
    } else {
        "damaged"
    }
}

/// Sorted indices as a job-array specification: `1-3,7`.
fn array_spec(sorted: &[u64]) -> String {
    let parts: Vec<String> = index_ranges(sorted)
        .into_iter()
        .map(|(a, b)| if a == b { a.to_string() } else { format!("{a}-{b}") })
        .collect();
    parts.join(",")
}

/// Renders a [`status`] for the terminal: one line per run, the shards no directory holds,
/// and what to do.
pub fn render_status(s: &Status) -> String {
    let ranges = |v: &[(u64, u64)]| {
        let shown: Vec<String> = v
            .iter()
            .take(4)
            .map(|&(a, b)| if b - a == 1 { chunk_name(a) } else { format!("{}..{}", chunk_name(a), chunk_name(b - 1)) })
            .collect();
        format!("{}{}", shown.join(", "), if v.len() > 4 { ", ..." } else { "" })
    };
    let mut out = String::new();
    for r in &s.runs {
        let label = if r.merged { "merged".to_string() } else { format!("shard {}/{}", r.shard.0, r.shard.1) };
        let state = run_state(r);
        out.push_str(&format!(
            "{label:<12} {state:<8} {} of {} chunks good, {} replicates  {}\n",
            r.done_chunks,
            r.total_chunks,
            r.replicates,
            r.dir.display()
        ));
        if !r.missing.is_empty() {
            out.push_str(&format!("  missing: {} chunk(s): {}\n", r.missing_chunks(), ranges(&r.missing)));
        }
        for d in &r.damaged {
            out.push_str(&format!("  damaged: {d}\n"));
        }
        if r.unfinished_files && !r.is_complete() {
            out.push_str("  temporary files present: a run is going on in this directory, or was stopped\n");
        }
    }
    if let Some(k) = s.shards {
        for (a, b) in index_ranges(&s.missing_shards) {
            let label = if a == b { format!("shard {a}/{k}") } else { format!("shards {a}-{b}/{k}") };
            out.push_str(&format!("{label:<12} {:<8} no directory given holds it\n", "missing"));
        }
        for i in &s.duplicate_shards {
            out.push_str(&format!(
                "{:<12} {:<8} held by more than one directory: give one of them\n",
                format!("shard {i}/{k}"),
                "twice"
            ));
        }
    } else if s.replicates_short > 0 {
        out.push_str(&format!(
            "missing      shards of different K that fall {} replicates short of all\n",
            s.replicates_short
        ));
    }
    if s.is_complete() {
        out.push_str("complete: ready to merge\n");
    } else {
        let rerun = array_spec(&s.to_rerun());
        out.push_str("not complete: ");
        if !rerun.is_empty() {
            out.push_str(&format!(
                "rerun the same `seedline null` command for shard(s) {} (in a job array: resubmit index {rerun}), ",
                rerun.replace(',', ", "),
            ));
        }
        out.push_str("then merge; merge refuses until then\n");
    }
    out
}

/// Sorted indices as runs of consecutive values `(first, last)`: 1, 2, 3, 7 → (1, 3), (7, 7).
fn index_ranges(sorted: &[u64]) -> Vec<(u64, u64)> {
    let mut out: Vec<(u64, u64)> = Vec::new();
    for &i in sorted {
        match out.last_mut() {
            Some((_, last)) if *last + 1 == i => *last = i,
            _ => out.push((i, i)),
        }
    }
    out
}
