"""Phonons by finite displacements in a supercell (layer 5).

:func:`phonons` builds a supercell of the (primitive) crystal, finds its space
group, plans the symmetry-reduced set of displaced atoms
(:func:`pwsolid.force_constants.plan_displacements`), computes a self-consistent
ground state and the analytic forces (:func:`pwsolid.forces.atomic_forces`) of
each displaced supercell, rebuilds the full force constants with every
operation of the crystal, reports how far the raw forces break the acoustic sum
rule and the site symmetry, imposes the sum rule, and returns a
:class:`PhononResult` with the dispersion along the band-structure path
(:mod:`pwsolid.bandpath`), the density of states on a q-mesh and the
frequencies at the path's special points.

What the workflow takes care of:

* **k-points of the supercell.** The supercell's mesh keeps the k-point spacing
  of the primitive cell's ``brillouin_zone.mesh`` and is always Gamma-centred
  (unshifted): a shifted even mesh is not symmetric under the operations left
  to a displaced cell, and gives spurious forces of ~1e-3 Ha/bohr.
* **Processes.** Displacements are independent: under an MPI launcher they are
  spread over the processes (:func:`pwsolid.parallel.map_over_ranks`), each
  process running its own ground states serially, warm-started along its block.
* **Resume.** With ``record_dir`` every finished displacement is written at once
  as a record of kind ``phonon-displacements`` (:mod:`pwsolid.store`) by the
  process that computed it, under the fingerprint of the displaced supercell and
  its settings; a re-run skips the displacements it finds (converged at
  tolerances at least as tight), and refuses records of another calculation,
  naming what differs, unless ``accept_mismatch``.
* **Polar crystals.** Without Born effective charges and the dielectric constant
  the long-range dipole field is missing: the LO-TO splitting at Gamma of a polar
  crystal (GaAs) is absent. Every crystal of more than one element gets this
  caution in its messages.

Inside: Ha, bohr, Ha/bohr^2, electron masses; frequencies in THz (and cm^-1, meV
in the document).
"""

from __future__ import annotations

import math
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np

from ..atomic_masses import MASS_SOURCE, atomic_mass
from ..bandpath import BandPath, sample_path, standard_path, user_path
from ..crystal import Crystal
from ..errors import ConvergenceWarning, InputError
from ..force_constants import (Displacement, ForceConstants, acoustic_sum_violation,
                               fit_residual, force_constants_from_forces, full_from_origin_rows,
                               impose_acoustic_sum_rule, make_force_constants, make_supercell,
                               plan_displacements, site_symmetry_violation)
from ..parallel import map_over_ranks, world
from ..phonon_spectra import (DOS_METHODS, MeshFrequencies, PhononDOS, check_mesh,
                              mesh_frequencies, phonon_dos)
from ..settings import GroundStateSettings
from ..symmetry import find_symmetry
from ..units import AMU_ELECTRON_MASSES, BOHR_ANGSTROM, THZ_INVERSE_CM, THZ_MEV

__all__ = ["PhononSettings", "PhononResult", "phonons", "supercell_settings",
           "PHONON_SCHEMA", "POLAR_CAUTION", "phonons_from_forces",
           "force_constants_from_document"]

#: Schema of the phonon result document.
PHONON_SCHEMA = "pwsolid.phonons/1"

POLAR_CAUTION = ("this crystal holds more than one element and may be polar: without Born "
                 "effective charges and the dielectric constant the long-range dipole field "
                 "is missing, so the LO-TO splitting at Gamma is absent (the LO branch near "
                 "Gamma is too low)")


