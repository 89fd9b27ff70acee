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
* **Pressure.** After each point's SCF the analytic stress tensor of the ground
  state is computed (:func:`pwsolid.stress.stress_tensor`; a few per cent of the
  SCF's time) and kept with the point; the document sets the pressure beside
  -dE/dV of the preferred fit (:meth:`VolumeScan.pressure_comparison`).
* **Resume.** With ``store`` (a JSON file) every finished point is written at
  once (temporary file, fsync, rename), keyed by volume (and c/a), under the
  fingerprint of the calculation (:mod:`pwsolid.store`). A re-run with the same
  store skips the converged points it finds; a store made for another crystal
  or other settings is refused, naming what differs, unless
  ``accept_mismatch=True`` (the scan's messages then say so).

The concepts live in their own modules: warm starts in :mod:`pwsolid.warm_start`,
cells in :mod:`.cell_geometry`, the restart file in :mod:`.scan_restart`, the
points, fits and document in :mod:`.volume_scan_result`; this module holds the
scan loop.

Inside: Ha, bohr and Ha/bohr^3; ``as_document()`` adds eV, angstrom and GPa.
"""

from __future__ import annotations

import math
import time
import warnings
from dataclasses import dataclass
from typing import Any, Callable, Mapping, Protocol, Sequence

import numpy as np

from ..crystal import Crystal
from ..eos import EOS_FORMS, EOSFit, compare_fits, fit_equation_of_state
from ..errors import ConvergenceWarning, InputError
from ..parallel import map_over_ranks, world
from ..settings import GroundStateSettings
from ..units import HA_PER_BOHR3_GPA
from ..warm_start import (WarmStart, extrapolate_density, starting_point, transfer_density,
                          wavefunction_start_of)
from .cell_geometry import c_over_a_model, cell_kind, crystal_at, lattice_lengths, parabola_minimum
from .scan_restart import ScanRestart
from .volume_scan_result import EOS_SCAN_SCHEMA, ScanPoint, VolumeScan, as_stress

__all__ = ["ScanPoint", "VolumeScan", "WarmStart", "PointSolver", "scan_volumes",
           "transfer_density", "extrapolate_density", "lattice_lengths", "EOS_SCAN_SCHEMA"]

#: The form whose parameters a scan reports first and uses to steer the range.
PREFERRED_FORM = "birch-murnaghan"
#: Volumes a scan may reach, as multiples of the input volume (a guard against runaway extension).
_VOLUME_LIMITS = (0.4, 2.5)


# --- the solver seam ----------------------------------------------------------------

class PointSolver(Protocol):
    """``solver(crystal, settings, warm_start) -> outcome`` for one scan point.

    The outcome needs ``total_energy`` (Ha; a ``zero_width_energy``, when present,
    is used instead: with smearing it is the energy at vanishing width), ``converged`` (bool), ``iterations``
    (int) and ``density`` (array or None; kept to warm-start the next point);
    optionally ``messages`` (tuple of str) and ``stress`` ((3, 3) Ha/bohr^3 or a
    :class:`pwsolid.stress.StressTensor`). A :class:`pwsolid.scf.GroundState`
    has them all but the stress, which the scan then computes from it
    (:func:`pwsolid.stress.stress_tensor`, a few per cent of the SCF). Tests pass
    a cheap model energy here instead of the SCF.
    """

    def __call__(self, crystal: Crystal, settings: GroundStateSettings,
                 warm_start: WarmStart | None) -> Any: ...


def _scf_solver(crystal: Crystal, settings: GroundStateSettings,
                warm_start: WarmStart | None):
    """The default solver: a self-consistent ground state, warm-started if possible."""
    from ..scf import ground_state, prepare

    setup = prepare(crystal, settings)
    density, waves, expected = starting_point(warm_start, setup.grid_shape, crystal.volume)
    return ground_state(crystal, settings, initial_density=density, setup=setup,
                        initial_wavefunctions=waves, start_residual=expected)


# --- one scan's state ---------------------------------------------------------------

class _ScanRun:
    """The finished points of one scan and what computes more of them.

    ``points`` and ``starts`` (the warm start each finished point offers) are
    keyed by (V / V_in, c/a); :meth:`compute` runs a batch of volumes (every c/a
    at each), spread over processes, and stores each point in the restart file.
    """

    def __init__(self, crystal, settings, qs, solver, comm, restart, log, progress):
        self.crystal, self.settings, self.qs = crystal, settings, qs
        self.solver, self.comm, self.restart = solver, comm, restart
        self.emit = log or (lambda line: None)
        self.progress = progress
        self.points: dict[tuple, ScanPoint] = {}
        self.starts: dict[tuple, WarmStart] = {}
        self.done = 0
        self.total = 0

    def key(self, v: float, q: float | None) -> tuple:
        return (round(v / self.crystal.volume, 12), None if q is None else round(q, 12))

    def compute(self, volumes, stage: int) -> None:
        jobs = []
        for i, v in enumerate(volumes):
            # serpentine order in c/a keeps each point next to the previous one
            q_order = (self.qs if i % 2 == 0 else self.qs[::-1]) if self.qs else (None,)
            jobs.extend((v, q) for q in q_order)
        self.total += len(jobs)
        # Under MPI every process computes one contiguous block of the points on its
        # own (warm starts chain inside the block) and all processes then hold all.
        map_over_ranks(lambda job: self._point(*job, stage), jobs, self.comm,
                       on_result=self._finished)

    def _nearest_start(self, v: float, q: float | None) -> WarmStart | None:
        if not self.starts:
            return None
        rel = v / self.crystal.volume

        def distance(k):
            dq = 0.0 if (q is None or k[1] is None) else abs(k[1] - q)
            return (abs(k[0] - rel), dq)

        ranked = sorted(self.starts, key=distance)
        # further points on the same c/a line let the density be extrapolated
        line = [k for k in ranked if k[1] == ranked[0][1]][:3]
        chain = None
        for k in reversed(line):
            p = self.starts[k]
            chain = WarmStart(p.density, p.volume, p.wavefunctions, chain)
        return chain

    def _point(self, v: float, q: float | None, stage: int):
        """(ScanPoint, its warm start or None, suffix of its log line) of one point."""
        if self.restart is not None:
            p = self.restart.reusable(v, q, stage)
            if p is not None:
                return p, None, " (from the restart file)"
        cell = crystal_at(self.crystal, v, q)
        t0 = time.perf_counter()
        outcome, notes = _solve_noting_warnings(self.solver, cell, self.settings,
                                                self._nearest_start(v, q))
        # metals: the zero-width estimate is the energy to compare volumes with
        energy = getattr(outcome, "zero_width_energy", outcome.total_energy)
        stress = _stress_of(outcome)
        p = ScanPoint(v, q, float(energy), bool(outcome.converged), int(outcome.iterations),
                      time.perf_counter() - t0, stage=stage, notes=tuple(notes),
                      stress=stress)
        if not math.isfinite(p.energy):
            raise InputError("the solver returned a non-finite energy", key="energy",
                             value=p.energy)
        density = getattr(outcome, "density", None)
        warm = None
        if density is not None:
            warm = WarmStart(np.asarray(density, float), cell.volume,
                             wavefunction_start_of(outcome))
            self.starts[self.key(v, q)] = warm   # the next point of this process starts here
        return p, warm, ""

    def _finished(self, index, outcome, computed_here) -> None:
        p, warm, suffix = outcome
        k = self.key(p.volume, p.c_over_a)
        self.points[k] = p
        if warm is not None:
            self.starts[k] = warm
        if self.restart is not None and not p.resumed and self.comm.rank == 0:
            self.restart.add(p)
        self.emit(_point_line(p, suffix))
        self.done += 1
        if self.progress is not None:
            self.progress(self.done, self.total)


def _stress_of(outcome) -> tuple | None:
    """The stress (Ha/bohr^3) of a point: the solver's own, else the analytic stress of
    a ground state (Nielsen and Martin, Phys. Rev. B 32, 3780 (1985)), else None."""
    given = getattr(outcome, "stress", None)
    if given is not None:
        return as_stress(getattr(given, "tensor", given))
    from ..scf import GroundState

    if not isinstance(outcome, GroundState):
        return None
    from ..stress import stress_tensor

    return as_stress(stress_tensor(outcome).tensor)


def _solve_noting_warnings(solver, cell, settings, warm):
    """(outcome, notes): the solver's ConvergenceWarnings and messages become notes."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        outcome = solver(cell, settings, warm)
    notes = [str(w.message) for w in caught if issubclass(w.category, ConvergenceWarning)]
    for w in caught:
        if not issubclass(w.category, ConvergenceWarning):
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    for m in getattr(outcome, "messages", ()) or ():
        if m not in notes:
            notes.append(str(m))
    return outcome, notes


# --- options, fits and range --------------------------------------------------------

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
    if cell_kind(crystal.lattice) != "hexagonal":
        raise InputError("a c/a scan needs a hexagonal cell (|a1| = |a2| at 120 degrees, "
                         "a3 perpendicular to both), such as the hcp prototype",
                         key="c_over_a", value=list(qs))
    return qs


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


@dataclass(frozen=True)
class _Fitted:
    """One round of fits: the E(V) curve, the fitted forms and where to extend."""

    volumes: np.ndarray
    energies: np.ndarray
    optimal_c_over_a: np.ndarray | None
    c_notes: list
    fits: dict
    messages: list
    name: str | None
    side: str | None


def _fit_round(points: Mapping[tuple, ScanPoint], qs) -> _Fitted:
    volumes, energies, q_opt, c_notes = _energy_curve(points, qs)
    messages: list[str] = []
    fits = _fit_forms(volumes, energies, messages)
    name = _preferred(fits)
    side = _side_to_extend(volumes, energies, fits.get(name) if name else None)
    return _Fitted(volumes, energies, q_opt, c_notes, fits, messages, name, side)


def _extension_volumes(fitted: _Fitted, step: float, count: int, v_in: float) -> list[float]:
    """The next volumes on the side to extend, within the volume limits."""
    if fitted.side == "smaller":
        new = [fitted.volumes[0] - step * k for k in range(1, count + 1)]
    else:
        new = [fitted.volumes[-1] + step * k for k in range(1, count + 1)]
    return [v for v in new if _VOLUME_LIMITS[0] * v_in <= v <= _VOLUME_LIMITS[1] * v_in]


def _extension_record(fitted: _Fitted, new: Sequence[float]) -> dict:
    if int(np.argmin(fitted.energies)) in (0, len(fitted.energies) - 1):
        end = "smallest" if fitted.side == "smaller" else "largest"
        why = f"the lowest energy is at the {end} volume"
    else:
        why = "the fitted minimum lies outside the scanned volumes"
    return {"side": fitted.side, "reason": why, "volumes_bohr3": [float(v) for v in new]}


def _volume_scan(crystal, settings, run: _ScanRun, fitted: _Fitted, messages, extensions,
                 volume_range, n_points, qs) -> VolumeScan:
    """The result of the last round of fits, with its messages (and one warning)."""
    messages = [*messages, *fitted.c_notes, *fitted.messages]
    if not fitted.fits:
        raise InputError("no equation of state can be fitted to these energies (they do not "
                         "curve upward over the scanned volumes); widen the volume range or "
                         "centre the scan nearer the minimum"
                         + (f"; {'; '.join(fitted.messages)}" if fitted.messages else ""),
                         key="volume_range", value=volume_range)
    if fitted.side is not None:
        messages.append("the minimum still lies outside the scanned volumes after "
                        f"{len(extensions)} extension(s); the parameters are extrapolated: "
                        "centre the scan nearer the minimum or raise the extensions")
    c_model = c_over_a_model(fitted.volumes, fitted.optimal_c_over_a) if qs else None
    points = run.points
    unconverged = [p for p in points.values() if not p.converged]
    if unconverged:
        messages.append(f"{len(unconverged)} of {len(points)} points did not reach SCF "
                        "convergence (see their notes)")
    bad_fits = [n for n, f in fitted.fits.items() if not f.converged]
    scan = VolumeScan(
        crystal=crystal, settings=settings,
        points=tuple(sorted(points.values(), key=lambda p: (p.volume, p.c_over_a or 0.0))),
        volumes=np.asarray(fitted.volumes), energies=np.asarray(fitted.energies),
        optimal_c_over_a=(None if fitted.optimal_c_over_a is None
                          else np.asarray(fitted.optimal_c_over_a)),
        fits=fitted.fits, preferred_form=fitted.name,
        spread=compare_fits(fitted.fits) if fitted.fits else None, messages=tuple(messages),
        volume_range=float(volume_range), n_points=int(n_points), c_over_a_values=qs,
        extensions=tuple(extensions), _c_over_a_model=c_model)
    if unconverged or bad_fits or fitted.side is not None:
        warnings.warn("volume scan: " + "; ".join(messages), ConvergenceWarning, stacklevel=3)
    return scan


# --- the scan -----------------------------------------------------------------------

def scan_volumes(crystal: Crystal, settings: GroundStateSettings | None = None, *,
                 volume_range: float = 0.06, n_points: int = 7,
                 c_over_a_values: Sequence[float] | None = None,
                 progress: Callable[[int, int], None] | None = None,
                 log: Callable[[str], None] | None = None,
                 store=None, extension_points: int = 3, max_extensions: int = 4,
                 solver: PointSolver | None = None, comm=None,
                 accept_mismatch: bool = False) -> VolumeScan:
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
    accept_mismatch
        Reuse the points of a restart file made for another calculation instead
        of refusing it; the differences are listed in the scan's messages.
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
    restart = (None if store is None else
               ScanRestart(store, crystal, settings, accept_mismatch=accept_mismatch))
    run = _ScanRun(crystal, settings, qs, solver or _scf_solver,
                   comm if comm is not None else world(), restart, log, progress)
    v_in = crystal.volume
    step = 2.0 * volume_range * v_in / (n_points - 1)
    planned = [v_in * (1.0 - volume_range) + i * step for i in range(n_points)]
    messages = [f"the restart file was made for another calculation, accepted on request: {d}"
                for d in (restart.mismatches if restart is not None else ())]
    extensions: list[dict] = []
    # From the largest volume down: at a fixed cutoff each point's plane-wave set is
    # then nearly a subset of the previous one's, so the carried orbitals miss no
    # components (first solve 6.4 instead of 7.6 H applications per band, silicon).
    run.compute(planned[::-1], stage=0)
    while True:
        fitted = _fit_round(run.points, qs)
        if fitted.side is None or len(extensions) >= max_extensions or extension_points == 0:
            break
        new = _extension_volumes(fitted, step, extension_points, v_in)
        if not new:
            messages.append(f"the scan reached the volume limit ({_VOLUME_LIMITS[0]:g} to "
                            f"{_VOLUME_LIMITS[1]:g} times the input volume) on the "
                            f"{fitted.side} side")
            break
        extensions.append(_extension_record(fitted, new))
        messages.append(f"extended the scan to {len(new)} {fitted.side} volume(s) "
                        f"({min(new):.4g} to {max(new):.4g} bohr^3): "
                        f"{extensions[-1]['reason']}")
        run.compute(new, stage=len(extensions))
    return _volume_scan(crystal, settings, run, fitted, messages, extensions,
                        volume_range, n_points, qs)


def _point_line(p: ScanPoint, suffix: str) -> str:
    q = "" if p.c_over_a is None else f"  c/a {p.c_over_a:.4f}"
    state = "" if p.converged else "  NOT converged"
    pressure = ("P      (none)" if p.pressure is None
                else f"P = {p.pressure * HA_PER_BOHR3_GPA:9.3f} GPa")
    return (f"V = {p.volume:10.4f} bohr^3{q}  E = {p.energy:16.8f} Ha  {pressure}  "
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
        q, e, note = parabola_minimum([p.c_over_a for p in pts], [p.energy for p in pts])
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
