//! Theory against simulation for the ARG engine (`seedline::arg`). Every expected value comes
//! from outside the project, with its source beside the check; tolerances are multiples of
//! the Monte-Carlo standard error and all seeds are fixed, so the tests are deterministic.

use rayon::prelude::*;
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::arg::{Arg, ArgConfig, ArgSimulator};
use seedline::scenario::Scenario;
mod common;
use common::assert_close;

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

/// f(arg) for replicates 0..reps of a fixed seed, in parallel, in replicate order.
fn collect(s: &Scenario, config: &ArgConfig, reps: u64, f: impl Fn(&Arg) -> f64 + Sync) -> Vec<f64> {
    let key = master_key(2024);
    (0..reps)
        .into_par_iter()
        .map_init(ArgSimulator::new, |sim, r| f(&sim.simulate(s, config, &mut replicate_rng(&key, r))))
        .collect()
}

#[test]
fn without_recombination_the_tree_has_the_exact_wright_fisher_moments() {
    // Source: theory reference §1, exact discrete Wright–Fisher table, N = 100, n = 10:
    // E[T_MRCA] = 179.521098 and E[L] = 566.535976 generations (exact rational computation).
    let s = scenario("demes: [{name: a, size: 100}]\nsamples: [{deme: a, count: 10}]\n");
    let config = ArgConfig::new(50, 0.0).unwrap();
    let tmrca = collect(&s, &config, 3000, |a| a.trees()[0].genealogy().tmrca().unwrap() as f64);
    let length = collect(&s, &config, 3000, |a| a.trees()[0].genealogy().total_length() as f64);
    assert_close("T_MRCA", &tmrca, 179.521098, 4.0);
    assert_close("total length", &length, 566.535976, 4.0);
}

/// Crossovers on the marginal trees, one value per replicate; checks the counts' order.
fn tree_crossovers(s: &Scenario, config: &ArgConfig, reps: u64) -> Vec<f64> {
    collect(s, config, reps, |a| {
        assert!(a.breakpoints() as u64 <= a.tree_crossovers());
        a.tree_crossovers() as f64
    })
}

#[test]
fn crossovers_on_the_marginal_trees_follow_hudson_kaplan() {
    // Hudson & Kaplan (1985, Genetics 111:147) [M: from memory, not in the theory reference]:
    // the expected number of recombination events on the genealogy of a sample over a
    // sequence is rho a_n, a_n = sum_{i<n} 1/i.
    //
    // Derivation for this model (haploids, coalescent unit N generations). Crossovers in gap g
    // fall at each reproduction event, Poisson(r), independently of everything that decides
    // the genealogy of site g - 1 (that genealogy depends only on the start parent and the
    // crossovers in gaps < g). So
    //   E[crossovers in gap g on the tree of site g - 1] = r E[J],
    // J = reproduction events (jumps) on one site's genealogy, whose law is the engine's.
    // Summed over the L - 1 gaps: r (L - 1) E[J], exactly. Without dormancy J = total length
    // L_tot in generations, E[L_tot] -> 2 N a_n (Kingman: 2 a_n units of N generations), so
    //   E = r (L - 1) 2 N a_n = rho a_n,   rho = 2 N r (L - 1)
    // (per lineage N r (L - 1) = rho/2 per coalescent unit, as 4 N_e r for diploids).
    //
    // Case 1: n = 2, N = 1000, rho = 20. Exact discrete E[L_tot] = 2 E[T_2] = 2N (theory
    // reference §1: T_2 ~ Geometric(1/N)), so the expectation is rho a_2 = 20 exactly.
    let s = scenario("demes: [{name: a, size: 1000}]\nsamples: [{deme: a, count: 2}]\n");
    let (sites, rho, n_pop) = (101u64, 20.0, 1000.0);
    let config = ArgConfig::new(sites, rho / (2.0 * n_pop * (sites - 1) as f64)).unwrap();
    assert_close("crossovers on the trees, n = 2", &tree_crossovers(&s, &config, 1500), rho, 4.0);
    // Case 2: n = 5, N = 500, rho = 10: rho a_5 = 10 * 25/12 = 20.8333; the exact discrete
    // E[L_tot] lies within 1 generation of 2 N a_n (theory reference §1 table: 416.81 vs
    // 416.67 at N = 100, 5658.66 vs 5657.94 at N = 1000), a relative 3e-4 here, far below the
    // Monte-Carlo error (about 3%).
    let s = scenario("demes: [{name: a, size: 500}]\nsamples: [{deme: a, count: 5}]\n");
    let (rho, n_pop) = (10.0, 500.0);
    let config = ArgConfig::new(sites, rho / (2.0 * n_pop * (sites - 1) as f64)).unwrap();
    assert_close("crossovers on the trees, n = 5", &tree_crossovers(&s, &config, 1000), rho * 25.0 / 12.0, 4.0);
}

