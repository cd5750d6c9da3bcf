//! The engine against a naive forward-time reference: an independent implementation of the
//! same model that labels every individual of a small population, draws the whole pedigree
//! (each individual's parent deme, look-back and parent index) for a bounded number of
//! generations, then traces the sample back through it. The two must agree in distribution.

use rand::{Rng, RngExt, SeedableRng, rngs::ChaCha8Rng};
use seedline::batch::BatchConfig;
use seedline::dormancy::{Dormancy, LookBack};
use seedline::engine::Engine;
use seedline::scenario::Scenario;
use statrs::distribution::{ChiSquared, ContinuousCDF};
use std::collections::HashMap;

const YAML: &str = "
horizon: 60
demes:
  - {name: a, size: 4, dormancy: {law: uniform, max: 3}}
  - {name: b, size: 3, dormancy: {law: table, weights: [0.6, 0, 0.4]}}
migration:
  - {from: a, to: b, rate: 0.2}
  - {from: b, to: a, rate: 0.3}
samples:
  - {deme: a, count: 2}
  - {deme: b, count: 1}
  - {deme: b, count: 1, generations_ago: 2}
";

/// Outcome of one replicate: (TMRCA or None for a forest, total branch length).
type Outcome = (Option<u64>, u64);

/// Draws the full pedigree over generations 0..=horizon, then traces the samples back.
fn naive_replicate(s: &Scenario, rng: &mut impl Rng) -> Outcome {
    let horizon = s.horizon();
    let demes = s.demes();
    // parent[(deme, t, i)] = Some((deme', t', i')) or None beyond the horizon.
    type Individual = (usize, u64, u64);
    let mut parent: HashMap<Individual, Option<Individual>> = HashMap::new();
    for t in 0..=horizon {
        for (d, deme) in demes.iter().enumerate() {
            let n = deme.size().at(t);
            for i in 0..n {
                let r = deme.dormancy().sample(rng);
                let row = &s.migration().matrix_at(t)[d];
                let u: f64 = rng.random();
                let mut acc = 0.0;
                let mut e = d;
                for (k, p) in row.iter().enumerate() {
                    acc += p;
                    if u < acc {
                        e = k;
                        break;
                    }
                }
                let pt = t + r;
                let p = (pt <= horizon).then(|| (e, pt, rng.random_range(0..demes[e].size().at(pt))));
                parent.insert((d, t, i), p);
            }
        }
    }
    // Samples of one (deme, time) are the distinct individuals 0, 1, ...
    let mut next_index: HashMap<(usize, u64), u64> = HashMap::new();
    let mut lineages: Vec<(usize, u64, u64)> = Vec::new();
    for x in s.samples() {
        let k = next_index.entry((x.deme, x.time)).or_insert(0);
        lineages.push((x.deme, x.time, *k));
        *k += 1;
    }
    // Walk every sample's ancestral line; the union of visited links is the genealogy.
    let mut visited: HashMap<(usize, u64, u64), u32> = HashMap::new();
    let mut length = 0;
    let mut roots_top = Vec::new();
    for &start in &lineages {
        let mut cur = start;
        loop {
            let c = visited.entry(cur).or_insert(0);
            *c += 1;
            if *c > 1 {
                break; // the rest of this line is already counted
            }
            match parent[&cur] {
                Some(p) => {
                    length += p.1 - cur.1;
                    cur = p;
                }
                None => {
                    roots_top.push(cur);
                    break;
                }
            }
        }
    }
    // The MRCA is the youngest individual on every sample's line; lengths above it do not count.
    let lines: Vec<Vec<(usize, u64, u64)>> = lineages
        .iter()
        .map(|&st| {
            let mut v = vec![st];
            while let Some(p) = parent[v.last().unwrap()] {
                v.push(p);
            }
            v
        })
        .collect();
    let common = lines[0].iter().find(|x| lines[1..].iter().all(|l| l.contains(x)));
    match common {
        Some(&m) => {
            // Remove the part of the line above the MRCA, walked once.
            let mut cur = m;
            while let Some(p) = parent[&cur] {
                length -= p.1 - cur.1;
                cur = p;
            }
            (Some(m.1), length)
        }
        None => {
            // Forest: lengths count up to each tree's top node, where lines merge for the last
            // time; links above a tree's last merge (its stem to the horizon) are excluded.
            (None, forest_length(&lines))
        }
    }
}

