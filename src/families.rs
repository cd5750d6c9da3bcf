//! Families of a time block: one individual in each generation of a range, in one deme.
//!
//! In the forest regime of heavy-tailed dormancy (sum q_k^2 finite, e.g. pareto alpha < 1/2)
//! the genealogy of a block is a forest: individuals in the same tree share an ancestor no
//! older than the horizon and form a *family*. Per replicate this module finds
//!
//! - the partition of the block into families (number, sizes);
//! - for each lag l, which pairs (i, i + l) are in the same family;
//! - for related pairs at a few lags, the depth D of their most recent common ancestor below
//!   the older individual, as D / l;
//! - the coloured-family sum: each family gets an independent centred type (±1 or standard
//!   normal) and S_m sums the types of the first (youngest) m individuals.
//!
//! It pools replicates and sets the results beside renewal theory
//! ([`crate::theory::relatedness`]):
//!
//! ```text
//! P(0 ~ l) = H_l / S              (N = 1; H_l / (N + S - 1) for a deme of N)
//! P(D <= x l | 0 ~ l)             exact finite-l law, and its limit BetaPrime(alpha, 1 - 2 alpha)
//! Var(S_m) = m + 2 sum_{d<m} (m - d) P(0 ~ d)  ~  C m^(2H) / (H (2H - 1)),   H = alpha + 1/2
//! ```
//! Sources: Hammond & Sheffield (2013), *Probab. Theory Relat. Fields* 157:691-719 (H);
//! Blath, González Casanova, Kurt & Spanò (2013), *J. Appl. Probab.* 50:741-759 (N > 1);
//! theory reference §4 and §7.
//!
//! **Horizon bias.** The engine stops a lineage at the horizon, so a pair whose common
//! ancestor is older than the horizon is counted as unrelated: simulated relatedness (and
//! Var(S_m)) can only be lower than the prediction. The relative shortfall at lag l is
//! P(D > horizon - t_old | related), from the finite-horizon law of
//! [`crate::theory::horizon`]: asymptotically (1 / P(0 ~ l) - 1) Phi(horizon - t_old), so it
//! grows with the lag only through P(0 ~ l). It is averaged over the pairs examined and
//! reported per lag (any N).
//!
//! **Random streams.** Replicate r simulates its genealogy from its own stream
//! ([`crate::batch::replicate_rng`]) and then draws the family types from the *same* stream,
//! after the genealogy, one per family in order of first appearance in the block; results
//! therefore do not depend on the number of threads. The bootstrap of the exponent fit uses
//! the stream [`BOOTSTRAP_STREAM`] of the same master key.

use crate::batch::{self, BatchConfig, master_key, replicate_rng};
use crate::genealogy::Genealogy;
use crate::report::{Provenance, fmt_num, quantile_sorted, write_atomic};
use crate::scenario::{SampleKind, Scenario};
use crate::theory::horizon::HorizonLaw;
use crate::theory::relatedness::{Relatedness, beta_prime_cdf, coloured_variance_asymptote};
use crate::theory::renewal::{Regime, RenewalError, classify};
use rand::{Rng, RngExt};
use rand_distr::{Distribution, StandardNormal};
use serde::Serialize;
use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Files written by [`write_to_dir`], in order.
pub const FILES: [&str; 6] =
    ["families.tsv", "family_sizes.tsv", "relatedness.tsv", "mrca_depth.tsv", "coloured.tsv", "families.json"];

/// The points x at which the CDF of D / l given relatedness is tabulated (as theory reference §7.4).
pub const DEPTH_XS: [f64; 5] = [0.1, 0.5, 1.0, 2.0, 5.0];

/// Stream index of the bootstrap generator (replicate indices stay below it).
pub const BOOTSTRAP_STREAM: u64 = u64::MAX;

