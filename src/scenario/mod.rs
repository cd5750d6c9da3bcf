//! Scenario files: parse once into validated types.
//!
//! A YAML file is read into the serde mirror [`RawScenario`] (unknown keys are refused),
//! then [`Scenario::from_raw`] checks every rule and builds the model objects: demes with
//! their [`SizeHistory`] and [`Dormancy`], the [`Migration`] process and the expanded list of
//! sampled individuals. All problems are reported in one go, each with the file, the key
//! path and the line. After that nothing in the crate sees raw input. The format is
//! documented in `docs/scenario-format.md`.

pub mod raw;

pub use raw::RawScenario;

mod recombination;

pub use recombination::{ArgConfig, ArgError};

use crate::demography::{Migration, SizeEpoch, SizeHistory};
use crate::dormancy::{self, Dormancy, SeedAge};
use crate::mutation::MutationModel;
use raw::{RawDeme, RawDormancy, RawMigration, RawSample, RawSize};
use serde_saphyr::Spanned;
use std::fmt;

/// Default master seed.
pub const DEFAULT_SEED: u64 = 1;
/// Default number of replicates.
pub const DEFAULT_REPLICATES: u64 = 100;
/// Default horizon in generations.
pub const DEFAULT_HORIZON: u64 = 1_000_000_000;
/// Largest horizon accepted: times are packed with the deme index into one u64 key.
pub const MAX_HORIZON: u64 = 1_000_000_000_000_000;
/// Largest number of demes.
pub const MAX_DEMES: usize = 1000;
/// Largest number of unlinked loci per replicate.
pub const MAX_LOCI: u64 = 1_000_000;
/// Largest total sample size.
pub const MAX_SAMPLES: usize = 1 << 24;

/// Largest number of migration rates listed by the scenario's `Display` (more are summarised).
pub const MAX_PRINTED_RATES: usize = 60;

/// The scenario embedded in the binary, used when no file is given.
pub const DEMO_YAML: &str = include_str!("../../scenarios/demo.yaml");

/// One problem found in a scenario file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Issue {
    /// Key path, e.g. `demes[1].dormancy.alpha`.
    pub path: String,
    /// Line in the file, when known.
    pub line: Option<u64>,
    /// What is wrong and what is allowed.
    pub message: String,
}

/// Why a scenario could not be read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The YAML could not be parsed into the scenario's shape.
    #[error("{origin}: {message}")]
    Syntax {
        /// File name or `<embedded demo>`.
        origin: String,
        /// The parser's message, with line and column.
        message: String,
    },
    /// The file could not be read.
    #[error("cannot read scenario file {origin}: {reason}")]
    Read {
        /// File name.
        origin: String,
        /// Why (in the message, so not a `source`: the chain would say it twice).
        reason: std::io::Error,
    },
    /// The file parsed but broke the rules.
    #[error("{}", render_issues(origin, issues))]
    Invalid {
        /// File name.
        origin: String,
        /// Every problem found.
        issues: Vec<Issue>,
    },
}

/// Alias used by callers holding several modules' errors.
pub use Error as ScenarioError;

fn render_issues(origin: &str, issues: &[Issue]) -> String {
    let mut s = format!("{origin}: {} problem(s) in the scenario", issues.len());
    for i in issues {
        match i.line {
            Some(l) => s.push_str(&format!("\n  {origin}:{l}: {}: {}", i.path, i.message)),
            None => s.push_str(&format!("\n  {origin}: {}: {}", i.path, i.message)),
        }
    }
    s
}

/// Whether a sampled individual is a growing plant (an individual of its generation) or a
/// dormant seed taken from the bank.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SampleKind {
    /// An individual of the generation at the sampling time.
    Population,
    /// A dormant seed present in the bank at the sampling time.
    Seedbank,
}

/// One sampled individual.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SampledIndividual {
    /// Deme index.
    pub deme: usize,
    /// Sampling time (generations ago).
    pub time: u64,
    /// Plant or seed.
    pub kind: SampleKind,
    /// Label `deme_index`, index counted within the deme over all groups.
    pub label: String,
}

impl SampledIndividual {
    /// The name of this sequence in every output (Newick leaves, VCF columns):
    /// `deme_index_tTIME`, plus `_seed` for a seed-bank sample, so that a leaf says when it
    /// was sampled.
    pub fn name(&self) -> String {
        let seed = if self.kind == SampleKind::Seedbank { "_seed" } else { "" };
        format!("{}_t{}{seed}", self.label, self.time)
    }
}

/// A validated deme.
#[derive(Debug, Clone)]
pub struct Deme {
    name: String,
    size: SizeHistory,
    dormancy: Dormancy,
}

impl Deme {
    /// Identifier.
    pub fn name(&self) -> &str {
        &self.name
    }
    /// Size history.
    pub fn size(&self) -> &SizeHistory {
        &self.size
    }
    /// Dormancy law.
    pub fn dormancy(&self) -> &Dormancy {
        &self.dormancy
    }
}

/// A validated scenario. Build with [`Scenario::from_yaml_str`] or [`Scenario::from_raw`].
#[derive(Debug, Clone)]
pub struct Scenario {
    name: String,
    seed: u64,
    replicates: u64,
    horizon: u64,
    demes: Vec<Deme>,
    migration: Migration,
    samples: Vec<SampledIndividual>,
    /// Seed-age samplers, one per seed-bank sample group: (deme, time) -> sampler.
    seed_ages: Vec<((usize, u64), SeedAge)>,
    mutation: Option<MutationModel>,
    loci: u64,
    locus_lengths: Option<Vec<u64>>,
    recombination: Option<ArgConfig>,
    normalized: RawScenario,
}

