//! `seedline compare`: ABC model choice between hypotheses and parameter estimation.
//!
//! 1. K datasets per hypothesis, parameters from the priors (streams: [`super`]).
//! 2. Model choice: every statistic is scaled by its MAD over all simulations of all
//!    hypotheses ([`rejection::scale`]), the ⌊ε · total⌉ closest simulations are accepted,
//!    and P(hypothesis | data) ≈ its share of them, with the binomial Monte-Carlo error.
//!    With [`Adjust::Logistic`] also the multinomial logistic regression estimate (Beaumont
//!    2008) fitted on the accepted, Epanechnikov-weighted. Rejection is the default.
//! 3. Estimation, for each hypothesis with priors, within its own K simulations: scales from
//!    them, the ⌊ε K⌉ closest accepted, Epanechnikov weights, and local-linear regression
//!    adjustment of every parameter (Beaumont, Zhang & Balding 2002).

use super::regression::{self, ParameterPosterior};
use super::rejection::{self, ModelShare};
use super::{Error, Hypothesis, ObservedData, Simulated};
use crate::report::fmt_num;
use crate::report::record::{NamedSeed, Seeds};
use std::fmt::Write as _;
use std::path::Path;

/// Model-choice adjustment.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Adjust {
    /// Plain rejection shares (the default).
    #[default]
    None,
    /// Multinomial logistic regression in addition (Beaumont 2008).
    Logistic,
}

/// Settings of a comparison.
#[derive(Debug, Clone)]
pub struct CompareOptions {
    /// Simulations per hypothesis (K).
    pub simulations: u64,
    /// Fraction of simulations accepted (ε), in (0, 1].
    pub tolerance: f64,
    /// Statistics requested; [`super::DEFAULT_STATISTICS`] when `None`.
    pub statistics: Option<Vec<String>>,
    /// Model-choice adjustment.
    pub adjust: Adjust,
    /// Worker threads (0 = one per core).
    pub threads: usize,
    /// The engine asked for (`--engine`), resolved for each draw from the priors.
    pub engine: crate::engine::EngineChoice,
}

impl Default for CompareOptions {
    fn default() -> Self {
        CompareOptions {
            simulations: 1000,
            tolerance: 0.05,
            statistics: None,
            adjust: Adjust::None,
            threads: 0,
            engine: crate::engine::EngineChoice::Auto,
        }
    }
}

/// An accepted simulation of a hypothesis in the estimation step.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AcceptedDraw {
    /// Simulation index.
    pub simulation: usize,
    /// Scaled distance.
    pub distance: f64,
    /// Epanechnikov weight.
    pub weight: f64,
    /// Parameter values drawn (prior order).
    pub params: Vec<f64>,
}

/// Estimation result of one hypothesis.
#[derive(Debug, Clone, serde::Serialize)]
pub struct Estimation {
    /// Statistic scales within this hypothesis.
    pub scales: Vec<f64>,
    /// Accepted draws, closest first.
    pub accepted: Vec<AcceptedDraw>,
    /// One summary per prior.
    pub parameters: Vec<ParameterPosterior>,
    /// Per statistic, the range [min, max] over the accepted simulations (None: none accepted).
    pub accepted_range: Vec<Option<[f64; 2]>>,
}

/// The analysis of one observed vector against reference tables (no simulation, no I/O).
#[derive(Debug, Clone, serde::Serialize)]
pub struct Analysis {
    /// Scales (MAD over all simulations) of the statistics.
    pub scales: Vec<f64>,
    /// Total simulations accepted in model choice.
    pub accepted: usize,
    /// Rejection shares per hypothesis.
    pub shares: Vec<ModelShare>,
    /// Logistic probabilities and approximate standard errors, when asked for.
    pub logistic: Option<Vec<(f64, f64)>>,
    /// Simulations per hypothesis with an undefined statistic (never accepted).
    pub undefined: Vec<usize>,
    /// Per statistic, the range [min, max] over the simulations accepted in model choice.
    pub accepted_range: Vec<Option<[f64; 2]>>,
    /// Estimation per hypothesis (`None` without priors).
    pub estimation: Vec<Option<Estimation>>,
}