/// Why a families analysis could not be done.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum FamiliesError {
    /// The scenario's sample is not one individual in each generation of a range of one deme.
    #[error("the families analysis needs a block sample (one individual in each generation of a range, one deme): {0}")]
    NotABlock(String),
    /// A theory value could not be computed.
    #[error("theory: {0}")]
    Theory(#[from] RenewalError),
    /// The batch of replicates failed.
    #[error(transparent)]
    Batch(#[from] batch::Error),
    /// An output file could not be written.
    #[error("writing {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// Cause.
        source: std::io::Error,
    },
    /// The JSON summary could not be serialised.
    #[error("serialising families.json: {0}")]
    Json(#[from] serde_json::Error),
    /// The requested engine cannot run the scenario.
    #[error(transparent)]
    Engine(#[from] crate::engine::Error),
}

impl FamiliesError {
    /// Whether the error is the user's input being wrong (the binary exits 2).
    pub fn is_bad_input(&self) -> bool {
        matches!(self, FamiliesError::NotABlock(_) | FamiliesError::Engine(_))
    }
}

/// The law of the centred family types.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Colours {
    /// +1 or -1 with probability 1/2 each (one fair bit per family).
    Pm1,
    /// Standard normal (rand_distr `StandardNormal`).
    Normal,
}

/// Tuning of the analysis.
#[derive(Debug, Clone, Copy)]
pub struct Options {
    /// Law of the family types.
    pub colours: Colours,
    /// Pairs (i, i + l) examined per lag: all when there are at most this many, otherwise this
    /// many with evenly spaced i (systematic, no randomness).
    pub max_pairs_per_lag: usize,
    /// Smallest m used in the fit of the growth exponent of Var(S_m).
    pub fit_from: usize,
    /// Bootstrap resamples of the replicates for the exponent's interval (0: no interval).
    pub bootstrap: usize,
    /// The engine asked for (`--engine`); the genealogy of the block is that of one site.
    pub engine: crate::engine::EngineChoice,
}

impl Default for Options {
    fn default() -> Self {
        Options {
            colours: Colours::Pm1,
            max_pairs_per_lag: 1000,
            fit_from: 10,
            bootstrap: 400,
            engine: crate::engine::EngineChoice::Auto,
        }
    }
}

/// The block design: sample index of the individual of each generation `first + k`.
#[derive(Debug, Clone)]
pub struct Block {
    deme: usize,
    first: u64,
    samples: Vec<u32>,
}

impl Block {
    /// Recognises a block design in the scenario's sample.
    ///
    /// Needs at least two sampled individuals, all taken from the population (not the seed
    /// bank) of one deme, exactly one in each generation from the youngest to the oldest
    /// sampling time. The sample groups may be listed in any order. Anything else gives
    /// [`FamiliesError::NotABlock`].
    pub fn of(scenario: &Scenario) -> Result<Block, FamiliesError> {
        let s = scenario.samples();
        if s.len() < 2 {
            return Err(FamiliesError::NotABlock(format!("{} sampled individual(s), need at least 2", s.len())));
        }
        let deme = s[0].deme;
        if let Some(o) = s.iter().find(|x| x.deme != deme) {
            return Err(FamiliesError::NotABlock(format!(
                "samples from demes {} and {}",
                scenario.demes()[deme].name(),
                scenario.demes()[o.deme].name()
            )));
        }
        if let Some(o) = s.iter().find(|x| x.kind != SampleKind::Population) {
            return Err(FamiliesError::NotABlock(format!("{} is a seed-bank sample", o.label)));
        }
        let first = s.iter().map(|x| x.time).min().unwrap_or(0);
        let last = s.iter().map(|x| x.time).max().unwrap_or(0);
        if last - first + 1 != s.len() as u64 {
            return Err(FamiliesError::NotABlock(format!(
                "{} individuals over generations {first}..={last}: not one per generation",
                s.len()
            )));
        }
        let mut samples = vec![u32::MAX; s.len()];
        for (i, x) in s.iter().enumerate() {
            let slot = &mut samples[(x.time - first) as usize];
            if *slot != u32::MAX {
                return Err(FamiliesError::NotABlock(format!("two individuals sampled in generation {}", x.time)));
            }
            *slot = i as u32;
        }
        Ok(Block { deme, first, samples })
    }

    /// Number of generations (= individuals) in the block.
    pub fn len(&self) -> usize {
        self.samples.len()
    }

    /// Always false: a block has at least two individuals.
    pub fn is_empty(&self) -> bool {
        self.samples.is_empty()
    }

    /// The deme sampled.
    pub fn deme(&self) -> usize {
        self.deme
    }

    /// Youngest generation of the block (generations ago).
    pub fn first(&self) -> u64 {
        self.first
    }

    /// Oldest generation of the block.
    pub fn last(&self) -> u64 {
        self.first + self.samples.len() as u64 - 1
    }
}

/// Which pairs, lags and sums are looked at; fixed for a run, the same for every replicate.
#[derive(Debug, Clone)]
pub struct Plan {
    len: usize,
    max_pairs: usize,
    depth_lags: Vec<usize>,
    grid: Vec<usize>,
    colours: Colours,
}

impl Plan {
    /// The plan for a block of `len` individuals.
    ///
    /// Depth lags: 1, 2, 5, 10, 20, 50, ... below `len`. Sum grid: m = round(10^(j/6)),
    /// j = 0, 1, ..., up to `len`, and `len` itself.
    pub fn new(len: usize, options: &Options) -> Plan {
        let mut depth_lags = Vec::new();
        let mut decade = 1usize;
        'outer: loop {
            for f in [1, 2, 5] {
                let l = f * decade;
                if l >= len {
                    break 'outer;
                }
                depth_lags.push(l);
            }
            decade *= 10;
        }
        let mut grid: Vec<usize> =
            (0..).map(|j| 10f64.powf(j as f64 / 6.0).round() as usize).take_while(|&m| m <= len).collect();
        grid.push(len);
        grid.dedup();
        Plan { len, max_pairs: options.max_pairs_per_lag.max(1), depth_lags, grid, colours: options.colours }
    }

    /// Lags at which the MRCA depth is recorded.
    pub fn depth_lags(&self) -> &[usize] {
        &self.depth_lags
    }

    /// The values of m at which S_m is recorded.
    pub fn grid(&self) -> &[usize] {
        &self.grid
    }

    /// Number of pairs examined at `lag` (1 <= lag < len).
    pub fn pairs(&self, lag: usize) -> usize {
        (self.len - lag).min(self.max_pairs)
    }

    /// Whether the pair (i, i + lag) is among those examined (one of [`Plan::starts`]).
    fn examines(&self, lag: usize, i: usize) -> bool {
        let count = self.len - lag;
        let take = count.min(self.max_pairs);
        // The k with floor(k count / take) = i, if any, is ceil(i take / count).
        let k = (i * take).div_ceil(count);
        i < count && k < take && k * count / take == i
    }

    /// First members i of the pairs (i, i + lag) examined: all, or `max_pairs` evenly spaced.
    fn starts(&self, lag: usize) -> impl Iterator<Item = usize> + use<> {
        let count = self.len - lag;
        let take = count.min(self.max_pairs);
        // k * count / take is strictly increasing in k when take <= count.
        (0..take).map(move |k| k * count / take)
    }
}

/// Depth counts of one replicate at one lag.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DepthCounts {
    /// Related pairs among those examined.
    pub related: u32,
    /// For each x of [`DEPTH_XS`], related pairs with D <= floor(x l).
    pub at_most: [u32; 5],
}

/// What one replicate contributes.
#[derive(Debug, Clone)]
pub struct ReplicateFamilies {
    /// Family of each individual of the block (youngest first), numbered by first appearance.
    pub family: Vec<u32>,
    /// Size of each family, in the same numbering.
    pub sizes: Vec<u32>,
    /// Related pairs at lag l = 1..len-1 (index l - 1), among [`Plan::pairs`] examined.
    pub related: Vec<u32>,
    /// Depth counts at each lag of [`Plan::depth_lags`].
    pub depth: Vec<DepthCounts>,
    /// S_m at each m of [`Plan::grid`].
    pub sums: Vec<f64>,
}

