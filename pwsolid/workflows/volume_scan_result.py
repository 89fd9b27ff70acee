"""The result of a volume scan: its points, fits and JSON document (layer 5).

:class:`ScanPoint` is one computed (or resumed) point; :class:`VolumeScan` holds
the points, the E(V) curve, every fitted equation of state and their spread, and
writes the document of schema :data:`EOS_SCAN_SCHEMA` (Ha and eV, bohr and
angstrom, GPa).
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

__all__ = ["ScanPoint", "VolumeScan", "EOS_SCAN_SCHEMA"]

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
                        "cell_kind": cell_kind(self.crystal.lattice),
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
