//! Approximate recombination engine (`seedline::engine::approx_arg`) benchmarks, ratios
//! measured within one run (medians of interleaved rounds; the machine is shared and noisy).
//!
//! - `target`: the chromosome — n = 50, N = 1e5, geometric dormancy mean 3, L = 10^7
//!   sites, r = 1e-8 per gap, mutations 1e-9 per site per generation (at 1e-8, θ per site is
//!   0.018 × a_n and one-site local trees often get two mutations, which infinite sites
//!   refuses) — through `auto` (`engine::resolve`, then `batch::simulate_replicate`): one
//!   replicate alone in the process with its peak resident memory (VmHWM), then replicates
//!   split into genealogy, tree sweep and placement + statistics.
//! - `rho`: genealogy cost against rho = 2 N r (L - 1) E\[R] at fixed N, and the fitted slope,
//!   for Hudson's ARG and for SMC'.
//! - `n_free`: the approximate engine's cost at N = 10^3 and 10^5 for one rho (flat), against
//!   the exact ARG engine (grows with N): the ratio exact / approx.
//! - `hybrid`: a recent bottleneck before a large N: the hybrid against the exact ARG engine.
//!
//! `cargo bench --bench approx_arg -- target|rho|n_free|hybrid` runs one section (all by
//! default).

use seedline::batch::{self, Keep, master_key, replicate_rng};
use seedline::engine::approx::ApproxModel;
use seedline::engine::approx_arg::{ApproxArgSimulator, ArgModel};
use seedline::engine::arg::{ArgConfig, ArgSimulator};
use seedline::engine::hybrid::HybridSimulator;
use seedline::engine::{Engine, EngineChoice, Scratch, resolve};
use seedline::scenario::Scenario;
use std::hint::black_box;
use std::time::Instant;

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "bench").unwrap()
}

fn peak_rss_mib() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|kb| kb.parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// CPU time of the calling thread in seconds (the target section runs on one thread): on a
/// shared, loaded machine wall time includes waiting for a core, CPU time does not.
fn cpu_seconds() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next().and_then(|ns| ns.parse::<f64>().ok()))
        .map_or(f64::NAN, |ns| ns * 1e-9)
}

fn median(mut xs: Vec<f64>) -> f64 {
    xs.sort_by(f64::total_cmp);
    xs[xs.len() / 2]
}

fn target() {
    let yaml = "seed: 3\ndemes: [{name: a, size: 100000, dormancy: {law: geometric, mean: 3}}]\n\
                samples: [{deme: a, count: 50}]\nmutation: {rate: 1.0e-9, sites: 10000000}\n\
                recombination: {rate: 1.0e-8}\n";
    let s = scenario(yaml);
    let decision = resolve(EngineChoice::Auto, &s).unwrap();
    println!("target: auto picks {:?}: {}", decision.kind, decision.reason);
    let model = ApproxModel::new(&s).unwrap();
    let config = *s.recombination().unwrap();
    let key = master_key(s.seed());
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    // First, alone in the process: one replicate end to end, and the peak memory it needed.
    let (t0, c0) = (Instant::now(), cpu_seconds());
    let engine = Engine::new(&s, EngineChoice::Auto).unwrap();
    let run = batch::simulate_replicate(&engine, &mut Scratch::default(), &key, 0, Keep::default(), &labels);
    println!(
        "replicate 0 end to end: {:.2} s wall, {:.2} s CPU, {} segregating sites; peak resident memory {:.0} MiB",
        t0.elapsed().as_secs_f64(),
        cpu_seconds() - c0,
        run.as_ref().map_or(0, |o| o[0].stats.as_ref().map_or(0, |x| x.segregating_sites)),
        peak_rss_mib()
    );
    println!(
        "{:>4} {:>10} {:>10} {:>12} {:>10} {:>10} {:>10} {:>12} {:>10} {:>9} {:>9}",
        "rep", "genealogy", "sweep", "place+stats", "total", "total wall", "events", "edge recs", "trees", "bkpts", "S"
    );
    let mut sim = ApproxArgSimulator::new();
    for rep in 1..4 {
        // CPU seconds of each part (wall time on a shared machine includes waiting for a core).
        let c0 = cpu_seconds();
        let records = sim.simulate(&model, &config, &mut replicate_rng(&key, rep));
        let t_gen = cpu_seconds() - c0;
        let c1 = cpu_seconds();
        let mut trees = 0;
        records.for_each_tree(|_, _| trees += 1);
        let t_sweep = cpu_seconds() - c1;
        let (steps, recs) = (records.steps(), records.n_edge_records());
        drop(records);
        let (t2, c2) = (Instant::now(), cpu_seconds());
        let run = batch::simulate_replicate(&engine, &mut Scratch::default(), &key, rep, Keep::default(), &labels);
        let out = match run {
            Ok(mut o) => o.remove(0),
            Err(e) => {
                println!("{rep:>4} {t_gen:>9.2}s {t_sweep:>9.2}s  replicate refused: {e}");
                continue;
            }
        };
        let wall = t2.elapsed().as_secs_f64();
        let t_total = cpu_seconds() - c2;
        let seg = out.stats.as_ref().map_or(0, |x| x.segregating_sites);
        println!(
            "{rep:>4} {t_gen:>9.2}s {t_sweep:>9.2}s {:>11.2}s {t_total:>9.2}s {wall:>9.2}s {steps:>10} {recs:>12} {trees:>10} {:>9} {seg:>9}",
            t_total - t_gen - t_sweep,
            out.breakpoints.unwrap(),
        );
    }
}

