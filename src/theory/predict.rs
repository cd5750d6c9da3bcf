//! Predictions for a scenario, each labelled **exact** (for the discrete model), **limit** (a
//! large-N limit whose condition holds by the rule `auto` uses, [`super::limits::check`]) or
//! **approximate** (a limit outside its condition, or a formula not exact in any limit), with
//! its source and condition; a plain statement of why not where nothing applies.
//!
//! Pairs of lineages, for every pair of sample classes (deme, time, population or seed bank)
//! and every pair of demes:
//! * constant sizes and one migration matrix, look-back laws with a small phase-type form —
//!   the exact discrete two-lineage chain with migration per look-back
//!   ([`super::pair_exact`]): mean, pairwise differences and quantiles of the pair time;
//! * one deme, two individuals of one generation — E\[T_2] = N E\[R]²/d and
//!   E\[π] = 2N E\[R] E\[ν_R]/d, exact (theory reference §3.2–3.3; Kaj, Krone & Lascoux 2001);
//! * otherwise the coalescent limit (KKL time change, migration M/E\[R] per generation, the
//!   seed-bank coalescent, size epochs, ancient samples and seeds; [`super::lineages`]).
//!
//! From the pairs: E\[π] over the sample, per deme, and F_ST (Hudson, Slatkin & Maddison 1992)
//! as a ratio of expectations. The whole sample:
//! * one deme of constant size, sample of the present — the exact discrete Wright–Fisher
//!   chain without dormancy (theory reference §1), Kingman with the KKL time change, or the
//!   seed-bank coalescent (Blath, González Casanova, Kurt & Wilke-Berenguer 2016); E\[ξ_i] =
//!   θ/i (Fu 1995), Watterson (1975), Ewens (1972);
//! * one deme, samples of one time, any size history — Polanski & Kimmel (2003)
//!   ([`super::polanski_kimmel`]);
//! * any other sample of at most [`CHAIN_MAX_SAMPLE`] lineages — the lineage chain of the limit.
//!
//! Infinite-mean dormancy (one deme): the regime (Hammond & Sheffield 2013; Blath, González
//! Casanova, Kurt & Spanò 2013), the time scale, and in the forest regime the probability
//! that two lineages ever meet.

use super::lineages::{LimitSetting, LineageChain, MAX_STATES};
use super::pair_exact::{DiscretePairChain, Entry, SampleClass};
use super::seedbank_coalescent::SeedBankCoalescent;
use super::{kingman, limits, migration_pieces, polanski_kimmel, relatedness, renewal};
use crate::dormancy::{Dormancy, LookBack};
use crate::scenario::{SampleKind, Scenario};
use crate::stats::{TajimaConstants, harmonic, harmonic_squares};
use serde::Serialize;
use std::collections::HashMap;

/// Probabilities at which pair-time quantiles are given.
pub const QUANTILES: [f64; 5] = [0.05, 0.25, 0.5, 0.75, 0.95];

/// Largest sample whose SFS the lineage chain computes when lineages can have several colours
/// (several demes, or active and dormant); a one-colour sample may have up to
/// [`CHAIN_MAX_SAMPLE_ONE_COLOUR`].
pub const CHAIN_MAX_SAMPLE: usize = 12;

/// Largest one-deme sample (one colour) for the lineage chain.
pub const CHAIN_MAX_SAMPLE_ONE_COLOUR: usize = 25;

/// Generations a lineage may wait alone in the exact chain before an older sample joins.
const MAX_ALONE: u64 = 200_000;

/// Work budget (transitions) of the exact forward recursion for quantiles.
const QUANTILE_BUDGET: f64 = 3e8;

/// How a prediction relates to the simulated model.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Kind {
    /// Exact for the discrete model (up to floating point).
    Exact,
    /// A large-N limit whose condition holds for this scenario.
    Limit,
    /// A limit outside its condition, or a formula that is not exact in any limit.
    Approximate,
}

impl Kind {
    /// The word used in tables.
    pub fn label(self) -> &'static str {
        match self {
            Kind::Exact => "exact",
            Kind::Limit => "limit",
            Kind::Approximate => "approximate",
        }
    }
}

/// The condition of an exact prediction.
pub const EXACT_CONDITION: &str = "none (exact for the discrete model)";

/// A predicted value with its source.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Predicted {
    /// The value (generations, or counts per replicate summed over loci).
    pub value: f64,
    /// The published result or exact computation it comes from.
    pub source: String,
    /// Whether it is exact for the discrete model (`kind == Exact`).
    pub exact: bool,
    /// Exact, limit or approximate.
    pub kind: Kind,
    /// The condition under which it holds.
    pub condition: String,
}

impl Predicted {
    /// A prediction of the given kind; `None` when the value is not finite.
    pub fn new(value: f64, source: &str, kind: Kind, condition: &str) -> Option<Predicted> {
        value.is_finite().then(|| Predicted {
            value,
            source: source.to_string(),
            exact: kind == Kind::Exact,
            kind,
            condition: condition.to_string(),
        })
    }

    fn exact(value: f64, source: &str) -> Option<Predicted> {
        Predicted::new(value, source, Kind::Exact, EXACT_CONDITION)
    }
}

/// The pair-time prediction for one pair of sample classes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PairTime {
    /// First class (`deme`, `deme@time`, with ` seed` for seeds from the bank).
    pub a: String,
    /// Second class.
    pub b: String,
    /// E\[time of the pair's common ancestor], generations before the present.
    pub mean: Predicted,
    /// E\[differences between the two sequences] (one locus), with a mutation model.
    pub differences: Option<Predicted>,
    /// (probability, time) quantiles of the common ancestor's time.
    pub quantiles: Vec<(f64, f64)>,
    /// Kind of the quantiles.
    pub quantile_kind: Option<Kind>,
    /// Source of the quantiles.
    pub quantile_source: Option<String>,
}

