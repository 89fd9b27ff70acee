"""Elastic constants from stress-strain lines (layer 5).

:func:`elastic_constants` strains the input cell, computes the analytic stress of every
strained cell (:mod:`pwsolid.stress`) with its atoms relaxed inside it
(:func:`pwsolid.workflows.relaxation.relax_structure`, positions only), fits the stress
against the strain and solves for the independent constants of the crystal's point
group (:mod:`pwsolid.elasticity`: found by averaging a general tensor over the group
that spglib reports, not from a table of crystal systems).

The plan: the fewest unit Voigt strains that fix every independent constant (cubic:
e_xx and the shear e_yz; hexagonal: e_xx, e_zz, e_yz; ...), each at ``strains_per_sign``
amplitudes of both signs up to ``largest_strain``, plus the unstrained cell once. Each
stress component is fitted by a quadratic in the amplitude (its linear coefficient is
the slope at zero strain; the quadratic term takes up the third-order elasticity). The
stress of the first evaluation of each strained cell, before its atoms move, gives the
clamped-ion constants beside the relaxed ones; for diamond and zincblende the relaxed
positions give Kleinman's internal-strain parameter zeta (0: the atoms follow the
homogeneous strain, 1: the sublattices shift so that the four bonds keep equal lengths).

Every finished strain point goes at once into a ``elastic-strain-points`` log of
:mod:`pwsolid.store` under the fingerprint of the crystal, its settings and the
elastic settings; a re-run skips the points it finds (a killed run resumes).

A k-point mesh that the crystal's operations do not map onto itself (a half-step
shifted mesh of an fcc or hexagonal cell) is refused: the SCF symmetrises such a mesh
with the group of each cell, and a strained cell has a smaller group than the
unstrained one, so the two would sample the Brillouin zone differently and the
difference would enter the slopes.

Inside: Ha, bohr, Ha/bohr^3; ``as_document()`` adds GPa and angstrom.

References
----------
O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3792 (1985) (stress-strain route, Si).
L. Kleinman, Phys. Rev. 128, 2614 (1962) (the internal-strain parameter).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from ..crystal import Crystal
from ..elasticity import (ElasticPattern, StressStrainFit, born_stability, elastic_pattern,
                          fit_stress_strain, strain_patterns, stress_voigt, voigt_reuss_hill,
                          voigt_strain_tensor)
from ..errors import InputError
from ..kpoints import irreducible_kpoints
from ..parallel import world
from ..settings import GroundStateSettings
from ..store import Fingerprint, RecordKind, RecordLog, fingerprint, register_kind
from ..stress import cartesian_rotations
from ..symmetry import find_symmetry
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA
from .relaxation import RelaxationSettings, relax_structure
from .relaxation_evaluation import Evaluator, scf_evaluator

__all__ = ["ElasticSettings", "ElasticResult", "elastic_constants", "check_mesh_symmetry",
           "internal_strain_parameter", "ELASTIC_SCHEMA"]

ELASTIC_SCHEMA = "pwsolid.elastic-constants/1"
STRAIN_POINTS = register_kind(RecordKind(
    "elastic-strain-points", "restart file of an elastic-constants run", 1, "log", "points",
    remedy="delete it, pass --fresh, or give another file (--restart-file)"))
_VOIGT_LABELS = ("xx", "yy", "zz", "yz", "xz", "xy")
#: Reference pressures above this (Ha/bohr^3; 1 GPa) earn a note: the slopes of a
#: pre-stressed cell differ from the elastic constants by terms of the order of P.
_PRESSURE_NOTE = 1.0 / HA_PER_BOHR3_GPA
#: Relative tolerance for matching stored amplitudes to planned ones.
_AMPLITUDE_RTOL = 1e-9


@dataclass(frozen=True)
class ElasticSettings:
    """Strains applied and how the atoms follow them.

    Attributes
    ----------
    largest_strain : float
        Largest strain amplitude (a Voigt component, shears as engineering strain).
    strains_per_sign : int
        Amplitudes on each side of zero: largest_strain * k / n, k = 1..n.
    relax_internal : bool
        Relax the atoms inside every strained cell (needed for diamond, zincblende,
        hexagonal close packing: whenever strain lowers the atoms' site symmetry).
    force_threshold : float
        Largest force left after the internal relaxation, Ha/bohr.
    """

    largest_strain: float = 0.01
    strains_per_sign: int = 2
    relax_internal: bool = True
    force_threshold: float = 5e-5

    def __post_init__(self):
        def bad(name, why):
            raise InputError(why, key=f"elastic_constants.{name}", value=getattr(self, name))

        s = self.largest_strain
        if isinstance(s, bool) or not isinstance(s, (int, float)) or not 1e-5 <= s <= 0.05:
            bad("largest_strain", "must be a number from 1e-5 to 0.05 (a strain of 0.5 % is "
                "written 0.005): below, the stress change drowns in SCF noise; above, the "
                "response is no longer linear")
        n = self.strains_per_sign
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or not 1 <= n <= 10:
            bad("strains_per_sign", "must be an integer from 1 to 10")
        if not isinstance(self.relax_internal, (bool, np.bool_)):
            bad("relax_internal", "must be true or false")
        f = self.force_threshold
        if not (isinstance(f, (int, float)) and math.isfinite(f) and 0 < f < 1.0):
            bad("force_threshold", "must be a positive force below 1 Ha/bohr")
        object.__setattr__(self, "strains_per_sign", int(n))
        object.__setattr__(self, "largest_strain", float(s))

    @property
    def amplitudes(self) -> tuple[float, ...]:
        """The non-zero amplitudes, ascending."""
        n = self.strains_per_sign
        steps = [self.largest_strain * k / n for k in range(1, n + 1)]
        return tuple(sorted([-x for x in steps] + steps))

    def as_dict(self) -> dict:
        return {"largest_strain": self.largest_strain, "strains_per_sign": self.strains_per_sign,
                "relax_internal": bool(self.relax_internal),
                "force_threshold_Ha_per_bohr": self.force_threshold}


# --- checks -----------------------------------------------------------------------

def check_mesh_symmetry(crystal: Crystal, settings: GroundStateSettings, operations=None) -> None:
    """InputError when the k-mesh is not mapped onto itself by every point operation of
    the crystal (with symmetry in use): strained and unstrained cells would then sample
    the zone differently (see the module notes)."""
    if not settings.use_symmetry:
        return
    ops = operations if operations is not None else find_symmetry(crystal)
    kept = irreducible_kpoints(settings.kpoint_mesh, settings.kpoint_shift, ops).operations
    if kept.n_ops < ops.n_ops:
        mesh = "x".join(map(str, settings.kpoint_mesh))
        raise InputError(
            f"the {mesh} k-point mesh with shift {list(settings.kpoint_shift)} is mapped onto "
            f"itself by only {kept.n_ops} of the {ops.n_ops} operations of this crystal "
            f"({ops.international_symbol}); every strained cell has fewer operations than the "
            "unstrained one, so the two would sample the Brillouin zone differently and the "
            "stress-strain slopes would carry that difference. Use shift = [0, 0, 0] (a mesh "
            "through Gamma), or brillouin_zone.use_symmetry = false",
            key="brillouin_zone.shift", value=list(settings.kpoint_shift))


# --- internal strain ------------------------------------------------------------------

def _nearest_bonds(crystal: Crystal, n: int = 4) -> np.ndarray:
    """The n shortest vectors from atom 0 to images of atom 1, bohr (n, 3)."""
    cells = np.array([(i, j, k) for i in (-1, 0, 1) for j in (-1, 0, 1) for k in (-1, 0, 1)])
    d = (crystal.positions[1] - crystal.positions[0] + cells) @ crystal.lattice
    return d[np.argsort(np.linalg.norm(d, axis=1))[:n]]


def internal_strain_parameter(clamped: Crystal, relaxed: Crystal) -> float | None:
    """Kleinman's zeta of a two-atom tetrahedral cell (diamond, zincblende): the relative
    shift of atom 1 against atom 0 on relaxing, as a fraction of the shift that makes the
    four nearest-neighbour bonds of the strained cell equal in length (to first order:
    2 b_n.u + |b_n|^2 the same for all four bonds b_n, solved by least squares).
    None when the cell is not of that kind or the strain leaves the bonds equal."""
    if clamped.n_atoms != 2:
        return None
    bonds = _nearest_bonds(clamped)
    a = np.hstack([2 * bonds, -np.ones((4, 1))])
    rigid = np.linalg.lstsq(a, -np.sum(bonds ** 2, axis=1), rcond=None)[0][:3]
    d = relaxed.positions - clamped.positions
    du = (d - np.rint(d)) @ clamped.lattice          # positions may wrap into [0, 1)
    u = du[1] - du[0]
    norm = float(rigid @ rigid)
    if norm < 1e-16:
        return None
    return float(u @ rigid / norm)


def _is_tetrahedral_pair(ops) -> bool:
    return ops.space_group_number in (216, 227)


# --- one strain point -----------------------------------------------------------------

def _strained(crystal: Crystal, component: int, amplitude: float) -> Crystal:
    e = np.zeros(6)
    e[component] = amplitude
    deform = np.eye(3) + voigt_strain_tensor(e)
    return Crystal(crystal.lattice @ deform, crystal.species, crystal.positions,
                   crystal.min_distance)


def _evaluate_point(cell: Crystal, settings: GroundStateSettings, elastic: ElasticSettings,
                    evaluator: Evaluator | None, scf_log) -> dict:
    """Clamped and relaxed stress of one strained cell, as a log entry."""
    if elastic.relax_internal:
        relax = RelaxationSettings(moves="positions", force_threshold=elastic.force_threshold,
                                   max_steps=40, basis_correction=False)
        res = relax_structure(cell, settings, relax, evaluator=evaluator, scf_log=scf_log)
        first, last = res.steps[0], res.final
        return {"clamped_stress_Ha_per_bohr3": (np.array(first["stress_GPa"])
                                                / HA_PER_BOHR3_GPA).tolist(),
                "stress_Ha_per_bohr3": (np.array(last["stress_GPa"])
                                        / HA_PER_BOHR3_GPA).tolist(),
                "energy_Ha": last["energy_Ha"], "clamped_energy_Ha": first["energy_Ha"],
                "fractional_positions": res.crystal.positions.tolist(),
                "largest_force_Ha_per_bohr": last["largest_force_Ha_per_bohr"],
                "internal_moves": res.n_moves, "scf_iterations": res.scf_iterations,
                "converged": bool(res.converged),
                "messages": list(res.messages)}
    evaluate = evaluator or scf_evaluator(settings)
    ev = evaluate(cell, None)
    stress = np.asarray(ev.stress, float).tolist()
    return {"clamped_stress_Ha_per_bohr3": stress, "stress_Ha_per_bohr3": stress,
            "energy_Ha": float(ev.energy), "clamped_energy_Ha": float(ev.energy),
            "fractional_positions": cell.positions.tolist(),
            "largest_force_Ha_per_bohr": float(np.linalg.norm(ev.forces, axis=1).max()),
            "internal_moves": 0, "scf_iterations": int(ev.scf_iterations),
            "converged": bool(ev.scf_converged), "messages": list(ev.messages)}


def _at(component: int, amplitude: float):
    def match(rec: dict) -> bool:
        return (int(rec.get("strain_component", -1)) == component + 1
                and math.isclose(float(rec.get("amplitude", math.nan)), amplitude,
                                 rel_tol=_AMPLITUDE_RTOL, abs_tol=1e-15))
    return match


def _fingerprint(crystal: Crystal, settings: GroundStateSettings,
                 elastic: ElasticSettings) -> Fingerprint:
    from ..preflight import load_pseudopotentials

    pps = load_pseudopotentials(crystal.species, settings.pseudopotentials)
    ground = fingerprint(crystal, settings, pps)
    mine = {f"elastic_constants.{k}": v for k, v in elastic.as_dict().items()}
    return Fingerprint(json.loads(json.dumps({**ground.values, **mine})))


# --- the result -------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class ElasticResult:
    """Outcome of :func:`elastic_constants` (Ha/bohr^3 inside).

    Attributes
    ----------
    converged : bool
        Every strain point's SCF (and internal relaxation) converged.
    pattern : ElasticPattern
        The independent constants of the crystal's point group.
    relaxed, clamped : StressStrainFit
        Fits of the stresses with the atoms relaxed and with the atoms clamped (the
        same when ``relax_internal`` is off).
    points : list of dict
        One entry per strain point (the restart file's entries), the reference first.
    internal_strain : float or None
        Kleinman's zeta (diamond and zincblende), mean over the shear points.
    """

    converged: bool
    crystal: Crystal
    symmetry: str
    settings: ElasticSettings
    pattern: ElasticPattern
    strained_components: tuple
    relaxed: StressStrainFit
    clamped: StressStrainFit
    points: list
    reference_stress: np.ndarray
    internal_strain: float | None
    internal_strain_points: tuple = ()
    messages: tuple = ()
    resumed_points: int = 0
    averages: object = field(init=False)
    stable: bool = field(init=False)
    stability_eigenvalues: np.ndarray = field(init=False)

    def __post_init__(self):
        object.__setattr__(self, "averages", voigt_reuss_hill(self.relaxed.matrix))
        stable, w = born_stability(self.relaxed.matrix)
        object.__setattr__(self, "stable", stable)
        object.__setattr__(self, "stability_eigenvalues", w)

    @property
    def matrix_gpa(self) -> np.ndarray:
        return self.relaxed.matrix * HA_PER_BOHR3_GPA

    @property
    def constants_gpa(self) -> dict[str, float]:
        return {n: float(v * HA_PER_BOHR3_GPA) for n, v in zip(self.pattern.names,
                                                               self.relaxed.values)}

    @property
    def clamped_constants_gpa(self) -> dict[str, float]:
        return {n: float(v * HA_PER_BOHR3_GPA) for n, v in zip(self.pattern.names,
                                                               self.clamped.values)}

    @property
    def bulk_modulus_gpa(self) -> float:
        """Voigt bulk modulus, (C11 + C22 + C33 + 2 (C12 + C13 + C23))/9: for a cubic
        crystal (C11 + 2 C12)/3, the B0 of the equation of state."""
        return self.averages.bulk_voigt * HA_PER_BOHR3_GPA

    def as_document(self) -> dict:
        gpa = HA_PER_BOHR3_GPA
        doc = {
            "schema": ELASTIC_SCHEMA,
            "converged": bool(self.converged),
            "structure": {**self.crystal.as_dict(),
                          "lattice_vectors_angstrom": (self.crystal.lattice
                                                       * BOHR_ANGSTROM).tolist()},
            "space_group": self.symmetry,
            "settings": self.settings.as_dict(),
            "conventions": "Voigt order xx, yy, zz, yz, xz, xy; strains with engineering "
                           "shears; stress = (1/volume) dE/d(strain), positive pulling in; "
                           "stress_i = sum_j C_ij strain_j",
            "independent_constants": list(self.pattern.names),
            "relations": self.pattern.relations(),
            "strained_components": [_VOIGT_LABELS[j] for j in self.strained_components],
            "elastic_constants_GPa": self.constants_gpa,
            "elastic_matrix_GPa": (self.relaxed.matrix * gpa).tolist(),
            "clamped_ion_constants_GPa": self.clamped_constants_gpa,
            "clamped_ion_matrix_GPa": (self.clamped.matrix * gpa).tolist(),
            "internal_strain_parameter": self.internal_strain,
            "internal_strain_parameter_points": list(self.internal_strain_points),
            "bulk_modulus_from_constants_GPa": self.bulk_modulus_gpa,
            "moduli": self.averages.as_dict("GPa", gpa),
            "born_stability": {"stable": self.stable,
                               "eigenvalues_GPa": (self.stability_eigenvalues * gpa).tolist(),
                               "criterion": "every eigenvalue of the 6x6 matrix positive"},
            "raw_slopes_GPa": [[None if math.isnan(x) else x * gpa for x in row]
                               for row in self.relaxed.slopes],
            "symmetry_residual_GPa": self.relaxed.symmetry_residual * gpa,
            "fit_residual_GPa": self.relaxed.fit_residual * gpa,
            "reference_stress_GPa": (self.reference_stress * gpa).tolist(),
            "reference_pressure_GPa": float(-np.trace(self.reference_stress) / 3 * gpa),
            "points": self.points,
            "resumed_points": self.resumed_points,
            "messages": list(self.messages),
        }
        return doc

    def summary_lines(self) -> list[str]:
        state = "converged" if self.converged else "NOT converged"
        lines = [f"Elastic constants of {self.symmetry} ({state}, {len(self.points)} strain "
                 "points):"]
        clamped = self.clamped_constants_gpa
        for name, value in self.constants_gpa.items():
            extra = (f"   (clamped ions {clamped[name]:8.2f})"
                     if self.settings.relax_internal and abs(clamped[name] - value) > 0.005
                     else "")
            lines.append(f"  {name} = {value:8.2f} GPa{extra}")
        if self.internal_strain is not None:
            lines.append(f"  internal-strain parameter zeta = {self.internal_strain:.3f}")
        m = self.averages.as_dict("GPa", HA_PER_BOHR3_GPA)
        lines.append(f"  bulk modulus {m['bulk_hill_GPa']:.2f} GPa (Voigt "
                     f"{m['bulk_voigt_GPa']:.2f}, Reuss {m['bulk_reuss_GPa']:.2f}); shear "
                     f"modulus {m['shear_hill_GPa']:.2f} "
                     f"GPa (Voigt {m['shear_voigt_GPa']:.2f}, Reuss {m['shear_reuss_GPa']:.2f})")
        lines.append(f"  Young's modulus {m['young_hill_GPa']:.2f} GPa, Poisson ratio "
                     f"{m['poisson_ratio_hill']:.3f} (Hill)")
        w = self.stability_eigenvalues * HA_PER_BOHR3_GPA
        lines.append(f"  Born stability: {'stable' if self.stable else 'UNSTABLE'} (smallest "
                     f"eigenvalue of C {w[0]:.2f} GPa)")
        return lines


# --- the workflow -----------------------------------------------------------------------

def _lines(points: list, key: str) -> dict:
    """{component: (amplitudes, Voigt stresses)} from the entries, the reference shared."""
    ref = next(p for p in points if p["strain_component"] == 0)
    out: dict = {}
    for p in points:
        j = p["strain_component"] - 1
        if j < 0:
            continue
        out.setdefault(j, ([0.0], [stress_voigt(ref[key])]))
        out[j][0].append(p["amplitude"])
        out[j][1].append(stress_voigt(p[key]))
    return out


def _zeta(crystal: Crystal, points: list, components) -> tuple[float | None, tuple]:
    """Kleinman's zeta from the shear points (component 4, 5 or 6) of a tetrahedral pair."""
    shear = next((j for j in components if j >= 3), None)
    if shear is None:
        return None, ()
    values = []
    for p in points:
        if p["strain_component"] == shear + 1:
            cell = _strained(crystal, shear, p["amplitude"])
            relaxed = Crystal(cell.lattice, cell.species, np.array(p["fractional_positions"]),
                              cell.min_distance)
            z = internal_strain_parameter(cell, relaxed)
            if z is not None:
                values.append(z)
    return (float(np.mean(values)) if values else None), tuple(values)


def _run_points(crystal, settings, elastic, plan, store, evaluator, scf_log, say):
    """Every planned (component, amplitude) point: from the restart file when it holds a
    converged one, computed (and written at once) otherwise. Returns (entries, reused)."""
    points, resumed = [], 0
    for n, (j, amp) in enumerate(plan, start=1):
        found = store.find(_at(j, amp)) if store is not None else None
        label = "unstrained" if j < 0 else f"{_VOIGT_LABELS[j]} {amp:+.4f}"
        if found is not None and found.get("converged"):
            points.append(found)
            resumed += 1
            say(f"[{n}/{len(plan)}] {label}: taken from the restart file")
            continue
        cell = crystal if j < 0 else _strained(crystal, j, amp)
        entry = {"strain_component": j + 1, "amplitude": amp,
                 **_evaluate_point(cell, settings, elastic, evaluator, scf_log)}
        points.append(entry)
        if store is not None and world().rank == 0:
            store.add(entry, replaces=_at(j, amp))
        s = np.array(entry["stress_Ha_per_bohr3"]) * HA_PER_BOHR3_GPA
        say(f"[{n}/{len(plan)}] {label}: stress (GPa) xx {s[0, 0]:+.3f} yy {s[1, 1]:+.3f} "
            f"zz {s[2, 2]:+.3f} yz {s[1, 2]:+.3f} xz {s[0, 2]:+.3f} xy {s[0, 1]:+.3f}; "
            f"{entry['internal_moves']} internal moves, {entry['scf_iterations']} SCF iterations")
    return points, resumed


def elastic_constants(crystal: Crystal, settings: GroundStateSettings | None = None,
                      elastic: ElasticSettings | None = None, *,
                      evaluator: Evaluator | None = None, restart_file=None,
                      log: Callable[[str], None] | None = None,
                      scf_log: Callable[[str], None] | None = None, fresh: bool = False,
                      accept_mismatch: bool = False) -> ElasticResult:
    """Elastic constants of a crystal from stress-strain lines.

    Parameters
    ----------
    crystal
        The unstrained crystal, best at its equilibrium volume for these settings (the
        reference pressure is reported; above 1 GPa a message says so).
    settings
        Ground-state settings of every strained cell (the k-mesh must keep the
        crystal's symmetry: see :func:`check_mesh_symmetry`).
    elastic
        Strain amplitudes, their number and the internal relaxation.
    evaluator
        ``evaluator(crystal, previous) -> Evaluation`` (default: SCF with analytic
        forces and stress); tests pass model energies.
    restart_file
        Log of finished strain points (created at the first one): an existing one of
        the same calculation is continued, one of another refused naming what
        differs, unless ``accept_mismatch``. ``fresh`` ignores it.
    log, scf_log
        Receive progress lines and each SCF's iteration lines.
    """
    settings = settings or GroundStateSettings()
    elastic = elastic or ElasticSettings()
    say = log or (lambda line: None)
    ops = find_symmetry(crystal)
    if evaluator is None:
        check_mesh_symmetry(crystal, settings, ops)
    pattern = elastic_pattern(cartesian_rotations(crystal.lattice, ops.rotations))
    components = tuple(strain_patterns(pattern))
    say(f"{ops.international_symbol}: independent constants {', '.join(pattern.names)}; "
        f"strains {', '.join(_VOIGT_LABELS[j] for j in components)} at "
        f"{', '.join(f'{a:+g}' for a in elastic.amplitudes)}")
    store = None
    if restart_file is not None:
        if fresh and world().rank == 0 and Path(restart_file).exists():
            Path(restart_file).unlink()     # the points of an earlier run are not wanted
        store = RecordLog(restart_file, STRAIN_POINTS, _fingerprint(crystal, settings, elastic),
                          accept_mismatch=accept_mismatch)
    plan = [(-1, 0.0)] + [(j, a) for j in components for a in elastic.amplitudes]
    messages = []
    if store is not None and store.mismatches:
        messages.append("the restart file was made for another calculation, accepted on "
                        "request: " + "; ".join(store.mismatches))
    points, resumed = _run_points(crystal, settings, elastic, plan, store, evaluator, scf_log,
                                  say)
    relaxed = fit_stress_strain(pattern, _lines(points, "stress_Ha_per_bohr3"))
    clamped = fit_stress_strain(pattern, _lines(points, "clamped_stress_Ha_per_bohr3"))
    converged = all(p["converged"] for p in points)
    for p in points:
        if not p["converged"]:
            messages.append(f"strain {p['strain_component']} at {p['amplitude']:+g}: the SCF or "
                            "the internal relaxation did not converge; its stress is approximate")
    reference = np.array(points[0]["stress_Ha_per_bohr3"])
    pressure = -np.trace(reference) / 3
    if abs(pressure) > _PRESSURE_NOTE:
        messages.append(f"the unstrained cell is under {pressure * HA_PER_BOHR3_GPA:+.2f} GPa: "
                        "slopes of a pre-stressed cell differ from the elastic constants by "
                        "terms of the order of the pressure; start from the equilibrium "
                        "lattice of these settings, and if this cell is already an "
                        "equation-of-state minimum, the pressure is the basis-set (Pulay) "
                        "stress: raise basis.cutoff")
    zeta, zeta_points = (_zeta(crystal, points, components)
                         if elastic.relax_internal and _is_tetrahedral_pair(ops) else (None, ()))
    if not born_stability(relaxed.matrix)[0]:
        messages.append("the elastic matrix has a non-positive eigenvalue: the crystal is "
                        "mechanically unstable at these settings (Born criterion)")
    result = ElasticResult(converged, crystal, ops.international_symbol, elastic, pattern,
                           components, relaxed, clamped, points, reference, zeta, zeta_points,
                           tuple(messages), resumed)
    for m in messages:
        say(m)
    return result
