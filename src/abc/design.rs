//! `seedline design`: the power of candidate sampling designs to reject a null hypothesis
//! when an alternative is true, and the cheapest design reaching a target power.
//!
//! For each design, B datasets under the null give the null distribution of every
//! statistic; P datasets under the alternative are each tested against it with the
//! two-sided empirical p-value
//!
//! ```text
//! p = min(1, 2 · min( (#{null <= x} + 1) / (B + 1), (#{null >= x} + 1) / (B + 1) ))
//! ```
//! (the one-sided (r + 1)/(B + 1) of Davison & Hinkley 1997, *Bootstrap Methods and their
//! Application*, §4.2, doubled); power = share of the P with p <= level. With ties
//! (discrete statistics such as S) the test is conservative. The SFS goodness-of-fit
//! statistic `sfs_chi2` = Σ_k (ξ_k − m_k)² / m_k, m = mean null SFS (classes with m_k > 0),
//! is tested one-sided (large values), its null distribution from the same B datasets
//! (each scored against the mean that includes it). Undefined statistics: left out of the
//! null, and never a rejection under the alternative. Each power has a Wilson score 95%
//! interval (Wilson 1927, JASA 22:209).
//!
//! Streams: the null simulates from [`super::hypothesis_seed`]`(seed of H0, 0)`, the
//! alternative from `(seed of H1, 1)`; the same streams are reused for every design
//! (common random numbers), so differences between designs are not blurred by independent
//! noise.

use super::{Error, Hypothesis};
use crate::report::record::{NamedSeed, Seeds};
use crate::scenario::raw::RawSample;
use serde::Deserialize;
use serde_saphyr::Spanned;
use std::fmt::Write as _;
use std::path::Path;

/// Statistics tested by default (plus [`SFS_CHI2`]).
pub const DEFAULT_DESIGN_STATISTICS: [&str; 5] = ["segregating_sites", "pi", "tajima_d", "fay_wu_h", "haplotypes"];
/// Name of the SFS goodness-of-fit statistic.
pub const SFS_CHI2: &str = "sfs_chi2";

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDesignFile {
    designs: Vec<Spanned<RawDesign>>,
    #[serde(default)]
    costs: Option<Spanned<RawCosts>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDesign {
    name: String,
    samples: Vec<RawSample>,
    #[serde(default)]
    sites: Option<f64>,
    #[serde(default)]
    loci: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCosts {
    #[serde(default)]
    per_individual: Option<f64>,
    #[serde(default)]
    per_layer: Option<f64>,
    #[serde(default)]
    per_site: Option<f64>,
}

/// Cost model: cost = per_individual · individuals + per_layer · layers + per_site · sites · loci.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Costs {
    /// Per sampled individual (sequence).
    pub per_individual: f64,
    /// Per distinct (deme, time) layer sampled.
    pub per_layer: f64,
    /// Per sequenced site (per locus).
    pub per_site: f64,
}

impl Default for Costs {
    /// Without a `costs:` section the cost is the number of individuals.
    fn default() -> Self {
        Costs { per_individual: 1.0, per_layer: 0.0, per_site: 0.0 }
    }
}

/// One candidate design.
#[derive(Debug, Clone, PartialEq)]
pub struct Design {
    /// Name.
    pub name: String,
    /// Samples, in the scenario's syntax (JSON form of the YAML list).
    pub samples: serde_json::Value,
    /// Sites per locus, replacing `mutation.sites`.
    pub sites: Option<u64>,
    /// Loci, replacing `loci`.
    pub loci: Option<u64>,
    /// Line of the design in its file.
    pub line: Option<u64>,
}

/// A designs file.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignFile {
    /// File name.
    pub origin: String,
    /// Candidate designs.
    pub designs: Vec<Design>,
    /// Cost model.
    pub costs: Costs,
}