/// Runs model choice and estimation on reference tables, one per hypothesis, aligned with
/// `priors` (the priors of each hypothesis), for the observed statistic vector.
pub fn analyse(
    priors: &[&[super::Prior]],
    tables: &[&[Simulated]],
    observed: &[f64],
    tolerance: f64,
    adjust: Adjust,
) -> Analysis {
    let m = tables.len();
    let rows: Vec<&[Option<f64>]> = tables.iter().flat_map(|t| t.iter().map(|s| s.stats.as_slice())).collect();
    let labels: Vec<usize> = tables.iter().enumerate().flat_map(|(k, t)| std::iter::repeat_n(k, t.len())).collect();
    let scales = rejection::scales(&rows, observed.len());
    let dist: Vec<Option<f64>> = rows.iter().map(|r| rejection::distance(r, observed, &scales)).collect();
    let undefined = (0..m).map(|k| (0..rows.len()).filter(|&i| labels[i] == k && dist[i].is_none()).count()).collect();
    let acc = rejection::closest(&dist, rejection::accepted_count(rows.len(), tolerance));
    let acc_labels: Vec<usize> = acc.iter().map(|&i| labels[i]).collect();
    let shares = rejection::rejection_shares(&acc_labels, m);
    let logistic = (adjust == Adjust::Logistic).then(|| {
        let w = rejection::epanechnikov_weights(&acc.iter().map(|&i| dist[i].unwrap()).collect::<Vec<_>>());
        let x: Vec<Vec<f64>> = acc.iter().map(|&i| rejection::scaled_differences(rows[i], observed, &scales)).collect();
        rejection::logistic_probabilities(&x, &acc_labels, &w, m)
    });
    let estimation =
        priors.iter().zip(tables).map(|(p, t)| (!p.is_empty()).then(|| estimate(p, t, observed, tolerance))).collect();
    let accepted_range = range_of(acc.iter().map(|&i| rows[i]), observed.len());
    Analysis { scales, accepted: acc.len(), shares, logistic, undefined, accepted_range, estimation }
}

/// Per statistic (column), [min, max] over the defined values of `rows`; None without any.
pub fn range_of<'r>(rows: impl Iterator<Item = &'r [Option<f64>]>, columns: usize) -> Vec<Option<[f64; 2]>> {
    let mut out: Vec<Option<[f64; 2]>> = vec![None; columns];
    for r in rows {
        for (slot, v) in out.iter_mut().zip(r) {
            if let Some(v) = *v {
                *slot = Some(slot.map_or([v, v], |[lo, hi]| [lo.min(v), hi.max(v)]));
            }
        }
    }
    out
}

/// Rejection plus local-linear adjustment within one hypothesis's table.
pub fn estimate(priors: &[super::Prior], table: &[Simulated], observed: &[f64], tolerance: f64) -> Estimation {
    let rows: Vec<&[Option<f64>]> = table.iter().map(|s| s.stats.as_slice()).collect();
    let scales = rejection::scales(&rows, observed.len());
    let dist: Vec<Option<f64>> = rows.iter().map(|r| rejection::distance(r, observed, &scales)).collect();
    let acc = rejection::closest(&dist, rejection::accepted_count(rows.len(), tolerance));
    let d: Vec<f64> = acc.iter().map(|&i| dist[i].unwrap()).collect();
    let w = rejection::epanechnikov_weights(&d);
    let x: Vec<Vec<f64>> = acc.iter().map(|&i| rejection::scaled_differences(rows[i], observed, &scales)).collect();
    let parameters = priors
        .iter()
        .enumerate()
        .map(|(j, p)| {
            let theta: Vec<f64> = acc.iter().map(|&i| table[i].params[j]).collect();
            regression::estimate(p, &theta, &x, &w)
        })
        .collect();
    let accepted = acc
        .iter()
        .zip(&d)
        .zip(&w)
        .map(|((&i, &distance), &weight)| AcceptedDraw {
            simulation: i,
            distance,
            weight,
            params: table[i].params.clone(),
        })
        .collect();
    let accepted_range = range_of(acc.iter().map(|&i| rows[i]), observed.len());
    Estimation { scales, accepted, parameters, accepted_range }
}

