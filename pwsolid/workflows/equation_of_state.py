"""Equation-of-state workflow: energies over a range of volumes, fitted (layer 5).

:func:`scan_volumes` computes self-consistent ground states of one crystal at
several volumes (the cell shape kept), fits every registered equation of state
(:func:`pwsolid.eos.fit_all_forms`) and returns a :class:`VolumeScan` with the
equilibrium volume, the lattice lengths there, the bulk modulus and its pressure
derivative for each form, the spread between the forms and a record per point.

What the workflow takes care of:

* **Warm starts.** Each point starts from the self-consistent density of the
  nearest finished point (in volume, then c/a). The density is moved to the new
  cell by a homogeneous deformation: its values on the fractional grid are kept
  and multiplied by V_old / V_new, so the electron count is exact. When the FFT
  grid of the new cell differs from the old one, the density is carried over
  through its Fourier coefficients (those with Miller indices present on both
  grids, Nyquist rows dropped so the field stays real), negative ringing is
  clipped and the charge renormalised. See :func:`transfer_density`.
* **Range extension.** When the lowest energy is at an end of the scanned
  volumes, or the preferred fit puts its minimum outside them, a few more
  points are added on that side at the same spacing (``extension_points`` per
  round, at most ``max_extensions`` rounds, volumes kept within 0.4 to 2.5 times
  the input volume); every extension is recorded in ``messages``.
* **Hexagonal cells with c/a.** With ``c_over_a_values`` the scan is
  two-dimensional: at every volume the energies at the given c/a ratios are
  fitted with a parabola E(q) = a q^2 + b q + c whose vertex gives the optimal
  c/a(V) and the relaxed energy E(V); the equation of state is fitted to those
  E(V). The optimal c/a at V0 comes from a polynomial (degree <= 2) through the
  c/a(V) values. A vertex outside the given ratios is clipped to the nearest
  end and reported.
* **Processes.** Under an MPI launcher the points are spread over the
  processes (:func:`pwsolid.parallel.map_over_ranks`): each computes one
  contiguous block of volumes serially, warm-starting along its block, and
  all processes end with the whole scan. A block's first point has no
  finished neighbour yet, so it starts cold (or from an earlier round's
  density); energies then agree with a serial scan to the SCF tolerance, not
  to the last bit.
* **Resume.** With ``store`` (a JSON file) every finished point is written at
  once (temporary file, fsync, rename), keyed by volume (and c/a), together
  with a fingerprint of the crystal and of the settings that change energies.
  A re-run with the same store skips the converged points it finds; a store
  made for another crystal or other settings is refused.

Inside: Ha, bohr and Ha/bohr^3; ``as_document()`` adds eV, angstrom and GPa.
"""

from __future__ import annotations

import hashlib
import json
import math
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping, Protocol, Sequence

import numpy as np

from ..crystal import Crystal
from ..eos import EOS_FORMS, EOSFit, compare_fits, fit_equation_of_state
from ..errors import ConvergenceWarning, InputError
from ..parallel import map_over_ranks, world
from ..safe_files import atomic_write_bytes
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV

__all__ = ["ScanPoint", "VolumeScan", "WarmStart", "PointSolver", "scan_volumes",
           "transfer_density", "extrapolate_density", "lattice_lengths", "EOS_SCAN_SCHEMA", "POINT_STORE_FORMAT"]

EOS_SCAN_SCHEMA = "pwsolid.equation-of-state/1"
POINT_STORE_FORMAT = "pwsolid.volume-points/1"

#: The form whose parameters a scan reports first and uses to steer the range.
PREFERRED_FORM = "birch-murnaghan"
#: Volumes a scan may reach, as multiples of the input volume (a guard against runaway extension).
_VOLUME_LIMITS = (0.4, 2.5)
#: Settings that change how the SCF gets to the answer but not the answer itself;
#: they are left out of the store fingerprint so a re-run may raise max_iterations.
_PATH_ONLY_SETTINGS = frozenset({"max_iterations", "mixing_weight", "mixing_history",
                                 "mixing_preconditioner", "screening_wavevector"})
#: Relative tolerance for matching stored volumes and c/a ratios to planned ones.
_KEY_RTOL = 1e-9


# --- the solver seam ----------------------------------------------------------------

@dataclass(frozen=True)
class WarmStart:
    """The density of a finished point, to start a neighbouring one from.

    Attributes
    ----------
    density : ndarray (n1, n2, n3) float64, bohr^-3
        Self-consistent density on that point's FFT grid.
    volume : float
        That point's cell volume, bohr^3.
    wavefunctions : pwsolid.scf.WavefunctionStart or None
        That point's orbitals, when the solver returned them: the next point's
        eigensolver starts from them instead of from scratch.
    partner : WarmStart or None
        The next nearest finished point on the same line of the scan (same c/a),
        which may have a partner in turn: the starting density is then
        extrapolated in volume from up to three points, the orbitals from two
        (see :func:`extrapolate_density`).
    """

    density: np.ndarray
    volume: float
    wavefunctions: Any = None
    partner: "WarmStart | None" = None


class PointSolver(Protocol):
    """``solver(crystal, settings, warm_start) -> outcome`` for one scan point.

    The outcome needs ``total_energy`` (Ha; a ``zero_width_energy``, when present,
    is used instead: with smearing it is the energy at vanishing width), ``converged`` (bool), ``iterations``
    (int) and ``density`` (array or None; kept to warm-start the next point);
    optionally ``messages`` (tuple of str). A :class:`pwsolid.scf.GroundState`
    has them all. Tests pass a cheap model energy here instead of the SCF.
    """

    def __call__(self, crystal: Crystal, settings: GroundStateSettings,
                 warm_start: WarmStart | None) -> Any: ...


