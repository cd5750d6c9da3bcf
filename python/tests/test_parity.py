"""The module gives the values of the seedline command, bit for bit: same scenario, same seed,
same replicates.tsv, sfs.tsv and trees.nwk (the architecture's rule: replicate i depends only
on the seed and i, for any number of threads)."""

import numpy as np
import pytest

import seedline
from conftest import read_tsv

LOCI_YAML = """\
name: three loci of a pond flea
seed: 3
replicates: 10
demes:
  - { name: pond, size: 300, dormancy: { law: geometric, mean: 2 } }
samples:
  - { deme: pond, count: 8 }
mutation: { rate: 2.0e-6, sites: 5000 }
loci: 3
"""


def as_float(cells):
    """TSV cells as the command meant them: empty cells are missing values (NaN)."""
    return np.array([float(c) if c != "" else np.nan for c in cells])


def assert_run_matches_files(run, out):
    columns = read_tsv(out / "replicates.tsv")
    assert list(columns) == run.columns == list(run.statistics)
    for name, cells in columns.items():
        # Exact equality: the file holds each f64 in its shortest round-trip form.
        assert np.array_equal(run.statistics[name], as_float(cells), equal_nan=True), name
    sfs_file = out / "sfs.tsv"
    if sfs_file.exists():
        sfs = read_tsv(sfs_file)
        expected = np.array([[int(c) for c in sfs[k]] for k in list(sfs)[1:]]).T
        assert run.sfs.dtype == np.int64
        assert np.array_equal(run.sfs, expected)
    else:
        assert run.sfs is None
    lines = (out / "trees.nwk").read_text().splitlines()
    ours = [line for i in range(run.replicates) for line in run.trees(i)]
    assert ours == lines


@pytest.mark.parametrize(
    "name, engine",
    [
        ("meadow-two-slopes", "auto"),  # the example: two demes, no mutation model
        ("no-dormancy-baseline", "auto"),  # mutation model; auto picks the approximate engine
        ("no-dormancy-baseline", "exact"),
        ("demo", "auto"),  # dormancy, migration, mutation model
        ("fog-grass-recombining", "auto"),  # recombination: local trees
    ],
)
def test_simulate_matches_the_command(root, cli, tmp_path, name, engine):
    path = root / "scenarios" / f"{name}.yaml"
    cli("simulate", path, "--replicates", 30, "--seed", 7, "--threads", 2, "--engine", engine, "--out", tmp_path)
    run = seedline.simulate(seedline.Scenario.from_yaml(path), replicates=30, seed=7, engine=engine, threads=2)
    assert run.replicates == 30 and run.seed == 7
    assert_run_matches_files(run, tmp_path)


def test_several_loci_match_the_command(cli, tmp_path):
    path = tmp_path / "loci.yaml"
    path.write_text(LOCI_YAML)
    cli("simulate", path, "--out", tmp_path / "out")
    run = seedline.simulate(seedline.Scenario.from_yaml(path))
    assert "pi_locus_mean" in run.columns
    assert_run_matches_files(run, tmp_path / "out")


def test_threads_do_not_change_values(root):
    sc = seedline.Scenario.from_yaml(root / "scenarios" / "demo.yaml")
    one = seedline.simulate(sc, replicates=40, seed=11, threads=1)
    two = seedline.simulate(sc, replicates=40, seed=11, threads=2)
    for name in one.columns:
        assert np.array_equal(one.statistics[name], two.statistics[name], equal_nan=True), name
    assert np.array_equal(one.sfs, two.sfs)
    other = seedline.simulate(sc, replicates=40, seed=12, threads=2)
    assert not np.array_equal(one.statistics["total_length"], other.statistics["total_length"])


def test_genealogy_is_the_tree_of_the_run(root):
    """The node arrays of replicate i describe the Newick tree of trees(i)."""
    sc = seedline.Scenario.from_yaml(root / "scenarios" / "meadow-two-slopes.yaml")
    run = seedline.simulate(sc, replicates=5, seed=7)
    labels = sc.sample_labels
    for i in range(run.replicates):
        g = run.genealogy(i)
        (line,) = run.trees(i)
        assert newick(g, labels) == line[line.index("]") + 1 :]
        roots = np.flatnonzero(g["parent"] == -1)
        assert run.statistics["tmrca"][i] == g["time"][roots[0]]
        assert run.statistics["total_length"][i] == g["length"].sum()
        assert run.statistics["jumps"][i] >= g["jumps"].sum()


def newick(g, labels):
    """Newick text of a one-root genealogy from its node arrays, children in node order (as
    the library writes it)."""
    parent, sample, length = g["parent"], g["sample"], g["length"]
    children = {}
    for child, p in enumerate(parent):
        if p >= 0:
            children.setdefault(int(p), []).append(child)

    def text(node):
        label = labels[sample[node]] if sample[node] >= 0 else ""
        inner = ""
        if node in children:
            inner = "(" + ",".join(text(c) + f":{length[c]}" for c in sorted(children[node])) + ")"
        return inner + label

    (root_node,) = np.flatnonzero(parent == -1)
    return text(int(root_node)) + ";"


def test_local_trees_of_a_recombining_locus(root):
    sc = seedline.Scenario.from_yaml(root / "scenarios" / "fog-grass-recombining.yaml")
    run = seedline.simulate(sc, replicates=3, seed=5)
    for i in range(run.replicates):
        first = run.genealogy(i)
        k = first["trees"]
        assert len(run.trees(i)) >= k  # a forest adds lines, never removes them
        spans = [run.genealogy(i, tree=t) for t in range(k)]
        assert spans[0]["left"] == 0
        assert all(a["right"] == b["left"] for a, b in zip(spans, spans[1:]))
    with pytest.raises(IndexError):
        run.genealogy(0, tree=10**6)