/// Accepted simulations below which results are flagged (about 50: common practice).
pub const FEW_ACCEPTED: usize = 50;

/// What a [`Warning`] is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum WarningKind {
    /// Fewer than [`FEW_ACCEPTED`] simulations were accepted.
    FewAccepted,
    /// An observed statistic lies outside the range of the accepted simulations.
    ObservedOutsideAccepted,
    /// Too few accepted simulations for the regression adjustment: the posterior is plain
    /// rejection ([`regression::MIN_RESIDUAL_DF`]).
    NoRegression,
}

/// Something the reader must know before trusting a result (printed and in `compare.json`).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Warning {
    /// What it is about.
    pub kind: WarningKind,
    /// The hypothesis whose estimation it concerns; None for model choice (all hypotheses).
    pub hypothesis: Option<String>,
    /// The statistic concerned, if one.
    pub statistic: Option<String>,
    /// Its observed value.
    pub observed: Option<f64>,
    /// Its range [min, max] over the accepted simulations.
    pub accepted_range: Option<[f64; 2]>,
    /// Its range over all simulations of the set (all hypotheses for model choice).
    pub simulated_range: Option<[f64; 2]>,
    /// Simulations accepted in the step concerned.
    pub accepted: usize,
    /// The warning in words.
    pub message: String,
}

fn outside(observed: f64, range: Option<[f64; 2]>) -> bool {
    range.is_some_and(|[lo, hi]| observed < lo || observed > hi)
}

fn range_text(r: Option<[f64; 2]>) -> String {
    r.map_or_else(|| "none".to_string(), |[lo, hi]| format!("[{}, {}]", fmt_num(lo), fmt_num(hi)))
}