#[test]
fn dormancy_scales_the_crossovers_by_links_not_generations() {
    // Crossovers happen at reproduction only. Theory reference §3.3 [D, V]: the expected number
    // of parent-offspring links on one lineage up to the MRCA of two lineages sampled in the
    // same generation is N E[R]/d exactly (d = gcd of the support of R). With the argument of
    // the Hudson–Kaplan test, E[crossovers on the marginal trees] = r (L - 1) 2 N E[R] / d,
    // exactly, for every r (not only to first order: crossovers in gap g never change the
    // genealogy of site g - 1).
    let (sites, n_pop) = (201u64, 100.0);
    // uniform {1..4}: E[R] = 2.5, d = 1 (theory reference §3.3 table: links/N = 2.5).
    let s =
        scenario("demes: [{name: a, size: 100, dormancy: {law: uniform, max: 4}}]\nsamples: [{deme: a, count: 2}]\n");
    let r = 1e-4;
    let expected = r * (sites - 1) as f64 * 2.0 * n_pop * 2.5;
    let config = ArgConfig::new(sites, r).unwrap();
    assert_close("uniform {1..4}", &tree_crossovers(&s, &config, 2000), expected, 4.0);
    // {2, 4} equally likely: d = 2, links/N = 1.5 (same table), E = r (L-1) 2 N 1.5.
    let s = scenario(
        "demes: [{name: a, size: 100, dormancy: {law: table, weights: [0, 1, 0, 1]}}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let expected = r * (sites - 1) as f64 * 2.0 * n_pop * 1.5;
    assert_close("{2, 4}", &tree_crossovers(&s, &config, 2000), expected, 4.0);
}

#[test]
fn two_site_pair_times_have_the_two_locus_covariance() {
    // Two-locus coalescent, n = 2 (Griffiths 1981; Hudson 1983; Kaplan & Hudson 1985)
    // [M: from memory, not in the theory reference]: with time in coalescent units and a
    // recombination rate rho/2 per lineage per unit between the two loci,
    //   Cov(T_a, T_b) = (rho + 18) / (rho^2 + 13 rho + 18),   Var(T_a) = Var(T_b) = 1.
    // Here: unit N generations (haploids), and sites a, b one gap apart separate at one
    // reproduction with probability c = P(Poisson(r) odd) = (1 - e^{-2r})/2, so the rate per
    // lineage per unit is N c = rho/2, rho = 2 N c. The test standardises with the exact
    // discrete moments E[T_2] = N, Var[T_2] = N(N - 1) (theory reference §1) and checks the mean
    // of the standardised product; the discrete model differs from the limit by O(1/N) and
    // O(c) = 0.004, below the 4 se tolerance (about 0.03; rho = 3 or 5 would give 0.32 or
    // 0.21, outside it).
    let n_pop = 500.0;
    let rho: f64 = 4.0;
    let c = rho / (2.0 * n_pop);
    let r = -(1.0 - 2.0 * c).ln() / 2.0;
    let s = scenario("demes: [{name: a, size: 500}]\nsamples: [{deme: a, count: 2}]\n");
    let config = ArgConfig::new(2, r).unwrap();
    let sd = (n_pop * (n_pop - 1.0)).sqrt();
    let products = collect(&s, &config, 20_000, |a| {
        let t = |site| a.tree_at(site).genealogy().tmrca().unwrap() as f64;
        (t(0) - n_pop) / sd * (t(1) - n_pop) / sd
    });
    assert_close("Cov(T_a, T_b)", &products, (rho + 18.0) / (rho * rho + 13.0 * rho + 18.0), 4.0);
}