/// Total length of a forest: the links below the top node of each tree, the node where the
/// tree's lines have all joined (above it a lone stem runs on to the horizon, not counted).
fn forest_length(lines: &[Vec<(usize, u64, u64)>]) -> u64 {
    let through = |x: &(usize, u64, u64)| -> Vec<usize> {
        lines.iter().enumerate().filter(|(_, l)| l.contains(x)).map(|(j, _)| j).collect()
    };
    let mut total = 0;
    let mut counted: std::collections::HashSet<(usize, u64, u64)> = Default::default();
    for line in lines {
        let tree = through(line.last().unwrap());
        let top = line.iter().position(|x| through(x) == tree).unwrap();
        for w in line[..=top].windows(2) {
            if counted.insert(w[0]) {
                total += w[1].1 - w[0].1;
            }
        }
    }
    total
}

fn chi_square_two_sample(a: &[u64], b: &[u64], classes: &[u64]) -> f64 {
    // Classes: [classes[k], classes[k+1]), last open. Source: standard two-sample chi-square
    // homogeneity test (e.g. Press et al., Numerical Recipes, §14.3 "chstwo").
    let bin = |x: u64| classes.iter().rposition(|&c| x >= c).unwrap();
    let k = classes.len();
    let (mut ca, mut cb) = (vec![0.0; k], vec![0.0; k]);
    a.iter().for_each(|&x| ca[bin(x)] += 1.0);
    b.iter().for_each(|&x| cb[bin(x)] += 1.0);
    let (na, nb) = (a.len() as f64, b.len() as f64);
    let (ra, rb) = ((nb / na).sqrt(), (na / nb).sqrt());
    let mut stat = 0.0;
    let mut df = 0.0;
    for i in 0..k {
        if ca[i] + cb[i] > 0.0 {
            stat += (ra * ca[i] - rb * cb[i]).powi(2) / (ca[i] + cb[i]);
            df += 1.0;
        }
    }
    1.0 - ChiSquared::new(df - 1.0).unwrap().cdf(stat)
}

#[test]
fn engine_agrees_with_a_forward_pedigree_in_distribution() {
    let s = Scenario::from_yaml_str(YAML, "forward").unwrap();
    assert!(matches!(s.demes()[1].dormancy(), Dormancy::Table(_)));
    let reps = 3000u64;
    let mut rng = ChaCha8Rng::seed_from_u64(2024);
    let naive: Vec<Outcome> = (0..reps).map(|_| naive_replicate(&s, &mut rng)).collect();
    let idx: Vec<u64> = (0..reps).collect();
    let mut fast: Vec<Outcome> = Vec::new();
    seedline::batch::run(
        &s,
        &idx,
        BatchConfig::default(),
        |sim, sc, _, r| {
            let g = Engine::exact(sc).simulate_tree(sim, r);
            (g.tmrca(), g.total_length())
        },
        |_, v| {
            fast.push(v);
            Ok(())
        },
    )
    .unwrap();
    // Encode a forest as TMRCA = horizon + 1 so that its frequency is compared too.
    let t = |v: &[Outcome]| v.iter().map(|o| o.0.unwrap_or(61)).collect::<Vec<_>>();
    let l = |v: &[Outcome]| v.iter().map(|o| o.1).collect::<Vec<_>>();
    let p_t = chi_square_two_sample(&t(&naive), &t(&fast), &[0, 4, 6, 8, 10, 12, 14, 17, 20, 25, 30, 40, 61]);
    let p_l = chi_square_two_sample(&l(&naive), &l(&fast), &[0, 15, 20, 25, 30, 35, 40, 50, 60, 75, 100]);
    // Level 0.001 per statistic: a false alarm once in a thousand seeds.
    assert!(p_t > 0.001, "TMRCA distributions differ: p = {p_t}");
    assert!(p_l > 0.001, "total-length distributions differ: p = {p_l}");
    let mean = |v: Vec<u64>| v.iter().sum::<u64>() as f64 / v.len() as f64;
    eprintln!("mean TMRCA naive {} fast {}", mean(t(&naive)), mean(t(&fast)));
}