/// Parses a designs file:
///
/// ```yaml
/// designs:
///   - name: small
///     samples: [{ deme: pond, count: 4 }]      # the scenario's samples syntax
///     sites: 2000                             # optional: replaces mutation.sites
///     loci: 5                                 # optional: replaces loci
/// costs: { per_individual: 1, per_layer: 20, per_site: 0.001 }   # optional
/// ```
pub fn parse_designs(text: &str, origin: &str) -> Result<DesignFile, Error> {
    let raw: RawDesignFile = serde_saphyr::from_str(text)
        .map_err(|e| Error::Yaml { file: origin.to_string(), message: crate::scenario::yaml_message(&e, text) })?;
    let err = |path: String, line: Option<u64>, message: String| Error::Design {
        file: origin.to_string(),
        path,
        line,
        message,
    };
    if raw.designs.is_empty() {
        return Err(err("designs".into(), None, "at least one design is needed".into()));
    }
    let whole = |x: Option<f64>, path: String, line| -> Result<Option<u64>, Error> {
        match x {
            None => Ok(None),
            Some(v) if v.is_finite() && v.fract() == 0.0 && (1.0..=1e12).contains(&v) => Ok(Some(v as u64)),
            Some(v) => Err(err(path, line, format!("{v} is not allowed: a whole number in [1, 1e12] is needed"))),
        }
    };
    let mut designs: Vec<Design> = Vec::new();
    for (i, d) in raw.designs.iter().enumerate() {
        let line = Some(d.referenced.line()).filter(|&l| l > 0);
        let v = &d.value;
        let path = format!("designs[{i}]");
        if v.name.trim().is_empty() {
            return Err(err(format!("{path}.name"), line, "a non-empty name is needed".into()));
        }
        if designs.iter().any(|x| x.name == v.name) {
            return Err(err(format!("{path}.name"), line, format!("design name `{}` is used twice", v.name)));
        }
        if v.samples.is_empty() {
            return Err(err(format!("{path}.samples"), line, "at least one sample group is needed".into()));
        }
        let samples =
            serde_json::to_value(&v.samples).map_err(|e| err(format!("{path}.samples"), line, e.to_string()))?;
        designs.push(Design {
            name: v.name.clone(),
            samples,
            sites: whole(v.sites, format!("{path}.sites"), line)?,
            loci: whole(v.loci, format!("{path}.loci"), line)?,
            line,
        });
    }
    let costs = match &raw.costs {
        None => Costs::default(),
        Some(c) => {
            let line = Some(c.referenced.line()).filter(|&l| l > 0);
            let get = |x: Option<f64>, key: &str| -> Result<f64, Error> {
                match x {
                    None => Ok(0.0),
                    Some(v) if v.is_finite() && v >= 0.0 => Ok(v),
                    Some(v) => {
                        Err(err(format!("costs.{key}"), line, format!("{v} is not allowed: a finite cost >= 0")))
                    }
                }
            };
            Costs {
                per_individual: get(c.value.per_individual, "per_individual")?,
                per_layer: get(c.value.per_layer, "per_layer")?,
                per_site: get(c.value.per_site, "per_site")?,
            }
        }
    };
    Ok(DesignFile { origin: origin.to_string(), designs, costs })
}

pub use crate::null::{p_two_sided, p_upper};

/// z for a two-sided 95% normal interval, Φ⁻¹(0.975).
pub const Z95: f64 = 1.959963984540054;

/// Wilson score interval for k successes in n trials (Wilson 1927):
///
/// ```text
/// centre = (p̂ + z²/(2n)) / (1 + z²/n),  half = z / (1 + z²/n) · sqrt(p̂(1 − p̂)/n + z²/(4n²))
/// ```
/// (0, 1) when n = 0.
pub fn wilson_interval(k: u64, n: u64, z: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let n = n as f64;
    let p = k as f64 / n;
    let z2 = z * z;
    let d = 1.0 + z2 / n;
    let c = (p + z2 / (2.0 * n)) / d;
    let h = z / d * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    ((c - h).max(0.0), (c + h).min(1.0))
}

pub use crate::null::sfs_distance as sfs_chi2;

/// Power of one statistic under one design.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PowerRow {
    /// Design name.
    pub design: String,
    /// Statistic.
    pub statistic: String,
    /// Share of alternative datasets rejected.
    pub power: f64,
    /// Wilson 95% interval.
    pub low_95: f64,
    /// Wilson 95% interval.
    pub high_95: f64,
    /// Design cost.
    pub cost: f64,
    /// Individuals sampled.
    pub individuals: usize,
    /// Null values that were defined (the B of the p-value).
    pub null_defined: usize,
    /// Alternative datasets tested.
    pub alternative: usize,
}