@dataclass(frozen=True)
class PhononSettings:
    """Settings of a phonon calculation (validated once).

    Attributes
    ----------
    supercell : 3 ints or 3 x 3 ints
        Supercell of the primitive cell: repeats, or rows in primitive vectors.
    amplitude : float, bohr
        Length of each displacement (0.02 bohr, about 0.01 angstrom).
    both_signs : bool
        Displace by +u and -u (the minus sign made by symmetry when a site
        operation maps +u onto -u); cancels the even anharmonic terms.
    path : str or None
        Path for the dispersion, e.g. ``"G-X-W-K-G-L"``; None: the standard path.
    path_points : int
        Points along the path.
    dos_mesh : 3 ints
        Gamma-centred q-mesh of the density of states.
    dos_method : str
        ``"tetrahedron"`` or ``"gaussian"``.
    dos_width : float, THz
        Standard deviation of the Gaussians (Gaussian method).
    masses : mapping of species -> daltons, or None
        Masses replacing the standard atomic weights (isotopes).
    """

    supercell: Any = (2, 2, 2)
    amplitude: float = 0.02
    both_signs: bool = True
    path: str | None = None
    path_points: int = 150
    dos_mesh: tuple = (16, 16, 16)
    dos_method: str = "tetrahedron"
    dos_width: float = 0.1
    masses: Mapping[str, float] | None = None

    def __post_init__(self):
        m = np.asarray(self.supercell)
        if m.shape not in ((3,), (3, 3)) or not np.issubdtype(m.dtype, np.integer) or np.any(
                (m < 1) if m.shape == (3,) else np.abs(m) > 20) or (
                m.shape == (3,) and np.any(m > 20)):
            raise InputError("must be three repeats from 1 to 20, or a 3 x 3 integer matrix",
                             key="phonons.supercell", value=m.tolist())
        object.__setattr__(self, "supercell", tuple(m.tolist()) if m.shape == (3,) else
                           tuple(tuple(r) for r in m.tolist()))
        amp = self.amplitude
        if isinstance(amp, bool) or not isinstance(amp, (int, float)) or not (
                0.001 <= float(amp) <= 0.2):
            raise InputError("must be a length from 0.001 to 0.2 bohr (0.0005 to 0.1 angstrom)",
                             key="phonons.displacement_length", value=amp)
        object.__setattr__(self, "amplitude", float(amp))
        if isinstance(self.path_points, bool) or not isinstance(self.path_points, int) or not (
                10 <= self.path_points <= 5000):
            raise InputError("must be an integer from 10 to 5000", key="phonons.path_points",
                             value=self.path_points)
        object.__setattr__(self, "dos_mesh", check_mesh(self.dos_mesh))
        if self.dos_method not in DOS_METHODS:
            raise InputError(f"accepted: {', '.join(DOS_METHODS)}", key="phonons.dos_method",
                             value=self.dos_method)
        w = self.dos_width
        if isinstance(w, bool) or not isinstance(w, (int, float)) or not 0.001 <= w <= 5:
            raise InputError("must be a width from 0.001 to 5 THz", key="phonons.dos_width",
                             value=w)
        for s, v in (self.masses or {}).items():
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0.5 <= v <= 500:
                raise InputError("masses are daltons from 0.5 to 500", key=f"phonons.masses.{s}",
                                 value=v)


# --- settings of the supercell ------------------------------------------------------

def supercell_settings(primitive: Crystal, supercell_lattice: np.ndarray,
                       settings: GroundStateSettings) -> GroundStateSettings:
    """``settings`` for the supercell: the same k-point spacing, Gamma-centred mesh."""
    b_p = np.linalg.norm(primitive.reciprocal, axis=1)
    spacing = np.min(b_p / np.asarray(settings.kpoint_mesh, float))
    b_s = np.linalg.norm(2 * np.pi * np.linalg.inv(supercell_lattice).T, axis=1)
    mesh = tuple(int(max(1, math.ceil(b / spacing - 1e-6))) for b in b_s)
    from dataclasses import replace

    return replace(settings, kpoint_mesh=mesh, kpoint_shift=(0.0, 0.0, 0.0))


# --- one displaced supercell --------------------------------------------------------

@dataclass(frozen=True, eq=False)
class DisplacedForces:
    """What a force solver returns for one displaced supercell."""

    forces: np.ndarray                   # (n_atoms, 3), Ha/bohr
    converged: bool = True
    iterations: int = 0
    net_force: float = 0.0               # |sum of unsymmetrised forces|, Ha/bohr
    messages: tuple = ()
    density: Any = None                  # for the next displacement's start