/// Everything `seedline predict` reports; `None` where no prediction applies (see `notes`).
#[derive(Debug, Clone, Default)]
pub struct Prediction {
    /// E\[T] of the common ancestor of two sampled lineages, averaged over the sample's pairs.
    pub pair_time_mean: Option<Predicted>,
    /// E\[T_MRCA] of the whole sample.
    pub tmrca_mean: Option<Predicted>,
    /// E\[total branch length].
    pub total_length_mean: Option<Predicted>,
    /// E\[ξ_1], ..., E\[ξ_{n-1}] (summed over loci).
    pub sfs_expected: Option<Vec<f64>>,
    /// Source of `sfs_expected`.
    pub sfs_source: Option<String>,
    /// Kind of `sfs_expected`.
    pub sfs_kind: Option<Kind>,
    /// E\[S] (summed over loci).
    pub segregating_sites_mean: Option<Predicted>,
    /// Var\[S] of one locus.
    pub segregating_sites_var: Option<Predicted>,
    /// E\[π] (summed over loci).
    pub pi_mean: Option<Predicted>,
    /// E\[θ_W] = E\[S]/a_n (summed over loci).
    pub theta_w_mean: Option<Predicted>,
    /// E\[Fay & Wu's H] = E\[π] - E\[θ_H] (summed over loci).
    pub fay_wu_h_mean: Option<Predicted>,
    /// Tajima's D at the expected π and S (an approximation of E\[D]).
    pub tajima_d_mean: Option<Predicted>,
    /// E\[number of distinct haplotypes] at one locus.
    pub haplotypes_mean: Option<Predicted>,
    /// Probability that two lineages of the present ever meet, when below 1.
    pub pair_meet_probability: Option<Predicted>,
    /// Forest regime: probability that individuals `lag` generations apart ever share an
    /// ancestor, `(lag, probability)` (H_lag/(N+S-1), theory reference §4 and §7.1).
    pub related_by_lag: Vec<(u64, f64)>,
    /// Pair times of two individuals of the present, `(deme_a, deme_b, E[T])`, every pair of demes.
    pub deme_pair_times: Vec<(String, String, f64)>,
    /// Kind and source of `deme_pair_times` and `fst`.
    pub deme_pair_source: Option<(Kind, String)>,
    /// F_ST of every pair of demes from `deme_pair_times`: 1 - (T_aa + T_bb)/(2 T_ab).
    pub fst: Vec<(String, String, f64)>,
    /// Every pair of the sample's classes.
    pub pair_times: Vec<PairTime>,
    /// E\[π within deme d] over the sample's pairs in d (summed over loci), per deme name.
    pub deme_pi: Vec<(String, Predicted)>,
    /// F_ST of the sample's demes from the expected π within and between them.
    pub sample_fst: Vec<(String, String, Predicted)>,
    /// The regime of the look-back law(s): tree, critical or forest.
    pub regime: Option<String>,
    /// Whether the coalescent limit holds (the rule of `--engine auto`), and why.
    pub limit_holds: Option<(bool, String)>,
    /// Which theory was used, or why none applies.
    pub notes: Vec<String>,
}

impl Prediction {
    /// The JSON form printed by `seedline predict --json`: plain numbers (null where no
    /// prediction applies) under `pair_time_mean`, `tmrca_mean`, `total_length_mean`,
    /// `sfs_expected`, `segregating_sites_mean`, `segregating_sites_var`, `pi_mean`,
    /// `theta_w_mean`, `fay_wu_h_mean`, `tajima_d_mean`, `haplotypes_mean`,
    /// `pair_meet_probability`; their sources under `sources`, exactness under `exact`, kind
    /// (exact, limit, approximate) under `kinds` and condition under `conditions`; plus
    /// `related_by_lag`, `deme_pair_times`, `fst`, `pair_times` (per pair of sample classes:
    /// mean, differences, quantiles, kinds, sources), `deme_pi`, `sample_fst`, `limit`
    /// (`holds`, `reason`), `regime` and `notes`.
    pub fn to_json(&self) -> serde_json::Value {
        use serde_json::{Map, Value, json};
        let fields: [(&str, &Option<Predicted>); 11] = [
            ("pair_time_mean", &self.pair_time_mean),
            ("tmrca_mean", &self.tmrca_mean),
            ("total_length_mean", &self.total_length_mean),
            ("segregating_sites_mean", &self.segregating_sites_mean),
            ("segregating_sites_var", &self.segregating_sites_var),
            ("pi_mean", &self.pi_mean),
            ("theta_w_mean", &self.theta_w_mean),
            ("fay_wu_h_mean", &self.fay_wu_h_mean),
            ("tajima_d_mean", &self.tajima_d_mean),
            ("haplotypes_mean", &self.haplotypes_mean),
            ("pair_meet_probability", &self.pair_meet_probability),
        ];
        let mut out = Map::new();
        let mut sources = Map::new();
        let mut exact = Map::new();
        let mut kinds = Map::new();
        let mut conditions = Map::new();
        for (k, v) in fields {
            out.insert(k.to_string(), v.as_ref().map_or(Value::Null, |p| json!(p.value)));
            if let Some(p) = v {
                sources.insert(k.to_string(), json!(p.source));
                exact.insert(k.to_string(), json!(p.exact));
                kinds.insert(k.to_string(), json!(p.kind));
                conditions.insert(k.to_string(), json!(p.condition));
            }
        }
        out.insert("sfs_expected".into(), json!(self.sfs_expected));
        if let Some(src) = &self.sfs_source {
            sources.insert("sfs_expected".into(), json!(src));
        }
        if let Some(k) = self.sfs_kind {
            kinds.insert("sfs_expected".into(), json!(k));
            exact.insert("sfs_expected".into(), json!(k == Kind::Exact));
        }
        if let Some((k, src)) = &self.deme_pair_source {
            for key in ["deme_pair_times", "fst"] {
                sources.insert(key.into(), json!(src));
                kinds.insert(key.into(), json!(k));
                exact.insert(key.into(), json!(*k == Kind::Exact));
            }
        }
        out.insert("sources".into(), Value::Object(sources));
        out.insert("exact".into(), Value::Object(exact));
        out.insert("kinds".into(), Value::Object(kinds));
        out.insert("conditions".into(), Value::Object(conditions));
        out.insert("related_by_lag".into(), json!(self.related_by_lag));
        out.insert("deme_pair_times".into(), json!(self.deme_pair_times));
        out.insert("fst".into(), json!(self.fst));
        let pairs: Vec<Value> = self
            .pair_times
            .iter()
            .map(|p| {
                let q: Map<String, Value> = p.quantiles.iter().map(|(q, t)| (format!("{q}"), json!(t))).collect();
                json!({
                    "a": p.a, "b": p.b,
                    "mean": p.mean.value, "kind": p.mean.kind, "source": p.mean.source, "condition": p.mean.condition,
                    "differences": p.differences.as_ref().map(|d| d.value),
                    "differences_kind": p.differences.as_ref().map(|d| d.kind),
                    "quantiles": q, "quantile_kind": p.quantile_kind, "quantile_source": p.quantile_source,
                })
            })
            .collect();
        out.insert("pair_times".into(), Value::Array(pairs));
        let row =
            |p: &Predicted| json!({"value": p.value, "kind": p.kind, "source": p.source, "condition": p.condition});
        out.insert(
            "deme_pi".into(),
            Value::Array(self.deme_pi.iter().map(|(d, p)| json!({"deme": d, "prediction": row(p)})).collect()),
        );
        out.insert(
            "sample_fst".into(),
            Value::Array(
                self.sample_fst.iter().map(|(a, b, p)| json!({"a": a, "b": b, "prediction": row(p)})).collect(),
            ),
        );
        out.insert(
            "limit".into(),
            self.limit_holds.as_ref().map_or(Value::Null, |(h, r)| json!({"holds": h, "reason": r})),
        );
        out.insert("regime".into(), json!(self.regime));
        out.insert("notes".into(), json!(self.notes));
        Value::Object(out)
    }
}

