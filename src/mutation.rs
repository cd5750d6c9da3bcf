//! Infinite-sites mutations on the branches of a genealogy.
//!
//! An edge of L generations with J reproduction events (lineage jumps) receives
//!
//! ```text
//! K ~ Poisson(sites * (reproduction_rate * J + dormant_rate * (L - J)))
//! ```
//! mutations: each link of a lineage is one generation of reproduction followed by R - 1
//! dormant generations. With only `rate` given both rates are equal, so the clock runs
//! through dormancy. Every mutation hits a new site (infinite sites; Kimura 1969): positions
//! are distinct, drawn uniformly without replacement from 1..=sites (1-based, as in VCF).
//! The derived allele is carried by every sample below the edge, the child itself included
//! when it is a sampled individual. In a forest only edges inside trees carry mutations:
//! the lineage above a root has no defined length, so fixed differences between trees are
//! not counted.

use crate::genealogy::{Genealogy, LocalTree};
use crate::stats::Haplotypes;
use petgraph::Direction;
use petgraph::graph::NodeIndex;
use rand::Rng;
use rand::seq::SliceRandom;
use rand_distr::{Distribution, Poisson};

/// Mutation rates per site per generation, and the number of sites of a locus.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MutationModel {
    sites: u64,
    reproduction_rate: f64,
    dormant_rate: f64,
}

impl MutationModel {
    /// A model; rates are per site per generation (checked by the scenario parser).
    pub fn new(sites: u64, reproduction_rate: f64, dormant_rate: f64) -> Self {
        MutationModel { sites, reproduction_rate, dormant_rate }
    }
    /// Sites per locus.
    pub fn sites(&self) -> u64 {
        self.sites
    }
    /// The same rates on a locus of `sites` sites.
    pub fn with_sites(&self, sites: u64) -> Self {
        MutationModel { sites, ..*self }
    }
    /// Rate per site in a generation of reproduction.
    pub fn reproduction_rate(&self) -> f64 {
        self.reproduction_rate
    }
    /// Rate per site in a dormant generation.
    pub fn dormant_rate(&self) -> f64 {
        self.dormant_rate
    }
    /// Expected mutations (whole sequence) on an edge of `length` generations with `jumps`
    /// reproduction events.
    pub fn edge_mean(&self, length: u64, jumps: u64) -> f64 {
        self.sites as f64 * (self.reproduction_rate * jumps as f64 + self.dormant_rate * (length - jumps) as f64)
    }
}

/// Why mutations could not be placed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A fixed number of mutations was asked for a genealogy without branch length.
    #[error("{mutations} mutations cannot be placed: the genealogy has no branch with a positive mutation rate")]
    NoBranchLength {
        /// Mutations asked for.
        mutations: u64,
    },
    /// More mutations than sites: infinite sites cannot hold.
    #[error(
        "{mutations} mutations fell on a locus of {sites} sites: the infinite-sites model needs many more sites than mutations (raise mutation.sites or lower the rate)"
    )]
    TooManyMutations {
        /// Mutations drawn.
        mutations: u64,
        /// Sites available.
        sites: u64,
    },
    /// The mutations of one locus would need more memory than can be allocated.
    #[error(
        "{mutations} mutations fell on one locus: placing them needs about {} of memory ({per_mutation} bytes per mutation for {samples} sampled sequences), more than can be allocated; lower mutation.sites or the mutation rate", crate::cost::bytes_text(*mutations as f64 * *per_mutation as f64)
    )]
    TooMuchMemory {
        /// Mutations drawn.
        mutations: u64,
        /// Bytes per mutation ([`crate::cost::bytes_per_mutation`]).
        per_mutation: u64,
        /// Sample size.
        samples: usize,
    },
    /// More mutations than sites on one local tree of a recombining locus.
    #[error(
        "{mutations} mutations fell on the local tree of sites {left}..{right} ({} sites): the infinite-sites model needs many more sites than mutations on every local tree (lower the mutation or recombination rate)", right - left
    )]
    TooManyOnLocalTree {
        /// Mutations drawn on the tree.
        mutations: u64,
        /// First site of the tree's interval (0-based).
        left: u64,
        /// One past its last site.
        right: u64,
    },
}

/// The mutations of one locus: sorted 1-based positions and the haplotype matrix.
#[derive(Debug, Clone)]
pub struct Mutations {
    /// Positions, 1-based, strictly increasing; one per site of `haplotypes`.
    pub positions: Vec<u64>,
    /// Samples × sites, 1 = derived.
    pub haplotypes: Haplotypes,
}

/// Places infinite-sites mutations on the edges of `g`; `demes[s]` labels sample s.
pub fn place<R: Rng + ?Sized>(
    g: &Genealogy,
    model: &MutationModel,
    demes: Vec<u32>,
    rng: &mut R,
) -> Result<Mutations, Error> {
    place_with(g, model, Count::Poisson, demes, rng)
}

