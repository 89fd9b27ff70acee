"""Which structure is lowest in energy: a volume scan per candidate (layer 5).

:func:`compare_structures` relaxes each candidate's volume with
:func:`~pwsolid.workflows.equation_of_state.scan_volumes` and tabulates, per
atom, the equilibrium energy relative to the lowest candidate, the equilibrium
volume and the bulk modulus. Energies of different structures are comparable
only when they share the cutoff, the functional and the pseudopotentials, so
those must agree (k-point meshes may differ: cells of different size need
different meshes).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

from ..crystal import Crystal
from ..errors import InputError
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HARTREE_EV
from .equation_of_state import VolumeScan, scan_volumes

__all__ = ["StructureComparison", "compare_structures", "STRUCTURE_COMPARISON_SCHEMA"]

STRUCTURE_COMPARISON_SCHEMA = "pwsolid.structure-comparison/1"
#: Settings that must agree between candidates for their energies to be comparable.
_MUST_AGREE = ("cutoff", "functional", "pseudopotentials")


@dataclass(frozen=True, eq=False)
class StructureComparison:
    """Candidate structures at their own equilibrium volumes.

    Attributes
    ----------
    scans : dict name -> VolumeScan
        One scan per candidate, in the order given.
    ranking : tuple of str
        Candidate names from the lowest equilibrium energy per atom upwards
        (preferred form of each scan).
    messages : tuple of str
        Notes (e.g. candidates with different species).
    """

    scans: dict[str, VolumeScan]
    ranking: tuple[str, ...]
    messages: tuple[str, ...] = ()

    @property
    def most_stable(self) -> str:
        return self.ranking[0]

    def energy_per_atom(self, name: str) -> float:
        """Equilibrium energy per atom of a candidate, Ha."""
        scan = self.scans[name]
        return scan.e0 / scan.crystal.n_atoms

    def relative_energy_per_atom(self, name: str) -> float:
        """Equilibrium energy per atom above the lowest candidate, Ha (>= 0)."""
        return self.energy_per_atom(name) - self.energy_per_atom(self.most_stable)

    def table(self) -> list[dict]:
        """One row per candidate in ranking order (eV, angstrom^3, GPa)."""
        rows = []
        for rank, name in enumerate(self.ranking, start=1):
            scan = self.scans[name]
            n = scan.crystal.n_atoms
            lat = scan.lattice_constants
            rows.append({
                "name": name, "rank": rank, "atoms_per_cell": n,
                "species": list(scan.crystal.unique_species),
                "energy_above_lowest_per_atom_eV": self.relative_energy_per_atom(name) * HARTREE_EV,
                "equilibrium_energy_per_atom_eV": self.energy_per_atom(name) * HARTREE_EV,
                "equilibrium_volume_per_atom_angstrom3": scan.v0 * BOHR_ANGSTROM ** 3 / n,
                "bulk_modulus_GPa": scan.b0_gpa,
                "bulk_modulus_pressure_derivative": scan.b0_prime,
                "lattice_at_equilibrium_angstrom": {k: v * BOHR_ANGSTROM for k, v in lat.items()},
                "form": scan.preferred_form,
                "scan_converged": scan.converged,
            })
        return rows

    def as_document(self) -> dict:
        """JSON-ready comparison (schema ``STRUCTURE_COMPARISON_SCHEMA``) with every scan."""
        return {"schema": STRUCTURE_COMPARISON_SCHEMA,
                "most_stable": self.most_stable,
                "candidates": self.table(),
                "messages": list(self.messages),
                "scans": {name: scan.as_document() for name, scan in self.scans.items()}}


def compare_structures(candidates: Mapping[str, Crystal],
                       settings: GroundStateSettings | Mapping[str, GroundStateSettings]
                       | None = None, *, progress: Callable[[int, int], None] | None = None,
                       stores: Mapping[str, object] | None = None,
                       **scan_options) -> StructureComparison:
    """Scan the volume of every candidate and rank them by energy per atom.

    Parameters
    ----------
    candidates
        ``{name: Crystal}``, at least two.
    settings
        One :class:`GroundStateSettings` for all, or ``{name: settings}``; the
        cutoff, functional and pseudopotentials must agree between candidates.
    progress
        ``progress(done, total)`` over the points of all scans together.
    stores
        ``{name: restart file}`` for the candidates whose points should be kept.
    **scan_options
        Passed to :func:`scan_volumes` (``volume_range``, ``n_points``, ``log``,
        ``solver``, ...).

    Returns
    -------
    StructureComparison
    """
    if not isinstance(candidates, Mapping) or len(candidates) < 2:
        raise InputError("give at least two candidate structures to compare",
                         key="candidates", value=None if not isinstance(candidates, Mapping)
                         else list(candidates))
    names = list(candidates)
    if isinstance(settings, Mapping):
        missing = [n for n in names if n not in settings]
        if missing:
            raise InputError("no settings for these candidates", key="settings", value=missing)
        per = {n: settings[n] for n in names}
    else:
        per = {n: settings or GroundStateSettings() for n in names}
    first = per[names[0]].as_dict()
    for n in names[1:]:
        other = per[n].as_dict()
        for k in _MUST_AGREE:
            if k == "pseudopotentials":
                shared = set(first[k]) & set(other[k])
                differ = [s for s in shared if first[k][s] != other[k][s]]
                if differ:
                    raise InputError(f"candidates '{names[0]}' and '{n}' use different "
                                     f"pseudopotential files for {', '.join(differ)}; energies "
                                     "are comparable only with the same files",
                                     key="pseudopotentials")
            elif first[k] != other[k]:
                raise InputError(f"candidates '{names[0]}' and '{n}' differ in {k} "
                                 f"({first[k]!r} and {other[k]!r}); energies are comparable "
                                 "only at the same setting", key=k)
    messages = []
    species = {n: set(candidates[n].species) for n in names}
    if len({frozenset(s) for s in species.values()}) > 1:
        messages.append("the candidates do not all contain the same elements; energies per "
                        "atom of different compositions are not formation energies")

    done_before = {"n": 0}
    totals: dict[str, int] = {}
    scans: dict[str, VolumeScan] = {}
    n_planned = int(scan_options.get("n_points", 7))
    n_q = len(scan_options.get("c_over_a_values") or ()) or 1

    for name in names:
        totals[name] = n_planned * n_q

        def relay(done, total, _name=name):
            totals[_name] = total
            if progress is not None:
                rest = sum(t for k, t in totals.items() if k not in scans and k != _name)
                rest += n_planned * n_q * (len(names) - len(totals))
                progress(done_before["n"] + done, done_before["n"] + total + rest)

        store = None if stores is None else stores.get(name)
        scans[name] = scan_volumes(candidates[name], per[name], progress=relay, store=store,
                                   **scan_options)
        done_before["n"] += len(scans[name].points)
    ranking = tuple(sorted(names, key=lambda n: scans[n].e0 / scans[n].crystal.n_atoms))
    return StructureComparison(scans=scans, ranking=ranking, messages=tuple(messages))
