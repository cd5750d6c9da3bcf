//! Predictions for a scenario from published theory, wherever its conditions hold, and a
//! plain statement of why not where they don't.
//!
//! One deme of constant size, samples of the present:
//! * no dormancy — the exact discrete Wright–Fisher chain for T_MRCA and total length
//!   (theory reference §1), Kingman (1982) otherwise; E[ξ_i] = θ/i (Fu 1995); E[S] = θ a_n
//!   and Var[S] = θ a_n + θ² b_n (Watterson 1975); E[π] = θ; E[K_n] (Ewens 1972);
//! * finite-mean dormancy — the Kaj–Krone–Lascoux time change E[R]²/d (Kaj, Krone & Lascoux
//!   2001; exact for a pair, theory reference §3.2) and the exact bookkeeping of
//!   reproduction and dormant mutation rates, E[π] = 2N E[R] E[ν_R]/d (§3.3);
//! * rare, very long dormancy of the form of §5.3 — the seed-bank coalescent with active and
//!   dormant lineages (Blath, González Casanova, Kurt & Wilke-Berenguer 2016);
//! * infinite-mean dormancy — the regime (Hammond & Sheffield 2013; Blath, González
//!   Casanova, Kurt & Spanò 2013), the time scale, and in the forest regime the probability
//!   that two lineages ever meet.
//!
//! Several demes of constant sizes under one migration matrix: pair coalescence times
//! within and between demes from the exact discrete two-lineage chain, with the weak
//! seed-bank factor where dormancy has a finite mean (then approximate), and F_ST as the
//! ratio of expectations (Hudson, Slatkin & Maddison 1992).

use super::{kingman, relatedness, renewal, seedbank_coalescent::SeedBankCoalescent, structured};
use crate::dormancy::{Dormancy, LookBack};
use crate::scenario::{SampleKind, Scenario};
use crate::stats::{harmonic, harmonic_squares};
use serde::Serialize;

/// A predicted value with its source.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Predicted {
    /// The value (generations, or counts per replicate summed over loci).
    pub value: f64,
    /// The published result or exact computation it comes from.
    pub source: String,
    /// Whether it is exact for the discrete model (otherwise a limit or an approximation).
    pub exact: bool,
}

fn p(value: f64, source: &str, exact: bool) -> Option<Predicted> {
    value.is_finite().then(|| Predicted { value, source: source.to_string(), exact })
}

/// Everything `seedline predict` reports; `None` where no prediction applies (see `notes`).
#[derive(Debug, Clone, Default)]
pub struct Prediction {
    /// E[T_2] of two lineages of the present (mean over the sample's pairs with several demes).
    pub pair_time_mean: Option<Predicted>,
    /// E[T_MRCA] of the whole sample.
    pub tmrca_mean: Option<Predicted>,
    /// E[total branch length].
    pub total_length_mean: Option<Predicted>,
    /// E[ξ_1], ..., E[ξ_{n-1}] (summed over loci).
    pub sfs_expected: Option<Vec<f64>>,
    /// Source of `sfs_expected`.
    pub sfs_source: Option<String>,
    /// E[S] (summed over loci).
    pub segregating_sites_mean: Option<Predicted>,
    /// Var[S] of one locus.
    pub segregating_sites_var: Option<Predicted>,
    /// E[π] (summed over loci).
    pub pi_mean: Option<Predicted>,
    /// E[Tajima's D] (approximately 0 under a Kingman-shaped genealogy).
    pub tajima_d_mean: Option<Predicted>,
    /// E[number of distinct haplotypes] at one locus.
    pub haplotypes_mean: Option<Predicted>,
    /// Probability that two lineages of the present ever meet, when below 1.
    pub pair_meet_probability: Option<Predicted>,
    /// Forest regime: probability that individuals `lag` generations apart ever share an
    /// ancestor, `(lag, probability)` (H_lag/(N+S-1), theory reference §4 and §7.1).
    pub related_by_lag: Vec<(u64, f64)>,
    /// Within- and between-deme pair times, `(deme_a, deme_b, E[T])`.
    pub deme_pair_times: Vec<(String, String, f64)>,
    /// Expected F_ST per pair of demes (ratio of expectations).
    pub fst: Vec<(String, String, f64)>,
    /// The regime of the look-back law(s): tree, critical or forest.
    pub regime: Option<String>,
    /// Which theory was used, or why none applies.
    pub notes: Vec<String>,
}