/// How many mutations a locus receives.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Count {
    /// Poisson on every edge with the model's rates (the model itself).
    Poisson,
    /// Exactly this many, each on an edge chosen with probability proportional to the edge's
    /// expected number of mutations: the genealogy is not conditioned, only the count is
    /// fixed ("fixed S", Hudson 1993, common practice for tests given an observed S; it
    /// ignores that S carries information on the genealogy, Markovtsova et al. 2001).
    Fixed(u64),
}

/// Places mutations as [`place`] does, with the number of mutations chosen by `count`.
pub fn place_with<R: Rng + ?Sized>(
    g: &Genealogy,
    model: &MutationModel,
    count: Count,
    demes: Vec<u32>,
    rng: &mut R,
) -> Result<Mutations, Error> {
    let mut out = Mutations { positions: Vec::new(), haplotypes: Haplotypes::new(demes) };
    Placer::default().place(g, model, count, 0, &mut out, rng)?;
    Ok(out)
}

/// Expected number of mutations on the whole genealogy: the sum of [`MutationModel::edge_mean`]
/// over its edges.
pub fn expected_count(g: &Genealogy, model: &MutationModel) -> f64 {
    let graph = g.graph();
    graph.edge_indices().map(|e| model.edge_mean(graph[e].length, graph[e].jumps)).sum()
}

/// Splits `total` mutations over loci in proportion to `weights`: a multinomial draw, as
/// sequential binomials Bin(left, w_i / (w_i + ... + w_last)).
pub fn split_count<R: Rng + ?Sized>(total: u64, weights: &[f64], rng: &mut R) -> Result<Vec<u64>, Error> {
    let sum: f64 = weights.iter().sum();
    if total > 0 && !(sum > 0.0 && sum.is_finite()) {
        return Err(Error::NoBranchLength { mutations: total });
    }
    let (mut left, mut rest) = (total, sum);
    let mut out = Vec::with_capacity(weights.len());
    for (i, &w) in weights.iter().enumerate() {
        let k = if i + 1 == weights.len() {
            left
        } else if left == 0 || rest <= 0.0 {
            0
        } else {
            rand_distr::Binomial::new(left, (w / rest).clamp(0.0, 1.0)).map_or(0, |b| b.sample(rng))
        };
        out.push(k);
        left -= k;
        rest -= w;
    }
    Ok(out)
}

/// Asks for the memory of `total` mutations on `samples` sequences once, before it is
/// allocated piece by piece: a refused request is an error to report, where a failed
/// allocation inside the placement would abort the program.
fn memory_check(total: u64, samples: usize) -> Result<(), Error> {
    let per_mutation = crate::cost::bytes_per_mutation(samples);
    let refused = || Error::TooMuchMemory { mutations: total, per_mutation, samples };
    let bytes = usize::try_from(total)
        .ok()
        .and_then(|t| t.checked_mul(per_mutation as usize))
        .filter(|&b| b <= isize::MAX as usize)
        .ok_or_else(refused)?;
    Vec::<u8>::new().try_reserve_exact(bytes).map_err(|_| refused())
}

/// Places mutations along a recombining sequence (the local trees of an ancestral
/// recombination graph, tiling it from left to right): each local tree receives the
/// mutations of its own interval of sites, as [`place`] with `sites = right - left`, drawn
/// tree by tree from left to right; positions are shifted by `left`, so they stay distinct,
/// increasing and in 1..=L over the whole sequence. The haplotype matrix joins the trees'.
///
/// Infinite sites holds per interval: more mutations than sites on one local tree is
/// [`Error::TooManyOnLocalTree`].
pub fn place_along<R: Rng + ?Sized>(
    trees: &[LocalTree],
    model: &MutationModel,
    demes: Vec<u32>,
    rng: &mut R,
) -> Result<Mutations, Error> {
    let mut out = Mutations { positions: Vec::new(), haplotypes: Haplotypes::new(demes) };
    let mut placer = Placer::default();
    for t in trees {
        let local = MutationModel { sites: t.sites(), ..*model };
        placer.place(t.genealogy(), &local, Count::Poisson, t.left(), &mut out, rng).map_err(|e| match e {
            Error::TooManyMutations { mutations, .. } => {
                Error::TooManyOnLocalTree { mutations, left: t.left(), right: t.right() }
            }
            e => e,
        })?;
    }
    Ok(out)
}

/// Buffers of mutation placement, reused from tree to tree: memory O(n) per tree besides the
/// output, time linear in the tree's size plus the carriers of its mutations.
#[derive(Debug, Default)]
struct Placer {
    /// (child node, mutations) of every edge that received some, in edge order.
    hits: Vec<(u32, u64)>,
    /// (position, child node) of every mutation.
    sites: Vec<(u64, u32)>,
    /// The samples in depth-first order: those below a node are `order[span[v]]`.
    order: Vec<u32>,
    span: Vec<(u32, u32)>,
    stack: Vec<(u32, bool)>,
    column: Vec<u64>,
}

