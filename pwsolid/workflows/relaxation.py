"""Relaxation of atomic positions and of the cell (layer 5).

:func:`relax_structure` moves the atoms, the cell or both until the largest force
and the largest stress deviation from a target pressure fall below thresholds,
minimising the enthalpy H = F + P V (F the free energy the SCF minimises, P the
target pressure, V the cell volume) with the BFGS trust-radius optimiser of
:mod:`pwsolid.optimize`.

Coordinates (common practice for cell relaxations): the positions of the atoms
in the *starting* cell, Cartesian, x (n_atoms, 3) bohr, and a symmetric strain
eps of that cell; the current cell has rows a_i (1 + eps) and atoms at
r = x (1 + eps). The strain enters the optimiser multiplied by the starting cell's
length scale ell = V_0^(1/3), so that both parts are lengths in bohr and of
comparable stiffness. The gradient comes from the forces F_I = -dF/dR_I and the
stress sigma = (1/Omega) dF/d eps (the contract of issue 16):

    dH/dx   = -F (1 + eps)^T
    dH/deps = Omega (1 + eps)^-T (sigma + P 1)         (symmetrised)

(a strain d eps of the starting cell is the strain (1 + eps)^-1 d eps of the
current one). The space group of the starting crystal is kept unless asked
otherwise: symmetrised forces and stress give symmetric gradients already, and
every proposed step is projected onto the symmetric displacements and strains
(the group average), so round-off cannot break the symmetry over many steps.

Every step starts its SCF from the previous step's density (carried to the new
cell at fixed fractional coordinates by :mod:`pwsolid.warm_start`, and along with
the moved atoms: see :mod:`pwsolid.workflows.relaxation_evaluation`) and orbitals; a
checkpoint after every step (optimiser state, history, latest density: a
``relaxation-step`` record of :mod:`pwsolid.store`) lets a killed run resume. Its
fingerprint is the store's fingerprint of the starting crystal and settings plus
one ``relaxation.<key>`` field per relaxation setting (except ``max_steps``,
``warm_start`` and ``adaptive_scf_tolerance``: a resumed run may allow more moves
or start its SCFs otherwise), so a checkpoint of another relaxation is refused
naming what differs.

Inside: Ha, bohr, Ha/bohr, Ha/bohr^3; ``as_document()`` adds eV, angstrom and GPa.

References
----------
J. Nocedal and S. J. Wright, Numerical Optimization, 2nd ed. (Springer, 2006), ch. 4 and 6.
O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780 (1985) (the stress theorem).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import numpy as np

from ..crystal import Crystal
from ..errors import InputError
from ..optimize import QuasiNewtonState, advance, start_state
from ..parallel import world
from ..settings import GroundStateSettings
from ..store import Fingerprint, fingerprint, load_record, save_record
from ..stress import cartesian_rotations
from ..symmetry import atom_permutations, find_symmetry, identity_only
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from ..warm_start import WarmStart
from .cell_geometry import lattice_lengths
from .relaxation_evaluation import Evaluation, Evaluator, scf_evaluator, warm_start_of

__all__ = ["RelaxationSettings", "Evaluation", "RelaxationResult", "relax_structure",
           "relax_lattice", "scf_evaluator", "RELAXATION_SCHEMA", "MOVES"]

RELAXATION_SCHEMA = "pwsolid.relaxation/1"
#: What may move: the atoms, the cell, or both.
MOVES = ("positions", "cell", "both")
#: Initial Hessian model, Ha/bohr^2: a typical bond-stretching stiffness of a solid,
#: so the first step is about F / 0.5 (common practice; replaced after one step, eq. 6.20).
_INITIAL_CURVATURE = 0.5
#: Total volume change allowed over a relaxation, as a ratio to the starting volume.
_VOLUME_LIMITS = (0.5, 2.0)


@dataclass(frozen=True)
class RelaxationSettings:
    """What to relax and when to stop (atomic units).

    Attributes
    ----------
    moves : str
        ``"positions"``, ``"cell"`` or ``"both"``.
    force_threshold : float
        Largest force allowed at the end, Ha/bohr.
    stress_threshold : float
        Largest component of sigma + P 1 allowed at the end, Ha/bohr^3.
    target_pressure : float
        P of the enthalpy H = F + P V, Ha/bohr^3 (0: the zero-pressure structure).
    max_steps : int
        Largest number of moves (evaluations are one more); 0 only evaluates.
    keep_symmetry : bool
        Keep the space group of the starting crystal.
    largest_step : float
        Upper bound of the trust radius, bohr (atoms' displacements and the
        strain times V^(1/3) together).
    max_volume_change : float
        Largest relative volume change of one step; a larger one stops the
        relaxation as a collapsing (or exploding) cell.
    warm_start : bool
        Start each SCF from the previous step's density and orbitals.
    basis_correction : bool
        When the cell moves, add the estimated basis-set (Pulay) stress of
        :func:`pwsolid.stress.pulay_stress_estimate` (computed once, at the first
        step, and scaled as 1/Omega after), so that the cell relaxes to the minimum
        of the energy at a fixed cutoff, as an equation-of-state scan finds it.
    adaptive_scf_tolerance : bool
        When the atoms move, loosen the SCF tolerances of steps whose forces are far
        above the threshold (see ``_step_settings``); the converged step is always
        computed at the settings' own tolerances.
    """

    moves: str = "positions"
    force_threshold: float = 1e-4
    stress_threshold: float = 0.05 / HA_PER_BOHR3_GPA
    target_pressure: float = 0.0
    max_steps: int = 40
    keep_symmetry: bool = True
    largest_step: float = 0.4
    max_volume_change: float = 0.2
    warm_start: bool = True
    basis_correction: bool = True
    adaptive_scf_tolerance: bool = True

    def __post_init__(self):
        def bad(name, why, value=None):
            raise InputError(why, key=f"relaxation.{name}",
                             value=getattr(self, name) if value is None else value)

        if self.moves in ("none", "nothing", "", None):
            bad("moves", "a relaxation with nothing free to move has nothing to do; choose "
                "positions, cell or both (or run ground-state for a fixed structure)")
        if self.moves not in MOVES:
            bad("moves", f"accepted: {', '.join(MOVES)}")
        for name, hi in (("force_threshold", 1.0), ("stress_threshold", 1.0)):
            v = getattr(self, name)
            if not (isinstance(v, (int, float)) and math.isfinite(v) and 0 < v < hi):
                bad(name, "must be a positive value with its unit, below 1 atomic unit")
        p = self.target_pressure
        if not (isinstance(p, (int, float)) and math.isfinite(p) and abs(p) < 1.0):
            bad("target_pressure", "must be a finite pressure below 29,000 GPa in size")
        if isinstance(self.max_steps, bool) or not isinstance(self.max_steps, (int, np.integer)) \
                or not 0 <= self.max_steps <= 10000:
            bad("max_steps", "must be an integer from 0 to 10000")
        if not (0 < self.largest_step <= 5.0):
            bad("largest_step", "must lie between 0 and 5 bohr")
        if not (0 < self.max_volume_change <= 1.0):
            bad("max_volume_change", "must be a fraction in (0, 1]")
        object.__setattr__(self, "max_steps", int(self.max_steps))

    @property
    def moves_atoms(self) -> bool:
        return self.moves in ("positions", "both")

    @property
    def moves_cell(self) -> bool:
        return self.moves in ("cell", "both")

    def as_dict(self) -> dict:
        return {"moves": self.moves, "force_threshold_Ha_per_bohr": self.force_threshold,
                "stress_threshold_GPa": self.stress_threshold * HA_PER_BOHR3_GPA,
                "target_pressure_GPa": self.target_pressure * HA_PER_BOHR3_GPA,
                "max_steps": self.max_steps, "keep_symmetry": bool(self.keep_symmetry),
                "largest_step_bohr": self.largest_step,
                "max_volume_change": self.max_volume_change, "warm_start": bool(self.warm_start),
                "basis_correction": bool(self.basis_correction),
                "adaptive_scf_tolerance": bool(self.adaptive_scf_tolerance)}


# --- coordinates ---------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class _Coordinates:
    """The optimiser's vector z = [x (3 n), ell * eps (9)] for a reference crystal."""

    reference: Crystal
    moves_atoms: bool
    moves_cell: bool
    rotations: np.ndarray       # (n_ops, 3, 3) Cartesian, orthogonal
    perms: np.ndarray           # (n_ops, n_atoms)
    length: float               # ell = V0^(1/3), bohr

    @classmethod
    def of(cls, crystal: Crystal, relax: RelaxationSettings) -> "_Coordinates":
        ops = find_symmetry(crystal) if relax.keep_symmetry else identity_only()
        return cls(crystal, relax.moves_atoms, relax.moves_cell,
                   cartesian_rotations(crystal.lattice, ops.rotations),
                   atom_permutations(ops, crystal.positions, crystal.species),
                   crystal.volume ** (1.0 / 3.0))

    @property
    def n_atoms_vars(self) -> int:
        return 3 * self.reference.n_atoms if self.moves_atoms else 0

    def start(self) -> np.ndarray:
        parts = [self.reference.cartesian_positions.ravel()] if self.moves_atoms else []
        return np.concatenate(parts + ([np.zeros(9)] if self.moves_cell else []))

    def split(self, z) -> tuple[np.ndarray, np.ndarray]:
        """(x (n, 3) bohr in the reference cell, 1 + eps (3, 3))."""
        z = np.asarray(z, float)
        n = self.n_atoms_vars
        x = z[:n].reshape(-1, 3) if self.moves_atoms else self.reference.cartesian_positions
        eps = z[n:].reshape(3, 3) / self.length if self.moves_cell else np.zeros((3, 3))
        return x, np.eye(3) + eps

    def crystal_at(self, z) -> Crystal:
        x, deform = self.split(z)
        ref = self.reference
        frac = x @ np.linalg.inv(ref.lattice)
        return Crystal(ref.lattice @ deform, ref.species, frac, ref.min_distance)

    def gradient(self, z, ev: Evaluation, pressure: float) -> np.ndarray:
        """dH/dz from forces and stress at ``crystal_at(z)`` (see the module notes)."""
        _, deform = self.split(z)
        parts = []
        if self.moves_atoms:
            parts.append((-np.asarray(ev.forces) @ deform.T).ravel())
        if self.moves_cell:
            omega = self.reference.volume * float(np.linalg.det(deform))
            g = omega * np.linalg.inv(deform).T @ (np.asarray(ev.stress) + pressure * np.eye(3))
            parts.append((0.5 * (g + g.T)).ravel() / self.length)
        return self.project(np.concatenate(parts))

    def project(self, v) -> np.ndarray:
        """Group average of a displacement-and-strain vector (orthogonal projector)."""
        v = np.array(v, float)
        n = self.n_atoms_vars
        n_ops = len(self.rotations)
        if self.moves_atoms:
            u = v[:n].reshape(-1, 3)
            sym = np.zeros_like(u)
            for rot, perm in zip(self.rotations, self.perms):
                sym[perm] += u @ rot.T
            sym /= n_ops
            v[:n] = (sym - sym.mean(axis=0)).ravel()     # no rigid translation
        if self.moves_cell:
            e = v[n:].reshape(3, 3)
            e = 0.5 * (e + e.T)
            v[n:] = np.einsum("aij,jk,alk->il", self.rotations, e, self.rotations).ravel() / n_ops
        return v


