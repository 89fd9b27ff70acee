"""The quasi-harmonic approximation: lattice and bulk modulus against temperature (layer 5).

Given the static energy E(V) and the phonon spectrum at each of several volumes,
the Helmholtz free energy of the crystal is

    F(V, T) = E(V) + F_vib(V, T)

with F_vib the harmonic free energy (zero-point energy included) of the spectrum
at V (:mod:`pwsolid.thermodynamics`). At each temperature an equation of state
(:mod:`pwsolid.eos`, Birch-Murnaghan by default) is fitted to F(V, T) over the
volumes; its minimum is the equilibrium volume V(T) at zero pressure and its B0
the isothermal bulk modulus B_T(T). From V(T):

* the volume expansion coefficient alpha_V = d ln V / dT (second-order finite
  differences over the temperature grid) and, for a cubic crystal, the linear
  coefficient alpha = alpha_V / 3;
* the lattice lengths a(T) = a_ref (V(T) / V_ref)^(1/3) (uniform scaling of the
  reference cell);
* the zero-point correction: the minimum of E(V) + E_zp(V) against the minimum
  of E(V) alone;
* the heat capacities C_V at V(T) (interpolated in V) and
  C_P = C_V + alpha_V^2 B_T V T, and the thermodynamic Grueneisen parameter
  gamma = alpha_V B_T V / C_V;
* when every volume has its spectrum on the same q-mesh, the mode Grueneisen
  parameters gamma_i = -d ln omega_i / d ln V (a straight line of ln omega against
  ln V through every volume, at each mode).

:func:`quasi_harmonic_from_spectra` does the arithmetic on given arrays (tests
feed it model spectra with known answers); :func:`quasi_harmonic` computes the
static energies (:func:`pwsolid.workflows.equation_of_state.scan_volumes`) and
the phonons at each volume first.

Limits of the approximation (say them with every result): anharmonic effects
beyond the volume dependence of the frequencies are absent, so expansion above
roughly half the melting point is underestimated; the temperatures at which V(T)
leaves the sampled volumes are flagged and not to be trusted.

Inside: Ha, bohr, K; the document adds eV, angstrom, GPa and J/(mol K).

References
----------
N. W. Ashcroft and N. D. Mermin, *Solid State Physics* (1976), ch. 25 (the
quasi-harmonic free energy, alpha B_T = gamma C_V / V); S. Baroni, P. Giannozzi
and E. Isaev, Rev. Mineral. Geochem. 71, 39 (2010) (QHA from first principles).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np

from ..eos import EOSFit, fit_equation_of_state
from ..errors import ConvergenceWarning, InputError
from ..thermodynamics import (VibrationalSpectrum, check_temperatures,
                              harmonic_thermodynamics)
from ..units import (BOHR_ANGSTROM, GAS_CONSTANT_J_PER_MOL_K, HA_PER_BOHR3_GPA, HARTREE_EV,
                     KELVIN_HA)

__all__ = ["QuasiHarmonicResult", "quasi_harmonic", "quasi_harmonic_from_spectra",
           "QUASI_HARMONIC_SCHEMA", "mode_gruneisen"]

#: Schema of the quasi-harmonic result document.
QUASI_HARMONIC_SCHEMA = "pwsolid.quasi-harmonic/1"


def mode_gruneisen(volumes, spectra: Sequence[VibrationalSpectrum], *,
                   floor: float = 1e-6) -> np.ndarray | None:
    """gamma_i = -d ln(hbar omega_i) / d ln V of every mode, or None.

    A straight line of ln omega against ln V through every volume, mode by mode
    (modes are matched by their ascending order at each wave vector, so crossing
    branches mix). Modes below ``floor`` (Ha) at any volume (acoustic at Gamma,
    imaginary) get NaN. Returns None when the spectra differ in shape.
    """
    shapes = {s.energies.shape for s in spectra}
    if len(shapes) != 1 or len(spectra) < 2:
        return None
    e = np.stack([s.energies for s in spectra])            # (n_v, n_q, n_modes)
    ok = np.all(e > floor, axis=0)
    lnv = np.log(np.asarray(volumes, dtype=float))
    lne = np.log(np.where(ok, e, 1.0))
    x = lnv - lnv.mean()
    slope = np.tensordot(x, lne - lne.mean(axis=0), axes=(0, 0)) / np.sum(x * x)
    return np.where(ok, -slope, np.nan)


@dataclass(frozen=True, eq=False)
class QuasiHarmonicResult:
    """Temperature dependence of a crystal in the quasi-harmonic approximation.

    Attributes
    ----------
    volumes : ndarray (n_v,), bohr^3
        Volumes with a static energy and a spectrum (sorted).
    static_energies : ndarray (n_v,), Ha
    harmonic : tuple of HarmonicThermodynamics (one per volume)
    temperatures : ndarray (n_T,), K
    free_energies : ndarray (n_T, n_v), Ha
        E(V) + F_vib(V, T).
    fits : tuple of EOSFit (one per temperature)
    static_fit : EOSFit
        The fit of E(V) alone (no vibrations).
    zero_point_fit : EOSFit
        The fit of E(V) + E_zp(V).
    volume : ndarray (n_T,), bohr^3
        V(T), the minimum of each fit.
    bulk_modulus : ndarray (n_T,), Ha/bohr^3
        Isothermal B_T at V(T).
    volume_expansion : ndarray (n_T,), 1/K
        d ln V / dT.
    heat_capacity_volume, heat_capacity_pressure : ndarray (n_T,), k_B per cell
        C_V at V(T) and C_P = C_V + alpha_V^2 B_T V T.
    entropy : ndarray (n_T,), k_B per cell, at V(T)
    gruneisen : ndarray (n_T,)
        Thermodynamic Grueneisen parameter alpha_V B_T V / C_V (NaN where C_V = 0).
    mode_gruneisen : ndarray (n_q, n_modes) or None
    inside_range : ndarray (n_T,) of bool
        V(T) within the sampled volumes (results outside are extrapolations).
    n_atoms : int
    reference_volume : float, bohr^3, and reference_lengths : dict name -> bohr
        A cell whose lengths scale as (V / reference_volume)^(1/3).
    form : str
        The equation of state fitted.
    messages : tuple of str
    """

    volumes: np.ndarray
    static_energies: np.ndarray
    harmonic: tuple
    temperatures: np.ndarray
    free_energies: np.ndarray
    fits: tuple
    static_fit: EOSFit
    zero_point_fit: EOSFit
    volume: np.ndarray
    bulk_modulus: np.ndarray
    volume_expansion: np.ndarray
    heat_capacity_volume: np.ndarray
    heat_capacity_pressure: np.ndarray
    entropy: np.ndarray
    gruneisen: np.ndarray
    mode_gruneisen: np.ndarray | None
    inside_range: np.ndarray
    n_atoms: int
    reference_volume: float
    reference_lengths: Mapping[str, float]
    form: str
    messages: tuple = field(default_factory=tuple)
    history: tuple = field(default_factory=tuple)

    # -- derived ------------------------------------------------------------
    @property
    def converged(self) -> bool:
        """Every fit converged and V(T) stayed inside the sampled volumes throughout."""
        return (all(f.converged for f in self.fits) and self.static_fit.converged
                and bool(np.all(self.inside_range))
                and all(h.get("static_converged", True) and h.get("phonons_converged", True)
                        for h in self.history))

    @property
    def linear_expansion(self) -> np.ndarray:
        """alpha_V / 3 (1/K): the linear coefficient of a cubic crystal."""
        return self.volume_expansion / 3.0

    def lattice(self, volume) -> dict[str, np.ndarray]:
        """Lattice lengths (bohr) at ``volume`` (bohr^3), uniform scaling of the reference."""
        s = (np.asarray(volume, dtype=float) / self.reference_volume) ** (1.0 / 3.0)
        return {k: v * s for k, v in self.reference_lengths.items()}

    @property
    def zero_point_volume_change(self) -> float:
        """V0 with the zero-point energy over V0 without, minus one."""
        return self.zero_point_fit.v0 / self.static_fit.v0 - 1.0

    @property
    def zero_point_lattice_change(self) -> float:
        """Relative change of the lattice lengths by the zero-point motion."""
        return (1.0 + self.zero_point_volume_change) ** (1.0 / 3.0) - 1.0

    @property
    def trusted_up_to(self) -> float | None:
        """Highest temperature (K) below which V(T) never left the sampled volumes."""
        bad = np.flatnonzero(~self.inside_range)
        if bad.size == 0:
            return float(self.temperatures[-1])
        return None if bad[0] == 0 else float(self.temperatures[bad[0] - 1])

    def negative_expansion(self) -> dict | None:
        """Where alpha_V < 0 (inside the trusted range): the interval and the minimum."""
        a = self.volume_expansion
        neg = (a < 0) & self.inside_range
        if not np.any(neg):
            return None
        idx = np.flatnonzero(neg)
        i_min = idx[np.argmin(a[idx])]
        return {"from_K": float(self.temperatures[idx[0]]),
                "to_K": float(self.temperatures[idx[-1]]),
                "minimum_linear_per_K": float(a[i_min] / 3.0),
                "minimum_at_K": float(self.temperatures[i_min])}

    # -- document -------------------------------------------------------------
    def as_document(self) -> dict:
        """JSON-ready result (schema ``QUASI_HARMONIC_SCHEMA``)."""
        a3 = BOHR_ANGSTROM ** 3
        per_mol = GAS_CONSTANT_J_PER_MOL_K / self.n_atoms      # k_B per cell -> J/(mol atoms K)
        lat = {k: (np.asarray(v) * BOHR_ANGSTROM).tolist()
               for k, v in self.lattice(self.volume).items()}
        static_lat = {k: float(v) * BOHR_ANGSTROM
                      for k, v in self.lattice(self.static_fit.v0).items()}
        zp_lat = {k: float(v) * BOHR_ANGSTROM
                  for k, v in self.lattice(self.zero_point_fit.v0).items()}
        zpe = np.array([h.zero_point_energy for h in self.harmonic])
        mg = self.mode_gruneisen
        return {
            "schema": QUASI_HARMONIC_SCHEMA,
            "converged": self.converged,
            "messages": list(self.messages),
            "equation_of_state": self.form,
            "atoms_per_cell": self.n_atoms,
            "volumes": {
                "volumes_angstrom3": (self.volumes * a3).tolist(),
                "static_energies_eV": (self.static_energies * HARTREE_EV).tolist(),
                "zero_point_energies_meV": (zpe * HARTREE_EV * 1e3).tolist(),
                "imaginary_modes": [h.imaginary_modes for h in self.harmonic],
            },
            "zero_point": {
                "static_volume_angstrom3": self.static_fit.v0 * a3,
                "static_lattice_angstrom": static_lat,
                "volume_angstrom3": self.zero_point_fit.v0 * a3,
                "lattice_angstrom": zp_lat,
                "lattice_change_percent": 100.0 * self.zero_point_lattice_change,
                "static_bulk_modulus_GPa": self.static_fit.b0_gpa,
                "bulk_modulus_GPa": self.zero_point_fit.b0_gpa,
            },
            "temperatures_K": self.temperatures.tolist(),
            "volume_angstrom3": (self.volume * a3).tolist(),
            "lattice_angstrom": lat,
            "volume_expansion_per_K": self.volume_expansion.tolist(),
            "linear_expansion_per_K": self.linear_expansion.tolist(),
            "bulk_modulus_GPa": (self.bulk_modulus * HA_PER_BOHR3_GPA).tolist(),
            "free_energy_eV": [float(f.e0) * HARTREE_EV for f in self.fits],
            "heat_capacity_constant_volume_J_per_mol_K":
                (self.heat_capacity_volume * per_mol).tolist(),
            "heat_capacity_constant_pressure_J_per_mol_K":
                (self.heat_capacity_pressure * per_mol).tolist(),
            "entropy_J_per_mol_K": (self.entropy * per_mol).tolist(),
            "gruneisen_parameter": [None if not math.isfinite(g) else float(g)
                                    for g in self.gruneisen],
            "mode_gruneisen": None if mg is None else {
                "lowest": float(np.nanmin(mg)), "highest": float(np.nanmax(mg)),
                "mean": float(np.nanmean(mg))},
            "inside_sampled_volumes": self.inside_range.tolist(),
            "trusted_up_to_K": self.trusted_up_to,
            "negative_expansion": self.negative_expansion(),
            "units": {"per_mol": "per mole of atoms", "expansion": "1/K",
                      "lattice": "angstrom, uniform scaling of the input cell"},
            "caution": "quasi-harmonic: anharmonicity beyond the volume dependence of the "
                       "frequencies is absent (expansion too small near melting); values "
                       "where V(T) left the sampled volumes are extrapolations",
        }


# --- the arithmetic ------------------------------------------------------------------

def _check_inputs(volumes, static_energies, spectra, temperatures):
    v = np.asarray(volumes, dtype=float)
    e = np.asarray(static_energies, dtype=float)
    if v.ndim != 1 or v.shape != e.shape or len(spectra) != v.size:
        raise InputError("give one static energy and one phonon spectrum per volume",
                         key="volumes", value=[v.size, e.size, len(spectra)])
    if v.size < 5:
        raise InputError("the quasi-harmonic fits need at least 5 volumes (an equation of "
                         "state has four parameters)", key="volumes", value=int(v.size))
    t = check_temperatures(temperatures)
    if t.size < 3 or np.any(np.diff(t) <= 0):
        raise InputError("give at least three increasing temperatures (the expansion "
                         "coefficient is a derivative over them)", key="temperatures",
                         value=t.tolist()[:6])
    order = np.argsort(v)
    return v[order], e[order], [spectra[i] for i in order], t


def _fit(volumes, energies, form, what, messages) -> EOSFit:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", ConvergenceWarning)
        fit = fit_equation_of_state(volumes, energies, form)
    if caught:
        messages.append(f"{what}: {caught[0].message}")
    return fit


def _at_volume(values: np.ndarray, volumes: np.ndarray, target: np.ndarray) -> np.ndarray:
    """Column j of ``values`` (n_v, n_T) interpolated at target[j] by a cubic in V."""
    deg = min(3, volumes.size - 1)
    x = volumes / volumes.mean() - 1.0
    coef = np.polynomial.polynomial.polyfit(x, values, deg)        # (deg + 1, n_T)
    xt = target / volumes.mean() - 1.0
    powers = xt[None, :] ** np.arange(deg + 1)[:, None]
    return np.sum(coef * powers, axis=0)


def quasi_harmonic_from_spectra(volumes, static_energies, spectra: Sequence[VibrationalSpectrum],
                                temperatures, *, form: str = "birch-murnaghan",
                                n_atoms: int = 1, reference_volume: float | None = None,
                                reference_lengths: Mapping[str, float] | None = None,
                                messages: Sequence[str] = ()) -> QuasiHarmonicResult:
    """The quasi-harmonic approximation on given static energies and spectra.

    Parameters
    ----------
    volumes : array_like (n_v,), bohr^3
        At least five distinct volumes around the minimum.
    static_energies : array_like (n_v,), Ha
        E(V) of the crystal at rest.
    spectra : sequence of VibrationalSpectrum (n_v)
        Phonon energies (Ha) and q-weights at each volume, per cell.
    temperatures : array_like (n_T,), K
        At least three, increasing; include 0 for the ground state.
    form : str
        Equation of state fitted at each temperature (:data:`pwsolid.eos.EOS_FORMS`).
    n_atoms : int
        Atoms per cell (for per-mole quantities).
    reference_volume, reference_lengths
        A cell (volume, bohr^3; lengths, bohr) whose lengths scale with V^(1/3);
        default the mean volume and a cube edge.

    Returns
    -------
    QuasiHarmonicResult
    """
    v, e, spectra, t = _check_inputs(volumes, static_energies, spectra, temperatures)
    notes = list(messages)
    harmonic = tuple(harmonic_thermodynamics(s, t) for s in spectra)
    for vol, h in zip(v, harmonic):
        for m in h.messages:
            notes.append(f"at V = {vol * BOHR_ANGSTROM ** 3:.4f} A^3: {m}")
    free_vib = np.array([h.free_energy for h in harmonic])           # (n_v, n_T)
    free = e[:, None] + free_vib
    zpe = np.array([h.zero_point_energy for h in harmonic])

    static_fit = _fit(v, e, form, "static E(V)", notes)
    zp_fit = _fit(v, e + zpe, form, "E(V) + zero-point energy", notes)
    fits = []
    for j, temp in enumerate(t):
        fits.append(_fit(v, free[:, j], form, f"F(V) at {temp:g} K", notes))
    vol_t = np.array([f.v0 for f in fits])
    b_t = np.array([f.b0 for f in fits])
    inside = np.array([f.minimum_inside_range for f in fits])
    alpha = np.gradient(vol_t, t, edge_order=2) / vol_t
    if t[0] == 0.0:
        alpha[0] = 0.0          # exact: the third law (the one-sided difference is not)

    cv = _at_volume(np.array([h.heat_capacity for h in harmonic]), v, vol_t)
    entropy = _at_volume(np.array([h.entropy for h in harmonic]), v, vol_t)
    extra = alpha ** 2 * b_t * vol_t * t / KELVIN_HA                 # Ha/K -> k_B
    cp = cv + extra
    with np.errstate(divide="ignore", invalid="ignore"):
        gamma = np.where(cv > 1e-12, alpha * b_t * vol_t / (cv * KELVIN_HA), np.nan)
    if not np.all(inside):
        first = float(t[np.flatnonzero(~inside)[0]])
        notes.append(f"from {first:g} K the free-energy minimum lies outside the sampled "
                     "volumes: the values there are extrapolations (sample larger volumes)")
    ref_v = float(reference_volume) if reference_volume is not None else float(v.mean())
    ref_l = dict(reference_lengths) if reference_lengths else {"a": ref_v ** (1.0 / 3.0)}
    return QuasiHarmonicResult(
        volumes=v, static_energies=e, harmonic=harmonic, temperatures=t, free_energies=free.T,
        fits=tuple(fits), static_fit=static_fit, zero_point_fit=zp_fit, volume=vol_t,
        bulk_modulus=b_t, volume_expansion=alpha, heat_capacity_volume=cv,
        heat_capacity_pressure=cp, entropy=entropy, gruneisen=gamma,
        mode_gruneisen=mode_gruneisen(v, spectra), inside_range=inside, n_atoms=int(n_atoms),
        reference_volume=ref_v, reference_lengths=ref_l, form=form,
        messages=tuple(dict.fromkeys(notes)))


# --- the full calculation ----------------------------------------------------------------

def _default_phonon_solver(cell, settings, phonon_settings, *, record_dir, accept_mismatch,
                           comm, log, progress):
    """Phonons of ``cell`` by finite displacements (:func:`pwsolid.workflows.phonons.phonons`)."""
    from .phonons import phonons

    return phonons(cell, settings, phonon_settings, record_dir=record_dir,
                   accept_mismatch=accept_mismatch, comm=comm, log=log, progress=progress)


def quasi_harmonic(crystal, settings=None, phonon_settings=None, *, temperatures=None,
                   volume_range: float = 0.03, n_points: int = 7, q_mesh=(12, 12, 12),
                   form: str = "birch-murnaghan", record_dir=None, accept_mismatch: bool = False,
                   scan_solver=None, phonon_solver=None, comm=None, log=None,
                   progress=None) -> QuasiHarmonicResult:
    """Static energies and phonons at several volumes, then the quasi-harmonic fits.

    Parameters
    ----------
    crystal : Crystal
        The primitive cell; its shape is kept at every volume.
    settings : GroundStateSettings
        Ground-state settings of the static scan and of the displaced supercells.
    phonon_settings : PhononSettings
        Supercell, displacement amplitude, ... (:mod:`pwsolid.workflows.phonons`).
    temperatures : array_like, K
        Default 0 to 1000 K by 5 K.
    volume_range, n_points
        The static scan (:func:`pwsolid.workflows.equation_of_state.scan_volumes`);
        its range extensions, if any, get phonons too.
    q_mesh
        Gamma-centred q-mesh of the Brillouin-zone sums at each volume.
    form
        Equation of state fitted to F(V, T).
    record_dir
        Directory for the resume files: ``volumes.json`` for the static scan and
        one sub-directory of displacement records per volume.
    scan_solver, phonon_solver
        Seams for tests: ``scan_solver`` as in ``scan_volumes``; ``phonon_solver(cell,
        settings, phonon_settings, record_dir=, accept_mismatch=, comm=, log=, progress=)``
        returns an object with ``mesh_frequencies(q_mesh)`` (``frequencies_THz``,
        ``weights``), ``converged`` and ``messages``.

    Returns
    -------
    QuasiHarmonicResult
        Its ``history`` holds one entry per volume (static energy, convergence,
        lowest frequency, resume).
    """
    from pathlib import Path

    from ..thermodynamics import temperature_grid
    from .cell_geometry import crystal_at, lattice_lengths
    from .equation_of_state import scan_volumes
    from .phonon_thermodynamics import spectrum_of_mesh

    t = temperature_grid() if temperatures is None else temperatures
    emit = log or (lambda line: None)
    root = Path(record_dir) if record_dir is not None else None
    if root is not None:
        root.mkdir(parents=True, exist_ok=True)
    scan = scan_volumes(crystal, settings, volume_range=volume_range, n_points=n_points,
                        store=None if root is None else root / "volumes.json",
                        accept_mismatch=accept_mismatch, solver=scan_solver, comm=comm, log=emit)
    settings = scan.settings
    solver = phonon_solver or _default_phonon_solver
    notes = [f"static scan: {m}" for m in scan.messages]
    spectra, history = [], []
    volumes = np.asarray(scan.volumes, dtype=float)
    for i, v in enumerate(volumes):
        cell = crystal_at(crystal, float(v), None)
        rel = v / crystal.volume
        emit(f"phonons at V/V_in = {rel:.5f} ({i + 1} of {volumes.size})")
        sub = None if root is None else root / f"phonons-volume-{rel:.6f}"
        result = solver(cell, settings, phonon_settings, record_dir=sub,
                        accept_mismatch=accept_mismatch, comm=comm, log=emit, progress=None)
        mesh = result.mesh_frequencies(tuple(q_mesh))
        spectra.append(spectrum_of_mesh(mesh))
        lowest = float(np.min(mesh.frequencies_THz))
        history.append({"volume_bohr3": float(v), "relative_volume": float(rel),
                        "static_energy_Ha": float(scan.energies[i]),
                        "static_converged": bool(scan.all_points_converged),
                        "phonons_converged": bool(getattr(result, "converged", True)),
                        "lowest_frequency_THz": lowest})
        for m in getattr(result, "messages", ()) or ():
            notes.append(f"phonons at V/V_in = {rel:.4f}: {m}")
        if progress is not None:
            progress(i + 1, volumes.size)
    if not all(h["phonons_converged"] for h in history):
        notes.append("some displaced supercells did not converge (see history)")
    out = quasi_harmonic_from_spectra(volumes, scan.energies, spectra, t, form=form,
                                      n_atoms=crystal.n_atoms, reference_volume=crystal.volume,
                                      reference_lengths=lattice_lengths(crystal.lattice),
                                      messages=notes)
    from dataclasses import replace

    return replace(out, history=tuple(history))
