//! Batch-level benchmarks: exact engine against a forward-time pedigree simulation,
//! scaling with N and n (fitted slopes), threads, null throughput, and peak memory.
//!
//! Run `cargo bench --bench batch` (all sections; a few minutes) or pass a section name:
//! `forward`, `scaling`, `threads`, `null`, `loci`, `memory`, `task`. Figures go to
//! docs/performance.md. `memory` reads the process's peak RSS: run it alone.

use rand::{RngExt, SeedableRng, rngs::ChaCha8Rng};
use seedline::batch::{BatchConfig, Keep, master_key, replicate_rng, simulate_replicate};
use seedline::dormancy::LookBack;
use seedline::engine::{Engine, EngineChoice, Scratch, Simulator};
use seedline::scenario::Scenario;
use std::hint::black_box;
use std::time::Instant;

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "bench").unwrap()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Seconds per replicate of the exact engine (median of rounds of at least 0.3 s).
fn engine_seconds(s: &Scenario, rounds: usize) -> (f64, f64) {
    let key = master_key(5);
    let mut sim = Simulator::new();
    let mut rep = 0;
    let mut per = Vec::new();
    let mut tmrca = 0.0;
    let mut count = 0.0;
    for _ in 0..rounds {
        let t0 = Instant::now();
        let mut k = 0;
        while t0.elapsed().as_secs_f64() < 0.3 || k == 0 {
            rep += 1;
            let g = sim.simulate(s, &mut replicate_rng(&key, rep));
            tmrca += g.tmrca().unwrap_or(0) as f64;
            count += 1.0;
            k += 1;
        }
        per.push(t0.elapsed().as_secs_f64() / k as f64);
    }
    (median(per), tmrca / count)
}

/// The naive method: draw every individual's parent generation by generation, forward in
/// the sense of building the whole pedigree, then trace the sample back. Its cost is at
/// least (generations simulated) x N parent draws; timed here per generation.
fn forward_seconds_per_generation(n_pop: usize, law: &seedline::dormancy::Dormancy) -> f64 {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let gens = 200;
    let mut parents: Vec<(u32, u32)> = vec![(0, 0); n_pop * gens];
    let mut per = Vec::new();
    for _ in 0..5 {
        let t0 = Instant::now();
        for g in 0..gens {
            for i in 0..n_pop {
                let r = law.sample(&mut rng) as u32;
                parents[g * n_pop + i] = (r, rng.random_range(0..n_pop as u32));
            }
        }
        black_box(&parents);
        per.push(t0.elapsed().as_secs_f64() / gens as f64);
    }
    median(per)
}

fn forward() {
    let s = scenario(
        "demes: [{name: a, size: 2000, dormancy: {law: geometric, mean: 3}}]\nsamples: [{deme: a, count: 20}]\n",
    );
    let (engine, tmrca) = engine_seconds(&s, 5);
    let per_gen = forward_seconds_per_generation(2000, s.demes()[0].dormancy());
    // The pedigree must reach back at least to the MRCA: cost >= E[T_MRCA] generations.
    let forward = per_gen * tmrca;
    println!(
        "forward: N = 2000, geometric mean 3, n = 20: exact engine {:.3e} s/replicate; forward pedigree {:.3e} s/generation x E[T_MRCA] = {:.0} generations = {:.3e} s (a lower bound); ratio >= {:.0}",
        engine,
        per_gen,
        tmrca,
        forward,
        forward / engine
    );
}

fn slope(xs: &[f64], ys: &[f64]) -> f64 {
    let lx: Vec<f64> = xs.iter().map(|x| x.ln()).collect();
    let ly: Vec<f64> = ys.iter().map(|y| y.ln()).collect();
    let n = lx.len() as f64;
    let (mx, my) = (lx.iter().sum::<f64>() / n, ly.iter().sum::<f64>() / n);
    let sxy: f64 = lx.iter().zip(&ly).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = lx.iter().map(|x| (x - mx).powi(2)).sum();
    sxy / sxx
}

