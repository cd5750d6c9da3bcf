//! Output: replicate tables, summaries, and atomic file writes.
//!
//! Only this module (and `observed`) touches files. Every file is written to a temporary
//! name in the destination directory and renamed when complete, so an interrupted run
//! never leaves a half-written file under the final name.

pub mod figures;
pub mod html;
pub mod output;
pub mod progress;
pub mod record;

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
    /// Quantiles at 2.5%, 25%, 50%, 75%, 97.5% (type 7, linear interpolation); in JSON an
    /// object keyed by level (`"2.5%"`, ..., `"97.5%"`).
    #[serde(serialize_with = "labelled_quantiles")]
    pub quantiles: Option<[f64; 5]>,
    /// Smallest value.
    pub min: Option<f64>,
    /// Largest value.
    pub max: Option<f64>,
}

/// Probabilities of [`ColumnSummary::quantiles`].
pub const QUANTILE_LEVELS: [f64; 5] = [0.025, 0.25, 0.5, 0.75, 0.975];

/// The JSON keys of [`QUANTILE_LEVELS`].
pub const QUANTILE_LABELS: [&str; 5] = ["2.5%", "25%", "50%", "75%", "97.5%"];

fn labelled_quantiles<S: serde::Serializer>(q: &Option<[f64; 5]>, s: S) -> Result<S::Ok, S::Error> {
    match q {
        Some(q) => s.collect_map(QUANTILE_LABELS.iter().zip(q.map(Some))),
        // No value (e.g. tmrca when every replicate is a forest): the same keys, each null.
        None => s.collect_map(QUANTILE_LABELS.iter().map(|l| (l, None::<f64>))),
    }
}

