//! Notation and units used throughout (documentation only).
//!
//! * Time `t` counts whole generations before the present (t = 0 is the present); it grows
//!   toward the past. All lengths and times in outputs are in generations.
//! * `N_d(t)`: number of haploid individuals of deme d at time t (rounded, at least 1).
//! * `R`: look-back. The seed an individual grew from was made R >= 1 generations before it;
//!   R = 1 is no dormancy. `E[R]` is its mean, `P(R > k)` its tail.
//! * `M[d][e]`: backward migration, the probability that the parent of a child of deme d
//!   lives in deme e. Rows sum to 1.
//! * A lineage "jump" is one parent–child link: one reproduction event followed by R - 1
//!   dormant generations.
//! * `q_n`: renewal function, the probability that a lineage visits the generation n back.
//! * `alpha`: tail exponent of a power law, P(R >= k) = k^-alpha.
//! * `θ = 2 N μ` for haploids in one deme of N without dormancy (μ per sequence per
//!   generation); coalescent time unit = N generations.
