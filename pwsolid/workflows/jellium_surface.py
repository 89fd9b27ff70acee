"""Jellium surfaces: surface energy, its parts and the work function from slabs (layer 5).

Each r_s point solves self-consistent jellium slabs (:mod:`.jellium_slab`) of
``thickness_samples`` thicknesses spread evenly over half a Fermi wavelength above
``thickness`` Fermi wavelengths. The quantum-size oscillations of a slab's energy have
that period in the thickness (they go as cos(2 k_F L)), so the mean over the samples
cancels their leading part; the spread is reported beside the mean. Per sample

    sigma     = [E_slab - N eps_bulk(n_bar)] / 2       (two surfaces)
    sigma_xc  = [E_xc[n] - N eps_xc(n_bar)] / 2        (the same split for each part)

with ``N = n_bar L`` electrons per area and the uniform-gas energies per electron of
the same functional. Functionals named in ``extra_functionals`` (e.g. PBE, or the
meta-GGAs ``scan``/``r2scan`` once registered) are evaluated on the self-consistent
density (and, for a meta-GGA, on the kinetic-energy density of the same orbitals):
their sigma_xc is non-self-consistent, as in the tables of the meta-GGA papers. A
meta-GGA may also be the self-consistent functional: its slab is solved by
:mod:`.jellium_slab_meta`, where the in-plane motion no longer separates.

Also per sample: the work function ``v_es(vacuum middle) - mu`` (the exchange-
correlation potential is negligible there for the vacuum widths used), the
Budd-Vannimenus difference (electron electrostatic energy at the background edge
minus its mean over the middle half of the slab, which equals ``n_bar d eps/d n_bar``
of the uniform gas for a thick slab: G. Budd and J. Vannimenus, Phys. Rev. Lett. 31,
1218 (1973)), and the mean density of the middle half against ``n_bar``.

Finished r_s points go into a :class:`pwsolid.store.RecordLog` (kind
``jellium-surface-points``) the moment they are done; a re-run with the same file and
settings skips them, and a file of other settings is refused with the differences named.
"""

from __future__ import annotations

import math
import numbers
import time
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import InputError
from ..store import Fingerprint, RecordKind, RecordLog, register_kind
from ..units import HA_PER_BOHR2_ERG_PER_CM2, HARTREE_EV
from ..xc import get_functional
from .jellium_slab import (SlabState, bulk_energy_per_electron, fermi_wavevector,
                           kinetic_energy_density, slab_grid, solve_slab, uniform_density)

__all__ = ["JELLIUM_SURFACE_SCHEMA", "SurfaceSettings", "SurfacePoint", "JelliumSurfaceStudy",
           "SurfaceConvergence", "jellium_surface", "jellium_surface_point",
           "jellium_surface_convergence", "xc_energy_per_area"]

JELLIUM_SURFACE_SCHEMA = "pwsolid.jellium-surface/1"
POINTS_KIND = register_kind(RecordKind(
    "jellium-surface-points", "restart file of a jellium-surface run", 1, "log", "points",
    remedy="delete it, or give another file (--points-file)"))
_PARTS = ("kinetic", "electrostatic", "exchange_correlation", "total")