# --- persistence: relaxation-step records of the one store -----------------------

#: Relaxation settings that do not enter a checkpoint's fingerprint: a resumed run may
#: allow more moves, and how each SCF starts and how tightly early steps converge change
#: the way, not the structure reached (the last step is always at the settings' own
#: tolerances).
_PATH_ONLY_RELAXATION = ("max_steps", "warm_start", "adaptive_scf_tolerance")


def _relaxation_fingerprint(crystal: Crystal, settings: GroundStateSettings,
                            relax: RelaxationSettings) -> Fingerprint:
    """The store's fingerprint of the starting crystal and its ground-state settings
    (no FFT grid: the cell moves), extended by one ``relaxation.<key>`` field per
    relaxation setting, so that a refusal names the setting that differs."""
    from ..preflight import load_pseudopotentials

    pps = load_pseudopotentials(crystal.species, settings.pseudopotentials)
    ground = fingerprint(crystal, settings, pps)
    mine = {f"relaxation.{k}": v for k, v in relax.as_dict().items()
            if k not in _PATH_ONLY_RELAXATION}
    return Fingerprint(json.loads(json.dumps({**ground.values, **mine})))


def _save_step(path, fp: Fingerprint, history: list, state: QuasiNewtonState,
               warm: WarmStart | None, accepted=()) -> None:
    """Write the finished steps, the optimiser state and the density the next step
    starts from atomically (a ``relaxation-step`` record; ``accepted``: differences
    from the calculation the steps began as, accepted on resuming, kept in the file)."""
    arrays = {f"optimizer_{k}": v for k, v in state.as_arrays().items()}
    meta = {"history": history}
    if warm is not None:
        arrays["density"] = np.asarray(warm.density, float)
        meta["density_volume_bohr3"] = warm.volume
    save_record(path, "relaxation-step", fp, arrays, meta, accepted_mismatches=accepted)


