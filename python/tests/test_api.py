"""The module's surface: scenarios, errors with the command's messages, the GIL, observe."""

import json
import sys
import threading
import time

import numpy as np
import pytest

import seedline
from conftest import read_tsv

SMALL = """\
name: a pond with resting eggs
seed: 9
replicates: 20
demes:
  - { name: pond, size: 200, dormancy: { law: geometric, mean: 3 } }
samples:
  - { deme: pond, count: 6 }
mutation: { rate: 1.0e-6, sites: 10000 }
"""


def test_scenario_from_file_text_and_dict(root):
    path = root / "scenarios" / "meadow-two-slopes.yaml"
    a = seedline.Scenario.from_yaml(path)
    b = seedline.Scenario.from_yaml(str(path))
    assert a.origin == b.origin == str(path)
    assert a.demes == ["north", "south"] and a.name == b.name
    text = seedline.Scenario.from_yaml(SMALL)  # a str with a line break is YAML text
    assert text.origin == "<string>" and text.seed == 9 and text.replicates == 20 and text.has_mutation
    assert text.sample_labels == [f"pond_{i}_t0" for i in range(6)]
    d = seedline.Scenario.from_dict(
        {
            "seed": np.int64(9),  # numpy numbers are welcome
            "replicates": 20,
            "demes": [{"name": "pond", "size": 200, "dormancy": {"law": "geometric", "mean": np.float64(3.0)}}],
            "samples": [{"deme": "pond", "count": 6}],
            "mutation": {"rate": 1.0e-6, "sites": 10000},
        }
    )
    assert d.origin == "<dict>"
    # The same scenario gives the same run, whatever it was built from.
    x, y = seedline.simulate(text), seedline.simulate(d)
    assert np.array_equal(x.statistics["pi"], y.statistics["pi"], equal_nan=True)
    assert seedline.Scenario.demo().name
    assert "pond" in str(text) and "Scenario(" in repr(text)
    assert text.to_dict()["demes"][0]["name"] == "pond"


def test_simulate_takes_a_path_and_the_run_describes_itself(root):
    run = seedline.simulate(root / "scenarios" / "demo.yaml", replicates=4, seed=1)
    assert len(run) == 4 and run.engine in ("exact", "approx") and run.engine_reason
    assert run.statistics["replicate"].tolist() == [0, 1, 2, 3]
    assert run.trees(-1) == run.trees(3)
    with pytest.raises(IndexError, match="replicate 4 is outside"):
        run.trees(4)


def error_of(cli, *args):
    """The message the command prints for bad input (exit code 2), without `error: `."""
    p = cli(*args, check=False)
    assert p.returncode == 2, p.stderr
    return p.stderr.strip().removeprefix("error: ")


def test_errors_are_input_errors_with_the_commands_messages(cli, tmp_path):
    assert issubclass(seedline.InputError, ValueError)
    bad = tmp_path / "bad.yaml"
    bad.write_text(SMALL.replace("size: 200", "size: -5").replace("mean: 3", "mean: 0.5"))
    with pytest.raises(seedline.InputError) as e:
        seedline.Scenario.from_yaml(bad)
    assert str(e.value) == error_of(cli, "validate", bad)
    assert "demes[0].size" in str(e.value)

    missing = tmp_path / "none.yaml"
    with pytest.raises(seedline.InputError) as e:
        seedline.Scenario.from_yaml(missing)
    assert str(e.value) == error_of(cli, "simulate", missing, "--out", tmp_path / "o1")

    good = tmp_path / "good.yaml"
    good.write_text(SMALL)
    with pytest.raises(seedline.InputError) as e:
        seedline.simulate(seedline.Scenario.from_yaml(good), engine="fastest")
    assert "unknown engine `fastest`" in str(e.value)

    # The approximate engine refuses a law without a coalescent limit, in the command's words.
    heavy = tmp_path / "heavy.yaml"
    heavy.write_text(SMALL.replace("law: geometric, mean: 3", "law: pareto, alpha: 0.5"))
    with pytest.raises(seedline.InputError) as e:
        seedline.simulate(seedline.Scenario.from_yaml(heavy), engine="approx")
    assert str(e.value) == error_of(cli, "simulate", heavy, "--engine", "approx", "--out", tmp_path / "o2")
    assert "infinite mean" in str(e.value)

    # Mutations that overflow the sites: the replicate is named.
    crowded = tmp_path / "crowded.yaml"
    crowded.write_text(SMALL.replace("rate: 1.0e-6, sites: 10000", "rate: 0.01, sites: 50"))
    with pytest.raises(seedline.InputError) as e:
        seedline.simulate(seedline.Scenario.from_yaml(crowded), engine="exact")
    assert str(e.value) == error_of(cli, "simulate", crowded, "--engine", "exact", "--out", tmp_path / "o3")

    with pytest.raises(seedline.InputError, match="samples"):
        seedline.Scenario.from_dict({"demes": [{"name": "a", "size": 10}]})
    with pytest.raises(seedline.InputError, match="cannot"):
        seedline.Scenario.from_dict({"demes": [{"name": "a", "size": object()}]})
    with pytest.raises(seedline.InputError, match="broken.yaml"):
        seedline.Scenario.from_str("demes: [", "broken.yaml")


