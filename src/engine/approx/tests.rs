use super::*;
use crate::batch::{master_key, replicate_rng};
use crate::dormancy::{Dormancy, Geometric, Mixture};

fn scenario(yaml: &str) -> Scenario {
    Scenario::from_yaml_str(yaml, "test").unwrap()
}

#[test]
fn lookback_scale_of_a_geometric_law() {
    // P(R > k) = (1 - p)^k (geometric law on {1, 2, ...}): the smallest k with tail <= 1e-3 is
    // ceil(ln 1e-3 / ln(1 - p)); mean 5 gives ceil(30.96) = 31 (hand-computed).
    let law = Dormancy::Geometric(Geometric::new(5.0).unwrap());
    assert_eq!(lookback_scale(&law), 31.0);
    assert_eq!(lookback_scale(&Dormancy::None), 1.0);
}

#[test]
fn exponential_epoch_inverts_its_integrated_hazard() {
    // H(t0, t) = rate (e^{g (t - s)} - e^{g (t0 - s)}) / (g N_s) for N(u) = N_s e^{-g (u - s)}:
    // the returned time must consume exactly the Exp(1) value handed in, across the boundary.
    let s = scenario(
        "demes: [{name: a, size: [{generations_ago: 0, size: 1000, growth: 0.002}, {generations_ago: 300, size: 800}]}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let m = ApproxModel::new(&s).unwrap();
    let hazard = |t0: f64, t: f64| {
        let h1 = |a: f64, b: f64| ((0.002 * b).exp() - (0.002 * a).exp()) / (0.002 * 1000.0);
        if t <= 300.0 { h1(t0, t) } else { h1(t0, 300.0) + (t - 300.0) / 800.0 }
    };
    for (t0, e) in [(0.0, 0.1), (0.0, 2.0), (100.0, 0.05), (250.0, 1.5), (400.0, 0.3)] {
        let t = m.coal_time(0, t0, 1.0, e);
        let h = if t0 >= 300.0 { (t - t0) / 800.0 } else { hazard(t0, t) };
        assert!((h - e).abs() < 1e-9, "t0 {t0}, e {e}: t {t}, hazard {h}");
        assert!(t > t0);
    }
}

#[test]
fn shrinking_hazard_can_leave_lineages_apart() {
    // growth < 0: N grows going back, the total hazard ∫ du / N(u) = 1/(|g| N0) is finite.
    let s = scenario(
        "demes: [{name: a, size: [{generations_ago: 0, size: 1000, growth: -0.01}]}]\nsamples: [{deme: a, count: 2}]\n",
    );
    let m = ApproxModel::new(&s).unwrap();
    // Total hazard 1/(0.01 · 1000) = 0.1: an Exp(1) value above it never coalesces.
    assert!(m.coal_time(0, 0.0, 1.0, 0.2).is_infinite());
    let t = m.coal_time(0, 0.0, 1.0, 0.05);
    // Hand-inverted: 0.05 = (1 - e^{-0.01 t}) / 10 ⇒ t = -100 ln(0.5) = 69.3147.
    assert!((t - 69.31471805599453).abs() < 1e-9, "{t}");
}

#[test]
fn seedbank_form_rates_match_the_lookback_law() {
    // §5.3 form with N = 1000, c = K = 1: g = 1000, w = 1/999 (theory reference §5.3):
    // sleep = w (g - 1)/g = c/N = 0.001, wake = 1/g = cK/N = 0.001.
    let law = Dormancy::Mixture(
        Mixture::new(vec![(998.0, Dormancy::None), (1.0, Dormancy::Geometric(Geometric::new(1000.0).unwrap()))])
            .unwrap(),
    );
    let DemeModel::SeedBank { sleep, wake, c, k, dormant_seed } = DemeModel::of(&law, 1000.0).unwrap() else {
        panic!("not recognised")
    };
    assert!((sleep - 0.001).abs() < 1e-12 && (wake - 0.001).abs() < 1e-12);
    assert!((c - 1.0).abs() < 1e-9 && (k - 1.0).abs() < 1e-9);
    // E[R] = 1 + 1/K = 2; the long part's renewal weight w g / E[R] = (1000/999)/2.
    assert!((dormant_seed - 1000.0 / 999.0 / 2.0).abs() < 1e-12);
    // Short geometric dormancy in the same form is a weak seed bank (Kingman, E[R]^2).
    let short = Dormancy::Mixture(
        Mixture::new(vec![(1.0, Dormancy::None), (1.0, Dormancy::Geometric(Geometric::new(3.0).unwrap()))]).unwrap(),
    );
    assert!(matches!(DemeModel::of(&short, 1000.0).unwrap(), DemeModel::Kingman { mean, .. } if mean == 2.0));
}

#[test]
fn genealogy_invariants_and_jumps() {
    // Parents strictly older than children, one root, jumps in [1, length] and about length/E[R].
    let s = scenario(
        "demes: [{name: a, size: 300, dormancy: {law: geometric, mean: 4}}, {name: b, size: 300}]\nmigration: [{from: a, to: b, rate: 0.01}, {from: b, to: a, rate: 0.01}]\nsamples: [{deme: a, count: 6}, {deme: b, count: 6, generations_ago: 7}, {deme: a, count: 3, from: seedbank}]\n",
    );
    let m = ApproxModel::new(&s).unwrap();
    let key = master_key(2);
    let (mut jumps, mut len) = (0u64, 0u64);
    for r in 0..200 {
        let g = m.simulate(&mut replicate_rng(&key, r));
        assert!(g.is_tree());
        assert_eq!(g.n_merge_nodes(), 14);
        for e in g.graph().edge_indices() {
            let (p, c) = g.graph().edge_endpoints(e).unwrap();
            let w = g.graph()[e];
            assert!(g.graph()[p].time > g.graph()[c].time);
            assert!(w.jumps >= 1 && w.jumps <= w.length);
            jumps += w.jumps;
            len += w.length;
        }
        assert!(g.steps() >= 14);
    }
    // Mixed demes (E[R] = 4 and 1): the jump fraction lies strictly between 1/4 and 1.
    let f = jumps as f64 / len as f64;
    assert!(f > 0.25 && f < 1.0, "{f}");
}

#[test]
fn deterministic_given_the_stream() {
    let s =
        scenario("demes: [{name: a, size: 1000, dormancy: {law: uniform, max: 3}}]\nsamples: [{deme: a, count: 8}]\n");
    let key = master_key(9);
    let a = simulate_approx(&s, &mut replicate_rng(&key, 3)).unwrap();
    let b = simulate_approx(&s, &mut replicate_rng(&key, 3)).unwrap();
    assert_eq!(a.tmrca(), b.tmrca());
    assert_eq!(a.total_length(), b.total_length());
}

#[test]
fn horizon_leaves_a_forest() {
    let s = scenario("horizon: 50\ndemes: [{name: a, size: 100000}]\nsamples: [{deme: a, count: 4}]\n");
    let g = simulate_approx(&s, &mut replicate_rng(&master_key(1), 0)).unwrap();
    // E[T_4 first event] = N / 6 ≈ 16667 generations ≫ 50: almost surely no merge.
    assert_eq!(g.roots().len(), 4);
}