fn rho() {
    // One deme, N = 10^4, n = 20, geometric mean 2 (E[R] = 2): rho = 2 N r (L - 1) E[R].
    let s = scenario(
        "demes: [{name: a, size: 10000, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 20}]\n",
    );
    let model = ApproxModel::new(&s).unwrap();
    let sites = 1_000_001u64;
    let key = master_key(5);
    let mut sim = ApproxArgSimulator::new();
    for process in [ArgModel::Hudson, ArgModel::SmcPrime] {
        println!("\n{process:?}");
        println!("{:>8} {:>14} {:>12} {:>12} {:>12}", "rho", "ms/replicate", "events", "edge recs", "breakpoints");
        let (mut xs, mut ys) = (Vec::new(), Vec::new());
        for rho in [100.0, 1000.0, 10000.0] {
            let r = rho / (2.0 * 10000.0 * 2.0 * (sites - 1) as f64);
            let config = ArgConfig::new(sites, r).unwrap();
            let reps = (20_000.0 / rho).max(2.0) as u64;
            let mut times = Vec::new();
            let (mut events, mut recs, mut bps) = (0u64, 0usize, 0usize);
            for round in 0..5 {
                let t0 = Instant::now();
                for rep in 0..reps {
                    let rec = sim.simulate_with(&model, &config, process, &mut replicate_rng(&key, rep));
                    if round == 0 {
                        events += rec.steps();
                        recs += rec.n_edge_records();
                        bps += rec.breakpoints();
                    }
                    black_box(&rec);
                }
                times.push(t0.elapsed().as_secs_f64() / reps as f64);
            }
            let t = median(times);
            let per = |x: f64| x / reps as f64;
            println!(
                "{rho:>8} {:>14.3} {:>12.0} {:>12.0} {:>12.0}",
                t * 1e3,
                per(events as f64),
                per(recs as f64),
                per(bps as f64)
            );
            xs.push(f64::ln(rho));
            ys.push(t.ln());
        }
        let k = xs.len() as f64;
        let (mx, my) = (xs.iter().sum::<f64>() / k, ys.iter().sum::<f64>() / k);
        let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - mx) * (y - my)).sum();
        let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
        println!("{process:?}: fitted slope of log cost vs log rho (genealogy only): {:.3}", sxy / sxx);
    }
}

