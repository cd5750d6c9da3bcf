//! Families benchmark: the block of 10^4 consecutive generations (one individual each, N = 1),
//! pareto alpha = 0.3, horizon 10^8. Measures the engine alone (steps per second) and the
//! engine followed by the families analysis of the replicate (partition, relatedness at all
//! lags with at most 1000 pairs each, MRCA depths, coloured sums).

use criterion::{Criterion, Throughput, criterion_group};
use seedline::batch::{master_key, replicate_rng};
use seedline::engine::Simulator;
use seedline::families::{self, Block, Options, Plan};
use seedline::scenario::Scenario;
use std::hint::black_box;
use std::time::Instant;

const YAML: &str = "horizon: 1.0e8\ndemes: [{name: a, size: 1, dormancy: {law: pareto, alpha: 0.3}}]\n\
                    samples: [{deme: a, block: {from: 0, to: 9999}}]\n";

fn bench_families(c: &mut Criterion) {
    let s = Scenario::from_yaml_str(YAML, "bench").unwrap();
    let block = Block::of(&s).unwrap();
    let plan = Plan::new(block.len(), &Options::default());
    let key = master_key(1);
    let mut sim = Simulator::new();
    let pilot: u64 = (0..5).map(|r| sim.simulate(&s, &mut replicate_rng(&key, r)).steps()).sum::<u64>() / 5;
    let mut group = c.benchmark_group("families_block_1e4_alpha_0.3");
    group.sample_size(10);
    group.throughput(Throughput::Elements(pilot));
    let mut rep = 0u64;
    group.bench_function("simulate", |b| {
        b.iter(|| {
            rep += 1;
            black_box(sim.simulate(&s, &mut replicate_rng(&key, rep)).steps())
        })
    });
    group.bench_function("simulate_and_analyse", |b| {
        b.iter(|| {
            rep += 1;
            let mut rng = replicate_rng(&key, rep);
            let g = sim.simulate(&s, &mut rng);
            black_box(families::analyse(&g, &block, &plan, &mut rng).sizes.len())
        })
    });
    group.finish();

    // Plain figures for docs: steps per second over 20 replicates, and the analysis share.
    let (mut steps, mut t_sim, mut t_all) = (0u64, 0f64, 0f64);
    for r in 1000..1020 {
        let mut rng = replicate_rng(&key, r);
        let t0 = Instant::now();
        let g = sim.simulate(&s, &mut rng);
        t_sim += t0.elapsed().as_secs_f64();
        steps += g.steps();
        black_box(families::analyse(&g, &block, &plan, &mut rng));
        t_all += t0.elapsed().as_secs_f64();
    }
    println!(
        "\nblock 1e4, alpha 0.3, horizon 1e8: {:.0} steps/replicate, {:.3e} steps/s (engine), \
         {:.1} ms/replicate engine, {:.1} ms/replicate engine + analysis",
        steps as f64 / 20.0,
        steps as f64 / t_sim,
        1e3 * t_sim / 20.0,
        1e3 * t_all / 20.0
    );
}

criterion_group!(benches, bench_families);

fn main() {
    benches();
    Criterion::default().configure_from_args().final_summary();
}
