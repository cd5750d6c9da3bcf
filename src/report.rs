//! Output: replicate tables, summaries, and atomic file writes.
//!
//! Only this module (and `observed`) touches files. Every file is written to a temporary
//! name in the destination directory and renamed when complete, so an interrupted run
//! never leaves a half-written file under the final name.

use serde::Serialize;
use std::fs;
use std::io::{self, Write};
use std::path::{Path, PathBuf};

/// Writes `bytes` to `path` through a temporary file in the same directory and a rename.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let tmp = temporary_name(path);
    {
        let mut f = fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
    }
    fs::rename(&tmp, path).inspect_err(|_| {
        let _ = fs::remove_file(&tmp);
    })
}

/// The temporary name used while `path` is being written.
pub fn temporary_name(path: &Path) -> PathBuf {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    path.with_file_name(format!(".{name}.{}.tmp", std::process::id()))
}

/// Mean, spread and quantiles of one column.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ColumnSummary {
    /// Number of values (missing ones excluded).
    pub count: usize,
    /// Number of missing values.
    pub missing: usize,
    /// Arithmetic mean.
    pub mean: Option<f64>,
    /// Sample standard deviation (n - 1 in the denominator).
    pub sd: Option<f64>,
    /// Standard error of the mean, sd / sqrt(count).
    pub se: Option<f64>,
    /// Quantiles at 2.5%, 25%, 50%, 75%, 97.5% (type 7, linear interpolation).
    pub quantiles: Option<[f64; 5]>,
    /// Smallest value.
    pub min: Option<f64>,
    /// Largest value.
    pub max: Option<f64>,
}

/// Probabilities of [`ColumnSummary::quantiles`].
pub const QUANTILE_LEVELS: [f64; 5] = [0.025, 0.25, 0.5, 0.75, 0.975];

impl ColumnSummary {
    /// Summarises the values; `None` entries count as missing.
    pub fn new(values: &[Option<f64>]) -> Self {
        let mut xs: Vec<f64> = values.iter().flatten().copied().filter(|x| x.is_finite()).collect();
        let missing = values.len() - xs.len();
        let count = xs.len();
        if count == 0 {
            return ColumnSummary {
                count,
                missing,
                mean: None,
                sd: None,
                se: None,
                quantiles: None,
                min: None,
                max: None,
            };
        }
        // Welford's online algorithm: stable for long columns of large values.
        let (mut mean, mut m2) = (0.0f64, 0.0f64);
        for (i, &x) in xs.iter().enumerate() {
            let d = x - mean;
            mean += d / (i + 1) as f64;
            m2 += d * (x - mean);
        }
        let sd = (count > 1).then(|| (m2 / (count - 1) as f64).sqrt());
        xs.sort_unstable_by(f64::total_cmp);
        let quantiles = QUANTILE_LEVELS.map(|p| quantile_sorted(&xs, p));
        ColumnSummary {
            count,
            missing,
            mean: Some(mean),
            sd,
            se: sd.map(|s| s / (count as f64).sqrt()),
            quantiles: Some(quantiles),
            min: xs.first().copied(),
            max: xs.last().copied(),
        }
    }

    /// 95% normal-approximation interval of the mean, mean ± 1.96 se.
    pub fn mean_interval(&self) -> Option<(f64, f64)> {
        match (self.mean, self.se) {
            (Some(m), Some(se)) => Some((m - 1.96 * se, m + 1.96 * se)),
            _ => None,
        }
    }
}

