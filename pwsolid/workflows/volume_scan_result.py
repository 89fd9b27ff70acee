"""The result of a volume scan: its points, fits and JSON document (layer 5).

:class:`ScanPoint` is one computed (or resumed) point; :class:`VolumeScan` holds
the points, the E(V) curve, every fitted equation of state and their spread, and
writes the document of schema :data:`EOS_SCAN_SCHEMA` (Ha and eV, bohr and
angstrom, GPa).

Every computed point carries the analytic stress tensor of its ground state
(:func:`pwsolid.stress.stress_tensor`, the stress theorem of O. H. Nielsen and
R. M. Martin, Phys. Rev. B 32, 3780 (1985)) and so the pressure P = -tr(sigma)/3;
the document sets beside it -dE/dV of the preferred fit at the point's volume and
the difference. At a fixed cutoff the difference is the basis-set (Pulay) stress,
which the analytic stress leaves out and the energies of a fixed-cutoff scan
contain, plus the fit's own error; for a c/a point away from the optimal c/a it
also holds the first-order change of the energy with c/a (the fit is to the
relaxed E(V)); with smearing, the fit is to the zero-width energy and the stress
is the derivative of the free energy F, which adds the smearing's share (small at
usual widths). Points from an older restart file without a stress keep
``stress = None``: the stress needs the orbitals, which the file does not keep, so
it is not recomputed (that would cost the point's whole SCF).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from ..crystal import Crystal
from ..eos import EOSFit
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from .cell_geometry import cell_kind, lattice_lengths

__all__ = ["ScanPoint", "VolumeScan", "EOS_SCAN_SCHEMA", "stress_of_record", "as_stress"]

EOS_SCAN_SCHEMA = "pwsolid.equation-of-state/1"


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
    stress : tuple of 3 tuples of 3 floats, or None
        Analytic stress tensor sigma_ab (Ha/bohr^3) at the fixed plane-wave set,
        symmetrised; None when the solver gave none (a model solver, or a point
        from a restart file written before the stress was recorded).
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
    stress: tuple[tuple[float, float, float], ...] | None = None

    @property
    def pressure(self) -> float | None:
        """P = -tr(sigma)/3 (Ha/bohr^3), positive when the cell wants to expand; or None."""
        if self.stress is None:
            return None
        return -float(np.trace(np.asarray(self.stress))) / 3.0

    def as_record(self) -> dict:
        """The JSON record of the point (also the store's entry)."""
        stress = None if self.stress is None else np.asarray(self.stress, float)
        return {"volume_bohr3": self.volume,
                "volume_angstrom3": self.volume * BOHR_ANGSTROM ** 3,
                "c_over_a": self.c_over_a,
                "energy_Ha": self.energy, "energy_eV": self.energy * HARTREE_EV,
                "converged": bool(self.converged), "iterations": int(self.iterations),
                "seconds": float(self.seconds), "reused_from_restart_file": bool(self.resumed),
                "extension_round": int(self.stage), "notes": list(self.notes),
                "pressure_GPa": _gpa(self.pressure),
                "stress_tensor_GPa": None if stress is None else _gpa(stress).tolist(),
                "stress_tensor_Ha_per_bohr3": None if stress is None else stress.tolist()}


def stress_of_record(rec: dict) -> tuple | None:
    """The stress (Ha/bohr^3, nested tuples) of a point's record, or None when the
    record has none (older restart files) or it is not a finite 3 x 3 table."""
    value = rec.get("stress_tensor_Ha_per_bohr3")
    if value is None:
        return None
    try:
        t = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        return None
    if t.shape != (3, 3) or not np.all(np.isfinite(t)):
        return None
    return as_stress(t)


def as_stress(tensor) -> tuple | None:
    """A (3, 3) array (Ha/bohr^3) as the nested tuple a ScanPoint keeps; None stays None."""
    if tensor is None:
        return None
    t = np.asarray(tensor, dtype=float).reshape(3, 3)
    return tuple(tuple(float(x) for x in row) for row in t)


def _gpa(x):
    """Ha/bohr^3 -> GPa (arrays or scalars); None stays None."""
    if x is None:
        return None
    return x * HA_PER_BOHR3_GPA


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

    # -- pressures ---------------------------------------------------------
    def pressure_comparison(self) -> dict:
        """The analytic pressure of every point beside -dE/dV of the preferred fit.

        Returns
        -------
        dict
            ``volumes`` (n,) bohr^3, in the order of :attr:`points`;
            ``pressures`` (n,) Ha/bohr^3, the analytic P (NaN where a point has no
            stress); ``fit_pressures`` (n,) Ha/bohr^3, -dE/dV of the preferred fit;
            ``differences`` (n,) Ha/bohr^3, P - (-dE/dV) (NaN where P is missing);
            ``largest`` the largest |difference| (None without any pressure) and
            ``mean`` the mean difference (None likewise).

        Notes
        -----
        At a fixed cutoff the mean difference estimates the basis-set (Pulay)
        pressure with the opposite sign: the fit differentiates energies whose
        plane-wave set grows with the volume, the analytic stress keeps the set
        fixed (see the module notes); the scatter about the mean is the fit's error.
        """
        volumes = np.array([p.volume for p in self.points], dtype=float)
        pressures = np.array([np.nan if p.pressure is None else p.pressure
                              for p in self.points], dtype=float)
        fit = np.asarray(self.fit.pressure(volumes), dtype=float).reshape(volumes.shape)
        diff = pressures - fit
        have = np.isfinite(diff)
        return {"volumes": volumes, "pressures": pressures, "fit_pressures": fit,
                "differences": diff,
                "largest": float(np.max(np.abs(diff[have]))) if have.any() else None,
                "mean": float(np.mean(diff[have])) if have.any() else None}

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
        points, pressure_check = self._points_with_pressures()
        return {
            "schema": EOS_SCAN_SCHEMA,
            "scan_kind": "volume and c/a" if self.c_over_a_values else "volume",
            "crystal": {**self.crystal.as_dict(),
                        "volume_angstrom3": self.crystal.volume * a3,
                        "cell_kind": cell_kind(self.crystal.lattice),
                        "lattice_lengths_angstrom": {k: v * BOHR_ANGSTROM
                                                     for k, v in in_lat.items()}},
            "settings": self.settings.as_dict(),
            "scan": {"relative_volume_range": self.volume_range,
                     "planned_points": self.n_points,
                     "c_over_a_values": (list(self.c_over_a_values)
                                         if self.c_over_a_values else None),
                     "extensions": [dict(e) for e in self.extensions]},
            "points": points,
            "pressure_check": pressure_check,
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
                      "as suffixed, per cell unless 'per_atom'", "bulk_modulus": "GPa",
                      "pressure": "GPa, positive when the cell wants to expand"},
        }

    def _points_with_pressures(self) -> tuple[list[dict], dict]:
        """The point records with the fit's -dE/dV beside each pressure, and a summary."""
        cmp = self.pressure_comparison()
        records = []
        for p, fit, diff in zip(self.points, cmp["fit_pressures"], cmp["differences"]):
            rec = p.as_record()
            rec["fit_pressure_GPa"] = _finite(fit * HA_PER_BOHR3_GPA)
            rec["pressure_minus_fit_GPa"] = _finite(diff * HA_PER_BOHR3_GPA)
            records.append(rec)
        n_with = int(np.sum(np.isfinite(cmp["pressures"])))
        check = {
            "form": self.preferred_form,
            "points_with_pressure": n_with,
            "points_without_pressure": len(self.points) - n_with,
            "largest_abs_difference_GPa": _gpa(cmp["largest"]),
            "mean_difference_GPa": _gpa(cmp["mean"]),
            "meaning": "pressure is the analytic -trace(stress)/3 at a fixed plane-wave set; "
                       "fit_pressure is -dE/dV of the preferred fit. Their difference is the "
                       "basis-set (Pulay) pressure of a fixed cutoff, with the opposite sign "
                       "(the mean), plus the fit error (the scatter)"
                       + ("; at c/a values away from the optimum it also holds dE/d(c/a) "
                          "terms" if self.c_over_a_values else ""),
        }
        return records, check