def transfer_density(density: np.ndarray, old_volume: float, new_shape,
                     new_volume: float) -> np.ndarray:
    """Carry a density to a homogeneously deformed cell, keeping the electron count.

    Parameters
    ----------
    density : ndarray (n1, n2, n3) float64
        Density (bohr^-3) on the old cell's FFT grid.
    old_volume, new_volume : float
        Cell volumes, bohr^3.
    new_shape : 3 ints
        FFT grid of the new cell.

    Returns
    -------
    ndarray, shape ``new_shape``, float64
        The density at the same fractional coordinates times V_old / V_new.

    Notes
    -----
    On the same grid this is exact. On another grid the Fourier coefficients
    n_G with Miller indices |m_i| <= min((n_i^old - 1)//2, (n_i^new - 1)//2) are
    copied (an even grid's Nyquist row has no partner and is dropped, so the
    field stays real); the G = 0 coefficient, hence the charge, is kept. Ringing
    below zero is clipped and the charge restored by rescaling.
    """
    density = np.asarray(density, float)
    new_shape = tuple(int(n) for n in new_shape)
    factor = float(old_volume) / float(new_volume)
    if density.shape == new_shape:
        return density * factor
    coef = np.fft.fftn(density) / density.size
    out = np.zeros(new_shape, complex)
    old_idx, new_idx = [], []
    for n_old, n_new in zip(density.shape, new_shape):
        m = min((n_old - 1) // 2, (n_new - 1) // 2)
        freq = np.r_[0:m + 1, -m:0]
        old_idx.append(freq % n_old)
        new_idx.append(freq % n_new)
    out[np.ix_(*new_idx)] = coef[np.ix_(*old_idx)]
    moved = np.fft.ifftn(out).real * np.prod(new_shape) * factor
    charge = float(density.mean()) * old_volume
    moved = np.maximum(moved, 0.0)
    mean = float(moved.mean())
    if mean <= 0:
        return np.full(new_shape, charge / new_volume)
    return moved * (charge / (mean * new_volume))


def _chain(start: WarmStart, new_volume: float, depth: int) -> list[WarmStart]:
    """``start`` and up to ``depth - 1`` of its partners, all at distinct volumes;
    ``start`` alone when the target lies over two spacings beyond it."""
    chain = [start]
    while (len(chain) < depth and chain[-1].partner is not None
           and min(abs(chain[-1].partner.volume - p.volume) for p in chain)
           > 1e-9 * start.volume):
        chain.append(chain[-1].partner)
    if len(chain) > 1 and abs(new_volume - start.volume) > 2 * abs(start.volume - chain[1].volume):
        return [start]
    return chain


def _lagrange_weights(volumes, new_volume: float) -> np.ndarray:
    """Weights w_i (summing to 1) with sum_i w_i f(V_i) = f(V) exactly for a polynomial
    f of degree len(volumes) - 1."""
    v = np.asarray(volumes, float)
    w = np.ones(len(v))
    for i in range(len(v)):
        for j in range(len(v)):
            if i != j:
                w[i] *= (new_volume - v[j]) / (v[i] - v[j])
    return w


def extrapolate_density(start: WarmStart, new_shape, new_volume: float) -> np.ndarray:
    """Starting density of a cell from one to three finished neighbours (bohr^-3).

    With one neighbour this is :func:`transfer_density`. With more (``start``,
    ``start.partner``, its partner) each is carried to the new grid and the
    densities are combined by Lagrange extrapolation in volume, quadratic from
    three points: the density at fixed fractional coordinates (times V, as the
    transfer does) changes smoothly with the volume. Measured on silicon, 15 Ha,
    2 % volume steps, distance (L1, per electron) of the start from the
    self-consistent density: 8.5e-3 from one neighbour, 1.8e-4 linear from two,
    2.6e-5 quadratic from three; the same with a cutoff scaled to keep the
    plane-wave set fixed, so the steps of that set are no limit here. The
    carried densities hold the same charge and the weights sum to 1, so the
    combination does too; negative values are clipped and the charge restored.
    Partners farther than two spacings from the target are not used.
    """
    return _extrapolation(start, new_shape, new_volume)[0]


def _extrapolation(start: WarmStart, new_shape, new_volume: float):
    """(density, estimated residual or None) of :func:`extrapolate_density`.

    The estimate is the size of the last term, the distance (L1, per electron, as
    the SCF measures its residual) from the extrapolation one order lower: for a
    smooth series a pessimistic measure of the error. None for a single neighbour.
    """
    chain = _chain(start, new_volume, 3)
    carried = [transfer_density(p.density, p.volume, new_shape, new_volume) for p in chain]
    if len(carried) == 1:
        return carried[0], None
    vols = [p.volume for p in chain]
    orders = [np.maximum(np.tensordot(_lagrange_weights(vols[:k], new_volume),
                                      np.array(carried[:k]), axes=1), 0.0)
              for k in (len(chain) - 1, len(chain))]
    lower, out = (x * (float(carried[0].mean()) / float(x.mean())) for x in orders)
    estimate = float(np.abs(out - lower).mean() / out.mean())
    return out, estimate


def _scf_solver(crystal: Crystal, settings: GroundStateSettings,
                warm_start: WarmStart | None):
    """The default solver: a self-consistent ground state, warm-started if possible."""
    from ..scf import ground_state, prepare

    setup = prepare(crystal, settings)
    start = waves = expected = None
    if warm_start is not None:
        start, expected = _extrapolation(warm_start, setup.grid_shape, crystal.volume)
        waves = _extrapolated_orbitals(warm_start, crystal.volume)
        if expected is not None:
            expected *= _START_RESIDUAL_PER_ESTIMATE
    return ground_state(crystal, settings, initial_density=start, setup=setup,
                        initial_wavefunctions=waves, start_residual=expected)


# The first eigensolver pass of an extrapolated start goes to this fraction of the
# estimated start residual (see _extrapolation). Measured on silicon (15 Ha, 2 % steps):
# quadratic starts were 2e-5 to 3e-5 from self-consistency against estimates of 1.6e-4
# to 1.8e-4, and a first pass to about the start residual cost the fewest H applications
# per point (with two Davidson steps per later iteration: 7,486 at 3e-5, 8,760 at 1e-4,
# 9,006 at 1e-5). A poor extrapolation (a large estimate) keeps the default 1e-3 of a
# warm start: a tight pass there once cost a toy cell 17 SCF iterations instead of 12.
_START_RESIDUAL_PER_ESTIMATE = 0.2


def _extrapolated_orbitals(start: WarmStart, new_volume: float):
    """The neighbour's orbitals, extrapolated linearly in volume when a second
    neighbour has them too. Measured on silicon (15 Ha, 2 % steps): the first
    eigensolver pass to 1e-4 costs 15 H applications per band from the nearest
    orbitals, 7.6 from the linear extrapolation; quadratic gave no more (8.1)."""
    chain = [p for p in _chain(start, new_volume, 2) if p.wavefunctions is not None]
    if start.wavefunctions is None or len(chain) < 2:
        return start.wavefunctions
    weights = _lagrange_weights([p.volume for p in chain], new_volume)
    return start.wavefunctions.extrapolated([(weights[1], chain[1].wavefunctions)])


def _wavefunction_start(outcome):
    """The orbitals of a ground-state outcome (None for other solvers' outcomes)."""
    from ..scf import GroundState, WavefunctionStart

    if isinstance(outcome, GroundState) and outcome.wavefunctions is not None:
        return WavefunctionStart.of(outcome)
    return None


# --- geometry -----------------------------------------------------------------------

def _cos(u, v) -> float:
    return float(np.dot(u, v) / (np.linalg.norm(u) * np.linalg.norm(v)))


def _cell_kind(lattice: np.ndarray) -> str:
    """'simple-cubic', 'fcc', 'bcc', 'hexagonal' for the builders' cells, else 'general'."""
    lat = np.asarray(lattice, float)
    n = np.linalg.norm(lat, axis=1)
    cos = [_cos(lat[0], lat[1]), _cos(lat[0], lat[2]), _cos(lat[1], lat[2])]
    same = np.allclose(n, n[0], rtol=1e-8)
    if same and np.allclose(cos, 0.0, atol=1e-8):
        return "simple-cubic"
    if same and np.allclose(cos, 0.5, atol=1e-8):
        return "fcc"
    if same and np.allclose(cos, -1.0 / 3.0, atol=1e-8):
        return "bcc"
    if (abs(n[0] - n[1]) <= 1e-8 * n[0] and abs(abs(cos[0]) - 0.5) <= 1e-8
            and abs(cos[1]) <= 1e-8 and abs(cos[2]) <= 1e-8):
        return "hexagonal"
    return "general"


def lattice_lengths(lattice: np.ndarray) -> dict[str, float]:
    """The lengths that describe a cell, in bohr.

    ``{"a": cube edge}`` for the primitive cells of simple cubic, fcc and bcc
    (as the :mod:`pwsolid.crystal` builders make them: a = |a1|, sqrt 2 |a1| and
    2 |a1| / sqrt 3), ``{"a": |a1|, "c": |a3|}`` for hexagonal cells, and the three
    vector lengths ``{"a1": .., "a2": .., "a3": ..}`` otherwise.
    """
    lat = np.asarray(lattice, float)
    n = np.linalg.norm(lat, axis=1)
    kind = _cell_kind(lat)
    if kind == "simple-cubic":
        return {"a": float(n[0])}
    if kind == "fcc":
        return {"a": float(n[0] * math.sqrt(2.0))}
    if kind == "bcc":
        return {"a": float(n[0] * 2.0 / math.sqrt(3.0))}
    if kind == "hexagonal":
        return {"a": float(n[0]), "c": float(n[2])}
    return {"a1": float(n[0]), "a2": float(n[1]), "a3": float(n[2])}


def _hexagonal_c_over_a(crystal: Crystal) -> float:
    n = np.linalg.norm(crystal.lattice, axis=1)
    return float(n[2] / n[0])


def _crystal_at(crystal: Crystal, volume: float, c_over_a: float | None) -> Crystal:
    """The input crystal at ``volume``; with ``c_over_a`` the hexagonal c axis is reset too."""
    ratio = volume / crystal.volume
    if c_over_a is None:
        return crystal.scaled(ratio ** (1.0 / 3.0))
    q_in = _hexagonal_c_over_a(crystal)
    s_a = (ratio * q_in / c_over_a) ** (1.0 / 3.0)
    s_c = s_a * c_over_a / q_in
    lat = crystal.lattice * np.array([s_a, s_a, s_c])[:, None]
    return Crystal(lat, crystal.species, crystal.positions, crystal.min_distance)


# --- records and result -------------------------------------------------------------

@dataclass(frozen=True)
class ScanPoint:
    """One computed (or resumed) point of a scan.

    Attributes
    ----------
    volume : float
        Cell volume, bohr^3.
    c_over_a : float or None
        c/a ratio of a hexagonal 2-D scan, else None.
    energy : float
        Total energy, Ha.
    converged : bool
        Whether the SCF met its tolerances.
    iterations : int
        SCF iterations.
    seconds : float
        Wall time of the point (as first computed, for resumed points).
    resumed : bool
        Taken from the store instead of computed in this run.
    stage : int
        0 for the planned volumes, k for the k-th range extension.
    notes : tuple of str
        Warnings of the SCF at this point.
    """

    volume: float
    c_over_a: float | None
    energy: float
    converged: bool
    iterations: int
    seconds: float
    resumed: bool = False
    stage: int = 0
    notes: tuple[str, ...] = ()

    def as_record(self) -> dict:
        """The JSON record of the point (also the store's entry)."""
        return {"volume_bohr3": self.volume,
                "volume_angstrom3": self.volume * BOHR_ANGSTROM ** 3,
                "c_over_a": self.c_over_a,
                "energy_Ha": self.energy, "energy_eV": self.energy * HARTREE_EV,
                "converged": bool(self.converged), "iterations": int(self.iterations),
                "seconds": float(self.seconds), "reused_from_restart_file": bool(self.resumed),
                "extension_round": int(self.stage), "notes": list(self.notes)}


def _finite(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


@dataclass(frozen=True, eq=False)
class VolumeScan:
    """Energies over volumes and the equations of state fitted to them.

    Attributes
    ----------
    crystal : Crystal
        The input crystal (the scan is centred on its volume).
    settings : GroundStateSettings
        Settings of every point.
    points : tuple of ScanPoint
        Every point, sorted by volume (then c/a).
    volumes, energies : ndarray (n,)
        The E(V) data the fits use (bohr^3, Ha): the points themselves, or for a
        c/a scan the parabola minima at each volume.
    optimal_c_over_a : ndarray (n,) or None
        c/a at the minimum for each volume of a c/a scan.
    fits : dict name -> EOSFit
        The forms that could be fitted.
    preferred_form : str
        The form reported first (Birch-Murnaghan when it fitted).
    spread : dict or None
        :func:`pwsolid.eos.compare_fits` over ``fits``.
    messages : tuple of str
        Range extensions, failed fits, unconverged points, clipped c/a optima.
    volume_range, n_points, c_over_a_values
        The scan as asked for.
    """

    crystal: Crystal
    settings: GroundStateSettings
    points: tuple[ScanPoint, ...]
    volumes: np.ndarray
    energies: np.ndarray
    optimal_c_over_a: np.ndarray | None
    fits: dict[str, EOSFit]
    preferred_form: str
    spread: dict | None
    messages: tuple[str, ...]
    volume_range: float
    n_points: int
    c_over_a_values: tuple[float, ...] | None = None
    extensions: tuple[dict, ...] = ()
    _c_over_a_model: Callable | None = field(default=None, repr=False)

    # -- preferred-form shortcuts -------------------------------------------
    @property
    def fit(self) -> EOSFit:
        """The fit of the preferred form."""
        return self.fits[self.preferred_form]

    @property
    def v0(self) -> float:
        return self.fit.v0

    @property
    def e0(self) -> float:
        return self.fit.e0

    @property
    def b0_gpa(self) -> float:
        return self.fit.b0_gpa

    @property
    def b0_prime(self) -> float:
        return self.fit.b0_prime

    @property
    def all_points_converged(self) -> bool:
        return all(p.converged for p in self.points)

    @property
    def converged(self) -> bool:
        """Every SCF point converged and every fit converged with its minimum inside."""
        return (self.all_points_converged and bool(self.fits)
                and all(f.converged and f.minimum_inside_range for f in self.fits.values()))

    @property
    def minimum_inside_range(self) -> bool:
        return self.fit.minimum_inside_range

    def c_over_a_at(self, volume: float) -> float | None:
        """Optimal c/a at ``volume`` (bohr^3) for a c/a scan, else None."""
        if self._c_over_a_model is None:
            return None
        return float(self._c_over_a_model(volume))

    def lattice_at(self, volume: float) -> dict[str, float]:
        """Lattice lengths (bohr) of the relaxed cell at ``volume``.

        Uniform scaling of the input lattice, a = a_in (V/V_in)^(1/3); for a c/a
        scan a = a_in (V q_in / (V_in q))^(1/3) and c = q a, with the optimal q(V).
        """
        q = self.c_over_a_at(volume)
        if q is None:
            scale = (volume / self.crystal.volume) ** (1.0 / 3.0)
            return {k: v * scale for k, v in lattice_lengths(self.crystal.lattice).items()}
        lengths = lattice_lengths(self.crystal.lattice)
        q_in = lengths["c"] / lengths["a"]
        s_a = (volume / self.crystal.volume * q_in / q) ** (1.0 / 3.0)
        return {"a": lengths["a"] * s_a, "c": lengths["a"] * s_a * q}

    @property
    def lattice_constants(self) -> dict[str, float]:
        """Lattice lengths (bohr) at the preferred V0."""
        return self.lattice_at(self.v0)

    # -- document ----------------------------------------------------------
    def as_document(self) -> dict:
        """JSON-ready summary (schema ``EOS_SCAN_SCHEMA``): Ha and eV, bohr and angstrom, GPa."""
        a3 = BOHR_ANGSTROM ** 3
        n_atoms = self.crystal.n_atoms
        fits = {}
        for name, f in self.fits.items():
            err = f.standard_errors or {}
            lat = self.lattice_at(f.v0)
            fits[name] = {
                "equilibrium_energy_Ha": f.e0,
                "equilibrium_energy_eV": f.e0 * HARTREE_EV,
                "equilibrium_energy_per_atom_eV": f.e0 * HARTREE_EV / n_atoms,
                "equilibrium_volume_bohr3": f.v0,
                "equilibrium_volume_angstrom3": f.v0 * a3,
                "equilibrium_volume_per_atom_angstrom3": f.v0 * a3 / n_atoms,
                "lattice_at_equilibrium_bohr": lat,
                "lattice_at_equilibrium_angstrom": {k: v * BOHR_ANGSTROM for k, v in lat.items()},
                "c_over_a_at_equilibrium": self.c_over_a_at(f.v0),
                "bulk_modulus_GPa": f.b0_gpa,
                "bulk_modulus_pressure_derivative": f.b0_prime,
                "standard_errors": {
                    "equilibrium_energy_eV": _finite(err.get("e0", math.nan) * HARTREE_EV),
                    "equilibrium_volume_angstrom3": _finite(err.get("v0", math.nan) * a3),
                    "bulk_modulus_GPa": _finite(err.get("b0", math.nan) * HA_PER_BOHR3_GPA),
                    "bulk_modulus_pressure_derivative": _finite(err.get("b0_prime", math.nan)),
                },
                "residuals_meV": (np.asarray(f.residuals) * HARTREE_EV * 1e3).tolist(),
                "rms_residual_meV": f.rms_residual * HARTREE_EV * 1e3,
                "fit_converged": bool(f.converged),
                "minimum_inside_range": bool(f.minimum_inside_range),
                "polynomial_order": f.polynomial_order,
                "note": f.message,
            }
        spread = None
        if self.spread is not None and len(self.fits) > 1:
            s = self.spread
            spread = {
                "forms": list(s["forms"]),
                "equilibrium_volume_angstrom3": s["v0"]["spread"] * a3,
                "equilibrium_volume_relative": s["v0"]["relative_spread"],
                "bulk_modulus_GPa": s["b0_gpa"]["spread"],
                "bulk_modulus_relative": s["b0_gpa"]["relative_spread"],
                "bulk_modulus_pressure_derivative": s["b0_prime"]["spread"],
                "equilibrium_energy_meV": s["e0"]["spread"] * HARTREE_EV * 1e3,
            }
        in_lat = lattice_lengths(self.crystal.lattice)
        return {
            "schema": EOS_SCAN_SCHEMA,
            "scan_kind": "volume and c/a" if self.c_over_a_values else "volume",
            "crystal": {**self.crystal.as_dict(),
                        "volume_angstrom3": self.crystal.volume * a3,
                        "cell_kind": _cell_kind(self.crystal.lattice),
                        "lattice_lengths_angstrom": {k: v * BOHR_ANGSTROM
                                                     for k, v in in_lat.items()}},
            "settings": self.settings.as_dict(),
            "scan": {"relative_volume_range": self.volume_range,
                     "planned_points": self.n_points,
                     "c_over_a_values": (list(self.c_over_a_values)
                                         if self.c_over_a_values else None),
                     "extensions": [dict(e) for e in self.extensions]},
            "points": [p.as_record() for p in self.points],
            "energy_curve": {
                "volumes_bohr3": np.asarray(self.volumes).tolist(),
                "volumes_angstrom3": (np.asarray(self.volumes) * a3).tolist(),
                "energies_Ha": np.asarray(self.energies).tolist(),
                "energies_eV": (np.asarray(self.energies) * HARTREE_EV).tolist(),
                "optimal_c_over_a": (None if self.optimal_c_over_a is None
                                     else np.asarray(self.optimal_c_over_a).tolist()),
            },
            "preferred_form": self.preferred_form,
            "fits": fits,
            "spread_between_forms": spread,
            "all_points_converged": self.all_points_converged,
            "messages": list(self.messages),
            "units": {"energy": "Ha and eV as suffixed", "volume": "bohr^3 and angstrom^3 "
                      "as suffixed, per cell unless 'per_atom'", "bulk_modulus": "GPa"},
        }


# --- the store ----------------------------------------------------------------------

def _atomic_write_text(path: Path, text: str) -> None:
    """Write so that a reader sees the old or the complete new file, never half of one."""
    atomic_write_bytes(path, text.encode("utf-8"))


def _fingerprint(crystal: Crystal, settings: GroundStateSettings) -> tuple[str, dict]:
    chosen = {k: v for k, v in settings.as_dict().items() if k not in _PATH_ONLY_SETTINGS}
    described = {"lattice_bohr": crystal.lattice.tolist(), "species": list(crystal.species),
                 "fractional_positions": crystal.positions.tolist(), "settings": chosen}
    text = json.dumps(described, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest(), described


class _PointStore:
    """Finished points in a JSON file, refused when made for something else."""

    def __init__(self, path, crystal: Crystal, settings: GroundStateSettings):
        self.path = Path(path)
        self.fingerprint, self.described = _fingerprint(crystal, settings)
        self.records: list[dict] = []
        if self.path.exists():
            self._load()

    def _load(self):
        src = str(self.path)
        try:
            doc = json.loads(self.path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, ValueError) as exc:
            raise InputError(f"the restart file cannot be read ({type(exc).__name__}: {exc}); "
                             "delete it to start the scan afresh", source=src) from None
        if not isinstance(doc, dict) or doc.get("format") != POINT_STORE_FORMAT:
            raise InputError(f"not a restart file of a volume scan (expected format "
                             f"{POINT_STORE_FORMAT}); choose another file name", source=src)
        if doc.get("fingerprint") != self.fingerprint:
            raise InputError("the restart file belongs to a scan of another crystal or with "
                             "other settings (its fingerprint differs); delete it, or give "
                             "another restart file for this scan", source=src)
        records = doc.get("points")
        if not isinstance(records, list):
            raise InputError("the restart file has no list of points", source=src)
        for r in records:
            try:
                float(r["volume_bohr3"]), float(r["energy_Ha"])
            except (TypeError, KeyError, ValueError):
                raise InputError("a point in the restart file lacks its volume or energy",
                                 source=src) from None
        self.records = records

    def find(self, volume: float, c_over_a: float | None) -> dict | None:
        for r in self.records:
            if not math.isclose(float(r["volume_bohr3"]), volume, rel_tol=_KEY_RTOL):
                continue
            q = r.get("c_over_a")
            if (q is None) != (c_over_a is None):
                continue
            if q is not None and not math.isclose(float(q), c_over_a, rel_tol=_KEY_RTOL):
                continue
            return r
        return None

    def add(self, point: ScanPoint) -> None:
        old = self.find(point.volume, point.c_over_a)
        if old is not None:
            self.records.remove(old)
        rec = point.as_record()
        rec.pop("reused_from_restart_file")
        self.records.append(rec)
        doc = {"format": POINT_STORE_FORMAT, "fingerprint": self.fingerprint,
               "made_for": self.described, "points": self.records}
        _atomic_write_text(self.path, json.dumps(doc, indent=1, default=str) + "\n")


# --- the scan -----------------------------------------------------------------------

def _check_options(crystal, volume_range, n_points, c_over_a_values, extension_points,
                   max_extensions):
    if not isinstance(crystal, Crystal):
        raise InputError("scan_volumes needs a pwsolid Crystal", key="crystal",
                         value=type(crystal).__name__)
    if not (isinstance(volume_range, (int, float)) and 0.005 <= float(volume_range) <= 0.4):
        raise InputError("the relative volume range must be a number between 0.005 and 0.4 "
                         "(0.06 scans from 0.94 V to 1.06 V)", key="volume_range",
                         value=volume_range)
    if isinstance(n_points, bool) or not isinstance(n_points, (int, np.integer)) or not (
            5 <= n_points <= 101):
        raise InputError("the number of volumes must be an integer between 5 (four parameters "
                         "and one degree of freedom) and 101", key="points", value=n_points)
    for name, value, hi in (("extension_points", extension_points, 20),
                            ("max_extensions", max_extensions, 20)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not (
                0 <= value <= hi):
            raise InputError(f"must be an integer between 0 and {hi}", key=name, value=value)
    if c_over_a_values is None:
        return None
    try:
        qs = tuple(sorted(float(q) for q in c_over_a_values))
    except (TypeError, ValueError):
        raise InputError("c/a values must be numbers", key="c_over_a",
                         value=c_over_a_values) from None
    if len(qs) < 3 or any(not (0.1 < q < 50) or not math.isfinite(q) for q in qs):
        raise InputError("give at least three c/a ratios between 0.1 and 50 (a parabola "
                         "through them locates the optimum)", key="c_over_a", value=list(qs))
    if any(b - a <= 1e-9 * b for a, b in zip(qs, qs[1:])):
        raise InputError("the c/a ratios must be distinct", key="c_over_a", value=list(qs))
    if _cell_kind(crystal.lattice) != "hexagonal":
        raise InputError("a c/a scan needs a hexagonal cell (|a1| = |a2| at 120 degrees, "
                         "a3 perpendicular to both), such as the hcp prototype",
                         key="c_over_a", value=list(qs))
    return qs


def _parabola_minimum(qs, es):
    """Vertex (q*, E*) of the parabola through E(q), clipped to [q_min, q_max]; and a note."""
    qs, es = np.asarray(qs, float), np.asarray(es, float)
    a, b, c = np.polyfit(qs, es, 2)
    if not a > 0:
        i = int(np.argmin(es))
        return float(qs[i]), float(es[i]), "E(c/a) does not curve upward; the lowest point is used"
    q = -b / (2 * a)
    note = ""
    if q < qs[0] or q > qs[-1]:
        note = (f"the optimal c/a ({q:.4f}) lies outside the c/a values "
                f"[{qs[0]:g}, {qs[-1]:g}] and was clipped; widen the c/a values")
        q = float(np.clip(q, qs[0], qs[-1]))
    return float(q), float(np.polyval([a, b, c], q)), note


def _fit_forms(volumes, energies, messages):
    """Fit every form; a form that cannot be fitted is left out with a message."""
    fits = {}
    for name in EOS_FORMS:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ConvergenceWarning)
            try:
                fits[name] = fit_equation_of_state(volumes, energies, name)
            except InputError as exc:
                messages.append(f"the {name} form could not be fitted: {exc.reason}")
        for w in caught:
            if not issubclass(w.category, ConvergenceWarning):
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return fits


def _preferred(fits) -> str | None:
    if PREFERRED_FORM in fits:
        return PREFERRED_FORM
    return next(iter(fits), None)


def scan_volumes(crystal: Crystal, settings: GroundStateSettings | None = None, *,
                 volume_range: float = 0.06, n_points: int = 7,
                 c_over_a_values: Sequence[float] | None = None,
                 progress: Callable[[int, int], None] | None = None,
                 log: Callable[[str], None] | None = None,
                 store=None, extension_points: int = 3, max_extensions: int = 4,
                 solver: PointSolver | None = None, comm=None) -> VolumeScan:
    """Energy against volume around a crystal, with every equation of state fitted.

    Parameters
    ----------
    crystal
        The crystal; the scan is centred on its volume V_in and keeps its shape
        (``Crystal.scaled((V / V_in)^(1/3))``), or its a axes and the given c/a.
    settings
        Ground-state settings of every point (default ``GroundStateSettings()``).
    volume_range
        Relative half-width: volumes from (1 - range) V_in to (1 + range) V_in.
    n_points
        Planned volumes, equally spaced (5 to 101).
    c_over_a_values
        For hexagonal cells: at least three c/a ratios tried at every volume
        (a 2-D scan; see the module notes).
    progress
        Called as ``progress(done, total)`` after every point; ``total`` grows when
        the range is extended.
    log
        Called with one line per finished point.
    store
        Path of a JSON restart file (see the module notes), or None.
    extension_points, max_extensions
        Volumes added per extension of the range, and the most extensions.
    solver
        Computes one point (see :class:`PointSolver`); default: the SCF.
    comm
        Communicator over which the points are spread (default
        :func:`pwsolid.parallel.world`). Under MPI each process computes a
        contiguous block of the volumes serially, warm-starting along its block,
        and every process returns the whole scan; only process 0 writes
        ``store``. Pass a :class:`~pwsolid.parallel.SerialCommunicator` to
        compute every point on all processes together (k-points spread instead).

    Returns
    -------
    VolumeScan

    Raises
    ------
    InputError
        Bad options, a restart file made for something else, or energies to which
        no form can be fitted (they do not curve upward over the volumes).

    Warns
    -----
    ConvergenceWarning
        Once at the end when points did not converge, a fit did not converge, or
        the minimum is still outside the volumes after the extensions.
    """
    settings = settings or GroundStateSettings()
    qs = _check_options(crystal, volume_range, n_points, c_over_a_values, extension_points,
                        max_extensions)
    solver = solver or _scf_solver
    comm = comm if comm is not None else world()
    emit = log or (lambda line: None)
    point_store = _PointStore(store, crystal, settings) if store is not None else None
    v_in = crystal.volume
    step = 2.0 * volume_range * v_in / (n_points - 1)
    planned = [v_in * (1.0 - volume_range) + i * step for i in range(n_points)]
    points: dict[tuple, ScanPoint] = {}
    densities: dict[tuple, WarmStart] = {}
    messages: list[str] = []
    extensions: list[dict] = []
    counter = {"done": 0, "total": len(planned) * (len(qs) if qs else 1)}

    def key(v, q):
        return (round(v / v_in, 12), None if q is None else round(q, 12))

    def nearest_start(v, q):
        if not densities:
            return None
        def distance(k):
            dq = 0.0 if (q is None or k[1] is None) else abs(k[1] - q)
            return (abs(k[0] - v / v_in), dq)
        ranked = sorted(densities, key=distance)
        # further points on the same c/a line let the density be extrapolated
        line = [k for k in ranked if k[1] == ranked[0][1]][:3]
        chain = None
        for k in reversed(line):
            p = densities[k]
            chain = WarmStart(p.density, p.volume, p.wavefunctions, chain)
        return chain

    def compute(volumes, stage):
        jobs = []
        for i, v in enumerate(volumes):
            # serpentine order in c/a keeps each point next to the previous one
            q_order = (qs if i % 2 == 0 else qs[::-1]) if qs else (None,)
            jobs.extend((v, q) for q in q_order)
        # Under MPI every process computes one contiguous block of the points on its
        # own (warm starts chain inside the block) and all processes then hold all.
        map_over_ranks(lambda job: run_point(*job, stage), jobs, comm, on_result=finish)

    def finish(index, outcome, computed_here):
        p, warm, suffix = outcome
        k = key(p.volume, p.c_over_a)
        points[k] = p
        if warm is not None:
            densities[k] = warm
        if point_store is not None and not p.resumed and comm.rank == 0:
            point_store.add(p)
        emit(_point_line(p, suffix))
        counter["done"] += 1
        if progress is not None:
            progress(counter["done"], counter["total"])

    def run_point(v, q, stage) -> tuple[ScanPoint, WarmStart | None, str]:
        if point_store is not None:
            rec = point_store.find(v, q)
            if rec is not None and rec.get("converged", False):
                p = ScanPoint(v, q, float(rec["energy_Ha"]), True, int(rec.get("iterations", 0)),
                              float(rec.get("seconds", 0.0)), resumed=True, stage=stage,
                              notes=tuple(rec.get("notes", ())))
                return p, None, " (from the restart file)"
        cell = _crystal_at(crystal, v, q)
        t0 = time.perf_counter()
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ConvergenceWarning)
            outcome = solver(cell, settings, nearest_start(v, q))
        notes = [str(w.message) for w in caught if issubclass(w.category, ConvergenceWarning)]
        for w in caught:
            if not issubclass(w.category, ConvergenceWarning):
                warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        for m in getattr(outcome, "messages", ()) or ():
            if m not in notes:
                notes.append(str(m))
        # metals: the zero-width estimate is the energy to compare volumes with
        energy = getattr(outcome, "zero_width_energy", outcome.total_energy)
        p = ScanPoint(v, q, float(energy), bool(outcome.converged),
                      int(outcome.iterations), time.perf_counter() - t0, stage=stage,
                      notes=tuple(notes))
        if not math.isfinite(p.energy):
            raise InputError("the solver returned a non-finite energy", key="energy",
                             value=p.energy)
        density = getattr(outcome, "density", None)
        warm = None
        if density is not None:
            warm = WarmStart(np.asarray(density, float), cell.volume, _wavefunction_start(outcome))
            densities[key(v, q)] = warm   # the next point of this process starts from it
        return p, warm, ""

    # From the largest volume down: at a fixed cutoff each point's plane-wave set is
    # then nearly a subset of the previous one's, so the carried orbitals miss no
    # components (first solve 6.4 instead of 7.6 H applications per band, silicon).
    compute(planned[::-1], 0)
    c_model = None
    while True:
        volumes, energies, q_opt, c_notes = _energy_curve(points, qs)
        round_messages: list[str] = []
        fits = _fit_forms(volumes, energies, round_messages)
        name = _preferred(fits)
        side = _side_to_extend(volumes, energies, fits.get(name) if name else None)
        if side is None or len(extensions) >= max_extensions or extension_points == 0:
            break
        h = step
        if side == "smaller":
            new = [volumes[0] - h * k for k in range(1, extension_points + 1)]
        else:
            new = [volumes[-1] + h * k for k in range(1, extension_points + 1)]
        new = [v for v in new if _VOLUME_LIMITS[0] * v_in <= v <= _VOLUME_LIMITS[1] * v_in]
        if not new:
            messages.append(f"the scan reached the volume limit ({_VOLUME_LIMITS[0]:g} to "
                            f"{_VOLUME_LIMITS[1]:g} times the input volume) on the {side} side")
            break
        if int(np.argmin(energies)) in (0, len(energies) - 1):
            end = "smallest" if side == "smaller" else "largest"
            why = f"the lowest energy is at the {end} volume"
        else:
            why = "the fitted minimum lies outside the scanned volumes"
        extensions.append({"side": side, "reason": why,
                           "volumes_bohr3": [float(v) for v in new]})
        messages.append(f"extended the scan to {len(new)} {side} volume(s) "
                        f"({min(new):.4g} to {max(new):.4g} bohr^3): {why}")
        counter["total"] += len(new) * (len(qs) if qs else 1)
        compute(new, len(extensions))
    messages.extend(c_notes)
    messages.extend(round_messages)
    if not fits:
        raise InputError("no equation of state can be fitted to these energies (they do not "
                         "curve upward over the scanned volumes); widen the volume range or "
                         "centre the scan nearer the minimum"
                         + (f"; {'; '.join(round_messages)}" if round_messages else ""),
                         key="volume_range", value=volume_range)
    if side is not None:
        messages.append("the minimum still lies outside the scanned volumes after "
                        f"{len(extensions)} extension(s); the parameters are extrapolated: "
                        "centre the scan nearer the minimum or raise the extensions")
    if qs:
        c_model = _c_over_a_model(volumes, q_opt)
    unconverged = [p for p in points.values() if not p.converged]
    if unconverged:
        messages.append(f"{len(unconverged)} of {len(points)} points did not reach SCF "
                        "convergence (see their notes)")
    bad_fits = [n for n, f in fits.items() if not f.converged]
    trouble = list(messages) if (unconverged or bad_fits or side is not None) else []
    scan = VolumeScan(
        crystal=crystal, settings=settings,
        points=tuple(sorted(points.values(), key=lambda p: (p.volume, p.c_over_a or 0.0))),
        volumes=np.asarray(volumes), energies=np.asarray(energies),
        optimal_c_over_a=None if q_opt is None else np.asarray(q_opt),
        fits=fits, preferred_form=name,
        spread=compare_fits(fits) if fits else None, messages=tuple(messages),
        volume_range=float(volume_range), n_points=int(n_points), c_over_a_values=qs,
        extensions=tuple(extensions), _c_over_a_model=c_model)
    if trouble:
        warnings.warn("volume scan: " + "; ".join(trouble), ConvergenceWarning, stacklevel=2)
    return scan


def _point_line(p: ScanPoint, suffix: str) -> str:
    q = "" if p.c_over_a is None else f"  c/a {p.c_over_a:.4f}"
    state = "" if p.converged else "  NOT converged"
    return (f"V = {p.volume:10.4f} bohr^3{q}  E = {p.energy:16.8f} Ha  "
            f"{p.iterations:3d} iterations {p.seconds:6.1f} s{state}{suffix}")


def _energy_curve(points: Mapping[tuple, ScanPoint], qs):
    """E(V) for the fits: the points, or per volume the minimum of the c/a parabola."""
    if not qs:
        pts = sorted(points.values(), key=lambda p: p.volume)
        return (np.array([p.volume for p in pts]), np.array([p.energy for p in pts]), None, [])
    by_volume: dict[float, list[ScanPoint]] = {}
    for (rel, _), p in points.items():
        by_volume.setdefault(rel, []).append(p)
    volumes, energies, q_opt, notes = [], [], [], []
    for rel in sorted(by_volume):
        pts = sorted(by_volume[rel], key=lambda p: p.c_over_a)
        q, e, note = _parabola_minimum([p.c_over_a for p in pts], [p.energy for p in pts])
        volumes.append(pts[0].volume)
        energies.append(e)
        q_opt.append(q)
        if note:
            notes.append(f"at V = {pts[0].volume:.4g} bohr^3: {note}")
    return np.array(volumes), np.array(energies), np.array(q_opt), notes


def _side_to_extend(volumes, energies, fit: EOSFit | None) -> str | None:
    """'smaller', 'larger' or None: where more volumes are needed to bracket the minimum."""
    i = int(np.argmin(energies))
    if i == 0:
        return "smaller"
    if i == len(energies) - 1:
        return "larger"
    if fit is not None and not fit.minimum_inside_range:
        return "smaller" if fit.v0 < volumes[0] else "larger"
    return None


def _c_over_a_model(volumes, q_opt) -> Callable[[float], float]:
    """q(V) from a polynomial of degree <= 2 in V through the optimal c/a values."""
    v = np.asarray(volumes, float)
    vm = float(v.mean())
    deg = min(2, len(v) - 1)
    coef = np.polyfit(v / vm - 1.0, np.asarray(q_opt, float), deg)
    return lambda volume: float(np.polyval(coef, volume / vm - 1.0))
