//! Approximate Bayesian computation (ABC) for dormancy hypotheses, and sampling-design power.
//!
//! - [`prior`]: hypothesis files, i.e. scenario YAML with prior maps in place of numbers.
//! - [`rejection`]: rejection ABC (Pritchard, Seielstad, Perez-Lezaun & Feldman 1999, Mol.
//!   Biol. Evol. 16:1791) for model choice, with MAD scaling of the statistics; optional
//!   multinomial logistic regression adjustment (Beaumont 2008, in *Simulation, Genetics and
//!   Human Prehistory*, McDonald Institute).
//! - [`regression`]: local-linear regression adjustment of accepted parameters (Beaumont,
//!   Zhang & Balding 2002, Genetics 162:2025) and weighted quantiles.
//! - [`design`]: power of candidate sampling designs to reject a null hypothesis.
//! - [`compare`]: the `seedline compare` pipeline and its output files.
//! - [`plot`]: SVG figures.
//!
//! **Streams.** Hypothesis h (its index on the command line, or 0 for the null and 1 for
//! the alternative of `design`) simulates from the master seed [`hypothesis_seed`]`(seed, h)`,
//! where `seed` is the `seed:` of its file (default 1). Simulation i of that hypothesis draws
//! its parameters from [`parameter_rng`] and its loci from [`crate::batch::locus_rng`] with
//! replicate index i, so results depend on (seed, h, i) only, not on the thread count. Two
//! files with the same seed still get different streams because h differs.
//!
//! Only [`load_observed`] knows the layout of `observed.json`.

pub mod compare;
pub mod design;
pub mod plot;
pub mod prior;
pub mod regression;
pub mod rejection;

pub use prior::{Hypothesis, Prior, PriorKind};

use crate::batch::{Keep, locus_rng, master_key, simulate_replicate};
use crate::engine::{Engine, EngineChoice, EngineTally, Scratch};
use crate::scenario::Scenario;
use rand::rngs::ChaCha8Rng;
use rayon::prelude::*;
use serde_json::Value;
use std::path::{Path, PathBuf};

/// Why an ABC or design run could not be done.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A file could not be read.
    // The cause is in the message (not a chained source): every caller prints it once.
    #[error("cannot read {file}: {cause}")]
    Read {
        /// File name.
        file: String,
        /// Cause.
        cause: std::io::Error,
    },
    /// A YAML file could not be parsed.
    #[error("{file}: {message}")]
    Yaml {
        /// File name.
        file: String,
        /// Parser message.
        message: String,
    },
    /// A prior map is wrong.
    #[error("{file}: {path}: {message}")]
    Prior {
        /// File name.
        file: String,
        /// Key path of the prior.
        path: String,
        /// What is wrong and what is allowed.
        message: String,
    },
    /// The hypothesis file is not a valid scenario.
    #[error(transparent)]
    Scenario(#[from] crate::scenario::Error),
    /// The scenario is invalid for some values drawn from the priors.
    #[error("{file}: {}", with_values(values))]
    Draw {
        /// File name.
        file: String,
        /// The drawn values, `path = value`.
        values: String,
        /// The scenario's complaint.
        source: crate::scenario::Error,
    },
    /// The observed-statistics file is wrong.
    #[error("{file}: {message}")]
    Observed {
        /// File name.
        file: String,
        /// What is wrong and what is allowed.
        message: String,
    },
    /// The choice of statistics or of a flag is wrong.
    #[error("{0}")]
    Options(String),
    /// The designs file is wrong.
    #[error("{}", match line { Some(l) => format!("{file}:{l}: {path}: {message}"), None => format!("{file}: {path}: {message}") })]
    Design {
        /// File name.
        file: String,
        /// Key path, e.g. `designs[1].sites`.
        path: String,
        /// Line, when known.
        line: Option<u64>,
        /// What is wrong and what is allowed.
        message: String,
    },
    /// The requested engine cannot run a scenario drawn from the priors.
    #[error("{file}: {}", with_values(values))]
    Engine {
        /// File name.
        file: String,
        /// The drawn values, `path = value`.
        values: String,
        /// Why.
        source: crate::engine::Error,
    },
    /// Mutations could not be placed.
    #[error("{file}: simulation {index}")]
    Simulation {
        /// Hypothesis file.
        file: String,
        /// Simulation index.
        index: u64,
        /// Cause.
        source: crate::mutation::Error,
    },
    /// The thread pool could not be built.
    #[error("could not start {threads} worker threads")]
    Threads {
        /// Threads requested.
        threads: usize,
        /// Cause.
        source: rayon::ThreadPoolBuildError,
    },
    /// An output file could not be written.
    #[error("cannot write {}", path.display())]
    Write {
        /// Path.
        path: PathBuf,
        /// Cause.
        source: std::io::Error,
    },
}

