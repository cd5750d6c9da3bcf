//! Value stability: a fixed seed gives exactly these results, one case per algorithm branch
//! (engines, dormancy samplers, mutation placement, statistics). A failing case means that
//! the random streams or the arithmetic of that branch changed: update its golden value only
//! deliberately, and say so in CHANGELOG.md (results published with the old version can no
//! longer be reproduced with the new one).
//!
//! Each case digests (FNV-1a, 64 bits) the Newick text of the trees of replicates 0..4 (every
//! local tree with recombination), the mutation positions and the haplotype bits, and the
//! statistic columns of `replicates.tsv`.

use seedline::batch::{Keep, master_key, simulate_replicate};
use seedline::engine::{Engine, EngineChoice, Scratch};
use seedline::scenario::Scenario;

/// FNV-1a over bytes (Fowler, Noll & Vo; public-domain hash, constants of the 64-bit variant).
fn fnv(hash: &mut u64, bytes: &[u8]) {
    for &b in bytes {
        *hash ^= u64::from(b);
        *hash = hash.wrapping_mul(0x0000_0100_0000_01b3);
    }
}

/// Digest of replicates 0..4 of the scenario through `simulate_replicate`, on the approximate
/// engine when `approx`, else on the exact one.
fn digest(yaml: &str, approx: bool) -> u64 {
    let s = Scenario::from_yaml_str(yaml, "value-stability").unwrap();
    let choice = if approx { EngineChoice::Approx } else { EngineChoice::Exact };
    let engine = Engine::new(&s, choice).unwrap();
    let key = master_key(s.seed());
    let labels: Vec<String> = s.samples().iter().map(|x| x.label.clone()).collect();
    let keep = Keep { trees: true, mutations: true, ld: false };
    let mut scratch = Scratch::default();
    let mut h = 0xcbf2_9ce4_8422_2325u64;
    for rep in 0..4 {
        let loci = simulate_replicate(&engine, &mut scratch, &key, rep, keep, &labels).unwrap();
        for l in &loci {
            fnv(&mut h, l.newick.as_deref().unwrap_or("").as_bytes());
            fnv(&mut h, &l.jumps.to_le_bytes());
            if let Some(m) = &l.mutations {
                for p in &m.positions {
                    fnv(&mut h, &p.to_le_bytes());
                }
                for site in 0..m.haplotypes.sites() {
                    for w in m.haplotypes.site_bits(site) {
                        fnv(&mut h, &w.to_le_bytes());
                    }
                }
            }
        }
        let row = seedline::report::replicate_values(rep, &loci, s.demes().len());
        let line: Vec<String> = row.iter().map(|x| seedline::report::tsv_value(*x)).collect();
        fnv(&mut h, line.join("\t").as_bytes());
    }
    h
}

/// Checks a digest, printing the new value so that a deliberate update is one copy.
fn check(name: &str, yaml: &str, approx: bool, golden: u64) {
    let got = digest(yaml, approx);
    assert_eq!(got, golden, "{name}: digest {got:#018x}, golden {golden:#018x} (see the module docs)");
}

const MUT: &str = "mutation: {rate: 2.0e-6, sites: 10000}\n";

#[test]
fn exact_engine_without_dormancy_skip_ahead() {
    let yaml = format!("seed: 3\ndemes: [{{name: a, size: 1000}}]\nsamples: [{{deme: a, count: 10}}]\n{MUT}");
    check("exact, no dormancy", &yaml, false, 0x98e442471b0e7d4f);
}

#[test]
fn exact_engine_geometric_dormancy() {
    let yaml = format!(
        "seed: 4\ndemes: [{{name: a, size: 300, dormancy: {{law: geometric, mean: 3}}}}]\n\
         samples: [{{deme: a, count: 8}}, {{deme: a, count: 2, from: seedbank}}]\n{MUT}"
    );
    check("exact, geometric", &yaml, false, 0xe2773cc566fd5cfb);
}