/// Analyses one replicate's genealogy; draws the family types from `rng` (one per family,
/// in order of first appearance), so call it right after the genealogy was simulated from
/// the same stream.
///
/// The MRCA of a related pair is found by walking up from both individuals through a parent
/// array, always moving the younger of the two current nodes (edges are at least one
/// generation long), so the cost is the number of nodes on the two paths.
pub fn analyse<R: Rng + ?Sized>(g: &Genealogy, block: &Block, plan: &Plan, rng: &mut R) -> ReplicateFamilies {
    let graph = g.graph();
    let nodes = graph.node_count();
    let mut parent = vec![u32::MAX; nodes];
    for e in graph.raw_edges() {
        parent[e.target().index()] = e.source().index() as u32;
    }
    let time: Vec<u64> = graph.node_weights().map(|n| n.time).collect();
    let mut root = vec![u32::MAX; nodes];
    // Reversed post-order visits parents before their children.
    for idx in g.postorder().into_iter().rev() {
        let i = idx.index();
        let p = parent[i];
        root[i] = if p == u32::MAX { i as u32 } else { root[p as usize] };
    }
    let mut number: BTreeMap<u32, u32> = BTreeMap::new();
    let mut sizes: Vec<u32> = Vec::new();
    let family: Vec<u32> = block
        .samples
        .iter()
        .map(|&s| {
            let next = number.len() as u32;
            let f = *number.entry(root[s as usize]).or_insert(next);
            if f == next {
                sizes.push(0);
            }
            sizes[f as usize] += 1;
            f
        })
        .collect();

    let related: Vec<u32> =
        (1..plan.len).map(|lag| plan.starts(lag).filter(|&i| family[i] == family[i + lag]).count() as u32).collect();

    let depth = plan
        .depth_lags
        .iter()
        .map(|&lag| {
            let cut: Vec<u64> = DEPTH_XS.iter().map(|x| (x * lag as f64 + 1e-9).floor() as u64).collect();
            let mut c = DepthCounts { related: 0, at_most: [0; 5] };
            for i in plan.starts(lag).filter(|&i| family[i] == family[i + lag]) {
                let (young, old) = (block.samples[i] as usize, block.samples[i + lag] as usize);
                let Some(m) = mrca(&parent, &time, young, old) else { continue };
                let d = time[m] - time[old];
                c.related += 1;
                for (k, &cu) in cut.iter().enumerate() {
                    c.at_most[k] += u32::from(d <= cu);
                }
            }
            c
        })
        .collect();

    let types: Vec<f64> = (0..sizes.len())
        .map(|_| match plan.colours {
            Colours::Pm1 => {
                if rng.random::<bool>() {
                    1.0
                } else {
                    -1.0
                }
            }
            Colours::Normal => StandardNormal.sample(rng),
        })
        .collect();
    let mut sums = Vec::with_capacity(plan.grid.len());
    let mut acc = 0.0;
    let mut next = plan.grid.iter().peekable();
    for (k, &f) in family.iter().enumerate() {
        acc += types[f as usize];
        if next.peek().is_some_and(|&&m| m == k + 1) {
            sums.push(acc);
            next.next();
        }
    }
    ReplicateFamilies { family, sizes, related, depth, sums }
}

/// Most recent common ancestor of nodes a and b, or None when they are in different trees.
fn mrca(parent: &[u32], time: &[u64], mut a: usize, mut b: usize) -> Option<usize> {
    while a != b {
        // Move the younger node (a on ties: distinct nodes of one generation, N > 1).
        let up = if time[a] <= time[b] { &mut a } else { &mut b };
        let p = parent[*up];
        if p == u32::MAX {
            return None;
        }
        *up = p as usize;
    }
    Some(a)
}

/// Renewal-theory predictions for the block.
#[derive(Debug, Clone, Serialize)]
pub struct Prediction {
    /// Regime of the deme's law ([`classify`]).
    pub regime: String,
    /// Tail exponent alpha of the law, when it has an untruncated power-law part.
    pub tail_exponent: Option<f64>,
    /// S = sum q_k^2 (forest regime).
    pub s: Option<f64>,
    /// P(i ~ i + l) for l = 1..len-1 (index l - 1).
    pub related: Vec<f64>,
    /// Exact P(D <= x l | related) per depth lag (N = 1, forest).
    pub depth_exact: Vec<Option<[f64; 5]>>,
    /// BetaPrime(alpha, 1 - 2 alpha) CDF at [`DEPTH_XS`] (N = 1, forest).
    pub depth_limit: Option<[f64; 5]>,
    /// Exact Var(S_m) on the grid.
    pub coloured_exact: Vec<f64>,
    /// C m^(2H) / (H (2H - 1)) on the grid (plain pareto law, forest).
    pub coloured_asymptote: Vec<Option<f64>>,
    /// H = alpha + 1/2 (forest).
    pub hurst: Option<f64>,
    /// Relative shortfall of relatedness within the horizon per lag, averaged over the pairs
    /// examined (forest; see [`horizon_shortfall`]).
    pub horizon_bias: Vec<Option<f64>>,
}

/// Predictions for the block, or None when theory does not apply (several demes, a size that
/// changes, a time-dependent law).
///
/// Forest regime: P(i ~ i + l) = H_l / (N + S - 1) (theory reference §4; = H_l / S for N = 1,
/// §7.1), from one FFT autocorrelation ([`Relatedness::h_range`]); for N = 1 the exact depth
/// law ([`Relatedness::mrca_depth_cdf`]), its BetaPrime limit, Var(S_m) from
/// [`Relatedness::coloured_variance`] and the asymptote [`coloured_variance_asymptote`]. For
/// N > 1, Var(S_m) = m + 2 sum (m - d) P(0 ~ d) with the N > 1 meeting probabilities (the
/// covariance of two types is the probability of one family, whatever N), and the asymptote
/// with S replaced by N + S - 1 (derived here). Tree and critical regimes: every pair is
/// related, P = 1 and Var(S_m) = m^2.
pub fn predict(scenario: &Scenario, block: &Block, plan: &Plan) -> Result<Option<Prediction>, FamiliesError> {
    let demes = scenario.demes();
    if demes.len() != 1 {
        return Ok(None);
    }
    let Some(n) = demes[0].size().as_constant() else { return Ok(None) };
    let law = demes[0].dormancy();
    let Ok(class) = classify(law) else { return Ok(None) };
    let len = block.len();
    let grid = &plan.grid;
    let regime = format!("{:?}", class.regime).to_lowercase();
    if class.regime != Regime::Forest {
        return Ok(Some(Prediction {
            regime,
            tail_exponent: class.tail_exponent,
            s: None,
            related: vec![1.0; len - 1],
            depth_exact: vec![None; plan.depth_lags.len()],
            depth_limit: None,
            coloured_exact: grid.iter().map(|&m| (m * m) as f64).collect(),
            coloured_asymptote: vec![None; grid.len()],
            hurst: None,
            horizon_bias: vec![None; len - 1],
        }));
    }
    // Long enough for H_l up to len (3 len + 64) and the depth law at x = 5 (6 len + 1).
    let rlen = Relatedness::DEFAULT_LEN.max((6 * len + 64).next_power_of_two());
    let r = Relatedness::new(law, rlen)?;
    let s = r.s().value;
    let alpha = class.tail_exponent.unwrap_or(f64::NAN);
    let denom = n as f64 + s - 1.0;
    let h = r.h_range(len - 1)?;
    let related: Vec<f64> = (1..len).map(|l| h[l].value / denom).collect();
    let one = n == 1;
    let depth_exact = plan
        .depth_lags
        .iter()
        .map(|&l| if one { r.mrca_depth_cdf(l, &DEPTH_XS).ok().map(|v| [v[0], v[1], v[2], v[3], v[4]]) } else { None })
        .collect();
    let limit = |x: f64| beta_prime_cdf(alpha, x).ok();
    let depth_limit = if one { DEPTH_XS.iter().map(|&x| limit(x)).collect::<Option<Vec<f64>>>() } else { None }
        .map(|v| [v[0], v[1], v[2], v[3], v[4]]);
    let coloured_exact = grid
        .iter()
        .map(|&m| {
            if one {
                r.coloured_variance(m)
            } else {
                Ok(m as f64 + 2.0 * (1..m).map(|d| (m - d) as f64 * related[d - 1]).sum::<f64>())
            }
        })
        .collect::<Result<Vec<f64>, _>>()?;
    let plain = class.tail_weight == Some(1.0);
    let coloured_asymptote = grid
        .iter()
        .map(|&m| if plain { coloured_variance_asymptote(alpha, denom, m as f64).ok() } else { None })
        .collect();
    let horizon_bias = horizon_shortfall(&r, n, scenario.horizon(), block, plan)?.into_iter().map(Some).collect();
    Ok(Some(Prediction {
        regime,
        tail_exponent: class.tail_exponent,
        s: Some(s),
        related,
        depth_exact,
        depth_limit,
        coloured_exact,
        coloured_asymptote,
        hurst: Some(alpha + 0.5),
        horizon_bias,
    }))
}