def _load_steps(path, fp: Fingerprint, accept_mismatch: bool = False):
    """(history, optimiser state, warm start or None, accepted differences) from a
    checkpoint, or None when there is none; InputError (naming what differs) for one
    of another relaxation unless ``accept_mismatch``, and for a damaged, foreign or
    future one."""
    if path is None or not Path(path).exists():
        return None
    record = load_record(path, "relaxation-step", fp, accept_mismatch=accept_mismatch)
    meta = record.metadata
    try:
        state = QuasiNewtonState.from_arrays({k[len("optimizer_"):]: v
                                              for k, v in record.arrays.items()
                                              if k.startswith("optimizer_")})
        history = list(meta["history"])
        density = record.arrays.get("density")
        start = None if density is None else WarmStart(density,
                                                       float(meta["density_volume_bohr3"]))
    except (KeyError, TypeError, ValueError):
        raise InputError("the relaxation checkpoint lacks the optimiser state or the steps; "
                         "delete it or pass --fresh to start over", source=str(path)) from None
    return history, state, start, record.mismatches


# --- the result ----------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class RelaxationResult:
    """Outcome of :func:`relax_structure`.

    Attributes
    ----------
    converged : bool
        Both thresholds met (those of what was allowed to move).
    crystal : Crystal
        The final structure: the converged one, else the lowest-enthalpy one.
    initial_crystal : Crystal
    ground_state : GroundState or None
        The SCF result at ``crystal`` (None for model evaluators).
    steps : list of dict
        One record per evaluation (see :func:`relax_structure`).
    settings : RelaxationSettings
    messages : tuple of str
    final_step : int
        Index in ``steps`` of ``crystal``.
    """

    converged: bool
    crystal: Crystal
    initial_crystal: Crystal
    ground_state: Any
    steps: list
    settings: RelaxationSettings
    messages: tuple = ()
    final_step: int = 0

    @property
    def n_moves(self) -> int:
        """Structures moved to (evaluations minus one)."""
        return len(self.steps) - 1

    @property
    def scf_iterations(self) -> int:
        return int(sum(s["scf_iterations"] for s in self.steps))

    @property
    def final(self) -> dict:
        return self.steps[self.final_step]

    @property
    def lattice_constants(self) -> dict[str, float]:
        """``{"a": ..}`` (cubic), ``{"a", "c", "c_over_a"}`` (hexagonal), bohr."""
        lengths = lattice_lengths(self.crystal.lattice)
        if set(lengths) == {"a", "c"}:
            lengths["c_over_a"] = lengths["c"] / lengths["a"]
        return lengths

    def as_document(self) -> dict:
        """The trajectory document (schema ``pwsolid.relaxation/1``)."""
        lat = {k: (v if k == "c_over_a" else v * BOHR_ANGSTROM)
               for k, v in self.lattice_constants.items()}
        return {
            "schema": RELAXATION_SCHEMA,
            "converged": bool(self.converged),
            "settings": self.settings.as_dict(),
            "moves_made": self.n_moves,
            "scf_iterations_total": self.scf_iterations,
            "final_step": self.final_step,
            "initial_structure": self.initial_crystal.as_dict(),
            "final_structure": {**self.crystal.as_dict(),
                                "lattice_vectors_angstrom":
                                    (self.crystal.lattice * BOHR_ANGSTROM).tolist(),
                                "lattice_constants_angstrom": lat},
            "steps": self.steps,
            "messages": list(self.messages),
            "units": {"energy": "Ha (and eV where suffixed)", "force": "Ha/bohr",
                      "stress": "GPa", "length": "bohr unless suffixed"},
        }

    def summary_lines(self) -> list[str]:
        f = self.final
        lines = [f"Relaxation {'converged' if self.converged else 'NOT converged'} after "
                 f"{self.n_moves} moves ({self.scf_iterations} SCF iterations in all)",
                 f"  final energy {f['energy_Ha']:.8f} Ha, enthalpy {f['enthalpy_Ha']:.8f} Ha",
                 f"  largest force {f['largest_force_Ha_per_bohr']:.2e} Ha/bohr, pressure "
                 f"{f['pressure_GPa']:.3f} GPa, largest stress deviation "
                 f"{f['largest_stress_deviation_GPa']:.3f} GPa"]
        lat = ", ".join(f"{k} = {v:.5f}" + ("" if k == "c_over_a" else " angstrom")
                        for k, v in ((k, v if k == "c_over_a" else v * BOHR_ANGSTROM)
                                     for k, v in self.lattice_constants.items()))
        lines.append(f"  cell volume {self.crystal.volume * BOHR_ANGSTROM ** 3:.4f} angstrom^3, "
                     + lat)
        return lines