/// Powers of every statistic from null and alternative simulations of one design (pure).
pub fn powers(
    design: &str,
    cost: f64,
    individuals: usize,
    statistics: &[String],
    null: &[super::Simulated],
    alternative: &[super::Simulated],
    level: f64,
) -> Vec<PowerRow> {
    let mut rows = Vec::new();
    let row = |statistic: &str, rejected: usize, null_defined: usize| {
        let (lo, hi) = wilson_interval(rejected as u64, alternative.len() as u64, Z95);
        PowerRow {
            design: design.to_string(),
            statistic: statistic.to_string(),
            power: rejected as f64 / alternative.len().max(1) as f64,
            low_95: lo,
            high_95: hi,
            cost,
            individuals,
            null_defined,
            alternative: alternative.len(),
        }
    };
    for (j, name) in statistics.iter().enumerate() {
        let mut nv: Vec<f64> = null.iter().filter_map(|s| s.stats[j]).collect();
        nv.sort_by(f64::total_cmp);
        let rejected = alternative
            .iter()
            .filter(|s| s.stats[j].is_some_and(|x| !nv.is_empty() && p_two_sided(&nv, x) <= level))
            .count();
        rows.push(row(name, rejected, nv.len()));
    }
    let k = null.first().map_or(0, |s| s.sfs.len());
    let mut mean = vec![0.0; k];
    for s in null {
        for (m, x) in mean.iter_mut().zip(&s.sfs) {
            *m += x / null.len() as f64;
        }
    }
    let mut nx: Vec<f64> = null.iter().map(|s| sfs_chi2(&s.sfs, &mean)).collect();
    nx.sort_by(f64::total_cmp);
    let rejected = alternative.iter().filter(|s| p_upper(&nx, sfs_chi2(&s.sfs, &mean)) <= level).count();
    rows.push(row(SFS_CHI2, rejected, nx.len()));
    rows
}

/// Settings of a design run.
#[derive(Debug, Clone)]
pub struct DesignOptions {
    /// Test level α.
    pub level: f64,
    /// Target power.
    pub target: f64,
    /// Null datasets per design (B).
    pub replicates: u64,
    /// Alternative datasets per design (P).
    pub power_replicates: u64,
    /// Statistics; [`DEFAULT_DESIGN_STATISTICS`] when `None` ([`SFS_CHI2`] is always added).
    pub statistics: Option<Vec<String>>,
    /// Worker threads (0 = one per core).
    pub threads: usize,
    /// Per-locus site counts of observed data (`--like`), applied to every design.
    pub layout: Option<Vec<u64>>,
    /// The engine asked for (`--engine`), resolved for each design and draw from the priors.
    pub engine: crate::engine::EngineChoice,
}

impl Default for DesignOptions {
    fn default() -> Self {
        DesignOptions {
            level: 0.05,
            target: 0.8,
            replicates: 500,
            power_replicates: 200,
            statistics: None,
            threads: 0,
            layout: None,
            engine: crate::engine::EngineChoice::Auto,
        }
    }
}

/// The result of a design run.
#[derive(Debug, Clone)]
pub struct DesignRun {
    /// The run record for `design.json` (seeds filled in when written).
    pub run: Option<crate::report::record::RunRecord>,
    /// Null hypothesis file.
    pub null_file: String,
    /// Alternative hypothesis file.
    pub alternative_file: String,
    /// The `name:` of the null and of the alternative file, if they have one.
    pub titles: (Option<String>, Option<String>),
    /// Designs file.
    pub designs_file: String,
    /// Settings.
    pub options: DesignOptions,
    /// Cost model.
    pub costs: Costs,
    /// Statistics tested (without [`SFS_CHI2`], which is always last in `rows`).
    pub statistics: Vec<String>,
    /// One row per design and statistic.
    pub rows: Vec<PowerRow>,
    /// Master keys of the null and the alternative (derived from their files' seeds).
    pub seeds: (u64, u64),
    /// The seed of the null's file.
    pub null_seed: u64,
    /// The seed of the alternative's file.
    pub alternative_seed: u64,
    /// How often each engine ran: (design, null, alternative), in file order.
    pub engines: Vec<(String, crate::engine::EngineTally, crate::engine::EngineTally)>,
    /// What the reader should know.
    pub notes: Vec<String>,
}

impl DesignRun {
    /// The run record with the master seeds of the null and the alternative.
    pub fn run_record(&self) -> Option<crate::report::record::RunRecord> {
        self.run.as_ref().map(|r| {
            let null = NamedSeed::new("null", self.null_seed, self.seeds.0);
            let alternative = NamedSeed::new("alternative", self.alternative_seed, self.seeds.1);
            r.with_seed(Seeds::Each(vec![null, alternative]))
        })
    }