/// Mean relative shortfall of P(i ~ i + l) within the horizon against P(i ~ i + l), over the
/// pairs examined at each lag l = 1..len-1 (index l - 1).
///
/// A pair whose older individual lives at generation t is seen related only when its common
/// ancestor is at most K = horizon - t generations above it: the shortfall is
/// 1 - P(0 ~ l, D <= K) / P(0 ~ l), from the finite-horizon law of
/// [`crate::theory::horizon::HorizonLaw`] (exact sum for small K, singular expansion beyond),
/// for a deme of any constant size.
fn horizon_shortfall(
    r: &Relatedness,
    deme_size: u64,
    horizon: u64,
    block: &Block,
    plan: &Plan,
) -> Result<Vec<f64>, FamiliesError> {
    let len = block.len();
    let law = HorizonLaw::new(r, deme_size, len - 1)?;
    let mut sum = vec![0.0; len - 1];
    let mut count = vec![0usize; len - 1];
    for older in 1..len {
        let room = horizon.saturating_sub(block.first() + older as u64);
        let short = law.shortfall(room, older);
        for lag in 1..=older {
            if plan.examines(lag, older - lag) {
                sum[lag - 1] += short[lag - 1];
                count[lag - 1] += 1;
            }
        }
    }
    Ok(sum.iter().zip(&count).map(|(s, &c)| s / c.max(1) as f64).collect())
}

/// Least-squares slope of ln v against ln m (the growth exponent of v).
///
/// ```text
/// slope = sum (x - xbar)(y - ybar) / sum (x - xbar)^2,   x = ln m, y = ln v
/// ```
/// Points with v <= 0 are skipped; None with fewer than two distinct m.
pub fn fit_exponent(ms: &[usize], vs: &[f64]) -> Option<f64> {
    let pts: Vec<(f64, f64)> =
        ms.iter().zip(vs).filter(|(_, v)| **v > 0.0).map(|(&m, &v)| ((m as f64).ln(), v.ln())).collect();
    if pts.len() < 2 {
        return None;
    }
    let k = pts.len() as f64;
    let (xb, yb) = (pts.iter().map(|p| p.0).sum::<f64>() / k, pts.iter().map(|p| p.1).sum::<f64>() / k);
    let sxx: f64 = pts.iter().map(|p| (p.0 - xb).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - xb) * (p.1 - yb)).sum();
    (sxx > 0.0).then(|| sxy / sxx)
}

/// Standard error of a ratio estimator sum a_k / sum r_k over replicates (linearisation).
///
/// ```text
/// p = sum a / sum r,   se^2 = sum (a_k - p r_k)^2 / (K (K - 1) rbar^2)
/// ```
/// None when K < 2 or sum r = 0. Source: the delta method for a ratio of means (Cochran,
/// *Sampling Techniques*, 3rd ed., §6.3; from memory).
pub fn ratio_se(a: &[f64], r: &[f64]) -> Option<f64> {
    let k = a.len() as f64;
    let (sa, sr) = (a.iter().sum::<f64>(), r.iter().sum::<f64>());
    if a.len() < 2 || sr <= 0.0 {
        return None;
    }
    let p = sa / sr;
    let ss: f64 = a.iter().zip(r).map(|(x, y)| (x - p * y).powi(2)).sum();
    Some((ss / (k * (k - 1.0))).sqrt() / (sr / k))
}

/// Mean and standard error of the mean (None below two values).
fn mean_se(xs: &[f64]) -> (f64, Option<f64>) {
    let k = xs.len() as f64;
    let m = xs.iter().sum::<f64>() / k;
    if xs.len() < 2 {
        return (m, None);
    }
    let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (k - 1.0);
    (m, Some((v / k).sqrt()))
}

/// One row of `families.tsv`.
#[derive(Debug, Clone, Serialize)]
pub struct FamilyRow {
    /// Replicate index.
    pub replicate: u64,
    /// Number of families in the block.
    pub families: u32,
    /// Size of the largest family.
    pub largest: u32,
    /// Block length / families.
    pub mean_size: f64,
}

