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
cell at fixed fractional coordinates) and orbitals; a checkpoint after every step
(optimiser state, history, latest density) lets a killed run resume.

Inside: Ha, bohr, Ha/bohr, Ha/bohr^3; ``as_document()`` adds eV, angstrom and GPa.

References
----------
J. Nocedal and S. J. Wright, Numerical Optimization, 2nd ed. (Springer, 2006), ch. 4 and 6.
O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780 (1985) (the stress theorem).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

import numpy as np

from ..crystal import Crystal
from ..errors import InputError
from ..optimize import QuasiNewtonState, advance, start_state
from ..safe_files import read_archive, write_archive
from ..settings import GroundStateSettings
from ..symmetry import find_symmetry, identity_only
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from .equation_of_state import _fingerprint, lattice_lengths, transfer_density

__all__ = ["RelaxationSettings", "Evaluation", "RelaxationResult", "relax_structure",
           "relax_lattice", "scf_evaluator", "RELAXATION_SCHEMA", "MOVES"]

RELAXATION_SCHEMA = "pwsolid.relaxation/1"
_CHECKPOINT_FORMAT = "pwsolid.relaxation-checkpoint/1"
#: What may move: the atoms, the cell, or both.
MOVES = ("positions", "cell", "both")
#: Initial Hessian model, Ha/bohr^2: a typical bond-stretching stiffness of a solid,
#: so the first step is about F / 0.5 (common practice; replaced after one step, eq. 6.20).
_INITIAL_CURVATURE = 0.5
#: Total volume change allowed over a relaxation, as a ratio to the starting volume.
_VOLUME_LIMITS = (0.5, 2.0)
#: Positions closer than this (fractional) are the same site when mapping atoms by symmetry.
_SITE_TOLERANCE = 1e-4


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
                "max_volume_change": self.max_volume_change, "warm_start": bool(self.warm_start)}


# --- evaluations ---------------------------------------------------------------------

@dataclass(frozen=True)
class Evaluation:
    """Energy and its derivatives at one structure.

    Attributes
    ----------
    energy : float
        The free energy F the SCF minimises, Ha.
    forces : ndarray (n_atoms, 3) float64
        F_I = -dF/dR_I, Ha/bohr, Cartesian.
    stress : ndarray (3, 3) float64
        sigma = (1/Omega) dF/d eps, Ha/bohr^3.
    ground_state : pwsolid.scf.GroundState or None
        The SCF result (None for model evaluators).
    scf_iterations : int
    scf_converged : bool
    messages : tuple of str
    """

    energy: float
    forces: np.ndarray
    stress: np.ndarray
    ground_state: Any = None
    scf_iterations: int = 0
    scf_converged: bool = True
    messages: tuple = ()


#: ``evaluator(crystal, previous) -> Evaluation``; ``previous`` is the last
#: evaluation (None at the start or after a resume) or, after a resume, a
#: ``(density, volume)`` pair of the last step.
Evaluator = Callable[[Crystal, Any], Evaluation]


def _warm_start(previous, crystal: Crystal, setup):
    """(density, orbitals) to start this cell's SCF from the previous step's; (None, None)
    without one. The density keeps its fractional-coordinate values (times V_old / V_new)."""
    from ..scf import WavefunctionStart

    if previous is None:
        return None, None
    if isinstance(previous, tuple):            # a resumed run: the saved density only
        density, volume = previous
        gs_waves = None
    else:
        gs = previous.ground_state
        density = gs.density if gs.spin_densities is None else gs.spin_densities
        volume, gs_waves = gs.crystal.volume, WavefunctionStart.of(gs)
    density = np.asarray(density, float)
    if density.ndim == 4:
        moved = np.stack([transfer_density(d, volume, setup.grid_shape, crystal.volume)
                          for d in density])
    else:
        moved = transfer_density(density, volume, setup.grid_shape, crystal.volume)
    return moved, gs_waves


