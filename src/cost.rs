//! What a run will cost, said before it starts: lineages that can never meet, the expected
//! number of lineage steps of the exact engine, and the memory of the mutations.
//!
//! **Steps.** Going back, a pair of lineages meets at rate h(t) = 1 / (N(t) E[R]²) per
//! generation (the coalescent time scale of Kaj, Krone & Lascoux 2001, J. Appl. Probab.
//! 38:285; exact in mean for a pair in one deme of constant size), with N(t) the summed size
//! of the demes, so Λ(t) = ∫₀ᵗ h is the coalescent time reached at generation t. In
//! coalescent time, n lineages fall to k - 1 at about τ_k = 2 (1/(k-1) - 1/n) (the
//! expected Kingman epoch ends, Kingman 1982), so the lineages walk
//!
//! ```text
//! W = Σ_{k=2..n} k (t(τ_{k-1}) - t(τ_k)),   t(τ) = Λ⁻¹(τ) capped at the horizon H,
//! ```
//! generations in all (the expected tree length; n H when no pair meets before H), and the
//! exact engine takes about W / E[R] steps, one look-back each. It is an order of magnitude,
//! not a prediction: structure and multiple mergers are left out. Without dormancy, in one
//! deme of constant size without migration, the engine skips ahead and the cost is a few
//! draws per merge.
//!
//! **Memory.** Mutations per locus ≈ sites (reproduction rate · W/E[R] + dormant rate ·
//! W (1 - 1/E[R])), each costing about [`bytes_per_mutation`] while it is placed.
//!
//! **Forests.** Lineages of demes that no migration path joins, in any epoch, can never meet
//! ([`crate::demography::Migration::meeting_groups`]): every replicate is then a forest, and
//! the engine stops such lineages as soon as nothing else can reach them.

use crate::dormancy::LookBack;
use crate::scenario::Scenario;

/// Lineage steps per second of the exact engine on one core (`docs/performance.md`:
/// 1.5e7 to 2.5e7 with dormancy), used to turn steps into time.
pub const STEPS_PER_SECOND: f64 = 2.0e7;
/// Expected steps per replicate beyond which a run is refused as astronomical (about
/// 14 hours per replicate at [`STEPS_PER_SECOND`]).
pub const MAX_STEPS_PER_REPLICATE: f64 = 1.0e12;
/// Expected duration of a whole run (seconds) beyond which a note says how long it takes.
pub const NOTE_SECONDS: f64 = 120.0;

/// The expected cost of one replicate.
#[derive(Debug, Clone, PartialEq)]
pub struct Estimate {
    /// Expected lineage steps of the exact engine.
    pub steps: f64,
    /// Expected generations walked by all lineages (the tree length, capped by the horizon).
    pub walked: f64,
    /// Expected mutations per locus, with a mutation model.
    pub mutations: Option<f64>,
    /// Whether the exact engine skips ahead (no dormancy, one deme of constant size).
    pub skips_ahead: bool,
    /// Whether no pair is expected to meet before the horizon.
    pub horizon_bound: bool,
}

/// Why a run is refused before it starts.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum Refusal {
    /// The exact engine would take astronomically many steps.
    #[error(
        "{origin}: the exact engine would take about {steps:.1e} lineage steps per replicate ({why}); at about {STEPS_PER_SECOND:.0e} steps per second that is {time} per replicate. {advice}"
    )]
    Steps {
        /// Scenario file.
        origin: String,
        /// Expected steps per replicate.
        steps: f64,
        /// Where the number comes from.
        why: String,
        /// The time in words.
        time: String,
        /// What to do instead.
        advice: String,
    },
    /// The mutations would not fit in memory.
    #[error("{origin}: mutation: {message}")]
    Memory {
        /// Scenario file.
        origin: String,
        /// How many mutations, how much memory, how much is available, and what to do.
        message: String,
    },
}

/// Bytes held per mutation while a locus's mutations are placed: its position and sort
/// entry, the sampling of distinct positions, and one bit per sample in the haplotype matrix
/// (with the slack of growing vectors).
pub fn bytes_per_mutation(samples: usize) -> u64 {
    72 + 16 * samples.div_ceil(64) as u64
}

/// A byte count in words: `512 MB`, `37.2 GB`.
pub fn bytes_text(bytes: f64) -> String {
    if bytes < 1e9 { format!("{:.0} MB", (bytes / 1e6).ceil()) } else { format!("{:.1} GB", bytes / 1e9) }
}