/// One row of `relatedness.tsv`.
#[derive(Debug, Clone, Serialize)]
pub struct RelatednessRow {
    /// Lag l in generations.
    pub lag: usize,
    /// Pairs examined, all replicates together.
    pub pairs: u64,
    /// Related pairs among them.
    pub related: u64,
    /// related / pairs.
    pub simulated: f64,
    /// Standard error over replicates (sd of the per-replicate fractions / sqrt K).
    pub se: Option<f64>,
    /// Renewal prediction P(0 ~ l).
    pub predicted: Option<f64>,
    /// Relative downward bias from the horizon: 1 - P(related within the horizon) / P(0 ~ l),
    /// averaged over the pairs examined (see the module docs).
    pub horizon_bias: Option<f64>,
}

/// One row of `mrca_depth.tsv`.
#[derive(Debug, Clone, Serialize)]
pub struct DepthRow {
    /// Lag l.
    pub lag: usize,
    /// x of P(D <= x l | related).
    pub x: f64,
    /// Related pairs used, all replicates together.
    pub related_pairs: u64,
    /// Empirical CDF (None without related pairs).
    pub simulated_cdf: Option<f64>,
    /// Its standard error ([`ratio_se`]).
    pub se: Option<f64>,
    /// Exact finite-l CDF.
    pub exact_cdf: Option<f64>,
    /// BetaPrime(alpha, 1 - 2 alpha) limit.
    pub limit_cdf: Option<f64>,
}

/// One row of `coloured.tsv`.
#[derive(Debug, Clone, Serialize)]
pub struct ColouredRow {
    /// Number of individuals summed (the youngest m of the block).
    pub m: usize,
    /// Mean of S_m^2 over replicates (the types are centred, so this is an unbiased variance).
    pub simulated_var: f64,
    /// Its standard error (sd of S_m^2 / sqrt K).
    pub se: Option<f64>,
    /// Exact Var(S_m).
    pub exact_var: Option<f64>,
    /// Asymptote C m^(2H) / (H (2H - 1)).
    pub asymptote: Option<f64>,
}

/// Fitted growth exponent of Var(S_m).
#[derive(Debug, Clone, Serialize)]
pub struct ExponentFit {
    /// Smallest and largest m used.
    pub m_range: [usize; 2],
    /// Number of grid points in the fit.
    pub points: usize,
    /// Least-squares slope 2H of ln Var(S_m) against ln m.
    pub two_h: f64,
    /// H = slope / 2.
    pub h: f64,
    /// 95% percentile-bootstrap interval of H (replicates resampled), when bootstrapped.
    pub h_ci95: Option<[f64; 2]>,
    /// Bootstrap resamples.
    pub bootstrap: usize,
    /// The same fit applied to the exact Var(S_m) on the same grid (the finite-m target).
    pub exact_two_h: Option<f64>,
}

/// Block coordinates for the report.
#[derive(Debug, Clone, Serialize)]
pub struct BlockInfo {
    /// Deme name.
    pub deme: String,
    /// Deme size, when constant.
    pub deme_size: Option<u64>,
    /// Youngest generation.
    pub from: u64,
    /// Oldest generation.
    pub to: u64,
    /// Individuals.
    pub length: usize,
}

/// Everything a families run produced (`families.json`).
#[derive(Debug, Clone, Serialize)]
pub struct FamiliesReport {
    /// The run that made this file: version, command, seed, inputs with checksums, settings
    /// (set by the command; absent for library callers that give none).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub run: Option<crate::report::record::RunRecord>,
    /// Versions and generator.
    pub provenance: Provenance,
    /// Where the scenario came from.
    pub scenario_file: String,
    /// Scenario name.
    pub scenario_name: String,
    /// The validated scenario with defaults filled in.
    pub scenario: crate::scenario::RawScenario,
    /// Master seed.
    pub seed: u64,
    /// Replicates run.
    pub replicates: u64,
    /// Horizon in generations.
    pub horizon: u64,
    /// Family types.
    pub colours: Colours,
    /// The block.
    pub block: BlockInfo,
    /// Regime from [`classify`] (None when theory does not apply).
    pub regime: Option<String>,
    /// Tail exponent alpha.
    pub tail_exponent: Option<f64>,
    /// Predicted H = alpha + 1/2 (forest regime; Hammond & Sheffield 2013).
    pub predicted_h: Option<f64>,
    /// Mean number of families per replicate.
    pub mean_families: f64,
    /// Per replicate.
    pub families: Vec<FamilyRow>,
    /// (size, count) pooled over replicates.
    pub family_sizes: Vec<[u64; 2]>,
    /// Relatedness by lag.
    pub relatedness: Vec<RelatednessRow>,
    /// MRCA depth CDFs.
    pub mrca_depth: Vec<DepthRow>,
    /// Coloured-sum variances.
    pub coloured: Vec<ColouredRow>,
    /// Growth exponent fit.
    pub fit: Option<ExponentFit>,
    /// How the pieces were computed, in words.
    pub notes: Vec<String>,
    /// The engine that ran and why.
    pub engine: crate::engine::EngineDecision,
}