impl Scenario {
    /// Parses and validates YAML text; `origin` names the file in messages.
    pub fn from_yaml_str(text: &str, origin: &str) -> Result<Self, Error> {
        let raw: RawScenario = parse_raw(text, origin)?;
        Scenario::from_raw(raw, origin)
    }

    /// The embedded demo scenario.
    pub fn demo() -> Self {
        Scenario::from_yaml_str(DEMO_YAML, "<embedded demo>").expect("the embedded demo scenario is valid")
    }

    /// Validates a raw scenario (after any command-line overrides were merged into it).
    pub fn from_raw(raw: RawScenario, origin: &str) -> Result<Self, Error> {
        let mut v = Validator { issues: Vec::new() };
        let s = v.scenario(&raw);
        match s {
            Some(s) if v.issues.is_empty() => Ok(s),
            _ => Err(Error::Invalid { origin: origin.to_string(), issues: v.issues }),
        }
    }

    /// Free-text name.
    pub fn name(&self) -> &str {
        &self.name
    }
    /// Master seed.
    pub fn seed(&self) -> u64 {
        self.seed
    }
    /// Number of replicates.
    pub fn replicates(&self) -> u64 {
        self.replicates
    }
    /// Generations back before giving up.
    pub fn horizon(&self) -> u64 {
        self.horizon
    }
    /// The demes.
    pub fn demes(&self) -> &[Deme] {
        &self.demes
    }
    /// The backward migration process.
    pub fn migration(&self) -> &Migration {
        &self.migration
    }
    /// Every sampled individual, in file order.
    pub fn samples(&self) -> &[SampledIndividual] {
        &self.samples
    }
    /// The seed-age sampler of the seed-bank samples of deme `deme` at `time`.
    pub fn seed_age(&self, deme: usize, time: u64) -> Option<&SeedAge> {
        let key = if self.demes[deme].dormancy.is_time_dependent() { time } else { 0 };
        self.seed_ages.iter().find(|(k, _)| *k == (deme, key)).map(|(_, s)| s)
    }
    /// The mutation model, when the scenario has one. With per-locus lengths (`loci` as a
    /// list) its `sites` is the longest locus; [`Scenario::locus_mutation`] gives each locus's.
    pub fn mutation(&self) -> Option<&MutationModel> {
        self.mutation.as_ref()
    }
    /// Independent loci per replicate.
    pub fn loci(&self) -> u64 {
        self.loci
    }
    /// Recombination within each locus: `mutation.sites` sites (the longest locus with
    /// per-locus lengths) and the rate per adjacent pair of sites per generation of
    /// reproduction, when the scenario has a `recombination` key.
    pub fn recombination(&self) -> Option<&ArgConfig> {
        self.recombination.as_ref()
    }
    /// The sites of each locus, when `loci` lists them.
    pub fn locus_lengths(&self) -> Option<&[u64]> {
        self.locus_lengths.as_deref()
    }
    /// Sites of locus `locus` (0-based), when the scenario has a mutation model.
    pub fn locus_sites(&self, locus: u64) -> Option<u64> {
        match &self.locus_lengths {
            Some(v) => v.get(locus as usize).copied(),
            None => self.mutation.as_ref().map(MutationModel::sites),
        }
    }
    /// Sites over all loci of a replicate.
    pub fn total_sites(&self) -> Option<u64> {
        match &self.locus_lengths {
            Some(v) => Some(v.iter().sum()),
            None => self.mutation.as_ref().map(|m| m.sites() * self.loci),
        }
    }
    /// The mutation model of locus `locus`: the scenario's rates on that locus's sites.
    pub fn locus_mutation(&self, locus: u64) -> Option<MutationModel> {
        let m = self.mutation.as_ref()?;
        Some(m.with_sites(self.locus_sites(locus)?))
    }
    /// Recombination within locus `locus`: the scenario's rate along that locus's sites.
    pub fn locus_recombination(&self, locus: u64) -> Option<ArgConfig> {
        let r = self.recombination.as_ref()?;
        match self.locus_lengths.as_ref().and_then(|v| v.get(locus as usize)) {
            Some(&sites) => ArgConfig::new(sites, r.recombination_rate()).ok().or(Some(*r)),
            None => Some(*r),
        }
    }
    /// The scenario as parsed, with defaults filled in (for reports).
    pub fn normalized(&self) -> &RawScenario {
        &self.normalized
    }
    /// Index of a deme by name.
    pub fn deme_index(&self, name: &str) -> Option<usize> {
        self.demes.iter().position(|d| d.name == name)
    }
}

/// The text of a scenario file and its name for messages (the path as given).
pub fn read_file(path: &std::path::Path) -> Result<(String, String), Error> {
    let origin = path.display().to_string();
    match std::fs::read_to_string(path) {
        Ok(text) => Ok((text, origin)),
        Err(reason) => Err(Error::Read { origin, reason }),
    }
}

