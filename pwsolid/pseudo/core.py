"""Partial core charge for the nonlinear core-valence exchange-correlation (layer 3).

Exchange and correlation are not linear in the density: a pseudopotential that
leaves its core electrons out evaluates E_xc[n_valence] where the atom has
E_xc[n_valence + n_core]. Where core and valence densities overlap (the 2p shell
under sodium's 3s, the 3d shell of gallium and germanium), that error changes with
the bonding and shortens lattice constants. The correction of S. G. Louie,
S. Froyen and M. L. Cohen, Phys. Rev. B 26, 1738 (1982) adds a model of the core
density to the valence density in E_xc and V_xc only; the model need only be right
where the valence density lives, outside a matching radius.

The model here is one spherical Gaussian per atom,

    n_c(r) = Q / ((2 pi)^(3/2) r_c^3) exp(-r^2 / (2 r_c^2)),

of charge Q and width r_c (the form used for the core corrections of later dual-space
Gaussian pseudopotential tables; common practice), whose Fourier transform
Q exp(-q^2 r_c^2 / 2) makes the crystal's core density analytic in reciprocal space.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["PartialCore", "fit_partial_core"]


@dataclass(frozen=True)
class PartialCore:
    """A Gaussian model core density of ``charge`` electrons and width ``radius`` (bohr)."""

    charge: float
    radius: float

    def density(self, r: np.ndarray) -> np.ndarray:
        """n_c(r), bohr^-3."""
        r = np.asarray(r, dtype=float)
        norm = self.charge / ((2 * math.pi) ** 1.5 * self.radius ** 3)
        return norm * np.exp(-0.5 * (r / self.radius) ** 2)

    def form_factor(self, q: np.ndarray) -> np.ndarray:
        """int n_c(r) e^{-i q.r} d^3r = Q exp(-q^2 r_c^2 / 2) (electrons)."""
        q = np.asarray(q, dtype=float)
        return self.charge * np.exp(-0.5 * (q * self.radius) ** 2)

    def form_factor_derivative(self, q: np.ndarray) -> np.ndarray:
        """d n_c(q) / dq = -Q r_c^2 q exp(-q^2 r_c^2 / 2) (electrons bohr)."""
        q = np.asarray(q, dtype=float)
        return -self.charge * self.radius ** 2 * q * np.exp(-0.5 * (q * self.radius) ** 2)


def fit_partial_core(r: np.ndarray, weights: np.ndarray, core_density: np.ndarray,
                     matching_radius: float) -> PartialCore:
    """The Gaussian that best reproduces a true core density outside ``matching_radius``.

    Minimises int_{r > r_m} [n_c(r) - n_core(r)]^2 r^2 dr over (Q, r_c) on the given
    radial quadrature (``r``, ``weights``), starting from the Gaussian that matches the
    value and logarithmic derivative of ``core_density`` at ``r_m``.
    """
    from scipy.optimize import least_squares

    r = np.asarray(r, float)
    outside = r >= matching_radius
    if not outside.any():
        raise ValueError("the matching radius lies beyond the radial grid")
    i = int(np.argmax(outside))
    slope = np.gradient(np.log(np.maximum(core_density, 1e-300)), r)[i]
    if slope >= 0:
        raise ValueError("the core density does not decay at the matching radius")
    width = math.sqrt(-r[i] / slope)
    amplitude = core_density[i] * math.exp(0.5 * (r[i] / width) ** 2)
    start = np.log([amplitude * (2 * math.pi) ** 1.5 * width ** 3, width])
    scale = np.sqrt(weights[outside]) * r[outside]

    def misfit(p):
        model = PartialCore(math.exp(p[0]), math.exp(p[1])).density(r[outside])
        return (model - core_density[outside]) * scale / max(core_density[i] * r[i], 1e-300)

    fit = least_squares(misfit, start, method="lm")
    return PartialCore(float(math.exp(fit.x[0])), float(math.exp(fit.x[1])))