/// Runs every replicate of the scenario and pools the results (no I/O). `progress` is called
/// once per replicate. Floats are reduced serially in replicate order.
pub fn run(
    scenario: &Scenario,
    scenario_file: &str,
    config: BatchConfig,
    options: &Options,
    progress: &(dyn Fn() + Sync),
) -> Result<FamiliesReport, FamiliesError> {
    let block = Block::of(scenario)?;
    let len = block.len();
    let plan = Plan::new(len, options);
    let prediction = predict(scenario, &block, &plan)?;
    let engine = crate::engine::Engine::new(scenario, options.engine)?;
    let reps: Vec<u64> = (0..scenario.replicates()).collect();
    let k = reps.len();

    let mut rows = Vec::with_capacity(k);
    let mut size_counts: BTreeMap<u32, u64> = BTreeMap::new();
    let mut related_sum = vec![0u64; len - 1];
    let mut related_sq = vec![0f64; len - 1];
    let mut depth: Vec<Vec<DepthCounts>> = Vec::with_capacity(k);
    let mut sums: Vec<Vec<f64>> = Vec::with_capacity(k);
    batch::run(
        scenario,
        &reps,
        config,
        |scratch, _, _, rng| {
            let g = engine.simulate_tree(scratch, rng);
            let r = analyse(&g, &block, &plan, rng);
            progress();
            r
        },
        |rep, r| {
            let largest = r.sizes.iter().copied().max().unwrap_or(0);
            rows.push(FamilyRow {
                replicate: rep,
                families: r.sizes.len() as u32,
                largest,
                mean_size: len as f64 / r.sizes.len() as f64,
            });
            for &s in &r.sizes {
                *size_counts.entry(s).or_default() += 1;
            }
            for (l, &c) in r.related.iter().enumerate() {
                related_sum[l] += u64::from(c);
                let f = f64::from(c) / plan.pairs(l + 1) as f64;
                related_sq[l] += f * f;
            }
            depth.push(r.depth);
            sums.push(r.sums);
            Ok(())
        },
    )?;

    let kf = k as f64;
    let relatedness: Vec<RelatednessRow> = (1..len)
        .map(|l| {
            let pairs = plan.pairs(l) as u64 * k as u64;
            let simulated = related_sum[l - 1] as f64 / pairs as f64;
            // Every replicate examines the same pairs, so the pooled fraction is the mean of
            // the per-replicate fractions and its se comes from their spread.
            let se = (k >= 2).then(|| {
                let var = (related_sq[l - 1] - kf * simulated * simulated).max(0.0) / (kf - 1.0);
                (var / kf).sqrt()
            });
            RelatednessRow {
                lag: l,
                pairs,
                related: related_sum[l - 1],
                simulated,
                se,
                predicted: prediction.as_ref().map(|p| p.related[l - 1]),
                horizon_bias: prediction.as_ref().and_then(|p| p.horizon_bias[l - 1]),
            }
        })
        .collect();

    let mut mrca_depth = Vec::new();
    for (j, &lag) in plan.depth_lags.iter().enumerate() {
        let r: Vec<f64> = depth.iter().map(|d| f64::from(d[j].related)).collect();
        let total: f64 = r.iter().sum();
        for (xi, &x) in DEPTH_XS.iter().enumerate() {
            let a: Vec<f64> = depth.iter().map(|d| f64::from(d[j].at_most[xi])).collect();
            mrca_depth.push(DepthRow {
                lag,
                x,
                related_pairs: total as u64,
                simulated_cdf: (total > 0.0).then(|| a.iter().sum::<f64>() / total),
                se: ratio_se(&a, &r),
                exact_cdf: prediction.as_ref().and_then(|p| p.depth_exact[j].map(|v| v[xi])),
                limit_cdf: prediction.as_ref().and_then(|p| p.depth_limit.map(|v| v[xi])),
            });
        }
    }

    let var_at = |idx: &[usize], j: usize| idx.iter().map(|&i| sums[i][j] * sums[i][j]).sum::<f64>() / idx.len() as f64;
    let all: Vec<usize> = (0..k).collect();
    let coloured: Vec<ColouredRow> = plan
        .grid
        .iter()
        .enumerate()
        .map(|(j, &m)| {
            let sq: Vec<f64> = sums.iter().map(|s| s[j] * s[j]).collect();
            let (simulated_var, se) = mean_se(&sq);
            ColouredRow {
                m,
                simulated_var,
                se,
                exact_var: prediction.as_ref().map(|p| p.coloured_exact[j]),
                asymptote: prediction.as_ref().and_then(|p| p.coloured_asymptote[j]),
            }
        })
        .collect();

    let fit_idx: Vec<usize> = (0..plan.grid.len()).filter(|&j| plan.grid[j] >= options.fit_from.max(2)).collect();
    let fit_ms: Vec<usize> = fit_idx.iter().map(|&j| plan.grid[j]).collect();
    let fit_of = |idx: &[usize]| {
        let vs: Vec<f64> = fit_idx.iter().map(|&j| var_at(idx, j)).collect();
        fit_exponent(&fit_ms, &vs)
    };
    let fit = match (k >= 2).then(|| fit_of(&all)).flatten() {
        None => None,
        Some(two_h) => {
            let mut rng = replicate_rng(&master_key(scenario.seed()), BOOTSTRAP_STREAM);
            let mut boot: Vec<f64> = (0..options.bootstrap)
                .filter_map(|_| {
                    let idx: Vec<usize> = (0..k).map(|_| rng.random_range(0..k)).collect();
                    fit_of(&idx)
                })
                .collect();
            boot.sort_by(f64::total_cmp);
            let h_ci95 =
                (boot.len() >= 2).then(|| [quantile_sorted(&boot, 0.025) / 2.0, quantile_sorted(&boot, 0.975) / 2.0]);
            let exact_two_h = prediction.as_ref().and_then(|p| {
                let vs: Vec<f64> = fit_idx.iter().map(|&j| p.coloured_exact[j]).collect();
                fit_exponent(&fit_ms, &vs)
            });
            Some(ExponentFit {
                m_range: [fit_ms[0], fit_ms[fit_ms.len() - 1]],
                points: fit_ms.len(),
                two_h,
                h: two_h / 2.0,
                h_ci95,
                bootstrap: options.bootstrap,
                exact_two_h,
            })
        }
    };

    let demes = scenario.demes();
    let mean_families = rows.iter().map(|r| f64::from(r.families)).sum::<f64>() / kf;
    Ok(FamiliesReport {
        run: None,
        provenance: Provenance::current(),
        scenario_file: scenario_file.to_string(),
        scenario_name: scenario.name().to_string(),
        scenario: scenario.normalized().clone(),
        seed: scenario.seed(),
        replicates: k as u64,
        horizon: scenario.horizon(),
        colours: options.colours,
        block: BlockInfo {
            deme: demes[block.deme].name().to_string(),
            deme_size: demes[block.deme].size().as_constant(),
            from: block.first(),
            to: block.last(),
            length: len,
        },
        regime: prediction.as_ref().map(|p| p.regime.clone()),
        tail_exponent: prediction.as_ref().and_then(|p| p.tail_exponent),
        predicted_h: prediction.as_ref().and_then(|p| p.hurst),
        mean_families,
        families: rows,
        family_sizes: size_counts.into_iter().map(|(s, c)| [u64::from(s), c]).collect(),
        relatedness,
        mrca_depth,
        coloured,
        fit,
        notes: notes(&plan, options, prediction.is_some()),
        engine: engine.decision().clone(),
    })
}