/// The expected cost of one replicate (see the module documentation), or `None` when the
/// time scale is unknown (infinite-mean or time-dependent dormancy).
pub fn estimate(scenario: &Scenario) -> Option<Estimate> {
    let demes = scenario.demes();
    let mut means = Vec::with_capacity(demes.len());
    for d in demes {
        if d.dormancy().is_time_dependent() {
            return None;
        }
        means.push(d.dormancy().mean()?);
    }
    let n = scenario.samples().len();
    let horizon = scenario.horizon() as f64;
    let skips_ahead = demes.len() == 1
        && demes[0].dormancy().is_none()
        && demes[0].size().as_constant().is_some()
        && !scenario.migration().is_active();
    // Size-weighted mean look-back at time 0 for the time scale.
    let sizes0: Vec<f64> = demes.iter().map(|d| d.size().at(0) as f64).collect();
    let mu = means.iter().zip(&sizes0).map(|(m, s)| m * s).sum::<f64>() / sizes0.iter().sum::<f64>();
    let hazard = |t: u64| -> f64 {
        let total: f64 = demes.iter().map(|d| d.size().at(t) as f64).sum();
        1.0 / (total * mu * mu)
    };
    let grid = time_grid(scenario);
    // Cumulative coalescent time Λ at each grid point (log-mean of the hazard between points:
    // exact for sizes that change exponentially).
    let mut lambda = Vec::with_capacity(grid.len());
    let mut acc = 0.0;
    let mut prev = (grid[0], hazard(grid[0] as u64));
    lambda.push(0.0);
    for &t in &grid[1..] {
        let h = hazard(t as u64);
        let (a, ha) = prev;
        let mean = if (h - ha).abs() <= 1e-12 * ha { ha } else { (h - ha) / (h / ha).ln() };
        acc += (t - a) * mean;
        lambda.push(acc);
        prev = (t, h);
    }
    let time_at = |tau: f64| -> f64 {
        let i = lambda.partition_point(|&l| l < tau);
        if i >= lambda.len() {
            return horizon;
        }
        if i == 0 {
            return 0.0;
        }
        let (l0, l1) = (lambda[i - 1], lambda[i]);
        let f = if l1 > l0 { (tau - l0) / (l1 - l0) } else { 0.0 };
        (grid[i - 1] + f * (grid[i] - grid[i - 1])).min(horizon)
    };
    let nf = n as f64;
    let mut walked = 0.0;
    for k in (2..=n).rev() {
        let kf = k as f64;
        let start = 2.0 * (1.0 / kf - 1.0 / nf);
        let end = 2.0 * (1.0 / (kf - 1.0) - 1.0 / nf);
        walked += kf * (time_at(end) - time_at(start));
    }
    let horizon_bound = n >= 2 && time_at(2.0 * (1.0 - 1.0 / nf)) >= horizon;
    let steps = if skips_ahead { 4.0 * nf } else { walked / mu };
    let mutations = scenario.mutation().map(|m| {
        let reproductions = walked / mu;
        m.sites() as f64 * (m.reproduction_rate() * reproductions + m.dormant_rate() * (walked - reproductions))
    });
    Some(Estimate { steps, walked, mutations, skips_ahead, horizon_bound })
}

/// Time points for the integral: 0, both sides of every size-epoch start, and 32 points per
/// decade up to the horizon.
fn time_grid(scenario: &Scenario) -> Vec<f64> {
    let h = scenario.horizon() as f64;
    let mut g = vec![0.0, h];
    let decades = h.log10().ceil() as i32;
    for j in 0..=(decades * 32) {
        let t = 10f64.powf(j as f64 / 32.0);
        if t < h {
            g.push(t.round());
        }
    }
    for d in scenario.demes() {
        for e in d.size().epochs() {
            let s = e.start as f64;
            if s > 0.0 && s < h {
                g.push(s - 1.0);
                g.push(s);
            }
        }
    }
    g.sort_by(f64::total_cmp);
    g.dedup();
    g
}