# --- the workflow --------------------------------------------------------------------

def _record(k: int, crystal: Crystal, ev: Evaluation, relax: RelaxationSettings,
            step_length: float) -> dict:
    stress = np.asarray(ev.stress, float)
    deviation = stress + relax.target_pressure * np.eye(3)
    forces = np.asarray(ev.forces, float)
    energy = float(ev.energy)
    return {
        "step": k,
        "energy_Ha": energy,
        "energy_eV": energy * HARTREE_EV,
        "enthalpy_Ha": energy + relax.target_pressure * crystal.volume,
        "largest_force_Ha_per_bohr": float(np.linalg.norm(forces, axis=1).max()),
        "forces_Ha_per_bohr": forces.tolist(),
        "stress_GPa": (stress * HA_PER_BOHR3_GPA).tolist(),
        "pressure_GPa": float(-np.trace(stress) / 3 * HA_PER_BOHR3_GPA),
        "largest_stress_deviation_GPa": float(np.abs(deviation).max() * HA_PER_BOHR3_GPA),
        "step_length_bohr": float(step_length),
        "volume_bohr3": crystal.volume,
        "lattice_vectors_bohr": crystal.lattice.tolist(),
        "fractional_positions": crystal.positions.tolist(),
        "scf_iterations": int(ev.scf_iterations),
        "scf_converged": bool(ev.scf_converged),
    }


