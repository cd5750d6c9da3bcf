//! ARG engine benchmark: cost of one replicate against the scaled recombination rate
//! rho = 2 N r (L - 1) (N = 1000 haploids, n = 10, no dormancy, L = 1001 sites), and the
//! fitted slope of log cost against log rho.
//!
//! Criterion measures each rho; the slope section at the end times fixed replicate sets per
//! rho (medians of 5 rounds, because the machines are shared and noisy) and fits a line by
//! least squares. `--slope-only` skips criterion.

use criterion::{Criterion, criterion_group};
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::arg::{ArgConfig, ArgSimulator};
use seedline::scenario::Scenario;
use std::hint::black_box;
use std::time::Instant;

const RHOS: [f64; 3] = [1.0, 10.0, 100.0];
const N: f64 = 1000.0;
const SITES: u64 = 1001;

fn scenario() -> Scenario {
    Scenario::from_yaml_str("demes: [{name: a, size: 1000}]\nsamples: [{deme: a, count: 10}]\n", "bench").unwrap()
}

fn config(rho: f64) -> ArgConfig {
    ArgConfig::new(SITES, rho / (2.0 * N * (SITES - 1) as f64)).unwrap()
}

fn bench_arg(c: &mut Criterion) {
    let s = scenario();
    let mut group = c.benchmark_group("arg");
    group.sample_size(10);
    for rho in RHOS {
        let cfg = config(rho);
        let key = master_key(1);
        let mut sim = ArgSimulator::new();
        let mut rep = 0u64;
        group.bench_function(format!("rho_{rho}"), |b| {
            b.iter(|| {
                rep += 1;
                black_box(sim.simulate(&s, &cfg, &mut replicate_rng(&key, rep)).breakpoints())
            })
        });
    }
    group.finish();
}

fn slope() {
    let s = scenario();
    let key = master_key(2);
    let reps = 30u64;
    println!("\n{:>6} {:>14} {:>12} {:>12} {:>12}", "rho", "ms/replicate", "steps", "breakpoints", "rec. events");
    let mut xs = Vec::new();
    let mut ys = Vec::new();
    for rho in RHOS {
        let cfg = config(rho);
        let mut sim = ArgSimulator::new();
        let (mut steps, mut bps, mut events) = (0u64, 0usize, 0u64);
        let mut times = Vec::new();
        for round in 0..5 {
            let t0 = Instant::now();
            for r in 0..reps {
                let a = sim.simulate(&s, &cfg, &mut replicate_rng(&key, r));
                if round == 0 {
                    steps += a.steps();
                    bps += a.breakpoints();
                    events += a.recombination_events();
                }
                black_box(&a);
            }
            times.push(t0.elapsed().as_secs_f64() / reps as f64);
        }
        times.sort_by(f64::total_cmp);
        let t = times[times.len() / 2];
        let per = |x: f64| x / reps as f64;
        println!(
            "{rho:>6} {:>14.3} {:>12.0} {:>12.1} {:>12.1}",
            t * 1e3,
            per(steps as f64),
            per(bps as f64),
            per(events as f64)
        );
        xs.push(rho.ln());
        ys.push(t.ln());
    }
    let k = xs.len() as f64;
    let (mx, my) = (xs.iter().sum::<f64>() / k, ys.iter().sum::<f64>() / k);
    let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
    println!("fitted slope of log cost vs log rho: {:.3}", sxy / sxx);
}

criterion_group!(benches, bench_arg);

fn main() {
    if !std::env::args().any(|a| a == "--slope-only") {
        benches();
        Criterion::default().configure_from_args().final_summary();
    }
    slope();
}
