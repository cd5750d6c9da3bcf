//! Engine benchmarks: lineage steps per second, and the ratio of engine time to the time of
//! drawing the same number of look-back values alone (the floor any exact engine must pay).
//!
//! Criterion measures each piece; the ratio section at the end measures engine and floor
//! interleaved in one run (medians of 7 rounds), because the machines are shared and noisy.

use criterion::{Criterion, Throughput, criterion_group};
use rand::{Rng, SeedableRng, rngs::ChaCha8Rng};
use seedline::batch::{master_key, replicate_rng};
use seedline::dormancy::LookBack;
use seedline::engine::Engine;
use seedline::engine::Simulator;
use seedline::scenario::Scenario;
use std::hint::black_box;
use std::time::Instant;

const CASES: [(&str, &str); 4] = [
    ("none", "demes: [{name: a, size: 2000}]\nsamples: [{deme: a, count: 20}]\n"),
    (
        "geometric",
        "demes: [{name: a, size: 2000, dormancy: {law: geometric, mean: 3.5}}]\nsamples: [{deme: a, count: 20}]\n",
    ),
    (
        "pareto_0.7",
        "horizon: 1.0e7\ndemes: [{name: a, size: 100, dormancy: {law: pareto, alpha: 0.7}}]\nsamples: [{deme: a, count: 20}]\n",
    ),
    (
        "block_1e4_alpha_0.3",
        "horizon: 1.0e8\ndemes: [{name: a, size: 1, dormancy: {law: pareto, alpha: 0.3}}]\nsamples: [{deme: a, block: {from: 0, to: 9999}}]\n",
    ),
];

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "bench").unwrap()
}

/// Mean steps per replicate over a pilot run.
fn pilot_steps(s: &Scenario, reps: u64) -> f64 {
    let key = master_key(1);
    let mut sim = Simulator::new();
    (0..reps).map(|r| sim.simulate(s, &mut replicate_rng(&key, r)).steps() as f64).sum::<f64>() / reps as f64
}

fn bench_engine(c: &mut Criterion) {
    let mut group = c.benchmark_group("engine");
    group.sample_size(10);
    for (name, yaml) in CASES {
        let s = scenario(yaml);
        let steps = pilot_steps(&s, 20);
        group.throughput(Throughput::Elements(steps as u64));
        let key = master_key(1);
        let mut sim = Simulator::new();
        let mut rep = 0u64;
        group.bench_function(name, |b| {
            b.iter(|| {
                rep += 1;
                black_box(sim.simulate(&s, &mut replicate_rng(&key, rep)).steps())
            })
        });
        let law = s.demes()[0].dormancy().clone();
        let mut rng = ChaCha8Rng::seed_from_u64(1);
        group.throughput(Throughput::Elements(100_000));
        group.bench_function(format!("{name}/draws_only"), |b| {
            b.iter(|| {
                let mut acc = 0u64;
                for _ in 0..100_000 {
                    acc = acc.wrapping_add(law.sample(&mut rng));
                }
                black_box(acc)
            })
        });
    }
    group.finish();
}

/// Prints steps per second and the engine / draws-alone ratio for each case.
fn ratios() {
    println!("\nratio of engine time to drawing the same number of look-backs (median of 7 rounds)");
    println!("{:<22} {:>14} {:>14} {:>8}", "case", "steps/s", "draws/s", "ratio");
    for (name, yaml) in CASES {
        let s = scenario(yaml);
        let law = s.demes()[0].dormancy().clone();
        let key = master_key(2);
        let mut sim = Simulator::new();
        let mut rng = ChaCha8Rng::seed_from_u64(2);
        let (mut engine_rates, mut draw_rates, mut ratios) = (Vec::new(), Vec::new(), Vec::new());
        let mut rep = 0;
        for _ in 0..7 {
            let t0 = Instant::now();
            let mut steps = 0u64;
            while t0.elapsed().as_secs_f64() < 0.3 {
                rep += 1;
                steps += sim.simulate(&s, &mut replicate_rng(&key, rep)).steps();
            }
            let te = t0.elapsed().as_secs_f64();
            let t1 = Instant::now();
            let mut acc = 0u64;
            for _ in 0..steps {
                acc = acc.wrapping_add(law.sample(&mut rng));
            }
            black_box(acc);
            let td = t1.elapsed().as_secs_f64();
            engine_rates.push(steps as f64 / te);
            draw_rates.push(steps as f64 / td);
            ratios.push(te / td);
        }
        let med = |v: &mut Vec<f64>| {
            v.sort_by(f64::total_cmp);
            v[v.len() / 2]
        };
        println!(
            "{name:<22} {:>14.3e} {:>14.3e} {:>8.2}",
            med(&mut engine_rates),
            med(&mut draw_rates),
            med(&mut ratios)
        );
    }
    let _ = ChaCha8Rng::seed_from_u64(0).next_u64();
}