/// Serialises named columns as one JSON object keyed by name, in column order.
fn columns_by_name<S: serde::Serializer>(cols: &[(String, ColumnSummary)], s: S) -> Result<S::Ok, S::Error> {
    s.collect_map(cols.iter().map(|(name, c)| (name, c)))
}

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
    fn approximate_predictions_are_never_differs() {
        // Source: Kingman Monte Carlo, n = 10, theta = 10: E[Tajima's D] = -0.075 ± 0.004
        // (independent recomputation reported with issue 11), against the plug-in value 0.
        use crate::theory::predict::Kind;
        assert_eq!(verdict(-0.075, Some(0.004), 0.0, Kind::Approximate), "approximate: not tested");
        assert_eq!(verdict(-0.075, Some(0.004), 0.0, Kind::Exact), "differs");
        assert_eq!(verdict(-0.005, Some(0.004), 0.0, Kind::Approximate), "agrees");
        // A limit gets 3 se plus 1%: 101 ± 0.1 against 100 agrees, 102 ± 0.1 differs.
        assert_eq!(verdict(101.0, Some(0.1), 100.0, Kind::Limit), "agrees");
        assert_eq!(verdict(102.0, Some(0.1), 100.0, Kind::Limit), "differs");
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

/// The columns of `replicates.tsv` present for every scenario (see [`replicate_columns`]).
pub const BASE_COLUMNS: [&str; 5] = ["replicate", "tmrca", "roots", "total_length", "jumps"];

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
    /// The run that made this file: version, command, seed, inputs with checksums, settings
    /// (set by the command; absent for library callers that give none).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub run: Option<crate::report::record::RunRecord>,
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
    /// Summaries of the numeric columns of `replicates.tsv`: in JSON an object keyed by
    /// column name, in column order.
    #[serde(serialize_with = "columns_by_name")]
    pub columns: Vec<(String, ColumnSummary)>,
    /// What published theory predicts for this scenario (the `predict --json` form).
    pub prediction: serde_json::Value,
    /// Notes on what the theory covers.
    #[serde(skip)]
    pub notes: Vec<String>,
    /// Simulated means against the predictions.
    pub comparison: Vec<Comparison>,
    /// The engine that ran and why.
    pub engine: crate::engine::EngineDecision,
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

/// Files always written by [`simulate_to_dir`]; `sfs.tsv` joins them with a mutation model,
/// [`LD_FILE`] (`--ld`), `loci.tsv` and `vcf/` on request.
pub const SIMULATE_FILES: [&str; 3] = ["replicates.tsv", "trees.nwk", "summary.json"];

/// The figure of the simulated against the predicted SFS (with a mutation model).
pub const SFS_FIGURE: &str = "sfs.svg";

/// The sample map written beside the VCFs (`vcf/samples.tsv`), ready for `observe --samples`.
pub const VCF_SAMPLE_MAP: &str = "samples.tsv";

/// Optional outputs of `simulate`.
#[derive(Debug, Clone, Default)]
pub struct SimulateOptions {
    /// The run record for `summary.json` (its seed is filled in from the scenario).
    pub run: Option<record::RunRecord>,
    /// Write `vcf/replicate_<i>.vcf` for every replicate.
    pub vcf: bool,
    /// Pair consecutive haplotypes into diploid genotypes in the VCF.
    pub diploid: bool,
    /// Compress the VCFs with BGZF (`vcf/replicate_<i>.vcf.gz`).
    pub bgzip: bool,
    /// Write `loci.tsv`, one row per locus.
    pub loci_table: bool,
    /// Exact, approximate or automatic choice of engine.
    pub engine: crate::engine::EngineChoice,
    /// Write [`LD_FILE`]: r² by distance within loci (all pairs of segregating sites: the
    /// cost grows with the square of their number).
    pub ld: bool,
}

/// The columns of `replicates.tsv` for a scenario.
///
/// Always `replicate tmrca roots total_length jumps`; with a mutation model the statistic
/// columns of [`crate::stats::stat_columns`]; with several loci also the mean and variance
/// across loci of π, S, Tajima's D, θ_W and Fay & Wu's H ([`crate::stats::LOCUS_SPREAD`]). With several loci `tmrca` and `total_length` are means
/// over loci (`tmrca` empty if any locus is a forest), `roots` the largest number of roots
/// and `jumps` the sum. With recombination `breakpoints` and `crossovers` come last (summed
/// over loci): the positions where the genealogy (topology or node times) changes
/// ([`crate::engine::arg::Arg::breakpoints`]), and every crossover on the genealogy of the
/// sample, visible or not ([`crate::engine::arg::Arg::tree_crossovers`]); `tmrca`,
/// `total_length` of a locus are means over its local trees weighted by their number of
/// sites ([`crate::batch::LocusOutcome`]).
pub fn replicate_columns(scenario: &crate::scenario::Scenario) -> Vec<String> {
    let mut cols: Vec<String> = BASE_COLUMNS.iter().map(|s| s.to_string()).collect();
    if scenario.mutation().is_some() {
        let names: Vec<&str> = scenario.demes().iter().map(|d| d.name()).collect();
        cols.extend(crate::stats::stat_columns(&names));
        if scenario.loci() > 1 {
            cols.extend(crate::stats::locus_spread_columns());
        }
    }
    if scenario.recombination().is_some() {
        cols.push("breakpoints".to_string());
        cols.push("crossovers".to_string());
    }
    cols
}

/// The values of [`replicate_columns`] for one replicate's loci.
pub fn replicate_values(replicate: u64, loci: &[crate::batch::LocusOutcome], n_demes: usize) -> Vec<Option<f64>> {
    let k = loci.len() as f64;
    let tmrca: Option<f64> = loci.iter().map(|l| l.tmrca).sum::<Option<f64>>().map(|s| s / k);
    let mut v = vec![
        Some(replicate as f64),
        tmrca,
        loci.iter().map(|l| l.roots).max().map(|r| r as f64),
        Some(loci.iter().map(|l| l.total_length).sum::<f64>() / k),
        Some(loci.iter().map(|l| l.jumps as f64).sum()),
    ];
    let stats: Vec<crate::stats::SampleStats> = loci.iter().filter_map(|l| l.stats.clone()).collect();
    if !stats.is_empty() {
        v.extend(crate::stats::combined_column_values(&stats, n_demes));
        if loci.len() > 1 {
            let per_locus: Vec<[Option<f64>; 5]> = stats.iter().map(crate::stats::locus_spread_values).collect();
            for k in 0..crate::stats::LOCUS_SPREAD.len() {
                let xs: Vec<f64> = per_locus.iter().filter_map(|l| l[k]).collect();
                let (m, var) = crate::stats::mean_var(&xs);
                v.push(m);
                v.push(var);
            }
        }
    }
    if loci.iter().any(|l| l.breakpoints.is_some()) {
        v.push(Some(loci.iter().filter_map(|l| l.breakpoints).sum::<u64>() as f64));
        v.push(Some(loci.iter().filter_map(|l| l.tree_crossovers).sum::<u64>() as f64));
    }
    v
}

/// Columns of `loci.tsv` (and of the per-locus files of a null run): one row per locus of
/// each replicate, `locus` counted from 1.
pub const LOCI_COLUMNS: [&str; 11] = [
    "replicate",
    "locus",
    "tmrca",
    "roots",
    "total_length",
    "segregating_sites",
    "pi",
    "tajima_d",
    "theta_w",
    "fay_wu_h",
    "haplotypes",
];

/// The values of [`LOCI_COLUMNS`] for locus `j` (0-based) of replicate `rep`.
pub fn locus_values(rep: u64, j: usize, l: &crate::batch::LocusOutcome) -> [Option<f64>; 11] {
    let st = l.stats.as_ref();
    [
        Some(rep as f64),
        Some((j + 1) as f64),
        l.tmrca,
        Some(l.roots as f64),
        Some(l.total_length),
        st.map(|s| s.segregating_sites as f64),
        st.and_then(|s| s.theta_pi),
        st.and_then(|s| s.tajima_d),
        st.and_then(|s| s.theta_w),
        st.and_then(|s| s.fay_wu_h),
        st.map(|s| s.distinct_haplotypes as f64),
    ]
}

/// A TSV cell: empty for `None`, integers without a fraction.
pub fn tsv_value(x: Option<f64>) -> String {
    match x {
        None => String::new(),
        Some(x) if x.fract() == 0.0 && x.abs() < 9e15 => format!("{}", x as i64),
        Some(x) => format!("{x}"),
    }
}

/// Runs every replicate of the scenario and writes `replicates.tsv`, `trees.nwk`,
/// `summary.json`, and with a mutation model `sfs.tsv` (plus `loci.tsv` and `vcf/` on
/// request) into `dir`, each atomically. `progress` is called once per replicate.
pub fn simulate_to_dir(
    scenario: &crate::scenario::Scenario,
    scenario_file: &str,
    config: crate::batch::BatchConfig,
    options: SimulateOptions,
    dir: &Path,
    progress: &(dyn Fn() + Sync),
) -> anyhow::Result<SimulationSummary> {
    use anyhow::Context;
    let engine = crate::engine::Engine::new(scenario, options.engine)?;
    let ld_edges = match (options.ld, scenario.mutation()) {
        (true, Some(m)) => Some(crate::batch::ld_bins(m.sites())),
        (true, None) => anyhow::bail!("--ld needs a mutation model: add a `mutation:` section to the scenario"),
        (false, _) => None,
    };
    fs::create_dir_all(dir).with_context(|| format!("creating output directory {}", dir.display()))?;
    let labels: Vec<String> = scenario.samples().iter().map(|s| s.name()).collect();
    let n = scenario.samples().len();
    let n_demes = scenario.demes().len();
    let mutation = scenario.mutation().is_some();
    let loci = scenario.loci();
    let reps: Vec<u64> = (0..scenario.replicates()).collect();
    let columns = replicate_columns(scenario);
    let mut table = StreamFile::create(&dir.join(SIMULATE_FILES[0]))?;
    let mut trees = StreamFile::create(&dir.join(SIMULATE_FILES[1]))?;
    writeln!(table.out, "{}", columns.join("\t"))?;
    let mut sfs = if mutation {
        let mut f = StreamFile::create(&dir.join("sfs.tsv"))?;
        let head: Vec<String> =
            std::iter::once("replicate".to_string()).chain((1..n).map(|i| format!("xi_{i}"))).collect();
        writeln!(f.out, "{}", head.join("\t"))?;
        Some(f)
    } else {
        None
    };
    let mut loci_file = if options.loci_table {
        let mut f = StreamFile::create(&dir.join("loci.tsv"))?;
        writeln!(f.out, "{}", LOCI_COLUMNS.join("\t"))?;
        Some(f)
    } else {
        None
    };
    let vcf_dir = dir.join("vcf");
    if options.vcf {
        anyhow::ensure!(mutation, "--vcf needs a mutation model: add a `mutation:` section to the scenario");
        let names: Vec<&str> = scenario.demes().iter().map(|d| d.name()).collect();
        let map = crate::vcf_export::sample_map(scenario.samples(), &names, options.diploid)?;
        fs::create_dir_all(&vcf_dir).with_context(|| format!("creating {}", vcf_dir.display()))?;
        let p = vcf_dir.join(VCF_SAMPLE_MAP);
        write_atomic(&p, map.as_bytes()).with_context(|| format!("writing {}", p.display()))?;
    }
    let keep = crate::batch::Keep { trees: true, mutations: options.vcf, ld: ld_edges.is_some() };
    let mut ld_acc = LdAccumulator::new(ld_edges.as_deref().unwrap_or(&[]));
    let key = crate::batch::master_key(scenario.seed());
    let mut acc = ColumnAccumulator::new(&columns[1..].iter().map(String::as_str).collect::<Vec<_>>());
    let mut sfs_acc = vec![Vec::new(); n.saturating_sub(1)];
    let mut forests = 0;
    crate::batch::run(
        scenario,
        &reps,
        config,
        |scratch, _, rep, _| {
            let r = crate::batch::simulate_replicate(&engine, scratch, &key, rep, keep, &labels);
            progress();
            r
        },
        |rep, outcome| {
            let loci_out =
                outcome.map_err(|e| anyhow::Error::new(e).context(format!("{scenario_file}: replicate {rep}")))?;
            let values = replicate_values(rep, &loci_out, n_demes);
            let fields: Vec<String> = values.iter().map(|x| tsv_value(*x)).collect();
            writeln!(table.out, "{}", fields.join("\t"))?;
            for (j, l) in loci_out.iter().enumerate() {
                if let Some(t) = &l.newick {
                    trees.out.write_all(t.as_bytes())?;
                }
                if let Some(f) = loci_file.as_mut() {
                    let row = locus_values(rep, j, l);
                    writeln!(f.out, "{}", row.iter().map(|x| tsv_value(*x)).collect::<Vec<_>>().join("\t"))?;
                }
            }
            if let Some(f) = sfs.as_mut() {
                let xi = crate::replicates::replicate_sfs(&loci_out, n);
                for (col, x) in sfs_acc.iter_mut().zip(&xi) {
                    col.push(Some(*x as f64));
                }
                let fields: Vec<String> =
                    std::iter::once(rep.to_string()).chain(xi.iter().map(|x| x.to_string())).collect();
                writeln!(f.out, "{}", fields.join("\t"))?;
            }
            if options.vcf {
                let ms: Vec<&crate::mutation::Mutations> =
                    loci_out.iter().filter_map(|l| l.mutations.as_ref()).collect();
                let mut buf = Vec::new();
                let comment =
                    format!("seedline {} replicate {rep} seed {}", env!("CARGO_PKG_VERSION"), scenario.seed());
                let lengths: Vec<u64> = (0..loci).filter_map(|l| scenario.locus_sites(l)).collect();
                crate::vcf_export::write(&mut buf, scenario.samples(), &ms, &lengths, options.diploid, &comment)?;
                if options.bgzip {
                    buf = crate::vcf_export::bgzip(&buf)?;
                }
                let gz = if options.bgzip { ".gz" } else { "" };
                let p = vcf_dir.join(format!("replicate_{rep}.vcf{gz}"));
                write_atomic(&p, &buf).with_context(|| format!("writing {}", p.display()))?;
            }
            for bins in loci_out.iter().filter_map(|l| l.ld.as_ref()) {
                ld_acc.add(bins);
            }
            forests += u64::from(loci_out.iter().any(|l| l.roots > 1));
            acc.push(&values[1..]);
            Ok(())
        },
    )?;
    let prediction = crate::theory::predict::predict(scenario);
    let sfs_means: Vec<ColumnSummary> = sfs_acc.iter().map(|c| ColumnSummary::new(c)).collect();
    let summary = SimulationSummary {
        run: options.run.as_ref().map(|r| r.with_seed(record::Seeds::One(scenario.seed()))),
        provenance: Provenance::current(),
        scenario_file: scenario_file.to_string(),
        scenario: scenario.normalized().clone(),
        seed: scenario.seed(),
        replicates: scenario.replicates(),
        forests,
        columns: acc.summaries(),
        comparison: compare(&acc.summaries(), &sfs_means, &prediction, n == 2 && loci == 1),
        prediction: prediction.to_json(),
        notes: prediction.notes.clone(),
        engine: engine.decision().clone(),
    };
    table.finish()?;
    trees.finish()?;
    if let Some(f) = sfs {
        f.finish()?;
    }
    if let Some(f) = loci_file {
        f.finish()?;
    }
    if ld_edges.is_some() {
        let p = dir.join(LD_FILE);
        write_atomic(&p, ld_acc.to_tsv().as_bytes()).with_context(|| format!("writing {}", p.display()))?;
    }
    if mutation && n > 2 {
        let sim: Vec<(f64, f64, f64)> = sfs_means
            .iter()
            .map(|c| {
                let m = c.mean.unwrap_or(f64::NAN);
                let (lo, hi) = c.mean_interval().unwrap_or((m, m));
                (m, lo, hi)
            })
            .collect();
        let label = prediction
            .sfs_kind
            .map(|k| format!("{}: {}", k.label(), prediction.sfs_source.as_deref().unwrap_or("source not recorded")));
        let predicted = prediction.sfs_expected.as_deref().zip(label.as_deref());
        let svg = figures::sfs_simulated(&sim, scenario.replicates(), predicted)?;
        let p = dir.join(SFS_FIGURE);
        write_atomic(&p, svg.as_bytes()).with_context(|| format!("writing {}", p.display()))?;
    }
    let json = serde_json::to_string_pretty(&summary)?;
    let p = dir.join(SIMULATE_FILES[2]);
    write_atomic(&p, json.as_bytes()).with_context(|| format!("writing {}", p.display()))?;
    Ok(summary)
}

/// Decay of linkage disequilibrium pooled over replicates, written by [`simulate_to_dir`] on
/// request (`--ld`; needs a mutation model).
pub const LD_FILE: &str = "ld.tsv";

/// r² by distance pooled over loci and replicates: per bin, the mean over all pairs of
/// polymorphic sites (not the mean of per-replicate means), summed serially in replicate order.
#[derive(Debug, Clone, Default)]
pub struct LdAccumulator {
    edges: Vec<u64>,
    sum: Vec<f64>,
    pairs: Vec<u64>,
}

impl LdAccumulator {
    /// An accumulator for the bins between consecutive `edges`.
    pub fn new(edges: &[u64]) -> Self {
        let k = edges.len().saturating_sub(1);
        LdAccumulator { edges: edges.to_vec(), sum: vec![0.0; k], pairs: vec![0; k] }
    }

    /// Adds one locus' bins (from [`crate::stats::ld::ld_decay`] over the same edges).
    pub fn add(&mut self, bins: &[crate::stats::ld::LdBin]) {
        for (k, b) in bins.iter().enumerate() {
            if b.pairs > 0 {
                self.sum[k] += b.mean_r2 * b.pairs as f64;
                self.pairs[k] += b.pairs;
            }
        }
    }

    /// `bin_low bin_high pairs mean_r2` rows (distances in sites, `bin_high` exclusive;
    /// `mean_r2` empty for a bin without pairs).
    pub fn to_tsv(&self) -> String {
        let mut s = String::from("bin_low\tbin_high\tpairs\tmean_r2\n");
        for k in 0..self.sum.len() {
            let mean = (self.pairs[k] > 0).then(|| self.sum[k] / self.pairs[k] as f64);
            s.push_str(&format!("{}\t{}\t{}\t{}\n", self.edges[k], self.edges[k + 1], self.pairs[k], tsv_value(mean)));
        }
        s
    }
}

/// One line of the simulated-versus-predicted table.
#[derive(Debug, Clone, Serialize)]
pub struct Comparison {
    /// Quantity (a column of `replicates.tsv` or `xi_i`).
    pub quantity: String,
    /// Simulated mean.
    pub simulated: Option<f64>,
    /// 95% interval of the simulated mean.
    pub interval: Option<(f64, f64)>,
    /// Predicted value.
    pub predicted: Option<f64>,
    /// Source of the prediction, or why none applies.
    pub source: String,
    /// `agrees`, `differs`, `approximate: not tested` or `no prediction applies` (see
    /// [`verdict`]).
    pub verdict: String,
    /// `exact`, `limit` or `approximate` (`none` without a prediction).
    pub kind: String,
}

/// Relative allowance added to 3 standard errors for a limit prediction: the rule that labels
/// a prediction a limit claims its finite-N error is negligible at the 1% level
/// ([`crate::theory::limits::MIN_DEME_SIZE`]).
pub const LIMIT_TOLERANCE: f64 = 0.01;

/// The verdict of a simulated mean `m` (standard error `se`) against a prediction `p`:
///
/// - exact: `agrees` within 3 standard errors, else `differs`;
/// - limit: `agrees` within 3 standard errors plus 1% of |p|, else `differs`;
/// - approximate: `agrees` within 3 standard errors, else `approximate: not tested` — an
///   approximation (a ratio of expectations, a limit outside its condition) is never
///   reported as `differs`, since the simulator is the reference.
pub fn verdict(m: f64, se: Option<f64>, p: f64, kind: crate::theory::predict::Kind) -> &'static str {
    use crate::theory::predict::Kind;
    let se = se.unwrap_or(0.0);
    let room = match kind {
        Kind::Exact | Kind::Approximate => 3.0 * se,
        Kind::Limit => 3.0 * se + LIMIT_TOLERANCE * p.abs(),
    };
    let close = (m - p).abs() <= room || (m - p).abs() < 1e-9 * p.abs().max(1.0);
    match (close, kind) {
        (true, _) => "agrees",
        (false, Kind::Approximate) => "approximate: not tested",
        (false, _) => "differs",
    }
}