/// The error and all its causes, joined by `: ` (for messages that embed another error).
pub fn full_message(e: &(dyn std::error::Error + 'static)) -> String {
    let mut s = e.to_string();
    let mut cur = e.source();
    while let Some(c) = cur {
        s.push_str(": ");
        s.push_str(&c.to_string());
        cur = c.source();
    }
    s
}

impl Error {
    /// Whether the error is the user's input being wrong (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, Error::Simulation { .. } | Error::Threads { .. } | Error::Write { .. })
    }
}

/// Observed statistics, as read by [`load_observed`].
#[derive(Debug, Clone, PartialEq)]
pub struct ObservedData {
    /// File name.
    pub origin: String,
    /// Statistic names (those of [`crate::stats::stat_columns`] and others present).
    pub names: Vec<String>,
    /// Values aligned with `names` (`None` where undefined).
    pub values: Vec<Option<f64>>,
    /// Unfolded SFS ξ_1..ξ_{n-1}, when the file has one.
    pub sfs: Option<Vec<f64>>,
    /// Folded SFS η_1..η_{n/2}, when the file has one (`eta`).
    pub eta: Option<Vec<f64>>,
    /// Sample size (sequences) of the statistics, when the file says.
    pub sample_size: Option<u32>,
    /// Sampling design: (deme, generations ago, sequences), when the file says.
    pub design: Vec<(String, u64, u32)>,
    /// The loci of the data (`loci` of `observe`), empty when the file has none.
    pub loci: Vec<ObservedLocus>,
    /// Names of the per-locus values (`locus_columns`).
    pub locus_columns: Vec<String>,
}

/// One locus of the observed data, as `observe` wrote it.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservedLocus {
    /// Contig.
    pub contig: String,
    /// 0-based start.
    pub start: u64,
    /// End (exclusive).
    pub end: u64,
    /// Callable sites: the locus length a null simulates.
    pub callable_sites: u64,
    /// Values aligned with [`ObservedData::locus_columns`].
    pub values: Vec<Option<f64>>,
}

impl ObservedData {
    /// The callable length of every locus, when the file records loci: the layout that
    /// `null --like`, `compare` and `design --like` simulate.
    pub fn layout(&self) -> Option<Vec<u64>> {
        (!self.loci.is_empty()).then(|| self.loci.iter().map(|l| l.callable_sites).collect())
    }

    /// The observed value of a statistic: a named one, or `sfs_k` = ξ_k of the SFS.
    pub fn value(&self, name: &str) -> Option<f64> {
        if let Some(k) = sfs_class(name) {
            return self.sfs.as_ref().and_then(|x| x.get(k - 1)).copied();
        }
        self.names.iter().position(|n| n == name).and_then(|i| self.values[i])
    }
}

/// `sfs_k` → k (k >= 1).
pub fn sfs_class(name: &str) -> Option<usize> {
    name.strip_prefix("sfs_").and_then(|k| k.parse::<usize>().ok()).filter(|&k| k >= 1)
}

/// The context of an error for drawn values; without priors, the file itself is at fault.
fn with_values(values: &str) -> String {
    if values.is_empty() { "not a valid hypothesis (scenario) file".to_string() } else { format!("with {values}") }
}

/// Reads an observed-statistics JSON file (see [`parse_observed`]).
pub fn load_observed(path: &Path) -> Result<ObservedData, Error> {
    let origin = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|cause| Error::Read { file: origin.clone(), cause })?;
    parse_observed(&text, &origin)
}