def scf_evaluator(settings: GroundStateSettings, *, symmetrize: bool = True,
                  log: Callable[[str], None] | None = None, warm: bool = True) -> Evaluator:
    """The evaluator of a real relaxation: SCF, then analytic forces and stress.

    Parameters
    ----------
    settings
        Ground-state settings of every step.
    symmetrize
        Symmetrise forces and stress with the crystal's operations.
    log
        Receives the SCF's iteration lines.
    warm
        Start every SCF from the previous step's density and orbitals.
    """
    from ..forces import atomic_forces
    from ..scf import ground_state, prepare
    from ..stress import stress_tensor

    def evaluate(crystal: Crystal, previous) -> Evaluation:
        setup = prepare(crystal, settings)
        density, waves = _warm_start(previous if warm else None, crystal, setup)
        gs = ground_state(crystal, settings, setup=setup, log=log, initial_density=density,
                          initial_wavefunctions=waves)
        forces = atomic_forces(gs, symmetrize=symmetrize)
        stress = stress_tensor(gs, symmetrize=symmetrize)
        return Evaluation(gs.free_energy, np.asarray(forces.cartesian, float),
                          np.asarray(stress.tensor, float), gs, gs.iterations, gs.converged,
                          tuple(gs.messages))

    return evaluate


# --- coordinates ---------------------------------------------------------------------

def _cartesian_rotations(lattice: np.ndarray, rotations: np.ndarray) -> np.ndarray:
    """Cartesian R = L^T W L^-T of fractional rotations W (lattice rows), shape (n_ops, 3, 3)."""
    return np.einsum("ji,ajk,kl->ail", lattice, rotations, np.linalg.inv(lattice).T)


def _atom_maps(crystal: Crystal, ops) -> np.ndarray:
    """perm[o, i] = j with W_o x_i + t_o = x_j (mod 1), shape (n_ops, n_atoms)."""
    x = crystal.positions
    moved = np.einsum("aij,nj->ani", ops.rotations, x) + ops.translations[:, None, :]
    d = moved[:, :, None, :] - x[None, None, :, :]
    d -= np.rint(d)
    dist = np.abs(d).max(axis=-1)                       # (n_ops, n_atoms, n_atoms)
    perm = dist.argmin(axis=-1)
    if np.any(dist.min(axis=-1) > _SITE_TOLERANCE):
        raise InputError("the symmetry operations do not map the atoms onto each other",
                         key="crystal.atoms")
    return perm


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
                   _cartesian_rotations(crystal.lattice, ops.rotations),
                   _atom_maps(crystal, ops), crystal.volume ** (1.0 / 3.0))

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


# --- persistence (two small functions, so that a store can take them over) ----------

def _save_step(path, fingerprint: str, history: list, state: QuasiNewtonState,
               density: np.ndarray | None, volume: float) -> None:
    """Write the finished steps, the optimiser state and the latest density atomically."""
    arrays = {f"optimizer_{k}": v for k, v in state.as_arrays().items()}
    if density is not None:
        arrays["density"] = np.asarray(density, float)
    meta = {"fingerprint": fingerprint, "history": history, "density_volume_bohr3": volume}
    write_archive(path, _CHECKPOINT_FORMAT, arrays, json.loads(json.dumps(meta, default=float)))


def _load_steps(path, fingerprint: str):
    """(history, optimiser state, (density, volume) or None) from a checkpoint, or None
    when there is none; InputError for one of another relaxation or a corrupted one."""
    if path is None or not Path(path).exists():
        return None
    arrays, meta = read_archive(path, _CHECKPOINT_FORMAT, "relaxation checkpoint")
    if meta.get("fingerprint") != fingerprint:
        raise InputError("the relaxation checkpoint belongs to another crystal or other "
                         "settings; delete it or pass --fresh to start over", source=str(path))
    state = QuasiNewtonState.from_arrays({k[len("optimizer_"):]: v for k, v in arrays.items()
                                          if k.startswith("optimizer_")})
    density = arrays.get("density")
    start = None if density is None else (density, float(meta["density_volume_bohr3"]))
    return list(meta["history"]), state, start


def _relaxation_fingerprint(crystal, settings, relax: RelaxationSettings) -> str:
    ground = _fingerprint(crystal, settings)[0] if settings is not None else ""
    mine = {k: v for k, v in relax.as_dict().items() if k != "max_steps"}
    return ground + ":" + json.dumps(mine, sort_keys=True)


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