fn notes(plan: &Plan, options: &Options, theory: bool) -> Vec<String> {
    let mut v = vec![
        format!(
            "pairs (i, i+lag): all when at most {}, otherwise {} with evenly spaced i",
            plan.max_pairs, plan.max_pairs
        ),
        "families = trees of the simulated forest: a common ancestor older than the horizon is not seen, so \
         simulated relatedness and Var(S_m) can only be lower than predicted (horizon_bias: relative shortfall \
         P(D > horizon - t_older | related) from the finite-horizon meeting law, mean over the pairs examined)"
            .to_string(),
        "D = time of the MRCA minus time of the older individual of the pair; D <= floor(x lag) counted".to_string(),
        format!(
            "family types drawn from each replicate's stream after its genealogy; exponent fit: least squares of \
             ln Var(S_m) on ln m for m >= {}, 95% percentile bootstrap over replicates ({} resamples, stream {})",
            options.fit_from.max(2),
            options.bootstrap,
            BOOTSTRAP_STREAM
        ),
    ];
    if !theory {
        v.push("no prediction: theory needs one deme of constant size and a stationary look-back law".to_string());
    }
    v
}

fn opt(x: Option<f64>) -> String {
    x.map_or_else(|| "NA".to_string(), fmt_num)
}

/// The five TSV tables as (file name, contents).
pub fn tables(report: &FamiliesReport) -> Vec<(&'static str, String)> {
    let mut fam = String::from("replicate\tfamilies\tlargest\tmean_size\n");
    for r in &report.families {
        let _ = writeln!(fam, "{}\t{}\t{}\t{}", r.replicate, r.families, r.largest, fmt_num(r.mean_size));
    }
    let mut sizes = String::from("size\tcount\n");
    for [s, c] in &report.family_sizes {
        let _ = writeln!(sizes, "{s}\t{c}");
    }
    let mut rel = String::from("lag\tpairs\trelated\tsimulated\tpredicted\tse\n");
    for r in &report.relatedness {
        let _ = writeln!(
            rel,
            "{}\t{}\t{}\t{}\t{}\t{}",
            r.lag,
            r.pairs,
            r.related,
            fmt_num(r.simulated),
            opt(r.predicted),
            opt(r.se)
        );
    }
    let mut dep = String::from("lag\tx\tsimulated_cdf\texact_cdf\tlimit_cdf\trelated_pairs\tse\n");
    for r in &report.mrca_depth {
        let _ = writeln!(
            dep,
            "{}\t{}\t{}\t{}\t{}\t{}\t{}",
            r.lag,
            r.x,
            opt(r.simulated_cdf),
            opt(r.exact_cdf),
            opt(r.limit_cdf),
            r.related_pairs,
            opt(r.se)
        );
    }
    let mut col = String::from("m\tsimulated_var\texact_var\tasymptote\tse\n");
    for r in &report.coloured {
        let _ = writeln!(
            col,
            "{}\t{}\t{}\t{}\t{}",
            r.m,
            fmt_num(r.simulated_var),
            opt(r.exact_var),
            opt(r.asymptote),
            opt(r.se)
        );
    }
    vec![(FILES[0], fam), (FILES[1], sizes), (FILES[2], rel), (FILES[3], dep), (FILES[4], col)]
}

/// Writes the [`FILES`] into `dir` (created if needed), each atomically (temporary file + rename).
pub fn write_to_dir(report: &FamiliesReport, dir: &Path) -> Result<(), FamiliesError> {
    let io = |path: &Path| {
        let path = path.to_path_buf();
        move |source| FamiliesError::Io { path, source }
    };
    std::fs::create_dir_all(dir).map_err(io(dir))?;
    for (name, text) in tables(report) {
        let p = dir.join(name);
        write_atomic(&p, text.as_bytes()).map_err(io(&p))?;
    }
    let p = dir.join(FILES[5]);
    write_atomic(&p, serde_json::to_string_pretty(report)?.as_bytes()).map_err(io(&p))?;
    for (name, svg) in figures(report) {
        let p = dir.join(name);
        write_atomic(&p, svg.as_bytes()).map_err(io(&p))?;
    }
    Ok(())
}

/// The figures of a families run: relatedness by lag, MRCA depth at the largest lag with
/// related pairs, growth of Var(S_m); a figure that cannot be drawn is left out.
pub fn figures(report: &FamiliesReport) -> Vec<(&'static str, String)> {
    use crate::report::figures as fig;
    let mut out = Vec::new();
    let sim: Vec<(f64, f64, Option<f64>)> =
        report.relatedness.iter().map(|r| (r.lag as f64, r.simulated, r.se)).collect();
    let pred: Vec<(f64, f64)> = report.relatedness.iter().filter_map(|r| Some((r.lag as f64, r.predicted?))).collect();
    if let Ok(svg) = fig::relatedness_by_lag(&sim, &pred) {
        out.push(("relatedness.svg", svg));
    }
    let lag = report.mrca_depth.iter().filter(|r| r.related_pairs > 0).map(|r| r.lag).max();
    if let Some(lag) = lag {
        let rows: Vec<&DepthRow> = report.mrca_depth.iter().filter(|r| r.lag == lag).collect();
        let sim: Vec<(f64, f64, Option<f64>)> =
            rows.iter().filter_map(|r| Some((r.x, r.simulated_cdf?, r.se))).collect();
        let limit: Vec<(f64, f64)> = rows.iter().filter_map(|r| Some((r.x, r.limit_cdf?))).collect();
        if let Ok(svg) = fig::mrca_depth(lag, &sim, &limit) {
            out.push(("mrca_depth.svg", svg));
        }
    }
    let sim: Vec<(f64, f64, Option<f64>)> =
        report.coloured.iter().map(|r| (r.m as f64, r.simulated_var, r.se)).collect();
    let exact: Vec<(f64, f64)> = report.coloured.iter().filter_map(|r| Some((r.m as f64, r.exact_var?))).collect();
    let fit = report.fit.as_ref().map(|f| (f.two_h, [f.m_range[0] as f64, f.m_range[1] as f64]));
    if let Ok(svg) = fig::variance_growth(&sim, &exact, fit, report.predicted_h) {
        out.push(("coloured.svg", svg));
    }
    out
}