/// Parses YAML into the raw mirror, mapping parser errors to [`Error::Syntax`].
pub fn parse_raw(text: &str, origin: &str) -> Result<RawScenario, Error> {
    serde_saphyr::from_str(text).map_err(|e| {
        let mut message = yaml_message(&e, text);
        // A hypothesis file given where a scenario is needed.
        let line = e.location().map_or(0, |l| l.line() as usize);
        if line > 0 && text.lines().nth(line - 1).is_some_and(|l| l.contains("prior:")) {
            message.push_str(
                "\na prior {prior: ...} is allowed only in a hypothesis file, read by `compare` and `design`",
            );
        }
        Error::Syntax { origin: origin.to_string(), message }
    })
}

/// A YAML reading error in words for the user: `line L, column C, key `k`: what is wrong`
/// and the offending lines, without the parser's Rust type names (`u64`, `RawSize`, ...).
pub fn yaml_message(e: &serde_saphyr::Error, text: &str) -> String {
    let inner = e.without_snippet().to_string();
    // The parser's text is `error: line L column C: message`; keep the message.
    let raw = inner.split_once(": ").map_or(inner.as_str(), |(_, m)| m);
    let raw = match raw.find("column ") {
        Some(i) if raw.starts_with("line ") => raw[i..].split_once(": ").map_or(raw, |(_, m)| m),
        _ => raw,
    };
    let raw = raw.rsplit_once(" at line ").map_or(raw, |(m, _)| m);
    let message = humanise(raw);
    let Some(loc) = e.location().filter(|l| l.line() > 0) else { return message };
    let (line, col) = (loc.line(), loc.column());
    let key = text.lines().nth(line as usize - 1).and_then(|l| key_before(l, col as usize));
    let snippet: Vec<String> = e
        .render()
        .lines()
        .skip(1)
        .filter(|l| !l.contains("<input>"))
        .map(|l| match l.rfind('^') {
            // The caret line repeats the parser's own words: keep only the caret.
            Some(i) => l[..=i].to_string(),
            None => l.to_string(),
        })
        .collect();
    let key = key.map_or(String::new(), |k| format!(", key `{k}`"));
    let mut out = format!("line {line}, column {col}{key}: {message}");
    if !snippet.is_empty() {
        out.push('\n');
        out.push_str(&snippet.join("\n"));
    }
    out
}

/// The key whose value starts at (1-based) `col` of `line`: the last `name:` before it.
fn key_before(line: &str, col: usize) -> Option<String> {
    let prefix: String = line.chars().take(col.saturating_sub(1)).collect();
    let before = prefix.trim_end().strip_suffix(':')?;
    let key: String = before.chars().rev().take_while(|c| c.is_alphanumeric() || *c == '_').collect();
    (!key.is_empty()).then(|| key.chars().rev().collect())
}

/// The parser's words for a type mismatch, in the scenario's terms.
fn humanise(raw: &str) -> String {
    let rules: [(&str, &str); 10] = [
        ("non-finite float", "a finite number is needed (.nan and .inf are not allowed)"),
        (
            "untagged enum RawSize",
            "`size` must be a number of individuals or a list of epochs [{generations_ago: ..., size: ..., growth: ...}]",
        ),
        ("untagged enum", "this value has none of the allowed forms"),
        ("invalid u64", "a whole number >= 0 is needed"),
        ("invalid u32", "a whole number >= 0 is needed"),
        ("invalid usize", "a whole number >= 0 is needed"),
        ("invalid floating point", "a number is needed"),
        ("expected mapping start", "a map of keys (`{key: value, ...}`) is needed here"),
        ("expected sequence start", "a list (`[...]` or `- ` items) is needed here"),
        ("invalid type", "this value has the wrong type"),
    ];
    for (pattern, words) in rules {
        if raw.contains(pattern) {
            return words.to_string();
        }
    }
    // No other Rust names: `struct RawDeme` and the like become plain words.
    let mut out = raw.to_string();
    for (name, words) in [("struct ", "a map "), ("Raw", ""), ("f64", "a number"), ("u64", "a whole number >= 0")] {
        out = out.replace(name, words);
    }
    out
}

struct Validator {
    issues: Vec<Issue>,
}

fn line_of<T>(s: &Spanned<T>) -> Option<u64> {
    let l = s.referenced.line();
    (l > 0).then_some(l)
}

impl Validator {
    fn err(&mut self, path: impl Into<String>, line: Option<u64>, message: impl Into<String>) {
        self.issues.push(Issue { path: path.into(), line, message: message.into() });
    }

    fn whole(&mut self, path: &str, line: Option<u64>, x: f64, min: f64, max: f64) -> Option<u64> {
        if x.is_finite() && x.fract() == 0.0 && x >= min && x <= max {
            Some(x as u64)
        } else {
            self.err(
                path,
                line,
                format!("{x} is not allowed: a whole number of generations in [{min}, {max:e}] is needed"),
            );
            None
        }
    }