/// The geometric look-back sampler against the previous one (rand_distr's `Geometric`, the
/// Bringmann–Friedrich algorithm, plus one) and a one-log inversion draw, 1 + floor(ln U /
/// ln(1 - p)): nanoseconds per draw, medians of 7 interleaved rounds, and their ratios.
fn geometric_sampler() {
    println!("\ngeometric look-back: ns per draw (median of 7 interleaved rounds of 2e6 draws)");
    println!(
        "{:<8} {:>10} {:>10} {:>10} {:>12} {:>12}",
        "mean", "seedline", "previous", "one-log", "prev/ours", "ours/one-log"
    );
    for mean in [2.0f64, 3.5, 5.0, 50.0] {
        let ours = seedline::dormancy::Geometric::new(mean).unwrap();
        let previous = rand_distr::Geometric::new(1.0 / mean).unwrap();
        let ln_q = (-1.0 / mean).ln_1p();
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        let n = 2_000_000;
        let mut time = |f: &mut dyn FnMut(&mut ChaCha8Rng) -> u64| {
            let t = Instant::now();
            let mut acc = 0u64;
            for _ in 0..n {
                acc = acc.wrapping_add(f(&mut rng));
            }
            black_box(acc);
            t.elapsed().as_secs_f64() / n as f64 * 1e9
        };
        let (mut a, mut b, mut c) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..7 {
            a.push(time(&mut |r| ours.sample(r)));
            b.push(time(&mut |r| rand_distr::Distribution::sample(&previous, r) + 1));
            c.push(time(&mut |r| {
                let u: f64 = 1.0 - rand::RngExt::random::<f64>(r);
                (u.ln() / ln_q) as u64 + 1
            }));
        }
        let med = |v: &mut Vec<f64>| {
            v.sort_by(f64::total_cmp);
            v[v.len() / 2]
        };
        let (a, b, c) = (med(&mut a), med(&mut b), med(&mut c));
        println!("{mean:<8} {a:>10.2} {b:>10.2} {c:>10.2} {:>12.2} {:>12.2}", b / a, a / c);
    }
}

/// Share of a replicate's time spent outside the engine (mutation placement and statistics)
/// for n = 100, one deme, geometric dormancy.
fn outside_engine_share() {
    let s = scenario(
        "demes: [{name: a, size: 10000, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 100}]\nmutation: {rate: 1.0e-8, sites: 100000}\n",
    );
    let key = master_key(3);
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let mut sim = Simulator::new();
    let mut scratch = seedline::engine::Scratch::default();
    let (mut engine, mut total) = (Vec::new(), Vec::new());
    for round in 0..7u64 {
        let t0 = Instant::now();
        for rep in 0..40 {
            black_box(sim.simulate(&s, &mut replicate_rng(&key, round * 1000 + rep)).steps());
        }
        engine.push(t0.elapsed().as_secs_f64());
        let t1 = Instant::now();
        for rep in 0..40 {
            let keep = seedline::batch::Keep::default();
            black_box(
                seedline::batch::simulate_replicate(
                    &Engine::exact(&s),
                    &mut scratch,
                    &key,
                    round * 1000 + rep,
                    keep,
                    &labels,
                )
                .unwrap(),
            );
        }
        total.push(t1.elapsed().as_secs_f64());
    }
    engine.sort_by(f64::total_cmp);
    total.sort_by(f64::total_cmp);
    let (e, t) = (engine[3], total[3]);
    println!(
        "\nn = 100, N = 10^4, geometric mean 2, theta ~ 8: engine {:.4} s, replicate with mutations and statistics {:.4} s per 40 replicates; share outside the engine {:.1}%",
        e,
        t,
        100.0 * (t - e) / t
    );
}

criterion_group!(benches, bench_engine);

fn main() {
    let quick = std::env::args().any(|a| a == "--ratios-only");
    if !quick {
        benches();
        Criterion::default().configure_from_args().final_summary();
    }
    ratios();
    geometric_sampler();
    outside_engine_share();
}