#[test]
fn exact_engine_pareto_uniform_table_and_migration() {
    let yaml = format!(
        "seed: 5\nhorizon: 1.0e7\ndemes:\n\
         - {{name: a, size: 200, dormancy: {{law: pareto, alpha: 1.4, max: 2000}}}}\n\
         - {{name: b, size: [{{generations_ago: 0, size: 100}}, {{generations_ago: 50, size: 400, growth: 0.01}}], dormancy: {{law: uniform, max: 4}}}}\n\
         - {{name: c, size: 150, dormancy: {{law: table, weights: [0.5, 0.0, 0.3, 0.2]}}}}\n\
         migration:\n\
         - {{from: a, to: b, rate: 0.01}}\n\
         - {{from: b, to: c, rate: 0.02}}\n\
         - {{from: c, to: a, rate: 0.01}}\n\
         samples: [{{deme: a, count: 4}}, {{deme: b, count: 3, generations_ago: 20}}, {{deme: c, count: 3, from: seedbank}}]\n{MUT}"
    );
    check("exact, pareto/uniform/table with migration", &yaml, false, 0xded77f923a6048c8);
}

#[test]
fn exact_engine_seed_bank_mixture_and_since_founding() {
    let yaml = format!(
        "seed: 6\ndemes:\n\
         - {{name: a, size: 100, dormancy: {{law: mixture, parts: [{{weight: 0.9, law: none}}, {{weight: 0.1, law: geometric, mean: 30}}]}}}}\n\
         - {{name: b, size: 50, dormancy: {{law: since_founding, founded: 400}}}}\n\
         migration: [{{from: b, to: a, rate: 0.05}}]\n\
         samples: [{{deme: a, count: 5}}, {{deme: b, count: 4}}]\n{MUT}"
    );
    check("exact, mixture and since_founding", &yaml, false, 0xf46130bb878ceabd);
}

#[test]
fn approximate_engine_plain_kingman_and_structured() {
    let plain = "seed: 7\ndemes: [{name: a, size: 20000, dormancy: {law: geometric, mean: 2}}]\n\
         samples: [{deme: a, count: 12}]\nmutation: {rate: 1.0e-8, sites: 10000}\n";
    check("approx, plain Kingman", plain, true, 0x8441a9e62c511998);
    let structured = "seed: 8\ndemes:\n\
         - {name: a, size: 5000, dormancy: {law: uniform, max: 3}}\n\
         - {name: b, size: [{generations_ago: 0, size: 3000}, {generations_ago: 2000, size: 9000}], dormancy: {law: mixture, parts: [{weight: 0.99, law: none}, {weight: 0.01, law: geometric, mean: 2000}]}}\n\
         migration: [{from: a, to: b, rate: 0.001}, {from: b, to: a, rate: 0.002}]\n\
         samples: [{deme: a, count: 5}, {deme: b, count: 4, generations_ago: 100}, {deme: a, count: 2, from: seedbank}]\n\
         mutation: {rate: 1.0e-8, sites: 10000}\n";
    check("approx, structured with a seed-bank deme", structured, true, 0x3b55ff54103f23f6);
}

#[test]
fn recombination_engine_with_mutations_and_loci() {
    let yaml = "seed: 9\nloci: 2\ndemes: [{name: a, size: 200, dormancy: {law: geometric, mean: 2}}]\n\
         samples: [{deme: a, count: 6}]\nmutation: {rate: 5.0e-6, sites: 2000}\nrecombination: {rate: 2.0e-5}\n";
    check("recombination, geometric", yaml, false, 0x730a4532e2968055);
    let none = "seed: 10\ndemes: [{name: a, size: 300}]\n\
         samples: [{deme: a, count: 5}]\nmutation: {rate: 5.0e-6, sites: 2000}\nrecombination: {rate: 2.0e-5}\n";
    check("recombination, no dormancy", none, false, 0xe2fe2c85f64e7a53);
}