fn compare(
    columns: &[(String, ColumnSummary)],
    sfs: &[ColumnSummary],
    pr: &crate::theory::predict::Prediction,
    one_pair: bool,
) -> Vec<Comparison> {
    use crate::theory::predict::{Kind, Predicted};
    let get = |name: &str| columns.iter().find(|(c, _)| c == name).map(|(_, s)| s.clone());
    let mut rows = Vec::new();
    let line = |quantity: String, sim: Option<ColumnSummary>, pred: Option<Predicted>| -> Option<Comparison> {
        let sim = sim?;
        let (predicted, source, kind) = match &pred {
            Some(p) => (Some(p.value), format!("[{}] {}", p.kind.label(), p.source), p.kind.label().to_string()),
            None => (None, "-".to_string(), "none".to_string()),
        };
        let verdict = match (sim.mean, &pred) {
            (Some(m), Some(p)) => verdict(m, sim.se, p.value, p.kind).to_string(),
            _ => "no prediction applies".to_string(),
        };
        Some(Comparison {
            quantity,
            simulated: sim.mean,
            interval: sim.mean_interval(),
            predicted,
            source,
            verdict,
            kind,
        })
    };
    let mut add = |q: String, sim: Option<ColumnSummary>, pred: Option<Predicted>| rows.extend(line(q, sim, pred));
    add("tmrca".into(), get("tmrca"), pr.tmrca_mean.clone());
    add("total_length".into(), get("total_length"), pr.total_length_mean.clone());
    add("segregating_sites".into(), get("segregating_sites"), pr.segregating_sites_mean.clone());
    add("pi".into(), get("pi"), pr.pi_mean.clone());
    add("theta_w".into(), get("theta_w"), pr.theta_w_mean.clone());
    add("tajima_d".into(), get("tajima_d"), pr.tajima_d_mean.clone());
    add("fay_wu_h".into(), get("fay_wu_h"), pr.fay_wu_h_mean.clone());
    add("haplotypes".into(), get("haplotypes"), pr.haplotypes_mean.clone());
    for (deme, p) in &pr.deme_pi {
        let col = format!("pi_{deme}");
        add(col.clone(), get(&col), Some(p.clone()));
    }
    for (a, b, p) in &pr.sample_fst {
        let col = format!("fst_{a}_{b}");
        add(col.clone(), get(&col), Some(p.clone()));
    }
    if let (Some(p), Some(roots), true) = (&pr.pair_meet_probability, get("roots"), one_pair) {
        // A sample of two at one locus: one root means the lineages met, so P(met) = 2 - E[roots].
        let met = ColumnSummary { mean: roots.mean.map(|m| 2.0 - m), quantiles: None, ..roots };
        let source = format!("{} (the horizon can only lower the simulated value)", p.source);
        add("pair met (2 - roots)".into(), Some(met), Some(Predicted { source, ..p.clone() }));
    }
    if let Some(exp) = &pr.sfs_expected {
        let kind = pr.sfs_kind.unwrap_or(Kind::Approximate);
        let src = pr.sfs_source.clone().unwrap_or_default();
        for (i, (s, e)) in sfs.iter().zip(exp).enumerate().take(5) {
            add(format!("xi_{}", i + 1), Some(s.clone()), Predicted::new(*e, &src, kind, ""));
        }
    }
    rows
}