def scf_force_solver(crystal: Crystal, settings: GroundStateSettings, start=None):
    """The default solver: a self-consistent ground state and its analytic forces."""
    from ..forces import atomic_forces
    from ..scf import ground_state

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        gs = ground_state(crystal, settings, initial_density=start)
    notes = tuple(str(w.message) for w in caught if issubclass(w.category, ConvergenceWarning))
    f = atomic_forces(gs)
    return DisplacedForces(np.asarray(f.cartesian), bool(gs.converged), int(gs.iterations),
                           float(np.linalg.norm(f.net)), notes, gs.density)


# --- records ------------------------------------------------------------------------

class _Records:
    """Finished displacements in ``record_dir`` (one archive each)."""

    def __init__(self, record_dir, settings, pseudopotentials, accept_mismatch):
        self.dir = None if record_dir is None else Path(record_dir)
        self.settings, self.pps, self.accept = settings, pseudopotentials, accept_mismatch
        self.mismatches: list[str] = []

    def _fingerprint(self, cell: Crystal, index: int, d: Displacement):
        from ..store import Fingerprint, fingerprint

        base = fingerprint(cell, self.settings, self.pps).values
        return Fingerprint({**base, "phonon.displaced_atom": d.atom + 1,
                            "phonon.displacement_bohr": [round(float(x), 10) for x in d.vector]})

    def path(self, index: int) -> Path:
        return self.dir / f"displacement-{index + 1:03d}.npz"

    def load(self, index, cell, d) -> DisplacedForces | None:
        from ..store import load_record

        if self.dir is None or not self.path(index).exists():
            return None
        rec = load_record(self.path(index), "phonon-displacements",
                          self._fingerprint(cell, index, d), accept_mismatch=self.accept)
        self.mismatches.extend(rec.mismatches)
        meta = rec.metadata
        if not meta.get("converged") or float(meta.get("energy_tolerance_Ha", math.inf)) > \
                self.settings.energy_tolerance:
            return None
        return DisplacedForces(np.asarray(rec.arrays["forces"], float), True,
                               int(meta.get("iterations", 0)), float(meta.get("net_force", 0)),
                               tuple(meta.get("messages", ())))

    def save(self, index, cell, d, out: DisplacedForces) -> None:
        from ..store import save_record

        if self.dir is None:
            return
        self.dir.mkdir(parents=True, exist_ok=True)
        save_record(self.path(index), "phonon-displacements", self._fingerprint(cell, index, d),
                    {"forces": np.asarray(out.forces, float)},
                    {"converged": out.converged, "iterations": out.iterations,
                     "net_force": out.net_force, "messages": list(out.messages),
                     "energy_tolerance_Ha": self.settings.energy_tolerance})


def _displaced(cell: Crystal, d: Displacement) -> Crystal:
    cart = cell.cartesian_positions.copy()
    cart[d.atom] += np.asarray(d.vector)
    return Crystal(cell.lattice, cell.species, cart @ np.linalg.inv(cell.lattice),
                   cell.min_distance)