impl Placer {
    /// Draws the mutations of one genealogy, appends their sites (positions + `offset`) to
    /// `out`. The random draws: the count of every edge in edge order (or the fixed count's
    /// edges), then the positions, then their order; the carriers take no draw.
    fn place<R: Rng + ?Sized>(
        &mut self,
        g: &Genealogy,
        model: &MutationModel,
        count: Count,
        offset: u64,
        out: &mut Mutations,
        rng: &mut R,
    ) -> Result<(), Error> {
        let graph = g.graph();
        self.hits.clear();
        let mut total = 0u64;
        let child_of = |e| graph.edge_endpoints(e).expect("edge exists").1.index() as u32;
        match count {
            Count::Poisson => {
                for e in graph.edge_indices() {
                    let w = graph[e];
                    let mean = model.edge_mean(w.length, w.jumps);
                    if mean > 0.0 {
                        let k = Poisson::new(mean).map_or(0.0, |p| p.sample(rng)) as u64;
                        if k > 0 {
                            self.hits.push((child_of(e), k));
                            total += k;
                        }
                    }
                }
            }
            Count::Fixed(k) if k > 0 => {
                memory_check(k, out.haplotypes.samples())?;
                let edges: Vec<_> = graph.edge_indices().collect();
                let weights: Vec<f64> =
                    edges.iter().map(|&e| model.edge_mean(graph[e].length, graph[e].jumps)).collect();
                let pick = rand_distr::weighted::WeightedAliasIndex::new(weights)
                    .map_err(|_| Error::NoBranchLength { mutations: k })?;
                let mut per_edge = vec![0u64; edges.len()];
                for _ in 0..k {
                    per_edge[pick.sample(rng)] += 1;
                }
                for (e, c) in edges.iter().zip(per_edge) {
                    if c > 0 {
                        self.hits.push((child_of(*e), c));
                    }
                }
                total = k;
            }
            Count::Fixed(_) => {}
        }
        if total > model.sites {
            return Err(Error::TooManyMutations { mutations: total, sites: model.sites });
        }
        if total == 0 {
            return Ok(());
        }
        memory_check(total, out.haplotypes.samples())?;
        let mut positions: Vec<u64> = rand::seq::index::sample(rng, model.sites as usize, total as usize)
            .into_iter()
            .map(|p| p as u64 + 1)
            .collect();
        // Positions are assigned to mutations at random, then the sites are listed in position order.
        positions.shuffle(rng);
        self.sites.clear();
        let mut next = positions.into_iter();
        for &(child, k) in &self.hits {
            for _ in 0..k {
                self.sites.push((next.next().expect("one position per mutation"), child));
            }
        }
        self.sites.sort_unstable();
        self.layout(g);
        let words = out.haplotypes.samples().div_ceil(64);
        for &(position, child) in &self.sites {
            self.column.clear();
            self.column.resize(words, 0);
            let (lo, hi) = self.span[child as usize];
            for &s in &self.order[lo as usize..hi as usize] {
                self.column[s as usize / 64] |= 1 << (s % 64);
            }
            out.haplotypes.push_site_bits(&self.column);
            out.positions.push(position + offset);
        }
        Ok(())
    }

