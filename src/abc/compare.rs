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
    Analysis { scales, accepted: acc.len(), shares, logistic, undefined, estimation }
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
    Estimation { scales, accepted, parameters }
}

/// A finished comparison: inputs, simulations and analysis.
#[derive(Debug, Clone)]
pub struct CompareRun {
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
    if analysis.accepted < 50 {
        notes.push(format!(
            "only {} simulations accepted: model probabilities and posteriors are rough; raise --simulations",
            analysis.accepted
        ));
    }
    Ok(CompareRun {
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
    let json = serde_json::json!({
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
    });
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
    for n in &run.notes {
        let _ = writeln!(s, "note: {n}");
    }
    s
}