/// Quantile of sorted data, linear interpolation between order statistics (Hyndman & Fan
/// 1996, type 7).
pub fn quantile_sorted(xs: &[f64], p: f64) -> f64 {
    let h = (xs.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(xs.len() - 1);
    xs[lo] + (h - lo as f64) * (xs[hi] - xs[lo])
}

/// Formats a number for a table: integers without a fraction, others with 6 significant digits.
pub fn fmt_num(x: f64) -> String {
    if x.fract() == 0.0 && x.abs() < 1e15 {
        format!("{}", x as i64)
    } else if x != 0.0 && (x.abs() >= 1e6 || x.abs() < 1e-3) {
        format!("{x:.5e}")
    } else {
        let digits = (5 - x.abs().log10().floor() as i32).clamp(0, 10) as usize;
        format!("{x:.digits$}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn summary_of_known_data() {
        // Source: hand computation. 1..=5: mean 3, sd sqrt(2.5); type-7 median 3, 25% 2.
        let v: Vec<Option<f64>> = (1..=5).map(|x| Some(x as f64)).chain([None]).collect();
        let s = ColumnSummary::new(&v);
        assert_eq!(s.count, 5);
        assert_eq!(s.missing, 1);
        assert_eq!(s.mean, Some(3.0));
        assert!((s.sd.unwrap() - 2.5f64.sqrt()).abs() < 1e-12);
        let q = s.quantiles.unwrap();
        assert_eq!(q[1], 2.0);
        assert_eq!(q[2], 3.0);
        assert!((q[0] - 1.1).abs() < 1e-12);
    }

    #[test]
    fn atomic_write_leaves_no_temporary() {
        let dir = std::env::temp_dir().join(format!("seedline-report-{}", std::process::id()));
        fs::create_dir_all(&dir).unwrap();
        let p = dir.join("x.tsv");
        write_atomic(&p, b"a\tb\n").unwrap();
        assert_eq!(fs::read(&p).unwrap(), b"a\tb\n");
        assert!(!temporary_name(&p).exists());
        fs::remove_dir_all(&dir).unwrap();
    }
}

/// One row of `replicates.tsv`.
#[derive(Debug, Clone, PartialEq)]
pub struct ReplicateRow {
    /// Replicate index.
    pub replicate: u64,
    /// Time of the MRCA, when the replicate ended as a single tree.
    pub tmrca: Option<u64>,
    /// Number of roots (1 when an MRCA was found).
    pub roots: usize,
    /// Sum of branch lengths in generations.
    pub total_length: u64,
    /// Lineage steps taken.
    pub jumps: u64,
}

impl ReplicateRow {
    /// The row of a simulated genealogy.
    pub fn of(replicate: u64, g: &crate::genealogy::Genealogy) -> Self {
        ReplicateRow {
            replicate,
            tmrca: g.tmrca(),
            roots: g.roots().len(),
            total_length: g.total_length(),
            jumps: g.steps(),
        }
    }

    /// Column names of `replicates.tsv`.
    pub const HEADER: [&'static str; 5] = ["replicate", "tmrca", "roots", "total_length", "jumps"];

    /// Tab-separated fields (empty `tmrca` for a forest).
    pub fn fields(&self) -> [String; 5] {
        [
            self.replicate.to_string(),
            self.tmrca.map(|t| t.to_string()).unwrap_or_default(),
            self.roots.to_string(),
            self.total_length.to_string(),
            self.jumps.to_string(),
        ]
    }
}

/// Versions and generator recorded in every summary, so that a result can be reproduced.
#[derive(Debug, Clone, Serialize)]
pub struct Provenance {
    /// seedline version.
    pub seedline: &'static str,
    /// Random generator and how streams are derived.
    pub generator: &'static str,
    /// Pinned versions of the crates that decide sampled values.
    pub rand: &'static str,
    /// rand_distr version.
    pub rand_distr: &'static str,
    /// statrs version.
    pub statrs: &'static str,
}

impl Provenance {
    /// The provenance of this build.
    pub fn current() -> Self {
        Provenance {
            seedline: env!("CARGO_PKG_VERSION"),
            generator: crate::batch::GENERATOR,
            rand: "0.10.4",
            rand_distr: "0.6.0",
            statrs: "0.19.1",
        }
    }
}

/// `summary.json` of a `simulate` run.
#[derive(Debug, Clone, Serialize)]
pub struct SimulationSummary {
    /// Versions and generator.
    pub provenance: Provenance,
    /// Where the scenario came from.
    pub scenario_file: String,
    /// The validated scenario with defaults filled in.
    pub scenario: crate::scenario::RawScenario,
    /// Master seed.
    pub seed: u64,
    /// Replicates run.
    pub replicates: u64,
    /// Replicates that ended as a forest (no MRCA before the horizon or the founders).
    pub forests: u64,
    /// Summaries of the numeric columns of `replicates.tsv`, in column order.
    pub columns: Vec<(String, ColumnSummary)>,
    /// The engine that ran and why.
    pub engine: crate::approx::EngineDecision,
}

/// Accumulates the columns of `replicates.tsv` for the summary.
#[derive(Debug, Default)]
pub struct ColumnAccumulator {
    names: Vec<String>,
    values: Vec<Vec<Option<f64>>>,
}

impl ColumnAccumulator {
    /// An accumulator for the named columns.
    pub fn new(names: &[&str]) -> Self {
        ColumnAccumulator {
            names: names.iter().map(|s| s.to_string()).collect(),
            values: vec![Vec::new(); names.len()],
        }
    }

    /// Adds one row of values, in column order.
    pub fn push(&mut self, row: &[Option<f64>]) {
        debug_assert_eq!(row.len(), self.names.len());
        for (col, v) in self.values.iter_mut().zip(row) {
            col.push(*v);
        }
    }

    /// Summaries of every column.
    pub fn summaries(&self) -> Vec<(String, ColumnSummary)> {
        self.names.iter().cloned().zip(self.values.iter().map(|v| ColumnSummary::new(v))).collect()
    }
}

/// Renders the human summary of a simulation: one line per column with its mean and 95%
/// interval of the mean.
pub fn render_summary(summary: &SimulationSummary) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "{} replicates of {:?} (seed {})\n",
        summary.replicates,
        summary.scenario.name.as_deref().unwrap_or("unnamed"),
        summary.seed
    ));
    if summary.forests > 0 {
        s.push_str(&format!(
            "{} of {} replicates ended as a forest: no common ancestor before the horizon (tmrca left empty)\n",
            summary.forests, summary.replicates
        ));
    }
    s.push_str(&format!("{:<14} {:>14} {:>31} {:>14}\n", "quantity", "mean", "95% interval of the mean", "sd"));
    for (name, c) in &summary.columns {
        let (mean, ci, sd) = match (c.mean, c.mean_interval(), c.sd) {
            (Some(m), Some((lo, hi)), Some(sd)) => {
                (fmt_num(m), format!("[{}, {}]", fmt_num(lo), fmt_num(hi)), fmt_num(sd))
            }
            (Some(m), _, _) => (fmt_num(m), "-".to_string(), "-".to_string()),
            _ => ("-".to_string(), "-".to_string(), "-".to_string()),
        };
        s.push_str(&format!("{name:<14} {mean:>14} {ci:>31} {sd:>14}\n"));
    }
    s
}