fn tagged(p: &crate::theory::predict::Predicted) -> String {
    format!("[{}] {}", p.kind.label(), p.source)
}

/// Renders a prediction for the terminal.
pub fn render_prediction(scenario: &crate::scenario::Scenario, p: &crate::theory::predict::Prediction) -> String {
    let mut s = format!(
        "predictions for {:?} ({} sampled, {} loci)\n",
        scenario.name(),
        scenario.samples().len(),
        scenario.loci()
    );
    if let Some(r) = &p.regime {
        s.push_str(&format!("regime of the look-back law: {r}\n"));
    }
    if let Some((holds, why)) = &p.limit_holds {
        s.push_str(&format!(
            "coalescent limit {}: {why}\n  (the condition of every limit: {}; a limit is labelled [limit] where it holds, [approximate] where not)\n",
            if *holds { "holds" } else { "does not hold" },
            crate::theory::limits::CONDITION.trim_start_matches("large-N limit: ")
        ));
    }
    let items = [
        ("E[T] (pairs)", &p.pair_time_mean),
        ("E[T_MRCA]", &p.tmrca_mean),
        ("E[total length]", &p.total_length_mean),
        ("E[S]", &p.segregating_sites_mean),
        ("Var[S] (one locus)", &p.segregating_sites_var),
        ("E[pi]", &p.pi_mean),
        ("E[theta_W]", &p.theta_w_mean),
        ("E[Tajima's D]", &p.tajima_d_mean),
        ("E[Fay & Wu's H]", &p.fay_wu_h_mean),
        ("E[haplotypes]", &p.haplotypes_mean),
        ("P(pair ever meets)", &p.pair_meet_probability),
    ];
    for (name, v) in items {
        match v {
            Some(v) => s.push_str(&format!("{name:<20} {:>14}  {}\n", fmt_num(v.value), tagged(v))),
            None => s.push_str(&format!("{name:<20} {:>14}\n", "-")),
        }
    }
    if let Some(sfs) = &p.sfs_expected {
        let head: Vec<String> = sfs.iter().take(8).map(|x| fmt_num(*x)).collect();
        s.push_str(&format!(
            "E[xi_1..]            {}{}  [{}] {}\n",
            head.join(" "),
            if sfs.len() > 8 { " ..." } else { "" },
            p.sfs_kind.map_or("-", |k| k.label()),
            p.sfs_source.as_deref().unwrap_or("")
        ));
    }
    for (lag, pr) in &p.related_by_lag {
        s.push_str(&format!(
            "P(ever related at lag {lag}) {:>10}  H_lag/(N+S-1) (theory reference §4, §7.1)\n",
            fmt_num(*pr)
        ));
    }
    if !p.pair_times.is_empty() {
        s.push_str("pairs of sampled lineages (time of the common ancestor, generations before the present):\n");
        s.push_str(&format!(
            "  {:<28} {:>12} {:>12}  {:<45} {}\n",
            "pair", "E[T]", "E[diff]", "quantiles 5% 25% 50% 75% 95%", "kind"
        ));
        for pt in &p.pair_times {
            let q: Vec<String> = pt.quantiles.iter().map(|(_, t)| fmt_num(*t)).collect();
            s.push_str(&format!(
                "  {:<28} {:>12} {:>12}  {:<45} {}{}\n",
                format!("{} - {}", pt.a, pt.b),
                fmt_num(pt.mean.value),
                pt.differences.as_ref().map_or("-".to_string(), |d| fmt_num(d.value)),
                if q.is_empty() { "-".to_string() } else { q.join(" ") },
                pt.mean.kind.label(),
                pt.quantile_kind
                    .filter(|k| *k != pt.mean.kind)
                    .map_or(String::new(), |k| format!(" (quantiles {})", k.label())),
            ));
        }
        if let Some(pt) = p.pair_times.first() {
            s.push_str(&format!("  source: {}\n", pt.mean.source));
        }
    }
    for (a, b, t) in &p.deme_pair_times {
        s.push_str(&format!("E[T] pair {a}-{b}: {}\n", fmt_num(*t)));
    }
    for (a, b, f) in &p.fst {
        s.push_str(&format!("F_ST {a}-{b} (ratio of expectations): {}\n", fmt_num(*f)));
    }
    if let Some((k, src)) = &p.deme_pair_source {
        s.push_str(&format!("  [{}] {src}\n", k.label()));
    }
    for (d, v) in &p.deme_pi {
        s.push_str(&format!("E[pi_{d}] (sample pairs in {d}): {}  {}\n", fmt_num(v.value), tagged(v)));
    }
    for (a, b, v) in &p.sample_fst {
        s.push_str(&format!("F_ST {a}-{b} of the sample: {}  [{}]\n", fmt_num(v.value), v.kind.label()));
    }
    for n in &p.notes {
        s.push_str(&format!("note: {n}\n"));
    }
    s
}

