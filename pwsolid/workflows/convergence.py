"""How large a cutoff and how dense a k-point mesh are enough (layer 5).

:func:`converge_settings` computes a crystal over a rising series of cutoffs
and over a series of denser k-point meshes, and reports for each setting the
change of the energy per atom (and, with ``with_lattice``, of the equilibrium
lattice constant and bulk modulus from a small 5-point volume scan) relative to
the most converged setting of its series. It recommends the cheapest cutoff and
the cheapest mesh from which on every more expensive setting stays within the
requested precision.

The two series are independent one-parameter studies: the cutoff series runs at
the input's k-point mesh, the mesh series at the input's cutoff. Cutoff and
k-point errors are nearly additive for total energies, so this costs the sum
of the two series rather than their product; the setting the input already
uses is computed once and shared. The reference of each series (its most
expensive setting) has zero change by construction, so a recommendation equal
to the reference means the precision was not demonstrated: add a larger
setting to confirm it.
"""

from __future__ import annotations

import math
import time
import warnings
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from ..crystal import Crystal
from ..errors import ConvergenceWarning, InputError
from ..parallel import map_over_ranks, world
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HARTREE_EV
from .equation_of_state import PointSolver, WarmStart, _scf_solver, scan_volumes

__all__ = ["SettingPoint", "ConvergenceStudy", "converge_settings", "mesh_for_density",
           "CONVERGENCE_SCHEMA"]

CONVERGENCE_SCHEMA = "pwsolid.settings-convergence/1"
#: Default precision: 1 meV per atom (common practice for total energies).
DEFAULT_ENERGY_PRECISION = 1e-3 / HARTREE_EV
#: Default precision of the lattice constant: 0.001 angstrom.
DEFAULT_LATTICE_PRECISION = 1e-3 / BOHR_ANGSTROM
#: Multiples of the input cutoff tried when no cutoffs are given.
_DEFAULT_CUTOFF_FACTORS = (0.6, 0.8, 1.0, 1.2, 1.4)
#: Divisions (along the longest reciprocal vector) tried when no meshes are given.
_DEFAULT_MESHES = (2, 4, 6, 8)


@dataclass(frozen=True)
class SettingPoint:
    """One setting of a series and what it gave.

    Attributes
    ----------
    cutoff : float
        Ha.
    mesh : tuple of 3 int
        k-point divisions.
    energy_per_atom : float
        Total energy per atom at the input volume, Ha.
    energy_change : float
        ``energy_per_atom`` minus that of the series' reference, Ha/atom.
    converged : bool
        Every SCF of this setting converged.
    iterations : int
        SCF iterations at the input volume.
    seconds : float
        Wall time of this setting (all its volumes).
    lattice_constant, lattice_change : float or None
        Equilibrium lattice length ('a', or |a1| for a general cell), bohr, and
        its difference from the reference (bohr); None without the lattice study
        or when the scan could not be fitted.
    bulk_modulus_gpa, bulk_modulus_change : float or None
        B0 (GPa) and its relative difference from the reference.
    """

    cutoff: float
    mesh: tuple[int, int, int]
    energy_per_atom: float
    energy_change: float
    converged: bool
    iterations: int
    seconds: float
    lattice_constant: float | None = None
    lattice_change: float | None = None
    bulk_modulus_gpa: float | None = None
    bulk_modulus_change: float | None = None

    @property
    def mesh_size(self) -> int:
        return int(np.prod(self.mesh))

    def as_record(self) -> dict:
        def ang(x):
            return None if x is None else x * BOHR_ANGSTROM
        return {"cutoff_Ha": self.cutoff, "cutoff_eV": self.cutoff * HARTREE_EV,
                "kpoint_mesh": list(self.mesh),
                "energy_per_atom_eV": self.energy_per_atom * HARTREE_EV,
                "energy_change_per_atom_meV": self.energy_change * HARTREE_EV * 1e3,
                "scf_converged": self.converged, "iterations": self.iterations,
                "seconds": self.seconds,
                "lattice_constant_angstrom": ang(self.lattice_constant),
                "lattice_change_angstrom": ang(self.lattice_change),
                "bulk_modulus_GPa": self.bulk_modulus_gpa,
                "bulk_modulus_relative_change": self.bulk_modulus_change}