def test_predict_is_the_json_of_the_command(root, cli):
    path = root / "scenarios" / "lake-resting-eggs.yaml"
    ours = seedline.predict(seedline.Scenario.from_yaml(path))
    theirs = json.loads(cli("predict", path, "--json").stdout)
    # The command adds the record of its run (inputs, settings); a library call has none.
    assert theirs.pop("run")["command"] == "predict"
    assert ours == theirs


def test_simulation_releases_the_gil():
    """Another Python thread runs while a simulation is under way. The switch interval is
    raised so that this thread could only run if the simulation let go of the GIL."""
    sc = seedline.Scenario.from_str(SMALL.replace("replicates: 20", "replicates: 4000"), "gil.yaml")
    ticks = []
    go, stop = threading.Event(), threading.Event()

    def tick():
        go.wait()
        while not stop.is_set():
            ticks.append(1)
            time.sleep(0.0005)  # lets go of the GIL between ticks

    helper = threading.Thread(target=tick)
    helper.start()
    old = sys.getswitchinterval()
    sys.setswitchinterval(30.0)
    try:
        go.set()
        seedline.simulate(sc, engine="exact", threads=1)
        during = len(ticks)  # read before this thread lets go of the GIL again
    finally:
        sys.setswitchinterval(old)
        stop.set()
        helper.join()
    assert during > 0


def write_vcf(path, contig_length, rows):
    """A haploid VCF with the ancestral allele in AA (REF)."""
    names = [f"s{i}" for i in range(len(rows[0][1]))]
    lines = [
        "##fileformat=VCFv4.3",
        '##INFO=<ID=AA,Number=1,Type=String,Description="Ancestral allele">',
        '##FORMAT=<ID=GT,Number=1,Type=String,Description="Genotype">',
        f"##contig=<ID=chr1,length={contig_length}>",
        "\t".join(["#CHROM", "POS", "ID", "REF", "ALT", "QUAL", "FILTER", "INFO", "FORMAT", *names]),
    ]
    for pos, gts in rows:
        lines.append("\t".join(["chr1", str(pos), ".", "A", "T", ".", "PASS", "AA=A", "GT", *map(str, gts)]))
    path.write_text("\n".join(lines) + "\n")
    return names