    fn scenario(&mut self, raw: &RawScenario) -> Option<Scenario> {
        let seed = raw.seed.unwrap_or(DEFAULT_SEED);
        let replicates = raw.replicates.unwrap_or(DEFAULT_REPLICATES);
        if replicates == 0 {
            self.err("replicates", None, "must be at least 1");
        }
        let horizon = match &raw.horizon {
            Some(h) => self.whole("horizon", line_of(h), h.value, 1.0, MAX_HORIZON as f64).unwrap_or(DEFAULT_HORIZON),
            None => DEFAULT_HORIZON,
        };
        if raw.demes.is_empty() {
            self.err("demes", None, "at least one deme is needed");
        }
        if raw.demes.len() > MAX_DEMES {
            self.err("demes", None, format!("at most {MAX_DEMES} demes are allowed"));
        }
        let mut demes = Vec::new();
        for (i, d) in raw.demes.iter().enumerate() {
            let path = format!("demes[{i}]");
            if let Some(deme) = self.deme(&path, d) {
                if demes.iter().any(|x: &Deme| x.name == deme.name) {
                    self.err(format!("{path}.name"), line_of(d), format!("deme name `{}` is used twice", deme.name));
                }
                demes.push(deme);
            }
        }
        let names: Vec<&str> = raw.demes.iter().map(|d| d.value.name.as_str()).collect();
        let migration = self.migration(&raw.migration, &names);
        let (samples, seed_ages) = self.samples(&raw.samples, &names, &demes, horizon);
        let (loci, locus_lengths) = self.loci(raw.loci.as_ref());
        let listed = matches!(raw.loci.as_ref().map(|l| &l.value), Some(raw::RawLoci::Lengths(_)));
        let mutation = raw.mutation.as_ref().and_then(|m| self.mutation(m, locus_lengths.as_deref(), listed));
        let recombination = raw.recombination.as_ref().and_then(|r| self.recombination(r, mutation.as_ref(), raw));
        if !self.issues.is_empty() {
            return None;
        }
        let mut normalized = raw.clone();
        normalized.seed = Some(seed);
        normalized.replicates = Some(replicates);
        normalized.horizon =
            Some(Spanned::new(horizon as f64, serde_saphyr::Location::UNKNOWN, serde_saphyr::Location::UNKNOWN));
        Some(Scenario {
            name: raw.name.clone().unwrap_or_else(|| "unnamed scenario".to_string()),
            seed,
            replicates,
            horizon,
            demes,
            migration: migration?,
            samples,
            seed_ages,
            mutation,
            loci,
            locus_lengths,
            recombination,
            normalized,
        })
    }

    /// `loci`: a count in 1..=MAX_LOCI, or a list of per-locus site counts.
    fn loci(&mut self, raw: Option<&Spanned<raw::RawLoci>>) -> (u64, Option<Vec<u64>>) {
        let Some(l) = raw else { return (1, None) };
        let line = line_of(l);
        match &l.value {
            raw::RawLoci::Count(k) => {
                if k.is_finite() && k.fract() == 0.0 && *k >= 1.0 && *k <= MAX_LOCI as f64 {
                    (*k as u64, None)
                } else {
                    self.err(
                        "loci",
                        line,
                        format!(
                            "{k} is not allowed: a whole number of loci in 1..={MAX_LOCI}, or a list of per-locus site counts"
                        ),
                    );
                    (1, None)
                }
            }
            raw::RawLoci::Lengths(v) => {
                if v.is_empty() || v.len() as u64 > MAX_LOCI {
                    self.err("loci", line, format!("a list of 1..={MAX_LOCI} per-locus site counts is needed"));
                    return (1, None);
                }
                let mut out = Vec::with_capacity(v.len());
                for (i, &x) in v.iter().enumerate() {
                    if x.is_finite() && x.fract() == 0.0 && (1.0..=1.0e12).contains(&x) {
                        out.push(x as u64);
                    } else {
                        self.err(
                            format!("loci[{i}]"),
                            line,
                            format!("{x} is not allowed: the sites of a locus are a whole number in [1, 1e12]"),
                        );
                    }
                }
                (v.len() as u64, (out.len() == v.len()).then_some(out))
            }
        }
    }

    fn recombination(
        &mut self,
        r: &Spanned<raw::RawRecombination>,
        mutation: Option<&MutationModel>,
        raw: &RawScenario,
    ) -> Option<ArgConfig> {
        let line = line_of(r);
        let rate = r.value.rate;
        let rate_ok = rate.is_finite() && (0.0..=1.0).contains(&rate);
        if !rate_ok {
            self.err(
                "recombination.rate",
                line,
                format!("{rate} is not allowed: a rate per adjacent pair of sites per generation in [0, 1] is needed"),
            );
        }
        if raw.mutation.is_none() {
            self.err(
                "recombination",
                line,
                "recombination needs the sequence length `mutation.sites`: add `mutation: {rate: ..., sites: ...}` \
                 (the rate may be 0)",
            );
        }
        // A `mutation` section that failed has reported its own issues.
        let m = mutation.filter(|_| rate_ok)?;
        match ArgConfig::new(m.sites(), rate) {
            Ok(c) => Some(c),
            Err(e) => {
                self.err("recombination", line, e.to_string());
                None
            }
        }
    }