/// Predictions for a scenario (pure; never simulates).
pub fn predict(s: &Scenario) -> Prediction {
    let mut out = predict_without_recombination(s);
    if s.locus_lengths().is_some_and(|v| v.iter().any(|&x| x != v[0])) {
        out.haplotypes_mean = None;
        out.segregating_sites_var = None;
        out.notes.push(
            "loci of different lengths: means of sums (S, pi, the SFS) add up over loci; E[haplotypes] and Var[S] are per-locus quantities, so none is given".into(),
        );
    }
    if s.recombination().is_some_and(|r| r.recombination_rate() > 0.0 && r.sites() > 1) {
        // Every site has the genealogy of the model without recombination, so means of sums
        // over sites still hold; haplotype counts and Var[S] depend on the linkage.
        out.haplotypes_mean = None;
        out.segregating_sites_var = None;
        out.notes.push(
            "recombination within the locus: means of T_MRCA, length, S, pi and the SFS still apply (each site has the genealogy of the model without recombination); E[haplotypes] and Var[S] assume no recombination, so none is given".into(),
        );
    }
    out
}

/// Generations from sampling a seed of the bank to its parent: 1 + E\[A] with
/// P(A = a) = P(R > a)/E\[R], so E\[A] = (E\[R²] - E\[R]) / (2 E\[R]); `None` when infinite.
fn seed_delay(law: &Dormancy) -> Option<f64> {
    let mean = law.mean()?;
    let m2 = second_moment(law)?;
    Some(1.0 + (m2 - mean) / (2.0 * mean))
}

/// E\[R²], `None` when infinite or for a time-dependent law.
fn second_moment(law: &Dormancy) -> Option<f64> {
    match law {
        Dormancy::None => Some(1.0),
        Dormancy::Geometric(g) => Some((2.0 - g.p()) / (g.p() * g.p())),
        Dormancy::Mixture(m) => m.parts().iter().map(|(w, d)| second_moment(d).map(|x| w * x)).sum(),
        Dormancy::SinceFounding(_) => None,
        Dormancy::Pareto(p) if p.max().is_none() => {
            // E[R²] = Σ_k (2k - 1) P(R >= k) with P(R >= k) = k^-α: the sum to K plus the
            // integral of the tail (converges only for α > 2).
            let a = p.alpha();
            if a <= 2.0 {
                return None;
            }
            let k_max = 100_000.0f64;
            let head: f64 = (1..100_000u64).map(|k| (2.0 * k as f64 - 1.0) * (k as f64).powf(-a)).sum();
            Some(head + 2.0 * k_max.powf(2.0 - a) / (a - 2.0) - k_max.powf(1.0 - a) / (a - 1.0))
        }
        _ => {
            let m = law.max_lookback()?;
            Some((1..=m).map(|k| (k * k) as f64 * law.pmf(k)).sum())
        }
    }
}

/// Sums over loci scale with the sites: with per-locus lengths, loci × mutation.sites (the
/// longest) is replaced by the total number of sites.
fn loci_factor(s: &Scenario) -> f64 {
    match (s.total_sites(), s.mutation()) {
        (Some(t), Some(m)) => t as f64 / m.sites() as f64,
        _ => s.loci() as f64,
    }
}

/// Largest number of demes that [`predict`] works out (pair and lineage chains).
pub const MAX_DEMES: usize = 40;

/// What every part of the prediction needs.
struct Ctx<'a> {
    s: &'a Scenario,
    check: limits::LimitCheck,
    setting: Option<LimitSetting>,
    exact: Option<DiscretePairChain>,
    /// Expected mutations per generation of reproduction and of dormancy (whole sequence).
    mutation: Option<(f64, f64)>,
    loci: f64,
    cache: HashMap<(SampleClass, SampleClass), Result<PairOutcome, String>>,
}

#[derive(Debug, Clone)]
struct PairOutcome {
    mean: Predicted,
    differences: Option<Predicted>,
    quantiles: Option<(Vec<f64>, Kind, String)>,
}

const EXACT_PAIR: &str =
    "exact discrete two-lineage chain, migration per look-back (theory::pair_exact; no dormancy: theory reference §6)";