def _meets(rec: dict, relax: RelaxationSettings) -> bool:
    ok = True
    if relax.moves_atoms:
        ok &= rec["largest_force_Ha_per_bohr"] < relax.force_threshold
    if relax.moves_cell:
        ok &= rec["largest_stress_deviation_GPa"] < relax.stress_threshold * HA_PER_BOHR3_GPA
    return bool(ok and rec["scf_converged"])


def _progress_line(rec: dict) -> str:
    return (f"{rec['step']:>4} {rec['energy_Ha']:>18.8f} {rec['largest_force_Ha_per_bohr']:>12.3e} "
            f"{rec['pressure_GPa']:>11.4f} {rec['largest_stress_deviation_GPa']:>11.4f} "
            f"{rec['step_length_bohr']:>9.4f} {rec['scf_iterations']:>5}")


_PROGRESS_HEAD = (f"{'step':>4} {'energy (Ha)':>18} {'force Ha/bohr':>12} {'P (GPa)':>11} "
                  f"{'dev. (GPa)':>11} {'step bohr':>9} {'SCF':>5}")


def _volume_problem(coords: _Coordinates, z_old, z_new, relax: RelaxationSettings) -> str | None:
    """A message when the proposed step changes the volume too much (a collapsing cell)."""
    if not coords.moves_cell:
        return None
    v_old = float(np.linalg.det(coords.split(z_old)[1]))
    v_new = float(np.linalg.det(coords.split(z_new)[1]))
    change = v_new / v_old - 1.0
    lo, hi = _VOLUME_LIMITS
    if abs(change) > relax.max_volume_change or not lo <= v_new <= hi:
        return (f"the cell {'collapses' if change < 0 else 'blows up'}: the next step would "
                f"change the volume by {100 * change:+.1f} % ({v_new:.3f} times the starting "
                f"volume; the bounds are {100 * relax.max_volume_change:g} % per step and "
                f"{lo:g} to {hi:g} times in all); check the target pressure, the "
                "pseudopotentials and the cutoff, or lower relaxation.largest_step")
    return None