/// Renders the simulated-versus-predicted table for the terminal.
pub fn render_comparison(rows: &[Comparison]) -> String {
    if rows.is_empty() {
        return String::new();
    }
    let mut s = String::from(
        "\nsimulated against theory (95% interval of the simulated mean; agrees = within 3 standard errors, plus 1% for a limit; an approximate prediction is never 'differs')\n",
    );
    s.push_str(&format!(
        "{:<20} {:>12} {:>27} {:>12}  {:<24} {}\n",
        "quantity", "simulated", "95% interval", "predicted", "verdict", "source"
    ));
    for r in rows {
        let sim = r.simulated.map_or("-".to_string(), fmt_num);
        let ci = r.interval.map_or("-".to_string(), |(a, b)| format!("[{}, {}]", fmt_num(a), fmt_num(b)));
        let pred = r.predicted.map_or("-".to_string(), fmt_num);
        s.push_str(&format!("{:<20} {sim:>12} {ci:>27} {pred:>12}  {:<24} {}\n", r.quantity, r.verdict, r.source));
    }
    s
}

/// A file streamed to a temporary name and renamed over the final name by [`finish`];
/// dropped unfinished (an error, an interrupted run), it removes its temporary file.
///
/// [`finish`]: StreamFile::finish
pub struct StreamFile {
    /// Buffered writer on the temporary file; its errors name the file.
    pub out: NamedWriter,
    tmp: PathBuf,
    path: PathBuf,
    done: bool,
}

