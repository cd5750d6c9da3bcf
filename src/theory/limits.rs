//! When a coalescent limit holds: the one rule shared by `--engine auto` (which engine runs)
//! and `predict` (whether a limit prediction is labelled a limit or only an approximation).
//!
//! Each deme follows one of two limits ([`DemeLimit`]):
//!
//! ```text
//! Kingman (KKL, finite-mean dormancy, look-back law fixed as N grows):
//!   pair coalescence   1 / (N(t) E[R]² / d)   per generation, per pair in the deme
//!   migration d → e    M[d][e] / E[R]          per generation, per lineage (one draw per link)
//! seed-bank coalescent (BGKW 2016, rare long dormancy: R = 1, or 1 + G with E[G] of order N):
//!   pair coalescence   1 / N(t)                per generation, per pair of active lineages
//!   go dormant         σ = w (g - 1) / g       per generation, per active lineage (= c / N)
//!   wake               1 / g                   per generation, per dormant lineage (= cK / N)
//!   migration d → e    M[d][e]                 per generation, per active lineage
//! ```
//! Sources: Kingman (1982) *Stoch. Proc. Appl.* 13:235; Kaj, Krone & Lascoux (2001) *J. Appl.
//! Probab.* 38:285 (theory reference §3); Blath, González Casanova, Kurt & Wilke-Berenguer
//! (2016) *Ann. Appl. Probab.* 26:857 (theory reference §5, the look-back form §5.3). The
//! migration rates follow from one parent-deme draw per parent–offspring link: a lineage of a
//! finite-mean deme makes links at the renewal rate 1/E\[R] per generation (derived).
//!
//! The rule ([`check`]): every deme has a limit, N >= [`MIN_DEME_SIZE`] at all times that
//! matter, E\[R] and the look-back scale at most N/10 in Kingman demes, and a switching rate
//! c <= [`MAX_SWITCH_RATE`] in seed-bank demes.

use super::seedbank_coalescent::SeedBankCoalescent;
use crate::demography::SizeEpoch;
use crate::dormancy::{Dormancy, LookBack};
use crate::scenario::{SampleKind, Scenario};

/// The limit holds only when every deme has at least this many individuals at every epoch
/// start (or end of an exponential epoch): below it the discreteness of generations
/// (multiple mergers, O(1/N) corrections) is no longer negligible at the 1% level.
pub const MIN_DEME_SIZE: f64 = 200.0;

/// The limit holds only when E\[R] and the look-back scale are at most this fraction of N
/// (dormancy comparable to N: neither limit holds), unless the law is of seed-bank-coalescent
/// form.
pub const MAX_LOOKBACK_FRACTION: f64 = 0.1;

/// Tail level defining the look-back scale of an unbounded law: the smallest k with
/// P(R > k) <= this.
pub const LOOKBACK_TAIL: f64 = 1e-3;

/// Largest switching rate c (per N generations) of the seed-bank coalescent accepted: the
/// number of switches per replicate grows like c, and for c ≫ 1 the process is a
/// time-changed Kingman coalescent anyway.
pub const MAX_SWITCH_RATE: f64 = 100.0;

/// The condition of every limit prediction, in words.
pub const CONDITION: &str = "large-N limit: N >= 200 at all times in every deme, E[R] and the look-back scale <= N/10 (or rare dormancy of order N: seed-bank coalescent with c <= 100)";

/// The limit process of one deme.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub enum DemeLimit {
    /// Kingman's coalescent slowed by the KKL factor `scale = E[R]²/d`.
    Kingman {
        /// E\[R].
        mean: f64,
        /// gcd d of the support of R.
        gcd: u64,
        /// E\[R]²/d.
        scale: f64,
    },
    /// The seed-bank coalescent, rates per generation.
    SeedBank {
        /// Rate at which an active lineage goes dormant, w (g - 1)/g.
        sleep: f64,
        /// Rate at which a dormant lineage wakes, 1/g.
        wake: f64,
        /// Probability that a seed sampled from the bank is in a long dormancy, w g / E\[R].
        dormant_seed: f64,
        /// c (per N(0) generations), as in [`SeedBankCoalescent::from_lookback`].
        c: f64,
        /// K.
        k: f64,
    },
}

impl DemeLimit {
    /// Classifies a look-back law in a deme of present size `n0`.
    ///
    /// ```text
    /// seed-bank form (from_lookback) with E[G] = g > n0/10   → SeedBank
    /// finite mean, not time-dependent                          → Kingman, scale E[R]²/d
    /// ```
    /// Errors: time-dependent law (since_founding), infinite mean (power law with alpha <= 1
    /// and no truncation).
    pub fn of(law: &Dormancy, n0: f64) -> Result<DemeLimit, String> {
        if law.is_time_dependent() {
            return Err("the since_founding law depends on time: no limit theorem applies".to_string());
        }
        if let (Some(sb), Some((w, g))) = (SeedBankCoalescent::from_lookback(law, n0), seedbank_parts(law))
            && g > MAX_LOOKBACK_FRACTION * n0
        {
            let mean = law.mean().unwrap_or(f64::INFINITY);
            return Ok(DemeLimit::SeedBank {
                sleep: w * (g - 1.0) / g,
                wake: 1.0 / g,
                dormant_seed: w * g / mean,
                c: sb.c(),
                k: sb.k(),
            });
        }
        let Some(mean) = law.mean() else {
            return Err(format!(
                "the {} law has an infinite mean (heavy tail with alpha <= 1, untruncated): no Kingman limit",
                law.law_name()
            ));
        };
        let gcd = law.support_gcd().max(1);
        Ok(DemeLimit::Kingman { mean, gcd, scale: mean * mean / gcd as f64 })
    }