def _energy_noise(relax: RelaxationSettings, settings: GroundStateSettings) -> float:
    """Energy rises the optimiser ignores. With the atoms alone moving, the plane-wave set is
    fixed and F is smooth: ten SCF tolerances. With the cell moving at a fixed cutoff, F
    jumps whenever a plane wave crosses the cutoff (2e-4 Ha for a 0.1 % strain of silicon at
    10 Ha, larger than the change the step was for), so the energy is no merit function:
    every step is accepted and the gradient alone steers (infinite noise)."""
    return math.inf if relax.moves_cell else 10 * settings.energy_tolerance


def _free_coordinates(coords: _Coordinates, n_vars: int) -> int | None:
    """Number of symmetry-allowed directions (the trace of the projector); None when large."""
    if n_vars > 600:
        return None
    eye = np.eye(n_vars)
    return int(round(sum(coords.project(e) @ e for e in eye)))


def _default_evaluator(settings: GroundStateSettings, relax: RelaxationSettings, scf_log):
    adaptive = relax.moves_atoms and relax.adaptive_scf_tolerance
    return scf_evaluator(settings, symmetrize=relax.keep_symmetry, log=scf_log,
                         warm=relax.warm_start, pulay=relax.moves_cell and relax.basis_correction,
                         force_threshold=relax.force_threshold if adaptive else None)


def _resumed(checkpoint, fp: Fingerprint, relax: RelaxationSettings, coords: _Coordinates,
             fresh: bool, accept_mismatch: bool, say):
    """(history, optimiser state, warm start, messages, accepted differences) of a
    checkpoint, or a fresh start."""
    loaded = None if fresh else _load_steps(checkpoint, fp, accept_mismatch)
    if loaded is None:
        return [], None, None, [], ()
    history, state, previous, accepted = loaded
    if len(state.x) != len(coords.start()):
        raise InputError(f"the relaxation checkpoint moves {len(state.x)} coordinates, this "
                         f"relaxation {len(coords.start())} (other atoms or other moves): it "
                         "cannot be continued; delete it or pass --fresh", source=str(checkpoint))
    if len(history) - 1 >= relax.max_steps:
        raise InputError(f"the checkpoint already holds {len(history) - 1} moves, the limit; "
                         "raise relaxation.max_steps to continue or pass --fresh",
                         key="relaxation.max_steps", value=relax.max_steps,
                         source=str(checkpoint))
    notes = [f"resumed from {checkpoint} after step {len(history) - 1}"]
    if accepted:
        notes.append("the checkpoint was made for another calculation, accepted on request: "
                     + "; ".join(accepted))
    for note in notes:
        say(note)
    return history, state, previous, notes, accepted