    fn mutation(
        &mut self,
        m: &Spanned<raw::RawMutation>,
        lengths: Option<&[u64]>,
        listed: bool,
    ) -> Option<MutationModel> {
        let line = line_of(m);
        let r = &m.value;
        let sites = match (r.sites, lengths) {
            // A bad list has reported its own issues.
            (None, None) if listed => None,
            (Some(s), None) => self.whole("mutation.sites", line, s, 1.0, 1.0e12),
            (None, Some(v)) => v.iter().max().copied(),
            (Some(_), Some(_)) => {
                self.err(
                    "mutation.sites",
                    line,
                    "the sites per locus are given twice: keep either `mutation.sites` or the list `loci`",
                );
                None
            }
            (None, None) => {
                self.err(
                    "mutation.sites",
                    line,
                    "missing: give the sites of one locus (`sites: 10000`), or `loci` as a list of per-locus site counts",
                );
                None
            }
        };
        let rate = |v: &mut Self, key: &str, x: Option<f64>| -> Option<f64> {
            match x {
                Some(x) if x.is_finite() && (0.0..=1.0).contains(&x) => Some(x),
                Some(x) => {
                    v.err(
                        format!("mutation.{key}"),
                        line,
                        format!("{x} is not a rate per site per generation in [0, 1]"),
                    );
                    None
                }
                None => None,
            }
        };
        let base = rate(self, "rate", r.rate);
        let repro = rate(self, "reproduction_rate", r.reproduction_rate);
        let dormant = rate(self, "dormant_rate", r.dormant_rate);
        if r.rate.is_none() && r.reproduction_rate.is_none() && r.dormant_rate.is_none() {
            self.err("mutation", line, "give `rate`, or `reproduction_rate` and `dormant_rate`");
            return None;
        }
        let pick = |specific: Option<f64>, given: bool| if given { specific } else { base.or(Some(0.0)) };
        let repro = pick(repro, r.reproduction_rate.is_some())?;
        let dormant = pick(dormant, r.dormant_rate.is_some())?;
        Some(MutationModel::new(sites?, repro, dormant))
    }

    fn deme(&mut self, path: &str, d: &Spanned<RawDeme>) -> Option<Deme> {
        let line = line_of(d);
        let raw = &d.value;
        let name_ok =
            !raw.name.is_empty() && raw.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-');
        if !name_ok {
            self.err(
                format!("{path}.name"),
                line,
                format!("`{}` is not a valid deme name: use letters, digits, `_` or `-`", raw.name),
            );
        }
        let size = self.size(&format!("{path}.size"), line, &raw.size);
        let dormancy = match &raw.dormancy {
            Some(dm) => self.dormancy(&format!("{path}.dormancy"), dm, true),
            None => Some(Dormancy::None),
        };
        Some(Deme { name: raw.name.clone(), size: size?, dormancy: dormancy? })
    }

    fn size(&mut self, path: &str, line: Option<u64>, s: &RawSize) -> Option<SizeHistory> {
        let check_size = |v: &mut Self, p: &str, x: f64| -> Option<f64> {
            if x.is_finite() && x >= 1.0 {
                Some(x)
            } else {
                v.err(p, line, format!("{x} is not allowed: a size is a number of individuals >= 1"));
                None
            }
        };
        match s {
            RawSize::Constant(x) => {
                let x = check_size(self, path, *x)?;
                Some(SizeHistory::from_epochs(vec![SizeEpoch { start: 0, size: x, growth: 0.0 }]))
            }
            RawSize::Epochs(list) => {
                if list.is_empty() {
                    self.err(path, line, "the list of size epochs is empty");
                    return None;
                }
                let mut epochs = Vec::new();
                let mut ok = true;
                for (i, e) in list.iter().enumerate() {
                    let p = format!("{path}[{i}]");
                    let start =
                        self.whole(&format!("{p}.generations_ago"), line, e.generations_ago, 0.0, MAX_HORIZON as f64);
                    let size = check_size(self, &format!("{p}.size"), e.size);
                    let growth = e.growth.unwrap_or(0.0);
                    if !growth.is_finite() {
                        self.err(format!("{p}.growth"), line, "growth must be a finite number");
                        ok = false;
                    }
                    match (start, size) {
                        (Some(start), Some(size)) => epochs.push(SizeEpoch { start, size, growth }),
                        _ => ok = false,
                    }
                }
                if !ok {
                    return None;
                }
                if epochs[0].start != 0 {
                    self.err(
                        format!("{path}[0].generations_ago"),
                        line,
                        "the first epoch must start at 0 (the present)",
                    );
                    return None;
                }
                if epochs.windows(2).any(|w| w[0].start >= w[1].start) {
                    self.err(path, line, "epochs must be listed with strictly increasing generations_ago");
                    return None;
                }
                Some(SizeHistory::from_epochs(epochs))
            }
        }
    }