/// Parses observed statistics. Two layouts are accepted:
///
/// - the `observed.json` written by `seedline observe`: `statistics` (name → number or
///   null), `columns` (their order), `xi` (unfolded SFS, or null), `projection.m` (sample
///   size) and `design` (list of `{deme, generations_ago, sequences}`);
/// - a plain `{"statistics": {"name": value, ...}}`, optionally with `"sfs": [ξ_1, ...]`.
pub fn parse_observed(text: &str, origin: &str) -> Result<ObservedData, Error> {
    let bad = |message: String| Error::Observed { file: origin.to_string(), message };
    let v: Value = serde_json::from_str(text).map_err(|e| bad(format!("not JSON: {e}")))?;
    let stats = v.get("statistics").and_then(Value::as_object).ok_or_else(|| {
        bad("no `statistics` map: expected {\"statistics\": {\"pi\": 3.2, ...}} (as written by `seedline observe`)"
            .into())
    })?;
    let mut names: Vec<String> = match v.get("columns").and_then(Value::as_array) {
        Some(cols) => cols.iter().filter_map(Value::as_str).map(str::to_string).collect(),
        None => Vec::new(),
    };
    for k in stats.keys() {
        if !names.contains(k) {
            names.push(k.clone());
        }
    }
    let mut values = Vec::with_capacity(names.len());
    for n in &names {
        values.push(match stats.get(n) {
            None | Some(Value::Null) => None,
            Some(x) => Some(x.as_f64().filter(|x| x.is_finite()).ok_or_else(|| {
                bad(format!("statistics.{n}: {x} is not allowed: a finite number or null is needed"))
            })?),
        });
    }
    let sfs_value = v.get("xi").filter(|x| !x.is_null()).or_else(|| v.get("sfs").filter(|x| !x.is_null()));
    let sfs = match sfs_value {
        None => None,
        Some(x) => {
            let arr = x.as_array().ok_or_else(|| bad("the SFS (`xi` or `sfs`) must be a list of numbers".into()))?;
            let mut out = Vec::with_capacity(arr.len());
            for (i, e) in arr.iter().enumerate() {
                out.push(e.as_f64().filter(|x| x.is_finite() && *x >= 0.0).ok_or_else(|| {
                    bad(format!("SFS entry {i}: {e} is not allowed: a finite number >= 0 is needed"))
                })?);
            }
            Some(out)
        }
    };
    let eta = v.get("eta").and_then(Value::as_array).map(|a| a.iter().filter_map(Value::as_f64).collect());
    let sample_size = v
        .get("projection")
        .and_then(|p| p.get("m"))
        .and_then(Value::as_u64)
        .map(|m| m as u32)
        .or_else(|| sfs.as_ref().map(|x| x.len() as u32 + 1));
    let design = v
        .get("design")
        .and_then(Value::as_array)
        .map(|d| {
            d.iter()
                .filter_map(|e| {
                    Some((
                        e.get("deme")?.as_str()?.to_string(),
                        e.get("generations_ago")?.as_u64()?,
                        e.get("sequences")?.as_u64()? as u32,
                    ))
                })
                .collect()
        })
        .unwrap_or_default();
    let locus_columns: Vec<String> = v
        .get("locus_columns")
        .and_then(Value::as_array)
        .map(|a| a.iter().filter_map(Value::as_str).map(str::to_string).collect())
        .unwrap_or_default();
    let mut loci = Vec::new();
    if let Some(list) = v.get("loci").and_then(Value::as_array) {
        for (i, l) in list.iter().enumerate() {
            let field = |k: &str| l.get(k).and_then(Value::as_u64);
            let (Some(start), Some(end), Some(callable)) = (field("start"), field("end"), field("callable_sites"))
            else {
                return Err(bad(format!("loci[{i}]: needs whole numbers start, end and callable_sites")));
            };
            if callable == 0 {
                return Err(bad(format!("loci[{i}].callable_sites: 0 is not allowed: a locus has at least one site")));
            }
            let values: Vec<Option<f64>> = l
                .get("values")
                .and_then(Value::as_array)
                .map(|a| a.iter().map(|x| x.as_f64().filter(|x| x.is_finite())).collect())
                .unwrap_or_default();
            if values.len() != locus_columns.len() {
                return Err(bad(format!(
                    "loci[{i}].values: {} values for {} locus_columns",
                    values.len(),
                    locus_columns.len()
                )));
            }
            let contig = l.get("contig").and_then(Value::as_str).unwrap_or_default().to_string();
            loci.push(ObservedLocus { contig, start, end, callable_sites: callable, values });
        }
    }
    Ok(ObservedData { origin: origin.to_string(), names, values, sfs, eta, sample_size, design, loci, locus_columns })
}