/// Notes and refusals before a run of `scenario` (`origin` names its file) with the engine
/// `exact` or not, on `threads` workers, with `available` bytes of memory when known.
pub fn preflight(
    scenario: &Scenario,
    origin: &str,
    exact: bool,
    threads: usize,
    available: Option<u64>,
) -> Result<Vec<String>, Refusal> {
    let mut notes = Vec::new();
    if let Some(n) = forest_note(scenario) {
        notes.push(n);
    }
    let Some(est) = estimate(scenario) else { return Ok(notes) };
    if let (Some(m), Some(mutations)) = (scenario.mutation(), est.mutations) {
        let samples = scenario.samples().len();
        let per = bytes_per_mutation(samples);
        let bytes = mutations * per as f64;
        let parallel = threads.clamp(1, scenario.replicates().max(scenario.loci()).min(1 << 20) as usize);
        let limit = available.map_or(f64::INFINITY, |a| a as f64);
        // Refuse only where a locus alone is near the limit or all threads together exceed it.
        if bytes * parallel as f64 > limit {
            let fewer = bytes <= limit;
            let threads_text = if parallel > 1 {
                format!(", and {parallel} threads at once need {}", bytes_text(bytes * parallel as f64))
            } else {
                String::new()
            };
            return Err(Refusal::Memory {
                origin: origin.to_string(),
                message: format!(
                    "expected about {mutations:.2e} mutations per locus (mutation.sites = {}, expected tree length about {:.3e} generations), about {} of memory each while they are placed ({per} bytes per mutation for {samples} sampled sequences){threads_text}, but {} are available: lower mutation.sites or the mutation rate{}",
                    m.sites(),
                    est.walked,
                    bytes_text(bytes),
                    bytes_text(limit),
                    if fewer { ", or use fewer --threads" } else { "" }
                ),
            });
        }
    }
    if exact && !est.skips_ahead {
        let why = if est.horizon_bound {
            format!(
                "lineages are not expected to meet before the horizon of {:.1e} generations, so each walks to it",
                scenario.horizon() as f64
            )
        } else {
            format!(
                "expected tree length about {:.1e} generations on the coalescent time scale N E[R]^2 (Kaj, Krone & Lascoux 2001)",
                est.walked
            )
        };
        let approx_ok = scenario.recombination().is_none()
            && crate::engine::resolve(crate::engine::EngineChoice::Approx, scenario).is_ok();
        let advice = if approx_ok {
            "Use --engine approx (the continuous-time limit) or a smaller `horizon`".to_string()
        } else {
            "Use a smaller `horizon` (the approximate engine does not cover this scenario)".to_string()
        };
        let per_replicate = est.steps / STEPS_PER_SECOND;
        if est.steps > MAX_STEPS_PER_REPLICATE {
            return Err(Refusal::Steps {
                origin: origin.to_string(),
                steps: est.steps,
                why,
                time: crate::report::progress::duration(per_replicate),
                advice,
            });
        }
        let total = per_replicate * scenario.replicates() as f64 / threads.max(1) as f64;
        if total > NOTE_SECONDS {
            notes.push(format!(
                "the exact engine is expected to take about {:.1e} lineage steps per replicate ({why}): about {} for {} replicates on {} threads at {STEPS_PER_SECOND:.0e} steps per second. {advice} for a faster run",
                est.steps,
                crate::report::progress::duration(total),
                scenario.replicates(),
                threads.max(1)
            ));
        }
    }
    Ok(notes)
}

/// A note when the sample falls into groups whose lineages can never meet.
pub fn forest_note(scenario: &Scenario) -> Option<String> {
    let migration = scenario.migration();
    if !migration.has_reachability() {
        return None;
    }
    // One representative per (deme, time) of the sample.
    let mut points: Vec<(usize, u64)> = scenario.samples().iter().map(|s| (s.deme, s.time)).collect();
    points.sort_unstable();
    points.dedup();
    let groups = migration.meeting_groups(&points);
    if groups.len() < 2 {
        return None;
    }
    let names = |g: &Vec<usize>| {
        let mut v: Vec<&str> = g.iter().map(|&i| scenario.demes()[points[i].0].name()).collect();
        v.dedup();
        v.join(", ")
    };
    let listed: Vec<String> = groups.iter().take(4).map(|g| format!("{{{}}}", names(g))).collect();
    Some(format!(
        "the sampled demes fall into {} groups that no migration path joins in any epoch ({}{}): their lineages can never meet, so every replicate ends as a forest of at least {} roots (tmrca stays empty); the engine stops such lineages as soon as nothing else can reach them",
        groups.len(),
        listed.join(", "),
        if groups.len() > 4 { ", ..." } else { "" },
        groups.len()
    ))
}

/// Memory available to this process, from /proc/meminfo (Linux); `None` elsewhere.
pub fn available_memory() -> Option<u64> {
    std::fs::read_to_string("/proc/meminfo").ok().and_then(|t| parse_meminfo(&t))
}