/// A compact human summary: regime, families, relatedness at a few lags, H.
pub fn render_summary(report: &FamiliesReport) -> String {
    let mut s = String::new();
    let b = &report.block;
    let n = b.deme_size.map_or("varying".to_string(), |n| n.to_string());
    let _ = writeln!(
        s,
        "{}: block of {} generations ({}..={}) in deme {} (N = {n}), {} replicates, horizon {}",
        report.scenario_name, b.length, b.from, b.to, b.deme, report.replicates, report.horizon
    );
    let alpha = report.tail_exponent.map_or(String::new(), |a| format!(" (tail exponent alpha = {a})"));
    let _ = writeln!(s, "regime: {}{alpha}", report.regime.as_deref().unwrap_or("no prediction"));
    let largest = report.families.iter().map(|r| f64::from(r.largest)).sum::<f64>() / report.families.len() as f64;
    let _ = writeln!(
        s,
        "families per replicate: mean {}; largest family: mean {}",
        fmt_num(report.mean_families),
        fmt_num(largest)
    );
    let _ = writeln!(s, "relatedness P(i ~ i+lag):   lag   simulated ± se        predicted   within horizon");
    for r in report.relatedness.iter().filter(|r| [1, 2, 5, 10, 20, 50, 100, 1000].contains(&r.lag)) {
        let within = r.predicted.zip(r.horizon_bias).map(|(p, b)| p * (1.0 - b));
        let _ = writeln!(
            s,
            "{:>32} {:>11} ± {:<9} {:<11} {}",
            r.lag,
            fmt_num(r.simulated),
            opt(r.se),
            opt(r.predicted),
            opt(within)
        );
    }
    match &report.fit {
        Some(f) => {
            let ci =
                f.h_ci95.map_or("no interval".to_string(), |[a, b]| format!("95% [{}, {}]", fmt_num(a), fmt_num(b)));
            let mut pred = report.predicted_h.map_or("none".to_string(), |h| format!("alpha + 1/2 = {}", fmt_num(h)));
            if let Some(e) = f.exact_two_h {
                let _ = write!(pred, " (exact Var on this grid: {})", fmt_num(e / 2.0));
            }
            let _ = writeln!(
                s,
                "H from Var(S_m), m in [{}, {}]: {} ({ci}); predicted {pred}",
                f.m_range[0],
                f.m_range[1],
                fmt_num(f.h)
            );
        }
        None => s.push_str("H: not fitted (too few replicates or grid points)\n"),
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::genealogy::Node;

    /// A hand-made genealogy of a block of 4 (times 0..3):
    /// sample 3 (t 3) is the parent of sample 1 (t 1); merge node 4 (t 5) joins 0 and 3;
    /// sample 2 (t 2) is alone.
    fn toy() -> (Genealogy, Block) {
        let mut g = Genealogy::with_samples(4);
        for t in 0..4u64 {
            g.add_node(Node { time: t, deme: 0, sample: Some(t as u32) });
        }
        let m = g.add_node(Node { time: 5, deme: 0, sample: None });
        g.add_edge(3, 1, 1);
        g.add_edge(m, 0, 2);
        g.add_edge(m, 3, 1);
        g.add_root(2);
        g.add_root(m);
        g.sort_roots();
        (g, Block { deme: 0, first: 0, samples: vec![0, 1, 2, 3] })
    }

    #[test]
    fn families_and_depths_of_a_hand_made_forest() {
        // Source: hand computation on the toy forest. Families {0, 1, 3} and {2}.
        // Pairs: lag 1: (0,1) related, (1,2) no, (2,3) no; lag 2: (0,2) no, (1,3) yes with
        // MRCA = sample 3 itself, D = 0; lag 3: (0,3) yes, MRCA node at t 5, D = 5 - 3 = 2.
        let (g, block) = toy();
        let plan = Plan::new(4, &Options::default());
        let mut rng = replicate_rng(&master_key(1), 0);
        let r = analyse(&g, &block, &plan, &mut rng);
        assert_eq!(r.family, vec![0, 0, 1, 0]);
        assert_eq!(r.sizes, vec![3, 1]);
        assert_eq!(r.related, vec![1, 1, 1]);
        assert_eq!(plan.depth_lags(), &[1, 2]);
        // Lag 1, pair (0,1): MRCA at t 5 (0 -> 4, 1 -> 3 -> 4), D = 5 - 1 = 4 = 4 lag: only x = 5.
        assert_eq!(r.depth[0], DepthCounts { related: 1, at_most: [0, 0, 0, 0, 1] });
        // Lag 2, pair (1,3): D = 0, counted at every x.
        assert_eq!(r.depth[1], DepthCounts { related: 1, at_most: [1; 5] });
        // Grid 1, 2, 3, 4 (round 10^(j/6) = 1, 1, 2, 3, 5 -> up to 4, plus 4).
        assert_eq!(plan.grid(), &[1, 2, 3, 4]);
        // S_m: family 0 has type a, family 1 type b: S = a, 2a, 2a + b, 3a + b, each ±1.
        let a = r.sums[0];
        assert!(a == 1.0 || a == -1.0);
        assert_eq!(r.sums[1], 2.0 * a);
        let b = r.sums[2] - 2.0 * a;
        assert!(b == 1.0 || b == -1.0);
        assert_eq!(r.sums[3], 3.0 * a + b);
    }

    #[test]
    fn systematic_pairs_are_distinct_and_in_range() {
        // Source: definition of the plan (evenly spaced, strictly increasing starts).
        let o = Options { max_pairs_per_lag: 7, ..Options::default() };
        let plan = Plan::new(100, &o);
        for lag in [1usize, 50, 93, 99] {
            let s: Vec<usize> = plan.starts(lag).collect();
            assert_eq!(s.len(), plan.pairs(lag));
            assert!(s.windows(2).all(|w| w[0] < w[1]));
            assert!(s.iter().all(|&i| i + lag < 100));
        }
        assert_eq!(plan.pairs(99), 1);
        assert_eq!(plan.depth_lags(), &[1, 2, 5, 10, 20, 50]);
    }

    #[test]
    fn fit_and_ratio_se_on_hand_examples() {
        // Source: hand computation. v = 3 m^1.6 exactly gives slope 1.6.
        let ms = [10usize, 20, 50, 100];
        let vs: Vec<f64> = ms.iter().map(|&m| 3.0 * (m as f64).powf(1.6)).collect();
        assert!((fit_exponent(&ms, &vs).unwrap() - 1.6).abs() < 1e-12);
        assert_eq!(fit_exponent(&[5], &[1.0]), None);
        // a = (1, 3), r = (2, 2): p = 1, residuals (-1, 1), se = sqrt(2 / 2) / 2 = 0.5.
        assert!((ratio_se(&[1.0, 3.0], &[2.0, 2.0]).unwrap() - 0.5).abs() < 1e-15);
        assert_eq!(ratio_se(&[1.0], &[1.0]), None);
    }
}