@dataclass(frozen=True)
class SurfaceSettings:
    """Validated settings of a jellium-surface run (lengths in Fermi wavelengths 2 pi/k_F).

    Attributes
    ----------
    functional : str
        Self-consistent functional: any registered local, gradient or meta-GGA functional.
    extra_functionals : tuple of str
        Evaluated on the self-consistent density and orbitals (non-self-consistent).
    thickness : float
        Thinnest slab, in Fermi wavelengths.
    thickness_samples : int
        Slabs per point, spread over half a Fermi wavelength (the averaging window).
    vacuum : float
        Vacuum between the slab's periodic images, in Fermi wavelengths (at least 12 bohr).
    cutoff : float
        Kinetic cutoff of the 1-D plane waves in units of the Fermi energy.
    tolerance : float
        SCF stop: int |n_out - n_in| dz / N.
    """

    functional: str = "lda-pw92"
    extra_functionals: tuple[str, ...] = ()
    thickness: float = 8.0
    thickness_samples: int = 4
    vacuum: float = 3.0
    cutoff: float = 20.0
    tolerance: float = 1e-10

    def __post_init__(self):
        fn = _named(self.functional, "functional")
        object.__setattr__(self, "functional", fn.name if fn.origin == "built-in"
                           else str(self.functional))
        extras = tuple(str(x).strip() for x in self.extra_functionals if str(x).strip())
        for name in extras:
            _named(name, "extra_functionals")
        object.__setattr__(self, "extra_functionals", extras)
        for key, value, low, high in (("thickness", self.thickness, 1.0, 100.0),
                                      ("vacuum", self.vacuum, 0.5, 50.0),
                                      ("cutoff", self.cutoff, 2.0, 2000.0),
                                      ("tolerance", self.tolerance, 1e-14, 1e-3)):
            if not (isinstance(value, numbers.Real) and not isinstance(value, bool)
                    and math.isfinite(value)
                    and low <= value <= high):
                raise InputError(f"must be a number between {low:g} and {high:g}",
                                 key=key, value=value)
        samples = self.thickness_samples
        if not (isinstance(samples, numbers.Integral) and not isinstance(samples, bool)
                and 1 <= samples <= 32):
            raise InputError("must be a whole number between 1 and 32",
                             key="thickness_samples", value=samples)
        object.__setattr__(self, "thickness_samples", int(samples))

    def fingerprint(self) -> Fingerprint:
        values = {"schema": JELLIUM_SURFACE_SCHEMA, "functional": self.functional,
                  "extra_functionals": list(self.extra_functionals),
                  "thickness_wavelengths": self.thickness,
                  "thickness_samples": self.thickness_samples,
                  "vacuum_wavelengths": self.vacuum, "cutoff_fermi_energies": self.cutoff,
                  "density_tolerance": self.tolerance}
        return Fingerprint(values)


def _named(spec, key: str):
    """The functional ``spec`` names; an unknown one is reported under ``key``."""
    try:
        return get_functional(spec)
    except InputError as exc:
        raise InputError(exc.reason, key=key, value=spec) from None


def xc_energy_per_area(functional, state: SlabState) -> float:
    """E_xc per area (Ha/bohr^2) of ``functional`` on a slab's density (and its tau).

    A meta-GGA (one with ``needs_kinetic_density``) gets the kinetic-energy density of
    the slab's orbitals (:func:`.jellium_slab.kinetic_energy_density`).
    """
    fn = get_functional(functional)
    grid = state.grid
    n = np.maximum(state.density, 0.0)
    dz = grid.spacing
    if not fn.needs_gradients:
        return float(np.sum(n * fn.evaluate(n)[0]) * dz)
    grad = np.real(np.fft.ifft(1j * grid.g * np.fft.fft(n)))
    if getattr(fn, "needs_kinetic_density", False):
        tau = kinetic_energy_density(grid, state)
        return float(np.sum(fn.evaluate_meta(n, grad * grad, tau)[0]) * dz)
    return float(np.sum(fn.evaluate_gradient(n, grad * grad)[0]) * dz)