/// The warnings of an analysis: for model choice (all hypotheses; left out when a single
/// hypothesis is also estimated, which repeats it) and for each estimation, fewer than
/// [`FEW_ACCEPTED`] accepted, each observed statistic outside the range of the accepted
/// simulations (the regression adjustment then extrapolates), and estimations left
/// unadjusted for want of accepted simulations. `names` are the hypothesis names,
/// `statistics` the statistic names, both aligned with the analysis.
pub fn warnings(
    names: &[String],
    statistics: &[String],
    observed: &[f64],
    tables: &[&[Simulated]],
    analysis: &Analysis,
) -> Vec<Warning> {
    let mut out = Vec::new();
    let cols = observed.len();
    let model_choice = !(names.len() == 1 && analysis.estimation.first().is_some_and(Option::is_some));
    let blank = |kind, hypothesis: Option<&String>, accepted, message| Warning {
        kind,
        hypothesis: hypothesis.cloned(),
        statistic: None,
        observed: None,
        accepted_range: None,
        simulated_range: None,
        accepted,
        message,
    };
    if model_choice {
        let a = analysis.accepted;
        if a < FEW_ACCEPTED {
            out.push(blank(
                WarningKind::FewAccepted,
                None,
                a,
                format!(
                    "model choice: only {a} simulations accepted (fewer than {FEW_ACCEPTED}): the probabilities are \
                     rough; raise --simulations or --tolerance"
                ),
            ));
        }
        let all = range_of(tables.iter().flat_map(|t| t.iter().map(|s| s.stats.as_slice())), cols);
        for (j, name) in statistics.iter().enumerate() {
            let (o, acc) = (observed[j], analysis.accepted_range[j]);
            if outside(o, acc) {
                let beyond_all = if outside(o, all[j]) { ", and of all simulations " } else { "; all simulations: " };
                out.push(Warning {
                    statistic: Some(name.clone()),
                    observed: Some(o),
                    accepted_range: acc,
                    simulated_range: all[j],
                    ..blank(
                        WarningKind::ObservedOutsideAccepted,
                        None,
                        a,
                        format!(
                            "model choice: observed {name} = {} lies outside the range of the {a} accepted simulations \
                             {}{beyond_all}{}: no hypothesis reproduces it closely, the probabilities compare poor fits",
                            fmt_num(o),
                            range_text(acc),
                            range_text(all[j])
                        ),
                    )
                });
            }
        }
    }
    for (k, e) in analysis.estimation.iter().enumerate() {
        let Some(e) = e else { continue };
        let h = &names[k];
        let a = e.accepted.len();
        if a < FEW_ACCEPTED {
            out.push(blank(
                WarningKind::FewAccepted,
                Some(h),
                a,
                format!(
                    "{h}: posterior from only {a} accepted simulations (fewer than {FEW_ACCEPTED}): rough; raise \
                     --simulations or --tolerance"
                ),
            ));
        }
        if e.parameters.first().is_some_and(|p| !p.regression) {
            let p = e.scales.iter().filter(|&&s| s > 0.0).count();
            let positive = e.accepted.iter().filter(|d| d.weight > 0.0).count();
            out.push(blank(
                WarningKind::NoRegression,
                Some(h),
                a,
                format!(
                    "{h}: {positive} accepted simulations of positive weight are too few for the regression on {p} \
                     statistics (it needs {}): posterior from rejection only, not adjusted",
                    p + 1 + regression::MIN_RESIDUAL_DF
                ),
            ));
        }
        let all = range_of(tables[k].iter().map(|s| s.stats.as_slice()), cols);
        for (j, name) in statistics.iter().enumerate() {
            let (o, acc) = (observed[j], e.accepted_range[j]);
            if outside(o, acc) {
                let beyond_all =
                    if outside(o, all[j]) { ", and of all its simulations " } else { "; all its simulations: " };
                out.push(Warning {
                    statistic: Some(name.clone()),
                    observed: Some(o),
                    accepted_range: acc,
                    simulated_range: all[j],
                    ..blank(
                        WarningKind::ObservedOutsideAccepted,
                        Some(h),
                        a,
                        format!(
                            "{h}: observed {name} = {} lies outside the range of its {a} accepted simulations \
                             {}{beyond_all}{}: the regression adjustment extrapolates there",
                            fmt_num(o),
                            range_text(acc),
                            range_text(all[j])
                        ),
                    )
                });
            }
        }
    }
    out
}

impl CompareRun {
    /// The run record with the master seed of every hypothesis.
    pub fn run_record(&self) -> Option<crate::report::record::RunRecord> {
        self.run.as_ref().map(|r| {
            let each = self.hypotheses.iter().zip(&self.seeds);
            r.with_seed(Seeds::Each(each.map(|(h, &key)| NamedSeed::new(&h.name, h.seed, key)).collect()))
        })
    }
}

/// A finished comparison: inputs, simulations and analysis.
#[derive(Debug, Clone)]
pub struct CompareRun {
    /// The run record for `compare.json` (seeds filled in when written).
    pub run: Option<crate::report::record::RunRecord>,
    /// Observed data file.
    pub observed_file: String,
    /// Hypotheses in command-line order.
    pub hypotheses: Vec<Hypothesis>,
    /// Master seed of each hypothesis.
    pub seeds: Vec<u64>,
    /// Statistics used.
    pub statistics: Vec<String>,
    /// Their observed values.
    pub observed: Vec<f64>,
    /// Settings.
    pub options: CompareOptions,
    /// Reference tables.
    pub tables: Vec<Vec<Simulated>>,
    /// How often each engine ran, per hypothesis.
    pub engines: Vec<crate::engine::EngineTally>,
    /// Results.
    pub analysis: Analysis,
    /// What the reader should know.
    pub notes: Vec<String>,
    /// What the reader must check before trusting the results ([`warnings`]).
    pub warnings: Vec<Warning>,
}

