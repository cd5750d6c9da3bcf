//! Mutations and statistics against published theory. Each expected value names its source;
//! tolerances are multiples of the Monte-Carlo standard error; seeds are fixed.

use seedline::batch::{BatchConfig, Keep, simulate_replicate};
use seedline::engine::Engine;
use seedline::scenario::Scenario;
use seedline::stats::{SampleStats, harmonic, harmonic_squares};
use seedline::theory::two_lineage::PairChain;
use statrs::distribution::{ChiSquared, ContinuousCDF};
mod common;
use common::mean_se;

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

/// Per-replicate statistics of locus 0.
fn stats(s: &Scenario, reps: u64) -> Vec<SampleStats> {
    let idx: Vec<u64> = (0..reps).collect();
    let key = seedline::batch::master_key(s.seed());
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let mut out = Vec::new();
    seedline::batch::run(
        s,
        &idx,
        BatchConfig::default(),
        |sim, sc, rep, _| simulate_replicate(&Engine::exact(sc), sim, &key, rep, Keep::default(), &labels).unwrap(),
        |_, loci| {
            out.push(loci[0].stats.clone().unwrap());
            Ok(())
        },
    )
    .unwrap();
    out
}

fn close(what: &str, xs: &[f64], expected: f64, k: f64) {
    let (m, se) = mean_se(xs);
    assert!((m - expected).abs() <= k * se, "{what}: simulated {m} ± {se}, expected {expected}");
}

#[test]
fn no_dormancy_sfs_segregating_sites_and_haplotypes() {
    // theta = 2 N mu L = 2 · 1000 · 1e-6 · 1000 = 2 per sequence; n = 8.
    let s = scenario(
        "seed: 4\ndemes: [{name: a, size: 1000}]\nsamples: [{deme: a, count: 8}]\nmutation: {rate: 1.0e-6, sites: 1000}\n",
    );
    let st = stats(&s, 6000);
    let theta = 2.0;
    let n = 8u32;
    // Source: Fu (1995), Theor. Popul. Biol. 48:172: E[xi_i] = theta / i (Kingman limit; the
    // discrete model with N = 1000 differs by about 0.3%, far below the 4-se tolerance).
    for i in 1..n as usize {
        let xs: Vec<f64> = st.iter().map(|x| x.sfs[i - 1] as f64).collect();
        close(&format!("E[xi_{i}]"), &xs, theta / i as f64, 4.0);
    }
    // Source: Watterson (1975), Theor. Popul. Biol. 7:256: E[S] = theta a_n and
    // Var[S] = theta a_n + theta^2 b_n.
    let sx: Vec<f64> = st.iter().map(|x| x.segregating_sites as f64).collect();
    close("E[S]", &sx, theta * harmonic(n), 4.0);
    let (m, _) = mean_se(&sx);
    let var = sx.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (sx.len() - 1) as f64;
    let var_expected = theta * harmonic(n) + theta * theta * harmonic_squares(n);
    // The sample variance of 6000 values has relative sd about sqrt(2/6000 + kurtosis) < 5%.
    assert!((var / var_expected - 1.0).abs() < 0.1, "Var[S] {var} vs {var_expected}");
    // Source: Ewens (1972), Theor. Popul. Biol. 3:87: distinct haplotypes under infinite sites
    // without recombination have the law of the number of alleles, E[K_n] = sum theta/(theta+i).
    let kx: Vec<f64> = st.iter().map(|x| x.distinct_haplotypes as f64).collect();
    let ek: f64 = (0..n).map(|i| theta / (theta + f64::from(i))).sum();
    close("E[K_n]", &kx, ek, 4.0);
    // Source: Tajima (1989): E[pi] = theta.
    let px: Vec<f64> = st.iter().map(|x| x.theta_pi.unwrap()).collect();
    close("E[pi]", &px, theta, 4.0);
}

#[test]
fn mutation_bookkeeping_through_dormancy() {
    // Source: theory reference §3.3 (renewal-reward, exact for two lineages at every N):
    // the clock running through dormancy gives E[pi] = 2 N mu E[R]^2 / d, mutations only at
    // reproduction give E[pi] = 2 N mu E[R] / d (mu per sequence per generation).
    let laws = [
        ("{law: uniform, max: 4}", 2.5),
        ("{law: geometric, mean: 3}", 3.0),
        ("{law: table, weights: [0.5, 0.3, 0.2]}", 1.7),
    ];
    let (big_n, mu) = (40.0, 1e-7 * 1e5);
    for (i, (law, mean)) in laws.iter().enumerate() {
        for (rates, expected) in [
            ("rate: 1.0e-7", 2.0 * big_n * mu * mean * mean),
            ("reproduction_rate: 1.0e-7, dormant_rate: 0", 2.0 * big_n * mu * mean),
        ] {
            let s = scenario(&format!(
                "seed: {i}\ndemes: [{{name: a, size: 40, dormancy: {law}}}]\nsamples: [{{deme: a, count: 2}}]\nmutation: {{{rates}, sites: 100000}}\n"
            ));
            let pi: Vec<f64> = stats(&s, 8000).iter().map(|x| x.theta_pi.unwrap()).collect();
            close(&format!("{law} {rates}"), &pi, expected, 4.0);
        }
    }
}

