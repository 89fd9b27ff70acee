"""Lattice constants and bulk moduli of a test set of cubic solids (layer 5).

:func:`lattice_test_set` computes, with the files of one set of pwsolid's fitted
pseudopotential table (``lda`` or ``pbe``), the equilibrium lattice constant a0 and
bulk modulus B0 of every solid of :data:`TEST_SOLIDS` whose elements the set holds
(a Birch-Murnaghan fit of an energy-volume scan), and compares them with published
all-electron values of the same functional.

Reference values (every one FROM MEMORY, to be checked against the papers, which could
not be read here): all-electron LDA and PBE lattice constants and bulk moduli of
P. Haas, F. Tran and P. Blaha, Phys. Rev. B 79, 085104 (2009), Tables I-II, and
G. I. Csonka et al., Phys. Rev. B 79, 155107 (2009); the LDA values are the middles of
the windows of shared/REFERENCES.md section 6b.
"""

from __future__ import annotations

import hashlib
import math
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

from .. import crystal as builders
from ..errors import ConvergenceWarning, InputError
from ..pseudo.table import TABLE_DIRECTORY, TABLE_SETS, table_file
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA
from .equation_of_state import scan_volumes

__all__ = ["TestSolid", "TEST_SOLIDS", "SolidResult", "LatticeTestSet", "lattice_test_set",
           "LATTICE_TEST_SCHEMA"]

LATTICE_TEST_SCHEMA = "pwsolid.lattice-test-set/1"
_SOURCE = ("all-electron, P. Haas, F. Tran and P. Blaha, Phys. Rev. B 79, 085104 (2009) and "
           "G. I. Csonka et al., Phys. Rev. B 79, 155107 (2009); FROM MEMORY")


@dataclass(frozen=True)
class TestSolid:
    """A cubic test solid: builder name, species, k-point mesh, smearing and the
    all-electron (a0 angstrom, B0 GPa) per set."""

    name: str
    structure: str
    species: tuple
    mesh: int
    smearing: str
    reference: dict            # set -> (a0, B0)
    source: str = _SOURCE

    def build(self, a_angstrom: float):
        species = self.species[0] if len(self.species) == 1 else list(self.species)
        return getattr(builders, self.structure)(a_angstrom / BOHR_ANGSTROM, species)


TEST_SOLIDS = {s.name: s for s in (
    TestSolid("Si", "diamond", ("Si",), 4, "none", {"lda": (5.405, 96.5), "pbe": (5.469, 88.5)}),
    TestSolid("C", "diamond", ("C",), 4, "none", {"lda": (3.535, 465.0), "pbe": (3.572, 432.0)}),
    TestSolid("Ge", "diamond", ("Ge",), 4, "cold", {"lda": (5.63, 72.0), "pbe": (5.765, 59.5)}),
    TestSolid("Al", "face_centred_cubic", ("Al",), 10, "cold",
              {"lda": (3.985, 83.0), "pbe": (4.040, 77.5)}),
    TestSolid("Li", "body_centred_cubic", ("Li",), 8, "cold",
              {"lda": (3.37, 15.0), "pbe": (3.433, 13.9)}),
    TestSolid("Na", "body_centred_cubic", ("Na",), 8, "cold",
              {"lda": (4.055, 9.0), "pbe": (4.200, 7.8)}),
    TestSolid("GaAs", "zincblende", ("Ga", "As"), 4, "none",
              {"lda": (5.61, 74.0), "pbe": (5.756, 60.5)}),
)}


@dataclass
class SolidResult:
    name: str
    a0: float                  # angstrom
    b0: float                  # GPa
    reference_a0: float
    reference_b0: float
    converged: bool
    files: dict

    @property
    def a0_error(self) -> float:
        """Relative error of a0 against the reference."""
        return self.a0 / self.reference_a0 - 1

    @property
    def b0_error(self) -> float:
        return self.b0 / self.reference_b0 - 1