    /// For each statistic, the cheapest design whose power estimate reaches the target
    /// (ties: the first in the file), or `None`.
    pub fn cheapest(&self) -> Vec<(String, Option<&PowerRow>)> {
        let mut names: Vec<String> = self.statistics.clone();
        names.push(SFS_CHI2.to_string());
        names
            .into_iter()
            .map(|s| {
                let best = self.rows.iter().filter(|r| r.statistic == s && r.power >= self.options.target).fold(
                    None::<&PowerRow>,
                    |b, r| match b {
                        Some(b) if b.cost <= r.cost => Some(b),
                        _ => Some(r),
                    },
                );
                (s, best)
            })
            .collect()
    }
}

/// Cost of a scenario's sampling design under a cost model.
pub fn design_cost(s: &crate::scenario::Scenario, c: &Costs) -> (f64, usize) {
    let n = s.samples().len();
    let mut layers: Vec<(usize, u64)> = s.samples().iter().map(|x| (x.deme, x.time)).collect();
    layers.sort_unstable();
    layers.dedup();
    let sites = s.total_sites().unwrap_or(0) as f64;
    (c.per_individual * n as f64 + c.per_layer * layers.len() as f64 + c.per_site * sites, n)
}

/// Validates the settings, simulates every design under both hypotheses and computes powers.
pub fn run(
    null: &Hypothesis,
    alternative: &Hypothesis,
    designs: &DesignFile,
    options: DesignOptions,
    progress: &(dyn Fn() + Sync),
) -> Result<DesignRun, Error> {
    let o = &options;
    if !(o.level > 0.0 && o.level < 1.0) {
        return Err(Error::Options(format!("--level {} is not allowed: a test level in (0, 1)", o.level)));
    }
    if !(o.target > 0.0 && o.target <= 1.0) {
        return Err(Error::Options(format!("--target {} is not allowed: a power in (0, 1]", o.target)));
    }
    if o.replicates < 1 || o.power_replicates < 1 {
        return Err(Error::Options("--replicates and --power-replicates must be at least 1".into()));
    }
    let mut notes = Vec::new();
    if let Some(l) = &o.layout {
        notes.push(format!(
            "every design simulates the {} observed loci of --like ({} callable sites in all)",
            l.len(),
            l.iter().sum::<u64>()
        ));
    }
    if o.level < 1.0 / (o.replicates as f64 + 1.0) * 2.0 {
        notes.push(format!(
            "with B = {} null replicates the smallest two-sided p-value is {:.4} > level {}: no statistic can reject; raise --replicates",
            o.replicates,
            2.0 / (o.replicates as f64 + 1.0),
            o.level
        ));
    }
    let mut variants = Vec::new();
    for (i, d) in designs.designs.iter().enumerate() {
        if o.layout.is_some() && (d.sites.is_some() || d.loci.is_some()) {
            return Err(Error::Design {
                file: designs.origin.clone(),
                path: format!("designs[{i}] ({})", d.name),
                line: d.line,
                message: "gives `sites` or `loci`, but --like takes the loci from the observed data: drop one".into(),
            });
        }
        let apply = |h: &Hypothesis| {
            let laid = |x: Hypothesis| match &o.layout {
                Some(l) => x.with_layout(l),
                None => Ok(x),
            };
            h.with_design(&d.samples, d.sites, d.loci).and_then(laid).and_then(|x| x.example().map(|s| (x, s))).map_err(
                |e| Error::Design {
                    file: designs.origin.clone(),
                    path: format!("designs[{i}] ({})", d.name),
                    line: d.line,
                    message: format!("applied to {}: {}", h.origin, super::full_message(&e)),
                },
            )
        };
        let (h0, s0) = apply(null)?;
        let (h1, s1) = apply(alternative)?;
        for (h, s) in [(&h0, &s0), (&h1, &s1)] {
            if s.mutation().is_none() {
                return Err(Error::Prior {
                    file: h.origin.clone(),
                    path: "mutation".into(),
                    message: "a hypothesis needs a `mutation:` section to produce statistics".into(),
                });
            }
        }
        variants.push((h0, s0, h1, s1));
    }
    let examples: Vec<(&str, crate::scenario::Scenario)> = variants
        .iter()
        .flat_map(|(h0, s0, h1, s1)| [(h0.origin.as_str(), s0.clone()), (h1.origin.as_str(), s1.clone())])
        .collect();
    let requested = o.statistics.as_ref().map(|v| v.iter().filter(|s| *s != SFS_CHI2).cloned().collect::<Vec<_>>());
    let (statistics, more) = match &requested {
        Some(r) if r.is_empty() => (Vec::new(), Vec::new()),
        r => super::choose_statistics(r.as_deref(), &DEFAULT_DESIGN_STATISTICS, &examples, None)?,
    };
    notes.extend(more);
    let seeds = (super::hypothesis_seed(null.seed, 0), super::hypothesis_seed(alternative.seed, 1));
    let mut rows = Vec::new();
    let mut engines = Vec::new();
    for (d, (h0, s0, h1, _)) in designs.designs.iter().zip(&variants) {
        let (nsim, e0) =
            super::simulate_hypothesis(h0, seeds.0, 0..o.replicates, &statistics, o.threads, o.engine, progress)?;
        let (asim, e1) =
            super::simulate_hypothesis(h1, seeds.1, 0..o.power_replicates, &statistics, o.threads, o.engine, progress)?;
        engines.push((d.name.clone(), e0, e1));
        let (cost, n) = design_cost(s0, &designs.costs);
        rows.extend(powers(&d.name, cost, n, &statistics, &nsim, &asim, o.level));
    }
    Ok(DesignRun {
        run: None,
        null_file: null.origin.clone(),
        alternative_file: alternative.origin.clone(),
        titles: (null.title().map(String::from), alternative.title().map(String::from)),
        designs_file: designs.origin.clone(),
        options,
        costs: designs.costs,
        statistics,
        rows,
        seeds,
        null_seed: null.seed,
        alternative_seed: alternative.seed,
        engines,
        notes,
    })
}