/// The default statistics: defined for every dataset with segregating sites, and not
/// redundant. θ_W is left out because it is S / a_n for a fixed sample, an exact copy of
/// `segregating_sites` that would make the regressions singular.
pub const DEFAULT_STATISTICS: [&str; 8] =
    ["segregating_sites", "pi", "tajima_d", "fay_wu_h", "haplotypes", "sfs_1", "sfs_2", "sfs_3"];

/// Statistic names a scenario can produce: the statistic columns of
/// [`crate::report::replicate_columns`] and `sfs_1..sfs_{n-1}` (the unfolded SFS summed over
/// loci).
pub fn available_statistics(scenario: &Scenario) -> Vec<String> {
    let mut v: Vec<String> = crate::report::replicate_columns(scenario).into_iter().skip(5).collect();
    v.extend((1..scenario.samples().len()).map(|k| format!("sfs_{k}")));
    v
}

/// One simulated dataset.
#[derive(Debug, Clone, PartialEq)]
pub struct Simulated {
    /// Parameter values drawn from the priors, in prior order.
    pub params: Vec<f64>,
    /// Statistic values, aligned with the requested names.
    pub stats: Vec<Option<f64>>,
    /// Unfolded SFS ξ_1..ξ_{n-1} summed over loci.
    pub sfs: Vec<f64>,
}