@dataclass
class LatticeTestSet:
    """Result of :func:`lattice_test_set`."""

    set_name: str
    cutoff: float
    results: list
    skipped: dict = field(default_factory=dict)
    messages: list = field(default_factory=list)

    @property
    def converged(self) -> bool:
        return all(r.converged for r in self.results)

    @property
    def mean_absolute_a0_error(self) -> float:
        return (sum(abs(r.a0_error) for r in self.results) / len(self.results)
                if self.results else math.nan)

    def as_document(self) -> dict:
        return {"schema": LATTICE_TEST_SCHEMA, "set": self.set_name,
                "functional": TABLE_SETS[self.set_name], "cutoff_Ha": self.cutoff,
                "converged": self.converged,
                "mean_absolute_relative_a0_error": self.mean_absolute_a0_error,
                "solids": [{"name": r.name, "a0_angstrom": r.a0, "b0_GPa": r.b0,
                            "reference_a0_angstrom": r.reference_a0,
                            "reference_b0_GPa": r.reference_b0,
                            "a0_relative_error": r.a0_error, "b0_relative_error": r.b0_error,
                            "converged": r.converged, "pseudopotential_files": r.files,
                            "reference_source": TEST_SOLIDS[r.name].source}
                           for r in self.results],
                "skipped": self.skipped, "messages": self.messages}

    def table(self) -> str:
        lines = [f"{'solid':<6} {'a0 (A)':>8} {'ref':>7} {'err %':>7} {'B0 (GPa)':>9} {'ref':>7} "
                 f"{'err %':>7}"]
        for r in self.results:
            lines.append(f"{r.name:<6} {r.a0:>8.4f} {r.reference_a0:>7.3f} {100 * r.a0_error:>+7.2f} "
                         f"{r.b0:>9.1f} {r.reference_b0:>7.1f} {100 * r.b0_error:>+7.1f}"
                         + ("" if r.converged else "  (not converged)"))
        lines.append(f"mean |a0 error|: {100 * self.mean_absolute_a0_error:.2f} %")
        return "\n".join(lines)


def lattice_test_set(set_name: str = "lda", solids: Sequence[str] | None = None, *,
                     cutoff: float | None = None, n_points: int = 5, volume_range: float = 0.06,
                     restart_dir: Path | None = None,
                     progress: Callable | None = None) -> LatticeTestSet:
    """a0 and B0 of the test solids with one set of the fitted table.

    Parameters
    ----------
    set_name : {"lda", "pbe"}
    solids : names of :data:`TEST_SOLIDS` (default every one whose files exist)
    cutoff : float, Ha
        Default: the largest 1 meV cutoff recorded in the files used, plus 20 %.
    n_points, volume_range
        The energy-volume scan around the reference a0.
    restart_dir : path, optional
        Keeps one restart file per solid, so an interrupted run resumes.
    progress : callable(done, total, note), optional
    """
    from ..pseudo.table import read_record

    if set_name not in TABLE_SETS:
        raise InputError(f"unknown table set; accepted: {', '.join(TABLE_SETS)}", key="set",
                         value=set_name)
    names = list(solids) if solids else list(TEST_SOLIDS)
    unknown = [n for n in names if n not in TEST_SOLIDS]
    if unknown:
        raise InputError(f"unknown test solids; known: {', '.join(TEST_SOLIDS)}", key="solids",
                         value=unknown)
    chosen, skipped = [], {}
    for n in names:
        missing = [e for e in TEST_SOLIDS[n].species if not table_file(e, set_name).is_file()]
        if missing:
            skipped[n] = f"no {set_name} table file for {', '.join(missing)}"
        else:
            chosen.append(TEST_SOLIDS[n])
    if solids and skipped:
        raise InputError(f"not in the table yet: {skipped}", key="solids", value=list(skipped))
    if cutoff is None:
        recorded = []
        for s in chosen:
            for e in s.species:
                r = read_record(table_file(e, set_name))
                recorded.append(r["record"].get("cutoff", {}).get("cutoff_1meV_Ha", 40.0))
        cutoff = round(1.2 * max(recorded, default=30.0), 1)
    results = []
    for i, solid in enumerate(chosen):
        a_ref, b_ref = solid.reference[set_name]
        files = {e: table_file(e, set_name) for e in solid.species}
        settings = GroundStateSettings(
            cutoff=cutoff, kpoint_mesh=(solid.mesh,) * 3, smearing=solid.smearing,
            smearing_width=0.01, functional=TABLE_SETS[set_name],
            pseudopotentials={e: str(p) for e, p in files.items()})
        store = None
        if restart_dir is not None:
            Path(restart_dir).mkdir(parents=True, exist_ok=True)
            store = Path(restart_dir) / f"{solid.name}-{set_name}-{cutoff:g}Ha.restart.json"
        crystal = solid.build(a_ref)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            scan = scan_volumes(crystal, settings, volume_range=volume_range, n_points=n_points,
                                store=store, max_extensions=2)
        fit = scan.fits["birch-murnaghan"]
        a0 = a_ref * (fit.v0 / crystal.volume) ** (1 / 3)
        results.append(SolidResult(solid.name, float(a0), float(fit.b0 * HA_PER_BOHR3_GPA),
                                   a_ref, b_ref, all(p.converged for p in scan.points),
                                   {e: {"file": f"{TABLE_DIRECTORY}/{set_name}/{p.name}",
                                        "sha256": hashlib.sha256(p.read_bytes()).hexdigest()}
                                    for e, p in files.items()}))
        if progress is not None:
            progress(i + 1, len(chosen), solid.name)
    return LatticeTestSet(set_name, float(cutoff), results, skipped)