/// Bytes of memory available, from `MemAvailable` of `/proc/meminfo` text.
pub fn parse_meminfo(text: &str) -> Option<u64> {
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    kb.checked_mul(1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario(yaml: &str) -> Scenario {
        Scenario::from_yaml_str(yaml, "t.yaml").unwrap()
    }

    #[test]
    fn tree_length_of_one_deme_matches_kingman() {
        // Source: Kingman (1982): E[L] = 2 N E[R]^2 a_n with a_n = sum_{k<n} 1/k. For n = 2
        // the mean-field epoch ends are the exact means, so W = 2 E[T_2] = 2 N E[R]^2.
        let s = scenario(
            "demes: [{name: a, size: 1000, dormancy: {law: uniform, max: 3}}]\nsamples: [{deme: a, count: 2}]\n",
        );
        let e = estimate(&s).unwrap();
        assert!((e.walked - 2.0 * 1000.0 * 4.0).abs() < 0.01 * 8000.0, "{e:?}");
        assert!((e.steps - e.walked / 2.0).abs() < 1e-9 * e.steps);
        // n = 10: W = sum_k k (tau_{k-1} - tau_k) N E[R]^2 = 2 a_10 N E[R]^2 exactly in the
        // mean-field epochs; a_10 = 2.828968.
        let s = scenario(
            "demes: [{name: a, size: 1000, dormancy: {law: uniform, max: 3}}]\nsamples: [{deme: a, count: 10}]\n",
        );
        let e = estimate(&s).unwrap();
        let want = 2.0 * 2.828968 * 4000.0;
        assert!((e.walked - want).abs() < 0.01 * want, "{} vs {want}", e.walked);
    }

    #[test]
    fn a_population_growing_without_bound_backward_walks_to_the_horizon() {
        // N(t) = 1000 e^t going back: sum_t 1/N(t) < 0.002, so a pair almost never meets and
        // 4 lineages walk 4 H generations (up to the 0.2 % of pairs that meet early).
        let s = scenario(
            "horizon: 1.0e9\ndemes: [{name: a, size: [{generations_ago: 0, size: 1000, growth: -1}], dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 4}]\n",
        );
        let e = estimate(&s).unwrap();
        assert!(e.horizon_bound);
        assert!((e.walked / 4.0e9 - 1.0).abs() < 0.01, "{e:?}");
        let notes = preflight(&s, "t.yaml", true, 2, None).unwrap();
        assert!(notes.iter().any(|n| n.contains("horizon") && n.contains("100 replicates")), "{notes:?}");
        let s = scenario(
            "horizon: 1.0e15\ndemes: [{name: a, size: [{generations_ago: 0, size: 1000, growth: -1}], dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 4}]\n",
        );
        let e = preflight(&s, "t.yaml", true, 2, None).unwrap_err();
        assert!(matches!(e, Refusal::Steps { .. }) && e.to_string().contains("horizon"), "{e}");
    }

    #[test]
    fn huge_populations_with_dormancy_are_refused_for_the_exact_engine_only() {
        let yaml = "horizon: 1.0e15\ndemes: [{name: a, size: 1.0e18, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 4}]\n";
        let s = scenario(yaml);
        let e = preflight(&s, "t.yaml", true, 1, None).unwrap_err();
        assert!(e.to_string().contains("--engine approx"), "{e}");
        assert!(preflight(&s, "t.yaml", false, 1, None).is_ok());
        // Without dormancy the engine skips ahead: cheap at any N.
        let s = scenario("demes: [{name: a, size: 1.0e18}]\nsamples: [{deme: a, count: 4}]\n");
        assert!(preflight(&s, "t.yaml", true, 1, None).unwrap().is_empty());
    }

    #[test]
    fn memory_of_too_many_mutations_is_refused_with_the_amount() {
        // E[L] = 2 N a_8 = 2 * 100 * 2.592857 = 518.6 generations; E[mutations] = 1e6 * 518.6.
        let s = scenario(
            "demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 8}]\nmutation: {rate: 1.0e-6, sites: 999999999999}\n",
        );
        let e = estimate(&s).unwrap();
        let m = e.mutations.unwrap();
        assert!((m / 5.186e8 - 1.0).abs() < 0.02, "{m}");
        let err = preflight(&s, "t.yaml", true, 2, Some(16 << 30)).unwrap_err();
        let text = err.to_string();
        assert!(text.contains("GB") && text.contains("mutation.sites"), "{text}");
        assert!(preflight(&s, "t.yaml", true, 2, None).is_ok(), "no limit known, no refusal");
        assert_eq!(parse_meminfo("MemTotal: 100 kB\nMemAvailable:   2048 kB\n"), Some(2048 * 1024));
    }

    #[test]
    fn unreachable_demes_are_named() {
        let s = scenario(
            "demes: [{name: a, size: 10}, {name: b, size: 10}, {name: c, size: 10}]\nmigration: [{from: a, to: c, rate: 0.1}]\nsamples: [{deme: a, count: 2}, {deme: b, count: 2}, {deme: c, count: 1}]\n",
        );
        let note = forest_note(&s).unwrap();
        assert!(note.contains("2 groups") && note.contains("{a, c}") && note.contains("{b}"), "{note}");
        let s = scenario(
            "demes: [{name: a, size: 10}, {name: b, size: 10}]\nmigration: [{from: a, to: b, rate: 0.1, generations_ago: [0, 10]}]\nsamples: [{deme: a, count: 2}, {deme: b, count: 2}]\n",
        );
        assert!(forest_note(&s).is_none(), "a may reach b in the first 10 generations");
    }
}