    fn dormancy(&mut self, path: &str, d: &Spanned<RawDormancy>, top: bool) -> Option<Dormancy> {
        let line = line_of(d);
        let r = &d.value;
        let allowed: &[&str] = match r.law.as_str() {
            "none" => &[],
            "uniform" => &["max"],
            "geometric" => &["mean"],
            "pareto" => &["alpha", "max"],
            "table" => &["weights"],
            "mixture" => &["parts"],
            "since_founding" => &["founded"],
            other => {
                self.err(
                    format!("{path}.law"),
                    line,
                    format!(
                        "unknown law `{other}`: allowed are none, uniform, geometric, pareto, table, mixture, since_founding"
                    ),
                );
                return None;
            }
        };
        let present = [
            ("mean", r.mean.is_some()),
            ("alpha", r.alpha.is_some()),
            ("max", r.max.is_some()),
            ("weights", r.weights.is_some()),
            ("parts", r.parts.is_some()),
            ("founded", r.founded.is_some()),
        ];
        let mut ok = true;
        for (key, is) in present {
            if is && !allowed.contains(&key) {
                self.err(
                    format!("{path}.{key}"),
                    line,
                    format!("key `{key}` does not belong to law `{}` (its keys: {})", r.law, keys_text(allowed)),
                );
                ok = false;
            }
        }
        if top && r.weight.is_some() {
            self.err(format!("{path}.weight"), line, "`weight` is only allowed inside the parts of a mixture");
            ok = false;
        }
        let need = |v: &mut Self, key: &str, x: Option<f64>| -> Option<f64> {
            if x.is_none() {
                v.err(format!("{path}.{key}"), line, format!("law `{}` needs the key `{key}`", r.law));
            }
            x
        };
        let built: Result<Dormancy, dormancy::Error> = match r.law.as_str() {
            "none" => Ok(Dormancy::None),
            "uniform" => {
                let max = need(self, "max", r.max)?;
                let max = self.whole(&format!("{path}.max"), line, max, 1.0, MAX_HORIZON as f64)?;
                dormancy::Uniform::new(max).map(Dormancy::Uniform)
            }
            "geometric" => dormancy::Geometric::new(need(self, "mean", r.mean)?).map(Dormancy::Geometric),
            "pareto" => {
                let max = match r.max {
                    Some(m) => Some(self.whole(&format!("{path}.max"), line, m, 1.0, MAX_HORIZON as f64)?),
                    None => None,
                };
                dormancy::Pareto::new(need(self, "alpha", r.alpha)?, max).map(Dormancy::Pareto)
            }
            "table" => match &r.weights {
                Some(w) => dormancy::Table::new(w).map(Dormancy::Table),
                None => {
                    need(self, "weights", None);
                    return None;
                }
            },
            "since_founding" => {
                let f = need(self, "founded", r.founded)?;
                let f = self.whole(&format!("{path}.founded"), line, f, 1.0, MAX_HORIZON as f64)?;
                dormancy::SinceFounding::new(f).map(Dormancy::SinceFounding)
            }
            "mixture" => {
                let Some(parts) = &r.parts else {
                    need(self, "parts", None);
                    return None;
                };
                let mut built = Vec::new();
                for (i, p) in parts.iter().enumerate() {
                    let pp = format!("{path}.parts[{i}]");
                    let w = match p.value.weight {
                        Some(w) if w.is_finite() && w >= 0.0 => Some(w),
                        Some(w) => {
                            self.err(
                                format!("{pp}.weight"),
                                line_of(p),
                                format!("{w} is not allowed: weights are >= 0"),
                            );
                            None
                        }
                        None => {
                            self.err(format!("{pp}.weight"), line_of(p), "each part of a mixture needs a `weight`");
                            None
                        }
                    };
                    let law = self.dormancy(&pp, p, false);
                    if let (Some(w), Some(law)) = (w, law) {
                        built.push((w, law));
                    }
                }
                if built.len() != parts.len() {
                    return None;
                }
                dormancy::Mixture::new(built).map(Dormancy::Mixture)
            }
            _ => unreachable!("law names were checked above"),
        };
        match built {
            Ok(d) if ok => Some(d),
            Ok(_) => None,
            Err(e) => {
                self.err(path, line, e.to_string());
                None
            }
        }
    }

    fn migration(&mut self, list: &[Spanned<RawMigration>], names: &[&str]) -> Option<Migration> {
        let n = names.len();
        struct Entry {
            from: usize,
            to: usize,
            rate: f64,
            start: u64,
            end: u64,
            idx: usize,
        }
        let mut entries = Vec::new();
        for (i, m) in list.iter().enumerate() {
            let path = format!("migration[{i}]");
            let line = line_of(m);
            let r = &m.value;
            let from = self.deme_ref(&format!("{path}.from"), line, &r.from, names);
            let to = self.deme_ref(&format!("{path}.to"), line, &r.to, names);
            if !(r.rate.is_finite() && (0.0..=1.0).contains(&r.rate)) {
                self.err(format!("{path}.rate"), line, format!("{} is not a probability in [0, 1]", r.rate));
                continue;
            }
            let (start, end) = match &r.generations_ago {
                None => (0, u64::MAX),
                Some(w) if w.len() == 2 => {
                    let a = self.whole(&format!("{path}.generations_ago[0]"), line, w[0], 0.0, MAX_HORIZON as f64);
                    let b = self.whole(&format!("{path}.generations_ago[1]"), line, w[1], 1.0, MAX_HORIZON as f64);
                    match (a, b) {
                        (Some(a), Some(b)) if a < b => (a, b),
                        (Some(_), Some(_)) => {
                            self.err(
                                format!("{path}.generations_ago"),
                                line,
                                "the window [start, end) needs start < end",
                            );
                            continue;
                        }
                        _ => continue,
                    }
                }
                Some(_) => {
                    self.err(format!("{path}.generations_ago"), line, "give the window as [start, end]");
                    continue;
                }
            };
            let (Some(from), Some(to)) = (from, to) else { continue };
            if from == to {
                self.err(path.clone(), line, "`from` and `to` are the same deme: staying put is implied");
                continue;
            }
            for e in &entries {
                let e: &Entry = e;
                if e.from == from && e.to == to && e.start < end && start < e.end {
                    self.err(
                        path.clone(),
                        line,
                        format!(
                            "migration {} -> {} is given twice for overlapping times (see migration[{}])",
                            names[from], names[to], e.idx
                        ),
                    );
                }
            }
            entries.push(Entry { from, to, rate: r.rate, start, end, idx: i });
        }
        let mut cuts: Vec<u64> = vec![0];
        for e in &entries {
            cuts.push(e.start);
            if e.end != u64::MAX {
                cuts.push(e.end);
            }
        }
        cuts.sort_unstable();
        cuts.dedup();
        let mut pieces = Vec::new();
        let mut ok = true;
        for (k, &start) in cuts.iter().enumerate() {
            let end = cuts.get(k + 1).copied().unwrap_or(u64::MAX);
            // Sparse rows: 1000 demes would make dense matrices of a million numbers each.
            let mut rows: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
            for e in entries.iter().filter(|e| e.start <= start && start < e.end) {
                rows[e.from].push((e.to, e.rate));
            }
            for (d, row) in rows.iter().enumerate() {
                let off: f64 = row.iter().map(|&(_, p)| p).sum();
                if off > 1.0 + 1e-12 {
                    let when = if end == u64::MAX {
                        format!("from {start} generations ago on")
                    } else {
                        format!("in [{start}, {end})")
                    };
                    self.err(
                        "migration",
                        None,
                        format!("rates out of deme `{}` sum to {off} {when}: they must sum to at most 1", names[d]),
                    );
                    ok = false;
                }
            }
            pieces.push((start, end, rows));
        }
        ok.then(|| Migration::from_sparse(pieces))
    }