def test_observe_against_hand_computed_statistics(tmp_path):
    vcf = tmp_path / "four.vcf"
    names = write_vcf(tmp_path / "four.vcf", 100, [(10, [0, 0, 0, 1]), (20, [1, 1, 0, 0]), (30, [1, 1, 1, 0])])
    smap = tmp_path / "map.tsv"
    smap.write_text("sample\tdeme\n" + "".join(f"{s}\tpond\n" for s in names))
    obs = seedline.observe(vcf, samples=smap)
    st = obs["statistics"]
    n, S = 4, 3
    counts = [1, 2, 3]
    # Source: Tajima (1983), Genetics 105:437 (pi as the mean pairwise difference) and
    # Watterson (1975), Theor. Popul. Biol. 7:256 (theta_W = S / a_n).
    pi = sum(k * (n - k) for k in counts) / (n * (n - 1) / 2)
    a1 = sum(1 / i for i in range(1, n))
    a2 = sum(1 / i**2 for i in range(1, n))
    # Source: Tajima (1989), Genetics 123:585, equations for D.
    b1, b2 = (n + 1) / (3 * (n - 1)), 2 * (n * n + n + 3) / (9 * n * (n - 1))
    c1, c2 = b1 - 1 / a1, b2 - (n + 2) / (a1 * n) + a2 / a1**2
    e1, e2 = c1 / a1, c2 / (a1**2 + a2)
    d = (pi - S / a1) / np.sqrt(e1 * S + e2 * S * (S - 1))
    assert st["segregating_sites"] == S
    assert st["pi"] == pytest.approx(pi, rel=1e-12)
    assert st["theta_w"] == pytest.approx(S / a1, rel=1e-12)
    assert st["tajima_d"] == pytest.approx(d, rel=1e-10)
    assert obs["xi"] == [1, 1, 1]
    arrays = obs["locus_arrays"]
    assert arrays["contig"] == ["chr1"]
    assert arrays["pi"].tolist() == pytest.approx([pi])
    assert arrays["pi_per_site"].tolist() == pytest.approx([pi / 100])


def test_observe_matches_the_command_on_simulated_data(root, cli, tmp_path):
    """A VCF written by `seedline simulate --vcf`, read by the module and by the command."""
    cli("simulate", root / "scenarios" / "demo.yaml", "--replicates", 1, "--seed", 4, "--vcf", "--out", tmp_path / "sim")
    vcf = tmp_path / "sim" / "vcf" / "replicate_0.vcf"
    header = next(line for line in vcf.read_text().splitlines() if line.startswith("#CHROM"))
    samples = header.split("\t")[9:]
    smap = tmp_path / "map.tsv"
    smap.write_text("sample\tdeme\n" + "".join(f"{s}\t{s.split('_')[0]}\n" for s in samples))
    ours = seedline.observe(vcf, samples=smap, windows=500)
    cli("observe", vcf, "--samples", smap, "--windows", 500, "--out", tmp_path / "obs")
    theirs = json.loads((tmp_path / "obs" / "observed.json").read_text())
    assert theirs.pop("run")["command"] == "observe"
    arrays = ours.pop("locus_arrays")
    assert ours == theirs
    table = read_tsv(tmp_path / "obs" / "observed.tsv")
    assert arrays["contig"] == table["contig"]
    for name, cells in table.items():
        if name != "contig":
            expected = np.array([float(c) if c else np.nan for c in cells])
            assert np.array_equal(np.asarray(arrays[name], dtype=float), expected, equal_nan=True), name
    with pytest.raises(seedline.InputError, match="together"):
        seedline.observe(vcf, samples=smap, windows=500, regions=smap)
    with pytest.raises(seedline.InputError) as e:
        seedline.observe(vcf, samples=tmp_path / "absent.tsv")
    assert str(e.value) == error_of(cli, "observe", vcf, "--samples", tmp_path / "absent.tsv", "--out", tmp_path / "o")


def test_the_issues_example_paths(root, cli, tmp_path):
    """The example of the issue, on the files of examples/ when the checkout has them."""
    vcf, smap = root / "examples" / "pond.vcf.gz", root / "examples" / "pond-map.tsv"
    if not (vcf.exists() and smap.exists()):
        pytest.skip("examples/pond.vcf.gz and examples/pond-map.tsv are not in this checkout")
    ours = seedline.observe(vcf, samples=smap)
    ours.pop("locus_arrays")
    cli("observe", vcf, "--samples", smap, "--out", tmp_path / "obs")
    theirs = json.loads((tmp_path / "obs" / "observed.json").read_text())
    assert theirs.pop("run")["command"] == "observe"
    assert ours == theirs