def _free_coordinates(coords: _Coordinates, n_vars: int) -> int | None:
    """Number of symmetry-allowed directions (the trace of the projector); None when large."""
    if n_vars > 600:
        return None
    eye = np.eye(n_vars)
    return int(round(sum(coords.project(e) @ e for e in eye)))


def relax_structure(crystal: Crystal, settings: GroundStateSettings | None = None,
                    relaxation: RelaxationSettings | None = None, *,
                    evaluator: Evaluator | None = None, checkpoint=None,
                    log: Callable[[str], None] | None = None,
                    scf_log: Callable[[str], None] | None = None) -> RelaxationResult:
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
        when the relaxation converges.
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
    evaluate = evaluator or scf_evaluator(settings, symmetrize=relax.keep_symmetry, log=scf_log,
                                          warm=relax.warm_start)
    fp = _relaxation_fingerprint(crystal, settings, relax)
    history, state, previous, messages = [], None, None, []
    loaded = _load_steps(checkpoint, fp)
    if loaded is not None:
        history, state, previous = loaded
        if len(history) - 1 >= relax.max_steps:
            raise InputError(f"the checkpoint already holds {len(history) - 1} moves, the limit; "
                             "raise relaxation.max_steps to continue or pass --fresh",
                             key="relaxation.max_steps", value=relax.max_steps,
                             source=str(checkpoint))
        messages.append(f"resumed from {checkpoint} after step {len(history) - 1}")
        say(messages[-1])
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
        history.append(rec)
        say(_progress_line(rec))
        g = coords.gradient(z, ev, relax.target_pressure)
        if state is None:
            state = start_state(z, rec["enthalpy_Ha"], g, radius=min(0.2, relax.largest_step),
                                max_radius=relax.largest_step, curvature=_INITIAL_CURVATURE,
                                noise=10 * settings.energy_tolerance)
        else:
            state = advance(state, z, rec["enthalpy_Ha"], g, project=coords.project)
        rec["accepted"] = bool(np.array_equal(state.x, z))
        if rec["accepted"] or best is None:
            best = (k, cell, ev)
        previous = best[2]
        if not ev.scf_converged:
            messages.append(f"step {k}: the SCF did not converge; its forces are approximate")
        converged = _meets(rec, relax)
        if converged:
            best = (k, cell, ev)
            break
        if k >= relax.max_steps:
            messages.append(f"the thresholds were not reached in {relax.max_steps} moves; "
                            "raise relaxation.max_steps (the run continues from its checkpoint)")
            break
        problem = _volume_problem(coords, state.x, state.proposal, relax)
        if problem:
            messages.append(problem)
            break
        z = state.proposal
        if checkpoint is not None:
            _save_step(checkpoint, fp, history, state, _density_of(previous),
                       best[1].volume)
    if converged and checkpoint is not None and Path(checkpoint).exists():
        Path(checkpoint).unlink()
    for m in messages:
        say(m)
    k, cell, ev = best
    return RelaxationResult(bool(converged), cell, crystal, ev.ground_state, history, relax,
                            tuple(messages), k)


def _density_of(ev):
    """The density to keep in a checkpoint (total or (2, ...) spin densities), or None."""
    if isinstance(ev, tuple):
        return ev[0]
    gs = getattr(ev, "ground_state", None)
    if gs is None:
        return None
    return gs.density if gs.spin_densities is None else gs.spin_densities


def relax_lattice(crystal: Crystal, settings: GroundStateSettings | None = None, *,
                  stress_threshold: float = 0.01 / HA_PER_BOHR3_GPA,
                  target_pressure: float = 0.0, max_steps: int = 30,
                  **kwargs) -> RelaxationResult:
    """Relax the cell of a crystal at fixed fractional positions, keeping its space group.

    For a cubic crystal the symmetrised stress is isotropic, so only the lattice
    constant moves; for a hexagonal one a and c move separately, so c/a relaxes
    directly (``result.lattice_constants`` gives a, c and c/a). Keyword arguments
    go to :func:`relax_structure`.
    """
    relax = RelaxationSettings(moves="cell", stress_threshold=stress_threshold,
                               target_pressure=target_pressure, max_steps=max_steps)
    return relax_structure(crystal, settings, relax, **kwargs)