fn hybrid() {
    // A bottleneck of N = 60 for 100 generations, then N = 20000; n = 10; rho = 20 on the
    // N = 20000 clock (no dormancy). Auto picks the hybrid (switch at generation 100); the
    // exact ARG engine walks every generation back to the MRCA (about 4 N).
    let sites = 100_001u64;
    let r = 20.0 / (2.0 * 20000.0 * (sites - 1) as f64);
    let yaml = format!(
        "demes: [{{name: a, size: [{{generations_ago: 0, size: 60}}, {{generations_ago: 100, size: 20000}}]}}]\n\
         samples: [{{deme: a, count: 10}}]\nmutation: {{rate: 0, sites: {sites}}}\nrecombination: {{rate: {r:e}}}\n"
    );
    let s = scenario(&yaml);
    let decision = resolve(EngineChoice::Auto, &s).unwrap();
    println!("\nhybrid: auto picks {:?} (switch {:?}): {}", decision.kind, decision.switch, decision.reason);
    let model = ApproxModel::new(&s).unwrap();
    let config = *s.recombination().unwrap();
    let key = master_key(9);
    let (mut h, mut e) = (Vec::new(), Vec::new());
    let mut hsim = HybridSimulator::new();
    let mut esim = ArgSimulator::new();
    for _ in 0..3 {
        let t0 = Instant::now();
        for rep in 0..20 {
            black_box(hsim.simulate(&model, &config, decision.switch.unwrap_or(0), &mut replicate_rng(&key, rep)));
        }
        h.push(t0.elapsed().as_secs_f64() / 20.0);
        let t0 = Instant::now();
        for rep in 0..2 {
            black_box(esim.simulate(&s, &config, &mut replicate_rng(&key, rep)));
        }
        e.push(t0.elapsed().as_secs_f64() / 2.0);
    }
    let (h, e) = (median(h), median(e));
    println!(
        "hybrid {:.2} ms/replicate, exact {:.1} ms/replicate: ratio exact / hybrid {:.0}",
        h * 1e3,
        e * 1e3,
        e / h
    );
}

fn n_free() {
    // rho = 2 N r (L - 1) = 100 without dormancy, n = 10, L = 10^5 + 1: r scales as 1/N.
    println!("\n{:>8} {:>16} {:>16} {:>10}", "N", "approx ms/rep", "exact ms/rep", "ratio");
    let sites = 100_001u64;
    for n_pop in [1000u64, 10_000, 100_000] {
        let s = scenario(&format!("demes: [{{name: a, size: {n_pop}}}]\nsamples: [{{deme: a, count: 10}}]\n"));
        let model = ApproxModel::new(&s).unwrap();
        let config = ArgConfig::new(sites, 100.0 / (2.0 * n_pop as f64 * (sites - 1) as f64)).unwrap();
        let key = master_key(8);
        let (mut a, mut e) = (Vec::new(), Vec::new());
        let exact_reps = if n_pop >= 100_000 { 1 } else { 4 };
        let mut asim = ApproxArgSimulator::new();
        let mut esim = ArgSimulator::new();
        for _ in 0..3 {
            let t0 = Instant::now();
            for rep in 0..20 {
                black_box(asim.simulate(&model, &config, &mut replicate_rng(&key, rep)));
            }
            a.push(t0.elapsed().as_secs_f64() / 20.0);
            let t0 = Instant::now();
            for rep in 0..exact_reps {
                black_box(esim.simulate(&s, &config, &mut replicate_rng(&key, rep)));
            }
            e.push(t0.elapsed().as_secs_f64() / exact_reps as f64);
        }
        let (a, e) = (median(a), median(e));
        println!("{n_pop:>8} {:>16.3} {:>16.1} {:>10.0}", a * 1e3, e * 1e3, e / a);
    }
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).filter(|a| !a.starts_with('-')).collect();
    let all = args.is_empty();
    let want = |s: &str| all || args.iter().any(|a| a == s);
    if want("rho") {
        rho();
    }
    if want("n_free") {
        n_free();
    }
    if want("hybrid") {
        hybrid();
    }
    if want("target") {
        target();
    }
}