const LIMIT_PAIR: &str = "coalescent limit: KKL time change, migration M/E[R] per generation, seed-bank coalescent, size epochs (theory::lineages)";

impl<'a> Ctx<'a> {
    fn new(s: &'a Scenario) -> Ctx<'a> {
        let demes = s.demes();
        let mutation = s.mutation().map(|m| {
            let sites = m.sites() as f64;
            (sites * m.reproduction_rate(), sites * m.dormant_rate())
        });
        let pieces = migration_pieces(s);
        let setting = limits::deme_limits(s).ok().map(|models| {
            LimitSetting::new(
                models,
                demes.iter().map(|d| d.size().epochs().to_vec()).collect(),
                pieces.clone(),
                mutation.unwrap_or((0.0, 0.0)),
                demes.iter().map(|d| seed_delay(d.dormancy())).collect(),
            )
        });
        let sizes: Option<Vec<f64>> = demes.iter().map(|d| d.size().as_constant().map(|n| n as f64)).collect();
        let exact = match (sizes, pieces.as_slice()) {
            (Some(sizes), [one]) => {
                let laws: Vec<&Dormancy> = demes.iter().map(|d| d.dormancy()).collect();
                DiscretePairChain::new(&laws, &sizes, &one.matrix, mutation).ok()
            }
            _ => None,
        };
        Ctx { s, check: limits::check(s), setting, exact, mutation, loci: loci_factor(s), cache: HashMap::new() }
    }

    /// Kind of a limit prediction: a limit when the rule holds, else an approximation.
    fn limit_kind(&self) -> Kind {
        if self.check.holds { Kind::Limit } else { Kind::Approximate }
    }

    fn limit_condition(&self) -> String {
        if self.check.holds {
            limits::CONDITION.to_string()
        } else {
            format!("{} — not met here: {}", limits::CONDITION, self.check.why())
        }
    }

    fn limit(&self, value: f64, source: &str) -> Option<Predicted> {
        Predicted::new(value, source, self.limit_kind(), &self.limit_condition())
    }

    fn pair(&mut self, a: SampleClass, b: SampleClass, quantiles: bool) -> Result<PairOutcome, String> {
        let key = if (a.deme, a.time, a.entry as u8) <= (b.deme, b.time, b.entry as u8) { (a, b) } else { (b, a) };
        if let Some(r) = self.cache.get(&key)
            && (!quantiles || r.as_ref().map_or(true, |o| o.quantiles.is_some()))
        {
            return r.clone();
        }
        let r = self.compute_pair(key.0, key.1, quantiles);
        self.cache.insert(key, r.clone());
        r
    }

    fn compute_pair(&self, a: SampleClass, b: SampleClass, quantiles: bool) -> Result<PairOutcome, String> {
        let demes = self.s.demes();
        // One deme, two individuals of one generation: exact closed form (any finite-mean law).
        if demes.len() == 1
            && a == b
            && a.entry == Entry::Population
            && let (Some(n), Some(mean)) = (demes[0].size().as_constant(), demes[0].dormancy().mean())
            && !demes[0].dormancy().is_time_dependent()
        {
            let law = demes[0].dormancy();
            let d = law.support_gcd() as f64;
            let nf = n as f64;
            let t = a.time as f64 + nf * mean * mean / d;
            let src = "t + N E[R]^2/d, exact for a pair (theory reference §3.2; Kaj, Krone & Lascoux 2001)";
            let differences = self.mutation.and_then(|(r, dm)| {
                let nu = r + dm * (mean - 1.0);
                Predicted::exact(
                    2.0 * nf * mean * nu / d,
                    "2N E[R] E[nu_R]/d, exact for a pair (theory reference §3.3)",
                )
            });
            let mut out = PairOutcome {
                mean: Predicted::exact(t, src).ok_or("infinite pair time")?,
                differences,
                quantiles: None,
            };
            if quantiles {
                out.quantiles = self.exact_quantiles(a, b, out.mean.value).or_else(|| self.limit_quantiles(a, b));
            }
            return Ok(out);
        }
        if let Some(ch) = &self.exact
            && let Ok(r) = ch.expectations(a, b, MAX_ALONE)
        {
            let mut out = PairOutcome {
                mean: Predicted::exact(r.mean_time, EXACT_PAIR).ok_or("infinite pair time")?,
                differences: r.mean_differences.and_then(|d| Predicted::exact(d, EXACT_PAIR)),
                quantiles: None,
            };
            if quantiles {
                out.quantiles = self.exact_quantiles(a, b, out.mean.value).or_else(|| self.limit_quantiles(a, b));
            }
            return Ok(out);
        }
        let setting = self.setting.as_ref().ok_or_else(|| {
            limits::deme_limits(self.s).err().map_or("no limit applies".to_string(), |e| {
                format!("no exact chain and no limit for deme `{}`: {}", e.deme, e.reason)
            })
        })?;
        let chain = LineageChain::new(setting, &[a, b], MAX_STATES)?;
        let e = chain.expectations()?;
        let mean = self.limit(e.tmrca, LIMIT_PAIR).ok_or("infinite pair time")?;
        let differences = self.mutation.and_then(|_| self.limit(e.sfs[0], LIMIT_PAIR));
        let mut out = PairOutcome { mean, differences, quantiles: None };
        if quantiles {
            out.quantiles = self.limit_quantiles(a, b);
        }
        Ok(out)
    }

    fn exact_quantiles(&self, a: SampleClass, b: SampleClass, mean: f64) -> Option<(Vec<f64>, Kind, String)> {
        let ch = self.exact.as_ref()?;
        // The recursion runs to the 95% quantile, about 3 mean times: skip it when too long.
        let span = mean - a.time.min(b.time) as f64;
        if ch.step_work() * 4.0 * span > QUANTILE_BUDGET {
            return None;
        }
        let q = ch.quantiles(a, b, &QUANTILES, QUANTILE_BUDGET)?;
        Some((q, Kind::Exact, "exact discrete two-lineage chain, forward recursion generation by generation".into()))
    }

    fn limit_quantiles(&self, a: SampleClass, b: SampleClass) -> Option<(Vec<f64>, Kind, String)> {
        let setting = self.setting.as_ref()?;
        let chain = LineageChain::new(setting, &[a, b], MAX_STATES).ok()?;
        let e = chain.expectations().ok()?;
        let start = a.time.min(b.time) as f64;
        let q = chain.quantiles(&QUANTILES, ((e.tmrca - start) / 100.0).max(1.0)).ok()?;
        Some((q, self.limit_kind(), format!("{LIMIT_PAIR}, propagated in time (uniformisation)")))
    }
}

/// The sample's classes in order of first appearance, with their counts.
fn sample_classes(s: &Scenario) -> Vec<(SampleClass, usize)> {
    let mut out: Vec<(SampleClass, usize)> = Vec::new();
    for x in s.samples() {
        let entry = if x.kind == SampleKind::Seedbank { Entry::Seedbank } else { Entry::Population };
        let c = SampleClass { deme: x.deme, time: x.time, entry };
        match out.iter_mut().find(|(y, _)| *y == c) {
            Some((_, k)) => *k += 1,
            None => out.push((c, 1)),
        }
    }
    out
}

fn class_label(s: &Scenario, c: &SampleClass) -> String {
    let mut l = s.demes()[c.deme].name().to_string();
    if c.time > 0 {
        l.push_str(&format!("@{}", c.time));
    }
    if c.entry == Entry::Seedbank {
        l.push_str(" seed");
    }
    l
}

/// The worst kind among several, with the first source of that kind.
fn combine(parts: &[&Predicted]) -> Option<(Kind, String, String)> {
    let worst = parts.iter().max_by_key(|p| p.kind)?;
    Some((worst.kind, worst.source.clone(), worst.condition.clone()))
}

fn predict_without_recombination(s: &Scenario) -> Prediction {
    let mut out = Prediction::default();
    let demes = s.demes();
    let laws: Vec<&Dormancy> = demes.iter().map(|d| d.dormancy()).collect();
    let mut regimes = Vec::new();
    for (d, law) in demes.iter().zip(&laws) {
        match renewal::classify(law) {
            Ok(c) => regimes.push(format!("{}: {:?}", d.name(), c.regime).to_lowercase()),
            Err(_) => regimes.push(format!("{}: time-dependent law (since_founding)", d.name())),
        }
    }
    out.regime = Some(regimes.join("; "));
    if demes.len() > MAX_DEMES {
        // The chains grow with the square of the demes (pairs) and faster (whole sample).
        out.notes.push(format!(
            "{} demes: predictions are computed for at most {MAX_DEMES} demes; simulate instead",
            demes.len()
        ));
        return out;
    }
    let mut ctx = Ctx::new(s);
    out.limit_holds = Some((ctx.check.holds, ctx.check.why().to_string()));
    if laws.iter().any(|l| l.is_time_dependent()) {
        out.notes.push("the since_founding law depends on time: no stationary theory applies".into());
        return out;
    }
    if laws.iter().any(|l| l.mean().is_none()) {
        match (demes.len(), demes[0].size().as_constant()) {
            (1, Some(n)) => heavy_tails(&mut out, laws[0], n),
            _ => out
                .notes
                .push("infinite-mean dormancy with several demes or a changing size: no prediction applies".into()),
        }
        return out;
    }
    pairs(&mut ctx, &mut out);
    whole_sample(&mut ctx, &mut out);
    let mut seen = std::collections::HashSet::new();
    out.notes.retain(|n| seen.insert(n.clone()));
    out
}

/// Pair times of every pair of sample classes and of demes; π over the sample, per deme; F_ST.
fn pairs(ctx: &mut Ctx, out: &mut Prediction) {
    let s = ctx.s;
    let names: Vec<&str> = s.demes().iter().map(|d| d.name()).collect();
    let present = |d: usize| SampleClass { deme: d, time: 0, entry: Entry::Population };
    // Every pair of demes, two individuals of the present.
    let mut times = vec![vec![f64::NAN; names.len()]; names.len()];
    let mut parts = Vec::new();
    for a in 0..names.len() {
        for b in a..names.len() {
            match ctx.pair(present(a), present(b), false) {
                Ok(o) => {
                    times[a][b] = o.mean.value;
                    times[b][a] = o.mean.value;
                    out.deme_pair_times.push((names[a].to_string(), names[b].to_string(), o.mean.value));
                    parts.push(o.mean);
                }
                Err(e) => out.notes.push(format!("pair {}-{}: {e}", names[a], names[b])),
            }
        }
    }
    for a in 0..names.len() {
        for b in a + 1..names.len() {
            let f = 1.0 - 0.5 * (times[a][a] + times[b][b]) / times[a][b];
            if f.is_finite() {
                out.fst.push((names[a].to_string(), names[b].to_string(), f));
            }
        }
    }
    let refs: Vec<&Predicted> = parts.iter().collect();
    if let Some((k, src, _)) = combine(&refs) {
        out.deme_pair_source = Some((k, format!("{src}; F_ST = 1 - (T_aa + T_bb)/(2 T_ab), a ratio of expectations")));
    }
    // Every pair of the sample's classes.
    let classes = sample_classes(s);
    let mut by_pair: Vec<(usize, usize, f64, PairOutcome)> = Vec::new();
    let mut failed: Vec<(usize, usize)> = Vec::new();
    for i in 0..classes.len() {
        for j in i..classes.len() {
            let (ci, ni) = classes[i];
            let (cj, nj) = classes[j];
            let weight = if i == j { (ni * ni.saturating_sub(1) / 2) as f64 } else { (ni * nj) as f64 };
            if weight == 0.0 {
                continue;
            }
            match ctx.pair(ci, cj, true) {
                Ok(o) => {
                    let (qs, qk, qsrc) = match &o.quantiles {
                        Some((q, k, src)) => {
                            (QUANTILES.iter().copied().zip(q.iter().copied()).collect(), Some(*k), Some(src.clone()))
                        }
                        None => (Vec::new(), None, None),
                    };
                    out.pair_times.push(PairTime {
                        a: class_label(s, &ci),
                        b: class_label(s, &cj),
                        mean: o.mean.clone(),
                        differences: o.differences.clone(),
                        quantiles: qs,
                        quantile_kind: qk,
                        quantile_source: qsrc,
                    });
                    by_pair.push((i, j, weight, o));
                }
                Err(e) => {
                    out.notes.push(format!("pair {}-{}: {e}", class_label(s, &ci), class_label(s, &cj)));
                    failed.push((i, j));
                }
            }
        }
    }
    if by_pair.is_empty() {
        return;
    }
    // Averages over the sample's pairs.
    let avg =
        |sel: &dyn Fn(usize, usize) -> bool, f: &dyn Fn(&PairOutcome) -> Option<Predicted>| -> Option<Predicted> {
            // Every pair covered must be known: one that never meets voids the average.
            if failed.iter().any(|&(i, j)| sel(i, j)) {
                return None;
            }
            let (mut sum, mut w) = (0.0, 0.0);
            let mut parts = Vec::new();
            for (i, j, weight, o) in &by_pair {
                if !sel(*i, *j) {
                    continue;
                }
                let p = f(o)?;
                sum += weight * p.value;
                w += weight;
                parts.push(p);
            }
            let refs: Vec<&Predicted> = parts.iter().collect();
            let (kind, source, condition) = combine(&refs)?;
            Predicted::new(sum / w, &source, kind, &condition)
        };
    let loci = ctx.loci;
    let scaled = |p: Option<Predicted>| p.map(|p| Predicted { value: p.value * loci, ..p });
    out.pair_time_mean = avg(&|_, _| true, &|o| Some(o.mean.clone()));
    if classes.iter().map(|c| c.1).sum::<usize>() == 2 {
        out.tmrca_mean = out.pair_time_mean.clone();
    }
    if ctx.mutation.is_none() {
        return;
    }
    out.pi_mean = scaled(avg(&|_, _| true, &|o| o.differences.clone()));
    let deme_of = |i: usize| classes[i].0.deme;
    let mut within = vec![None; names.len()];
    for (d, name) in names.iter().enumerate() {
        let p = scaled(avg(&|i, j| deme_of(i) == d && deme_of(j) == d, &|o| o.differences.clone()));
        if let Some(p) = &p {
            out.deme_pi.push((name.to_string(), p.clone()));
        }
        within[d] = p;
    }
    for a in 0..names.len() {
        for b in a + 1..names.len() {
            let between =
                avg(&|i, j| (deme_of(i) == a && deme_of(j) == b) || (deme_of(i) == b && deme_of(j) == a), &|o| {
                    o.differences.clone()
                });
            if let (Some(wa), Some(wb), Some(hb)) = (&within[a], &within[b], between)
                && hb.value > 0.0
            {
                let f = 1.0 - 0.5 * (wa.value + wb.value) / (hb.value * loci);
                let src = format!(
                    "1 - (E[pi_a] + E[pi_b])/(2 E[pi_ab]) (Hudson, Slatkin & Maddison 1992), a ratio of expectations; pairs: {}",
                    hb.kind.label()
                );
                if let Some(p) = Predicted::new(
                    f,
                    &src,
                    Kind::Approximate,
                    "ratio of expectations: close to E[F_ST] when many sites segregate",
                ) {
                    out.sample_fst.push((names[a].to_string(), names[b].to_string(), p));
                }
            }
        }
    }
}

/// T_MRCA, total length, SFS and the statistics derived from it.
fn whole_sample(ctx: &mut Ctx, out: &mut Prediction) {
    whole_sample_general(ctx, out);
    if ctx.s.samples().len() == 2 {
        from_the_pair(ctx, out);
    }
}

/// A sample of two: T_MRCA, length and SFS follow from the pair, exact where the pair is.
fn from_the_pair(ctx: &mut Ctx, out: &mut Prediction) {
    let classes = sample_classes(ctx.s);
    let (a, b) = match classes.as_slice() {
        [(a, 2)] => (*a, *a),
        [(a, _), (b, _)] => (*a, *b),
        _ => return,
    };
    let Ok(o) = ctx.pair(a, b, false) else { return };
    let better = |old: Option<Kind>| old.is_none_or(|k| o.mean.kind < k);
    if better(out.tmrca_mean.as_ref().map(|p| p.kind)) {
        let length = 2.0 * o.mean.value - (a.time + b.time) as f64;
        out.tmrca_mean = Some(o.mean.clone());
        out.total_length_mean =
            Predicted::new(length, &format!("2 E[T] - t_a - t_b; {}", o.mean.source), o.mean.kind, &o.mean.condition);
    }
    if let Some(d) = &o.differences
        && better(out.sfs_kind)
    {
        from_sfs(out, &[d.value * ctx.loci], &d.source, d.kind, &d.condition);
    }
}

fn whole_sample_general(ctx: &mut Ctx, out: &mut Prediction) {
    let s = ctx.s;
    let demes = s.demes();
    let samples = s.samples();
    let n = samples.len();
    if n < 2 {
        return;
    }
    let one_time = samples.iter().all(|x| x.kind == SampleKind::Population && x.time == samples[0].time);
    if demes.len() == 1 && one_time {
        let law = demes[0].dormancy();
        if let (Some(big_n), 0) = (demes[0].size().as_constant(), samples[0].time) {
            one_deme_constant(ctx, out, law, big_n, n as u32);
            return;
        }
        if let Some((mean, scale)) = kingman_deme(ctx) {
            polanski_kimmel_sample(ctx, out, mean, scale, n, samples[0].time as f64);
            return;
        }
    }
    lineage_chain_sample(ctx, out);
}

/// (E[R], E[R]²/d) of the first deme when its limit is Kingman's coalescent.
fn kingman_deme(ctx: &Ctx) -> Option<(f64, f64)> {
    match limits::deme_limits(ctx.s).ok()?.first()? {
        limits::DemeLimit::Kingman { mean, scale, .. } => Some((*mean, *scale)),
        limits::DemeLimit::SeedBank { .. } => None,
    }
}

/// S, θ_W, H and the plug-in D from an expected SFS (already summed over loci).
fn from_sfs(out: &mut Prediction, sfs: &[f64], source: &str, kind: Kind, condition: &str) {
    let n = sfs.len() + 1;
    let nf = n as f64;
    let s_mean: f64 = sfs.iter().sum();
    let theta_h: f64 =
        sfs.iter().enumerate().map(|(i, x)| 2.0 * ((i + 1) * (i + 1)) as f64 * x / (nf * (nf - 1.0))).sum();
    let theta_pi: f64 =
        sfs.iter().enumerate().map(|(i, x)| 2.0 * ((i + 1) * (n - i - 1)) as f64 * x / (nf * (nf - 1.0))).sum();
    out.sfs_expected = Some(sfs.to_vec());
    out.sfs_source = Some(source.to_string());
    out.sfs_kind = Some(kind);
    out.segregating_sites_mean = Predicted::new(s_mean, source, kind, condition);
    out.theta_w_mean =
        Predicted::new(s_mean / harmonic(n as u32), &format!("E[S]/a_n (Watterson 1975); {source}"), kind, condition);
    // E[H] is 0 whenever the SFS is θ/i; keep rounding noise out of it.
    let h = if (theta_pi - theta_h).abs() <= 1e-12 * theta_pi.abs() { 0.0 } else { theta_pi - theta_h };
    out.fay_wu_h_mean =
        Predicted::new(h, &format!("E[theta_pi] - E[theta_H] (Fay & Wu 2000); {source}"), kind, condition);
    if out.pi_mean.is_none() {
        out.pi_mean = Predicted::new(theta_pi, source, kind, condition);
    }
    if let Ok(k) = TajimaConstants::new(n as u32) {
        let var = k.e1 * s_mean + k.e2 * s_mean * (s_mean - 1.0);
        let num = theta_pi - s_mean / k.a1;
        let num = if num.abs() <= 1e-12 * theta_pi.abs() { 0.0 } else { num };
        if var > 0.0 && n > 2 {
            out.tajima_d_mean = Predicted::new(
                num / var.sqrt(),
                "Tajima's D (1989) at the expected pi and S, not E[D] (D is a ratio; its mean is not 0 even under Kingman)",
                Kind::Approximate,
                "an approximation in every limit: D is a ratio",
            );
        }
    }
}

/// One deme of constant size, a sample of the present.
fn one_deme_constant(ctx: &mut Ctx, out: &mut Prediction, law: &Dormancy, big_n: u64, n: u32) {
    let nf = big_n as f64;
    let loci = ctx.loci;
    let Some(mean) = law.mean() else { return };
    let d = law.support_gcd() as f64;
    let a_n = harmonic(n);
    let b_n = harmonic_squares(n);
    if let Some(sbc) = SeedBankCoalescent::from_lookback(law, nf) {
        out.notes.push(format!(
            "rare long dormancy of order N: seed-bank coalescent with c = {:.4}, K = {:.4} (Blath, González Casanova, Kurt & Wilke-Berenguer 2016; mapping of theory reference §5.3), a large-N limit",
            sbc.c(),
            sbc.k()
        ));
        let src = "seed-bank coalescent (Blath et al. 2016), exact linear algebra on (active, dormant) counts";
        if let Ok(e) = sbc.expectations(n, 0) {
            if n > 2 {
                out.tmrca_mean = ctx.limit(nf * e.tmrca, src);
            }
            out.total_length_mean = ctx.limit(nf * (e.active_length + e.dormant_length), src);
            if let Some((mu_r, mu_d)) = ctx.mutation {
                out.segregating_sites_mean =
                    ctx.limit(loci * nf * (mu_r * e.active_length + mu_d * e.dormant_length), src);
                if mu_r > 0.0
                    && let Ok(sfs) = sbc.expected_sfs(n, 2.0 * nf * mu_r, mu_d / mu_r)
                {
                    let sfs: Vec<f64> = sfs.iter().map(|x| x * loci).collect();
                    let (kind, cond) = (ctx.limit_kind(), ctx.limit_condition());
                    from_sfs(out, &sfs, src, kind, &cond);
                }
            }
        }
        return;
    }
    let scale = mean * mean / d;
    if law.is_none() && big_n <= 100_000 && n <= 2000 {
        if let Ok(wf) = kingman::wright_fisher_exact(n, big_n as u32) {
            let src = "exact discrete Wright-Fisher chain (theory reference §1)";
            out.tmrca_mean = Predicted::exact(wf.tmrca_mean, src);
            out.total_length_mean = Predicted::exact(wf.total_length_mean, src);
        }
    } else {
        let src = if law.is_none() {
            "Kingman (1982), 2N(1-1/n) and 2N a_n"
        } else {
            "Kingman (1982) with the Kaj-Krone-Lascoux time change E[R]^2/d (large N)"
        };
        out.tmrca_mean = ctx.limit(kingman::tmrca_mean(n, nf * scale), src);
        out.total_length_mean = ctx.limit(kingman::total_length_mean(n, nf * scale), src);
    }
    if n == 2 {
        out.tmrca_mean = out.pair_time_mean.clone();
    }
    if let Some((mu_r, mu_d)) = ctx.mutation {
        let nu = mu_r + mu_d * (mean - 1.0);
        let theta = 2.0 * nf * mean * nu / d;
        let tag = |s: &str| {
            if law.is_none() {
                s.to_string()
            } else {
                format!("{s}, with theta_eff = 2N E[R] E[nu_R]/d (Kaj, Krone & Lascoux 2001)")
            }
        };
        let sfs: Vec<f64> = kingman::expected_sfs(n, theta).iter().map(|x| x * loci).collect();
        let (kind, cond) = (ctx.limit_kind(), ctx.limit_condition());
        from_sfs(out, &sfs, &tag("E[xi_i] = theta/i (Fu 1995)"), kind, &cond);
        out.segregating_sites_mean = ctx.limit(loci * theta * a_n, &tag("theta a_n (Watterson 1975)"));
        out.segregating_sites_var =
            ctx.limit(theta * a_n + theta * theta * b_n, &tag("theta a_n + theta^2 b_n (Watterson 1975)"));
        out.haplotypes_mean =
            ctx.limit(kingman::ewens_alleles_mean(n, theta), &tag("sum theta/(theta+i) (Ewens 1972)"));
        if loci > 1.0 {
            out.haplotypes_mean = None;
        }
    }
    if !law.is_none() {
        out.notes.push(format!(
            "finite-mean dormancy: coalescence slowed by E[R]^2/d = {scale:.4} (Kaj, Krone & Lascoux 2001); exact for a pair, a large-N limit for T_MRCA, length and SFS"
        ));
    }
}

/// One deme under Kingman with the KKL time change, samples of one time, any size history.
fn polanski_kimmel_sample(ctx: &mut Ctx, out: &mut Prediction, mean: f64, scale: f64, n: usize, t0: f64) {
    let epochs = ctx.s.demes()[0].size().epochs();
    let integrals = match polanski_kimmel::first_coalescence_integrals(n, epochs, scale, t0) {
        Ok(i) => i,
        Err(_) => {
            out.notes.push(
                "the deme grows without bound into the past: lineages may never meet; no T_MRCA or SFS prediction"
                    .into(),
            );
            return;
        }
    };
    let src = "Polanski & Kimmel (2003) with the KKL time change E[R]^2/d and the size history (numerical integrals of the first-coalescence times)";
    out.tmrca_mean =
        ctx.limit(t0 + polanski_kimmel::expected_tmrca(&integrals), &format!("{src}; Tavaré (1984) for T_MRCA"));
    out.total_length_mean = ctx.limit(polanski_kimmel::expected_total_length(&integrals), src);
    if let Some((mu_r, mu_d)) = ctx.mutation {
        let nu = (mu_r + mu_d * (mean - 1.0)) / mean;
        let sfs: Vec<f64> = polanski_kimmel::expected_sfs(&integrals, nu).iter().map(|x| x * ctx.loci).collect();
        let (kind, cond) = (ctx.limit_kind(), ctx.limit_condition());
        from_sfs(out, &sfs, src, kind, &cond);
    }
}

/// Any other sample: the lineage chain of the limit, for small samples.
fn lineage_chain_sample(ctx: &mut Ctx, out: &mut Prediction) {
    let s = ctx.s;
    let n = s.samples().len();
    let Some(setting) = &ctx.setting else {
        out.notes
            .push("no coalescent limit for some deme: no T_MRCA, length or SFS prediction for the whole sample".into());
        return;
    };
    let one_colour = s.demes().len() == 1 && kingman_deme(ctx).is_some();
    let cap = if one_colour { CHAIN_MAX_SAMPLE_ONE_COLOUR } else { CHAIN_MAX_SAMPLE };
    if n > cap {
        out.notes.push(format!(
            "T_MRCA, length and SFS of this sample need the lineage chain, which is limited to n <= {cap} lineages{} (here n = {n}): refused; the pair predictions (pi, pi per deme, F_ST) still apply",
            if one_colour { " in one deme" } else { " with several demes or dormant lineages" }
        ));
        return;
    }
    let classes: Vec<SampleClass> = s
        .samples()
        .iter()
        .map(|x| SampleClass {
            deme: x.deme,
            time: x.time,
            entry: if x.kind == SampleKind::Seedbank { Entry::Seedbank } else { Entry::Population },
        })
        .collect();
    let e = match LineageChain::new(setting, &classes, MAX_STATES).and_then(|c| c.expectations()) {
        Ok(e) => e,
        Err(e) => {
            out.notes.push(format!("T_MRCA, length and SFS of the whole sample: {e}"));
            return;
        }
    };
    let src = "coalescent limit, chain on the sample's lineages by colour and number of descendants (theory::lineages)";
    out.tmrca_mean = ctx.limit(e.tmrca, src);
    out.total_length_mean = ctx.limit(e.total_length, src);
    if ctx.mutation.is_some() {
        let sfs: Vec<f64> = e.sfs.iter().map(|x| x * ctx.loci).collect();
        let (kind, cond) = (ctx.limit_kind(), ctx.limit_condition());
        from_sfs(out, &sfs, src, kind, &cond);
    }
}

/// Infinite-mean dormancy in one deme of constant size.
fn heavy_tails(out: &mut Prediction, law: &Dormancy, big_n: u64) {
    if let Ok(scale) = renewal::coalescence_scale(law, big_n) {
        out.notes.push(format!("infinite mean look-back: {}", scale.note()));
    }
    let Ok(pm) = relatedness::meeting_probability(law, big_n, 0, relatedness::Relatedness::DEFAULT_LEN) else {
        return;
    };
    if pm < 1.0 {
        out.pair_meet_probability = Predicted::exact(
            pm,
            "(S-1)/(N+S-1), S = sum q_k^2 (Blath, González Casanova, Kurt & Spanò 2013; theory reference §4)",
        );
        out.notes.push("forest regime: two lineages may never meet; T_MRCA and SFS have no finite expectation".into());
        if let Ok(rel) = relatedness::Relatedness::new(law, relatedness::Relatedness::DEFAULT_LEN) {
            for lag in [1u64, 10, 100, 1000] {
                if let Ok(p) = rel.meet_apart(lag as usize, big_n) {
                    out.related_by_lag.push((lag, p));
                }
            }
            if let Ok(c) = relatedness::related_constant(rel.asymptote().alpha(), rel.s().value) {
                out.notes.push(format!(
                    "N = 1: P(related at lag n) ~ C n^(2 alpha - 1) with C = {c:.6}; the depth of the MRCA below the older individual, over n, tends to BetaPrime(alpha, 1 - 2 alpha) (Hammond & Sheffield 2013; theory reference §7.1)"
                ));
            }
        }
    } else {
        out.notes.push("lineages meet almost surely but E[T_2] is infinite: no mean prediction applies".into());
    }
}

#[cfg(test)]
mod tests;
