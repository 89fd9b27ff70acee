"""Validated settings of a ground-state calculation (layer 4).

:class:`GroundStateSettings` is what the Python API and the command line both
build: frozen, in atomic units, checked once on construction. The field names
match the keys of the input file so that a range error names the key the user
wrote.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from typing import Any, Mapping

import numpy as np

from .errors import InputError

__all__ = ["GroundStateSettings", "SETTING_KEYS"]

#: Dotted input-file key of each settings field (used in error messages).
SETTING_KEYS: dict[str, str] = {
    "cutoff": "basis.cutoff",
    "fft_grid": "basis.fft_grid",
    "kpoint_mesh": "brillouin_zone.mesh",
    "kpoint_shift": "brillouin_zone.shift",
    "use_symmetry": "brillouin_zone.use_symmetry",
    "functional": "exchange_correlation.functional",
    "pseudopotentials": "pseudopotentials",
    "empty_bands": "self_consistency.empty_bands",
    "smearing": "occupations.smearing",
    "smearing_width": "occupations.width",
    "smearing_order": "occupations.methfessel_paxton_order",
    "mixing_preconditioner": "self_consistency.mixing_preconditioner",
    "screening_wavevector": "self_consistency.screening_wavevector",
    "background_electrons": "crystal.background_electrons",
    "spin_polarized": "spin.polarized",
    "initial_moment": "spin.initial_moment",
    "fixed_moment": "spin.fixed_moment",
    "max_iterations": "self_consistency.max_iterations",
    "energy_tolerance": "self_consistency.energy_tolerance",
    "density_tolerance": "self_consistency.density_tolerance",
    "mixing_weight": "self_consistency.mixing_weight",
    "mixing_history": "self_consistency.mixing_history",
}


@dataclass(frozen=True)
class GroundStateSettings:
    """Numerical settings of one self-consistent ground state (atomic units).

    Attributes
    ----------
    cutoff : float
        Plane-wave kinetic-energy cutoff in hartree: |k+G|^2/2 <= cutoff.
    kpoint_mesh : tuple of 3 int
        Monkhorst-Pack mesh divisions along the reciprocal vectors.
    kpoint_shift : tuple of 3 float
        Shift of the mesh in units of one mesh step, each 0 or 0.5.
        ``(0, 0, 0)`` contains Gamma; ``(0.5, 0.5, 0.5)`` with even divisions is
        the original Monkhorst-Pack choice.
    use_symmetry : bool
        Reduce the mesh to its irreducible wedge and symmetrise the density.
    functional : str or callable
        Exchange-correlation functional by registry name (see ``pwsolid.xc``).
    pseudopotentials : mapping species -> str, path or Pseudopotential
        Pseudopotential per species; names are looked up in the bundled
        ``pseudos/`` directory.
    fft_grid : tuple of 3 int or None
        Force this FFT grid instead of the automatic choice.
    empty_bands : int or None
        Bands computed beyond the N/2 needed for the electrons; ``None`` picks
        4 for fixed occupations and 4 + 20% of N/2 with smearing, enough for the
        tail of the occupation function at the usual widths.
    smearing : str
        ``"none"`` (Aufbau filling, insulators) or a smearing scheme of
        ``pwsolid.occupations.SMEARING_SCHEMES`` for metals.
    smearing_width : float
        Width sigma of the smearing in hartree.
    smearing_order : int
        Order of the Methfessel-Paxton scheme (ignored by the others).
    mixing_preconditioner : str
        ``"auto"`` (Kerker with smearing, none without), ``"kerker"`` or ``"none"``.
    screening_wavevector : float or None
        Kerker q0 in 1/bohr; ``None`` takes the Thomas-Fermi wave vector of the
        mean valence density.
    background_electrons : float
        Electrons added to the cell together with a uniform positive background
        of the same charge (jellium when the cell has no atoms).
    spin_polarized : bool
        Collinear spin-polarised (LSDA) calculation with separate up and down densities.
    initial_moment : float
        N_up - N_down of the uniform starting density (electrons per cell).
    fixed_moment : float or None
        Hold N_up - N_down at this value (separate Fermi levels per spin); ``None`` lets
        the moment relax (one Fermi level; needs smearing for a non-integer moment).
    max_iterations : int
        Largest number of SCF iterations.
    energy_tolerance : float
        Stop when the total-energy change between iterations is below this (Ha)...
    density_tolerance : float
        ...and the density residual, integral |n_out - n_in| / N_electrons, is below this.
    mixing_weight : float
        Fraction of the residual added per Pulay step (0 < w <= 1).
    mixing_history : int
        Number of previous densities the Pulay mixer keeps.
    """

    cutoff: float = 15.0
    kpoint_mesh: tuple[int, int, int] = (4, 4, 4)
    kpoint_shift: tuple[float, float, float] = (0.5, 0.5, 0.5)
    use_symmetry: bool = True
    functional: Any = "lda-pz81"
    pseudopotentials: Mapping[str, Any] = field(default_factory=dict)
    fft_grid: tuple[int, int, int] | None = None
    empty_bands: int | None = None
    smearing: str = "none"
    smearing_width: float = 0.01
    smearing_order: int = 1
    mixing_preconditioner: str = "auto"
    screening_wavevector: float | None = None
    background_electrons: float = 0.0
    spin_polarized: bool = False
    initial_moment: float = 0.0
    fixed_moment: float | None = None
    max_iterations: int = 40
    energy_tolerance: float = 1e-8
    density_tolerance: float = 1e-6
    mixing_weight: float = 0.6
    mixing_history: int = 8

    def __post_init__(self):
        def bad(name, why):
            raise InputError(why, key=SETTING_KEYS[name], value=getattr(self, name))

        if not (np.isfinite(self.cutoff) and 0.5 <= self.cutoff <= 5000):
            bad("cutoff", "must lie between 0.5 Ha and 5000 Ha")
        mesh = tuple(int(m) for m in np.atleast_1d(self.kpoint_mesh))
        if len(mesh) != 3 or any(m < 1 or m > 200 for m in mesh) or not np.allclose(mesh, self.kpoint_mesh):
            bad("kpoint_mesh", "must be three integers between 1 and 200")
        shift = tuple(float(s) for s in np.atleast_1d(self.kpoint_shift))
        if len(shift) != 3 or any(s not in (0.0, 0.5) for s in shift):
            bad("kpoint_shift", "must be three numbers, each 0 (through Gamma) or 0.5 (half a step)")
        object.__setattr__(self, "kpoint_mesh", mesh)
        object.__setattr__(self, "kpoint_shift", shift)
        if self.fft_grid is not None:
            grid = tuple(int(g) for g in np.atleast_1d(self.fft_grid))
            if len(grid) != 3 or any(g < 2 or g > 1024 for g in grid):
                bad("fft_grid", "must be three integers between 2 and 1024")
            object.__setattr__(self, "fft_grid", grid)
        for name, lo, hi in (("empty_bands", 0, 10000), ("max_iterations", 1, 100000),
                             ("mixing_history", 1, 100), ("smearing_order", 0, 30)):
            value = getattr(self, name)
            if value is None and name == "empty_bands":
                continue
            if isinstance(value, bool) or int(value) != value or not lo <= value <= hi:
                bad(name, f"must be an integer between {lo} and {hi}")
            object.__setattr__(self, name, int(value))
        if not (0 < self.energy_tolerance < 1):
            bad("energy_tolerance", "must be positive and below 1 Ha")
        if not (0 < self.density_tolerance < 1):
            bad("density_tolerance", "must be a positive number below 1")
        if not (0 < self.mixing_weight <= 1):
            bad("mixing_weight", "must lie in (0, 1]")
        smearing = str(self.smearing).strip().lower()
        valid = ("none", "fermi-dirac", "gaussian", "methfessel-paxton", "cold")
        if smearing not in valid:
            bad("smearing", f"unknown smearing; accepted: {', '.join(valid)}")
        object.__setattr__(self, "smearing", smearing)
        if not (np.isfinite(self.smearing_width) and 1e-6 <= self.smearing_width <= 1.0):
            bad("smearing_width", "must lie between 1e-6 Ha and 1 Ha")
        pre = str(self.mixing_preconditioner).strip().lower()
        if pre not in ("auto", "kerker", "none"):
            bad("mixing_preconditioner", "accepted: auto, kerker, none")
        object.__setattr__(self, "mixing_preconditioner", pre)
        if self.screening_wavevector is not None and not (
                np.isfinite(self.screening_wavevector) and 0 < self.screening_wavevector < 50):
            bad("screening_wavevector", "must be positive and below 50 bohr^-1")
        if not (np.isfinite(self.background_electrons) and 0 <= self.background_electrons <= 1e4):
            bad("background_electrons", "must be a number between 0 and 10000")
        if not isinstance(self.spin_polarized, (bool, np.bool_)):
            bad("spin_polarized", "must be true or false")
        for name in ("initial_moment", "fixed_moment"):
            value = getattr(self, name)
            if value is not None and not (np.isfinite(value) and abs(value) <= 1e4):
                bad(name, "must be a finite number of electrons per cell")
        if not self.spin_polarized and (self.initial_moment or
                                        self.fixed_moment is not None):
            bad("initial_moment" if self.initial_moment else
                "fixed_moment", "needs spin.polarized = true")
        if not isinstance(self.use_symmetry, (bool, np.bool_)):
            bad("use_symmetry", "must be true or false")
        object.__setattr__(self, "pseudopotentials", dict(self.pseudopotentials))

    def replace(self, **changes) -> "GroundStateSettings":
        """Return a copy with some fields changed (validated again)."""
        return replace(self, **changes)

    def as_dict(self) -> dict:
        """JSON-friendly echo in atomic units (callables and objects by name)."""
        out = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "pseudopotentials":
                value = {k: str(getattr(v, "source_file", v)) for k, v in value.items()}
            elif callable(value):
                value = getattr(value, "__name__", repr(value))
            elif isinstance(value, tuple):
                value = list(value)
            out[f.name] = value
        return out