impl Prediction {
    /// The JSON form printed by `seedline predict --json`: plain numbers (null where no
    /// prediction applies) under `pair_time_mean`, `tmrca_mean`, `total_length_mean`,
    /// `sfs_expected`, `segregating_sites_mean`, `segregating_sites_var`, `pi_mean`,
    /// `tajima_d_mean`, `haplotypes_mean`, `pair_meet_probability`; their sources under
    /// `sources` and exactness under `exact`; plus `deme_pair_times`, `fst`, `regime`, `notes`.
    pub fn to_json(&self) -> serde_json::Value {
        use serde_json::{Map, Value, json};
        let fields: [(&str, &Option<Predicted>); 9] = [
            ("pair_time_mean", &self.pair_time_mean),
            ("tmrca_mean", &self.tmrca_mean),
            ("total_length_mean", &self.total_length_mean),
            ("segregating_sites_mean", &self.segregating_sites_mean),
            ("segregating_sites_var", &self.segregating_sites_var),
            ("pi_mean", &self.pi_mean),
            ("tajima_d_mean", &self.tajima_d_mean),
            ("haplotypes_mean", &self.haplotypes_mean),
            ("pair_meet_probability", &self.pair_meet_probability),
        ];
        let mut out = Map::new();
        let mut sources = Map::new();
        let mut exact = Map::new();
        for (k, v) in fields {
            out.insert(k.to_string(), v.as_ref().map_or(Value::Null, |p| json!(p.value)));
            if let Some(p) = v {
                sources.insert(k.to_string(), json!(p.source));
                exact.insert(k.to_string(), json!(p.exact));
            }
        }
        out.insert("sfs_expected".into(), json!(self.sfs_expected));
        if let Some(src) = &self.sfs_source {
            sources.insert("sfs_expected".into(), json!(src));
        }
        out.insert("sources".into(), Value::Object(sources));
        out.insert("exact".into(), Value::Object(exact));
        out.insert("related_by_lag".into(), json!(self.related_by_lag));
        out.insert("deme_pair_times".into(), json!(self.deme_pair_times));
        out.insert("fst".into(), json!(self.fst));
        out.insert("regime".into(), json!(self.regime));
        out.insert("notes".into(), json!(self.notes));
        Value::Object(out)
    }
}