@dataclass(frozen=True)
class SurfacePoint:
    """One r_s: the thickness-averaged surface energy and its parts, and per-slab figures.

    Energies per area in Ha/bohr^2 inside; documents give erg/cm^2 too.
    """

    rs: float
    thicknesses: tuple[float, ...]              # bohr
    sigma: dict                                 # part -> tuple per slab (Ha/bohr^2)
    extra_sigma_xc: dict                        # functional -> tuple per slab
    work_function: tuple[float, ...]            # Ha
    edge_potential_step: tuple[float, ...]      # v_es(edge) - mean middle v_es (Ha)
    budd_vannimenus: float                      # n d eps/dn of the uniform gas (Ha)
    middle_density_ratio: tuple[float, ...]
    converged: bool
    iterations: tuple[int, ...]
    seconds: float
    profile: dict = field(default_factory=dict, repr=False)   # of the first slab
    resumed: bool = False

    def mean(self, part: str = "total") -> float:
        return float(np.mean(self.sigma[part]))

    def spread(self, part: str = "total") -> float:
        """Half the range over the thickness samples (Ha/bohr^2)."""
        values = self.sigma[part]
        return 0.5 * float(max(values) - min(values))

    def mean_extra(self, name: str) -> float:
        return float(np.mean(self.extra_sigma_xc[name]))

    def as_record(self) -> dict:
        return {"rs": self.rs, "thicknesses_bohr": list(self.thicknesses),
                "sigma_Ha_per_bohr2": {k: list(v) for k, v in self.sigma.items()},
                "extra_sigma_xc_Ha_per_bohr2": {k: list(v)
                                                for k, v in self.extra_sigma_xc.items()},
                "work_function_Ha": list(self.work_function),
                "edge_potential_step_Ha": list(self.edge_potential_step),
                "budd_vannimenus_Ha": self.budd_vannimenus,
                "middle_density_ratio": list(self.middle_density_ratio),
                "converged": self.converged, "iterations": list(self.iterations),
                "seconds": self.seconds,
                "profile": {k: [float(x) for x in v] for k, v in self.profile.items()}}

    @classmethod
    def from_record(cls, rec: dict) -> "SurfacePoint":
        tup = lambda xs: tuple(float(x) for x in xs)   # noqa: E731
        return cls(float(rec["rs"]), tup(rec["thicknesses_bohr"]),
                   {k: tup(v) for k, v in rec["sigma_Ha_per_bohr2"].items()},
                   {k: tup(v) for k, v in rec["extra_sigma_xc_Ha_per_bohr2"].items()},
                   tup(rec["work_function_Ha"]), tup(rec["edge_potential_step_Ha"]),
                   float(rec["budd_vannimenus_Ha"]), tup(rec["middle_density_ratio"]),
                   bool(rec["converged"]), tuple(int(i) for i in rec["iterations"]),
                   float(rec["seconds"]),
                   {k: np.array(v, float) for k, v in rec.get("profile", {}).items()},
                   resumed=True)

    def as_document(self) -> dict:
        erg = HA_PER_BOHR2_ERG_PER_CM2
        doc = {"wigner_seitz_radius_bohr": self.rs,
               "surface_energy_erg_per_cm2": {p: self.mean(p) * erg for p in _PARTS},
               "surface_energy_spread_erg_per_cm2": {p: self.spread(p) * erg for p in _PARTS},
               "extra_xc_surface_energy_erg_per_cm2": {
                   k: self.mean_extra(k) * erg for k in self.extra_sigma_xc},
               "work_function_eV": float(np.mean(self.work_function)) * HARTREE_EV,
               "edge_potential_step_Ha": float(np.mean(self.edge_potential_step)),
               "budd_vannimenus_bulk_value_Ha": self.budd_vannimenus,
               "middle_density_over_background": float(np.mean(self.middle_density_ratio)),
               "converged": self.converged, "reused_from_points_file": self.resumed,
               "slabs": [{"thickness_bohr": t,
                          "surface_energy_erg_per_cm2": {p: self.sigma[p][i] * erg
                                                         for p in _PARTS},
                          "work_function_eV": self.work_function[i] * HARTREE_EV,
                          "scf_iterations": self.iterations[i]}
                         for i, t in enumerate(self.thicknesses)],
               "profile_of_the_thinnest_slab": {
                   k: [round(float(x), 10) for x in v] for k, v in self.profile.items()}}
        return doc


def _middle(grid, values):
    a, b = grid.edges
    inside = (grid.z > a + 0.25 * grid.thickness) & (grid.z < b - 0.25 * grid.thickness)
    return float(np.mean(values[inside]))


def _fine(values: np.ndarray, factor: int) -> np.ndarray:
    """Band-limited (Fourier) interpolation of a periodic grid field onto factor x points."""
    size = values.size
    coeff = np.fft.fft(values)
    padded = np.zeros(size * factor, complex)
    half = size // 2
    padded[:half] = coeff[:half]
    padded[-(size - half):] = coeff[half:]
    return np.real(np.fft.ifft(padded)) * factor