#[test]
fn pair_time_matches_the_exact_gap_chain_in_distribution() {
    // Source: the exact two-lineage Markov chain on the gap between the lineages (theory
    // reference §3.2; `theory::two_lineage`, itself checked against the reference table).
    let s = scenario(
        "seed: 8\ndemes: [{name: a, size: 12, dormancy: {law: table, weights: [0.5, 0.3, 0.2]}}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let chain = PairChain::new(s.demes()[0].dormancy(), 12).unwrap();
    let cutoff = 120u64;
    let pmf = chain.pmf(cutoff);
    let reps = 20_000u64;
    let idx: Vec<u64> = (0..reps).collect();
    let mut t = Vec::new();
    seedline::batch::run(
        &s,
        &idx,
        BatchConfig::default(),
        |sim, sc, _, rng| Engine::exact(sc).simulate_tree(sim, rng).tmrca().unwrap(),
        |_, v| {
            t.push(v);
            Ok(())
        },
    )
    .unwrap();
    // Classes of width 5 up to the cutoff and one tail class; chi-square at level 0.001.
    let width = 5u64;
    let k = (cutoff / width) as usize;
    let mut obs = vec![0.0; k + 1];
    let mut exp = vec![0.0; k + 1];
    for &x in &t {
        obs[((x.saturating_sub(1)) / width).min(k as u64) as usize] += 1.0;
    }
    for (time, p) in pmf.iter().enumerate().skip(1) {
        exp[(((time as u64) - 1) / width).min(k as u64) as usize] += p * reps as f64;
    }
    let covered: f64 = exp.iter().sum();
    exp[k] += reps as f64 - covered;
    let stat: f64 = obs.iter().zip(&exp).filter(|(_, e)| **e > 0.0).map(|(o, e)| (o - e).powi(2) / e).sum();
    let pval = 1.0 - ChiSquared::new(k as f64).unwrap().cdf(stat);
    assert!(pval > 0.001, "chi-square {stat} on {k} df, p = {pval}");
}

#[test]
fn loci_add_up_and_the_locus_mean_of_d_tightens() {
    // Unlinked loci are independent genealogies: the summed SFS has mean loci x the
    // single-locus mean (linearity of expectation), and the variance of the mean of
    // Tajima's D over loci falls like 1/loci (independence).
    let base = "demes: [{name: a, size: 500}]\nsamples: [{deme: a, count: 6}]\nmutation: {rate: 2.0e-6, sites: 2000}\n";
    let one = scenario(&format!("seed: 1\n{base}"));
    let many = scenario(&format!("seed: 2\nloci: 8\n{base}"));
    let key = seedline::batch::master_key(2);
    let labels: Vec<String> = many.samples().iter().map(|x| x.label.clone()).collect();
    let mut sim = seedline::engine::Scratch::default();
    let reps = 1500;
    let mut summed = Vec::new();
    let mut dmean = Vec::new();
    for rep in 0..reps {
        let loci = simulate_replicate(&Engine::exact(&many), &mut sim, &key, rep, Keep::default(), &labels).unwrap();
        assert_eq!(loci.len(), 8);
        summed.push(loci.iter().map(|l| l.stats.as_ref().unwrap().segregating_sites as f64).sum::<f64>());
        let ds: Vec<f64> = loci.iter().filter_map(|l| l.stats.as_ref().unwrap().tajima_d).collect();
        if ds.len() == 8 {
            dmean.push(ds.iter().sum::<f64>() / 8.0);
        }
    }
    let single = stats(&one, reps);
    let s1: Vec<f64> = single.iter().map(|x| x.segregating_sites as f64).collect();
    let (m1, se1) = mean_se(&s1);
    let (m8, se8) = mean_se(&summed);
    assert!((m8 - 8.0 * m1).abs() <= 4.0 * (se8 * se8 + 64.0 * se1 * se1).sqrt(), "summed S {m8} vs 8 x {m1}");
    let d1: Vec<f64> = single.iter().filter_map(|x| x.tajima_d).collect();
    let var = |v: &[f64]| {
        let (m, _) = mean_se(v);
        v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() - 1) as f64
    };
    let ratio = var(&d1) / var(&dmean);
    // Expected ratio 8; the ratio of two sample variances of ~1500 values has relative sd ~5%.
    assert!((ratio / 8.0 - 1.0).abs() < 0.25, "Var(D) / Var(mean of 8 loci) = {ratio}");
}