    /// Lays the samples out in depth-first order, so that the samples below every node (the
    /// node itself included when it is sampled) are one range of `order`.
    fn layout(&mut self, g: &Genealogy) {
        let graph = g.graph();
        self.order.clear();
        self.span.clear();
        self.span.resize(graph.node_count(), (0, 0));
        for top in graph.node_indices() {
            if graph.neighbors_directed(top, Direction::Incoming).next().is_some() {
                continue;
            }
            self.stack.push((top.index() as u32, false));
            while let Some((v, done)) = self.stack.pop() {
                let node = NodeIndex::new(v as usize);
                if done {
                    self.span[v as usize].1 = self.order.len() as u32;
                    continue;
                }
                self.span[v as usize].0 = self.order.len() as u32;
                if let Some(s) = graph[node].sample {
                    self.order.push(s);
                }
                self.stack.push((v, true));
                self.stack
                    .extend(graph.neighbors_directed(node, Direction::Outgoing).map(|c| (c.index() as u32, false)));
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::batch::{master_key, replicate_rng};

    #[test]
    fn an_impossible_number_of_mutations_is_an_error_not_an_abort() {
        let s = crate::scenario::Scenario::from_yaml_str(
            "demes: [{name: a, size: 50}]\nsamples: [{deme: a, count: 5}]\nmutation: {rate: 1.0e-6, sites: 1000000000000}\n",
            "t",
        )
        .unwrap();
        let mut rng = replicate_rng(&master_key(1), 0);
        let g = crate::engine::simulate(&s, &mut rng);
        let e = place_with(&g, s.mutation().unwrap(), Count::Fixed(u64::MAX / 4), vec![0; 5], &mut rng).unwrap_err();
        assert!(matches!(e, Error::TooMuchMemory { .. }), "{e}");
        assert!(e.to_string().contains("mutation.sites"), "{e}");
    }

    #[test]
    fn the_split_of_s_over_loci_is_multinomial() {
        // Source: multinomial moments, E[k_i] = n p_i, Var[k_i] = n p_i (1 - p_i); weights
        // 1:2:3 and n = 600 give means 100, 200, 300 and sds 9.13, 11.55, 12.25.
        let mut rng = replicate_rng(&master_key(9), 0);
        let draws = 2000;
        let mut sum = [0.0f64; 3];
        let mut sq = [0.0f64; 3];
        for _ in 0..draws {
            let k = split_count(600, &[1.0, 2.0, 3.0], &mut rng).unwrap();
            assert_eq!(k.iter().sum::<u64>(), 600);
            for i in 0..3 {
                sum[i] += k[i] as f64;
                sq[i] += (k[i] as f64).powi(2);
            }
        }
        for (i, p) in [1.0 / 6.0, 2.0 / 6.0, 3.0 / 6.0].into_iter().enumerate() {
            let mean = sum[i] / draws as f64;
            let var = sq[i] / draws as f64 - mean * mean;
            let want_var = 600.0 * p * (1.0 - p);
            assert!((mean - 600.0 * p).abs() < 5.0 * (want_var / draws as f64).sqrt(), "locus {i}: mean {mean}");
            assert!((var / want_var - 1.0).abs() < 0.15, "locus {i}: variance {var} vs {want_var}");
        }
        assert_eq!(split_count(0, &[0.0, 0.0], &mut rng).unwrap(), [0, 0]);
        assert!(split_count(3, &[0.0, 0.0], &mut rng).is_err());
    }
    use crate::scenario::Scenario;

    #[test]
    fn sites_are_distinct_sorted_and_carried_below_their_edge() {
        let s = Scenario::from_yaml_str(
            "demes: [{name: a, size: 50, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 6}]\nmutation: {rate: 1.0e-4, sites: 1000}\n",
            "t",
        )
        .unwrap();
        let key = master_key(3);
        let g = crate::engine::simulate(&s, &mut replicate_rng(&key, 0));
        let m = place(&g, s.mutation().unwrap(), vec![0; 6], &mut replicate_rng(&key, 1)).unwrap();
        assert!(m.positions.windows(2).all(|w| w[0] < w[1]));
        assert!(m.positions.iter().all(|&p| (1..=1000).contains(&p)));
        assert_eq!(m.positions.len(), m.haplotypes.sites());
        for site in 0..m.haplotypes.sites() {
            let c = m.haplotypes.derived_count(site);
            assert!((1..=5).contains(&c), "a mutation inside a tree is carried by 1..n-1 samples");
        }
    }

    #[test]
    fn too_many_mutations_is_an_error() {
        let s = Scenario::from_yaml_str(
            "demes: [{name: a, size: 500}]\nsamples: [{deme: a, count: 10}]\nmutation: {rate: 0.01, sites: 5}\n",
            "t",
        )
        .unwrap();
        let key = master_key(3);
        let g = crate::engine::simulate(&s, &mut replicate_rng(&key, 0));
        assert!(matches!(
            place(&g, s.mutation().unwrap(), vec![0; 10], &mut replicate_rng(&key, 1)),
            Err(Error::TooManyMutations { .. })
        ));
    }

    #[test]
    fn fixed_count_places_exactly_that_many() {
        let s = Scenario::from_yaml_str(
            "demes: [{name: a, size: 50}]\nsamples: [{deme: a, count: 5}]\nmutation: {rate: 1.0e-6, sites: 1000}\n",
            "t",
        )
        .unwrap();
        let key = master_key(3);
        let g = crate::engine::simulate(&s, &mut replicate_rng(&key, 0));
        let m =
            place_with(&g, s.mutation().unwrap(), Count::Fixed(17), vec![0; 5], &mut replicate_rng(&key, 1)).unwrap();
        assert_eq!(m.positions.len(), 17);
    }

    #[test]
    fn dormant_generations_use_the_dormant_rate() {
        // An edge of 10 generations with 3 jumps: 3 reproduction and 7 dormant generations.
        let m = MutationModel::new(100, 1e-3, 1e-4);
        assert!((m.edge_mean(10, 3) - 100.0 * (3e-3 + 7e-4)).abs() < 1e-12);
    }
}