fn scaling() {
    let sizes = [1e3, 1e4, 1e5, 1e6];
    let mut t = Vec::new();
    for &n in &sizes {
        let s = scenario(&format!(
            "demes: [{{name: a, size: {n}, dormancy: {{law: geometric, mean: 2}}}}]\nsamples: [{{deme: a, count: 10}}]\n"
        ));
        let (sec, _) = engine_seconds(&s, 3);
        println!("scaling: N = {n:.0e}, n = 10: {sec:.3e} s/replicate");
        t.push(sec);
    }
    println!("scaling: fitted slope of log cost on log N: {:.2} (expected 1: steps ~ 2 N E[R] a_n)", slope(&sizes, &t));
    let ns = [10.0, 100.0, 1000.0, 10000.0];
    let mut t = Vec::new();
    for &k in &ns {
        let s = scenario(&format!(
            "demes: [{{name: a, size: 100000, dormancy: {{law: geometric, mean: 2}}}}]\nsamples: [{{deme: a, count: {k}}}]\n"
        ));
        let (sec, _) = engine_seconds(&s, 3);
        println!("scaling: N = 1e5, n = {k}: {sec:.3e} s/replicate");
        t.push(sec);
    }
    println!(
        "scaling: fitted slope of log cost on log n: {:.2} (steps ~ a_n ~ ln n, plus log n per heap operation)",
        slope(&ns, &t)
    );
}

fn batch_seconds(s: &Scenario, reps: u64, threads: usize) -> f64 {
    let idx: Vec<u64> = (0..reps).collect();
    let key = master_key(s.seed());
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let t0 = Instant::now();
    seedline::batch::run(
        s,
        &idx,
        BatchConfig { threads, chunk: 256 },
        |sim, sc, rep, _| simulate_replicate(&Engine::exact(sc), sim, &key, rep, Keep::default(), &labels).unwrap(),
        |_, r| {
            black_box(r);
            Ok(())
        },
    )
    .unwrap();
    t0.elapsed().as_secs_f64()
}

fn threads_and_null() {
    let s = scenario(
        "demes: [{name: a, size: 1000, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 50}]\nmutation: {rate: 1.0e-7, sites: 100000}\n",
    );
    let reps = 2000;
    let (mut one, mut two) = (Vec::new(), Vec::new());
    for _ in 0..3 {
        one.push(batch_seconds(&s, reps, 1));
        two.push(batch_seconds(&s, reps, 2));
    }
    let (a, b) = (median(one), median(two));
    println!(
        "threads/null: n = 50, N = 1000, geometric mean 2, with mutations and statistics: 1 thread {:.1} replicates/s, 2 threads {:.1} replicates/s, ratio {:.2}",
        reps as f64 / a,
        reps as f64 / b,
        a / b
    );
}

/// Cost of 1000 unlinked loci of n = 50 against one locus (issue: many loci per replicate).
fn loci() {
    let base = "demes: [{name: a, size: 1000, dormancy: {law: geometric, mean: 2}}]\nsamples: [{deme: a, count: 50}]\nmutation: {rate: 1.0e-7, sites: 10000}\n";
    let one = scenario(base);
    let many = scenario(&format!("loci: 1000\n{base}"));
    let key = master_key(1);
    let labels: Vec<String> = one.samples().iter().map(|x| x.label.clone()).collect();
    let mut sim = seedline::engine::Scratch::default();
    let t0 = Instant::now();
    for rep in 0..200 {
        black_box(simulate_replicate(&Engine::exact(&one), &mut sim, &key, rep, Keep::default(), &labels).unwrap());
    }
    let single = t0.elapsed().as_secs_f64() / 200.0;
    let t1 = Instant::now();
    for rep in 0..3 {
        black_box(simulate_replicate(&Engine::exact(&many), &mut sim, &key, rep, Keep::default(), &labels).unwrap());
    }
    let thousand = t1.elapsed().as_secs_f64() / 3.0;
    println!(
        "loci: n = 50, N = 1000, geometric mean 2: one locus {single:.3e} s, 1000 loci {thousand:.3e} s per replicate; ratio {:.0} (both threads used for the loci)",
        thousand / single
    );
}

fn peak_rss_kib() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines().find(|l| l.starts_with("VmHWM:"))?.split_whitespace().nth(1)?.parse().ok()
}

fn memory() {
    let before = peak_rss_kib();
    let mib = |k: Option<u64>| k.map_or("?".into(), |k| (k / 1024).to_string());
    let s = scenario("demes: [{name: a, size: 1000000}]\nsamples: [{deme: a, count: 100000}]\n");
    let t0 = Instant::now();
    let g = Simulator::new().simulate(&s, &mut replicate_rng(&master_key(1), 0));
    let after = peak_rss_kib();
    println!(
        "memory: n = 1e5, N = 1e6, no dormancy: {} nodes, {:.1} s, peak RSS {} MiB (before the run {} MiB)",
        g.graph().node_count(),
        t0.elapsed().as_secs_f64(),
        mib(after),
        mib(before)
    );
    drop(g);
    // With mutations (theta = 2 N mu L = 10), through the whole replicate: genealogy,
    // placement (carriers from a depth-first layout, O(n) per tree) and statistics.
    let s = scenario(
        "demes: [{name: a, size: 1000000}]\nsamples: [{deme: a, count: 100000}]\nmutation: {rate: 5.0e-9, sites: 1000}\n",
    );
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let t0 = Instant::now();
    let loci =
        simulate_replicate(&Engine::exact(&s), &mut Scratch::default(), &master_key(1), 0, Keep::default(), &labels)
            .unwrap();
    println!(
        "memory: the same with mutations (theta = 10, S = {}) and statistics: {:.1} s, peak RSS {} MiB",
        loci[0].stats.as_ref().map_or(0, |x| x.segregating_sites),
        t0.elapsed().as_secs_f64(),
        mib(peak_rss_kib())
    );
}