def relax_structure(crystal: Crystal, settings: GroundStateSettings | None = None,
                    relaxation: RelaxationSettings | None = None, *,
                    evaluator: Evaluator | None = None, checkpoint=None,
                    log: Callable[[str], None] | None = None,
                    scf_log: Callable[[str], None] | None = None,
                    fresh: bool = False, accept_mismatch: bool = False) -> RelaxationResult:
    """Relax the positions, the cell or both of a crystal (BFGS on the enthalpy).

    Parameters
    ----------
    crystal
        Starting structure; its space group is kept when ``relaxation.keep_symmetry``.
    settings
        Ground-state settings of every step.
    relaxation
        What moves, thresholds, target pressure, step limits.
    evaluator
        ``evaluator(crystal, previous) -> Evaluation``; default :func:`scf_evaluator`
        (tests pass model energies).
    checkpoint
        File written after every step; an existing one of the same relaxation is
        continued from (one of another relaxation raises InputError). Removed
        when the relaxation converges. Under MPI every process reads it and only
        process 0 writes it.
    fresh
        Ignore an existing checkpoint (it is overwritten by the first step).
    accept_mismatch
        Continue from a checkpoint of another calculation (other settings, another
        starting crystal or relaxation settings) instead of refusing it, provided
        the same coordinates move; the differences go into ``messages`` and stay
        recorded in the checkpoint.
    log, scf_log
        Receive the progress lines of the steps and of each SCF.

    Returns
    -------
    RelaxationResult
        ``steps`` holds one record per evaluation: step, energy_Ha, enthalpy_Ha,
        largest_force_Ha_per_bohr, forces, stress_GPa, pressure_GPa,
        largest_stress_deviation_GPa, step_length_bohr (of the optimiser's step,
        strain counted as eps V^(1/3)), volume, lattice, positions, scf_iterations,
        scf_converged, accepted. Not converged: ``converged`` False, the reason in
        ``messages``, ``crystal`` the lowest-enthalpy structure.
    """
    relax = relaxation or RelaxationSettings()
    settings = settings or GroundStateSettings()
    say = log or (lambda line: None)
    coords = _Coordinates.of(crystal, relax)
    evaluate = evaluator or _default_evaluator(settings, relax, scf_log)
    fp = _relaxation_fingerprint(crystal, settings, relax)
    history, state, previous, messages, accepted = _resumed(checkpoint, fp, relax, coords,
                                                            fresh, accept_mismatch, say)
    writer = checkpoint is not None and world().rank == 0
    z = coords.start() if state is None else state.proposal
    free = _free_coordinates(coords, len(z))
    if free is not None:
        say(f"{free} coordinates free to move ({relax.moves}, "
            f"{'space group kept' if relax.keep_symmetry else 'symmetry not imposed'})")
    say(_PROGRESS_HEAD)
    for rec in history:
        say(_progress_line(rec))
    best = converged = None
    while True:
        k = len(history)
        cell = coords.crystal_at(z)
        ev = evaluate(cell, previous if relax.warm_start else None)
        rec = _record(k, cell, ev, relax, 0.0 if state is None else np.linalg.norm(z - state.x))
        if ev.loose and _meets(rec, relax):         # confirm at the settings' own tolerances
            loose_iterations = ev.scf_iterations
            ev = evaluate(cell, ev if relax.warm_start else None)
            rec = _record(k, cell, ev, relax, rec["step_length_bohr"])
            rec["scf_iterations"] += loose_iterations
        history.append(rec)
        say(_progress_line(rec))
        g = coords.gradient(z, ev, relax.target_pressure)
        if state is None:
            state = start_state(z, rec["enthalpy_Ha"], g, radius=min(0.2, relax.largest_step),
                                max_radius=relax.largest_step, curvature=_INITIAL_CURVATURE,
                                noise=_energy_noise(relax, settings))
        else:
            state = advance(state, z, rec["enthalpy_Ha"], g, project=coords.project)
        rec["accepted"] = bool(np.array_equal(state.x, z))
        if rec["accepted"] or best is None:
            best = (k, cell, ev)
        previous = best[2]
        messages += [f"step {k}: {m}" for m in ev.messages]
        if not ev.scf_converged:
            messages.append(f"step {k}: the SCF did not converge; its forces are approximate")
        converged = _meets(rec, relax)
        if converged:
            best = (k, cell, ev)
            break
        problem = _volume_problem(coords, state.x, state.proposal, relax)
        if problem:
            messages.append(problem)
            break
        if writer:
            _save_step(checkpoint, fp, history, state, warm_start_of(previous), accepted)
        if k >= relax.max_steps:
            messages.append(f"the thresholds were not reached in {relax.max_steps} moves; "
                            "raise relaxation.max_steps (the run continues from its checkpoint)")
            break
        z = state.proposal
    if converged and writer and Path(checkpoint).exists():
        Path(checkpoint).unlink()
    for m in messages:
        say(m)
    k, cell, ev = best
    return RelaxationResult(bool(converged), cell, crystal, ev.ground_state, history, relax,
                            tuple(messages), k)


def relax_lattice(crystal: Crystal, settings: GroundStateSettings | None = None, *,
                  stress_threshold: float = 0.01 / HA_PER_BOHR3_GPA,
                  target_pressure: float = 0.0, max_steps: int = 30,
                  basis_correction: bool = True, **kwargs) -> RelaxationResult:
    """Relax the cell of a crystal at fixed fractional positions, keeping its space group.

    For a cubic crystal the symmetrised stress is isotropic, so only the lattice
    constant moves; for a hexagonal one a and c move separately, so c/a relaxes
    directly (``result.lattice_constants`` gives a, c and c/a). Keyword arguments
    go to :func:`relax_structure`.
    """
    relax = RelaxationSettings(moves="cell", stress_threshold=stress_threshold,
                               target_pressure=target_pressure, max_steps=max_steps,
                               basis_correction=basis_correction)
    return relax_structure(crystal, settings, relax, **kwargs)