# --- the result ---------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class PhononResult:
    """A finished phonon calculation.

    Attributes
    ----------
    force_constants : ForceConstants
        With the acoustic sum rule imposed; ``.frequencies(q)`` at any q.
    displacements : tuple of Displacement
    forces : ndarray (n_displacements, n_super, 3), Ha/bohr
    checks : dict
        ``acoustic_sum_violation_before`` (relative), ``site_symmetry_violation``
        (relative), ``fit_residual`` (relative), ``largest_net_force_Ha_per_bohr``,
        ``acoustic_sum_violation_after``.
    path : BandPath
    dispersion_THz : ndarray (n_path, n_modes)
    dos : PhononDOS
    mesh : MeshFrequencies
    special_points : dict label -> list of THz (ascending)
    converged : bool
        Every displaced ground state converged.
    history : tuple of dict
        Per displacement: iterations, net force, whether reused from a record, seconds.
    messages : tuple of str
    """

    force_constants: ForceConstants
    displacements: tuple
    forces: np.ndarray
    checks: dict
    path: BandPath
    dispersion_THz: np.ndarray
    dos: PhononDOS
    mesh: MeshFrequencies
    special_points: dict
    converged: bool
    history: tuple
    messages: tuple
    settings: PhononSettings = field(default_factory=PhononSettings)
    supercell_kpoint_mesh: tuple = ()
    masses: dict = field(default_factory=dict)

    def mesh_frequencies(self, mesh) -> MeshFrequencies:
        """Frequencies (THz) and weights on another Gamma-centred q-mesh."""
        return mesh_frequencies(self.force_constants, mesh)

    def frequencies(self, q_fractional) -> np.ndarray:
        """Frequencies (THz) at q in units of the primitive reciprocal vectors."""
        return self.force_constants.frequencies(q_fractional)

    def as_document(self) -> dict:
        fc = self.force_constants
        sup = fc.supercell
        ticks, labels = self.path.ticks()
        return {
            "schema": PHONON_SCHEMA,
            "converged": self.converged,
            "messages": list(self.messages),
            "primitive_cell": fc.primitive.as_dict(),
            "supercell": {"matrix": sup.matrix.tolist(), "atoms": sup.supercell.n_atoms,
                          "kpoint_mesh": list(self.supercell_kpoint_mesh),
                          "kpoint_shift": [0.0, 0.0, 0.0]},
            "masses_dalton": self.masses, "mass_source": MASS_SOURCE,
            "displacement_amplitude_bohr": self.settings.amplitude,
            "displacement_amplitude_angstrom": self.settings.amplitude * BOHR_ANGSTROM,
            "displacements": [d.as_dict() for d in self.displacements],
            "history": list(self.history),
            "checks": dict(self.checks),
            "special_points_THz": self.special_points,
            "special_points_inverse_cm": {k: [x * THZ_INVERSE_CM for x in v]
                                          for k, v in self.special_points.items()},
            "special_points_meV": {k: [x * THZ_MEV for x in v]
                                   for k, v in self.special_points.items()},
            "dispersion": {"q_fractional": self.path.kpoints.tolist(),
                           "distance_per_bohr": self.path.distance.tolist(),
                           "tick_positions": [float(x) for x in ticks],
                           "tick_labels": list(labels),
                           "frequencies_THz": self.dispersion_THz.tolist()},
            "density_of_states": self.dos.as_document(),
            "lowest_mesh_frequency_THz": float(self.mesh.frequencies_THz.min()),
            "force_constants_Ha_per_bohr2": {
                "from_primitive_atom": [int(i) + 1 for i in sup.origin_atoms],
                "blocks": fc.phi[sup.origin_atoms].tolist()},
        }

    def summary_lines(self) -> list[str]:
        sup = self.force_constants.supercell
        c = self.checks
        lines = [f"supercell         {sup.supercell.n_atoms} atoms ({sup.n_cells} primitive cells), "
                 f"k-mesh {'x'.join(map(str, self.supercell_kpoint_mesh))} Gamma-centred",
                 f"displacements     {len(self.displacements)} computed, amplitude "
                 f"{self.settings.amplitude:.4g} bohr",
                 f"acoustic sum rule violated by {c['acoustic_sum_violation_before']:.2e} "
                 "(relative, before it was imposed)",
                 f"site symmetry     violated by {c['site_symmetry_violation']:.2e} (relative)",
                 f"{'point':<8}{'frequencies (THz)'}"]
        for label, freqs in self.special_points.items():
            lines.append(f"{label:<8}" + " ".join(f"{x:7.3f}" for x in freqs))
        lines += [f"note: {m}" for m in self.messages]
        return lines


# --- the workflow -------------------------------------------------------------------

def _masses(crystal: Crystal, given) -> dict:
    given = dict(given or {})
    for s in given:
        if s not in crystal.unique_species:
            raise InputError(f"no {s} in the crystal (its species: "
                             f"{', '.join(crystal.unique_species)})", key=f"phonons.masses.{s}",
                             value=given[s])
    return {s: float(given.get(s, atomic_mass(s))) for s in crystal.unique_species}