    fn deme_ref(&mut self, path: &str, line: Option<u64>, name: &str, names: &[&str]) -> Option<usize> {
        let idx = names.iter().position(|n| *n == name);
        if idx.is_none() {
            self.err(path, line, format!("unknown deme `{name}` (demes: {})", names.join(", ")));
        }
        idx
    }

    #[allow(clippy::type_complexity)]
    fn samples(
        &mut self,
        list: &[Spanned<RawSample>],
        names: &[&str],
        demes: &[Deme],
        horizon: u64,
    ) -> (Vec<SampledIndividual>, Vec<((usize, u64), SeedAge)>) {
        let mut out: Vec<SampledIndividual> = Vec::new();
        let mut seed_ages: Vec<((usize, u64), SeedAge)> = Vec::new();
        let mut per_deme = vec![0usize; names.len()];
        if list.is_empty() {
            self.err("samples", None, "at least one sample is needed");
        }
        for (i, s) in list.iter().enumerate() {
            let path = format!("samples[{i}]");
            let line = line_of(s);
            let r = &s.value;
            let Some(deme) = self.deme_ref(&format!("{path}.deme"), line, &r.deme, names) else { continue };
            let kind = match r.from.as_deref() {
                None | Some("population") => SampleKind::Population,
                Some("seedbank") => SampleKind::Seedbank,
                Some(other) => {
                    self.err(
                        format!("{path}.from"),
                        line,
                        format!("`{other}` is not allowed: use population or seedbank"),
                    );
                    continue;
                }
            };
            let times: Vec<u64> = match (&r.block, r.count, r.generations_ago) {
                (Some(b), None, None) => {
                    let (Some(a), Some(z)) = (
                        self.whole(&format!("{path}.block.from"), line, b.from, 0.0, horizon as f64),
                        self.whole(&format!("{path}.block.to"), line, b.to, 0.0, horizon as f64),
                    ) else {
                        continue;
                    };
                    if a > z || z - a >= MAX_SAMPLES as u64 {
                        self.err(
                            format!("{path}.block"),
                            line,
                            format!("needs from <= to and at most {MAX_SAMPLES} generations"),
                        );
                        continue;
                    }
                    (a..=z).collect()
                }
                (Some(_), _, _) => {
                    self.err(path.clone(), line, "a `block` sample takes neither `count` nor `generations_ago`");
                    continue;
                }
                (None, Some(c), t) => {
                    let t = match t {
                        Some(t) => match self.whole(&format!("{path}.generations_ago"), line, t, 0.0, horizon as f64) {
                            Some(t) => t,
                            None => continue,
                        },
                        None => 0,
                    };
                    if c == 0 || c as usize > MAX_SAMPLES {
                        self.err(format!("{path}.count"), line, format!("count must be in 1..={MAX_SAMPLES}"));
                        continue;
                    }
                    vec![t; c as usize]
                }
                (None, None, _) => {
                    self.err(path.clone(), line, "a sample needs `count` (or a `block`)");
                    continue;
                }
            };
            if let (Some(d), SampleKind::Seedbank) = (demes.get(deme), kind) {
                // Stationary laws share one sampler per deme; time-dependent ones need one per time.
                let mut keys: Vec<u64> = if d.dormancy.is_time_dependent() { times.clone() } else { vec![0] };
                keys.dedup();
                for t in keys {
                    if seed_ages.iter().any(|(k, _)| *k == (deme, t)) {
                        continue;
                    }
                    match d.dormancy.seed_age_sampler(t) {
                        Ok(s) => seed_ages.push(((deme, t), s)),
                        Err(e) => {
                            self.err(format!("{path}.from"), line, e.to_string());
                            break;
                        }
                    }
                }
            }
            for t in times {
                out.push(SampledIndividual {
                    deme,
                    time: t,
                    kind,
                    label: format!("{}_{}", names[deme], per_deme[deme]),
                });
                per_deme[deme] += 1;
            }
        }
        if out.len() > MAX_SAMPLES {
            self.err("samples", None, format!("{} individuals sampled: at most {MAX_SAMPLES} are allowed", out.len()));
        }
        // A generation holds only N individuals: samples of one (deme, time) cannot exceed it.
        let mut counts: Vec<((usize, u64), usize)> = Vec::new();
        for s in out.iter().filter(|s| s.kind == SampleKind::Population) {
            match counts.iter_mut().find(|(k, _)| *k == (s.deme, s.time)) {
                Some((_, c)) => *c += 1,
                None => counts.push(((s.deme, s.time), 1)),
            }
        }
        for ((d, t), c) in counts {
            if let Some(deme) = demes.get(d) {
                let n = deme.size.at(t);
                if c as u64 > n {
                    self.err(
                        "samples",
                        None,
                        format!(
                            "{c} individuals sampled from deme `{}` at {t} generations ago, but it holds only {n}",
                            names[d]
                        ),
                    );
                }
            }
        }
        (out, seed_ages)
    }
}