/// Output files of [`write`] besides one `power_<statistic>.svg` per statistic.
pub const DESIGN_FILES: [&str; 2] = ["power.tsv", "design.json"];

/// Writes `power.tsv`, `design.json` and the figures into `dir`; returns the files written.
pub fn write(run: &DesignRun, dir: &Path) -> Result<Vec<std::path::PathBuf>, Error> {
    let mut out = super::OutDir::new(dir)?;
    let mut t = String::from("design\tstatistic\tpower\tlow_95\thigh_95\tcost\n");
    for r in &run.rows {
        let _ = writeln!(t, "{}\t{}\t{}\t{}\t{}\t{}", r.design, r.statistic, r.power, r.low_95, r.high_95, r.cost);
    }
    out.put(DESIGN_FILES[0], t.as_bytes())?;
    let cheapest: Vec<serde_json::Value> = run
        .cheapest()
        .into_iter()
        .map(|(s, r)| serde_json::json!({"statistic": s, "design": r.map(|r| r.design.clone()), "cost": r.map(|r| r.cost), "power": r.map(|r| r.power)}))
        .collect();
    let record = run.run_record();
    let mut json = serde_json::json!({
        "provenance": crate::report::Provenance::current(),
        "null": run.null_file,
        "null_title": run.titles.0,
        "alternative_title": run.titles.1,
        "alternative": run.alternative_file,
        "designs": run.designs_file,
        "seeds": {"null": run.seeds.0, "alternative": run.seeds.1},
        "level": run.options.level,
        "target": run.options.target,
        "null_replicates": run.options.replicates,
        "power_replicates": run.options.power_replicates,
        "costs": run.costs,
        "p_value": "two-sided min(1, 2 min((#null<=x)+1, (#null>=x)+1)/(B+1)); sfs_chi2 upper (#null>=x)+1)/(B+1)",
        "interval": "Wilson score 95%",
        "rows": run.rows,
        "cheapest_reaching_target": cheapest,
        "engines": run.engines.iter().map(|(d, n, a)| serde_json::json!({"design": d, "null": n, "alternative": a})).collect::<Vec<_>>(),
        "notes": run.notes,
    });
    if let Some(r) = record {
        json["run"] = serde_json::to_value(r).map_err(|e| Error::Options(e.to_string()))?;
    }
    let text = serde_json::to_string_pretty(&json).map_err(|e| Error::Options(e.to_string()))?;
    out.put(DESIGN_FILES[1], text.as_bytes())?;
    let mut names = run.statistics.clone();
    names.push(SFS_CHI2.to_string());
    for s in &names {
        let rows: Vec<&PowerRow> = run.rows.iter().filter(|r| &r.statistic == s).collect();
        out.put(
            &format!("power_{}.svg", super::compare::file_part(s)),
            super::plot::power_curve(s, &rows, run.options.target).as_bytes(),
        )?;
    }
    Ok(out.written())
}