def _profile(state: SlabState, factor: int = 4) -> dict:
    """Density and potentials against the distance from the background edge (bohr),
    from the cell's middle outwards to the vacuum middle (z > 0: vacuum), on a grid
    ``factor`` times finer than the calculation's (Fourier interpolation)."""
    grid = state.grid
    size = grid.z.size * factor
    z = np.arange(size) * grid.length / size
    part = slice(size // 2, None)
    n = _fine(state.density, factor)[part]
    v_es = _fine(state.electrostatic, factor)[part]
    v_xc = _fine(state.xc_potential, factor)[part]
    return {"z_bohr": z[part] - grid.edges[1], "density_over_background": n / grid.mean_density,
            "electrostatic_Ha": v_es - state.fermi_level,
            "effective_Ha": v_es + v_xc - state.fermi_level}


def budd_vannimenus_value(rs: float, functional) -> float:
    """n d eps_bulk / dn of the uniform gas (Ha), by a central difference in n."""
    n = uniform_density(rs)
    h = 1e-4 * n

    def eps(density):
        return bulk_energy_per_electron((3 / (4 * math.pi * density)) ** (1 / 3),
                                        functional)["total"]
    return n * (eps(n + h) - eps(n - h)) / (2 * h)


def jellium_surface_point(rs: float, settings: SurfaceSettings = SurfaceSettings(),
                          log=None) -> SurfacePoint:
    """Surface energy and its parts at one r_s (see the module notes)."""
    if not (isinstance(rs, (int, float)) and math.isfinite(rs) and 1.0 <= rs <= 10.0):
        raise InputError("r_s must lie between 1 and 10 bohr", key="rs", value=rs)
    start = time.perf_counter()
    k_f = fermi_wavevector(rs)
    wavelength = 2 * math.pi / k_f
    bulk = bulk_energy_per_electron(rs, settings.functional)
    extras = {name: bulk_energy_per_electron(rs, name)["exchange_correlation"]
              for name in settings.extra_functionals}
    sigma = {p: [] for p in _PARTS}
    extra = {name: [] for name in extras}
    thicknesses, work, step, middle, its = [], [], [], [], []
    converged, profile = True, {}
    for k in range(settings.thickness_samples):
        thickness = wavelength * (settings.thickness + 0.5 * k / settings.thickness_samples)
        grid = slab_grid(rs, thickness, max(settings.vacuum * wavelength, 12.0),
                         settings.cutoff * 0.5 * k_f ** 2)
        state = solve_slab(grid, settings.functional, tolerance=settings.tolerance, log=log)
        electrons = grid.electrons_per_area
        per_electron = {"kinetic": bulk["kinetic"], "electrostatic": 0.0,
                        "exchange_correlation": bulk["exchange_correlation"],
                        "total": bulk["total"]}
        for p in _PARTS:
            sigma[p].append(0.5 * (state.energies[p] - electrons * per_electron[p]))
        for name, eps_xc in extras.items():
            extra[name].append(0.5 * (xc_energy_per_area(name, state) - electrons * eps_xc))
        thicknesses.append(thickness)
        work.append(state.potential_at(0.0) - state.fermi_level)
        step.append(state.potential_at(grid.edges[1]) - _middle(grid, state.electrostatic))
        middle.append(_middle(grid, state.density) / grid.mean_density)
        its.append(state.iterations)
        converged &= state.converged
        if k == 0:
            profile = _profile(state)
    return SurfacePoint(float(rs), tuple(thicknesses), {p: tuple(v) for p, v in sigma.items()},
                        {n: tuple(v) for n, v in extra.items()}, tuple(work), tuple(step),
                        budd_vannimenus_value(rs, settings.functional), tuple(middle),
                        converged, tuple(its), time.perf_counter() - start, profile)


@dataclass(frozen=True)
class JelliumSurfaceStudy:
    """Surface energies over r_s for one functional (and extra ones on its density)."""

    settings: SurfaceSettings
    points: tuple[SurfacePoint, ...]
    mismatches: tuple[str, ...] = ()

    @property
    def converged(self) -> bool:
        return all(p.converged for p in self.points)

    def as_document(self) -> dict:
        s = self.settings
        return {"schema": JELLIUM_SURFACE_SCHEMA, "functional": s.functional,
                "extra_functionals": list(s.extra_functionals),
                "method": "1-D Kohn-Sham slabs, in-plane free-electron motion integrated "
                          "exactly; surface energies averaged over slab thicknesses "
                          "spanning half a Fermi wavelength",
                "settings": {"thickness_fermi_wavelengths": s.thickness,
                             "thickness_samples": s.thickness_samples,
                             "vacuum_fermi_wavelengths": s.vacuum,
                             "cutoff_fermi_energies": s.cutoff,
                             "density_tolerance": s.tolerance},
                "converged": self.converged, "accepted_mismatches": list(self.mismatches),
                "points": [p.as_document() for p in self.points]}

    def to_csv(self) -> str:
        erg = HA_PER_BOHR2_ERG_PER_CM2
        extras = list(self.settings.extra_functionals)
        head = ["rs_bohr", "sigma_erg_cm2", "sigma_spread_erg_cm2", "sigma_kinetic_erg_cm2",
                "sigma_electrostatic_erg_cm2", "sigma_xc_erg_cm2",
                *[f"sigma_xc_{x}_erg_cm2" for x in extras], "work_function_eV"]
        rows = [",".join(head)]
        for p in self.points:
            values = [p.rs, p.mean() * erg, p.spread() * erg, p.mean("kinetic") * erg,
                      p.mean("electrostatic") * erg, p.mean("exchange_correlation") * erg,
                      *[p.mean_extra(x) * erg for x in extras],
                      float(np.mean(p.work_function)) * HARTREE_EV]
            rows.append(",".join(f"{v:.6g}" for v in values))
        return "\n".join(rows) + "\n"


def _same_rs(rs):
    return lambda rec: math.isclose(float(rec.get("rs", math.nan)), rs, rel_tol=1e-12)


def jellium_surface(radii=(2.0, 3.0, 4.0, 5.0, 6.0), settings: SurfaceSettings = SurfaceSettings(),
                    *, points_file=None, accept_mismatch: bool = False, progress=None,
                    log=None) -> JelliumSurfaceStudy:
    """Jellium surface energies over r_s (see the module notes).

    Parameters
    ----------
    radii : sequence of float
        r_s values (bohr), 1 to 10.
    settings : SurfaceSettings
    points_file : path or None
        Restart file: finished points are written there at once and reused on a re-run
        with the same settings (a file of other settings is refused unless
        ``accept_mismatch``).
    progress : callable(done, total) or None
    """
    radii = tuple(float(r) for r in radii)
    if not radii:
        raise InputError("give at least one r_s", key="rs", value="")
    store = None
    if points_file is not None:
        store = RecordLog(points_file, POINTS_KIND, settings.fingerprint(),
                          accept_mismatch=accept_mismatch)
    points = []
    for i, rs in enumerate(radii):
        rec = store.find(_same_rs(rs)) if store is not None else None
        if rec is not None and rec.get("converged"):
            point = SurfacePoint.from_record(rec)
        else:
            point = jellium_surface_point(rs, settings, log=log)
            if store is not None:
                store.add(point.as_record(), replaces=_same_rs(rs))
        points.append(point)
        if progress is not None:
            progress(i + 1, len(radii))
    return JelliumSurfaceStudy(settings, tuple(points),
                               store.mismatches if store is not None else ())


@dataclass(frozen=True)
class SurfaceConvergence:
    """sigma, sigma_xc and the work function as one setting rises, the others fixed."""

    rs: float
    base: SurfaceSettings
    rows: dict          # setting -> list of (value, sigma, sigma_xc, work function) in Ha units

    def as_document(self) -> dict:
        erg = HA_PER_BOHR2_ERG_PER_CM2
        return {"schema": JELLIUM_SURFACE_SCHEMA + "#convergence", "rs_bohr": self.rs,
                "functional": self.base.functional,
                "base_settings": {"thickness_fermi_wavelengths": self.base.thickness,
                                  "thickness_samples": self.base.thickness_samples,
                                  "vacuum_fermi_wavelengths": self.base.vacuum,
                                  "cutoff_fermi_energies": self.base.cutoff},
                "scans": {key: [{"value": v, "surface_energy_erg_per_cm2": s * erg,
                                 "xc_surface_energy_erg_per_cm2": x * erg,
                                 "work_function_eV": w * HARTREE_EV} for v, s, x, w in rows]
                          for key, rows in self.rows.items()}}


def jellium_surface_convergence(rs: float, base: SurfaceSettings = SurfaceSettings(), *,
                                thickness=(4.0, 6.0, 8.0, 12.0), vacuum=(1.5, 2.0, 3.0, 4.0),
                                cutoff=(10.0, 20.0, 40.0, 80.0), progress=None
                                ) -> SurfaceConvergence:
    """Vary the thickness, the vacuum and the cutoff one at a time around ``base``."""
    scans = {"thickness": thickness, "vacuum": vacuum, "cutoff": cutoff}
    total = sum(len(v) for v in scans.values())
    rows, done = {}, 0
    for key, values in scans.items():
        rows[key] = []
        for value in values:
            point = jellium_surface_point(rs, replace(base, **{key: float(value)}))
            rows[key].append((float(value), point.mean(), point.mean("exchange_correlation"),
                              float(np.mean(point.work_function))))
            done += 1
            if progress is not None:
                progress(done, total)
    return SurfaceConvergence(float(rs), base, rows)
