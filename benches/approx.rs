//! Approximate-engine benchmarks: cost per replicate for N = 10^3 and 10^7 (it must not grow
//! with N), and the ratio to a plain Kingman simulation of the same n written here (a loop of
//! exponential waiting times with random pair merges into parent/time arrays).
//!
//! Criterion measures each piece; the ratio section measures both interleaved (medians of 7
//! rounds), because the machines are shared and noisy. `--ratios-only` skips criterion.

use criterion::{Criterion, criterion_group};
use rand::{Rng, RngExt, SeedableRng, rngs::ChaCha8Rng};
use rand_distr::{Distribution, Exp1};
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::approx::ApproxModel;
use seedline::scenario::Scenario;
use std::hint::black_box;
use std::time::Instant;

fn scenario(n_ind: u64, n: u32) -> Scenario {
    let yaml = format!("demes: [{{name: a, size: {n_ind}}}]\nsamples: [{{deme: a, count: {n}}}]\n");
    Scenario::from_yaml_str(&yaml, "bench").unwrap()
}

/// Plain Kingman coalescent in generations: returns T_MRCA; the tree goes into `parent`/`time`.
fn plain_kingman<R: Rng>(n: usize, pop: f64, rng: &mut R, parent: &mut Vec<u32>, time: &mut Vec<f64>) -> f64 {
    parent.clear();
    time.clear();
    parent.resize(2 * n - 1, u32::MAX);
    time.resize(2 * n - 1, 0.0);
    let mut live: Vec<u32> = (0..n as u32).collect();
    let mut t = 0.0;
    let mut next = n as u32;
    while live.len() > 1 {
        let k = live.len();
        let e: f64 = Exp1.sample(rng);
        t += e * pop / (k * (k - 1) / 2) as f64;
        let i = rng.random_range(0..k);
        let a = live.swap_remove(i);
        let j = rng.random_range(0..k - 1);
        let b = live[j];
        parent[a as usize] = next;
        parent[b as usize] = next;
        time[next as usize] = t;
        live[j] = next;
        next += 1;
    }
    t
}

fn bench_approx(c: &mut Criterion) {
    let mut group = c.benchmark_group("approx");
    group.sample_size(20);
    group.measurement_time(std::time::Duration::from_secs(2));
    for n in [20u32, 100] {
        for pop in [1_000u64, 10_000_000] {
            let s = scenario(pop, n);
            let m = ApproxModel::new(&s).unwrap();
            let mut rng = replicate_rng(&master_key(1), 0);
            group.bench_function(format!("approx/N={pop}/n={n}"), |b| {
                b.iter(|| black_box(m.simulate(&mut rng).tmrca()))
            });
        }
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        let (mut p, mut t) = (Vec::new(), Vec::new());
        group.bench_function(format!("plain_kingman/n={n}"), |b| {
            b.iter(|| black_box(plain_kingman(n as usize, 1000.0, &mut rng, &mut p, &mut t)))
        });
        group.bench_function(format!("plain_kingman_fresh/n={n}"), |b| {
            b.iter(|| black_box(plain_kingman_fresh(n as usize, 1000.0, &mut rng)))
        });
    }
    group.finish();
}

/// The same loop returning a freshly allocated tree, as a simulator that hands out its
/// genealogy (like [`ApproxModel::simulate`]) must.
fn plain_kingman_fresh<R: Rng>(n: usize, pop: f64, rng: &mut R) -> (Vec<u32>, Vec<f64>) {
    let (mut p, mut t) = (Vec::new(), Vec::new());
    plain_kingman(n, pop, rng, &mut p, &mut t);
    (p, t)
}

/// Time per replicate of the approx engine (N = 10^3 and 10^7) and of plain Kingman (buffers
/// reused, or a fresh tree per replicate), and the ratios, medians of 7 interleaved rounds.
fn ratios() {
    println!("\ntime per replicate (median of 7 rounds of 0.2 s each); ratios: approx N=1e7 over the others");
    println!(
        "{:<5} {:>13} {:>13} {:>13} {:>13} {:>8} {:>9} {:>9}",
        "n", "approx N=1e3", "approx N=1e7", "plain reuse", "plain fresh", "1e7/1e3", "vs reuse", "vs fresh"
    );
    for n in [20u32, 100] {
        let scenarios: Vec<Scenario> = [1_000u64, 10_000_000].iter().map(|&p| scenario(p, n)).collect();
        let models: Vec<ApproxModel> = scenarios.iter().map(|s| ApproxModel::new(s).unwrap()).collect();
        // One stream for all replicates, as for the plain loop: both time the simulation alone.
        let mut rng = ChaCha8Rng::seed_from_u64(2);
        let (mut p, mut t) = (Vec::new(), Vec::new());
        let mut per = [Vec::new(), Vec::new(), Vec::new(), Vec::new()];
        for _ in 0..7 {
            for (slot, per_slot) in per.iter_mut().enumerate() {
                let t0 = Instant::now();
                let mut count = 0u64;
                while t0.elapsed().as_secs_f64() < 0.2 {
                    for _ in 0..64 {
                        match slot {
                            0 | 1 => {
                                black_box(models[slot].simulate(&mut rng).tmrca());
                            }
                            2 => {
                                black_box(plain_kingman(n as usize, 1000.0, &mut rng, &mut p, &mut t));
                            }
                            _ => {
                                black_box(plain_kingman_fresh(n as usize, 1000.0, &mut rng));
                            }
                        }
                    }
                    count += 64;
                }
                per_slot.push(t0.elapsed().as_secs_f64() / count as f64);
            }
        }
        let med = |v: &mut Vec<f64>| {
            v.sort_by(f64::total_cmp);
            v[v.len() / 2]
        };
        let [a, b, k, f] = per.map(|mut v| med(&mut v));
        println!(
            "{n:<5} {:>11.2}us {:>11.2}us {:>11.2}us {:>11.2}us {:>8.2} {:>9.2} {:>9.2}",
            a * 1e6,
            b * 1e6,
            k * 1e6,
            f * 1e6,
            b / a,
            b / k,
            b / f
        );
    }
}

criterion_group!(benches, bench_approx);

fn main() {
    let quick = std::env::args().any(|a| a == "--ratios-only");
    if !quick {
        benches();
        Criterion::default().configure_from_args().final_summary();
    }
    ratios();
}