/// Checks the options, simulates the reference tables and analyses the observed data.
pub fn run(
    observed: &ObservedData,
    hypotheses: Vec<Hypothesis>,
    options: CompareOptions,
    progress: &(dyn Fn() + Sync),
) -> Result<CompareRun, Error> {
    if !(options.tolerance > 0.0 && options.tolerance <= 1.0) {
        return Err(Error::Options(format!(
            "--tolerance {} is not allowed: a fraction of simulations in (0, 1] is needed",
            options.tolerance
        )));
    }
    if options.simulations < 2 {
        return Err(Error::Options(format!("--simulations {} is not allowed: at least 2", options.simulations)));
    }
    if hypotheses.is_empty() {
        return Err(Error::Options("give at least one hypothesis file with --hypotheses".into()));
    }
    // The hypotheses simulate the observed sample design and loci, when the file records them.
    let mut hypotheses = hypotheses;
    if !observed.design.is_empty() {
        hypotheses = hypotheses.iter().map(|h| h.with_observed_design(&observed.design)).collect::<Result<_, _>>()?;
    }
    if let Some(lengths) = observed.layout() {
        hypotheses = hypotheses.iter().map(|h| h.with_layout(&lengths)).collect::<Result<_, _>>()?;
    }
    let mut examples = Vec::new();
    for h in &hypotheses {
        let s = h.example()?;
        if s.mutation().is_none() {
            return Err(Error::Prior {
                file: h.origin.clone(),
                path: "mutation".into(),
                message: "a hypothesis needs a `mutation:` section to produce statistics".into(),
            });
        }
        let n = s.samples().len() as u32;
        if let Some(m) = observed.sample_size
            && m != n
        {
            return Err(Error::Observed {
                file: observed.origin.clone(),
                message: format!(
                    "the observed statistics are for a sample of {m} sequences, but {} samples {n}: give the hypothesis the observed design{}",
                    h.origin,
                    if observed.design.is_empty() {
                        String::new()
                    } else {
                        format!(
                            " ({})",
                            observed
                                .design
                                .iter()
                                .map(|(d, t, k)| format!("{k} of {d} at {t} generations ago"))
                                .collect::<Vec<_>>()
                                .join(", ")
                        )
                    }
                ),
            });
        }
        examples.push((h.origin.as_str(), s));
    }
    let (statistics, mut notes) =
        super::choose_statistics(options.statistics.as_deref(), &super::DEFAULT_STATISTICS, &examples, Some(observed))?;
    if !observed.design.is_empty() {
        let seqs: u32 = observed.design.iter().map(|g| g.2).sum();
        notes.push(format!("every hypothesis simulates the observed design: {seqs} sequences (haploid genomes)"));
    }
    if let Some(l) = observed.layout() {
        notes.push(format!(
            "every hypothesis simulates the observed {} loci ({} callable sites in all) as its loci",
            l.len(),
            l.iter().sum::<u64>()
        ));
    }
    let obs: Vec<f64> = statistics.iter().map(|s| observed.value(s).expect("checked by choose_statistics")).collect();
    let seeds: Vec<u64> =
        hypotheses.iter().enumerate().map(|(i, h)| super::hypothesis_seed(h.seed, i as u64)).collect();
    let mut tables = Vec::new();
    let mut engines = Vec::new();
    for (h, &seed) in hypotheses.iter().zip(&seeds) {
        let (table, tally) = super::simulate_hypothesis(
            h,
            seed,
            0..options.simulations,
            &statistics,
            options.threads,
            options.engine,
            progress,
        )?;
        tables.push(table);
        engines.push(tally);
    }
    let priors: Vec<&[super::Prior]> = hypotheses.iter().map(|h| h.priors.as_slice()).collect();
    let refs: Vec<&[Simulated]> = tables.iter().map(Vec::as_slice).collect();
    let analysis = analyse(&priors, &refs, &obs, options.tolerance, options.adjust);
    for (h, &u) in hypotheses.iter().zip(&analysis.undefined) {
        if u > 0 {
            notes.push(format!(
                "{}: {u} simulations had an undefined statistic (e.g. Tajima's D with S = 0) and were never accepted",
                h.name
            ));
        }
    }
    let names: Vec<String> = hypotheses.iter().map(|h| h.name.clone()).collect();
    let warnings = warnings(&names, &statistics, &obs, &refs, &analysis);
    Ok(CompareRun {
        run: None,
        observed_file: observed.origin.clone(),
        hypotheses,
        seeds,
        statistics,
        observed: obs,
        options,
        tables,
        engines,
        analysis,
        notes,
        warnings,
    })
}