/// Master seed of hypothesis `index` from its file's seed:
///
/// ```text
/// seed_h = splitmix64(seed + (index + 1) * 0x9E3779B97F4A7C15)    (wrapping arithmetic)
/// ```
/// (splitmix64: Steele, Lea & Flood 2014), so that two files with the same seed draw
/// independent streams.
pub fn hypothesis_seed(seed: u64, index: u64) -> u64 {
    let mut z = seed.wrapping_add(index.wrapping_add(1).wrapping_mul(0x9E37_79B9_7F4A_7C15));
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// Locus index whose stream is used for parameter draws: above every locus a scenario can
/// have ([`crate::scenario::MAX_LOCI`]), so parameters and genealogies never share words.
pub const PARAMETER_LOCUS: u64 = 1 << 27;

/// The stream from which simulation `index` draws its parameters.
pub fn parameter_rng(key: &[u8; 32], index: u64) -> ChaCha8Rng {
    locus_rng(key, index, PARAMETER_LOCUS)
}

/// Statistic values of one replicate: `names` looked up in [`crate::report::replicate_values`],
/// `sfs_k` from the SFS summed over loci.
pub fn statistic_values(scenario: &Scenario, loci: &[crate::batch::LocusOutcome], names: &[String]) -> Simulated {
    let cols = crate::report::replicate_columns(scenario);
    let vals = crate::report::replicate_values(0, loci, scenario.demes().len());
    let n = scenario.samples().len();
    let mut sfs = vec![0.0; n.saturating_sub(1)];
    for l in loci {
        if let Some(s) = &l.stats {
            for (a, &b) in sfs.iter_mut().zip(&s.sfs) {
                *a += b as f64;
            }
        }
    }
    let stats = names
        .iter()
        .map(|name| match sfs_class(name) {
            Some(k) => sfs.get(k - 1).copied(),
            None => cols.iter().position(|c| c == name).and_then(|i| vals.get(i).copied().flatten()),
        })
        .collect();
    Simulated { params: Vec::new(), stats, sfs }
}

/// Simulates `count` datasets of a hypothesis from master seed `seed` (see the module
/// documentation for the streams), in parallel on `threads` workers (0 = one per core);
/// results are in index order and do not depend on `threads`. Each dataset's scenario (its
/// draw from the priors) runs on the engine that `engine` resolves to for it; the tally
/// says how often each engine ran.
pub fn simulate_hypothesis(
    h: &Hypothesis,
    seed: u64,
    indices: std::ops::Range<u64>,
    names: &[String],
    threads: usize,
    engine: EngineChoice,
    progress: &(dyn Fn() + Sync),
) -> Result<(Vec<Simulated>, EngineTally), Error> {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .map_err(|source| Error::Threads { threads, source })?;
    let key = master_key(seed);
    let runs: Vec<(Simulated, crate::engine::EngineDecision)> = pool.install(|| {
        indices
            .into_par_iter()
            .map_init(Scratch::default, |scratch, i| {
                let mut prng = parameter_rng(&key, i);
                let (params, scenario) = h.draw(&mut prng)?;
                let run = Engine::new(&scenario, engine).map_err(|e| Error::Engine {
                    file: h.origin.clone(),
                    values: h
                        .priors
                        .iter()
                        .zip(&params)
                        .map(|(p, x)| format!("{} = {x}", p.path))
                        .collect::<Vec<_>>()
                        .join(", "),
                    source: e,
                })?;
                let labels: Vec<String> = scenario.samples().iter().map(|s| s.name()).collect();
                let loci = simulate_replicate(&run, scratch, &key, i, Keep::default(), &labels)
                    .map_err(|source| Error::Simulation { file: h.origin.clone(), index: i, source })?;
                progress();
                Ok((Simulated { params, ..statistic_values(&scenario, &loci, names) }, run.decision().clone()))
            })
            .collect::<Result<_, Error>>()
    })?;
    let mut tally = EngineTally::new(engine);
    let table = runs
        .into_iter()
        .map(|(sim, d)| {
            tally.add(&d);
            sim
        })
        .collect();
    Ok((table, tally))
}

/// Resolves the statistics to use: the requested ones (each must be produced by every
/// hypothesis and defined in the observed data), or `defaults` (e.g. [`DEFAULT_STATISTICS`])
/// restricted to those produced and defined (the others are named in the returned notes).
pub fn choose_statistics(
    requested: Option<&[String]>,
    defaults: &[&str],
    scenarios: &[(&str, Scenario)],
    observed: Option<&ObservedData>,
) -> Result<(Vec<String>, Vec<String>), Error> {
    let mut notes = Vec::new();
    let explicit = requested.is_some();
    let list: Vec<String> = match requested {
        Some(r) => r.to_vec(),
        None => defaults.iter().map(|s| s.to_string()).collect(),
    };
    let mut out = Vec::new();
    for name in list {
        let missing: Vec<&str> = scenarios
            .iter()
            .filter(|(_, s)| !available_statistics(s).contains(&name))
            .map(|(origin, _)| *origin)
            .collect();
        if !missing.is_empty() {
            if explicit {
                let avail = scenarios.first().map(|(_, s)| available_statistics(s).join(", ")).unwrap_or_default();
                return Err(Error::Options(format!(
                    "statistic `{name}` is not produced by {} (does the hypothesis have a `mutation:` section?); available: {avail}",
                    missing.join(", ")
                )));
            }
            notes.push(format!("{name} left out: not produced by {}", missing.join(", ")));
            continue;
        }
        if let Some(obs) = observed
            && obs.value(&name).is_none()
        {
            if explicit {
                return Err(Error::Options(format!(
                    "statistic `{name}` is undefined or absent in {}; available there: {}",
                    obs.origin,
                    obs.names.iter().filter(|n| obs.value(n).is_some()).cloned().collect::<Vec<_>>().join(", ")
                )));
            }
            notes.push(format!("{name} left out: undefined or absent in {}", obs.origin));
            continue;
        }
        out.push(name);
    }
    if out.is_empty() {
        return Err(Error::Options(
            "no statistic is left to compare: give `--statistics` with names the hypotheses produce".into(),
        ));
    }
    Ok((out, notes))
}

/// Hypothesis names from file names: the file stem, with `_2`, `_3`, ... appended to repeats.
pub fn unique_names(files: &[String]) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for f in files {
        let stem = Path::new(f).file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_else(|| f.clone());
        let stem: String =
            stem.chars().map(|c| if c.is_alphanumeric() || c == '-' || c == '_' { c } else { '_' }).collect();
        let mut name = stem.clone();
        let mut k = 2;
        while out.contains(&name) {
            name = format!("{stem}_{k}");
            k += 1;
        }
        out.push(name);
    }
    out
}