@dataclass(frozen=True, eq=False)
class ConvergenceStudy:
    """A cutoff series and a k-point series with the recommended setting.

    Attributes
    ----------
    crystal, settings
        What was studied (the input settings).
    cutoff_series, mesh_series : tuple of SettingPoint
        In order of cost (cutoff, then number of mesh points); the last is the
        reference of its series.
    energy_precision : float
        Ha per atom.
    lattice_precision : float or None
        bohr (None without the lattice study).
    recommended_cutoff : float
        Ha.
    recommended_mesh : tuple of 3 int
    messages : tuple of str
    """

    crystal: Crystal
    settings: GroundStateSettings
    cutoff_series: tuple[SettingPoint, ...]
    mesh_series: tuple[SettingPoint, ...]
    energy_precision: float
    lattice_precision: float | None
    recommended_cutoff: float
    recommended_mesh: tuple[int, int, int]
    messages: tuple[str, ...] = ()

    @property
    def with_lattice(self) -> bool:
        return self.lattice_precision is not None

    @property
    def recommended_settings(self) -> GroundStateSettings:
        return self.settings.replace(cutoff=self.recommended_cutoff,
                                     kpoint_mesh=self.recommended_mesh)

    def as_document(self) -> dict:
        """JSON-ready study (schema ``CONVERGENCE_SCHEMA``): eV, meV, angstrom, GPa."""
        return {
            "schema": CONVERGENCE_SCHEMA,
            "crystal": {**self.crystal.as_dict(),
                        "volume_angstrom3": self.crystal.volume * BOHR_ANGSTROM ** 3},
            "settings": self.settings.as_dict(),
            "requested_precision": {
                "energy_per_atom_meV": self.energy_precision * HARTREE_EV * 1e3,
                "lattice_constant_angstrom": (None if self.lattice_precision is None
                                              else self.lattice_precision * BOHR_ANGSTROM)},
            "cutoff_series": {"kpoint_mesh": list(self.cutoff_series[0].mesh),
                              "settings": [p.as_record() for p in self.cutoff_series]},
            "mesh_series": {"cutoff_Ha": self.mesh_series[0].cutoff,
                            "settings": [p.as_record() for p in self.mesh_series]},
            "recommendation": {"cutoff_Ha": self.recommended_cutoff,
                               "cutoff_eV": self.recommended_cutoff * HARTREE_EV,
                               "kpoint_mesh": list(self.recommended_mesh)},
            "messages": list(self.messages),
            "method": ("cutoff series at the input mesh, mesh series at the input cutoff; "
                       "changes are relative to the most expensive setting of each series"),
        }


def mesh_for_density(crystal: Crystal, divisions: int) -> tuple[int, int, int]:
    """``divisions`` along the longest reciprocal vector, proportionally fewer along the others.

    For cubic cells this is (n, n, n); for a hexagonal cell with c > a the c axis
    gets fewer divisions, so the spacing of the mesh is about even.
    """
    b = np.linalg.norm(crystal.reciprocal, axis=1)
    return tuple(max(1, int(round(divisions * x / b.max()))) for x in b)


def _check_meshes(crystal, meshes) -> list[tuple[int, int, int]]:
    out = []
    for m in meshes:
        if isinstance(m, (int, np.integer)) and not isinstance(m, bool):
            if not 1 <= m <= 200:
                raise InputError("mesh divisions must lie between 1 and 200", key="meshes",
                                 value=int(m))
            out.append(mesh_for_density(crystal, int(m)))
        else:
            try:
                t = tuple(int(x) for x in m)
            except (TypeError, ValueError):
                raise InputError("a mesh is an integer n or three integers", key="meshes",
                                 value=m) from None
            if len(t) != 3 or any(not 1 <= x <= 200 for x in t):
                raise InputError("a mesh is an integer n or three integers between 1 and 200",
                                 key="meshes", value=m)
            out.append(t)
    unique = sorted(set(out), key=lambda t: (np.prod(t), t))
    if len(unique) < 2:
        raise InputError("give at least two different k-point meshes", key="meshes",
                         value=[list(t) for t in unique])
    return unique


def _check_cutoffs(cutoffs) -> list[float]:
    try:
        values = sorted(set(float(c) for c in cutoffs))
    except (TypeError, ValueError):
        raise InputError("cutoffs must be numbers (Ha)", key="cutoffs", value=cutoffs) from None
    if len(values) < 2:
        raise InputError("give at least two different cutoffs", key="cutoffs", value=values)
    if any(not (math.isfinite(c) and 0.5 <= c <= 5000) for c in values):
        raise InputError("cutoffs must lie between 0.5 Ha and 5000 Ha", key="cutoffs",
                         value=values)
    return values


def _recommend(series: Sequence[SettingPoint], energy_precision, lattice_precision) -> int:
    """Index of the cheapest setting from which on every setting is within precision."""
    def ok(p):
        if abs(p.energy_change) > energy_precision:
            return False
        if lattice_precision is not None:
            return p.lattice_change is not None and abs(p.lattice_change) <= lattice_precision
        return True
    best = len(series) - 1
    for i in range(len(series) - 1, -1, -1):
        if not ok(series[i]):
            break
        best = i
    return best