    /// Links (parent–offspring steps) per generation of an active lineage.
    pub fn link_rate(&self) -> f64 {
        match self {
            DemeLimit::Kingman { mean, .. } => 1.0 / mean,
            DemeLimit::SeedBank { .. } => 1.0,
        }
    }

    /// Time-scale factor s in the pair coalescence rate 1/(s N).
    pub fn coal_scale(&self) -> f64 {
        match self {
            DemeLimit::Kingman { scale, .. } => *scale,
            DemeLimit::SeedBank { .. } => 1.0,
        }
    }
}

/// (w, g) of a mixture of `none` parts and one geometric part of weight w and mean g.
fn seedbank_parts(law: &Dormancy) -> Option<(f64, f64)> {
    let Dormancy::Mixture(m) = law else { return None };
    let mut out = None;
    for (w, part) in m.parts() {
        match part {
            Dormancy::None => {}
            Dormancy::Geometric(g) if out.is_none() => out = Some((*w, g.mean()?)),
            _ => return None,
        }
    }
    out
}

/// The look-back scale: the largest value for a bounded law, else the smallest k with
/// P(R > k) <= [`LOOKBACK_TAIL`] (found by doubling and bisection on the tail).
pub fn lookback_scale(law: &Dormancy) -> f64 {
    if let Some(m) = law.max_lookback() {
        return m as f64;
    }
    let mut hi = 1u64;
    while law.tail(hi) > LOOKBACK_TAIL {
        if hi >= 1 << 62 {
            return f64::INFINITY;
        }
        hi *= 2;
    }
    let mut lo = hi / 2;
    while hi - lo > 1 {
        let mid = lo + (hi - lo) / 2;
        if law.tail(mid) > LOOKBACK_TAIL { lo = mid } else { hi = mid }
    }
    hi as f64
}

/// Smallest size a deme reaches, checked at every epoch start and at the end of every
/// exponential epoch; for a last epoch shrinking back in time (growth > 0), at the time τ
/// where the integrated pair hazard reaches 3 (95% of pairs have met):
/// ```text
/// ∫_0^τ du / (s N0 e^{-g u}) = 3   ⇒   N(τ) = N0 / (1 + 3 g s N0)
/// ```
pub fn min_size(epochs: &[SizeEpoch], s: f64) -> f64 {
    let mut min = f64::INFINITY;
    for (i, e) in epochs.iter().enumerate() {
        min = min.min(e.size);
        if e.growth != 0.0 {
            let end = match epochs.get(i + 1) {
                Some(next) => e.size * (-e.growth * (next.start - e.start) as f64).exp(),
                None if e.growth > 0.0 => e.size / (1.0 + 3.0 * e.growth * s * e.size),
                None => e.size,
            };
            min = min.min(end);
        }
    }
    min
}

/// A deme without a limit model, and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct NoLimit {
    /// Deme name.
    pub deme: String,
    /// What is wrong.
    pub reason: String,
}

/// The limit model of every deme, or the first deme that has none: a time-dependent law, an
/// infinite mean, or a periodic support (gcd d > 1) with migration, with samples on several
/// residues mod d, or with seeds sampled from the bank (lineages on different residues never
/// meet in the exact model).
pub fn deme_limits(scenario: &Scenario) -> Result<Vec<DemeLimit>, NoLimit> {
    let migrates = scenario.migration().is_active();
    let mut out = Vec::with_capacity(scenario.demes().len());
    for (i, d) in scenario.demes().iter().enumerate() {
        let err = |reason: String| NoLimit { deme: d.name().to_string(), reason };
        let n0 = d.size().epochs()[0].size;
        let m = DemeLimit::of(d.dormancy(), n0).map_err(err)?;
        if let DemeLimit::Kingman { gcd, .. } = m
            && gcd > 1
        {
            let mut residues = scenario.samples().iter().filter(|s| s.deme == i).map(|s| (s.time % gcd, s.kind));
            let first = residues.next();
            let same = residues.all(|r| Some(r) == first);
            if migrates || !same || first.is_some_and(|(_, k)| k == SampleKind::Seedbank) {
                return Err(err(format!(
                    "the look-back support has period {gcd}: only samples of one residue mod {gcd}, \
                     from the population and without migration, are modelled"
                )));
            }
        }
        out.push(m);
    }
    Ok(out)
}