/// A buffered file writer whose errors say which file could not be written (`cannot write
/// runs/x/.replicates.tsv.12.tmp: No space left on device`), keeping the error kind.
pub struct NamedWriter {
    inner: io::BufWriter<fs::File>,
    path: PathBuf,
}

fn named(operation: &str, path: &Path, e: io::Error) -> io::Error {
    io::Error::new(e.kind(), format!("cannot {operation} {}: {e}", path.display()))
}

impl Write for NamedWriter {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.inner.write(buf).map_err(|e| named("write", &self.path, e))
    }
    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush().map_err(|e| named("write", &self.path, e))
    }
}

impl StreamFile {
    /// Starts writing `path`.
    pub fn create(path: &Path) -> io::Result<Self> {
        let tmp = temporary_name(path);
        let f = fs::File::create(&tmp).map_err(|e| named("create", &tmp, e))?;
        let out = NamedWriter { inner: io::BufWriter::new(f), path: tmp.clone() };
        Ok(StreamFile { out, tmp, path: path.to_path_buf(), done: false })
    }

    /// Flushes and syncs the contents under the temporary name, and returns that name (to
    /// record the finished contents before [`StreamFile::finish`] renames them into place).
    pub fn sync(&mut self) -> io::Result<&Path> {
        self.out.flush()?;
        self.out.inner.get_ref().sync_all().map_err(|e| named("write", &self.tmp, e))?;
        Ok(&self.tmp)
    }

    /// Flushes, syncs and renames the file to its final name.
    pub fn finish(mut self) -> io::Result<()> {
        self.out.flush()?;
        self.out.inner.get_ref().sync_all().map_err(|e| named("write", &self.tmp, e))?;
        fs::rename(&self.tmp, &self.path).map_err(|e| named("rename into place", &self.path, e))?;
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