/// Files written by [`simulate_to_dir`].
pub const SIMULATE_FILES: [&str; 3] = ["replicates.tsv", "trees.nwk", "summary.json"];

/// Runs every replicate of the scenario and writes `replicates.tsv`, `trees.nwk` and
/// `summary.json` into `dir` (each atomically). `progress` is called once per replicate.
/// `engine` picks the exact or approximate engine ([`crate::approx::resolve`]).
pub fn simulate_to_dir(
    scenario: &crate::scenario::Scenario,
    scenario_file: &str,
    config: crate::batch::BatchConfig,
    engine: crate::approx::EngineChoice,
    dir: &Path,
    progress: &(dyn Fn() + Sync),
) -> anyhow::Result<SimulationSummary> {
    use anyhow::Context;
    let engine = crate::approx::resolve(engine, scenario)?;
    let approx = match engine.kind {
        crate::approx::EngineKind::Approx => Some(crate::approx::ApproxModel::new(scenario)?),
        crate::approx::EngineKind::Exact => None,
    };
    fs::create_dir_all(dir).with_context(|| format!("creating output directory {}", dir.display()))?;
    let labels: Vec<String> = scenario.samples().iter().map(|s| s.label.clone()).collect();
    let reps: Vec<u64> = (0..scenario.replicates()).collect();
    let mut table = StreamFile::create(&dir.join(SIMULATE_FILES[0]))?;
    let mut trees = StreamFile::create(&dir.join(SIMULATE_FILES[1]))?;
    writeln!(table.out, "{}", ReplicateRow::HEADER.join("\t"))?;
    let mut acc = ColumnAccumulator::new(&ReplicateRow::HEADER[1..]);
    let mut forests = 0;
    crate::batch::run(
        scenario,
        &reps,
        config,
        |sim, sc, rep, rng| {
            let g = match &approx {
                Some(model) => model.simulate(rng),
                None => sim.simulate(sc, rng),
            };
            let mut nwk = String::new();
            g.write_newick(&labels, rep, &mut nwk);
            progress();
            (ReplicateRow::of(rep, &g), nwk)
        },
        |_, (row, nwk)| {
            writeln!(table.out, "{}", row.fields().join("\t"))?;
            trees.out.write_all(nwk.as_bytes())?;
            forests += u64::from(row.roots > 1);
            acc.push(&[
                row.tmrca.map(|t| t as f64),
                Some(row.roots as f64),
                Some(row.total_length as f64),
                Some(row.jumps as f64),
            ]);
            Ok(())
        },
    )?;
    let summary = SimulationSummary {
        provenance: Provenance::current(),
        scenario_file: scenario_file.to_string(),
        scenario: scenario.normalized().clone(),
        seed: scenario.seed(),
        replicates: scenario.replicates(),
        forests,
        columns: acc.summaries(),
        engine,
    };
    table.finish()?;
    trees.finish()?;
    let json = serde_json::to_string_pretty(&summary)?;
    let p = dir.join(SIMULATE_FILES[2]);
    write_atomic(&p, json.as_bytes()).with_context(|| format!("writing {}", p.display()))?;
    Ok(summary)
}

/// A file streamed to a temporary name and renamed over the final name by [`finish`];
/// dropped unfinished (an error, an interrupted run), it removes its temporary file.
///
/// [`finish`]: StreamFile::finish
pub struct StreamFile {
    /// Buffered writer on the temporary file.
    pub out: io::BufWriter<fs::File>,
    tmp: PathBuf,
    path: PathBuf,
    done: bool,
}

impl StreamFile {
    /// Starts writing `path`.
    pub fn create(path: &Path) -> io::Result<Self> {
        let tmp = temporary_name(path);
        let f = fs::File::create(&tmp)?;
        Ok(StreamFile { out: io::BufWriter::new(f), tmp, path: path.to_path_buf(), done: false })
    }

    /// Flushes, syncs and renames the file to its final name.
    pub fn finish(mut self) -> io::Result<()> {
        self.out.flush()?;
        self.out.get_ref().sync_all()?;
        fs::rename(&self.tmp, &self.path)?;
        self.done = true;
        Ok(())
    }
}

impl Drop for StreamFile {
    fn drop(&mut self) {
        if !self.done {
            let _ = fs::remove_file(&self.tmp);
        }
    }
}