fn num(x: f64) -> String {
    if x.is_finite() { format!("{x}") } else { String::new() }
}

/// File-name form of a key path: `demes[0].dormancy.alpha` → `demes_0_dormancy_alpha`.
pub fn file_part(path: &str) -> String {
    let s: String = path.chars().map(|c| if c.is_alphanumeric() || c == '-' { c } else { '_' }).collect();
    s.split('_').filter(|p| !p.is_empty()).collect::<Vec<_>>().join("_")
}

/// Output files of [`write`].
pub const COMPARE_FILES: [&str; 5] =
    ["model_probabilities.tsv", "posterior.tsv", "posterior_samples.tsv", "compare.json", "model_probabilities.svg"];

/// Writes the outputs into `dir` (created if needed); returns the files written.
pub fn write(run: &CompareRun, dir: &Path) -> Result<Vec<std::path::PathBuf>, Error> {
    let mut out = super::OutDir::new(dir)?;
    let a = &run.analysis;
    let mut t = String::from("hypothesis\tfile\taccepted\tprobability\tmc_error");
    if a.logistic.is_some() {
        t.push_str("\tlogistic_probability\tlogistic_se");
    }
    t.push('\n');
    for (k, h) in run.hypotheses.iter().enumerate() {
        let s = a.shares[k];
        let _ = write!(t, "{}\t{}\t{}\t{}\t{}", h.name, h.origin, s.accepted, s.probability, s.mc_error);
        if let Some(l) = &a.logistic {
            let _ = write!(t, "\t{}\t{}", l[k].0, l[k].1);
        }
        t.push('\n');
    }
    out.put(COMPARE_FILES[0], t.as_bytes())?;
    let mut p = String::from("hypothesis\tparameter\tmean\tmedian\tlow_95\thigh_95\tprior_low\tprior_high\n");
    let mut samples = String::from("hypothesis\tsimulation\tdistance\tweight\tparameter\tvalue\tadjusted\n");
    for (h, e) in run.hypotheses.iter().zip(&a.estimation) {
        let Some(e) = e else { continue };
        for (j, q) in e.parameters.iter().enumerate() {
            let _ = writeln!(
                p,
                "{}\t{}\t{}\t{}\t{}\t{}\t{}\t{}",
                h.name,
                q.parameter,
                num(q.mean),
                num(q.median),
                num(q.low_95),
                num(q.high_95),
                q.prior_low,
                q.prior_high
            );
            for (d, adj) in e.accepted.iter().zip(&q.adjusted) {
                let _ = writeln!(
                    samples,
                    "{}\t{}\t{}\t{}\t{}\t{}\t{}",
                    h.name,
                    d.simulation,
                    d.distance,
                    d.weight,
                    q.parameter,
                    d.params[j],
                    num(*adj)
                );
            }
        }
    }
    out.put(COMPARE_FILES[1], p.as_bytes())?;
    out.put(COMPARE_FILES[2], samples.as_bytes())?;
    let record = run.run_record();
    let mut json = serde_json::json!({
        "provenance": crate::report::Provenance::current(),
        "observed": run.observed_file,
        "statistics": run.statistics,
        "observed_values": run.observed,
        "scales": a.scales,
        "scale": "MAD x 1.4826 over all simulations (sd when the MAD is 0)",
        "simulations_per_hypothesis": run.options.simulations,
        "tolerance": run.options.tolerance,
        "accepted": a.accepted,
        "adjust": run.options.adjust,
        "hypotheses": run.hypotheses.iter().enumerate().map(|(k, h)| serde_json::json!({
            "name": h.name,
            "file": h.origin,
            "title": h.title(),
            "seed": run.seeds[k],
            "priors": h.priors,
            "accepted": a.shares[k].accepted,
            "probability": a.shares[k].probability,
            "mc_error": a.shares[k].mc_error,
            "logistic": a.logistic.as_ref().map(|l| serde_json::json!({"probability": l[k].0, "se": l[k].1})),
            "undefined_simulations": a.undefined[k],
            "engine": run.engines[k],
            "estimation": a.estimation[k].as_ref().map(|e| serde_json::json!({
                "scales": e.scales,
                "accepted": e.accepted.len(),
                "parameters": e.parameters,
            })),
        })).collect::<Vec<_>>(),
        "notes": run.notes,
        "warnings": run.warnings,
    });
    if let Some(r) = record {
        json["run"] = serde_json::to_value(r).map_err(|e| Error::Options(e.to_string()))?;
    }
    let text = serde_json::to_string_pretty(&json).map_err(|e| Error::Options(e.to_string()))?;
    out.put(COMPARE_FILES[3], text.as_bytes())?;
    let names: Vec<String> = run.hypotheses.iter().map(|h| h.name.clone()).collect();
    out.put(COMPARE_FILES[4], super::plot::model_bars(&names, &a.shares).as_bytes())?;
    for (h, e) in run.hypotheses.iter().zip(&a.estimation) {
        let Some(e) = e else { continue };
        for (q, prior) in e.parameters.iter().zip(&h.priors) {
            let name = format!("posterior_{}_{}.svg", h.name, file_part(&q.parameter));
            out.put(&name, super::plot::posterior_density(&h.name, q, prior).as_bytes())?;
        }
    }
    Ok(out.written())
}