/// CPU seconds (user + system) of this process so far, all threads (Linux: /proc/self/stat,
/// fields 14 and 15 in clock ticks of 1/100 s).
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after = stat.rsplit_once(')').map_or("", |x| x.1);
    let f: Vec<f64> = after.split_whitespace().filter_map(|x| x.parse().ok()).collect();
    // After the command name: state (not a number), then ppid ... utime is field 14 of the
    // line, the 11th number here, and stime the 12th.
    f.get(10).zip(f.get(11)).map_or(f64::NAN, |(u, s)| (u + s) / 100.0)
}

/// The user's task of issue 14: a null of 10 000 replicates of 100 loci, n = 100, N = 1e5,
/// geometric dormancy of mean 5, through `null` (`null::run`) with `--engine auto`, on 2
/// threads; against the exact engine on the same loci (few of them: ~0.5 s each). Cost per
/// locus of both, and the whole task extrapolated from each.
fn task() {
    let yaml = |loci: u32| {
        format!(
            "seed: 1\nloci: {loci}\ndemes: [{{name: pond, size: 100000, dormancy: {{law: geometric, mean: 5}}}}]\n\
             samples: [{{deme: pond, count: 100}}]\nmutation: {{rate: 1.0e-9, sites: 1000}}\n"
        )
    };
    let run = |s: &Scenario, reps: u64, engine: EngineChoice| {
        let dir = std::env::temp_dir().join(format!("seedline-bench-task-{}-{engine}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let cfg = seedline::null::NullConfig {
            replicates: reps,
            shard: (0, 1),
            chunk: 1000,
            count: seedline::mutation::Count::Poisson,
            max_new_chunks: None,
            engine,
        };
        let (w0, c0) = (Instant::now(), cpu_seconds());
        let r = seedline::null::run(s, cfg, None, BatchConfig { threads: 2, chunk: 256 }, &dir, &|_| {}).unwrap();
        let (wall, cpu) = (w0.elapsed().as_secs_f64(), cpu_seconds() - c0);
        std::fs::remove_dir_all(&dir).unwrap();
        (wall, cpu, r.engine.reason)
    };
    let many = scenario(&yaml(100));
    let few = scenario(&yaml(2));
    let (reps_auto, reps_exact) = (500u64, 2u64);
    let (aw, ac, why) = run(&many, reps_auto, EngineChoice::Auto);
    let (ew, ec, _) = run(&few, reps_exact, EngineChoice::Exact);
    let loci_auto = (reps_auto * 100) as f64;
    let loci_exact = (reps_exact * 2) as f64;
    let total = 1e6;
    println!("task: null, 100 loci x n = 100, N = 1e5, geometric mean 5, 2 threads; auto: {why}");
    println!(
        "task: auto {:.2} us wall, {:.2} us cpu per locus; exact {:.0} ms wall, {:.0} ms cpu per locus; exact/auto per locus (cpu) {:.0}",
        aw / loci_auto * 1e6,
        ac / loci_auto * 1e6,
        ew / loci_exact * 1e3,
        ec / loci_exact * 1e3,
        (ec / loci_exact) / (ac / loci_auto)
    );
    println!(
        "task: 10 000 x 100 loci extrapolated: auto {:.0} s wall ({:.0} s cpu, {:.0} s on 2 idle cores); exact {:.1} h wall ({:.1} h on 2 idle cores)",
        aw / loci_auto * total,
        ac / loci_auto * total,
        ac / loci_auto * total / 2.0,
        ew / loci_exact * total / 3600.0,
        ec / loci_exact * total / 3600.0 / 2.0
    );
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).filter(|a| !a.starts_with("--")).collect();
    let want = |s: &str| args.is_empty() || args.iter().any(|a| a == s);
    if want("forward") {
        forward();
    }
    if want("scaling") {
        scaling();
    }
    if want("threads") || want("null") {
        threads_and_null();
    }
    if want("loci") {
        loci();
    }
    if want("memory") {
        memory();
    }
    if want("task") {
        task();
    }
}