def converge_settings(crystal: Crystal, settings: GroundStateSettings | None = None, *,
                      cutoffs: Sequence[float] | None = None,
                      meshes: Sequence | None = None,
                      energy_precision: float = DEFAULT_ENERGY_PRECISION,
                      lattice_precision: float = DEFAULT_LATTICE_PRECISION,
                      with_lattice: bool = True,
                      volume_range: float = 0.04, n_points: int = 5,
                      progress: Callable[[int, int], None] | None = None,
                      log: Callable[[str], None] | None = None,
                      solver: PointSolver | None = None, comm=None) -> ConvergenceStudy:
    """Energy (and lattice constant) against cutoff and against k-point mesh.

    Parameters
    ----------
    crystal, settings
        The system and its settings; the cutoff series uses ``settings.kpoint_mesh``,
        the mesh series ``settings.cutoff`` (see the module notes).
    cutoffs
        Cutoffs in Ha (default: 0.6 to 1.4 times the input cutoff).
    meshes
        Meshes: an integer n (n along the longest reciprocal vector, see
        :func:`mesh_for_density`) or three integers (default 2, 4, 6, 8).
    energy_precision
        Ha per atom (default 1 meV/atom).
    lattice_precision
        bohr (default 0.001 angstrom); used when ``with_lattice``.
    with_lattice
        Also scan the volume (``n_points`` volumes within ``volume_range``) at every
        setting for the lattice constant and bulk modulus.
    progress
        ``progress(done, total)`` after every setting.
    log
        Called with one line per setting.
    solver
        One point's calculation (see :class:`~pwsolid.workflows.equation_of_state.PointSolver`).
    comm
        Communicator over which the settings are spread (default
        :func:`pwsolid.parallel.world`): under MPI each process computes some of
        the settings serially and every process returns the whole study.

    Returns
    -------
    ConvergenceStudy
    """
    settings = settings or GroundStateSettings()
    solver = solver or _scf_solver
    emit = log or (lambda line: None)
    if cutoffs is None:
        cutoffs = [max(0.5, round(2 * f * settings.cutoff) / 2) for f in _DEFAULT_CUTOFF_FACTORS]
    cutoff_list = _check_cutoffs(cutoffs)
    mesh_list = _check_meshes(crystal, _DEFAULT_MESHES if meshes is None else meshes)
    for name, value in (("energy_precision", energy_precision),
                        ("lattice_precision", lattice_precision)):
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise InputError("must be a positive number", key=name, value=value)
    if (isinstance(n_points, bool) or not isinstance(n_points, int) or n_points < 5
            or n_points % 2 == 0):
        raise InputError("the volumes per lattice scan must be an odd integer of at least 5 "
                         "(the middle one is the input volume)", key="points", value=n_points)
    mesh_in = tuple(settings.kpoint_mesh)
    jobs = [(c, mesh_in) for c in cutoff_list] + [(settings.cutoff, m) for m in mesh_list]
    unique_jobs = list(dict.fromkeys(jobs))
    results: dict[tuple, dict] = {}
    messages: list[str] = []
    previous = {"warm": None}

    def warm_solver(cell, s, warm):
        # With no neighbour in its own scan, a point starts from the last density of
        # the previous setting (moved to this cell and grid) rather than a uniform one.
        out = solver(cell, s, warm if warm is not None else previous["warm"])
        density = getattr(out, "density", None)
        if density is not None:
            previous["warm"] = WarmStart(np.asarray(density, float), cell.volume)
        return out

    def run_job(job) -> tuple[dict, list[str]]:
        cut, mesh = job
        s = settings.replace(cutoff=cut, kpoint_mesh=mesh)
        t0 = time.perf_counter()
        res = {"lattice": None, "b0": None}
        notes: list[str] = []
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ConvergenceWarning)
            if with_lattice:
                try:
                    # few extensions: far from the minimum the lattice of a poor setting
                    # is not worth many points, and its change shows it is poor anyway
                    scan = scan_volumes(crystal, s, volume_range=volume_range, n_points=n_points,
                                        solver=warm_solver, max_extensions=2)
                except InputError as exc:
                    scan = None
                    notes.append(f"cutoff {cut:g} Ha, mesh {_mesh(mesh)}: {exc.reason}")
                if scan is not None:
                    centre = min(scan.points, key=lambda p: abs(p.volume - crystal.volume))
                    res.update(energy=centre.energy, converged=scan.all_points_converged,
                               iterations=centre.iterations)
                    lengths = scan.lattice_constants
                    res["lattice"] = next(iter(lengths.values()))
                    res["b0"] = scan.b0_gpa
                    for m in scan.messages:
                        if "extended" in m or "outside" in m:
                            notes.append(f"cutoff {cut:g} Ha, mesh {_mesh(mesh)}: {m}")
                else:
                    res.update(_single(crystal, s, warm_solver))
            else:
                res.update(_single(crystal, s, warm_solver))
        res["seconds"] = time.perf_counter() - t0
        res["notes"] = [str(w.message) for w in caught
                        if issubclass(w.category, ConvergenceWarning)]
        for w in caught:
            if not issubclass(w.category, ConvergenceWarning):
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        return res, notes

    counter = {"done": 0}

    def finish(index, outcome, computed_here):
        cut, mesh = unique_jobs[index]
        res, _ = outcome
        lat = "" if res["lattice"] is None else f"  a = {res['lattice'] * BOHR_ANGSTROM:.5f} A"
        emit(f"cutoff {cut:7.2f} Ha  mesh {_mesh(mesh):>8}  E/atom = "
             f"{res['energy'] / crystal.n_atoms:15.8f} Ha{lat}  {res['seconds']:6.1f} s")
        counter["done"] += 1
        if progress is not None:
            progress(counter["done"], len(unique_jobs))

    # Under MPI the settings are spread over the processes, balanced by a rough cost
    # (plane waves ~ cutoff^1.5, times mesh points, times volumes); each process runs
    # its settings serially, warm-starting from its own previous setting.
    comm = comm if comm is not None else world()
    costs = [c ** 1.5 * float(np.prod(m)) * (n_points if with_lattice else 1)
             for c, m in unique_jobs]
    outcomes = map_over_ranks(run_job, unique_jobs, comm, costs=costs, on_result=finish)
    for job, (res, notes) in zip(unique_jobs, outcomes):
        results[job] = res
        messages.extend(notes)

    n = crystal.n_atoms

    def series(keys):
        ref = results[keys[-1]]
        out = []
        for k in keys:
            r = results[k]
            lat_change = (None if r["lattice"] is None or ref["lattice"] is None
                          else r["lattice"] - ref["lattice"])
            b0_change = (None if r["b0"] is None or ref["b0"] is None
                         else (r["b0"] - ref["b0"]) / ref["b0"])
            out.append(SettingPoint(
                cutoff=k[0], mesh=k[1], energy_per_atom=r["energy"] / n,
                energy_change=(r["energy"] - ref["energy"]) / n, converged=r["converged"],
                iterations=r["iterations"], seconds=r["seconds"], lattice_constant=r["lattice"],
                lattice_change=lat_change, bulk_modulus_gpa=r["b0"],
                bulk_modulus_change=b0_change))
        return tuple(out)

    cutoff_series = series([(c, mesh_in) for c in cutoff_list])
    mesh_series = series([(settings.cutoff, m) for m in mesh_list])
    lat_prec = lattice_precision if with_lattice else None
    i_cut = _recommend(cutoff_series, energy_precision, lat_prec)
    i_mesh = _recommend(mesh_series, energy_precision, lat_prec)
    for label, i, ser in (("cutoff", i_cut, cutoff_series), ("mesh", i_mesh, mesh_series)):
        if i == len(ser) - 1:
            messages.append(f"only the most expensive {label} of the series meets the requested "
                            f"precision, which is therefore not demonstrated; add a larger {label}")
    unconverged = [k for k, r in results.items() if not r["converged"]]
    if unconverged:
        messages.append(f"{len(unconverged)} setting(s) had SCF points that did not converge: "
                        + ", ".join(f"{c:g} Ha / {_mesh(m)}" for c, m in unconverged))
        warnings.warn("settings convergence study: " + messages[-1], ConvergenceWarning,
                      stacklevel=2)
    return ConvergenceStudy(
        crystal=crystal, settings=settings, cutoff_series=cutoff_series, mesh_series=mesh_series,
        energy_precision=float(energy_precision), lattice_precision=lat_prec,
        recommended_cutoff=cutoff_series[i_cut].cutoff, recommended_mesh=mesh_series[i_mesh].mesh,
        messages=tuple(messages))


def _single(crystal, s, solver) -> dict:
    out = solver(crystal, s, None)
    energy = getattr(out, "zero_width_energy", out.total_energy)   # metals: sigma -> 0 estimate
    return {"energy": float(energy), "converged": bool(out.converged),
            "iterations": int(out.iterations)}


def _mesh(mesh) -> str:
    return "x".join(str(m) for m in mesh)