/// Reads a hypothesis file.
pub fn load_hypothesis(path: &Path, name: &str) -> Result<Hypothesis, Error> {
    let origin = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|cause| Error::Read { file: origin.clone(), cause })?;
    Hypothesis::from_yaml_str(&text, &origin, name)
}

/// Writes a file atomically, mapping the error to [`Error::Write`].
pub(crate) fn write_file(path: &Path, bytes: &[u8]) -> Result<(), Error> {
    crate::report::write_atomic(path, bytes).map_err(|source| Error::Write { path: path.to_path_buf(), source })
}

/// An output directory that writes files atomically and remembers what it wrote.
pub(crate) struct OutDir<'a> {
    dir: &'a Path,
    written: Vec<std::path::PathBuf>,
}

impl<'a> OutDir<'a> {
    /// Creates the directory if needed.
    pub(crate) fn new(dir: &'a Path) -> Result<Self, Error> {
        std::fs::create_dir_all(dir).map_err(|source| Error::Write { path: dir.to_path_buf(), source })?;
        Ok(OutDir { dir, written: Vec::new() })
    }

    /// Writes `dir/name`.
    pub(crate) fn put(&mut self, name: &str, bytes: &[u8]) -> Result<(), Error> {
        let p = self.dir.join(name);
        write_file(&p, bytes)?;
        self.written.push(p);
        Ok(())
    }

    /// The files written, in order.
    pub(crate) fn written(self) -> Vec<std::path::PathBuf> {
        self.written
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn both_observed_layouts_are_read() {
        let observe = r#"{"seedline":"0.1.0","demes":["pond"],"design":[{"deme":"pond","generations_ago":0,"sequences":4,"sequences_in_data":4}],
            "projection":{"mode":"complete","m":4,"n":4},"columns":["segregating_sites","pi","tajima_d"],
            "statistics":{"pi":2.5,"segregating_sites":3,"tajima_d":null},"xi":[1,1,1],"eta":[2,1]}"#;
        let o = parse_observed(observe, "observed.json").unwrap();
        assert_eq!(o.names, ["segregating_sites", "pi", "tajima_d"]);
        assert_eq!(o.values, [Some(3.0), Some(2.5), None]);
        assert_eq!(o.value("sfs_2"), Some(1.0));
        assert_eq!(o.value("sfs_4"), None);
        assert_eq!(o.sample_size, Some(4));
        assert_eq!(o.design, [("pond".to_string(), 0, 4)]);
        let plain = parse_observed(r#"{"statistics": {"pi": 1.5}, "sfs": [2, 0]}"#, "p.json").unwrap();
        assert_eq!(plain.value("pi"), Some(1.5));
        assert_eq!(plain.sample_size, Some(3));
        let e = parse_observed(r#"{"stats": {}}"#, "p.json").unwrap_err().to_string();
        assert!(e.contains("p.json") && e.contains("statistics"), "{e}");
        let e = parse_observed(r#"{"statistics": {"pi": "high"}}"#, "p.json").unwrap_err().to_string();
        assert!(e.contains("statistics.pi"), "{e}");
    }

    #[test]
    fn hypothesis_seeds_differ_by_index_and_seed() {
        assert_ne!(hypothesis_seed(1, 0), hypothesis_seed(1, 1));
        assert_ne!(hypothesis_seed(1, 0), hypothesis_seed(2, 0));
        assert_eq!(hypothesis_seed(5, 3), hypothesis_seed(5, 3));
    }

    #[test]
    fn names_are_made_unique() {
        let n = unique_names(&["a/h.yaml".into(), "b/h.yaml".into(), "x y.yaml".into()]);
        assert_eq!(n, ["h", "h_2", "x_y"]);
    }
}