def _path_of(crystal: Crystal, text: str | None):
    """The standard path of the lattice, or the user's (a PathSpec)."""
    return standard_path(crystal) if text is None else user_path(crystal, text)


def phonons(crystal: Crystal, settings: GroundStateSettings | None = None,
            phonon_settings: PhononSettings | None = None, *, record_dir=None,
            accept_mismatch: bool = False, comm=None, log: Callable[[str], None] | None = None,
            progress: Callable[[int, int], None] | None = None,
            solver: Callable | None = None) -> PhononResult:
    """Phonons of ``crystal`` (its primitive cell) by finite displacements.

    Parameters
    ----------
    crystal
        The primitive cell (the supercell is built from it).
    settings
        Ground-state settings for the primitive cell; the supercell keeps its
        k-point spacing on a Gamma-centred mesh (:func:`supercell_settings`).
    phonon_settings
        :class:`PhononSettings`.
    record_dir
        Directory for one record per finished displacement (resume).
    solver
        ``solver(displaced_supercell, settings, start_density) -> DisplacedForces``;
        default :func:`scf_force_solver`. Tests pass an analytic model here.
    """
    settings = settings or GroundStateSettings()
    ps = phonon_settings or PhononSettings()
    comm = comm if comm is not None else world()
    emit = log or (lambda line: None)
    solver = solver or scf_force_solver
    _path_of(crystal, ps.path)                 # a mistake in the path is found before any work
    masses = _masses(crystal, ps.masses)
    sup = make_supercell(crystal, ps.supercell)
    cell = sup.supercell
    sc_settings = supercell_settings(crystal, cell.lattice, settings)
    messages = []
    if tuple(settings.kpoint_shift) != (0.0, 0.0, 0.0):
        messages.append("the supercells use a Gamma-centred (unshifted) k-mesh: a shifted mesh "
                        "is not symmetric under the operations of a displaced cell")
    if len(crystal.unique_species) > 1:
        messages.append(POLAR_CAUTION)
    operations = find_symmetry(cell)
    disp = plan_displacements(cell, operations, ps.amplitude, both_signs=ps.both_signs)
    emit(f"supercell of {cell.n_atoms} atoms, space group {operations.international_symbol}, "
         f"{len(disp)} displacement(s), k-mesh {sc_settings.kpoint_mesh}")
    pps = None
    if record_dir is not None:
        from ..preflight import load_pseudopotentials
        pps = load_pseudopotentials(cell.species, sc_settings.pseudopotentials)
    records = _Records(record_dir, sc_settings, pps, accept_mismatch)
    state = {"start": None, "done": 0}

    def run_one(index):
        d = disp[index]
        moved = _displaced(cell, d)
        t0 = time.perf_counter()
        stored = records.load(index, moved, d)
        if stored is not None:
            return stored, True, 0.0, comm.rank
        out = solver(moved, sc_settings, state["start"])
        state["start"] = out.density
        return out, False, time.perf_counter() - t0, comm.rank

    def finished(index, outcome, computed_here):
        out, reused, seconds, _ = outcome
        if computed_here and not reused:
            records.save(index, _displaced(cell, disp[index]), disp[index],
                         DisplacedForces(out.forces, out.converged, out.iterations,
                                         out.net_force, out.messages))
        state["done"] += 1
        d = disp[index]
        emit(f"displacement {index + 1}/{len(disp)}: atom {d.atom + 1} by "
             f"{np.round(d.vector, 5).tolist()} bohr, "
             + ("from the record" if reused else f"{out.iterations} SCF iterations, "
                f"{seconds:.1f} s"))
        if progress is not None:
            progress(state["done"], len(disp))

    outcomes = map_over_ranks(lambda i: _strip(run_one(i)), range(len(disp)), comm,
                              on_result=finished)
    forces = np.array([o[0].forces for o in outcomes])
    history = tuple({"displacement": i + 1, "iterations": o[0].iterations,
                     "converged": o[0].converged, "net_force_Ha_per_bohr": o[0].net_force,
                     "reused_from_record": o[1], "seconds": o[2], "process": o[3],
                     "notes": list(o[0].messages)} for i, o in enumerate(outcomes))
    converged = all(o[0].converged for o in outcomes)
    if not converged:
        messages.append("some displaced ground states did not converge: see history")
    if records.mismatches:
        messages.append("records of another calculation were reused on request: "
                        + "; ".join(sorted(set(records.mismatches))))
    return phonons_from_forces(sup, operations, disp, forces, ps, masses,
                               converged=converged, history=history, messages=messages,
                               net_forces=[o[0].net_force for o in outcomes],
                               supercell_kpoint_mesh=sc_settings.kpoint_mesh)