/// A short text report for the terminal.
pub fn render(run: &CompareRun) -> String {
    let a = &run.analysis;
    let mut s = format!(
        "statistics: {}\naccepted {} of {} simulations (tolerance {})\n",
        run.statistics.join(", "),
        a.accepted,
        run.tables.iter().map(Vec::len).sum::<usize>(),
        run.options.tolerance
    );
    for (k, h) in run.hypotheses.iter().enumerate() {
        let sh = a.shares[k];
        let _ = write!(s, "  {:<20} P = {:.3} ± {:.3} (accepted {})", h.name, sh.probability, sh.mc_error, sh.accepted);
        if let Some(l) = &a.logistic {
            let _ = write!(s, "   logistic {:.3} ± {:.3}", l[k].0, l[k].1);
        }
        s.push('\n');
        if let Some(e) = &a.estimation[k] {
            for q in &e.parameters {
                let _ = writeln!(
                    s,
                    "      {}: median {:.4}, 95% [{:.4}, {:.4}] (prior [{}, {}])",
                    q.parameter, q.median, q.low_95, q.high_95, q.prior_low, q.prior_high
                );
            }
        }
    }
    for w in &run.warnings {
        let _ = writeln!(s, "warning: {}", w.message);
    }
    for n in &run.notes {
        let _ = writeln!(s, "note: {n}");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::abc::{Prior, PriorKind};

    fn sim(params: Vec<f64>, stats: &[f64]) -> Simulated {
        Simulated { params, stats: stats.iter().map(|&v| Some(v)).collect(), sfs: vec![] }
    }

    fn names(v: &[&str]) -> Vec<String> {
        v.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn warnings_for_model_choice_outside_and_few() {
        // Source: the warning rules. Two hypotheses without priors: statistic a is 0..39 in
        // the first and 100..139 in the second, b is 0 or 1; the observed a = 200 lies beyond
        // every simulation. 10% of 80 = 8 accepted (< 50), all from the second hypothesis
        // (a = 132..139).
        let t0: Vec<Simulated> = (0..40).map(|i| sim(vec![], &[f64::from(i), f64::from(i % 2)])).collect();
        let t1: Vec<Simulated> = (0..40).map(|i| sim(vec![], &[100.0 + f64::from(i), f64::from(i % 2)])).collect();
        let tables: Vec<&[Simulated]> = vec![&t0, &t1];
        let obs = [200.0, 0.5];
        let a = analyse(&[&[], &[]], &tables, &obs, 0.1, Adjust::None);
        assert_eq!(a.accepted, 8);
        assert_eq!(a.accepted_range[0], Some([132.0, 139.0]));
        let w = warnings(&names(&["h0", "h1"]), &names(&["a", "b"]), &obs, &tables, &a);
        assert_eq!(w.len(), 2, "{w:?}");
        assert_eq!((w[0].kind, w[0].hypothesis.as_deref(), w[0].accepted), (WarningKind::FewAccepted, None, 8));
        assert!(w[0].message.contains("only 8 simulations accepted"), "{}", w[0].message);
        assert_eq!(w[1].kind, WarningKind::ObservedOutsideAccepted);
        assert_eq!(w[1].statistic.as_deref(), Some("a"));
        assert_eq!(
            (w[1].observed, w[1].accepted_range, w[1].simulated_range),
            (Some(200.0), Some([132.0, 139.0]), Some([0.0, 139.0]))
        );
        assert!(w[1].message.contains("and of all simulations [0, 139]"), "{}", w[1].message);
        // b = 0.5 lies inside [0, 1]: no warning for it.
        assert!(w.iter().all(|x| x.statistic.as_deref() != Some("b")));
    }

    #[test]
    fn warnings_for_an_estimation_without_regression() {
        // Source: the warning rules and MIN_RESIDUAL_DF. One hypothesis with a uniform prior
        // on [0, 1], 100 simulations, statistics a = θ + small wiggle and b = (i mod 7);
        // tolerance 0.1: 10 accepted, 9 of positive weight, fewer than 2 + 1 + 10 = 13, so no
        // regression. Observed inside the simulated ranges. Model choice is not repeated for
        // a single estimated hypothesis.
        let prior =
            Prior { path: "x".into(), steps: vec![], kind: PriorKind::Uniform, low: 0.0, high: 1.0, integer: false };
        let t: Vec<Simulated> = (0..100)
            .map(|i| {
                let th = f64::from(i) / 100.0;
                sim(vec![th], &[th + 0.001 * f64::from(i % 3), f64::from(i % 7)])
            })
            .collect();
        let tables: Vec<&[Simulated]> = vec![&t];
        let priors: Vec<&[Prior]> = vec![std::slice::from_ref(&prior)];
        let obs = [0.5, 3.0];
        let a = analyse(&priors, &tables, &obs, 0.1, Adjust::None);
        let e = a.estimation[0].as_ref().unwrap();
        assert_eq!(e.accepted.len(), 10);
        assert!(!e.parameters[0].regression);
        let w = warnings(&names(&["h"]), &names(&["a", "b"]), &obs, &tables, &a);
        let kinds: Vec<WarningKind> = w.iter().map(|x| x.kind).collect();
        assert_eq!(kinds, [WarningKind::FewAccepted, WarningKind::NoRegression], "{w:?}");
        assert!(w.iter().all(|x| x.hypothesis.as_deref() == Some("h")));
        assert!(
            w[1].message.contains("9 accepted simulations of positive weight") && w[1].message.contains("needs 13")
        );
        // With tolerance 0.3 (30 accepted, 29 positive) the regression is made; only the
        // few-accepted warning is left.
        let a = analyse(&priors, &tables, &obs, 0.3, Adjust::None);
        let w = warnings(&names(&["h"]), &names(&["a", "b"]), &obs, &tables, &a);
        assert_eq!(w.iter().map(|x| x.kind).collect::<Vec<_>>(), [WarningKind::FewAccepted]);
    }
}