/// Predictions for a scenario (pure; never simulates).
pub fn predict(s: &Scenario) -> Prediction {
    let mut out = predict_without_recombination(s);
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

fn predict_without_recombination(s: &Scenario) -> Prediction {
    let mut out = Prediction::default();
    let n = s.samples().len() as u32;
    let demes = s.demes();
    let present = s.samples().iter().all(|x| x.time == 0 && x.kind == SampleKind::Population);
    if !present {
        out.notes.push(
            "samples are taken at different times or from the seed bank: the published formulas assume a sample of the present, so no T_MRCA, length or SFS prediction applies".into(),
        );
    }
    let loci = s.loci() as f64;
    let laws: Vec<&Dormancy> = demes.iter().map(|d| d.dormancy()).collect();
    let mut regimes = Vec::new();
    for (d, law) in demes.iter().zip(&laws) {
        match renewal::classify(law) {
            Ok(c) => regimes.push(format!("{}: {:?}", d.name(), c.regime).to_lowercase()),
            Err(_) => regimes.push(format!("{}: time-dependent law (since_founding)", d.name())),
        }
    }
    out.regime = Some(regimes.join("; "));
    let sizes: Option<Vec<u64>> = demes.iter().map(|d| d.size().as_constant()).collect();
    let Some(sizes) = sizes else {
        out.notes.push("a deme changes size: no closed-form prediction is implemented for size changes".into());
        return out;
    };
    if demes.len() == 1 {
        one_deme(s, &mut out, laws[0], sizes[0], n, present, loci);
    } else {
        structured_demes(s, &mut out, &laws, &sizes, present, loci);
    }
    out
}

/// Expected mutations per link of a lineage, whole sequence, for mean look-back m.
fn per_link(s: &Scenario, mean: f64) -> Option<f64> {
    s.mutation().map(|m| m.sites() as f64 * (m.reproduction_rate() + m.dormant_rate() * (mean - 1.0)))
}

fn one_deme(s: &Scenario, out: &mut Prediction, law: &Dormancy, big_n: u64, n: u32, present: bool, loci: f64) {
    let nf = big_n as f64;
    if law.is_time_dependent() {
        out.notes.push("the since_founding law depends on time: no stationary theory applies".into());
        return;
    }
    let Some(mean) = law.mean() else {
        // Heavy tails: regime, time scale and (forest) meeting probability.
        if let Ok(scale) = renewal::coalescence_scale(law, big_n) {
            out.notes.push(format!("infinite mean look-back: {}", scale.note()));
        }
        if let Ok(pm) = relatedness::meeting_probability(law, big_n, 0, relatedness::Relatedness::DEFAULT_LEN) {
            if pm < 1.0 {
                out.pair_meet_probability = p(
                    pm,
                    "(S-1)/(N+S-1), S = sum q_k^2 (Blath, González Casanova, Kurt & Spanò 2013; theory reference §4)",
                    true,
                );
                out.notes.push(
                    "forest regime: two lineages may never meet; T_MRCA and SFS have no finite expectation".into(),
                );
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
        return;
    };
    let d = law.support_gcd() as f64;
    out.pair_time_mean = p(
        nf * mean * mean / d,
        "N E[R]^2/d, exact for a pair (theory reference §3.2; Kaj, Krone & Lascoux 2001)",
        true,
    );
    let link = per_link(s, mean);
    if let Some(nu) = link {
        out.pi_mean =
            p(loci * 2.0 * nf * mean * nu / d, "2N E[R] E[nu_R]/d, exact for a pair (theory reference §3.3)", true);
    }
    if !present {
        return;
    }
    if n == 2 {
        out.tmrca_mean = out.pair_time_mean.clone();
    }
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
                out.tmrca_mean = p(nf * e.tmrca, src, false);
            }
            out.total_length_mean = p(nf * (e.active_length + e.dormant_length), src, false);
            if let Some(m) = s.mutation() {
                let (mu_r, mu_d) = (m.sites() as f64 * m.reproduction_rate(), m.sites() as f64 * m.dormant_rate());
                out.segregating_sites_mean =
                    p(loci * nf * (mu_r * e.active_length + mu_d * e.dormant_length), src, false);
                if mu_r > 0.0
                    && let Ok(sfs) = sbc.expected_sfs(n, 2.0 * nf * mu_r, mu_d / mu_r)
                {
                    out.sfs_expected = Some(sfs.iter().map(|x| x * loci).collect());
                    out.sfs_source = Some(src.to_string());
                }
            }
        }
        return;
    }
    let scale = mean * mean / d;
    if law.is_none() && big_n <= 100_000 && n <= 2000 {
        if let Ok(wf) = kingman::wright_fisher_exact(n, big_n as u32) {
            let src = "exact discrete Wright-Fisher chain (theory reference §1)";
            out.tmrca_mean = p(wf.tmrca_mean, src, true);
            out.total_length_mean = p(wf.total_length_mean, src, true);
        }
    } else {
        let src = if law.is_none() {
            "Kingman (1982), 2N(1-1/n) and 2N a_n"
        } else {
            "Kingman (1982) with the Kaj-Krone-Lascoux time change E[R]^2/d (large N)"
        };
        out.tmrca_mean = p(kingman::tmrca_mean(n, nf * scale), src, false);
        out.total_length_mean = p(kingman::total_length_mean(n, nf * scale), src, false);
    }
    if let Some(nu) = link {
        let theta = 2.0 * nf * mean * nu / d;
        let approx = !law.is_none();
        let tag = |s: &str| {
            if approx {
                format!("{s}, with theta_eff = 2N E[R] E[nu_R]/d (Kaj, Krone & Lascoux 2001)")
            } else {
                s.to_string()
            }
        };
        out.sfs_expected = Some(kingman::expected_sfs(n, theta).iter().map(|x| x * loci).collect());
        out.sfs_source = Some(tag("E[xi_i] = theta/i (Fu 1995)"));
        out.segregating_sites_mean = p(loci * theta * a_n, &tag("theta a_n (Watterson 1975)"), false);
        out.segregating_sites_var =
            p(theta * a_n + theta * theta * b_n, &tag("theta a_n + theta^2 b_n (Watterson 1975)"), false);
        out.tajima_d_mean = p(0.0, "approximately 0 under neutrality (Tajima 1989)", false);
        out.haplotypes_mean = p(kingman::ewens_alleles_mean(n, theta), &tag("sum theta/(theta+i) (Ewens 1972)"), false);
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

fn structured_demes(s: &Scenario, out: &mut Prediction, laws: &[&Dormancy], sizes: &[u64], present: bool, loci: f64) {
    if s.migration().epochs().len() > 1 {
        out.notes.push("migration changes over time: no closed-form prediction is implemented".into());
        return;
    }
    let same_law = laws.iter().all(|l| l.law_name() == laws[0].law_name() && l.mean() == laws[0].mean());
    if !same_law || laws[0].is_time_dependent() {
        out.notes.push("demes differ in their dormancy law: no structured-coalescent prediction is implemented".into());
        return;
    }
    let Some(mean) = laws[0].mean() else {
        out.notes.push("infinite-mean dormancy with several demes: no prediction applies".into());
        return;
    };
    if sizes.len() > structured::MAX_DEMES {
        out.notes.push(format!(
            "{} demes: the exact pair-time calculation is implemented for at most {} demes",
            sizes.len(),
            structured::MAX_DEMES
        ));
        return;
    }
    let fsizes: Vec<f64> = sizes.iter().map(|&x| x as f64).collect();
    let Ok(mut times) = structured::pair_coalescence_times(&fsizes, s.migration().matrix_at(0)) else {
        out.notes.push("the migration matrix does not connect the demes: pair times are infinite".into());
        return;
    };
    let mut src =
        "exact discrete two-lineage chain (theory reference §6; Strobeck 1987 for the within-deme value)".to_string();
    let mut exact = true;
    if !laws[0].is_none() {
        match times.with_weak_seed_bank(laws[0]) {
            Ok(t) => times = t,
            Err(_) => return,
        }
        src.push_str(" times the weak seed-bank factor E[R]^2/d (approximate with several demes)");
        exact = false;
    }
    let names: Vec<&str> = s.demes().iter().map(|d| d.name()).collect();
    for a in 0..names.len() {
        for b in a..names.len() {
            out.deme_pair_times.push((names[a].to_string(), names[b].to_string(), times.get(a, b)));
            if b > a {
                out.fst.push((names[a].to_string(), names[b].to_string(), times.fst(a, b)));
            }
        }
    }
    if !present {
        return;
    }
    // Mean over the sample's pairs of E[T(deme_i, deme_j)].
    let samples = s.samples();
    let (mut sum, mut pairs) = (0.0, 0.0);
    for i in 0..samples.len() {
        for j in i + 1..samples.len() {
            sum += times.get(samples[i].deme, samples[j].deme);
            pairs += 1.0;
        }
    }
    if pairs == 0.0 {
        return;
    }
    let pair = sum / pairs;
    out.pair_time_mean = p(pair, &src, exact);
    if samples.len() == 2 {
        out.tmrca_mean = out.pair_time_mean.clone();
    }
    if let Some(nu) = per_link(s, mean) {
        // E[pi] = 2 E[T_pair] x mutations per generation of a lineage, E[nu_R]/E[R].
        out.pi_mean = p(loci * 2.0 * pair * nu / mean, &src, exact);
    }
    out.notes
        .push("several demes: pair times only; no closed form for T_MRCA or the SFS of a structured sample".into());
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario(yaml: &str) -> Scenario {
        Scenario::from_yaml_str(yaml, "t").unwrap()
    }

    #[test]
    fn no_dormancy_uses_the_exact_chain_and_watterson() {
        // Source: theory reference §1 (N = 100, n = 10: 179.521098, 566.535976) and
        // Watterson (1975): E[S] = theta a_n with theta = 2 N mu L = 2·100·1e-4·10 = 0.2.
        let s = scenario(
            "demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 10}]\nmutation: {rate: 1.0e-4, sites: 10}\n",
        );
        let pr = predict(&s);
        assert!((pr.tmrca_mean.unwrap().value - 179.521098).abs() < 1e-5);
        assert!((pr.total_length_mean.unwrap().value - 566.535976).abs() < 1e-5);
        assert!((pr.segregating_sites_mean.unwrap().value - 0.2 * harmonic(10)).abs() < 1e-12);
        assert!((pr.pi_mean.unwrap().value - 0.2).abs() < 1e-12);
        assert_eq!(pr.pair_time_mean.unwrap().value, 100.0);
    }

    #[test]
    fn seed_bank_coalescent_values() {
        // Source: theory reference §5.2: c = K = 1, n = 10, E[T_MRCA] = 8.070856 N, and
        // §5.3: E[T_2] = N (1 + 1/K)^2 = 4N exactly. A geometric part of mean g is, being
        // memoryless, R = 1 w.p. 1/g and 1 + Geometric(mean g) otherwise; weight w = 1/(N-1)
        // and g = N give c = N w (g-1)/g = 1 and K = N/(c g) = 1.
        let big_n = 2000.0;
        let w = 1.0 / (big_n - 1.0);
        let s = scenario(&format!(
            "demes: [{{name: a, size: 2000, dormancy: {{law: mixture, parts: [{{weight: {}, law: none}}, {{weight: {w}, law: geometric, mean: 2000}}]}}}}]\nsamples: [{{deme: a, count: 10}}]\n",
            1.0 - w
        ));
        let pr = predict(&s);
        let t = pr.tmrca_mean.unwrap().value / big_n;
        assert!((t - 8.070856).abs() < 1e-6, "{t}");
        assert!((pr.pair_time_mean.unwrap().value / big_n - 4.0).abs() < 1e-9);
    }

    #[test]
    fn island_pair_times() {
        // Source: theory reference §6, D = 3, N = 50, m = 0.01: T_within = 150 (Strobeck 1987),
        // T_between = 247.755668; mean over the pairs of a sample (a, b): T_between.
        let s = scenario(
            "demes: [{name: a, size: 50}, {name: b, size: 50}, {name: c, size: 50}]\nmigration:\n  - {from: a, to: b, rate: 0.005}\n  - {from: a, to: c, rate: 0.005}\n  - {from: b, to: a, rate: 0.005}\n  - {from: b, to: c, rate: 0.005}\n  - {from: c, to: a, rate: 0.005}\n  - {from: c, to: b, rate: 0.005}\nsamples: [{deme: a, count: 1}, {deme: b, count: 1}]\n",
        );
        let pr = predict(&s);
        assert!((pr.pair_time_mean.unwrap().value - 247.755668).abs() < 1e-5);
        let within = pr.deme_pair_times.iter().find(|(x, y, _)| x == "a" && y == "a").unwrap().2;
        assert!((within - 150.0).abs() < 1e-8);
    }

    #[test]
    fn heavy_tails_give_regime_and_meeting_probability() {
        // Source: theory reference §7.4 law B alpha = 0.4: S = 1.445129644441, so for N = 10
        // P(meet) = (S-1)/(N+S-1) = 0.445129644441/10.445129644441.
        let s = scenario(
            "demes: [{name: a, size: 10, dormancy: {law: pareto, alpha: 0.4}}]\nsamples: [{deme: a, count: 2}]\n",
        );
        let pr = predict(&s);
        assert!(pr.regime.unwrap().contains("forest"));
        let pm = pr.pair_meet_probability.unwrap().value;
        assert!((pm - 0.445129644441 / 10.445129644441).abs() < 1e-6, "{pm}");
        // Source: §7.4 law B alpha = 0.4, N = 1 ... here N = 10: H_n/(N+S-1) = P(0~n) S/(N+S-1)
        // with P(0~10) = 0.278172556543 (law B table).
        let lag10 = pr.related_by_lag.iter().find(|(l, _)| *l == 10).unwrap().1;
        let expected = 0.278172556543 * 1.445129644441 / 10.445129644441;
        assert!((lag10 - expected).abs() < 1e-6 * expected.max(1e-3) + 1e-7, "{lag10} vs {expected}");
        assert!(pr.tmrca_mean.is_none());
    }
}