/// A short text report for the terminal.
pub fn render(run: &DesignRun) -> String {
    let mut s = format!(
        "level {}, target power {}, B = {} null and P = {} alternative datasets per design\n",
        run.options.level, run.options.target, run.options.replicates, run.options.power_replicates
    );
    let _ = writeln!(s, "{:<16} {:<18} {:>7} {:>17} {:>10}", "design", "statistic", "power", "95% (Wilson)", "cost");
    for r in &run.rows {
        let _ = writeln!(
            s,
            "{:<16} {:<18} {:>7.3} [{:.3}, {:.3}] {:>10}",
            r.design, r.statistic, r.power, r.low_95, r.high_95, r.cost
        );
    }
    for (stat, best) in run.cheapest() {
        match best {
            Some(r) => {
                let _ = writeln!(
                    s,
                    "cheapest design reaching {} with {stat}: {} (cost {})",
                    run.options.target, r.design, r.cost
                );
            }
            None => {
                let _ = writeln!(s, "no design reaches {} with {stat}", run.options.target);
            }
        }
    }
    for n in &run.notes {
        let _ = writeln!(s, "note: {n}");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wilson_against_hand_computed_values() {
        // k = 8, n = 10, z = 1.96: p̂ = 0.8, z² = 3.8416, d = 1.38416,
        // centre = (0.8 + 0.19208)/1.38416 = 0.716738,
        // half = 1.96/1.38416 · sqrt(0.016 + 0.009604) = 1.416021 · 0.160012 = 0.226581,
        // interval (0.490157, 0.943319) (also the textbook value 0.490, 0.943 for 8/10).
        let (lo, hi) = wilson_interval(8, 10, 1.96);
        assert!((lo - 0.490157).abs() < 1e-5 && (hi - 0.943319).abs() < 1e-5, "{lo} {hi}");
        // k = 0, n = 20: centre = half = (z²/40)/(1 + z²/20) = 0.09604/1.19208 = 0.080565,
        // so (0, 0.161130).
        let (lo, hi) = wilson_interval(0, 20, 1.96);
        assert!(lo.abs() < 1e-12 && (hi - 0.161130).abs() < 1e-5, "{hi}");
    }

    #[test]
    fn empirical_p_values_by_hand() {
        // Null 1..=9 (B = 9). x = 9: #<= = 9, #>= = 1, p = 2 · 2/10 = 0.4.
        let null: Vec<f64> = (1..=9).map(f64::from).collect();
        assert!((p_two_sided(&null, 9.0) - 0.4).abs() < 1e-15);
        // x = 100: #>= 0, p = 2 · 1/10 = 0.2 (the smallest possible with B = 9).
        assert!((p_two_sided(&null, 100.0) - 0.2).abs() < 1e-15);
        // x = 5: both sides 5 → 2 · 6/10 > 1 → 1.
        assert_eq!(p_two_sided(&null, 5.0), 1.0);
        // Upper: x = 8.5: #>= 1 → 2/10.
        assert!((p_upper(&null, 8.5) - 0.2).abs() < 1e-15);
    }

    #[test]
    fn chi2_by_hand() {
        // (3−2)²/2 + (0−1)²/1 + class with m = 0 skipped = 0.5 + 1 = 1.5.
        assert!((sfs_chi2(&[3.0, 0.0, 4.0], &[2.0, 1.0, 0.0]) - 1.5).abs() < 1e-15);
    }

    #[test]
    fn designs_file_errors_name_path_and_line() {
        let good = "designs:\n  - name: a\n    samples: [{deme: pond, count: 4}]\n    sites: 500\ncosts: {per_individual: 2, per_layer: 5}\n";
        let f = parse_designs(good, "d.yaml").unwrap();
        assert_eq!(f.designs[0].sites, Some(500));
        assert_eq!(f.costs, Costs { per_individual: 2.0, per_layer: 5.0, per_site: 0.0 });
        for (bad, needle) in [
            (good.replace("sites: 500", "sites: 2.5"), "designs[0].sites"),
            (good.replace("per_layer: 5", "per_layer: -1"), "costs.per_layer"),
            (good.replace("count: 4", "cnt: 4"), "cnt"),
            (
                good.replace("sites: 500", "sites: 500\n  - name: a\n    samples: [{deme: pond, count: 2}]"),
                "used twice",
            ),
        ] {
            let e = parse_designs(&bad, "d.yaml").unwrap_err().to_string();
            assert!(e.contains("d.yaml") && e.contains(needle), "{e}");
        }
        let e = parse_designs(&good.replace("sites: 500", "sites: 0"), "d.yaml").unwrap_err().to_string();
        assert!(e.contains("d.yaml:2:"), "line of the design: {e}");
    }
}
