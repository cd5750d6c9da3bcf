"""Exact genealogies, diversity and sampling design under dormancy (seed banks, spores,
resting eggs): the seedline library from Python.

Every value comes from the same library functions as the ``seedline`` command, so the same
scenario and seed give the values of ``replicates.tsv``, ``sfs.tsv`` and ``trees.nwk`` bit for
bit. See docs/python.md.
"""

import os
from typing import Any, Dict, List, Optional, Union

import numpy as np
import numpy.typing as npt

__version__: str

_Path = Union[str, "os.PathLike[str]"]

class InputError(ValueError):
    """Bad input: a scenario, data file or argument that breaks a rule.

    The message is the one the seedline command prints (it exits with code 2 for these): it
    names the file, the key or column (and line where known) and what is allowed.
    """

class Scenario:
    """A validated scenario, with the file (or text) it came from.

    Every rule is checked at once: a broken scenario raises ``InputError`` listing every
    problem with its key path and line. The keys are those of the scenario files
    (docs/scenario-format.md).
    """

    @staticmethod
    def from_yaml(source: _Path) -> "Scenario":
        """Reads a scenario file (YAML). A ``str`` holding a line break is taken as YAML text."""
    @staticmethod
    def from_str(text: str, origin: str = "<string>") -> "Scenario":
        """Parses YAML text; ``origin`` names it in messages."""
    @staticmethod
    def from_dict(d: Dict[str, Any]) -> "Scenario":
        """Builds a scenario from a dict with the keys of a scenario file (numpy numbers allowed)."""
    @staticmethod
    def demo() -> "Scenario":
        """The demo scenario embedded in seedline (``seedline simulate`` without a file)."""
    @property
    def name(self) -> str:
        """Free-text name."""
    @property
    def origin(self) -> str:
        """The file (or ``<string>``, ``<dict>``) the scenario came from."""
    @property
    def seed(self) -> int:
        """Master seed."""
    @property
    def replicates(self) -> int:
        """Number of replicates."""
    @property
    def loci(self) -> int:
        """Independent loci per replicate."""
    @property
    def demes(self) -> List[str]:
        """Deme names, in file order (deme index = position)."""
    @property
    def sample_labels(self) -> List[str]:
        """Names of the sampled sequences (``deme_index_tTIME``, ``_seed`` for a seed-bank sample), as Newick leaves and VCF columns are named, in sample order."""
    @property
    def has_mutation(self) -> bool:
        """Whether the scenario has a mutation model (statistics and SFS need one)."""
    def to_dict(self) -> Dict[str, Any]:
        """The scenario as parsed, with defaults filled in (as in ``summary.json``)."""

class Run:
    """The replicates of one run: what ``seedline simulate`` writes to ``replicates.tsv``,
    ``sfs.tsv`` and ``trees.nwk``, as numpy arrays and strings."""

    @property
    def statistics(self) -> Dict[str, npt.NDArray[np.float64]]:
        """One float64 array per column of ``replicates.tsv`` (same names, same order), one
        value per replicate; NaN where the file has an empty cell (e.g. ``tmrca`` of a forest)."""
    @property
    def sfs(self) -> Optional[npt.NDArray[np.int64]]:
        """The unfolded SFS of each replicate summed over loci, replicates × (n−1) (the columns
        ``xi_1``..``xi_{n-1}`` of ``sfs.tsv``); None without a mutation model."""
    @property
    def columns(self) -> List[str]:
        """Column names of ``replicates.tsv``, in order."""
    @property
    def replicates(self) -> int:
        """Number of replicates."""
    @property
    def seed(self) -> int:
        """Master seed."""
    @property
    def engine(self) -> str:
        """The engine that ran: ``"exact"`` or ``"approx"``."""
    @property
    def engine_reason(self) -> str:
        """Why that engine ran, in words (as ``simulate`` prints it)."""
    @property
    def forests(self) -> int:
        """Replicates in which some locus ended as a forest (no common ancestor)."""
    @property
    def notes(self) -> List[str]:
        """Notes on the run (cost, forests), also given as warnings before it."""
    def trees(self, i: int) -> List[str]:
        """The Newick trees of replicate ``i`` (negative counts from the end): the lines of
        ``trees.nwk`` for it, one per tree (per locus, per local tree with recombination, per
        root of a forest), each led by its ``[replicate i ...]`` comment. Branch lengths in
        generations; leaves labelled ``deme_index``."""
    def genealogy(self, i: int, locus: int = 0, tree: int = 0) -> Dict[str, Any]:
        """The genealogy of replicate ``i`` as int64 arrays over its nodes (the sampled
        sequences first: node k < n is sample k): ``parent`` (−1 for a root), ``time``
        (generations ago), ``deme``, ``sample`` (−1 for an ancestor), ``length`` and ``jumps``
        of the edge to the parent. With several loci choose ``locus``; with recombination
        choose the local ``tree`` along the locus (``left``, ``right``: the sites it holds for,
        right exclusive; ``trees``: how many). Drawn again from the replicate's own random
        stream: the genealogy of this run."""
    def __len__(self) -> int: ...

def simulate(
    scenario: Union[Scenario, _Path],
    replicates: Optional[int] = None,
    seed: Optional[int] = None,
    engine: str = "auto",
    threads: int = 0,
) -> Run:
    """Runs the replicates of ``scenario`` and returns them as a ``Run``.

    ``replicates`` and ``seed`` override the scenario's (as ``--replicates``, ``--seed``);
    ``engine`` is ``"exact"``, ``"approx"`` or ``"auto"`` (as ``--engine``); ``threads``
    worker threads (0: one per core). The same seed gives the values of ``seedline simulate``,
    bit for bit, for any ``threads``. The GIL is released while the replicates run; Ctrl-C
    stops the run between chunks of replicates.
    """

def predict(scenario: Union[Scenario, _Path]) -> Dict[str, Any]:
    """What published theory predicts for the scenario: the dict of ``seedline predict
    --json`` (every value labelled exact, limit or approximate, with its source and
    condition)."""

def observe(
    vcf: _Path,
    samples: _Path,
    windows: Optional[int] = None,
    regions: Optional[_Path] = None,
    mask: Optional[_Path] = None,
    project: Optional[int] = None,
    drop_missing: bool = False,
) -> Dict[str, Any]:
    """Summary statistics of observed data, as ``seedline observe``: the dict of
    ``observed.json`` (genome-wide ``statistics``, ``loci``, spectra, design, notes), plus
    ``locus_arrays``: one numpy array per column of ``observed.tsv`` (one entry per locus;
    ``contig`` a list of str).

    ``vcf``: VCF (plain, gzip, bgzip) or BCF of biallelic SNPs; ``samples``: the sample map
    (TSV: sample, deme, optional generations_ago, ploidy). ``windows`` (bases) or ``regions``
    (BED) cut the loci, ``mask`` (BED) gives the callable sites; missing calls are refused
    unless ``project=M`` or ``drop_missing=True``.
    """
