"""Values from the module against published results (the module adds no numbers of its own,
so these check the library through the conversion: arrays, column names, SFS layout)."""

import numpy as np

import seedline

# Haploid Wright-Fisher without dormancy: N = 100, n = 10 sampled sequences.
N, n = 100, 10
RATE, SITES = 1.0e-5, 2000
WF = f"""\
name: plain Wright-Fisher
seed: 2024
replicates: 3000
demes:
  - {{ name: plain, size: {N} }}
samples:
  - {{ deme: plain, count: {n} }}
mutation: {{ rate: {RATE}, sites: {SITES} }}
"""

a_n = sum(1 / i for i in range(1, n))
b_n = sum(1 / i**2 for i in range(1, n))
# theta = 2 N mu L for a haploid population of N (coalescent time unit N generations).
theta = 2 * N * RATE * SITES


def run_exact():
    return seedline.simulate(seedline.Scenario.from_str(WF, "wf.yaml"), engine="exact", threads=2)


def within(values, expected, var, k=4.0):
    """|mean - expected| within k standard errors (sd from the theory's variance)."""
    values = np.asarray(values, dtype=float)
    se = np.sqrt(var / len(values))
    assert abs(values.mean() - expected) < k * se, (values.mean(), expected, se)


def test_tree_shape_against_the_exact_wright_fisher_chain():
    run = run_exact()
    assert run.engine == "exact"
    # Source: exact discrete Wright-Fisher chain k -> j with P = S2(k,j) N!/((N-j)! N^k),
    # table "Exact discrete Wright-Fisher values" in the project's theory reference
    # (N = 100, n = 10): E[T_MRCA] = 179.521098, E[L] = 566.535976 generations.
    # Variances from Kingman (Tavare 1984; Var T_MRCA = 1.1581418493 N^2, Var L = 4 b_n N^2).
    within(run.statistics["tmrca"], 179.521098, 1.1581418493 * N**2)
    within(run.statistics["total_length"], 566.535976, 4 * b_n * N**2)


def test_segregating_sites_against_watterson():
    run = run_exact()
    # Source: Watterson (1975), Theor. Popul. Biol. 7:256, E[S] = theta a_n and
    # Var[S] = theta a_n + theta^2 b_n.
    within(run.statistics["segregating_sites"], theta * a_n, theta * a_n + theta**2 * b_n)
    # theta_W = S / a_n is unbiased for theta (Watterson 1975).
    within(run.statistics["theta_w"], theta, (theta * a_n + theta**2 * b_n) / a_n**2)


def test_pi_against_tajima():
    run = run_exact()
    # Source: Tajima (1983), Genetics 105:437, E[pi] = theta and
    # Var[pi] = b1 theta + b2 theta^2, b1 = (n+1)/(3(n-1)), b2 = 2(n^2+n+3)/(9n(n-1)).
    b1 = (n + 1) / (3 * (n - 1))
    b2 = 2 * (n * n + n + 3) / (9 * n * (n - 1))
    within(run.statistics["pi"], theta, b1 * theta + b2 * theta**2)


def test_site_frequency_spectrum_against_fu():
    run = run_exact()
    assert run.sfs.shape == (3000, n - 1)
    # The SFS holds every segregating site once (infinite sites).
    assert np.array_equal(run.sfs.sum(axis=1), run.statistics["segregating_sites"].astype(np.int64))
    # Source: Fu (1995), Theor. Popul. Biol. 48:172, E[xi_i] = theta / i; the standard error
    # here is estimated from the replicates themselves.
    for i in range(1, n):
        col = run.sfs[:, i - 1]
        se = col.std(ddof=1) / np.sqrt(len(col))
        assert abs(col.mean() - theta / i) < 4.5 * se, (i, col.mean(), theta / i)


def test_predict_gives_the_same_expectations():
    p = seedline.predict(seedline.Scenario.from_str(WF, "wf.yaml"))
    # Source: Watterson (1975): the prediction of E[S] is theta a_n (within the exact
    # discrete correction of about 0.2% at N = 100).
    s = p["segregating_sites_mean"]
    value = s["value"] if isinstance(s, dict) else s
    assert abs(value - theta * a_n) / (theta * a_n) < 0.005, value


def test_pi_under_geometric_dormancy_against_the_seed_bank_time_change():
    # Source: Kaj, Krone & Lascoux (2001), J. Appl. Probab. 38:285 (pairs meet at rate
    # 1/E[R]^2); exact for every N by the renewal argument of the project's theory reference
    # (section 3.3): with mutations in every generation, dormant ones included,
    # E[pi] = 2 N mu L E[R]^2 (support {1, 2, ...}, gcd 1). The standard error is estimated
    # from the replicates.
    for mean in [1.0, 2.0, 4.0]:
        sc = seedline.Scenario.from_dict(
            {
                "seed": 3,
                "replicates": 400,
                "demes": [{"name": "pond", "size": 500, "dormancy": {"law": "geometric", "mean": mean}}],
                "samples": [{"deme": "pond", "count": 10}],
                "mutation": {"rate": 1e-6, "sites": 10000},
            }
        )
        pi = seedline.simulate(sc, engine="exact", threads=2).statistics["pi"]
        expected = 2 * 500 * 1e-6 * 10000 * mean**2
        se = pi.std(ddof=1) / np.sqrt(len(pi))
        assert abs(pi.mean() - expected) < 4 * se, (mean, pi.mean(), expected, se)
