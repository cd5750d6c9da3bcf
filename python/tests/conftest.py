"""Shared fixtures: the checkout, the seedline command built from it, a runner for it."""

import os
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def root() -> Path:
    """The root of the checkout (scenarios/ lives there)."""
    return ROOT


@pytest.fixture(scope="session")
def seedline_bin() -> Path:
    """The seedline command of this checkout: $SEEDLINE_BIN, else built with cargo."""
    given = os.environ.get("SEEDLINE_BIN")
    if given:
        return Path(given)
    # A no-op when `cargo test` has run; never a stale binary.
    subprocess.run(["cargo", "build", "--locked", "--quiet", "--bin", "seedline"], cwd=ROOT, check=True)
    return ROOT / "target" / "debug" / "seedline"


@pytest.fixture(scope="session")
def cli(seedline_bin):
    """Runs the seedline command; returns the completed process (text)."""

    def run(*args, check=True):
        p = subprocess.run([str(seedline_bin), "--quiet", *map(str, args)], cwd=ROOT, capture_output=True, text=True)
        if check and p.returncode != 0:
            raise AssertionError(f"seedline {' '.join(map(str, args))} exited {p.returncode}: {p.stderr}")
        return p

    return run


def read_tsv(path: Path):
    """Columns of a TSV file as lists of strings, in header order."""
    lines = path.read_text().splitlines()
    head = lines[0].split("\t")
    rows = [line.split("\t") for line in lines[1:]]
    return {name: [r[j] for r in rows] for j, name in enumerate(head)}