/// Whether the coalescent limit holds for a scenario, and why (or why not), in words.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LimitCheck {
    /// The limit holds: `auto` runs the approximate engine, limit predictions are limits.
    pub holds: bool,
    /// The reason, phrased as the engine choice ("approximate engine: ..." or "exact engine: ...").
    pub reason: String,
}

impl LimitCheck {
    /// The reason without the engine it picks ("N >= 200 ...", "deme `a` has N = 61 ..."),
    /// as predictions word it.
    pub fn why(&self) -> &str {
        self.reason.split_once(" engine: ").map_or(&self.reason, |(_, r)| r)
    }
}

/// The rule (recombination aside, which only the exact engine models):
///
/// - every deme has a limit model ([`deme_limits`]);
/// - N >= [`MIN_DEME_SIZE`] at every epoch start (and end of exponential epochs, see
///   [`min_size`]);
/// - Kingman demes: E\[R] <= N/10 and the look-back scale ([`lookback_scale`]) <= N/10, N the
///   smallest size of the deme;
/// - seed-bank demes: c <= [`MAX_SWITCH_RATE`].
pub fn check(scenario: &Scenario) -> LimitCheck {
    let no = |reason: String| LimitCheck { holds: false, reason };
    let models = match deme_limits(scenario) {
        Ok(m) => m,
        Err(e) => return no(format!("exact engine: no limit applies: deme `{}`: {}", e.deme, e.reason)),
    };
    let mut parts = Vec::new();
    for (d, m) in scenario.demes().iter().zip(&models) {
        let name = d.name();
        let n = min_size(d.size().epochs(), m.coal_scale());
        if n < MIN_DEME_SIZE {
            // A shrinking epoch can fall below one individual in the limit's look-ahead.
            let size = if n < 1.0 { "fewer than 1 individual".to_string() } else { format!("N = {n:.0} individuals") };
            return no(format!(
                "exact engine: deme `{name}` has {size} at some time; a limit needs N >= {MIN_DEME_SIZE}"
            ));
        }
        match *m {
            DemeLimit::Kingman { mean, scale, .. } => {
                let look = lookback_scale(d.dormancy());
                if mean.max(look) > MAX_LOOKBACK_FRACTION * n {
                    return no(format!(
                        "exact engine: deme `{name}`: look-back (mean {mean:.3}, scale {look}) exceeds N/10 = {:.0}",
                        MAX_LOOKBACK_FRACTION * n
                    ));
                }
                parts.push(format!("`{name}` Kingman with time change E[R]^2/d = {scale:.4}"));
            }
            DemeLimit::SeedBank { c, k, .. } => {
                if c > MAX_SWITCH_RATE {
                    return no(format!(
                        "exact engine: deme `{name}`: seed-bank switching rate c = {c:.3} > {MAX_SWITCH_RATE}"
                    ));
                }
                parts.push(format!("`{name}` seed-bank coalescent c = {c:.4}, K = {k:.4}"));
            }
        }
    }
    let mig = if scenario.migration().is_active() { "; structured coalescent for migration" } else { "" };
    LimitCheck {
        holds: true,
        reason: format!(
            "approximate engine: N >= {MIN_DEME_SIZE} and look-back <= N/10 in every deme: {}{mig}",
            parts.join("; ")
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario(yaml: &str) -> Scenario {
        Scenario::from_yaml_str(yaml, "test").unwrap()
    }

    #[test]
    fn rule_accepts_large_demes_and_refuses_small_or_long_dormancy() {
        // The thresholds of the rule itself (common practice: the limit error is O(1/N) and
        // O(E[R]/N)); each case sits on one side of one threshold.
        let ok = scenario(
            "demes: [{name: a, size: 1000, dormancy: {law: uniform, max: 5}}]\nsamples: [{deme: a, count: 4}]\n",
        );
        assert!(check(&ok).holds, "{}", check(&ok).reason);
        let small = scenario("demes: [{name: a, size: 150}]\nsamples: [{deme: a, count: 4}]\n");
        let c = check(&small);
        assert!(!c.holds && c.reason.contains("N = 150"), "{}", c.reason);
        let long = scenario(
            "demes: [{name: a, size: 1000, dormancy: {law: uniform, max: 150}}]\nsamples: [{deme: a, count: 4}]\n",
        );
        assert!(!check(&long).holds);
        let heavy = scenario(
            "demes: [{name: a, size: 1000, dormancy: {law: pareto, alpha: 0.5}}]\nsamples: [{deme: a, count: 4}]\n",
        );
        assert!(check(&heavy).reason.contains("infinite mean"));
    }

    #[test]
    fn shrinking_last_epoch_uses_the_size_where_most_pairs_have_met() {
        // N(τ) = N0 / (1 + 3 g s N0): N0 = 1000, g = 0.001, s = 1 gives 1000/4 = 250.
        let e = [SizeEpoch { start: 0, size: 1000.0, growth: 0.001 }];
        assert!((min_size(&e, 1.0) - 250.0).abs() < 1e-9);
    }
}