fn keys_text(keys: &[&str]) -> String {
    if keys.is_empty() { "none".to_string() } else { keys.join(", ") }
}

impl fmt::Display for Scenario {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "scenario: {}", self.name)?;
        writeln!(f, "seed {}, {} replicates, horizon {} generations", self.seed, self.replicates, self.horizon)?;
        for (i, d) in self.demes.iter().enumerate() {
            let size = match d.size.as_constant() {
                Some(n) => format!("{n}"),
                None => d
                    .size
                    .epochs()
                    .iter()
                    .map(|e| format!("{} from {} (growth {})", e.size, e.start, e.growth))
                    .collect::<Vec<_>>()
                    .join("; "),
            };
            let mean =
                crate::dormancy::LookBack::mean(&d.dormancy).map_or("infinite".to_string(), |m| format!("{m:.4}"));
            let n = self.samples.iter().filter(|s| s.deme == i).count();
            writeln!(
                f,
                "deme {}: size {size}; dormancy {} (mean look-back {mean}); {n} sampled",
                d.name,
                d.dormancy.law_name()
            )?;
        }
        if self.migration.is_active() {
            for e in self.migration.epochs() {
                let end = if e.end() == u64::MAX { "inf".to_string() } else { e.end().to_string() };
                if e.n_demes() <= crate::demography::SMALL_MATRIX {
                    writeln!(f, "migration for child times [{}, {end}):", e.start())?;
                    for (d, row) in e.matrix().iter().enumerate() {
                        let cells: Vec<String> = row.iter().map(|p| format!("{p:.6}")).collect();
                        writeln!(f, "  {:>12}: {}", self.demes[d].name, cells.join("  "))?;
                    }
                } else if e.n_rates() <= MAX_PRINTED_RATES {
                    writeln!(f, "migration for child times [{}, {end}), rates M[from][to] > 0:", e.start())?;
                    for d in 0..e.n_demes() {
                        for &(to, p) in e.row(d) {
                            writeln!(f, "  {} -> {}: {p:.6}", self.demes[d].name, self.demes[to].name)?;
                        }
                    }
                } else {
                    let movers = (0..e.n_demes()).filter(|&d| !e.row(d).is_empty()).count();
                    writeln!(
                        f,
                        "migration for child times [{}, {end}): {} rates between {} demes ({movers} with emigrants); too many to print",
                        e.start(),
                        e.n_rates(),
                        e.n_demes()
                    )?;
                }
            }
        } else {
            writeln!(f, "no migration")?;
        }
        if let Some(v) = &self.locus_lengths {
            let (lo, hi) = (v.iter().min().copied().unwrap_or(0), v.iter().max().copied().unwrap_or(0));
            writeln!(f, "{} loci of {lo}..{hi} sites ({} sites in all)", v.len(), v.iter().sum::<u64>())?;
        } else if self.loci > 1 {
            writeln!(f, "{} unlinked loci", self.loci)?;
        }
        if let Some(r) = &self.recombination {
            let rate = r.recombination_rate();
            let gaps = r.sites().saturating_sub(1) as f64;
            writeln!(
                f,
                "recombination rate {rate:e} per adjacent pair of sites per generation of reproduction, {} sites",
                r.sites()
            )?;
            for d in &self.demes {
                if let Some(n) = d.size.as_constant() {
                    let rho = 2.0 * n as f64 * rate * gaps;
                    writeln!(f, "  deme {}: rho = 2 N r (L - 1) = {rho:.4}", d.name)?;
                    // Dormancy slows coalescence by E[R]^2/d and recombination by E[R] only
                    // (docs/approx-arg.md): on the coalescent clock rho grows by E[R]/d.
                    let mean = crate::dormancy::LookBack::mean(&d.dormancy);
                    if let Some(mean) = mean.filter(|&m| m > 1.0 && !d.dormancy.is_time_dependent()) {
                        let gcd = d.dormancy.support_gcd().max(1) as f64;
                        writeln!(
                            f,
                            "    on the coalescent clock of its dormancy: 2 N r (L - 1) E[R]/d = {:.4}",
                            rho * mean / gcd
                        )?;
                    }
                }
            }
        }
        write!(f, "{} sampled individuals", self.samples.len())
    }
}

#[cfg(test)]
mod tests;