def _strip(outcome):
    """Drop the density (large) before the result travels between processes."""
    out, *rest = outcome
    return (DisplacedForces(out.forces, out.converged, out.iterations, out.net_force,
                            out.messages), *rest)


def phonons_from_forces(sup, operations, displacements, forces, ps: PhononSettings,
                        masses: Mapping[str, float], *, converged=True, history=(),
                        messages=(), net_forces=(), supercell_kpoint_mesh=()) -> PhononResult:
    """Force constants, checks, dispersion and DOS from the forces of the displacements."""
    cell, crystal = sup.supercell, sup.primitive
    messages = list(messages)
    raw = force_constants_from_forces(cell, operations, displacements, forces)
    checks = {
        "acoustic_sum_violation_before": acoustic_sum_violation(raw),
        "site_symmetry_violation": site_symmetry_violation(cell, operations, displacements,
                                                           forces),
        "fit_residual": fit_residual(raw, displacements, forces),
        "largest_net_force_Ha_per_bohr": float(max(net_forces, default=0.0)),
    }
    phi = impose_acoustic_sum_rule(raw)
    checks["acoustic_sum_violation_after"] = acoustic_sum_violation(phi)
    masses_au = [masses[s] * AMU_ELECTRON_MASSES for s in crystal.species]
    fc = make_force_constants(sup, phi, masses_au)
    path = sample_path(_path_of(crystal, ps.path), ps.path_points)
    dispersion = fc.frequencies(path.kpoints)
    special = {}
    for index, label in path.labels:
        special.setdefault(label, [float(x) for x in dispersion[index]])
    grid = mesh_frequencies(fc, ps.dos_mesh)
    dos = phonon_dos(grid, method=ps.dos_method, width_THz=ps.dos_width)
    if grid.frequencies_THz.min() < -0.05:
        messages.append(f"imaginary frequencies down to {grid.frequencies_THz.min():.3f} THz "
                        "(shown as negative): the structure is unstable, not relaxed, or the "
                        "supercell or cutoff too small")
    return PhononResult(fc, tuple(displacements), np.asarray(forces), checks, path, dispersion,
                        dos, grid, special, bool(converged), tuple(history), tuple(messages),
                        ps, tuple(supercell_kpoint_mesh), dict(masses))


def force_constants_from_document(document: Mapping) -> ForceConstants:
    """The :class:`ForceConstants` of a saved phonon result document (``as_document()``),
    e.g. to evaluate frequencies on another q-mesh without recomputing any force."""
    if document.get("schema") != PHONON_SCHEMA:
        raise InputError(f"not a phonon result document (schema {PHONON_SCHEMA} expected)",
                         key="schema", value=document.get("schema"))
    cell = document["primitive_cell"]
    primitive = Crystal(np.array(cell["lattice_vectors_bohr"]), tuple(cell["species"]),
                        np.array(cell["fractional_positions"]))
    sup = make_supercell(primitive, np.array(document["supercell"]["matrix"]))
    phi = full_from_origin_rows(sup, np.array(document["force_constants_Ha_per_bohr2"]["blocks"]))
    masses = document["masses_dalton"]
    return make_force_constants(sup, phi, [masses[s] * AMU_ELECTRON_MASSES
                                           for s in primitive.species])
