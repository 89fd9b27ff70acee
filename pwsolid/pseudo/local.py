"""Analytic local pseudopotentials and their form factors (layer 3).

Every form gives the Fourier transform of one atom's potential,
``v(q) = int v(r) exp(-i q.r) d^3r`` (Ha bohr^3), split as

    v(q) = -4 pi Z / q^2 + w(q),

where ``w`` is smooth and finite at q = 0. The Coulomb tail's G = 0 divergence
cancels against the Hartree and Ewald G = 0 terms of a neutral cell; what is
left is ``w(0) = int [v(r) + Z/r] d^3r`` per atom, which gives the energy term
``N_electrons / Omega * sum_atoms w(0)`` (see ``pwsolid.energies``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import erf

__all__ = ["LocalForm", "EmptyCore", "AppelbaumHamann", "GaussianLocal", "EvanescentCore",
           "LOCAL_FORMS"]


class LocalForm:
    """Interface of an analytic local pseudopotential (one atom).

    Subclasses define ``valence`` (Z, the ionic charge seen by the valence
    electrons), :meth:`short_range` w(q) and :meth:`real_space` v(r).
    """

    valence: float

    def short_range(self, q: np.ndarray) -> np.ndarray:  # pragma: no cover - interface
        raise NotImplementedError

    def real_space(self, r: np.ndarray) -> np.ndarray:  # pragma: no cover - interface
        raise NotImplementedError

    def form_factor(self, q: np.ndarray) -> np.ndarray:
        """Full v(q) in Ha bohr^3 for q > 0 (q = 0 entries get only the short-range part)."""
        q = np.asarray(q, float)
        q2 = q * q
        coulomb = np.divide(-4 * np.pi * self.valence, q2, out=np.zeros_like(q2), where=q2 > 1e-20)
        return coulomb + self.short_range(q)

    def short_range_derivative(self, q: np.ndarray) -> np.ndarray:
        """dw/dq in Ha bohr^4; forms override it in closed form, this default is a
        five-point central difference (step 1e-3 bohr^-1, error ~1e-12 relative)."""
        q = np.asarray(q, float)
        h = 1e-3
        return (8 * (self.short_range(q + h) - self.short_range(q - h))
                - (self.short_range(q + 2 * h) - self.short_range(q - 2 * h))) / (12 * h)

    def form_factor_derivative(self, q: np.ndarray) -> np.ndarray:
        """dv/dq = 8 pi Z / q^3 + dw/dq in Ha bohr^4 (q = 0 entries set to 0).

        The strain derivative of the local energy needs it: a strain changes |G| at
        fixed Miller index (Nielsen and Martin, Phys. Rev. B 32, 3780 (1985)).
        """
        q = np.asarray(q, float)
        big = q > 1e-10
        coulomb = np.divide(8 * np.pi * self.valence, q ** 3, out=np.zeros_like(q), where=big)
        return np.where(big, coulomb + self.short_range_derivative(q), 0.0)

    @property
    def g0_integral(self) -> float:
        """``int [v(r) + Z/r] d^3r`` in Ha bohr^3: the finite G = 0 part."""
        return float(self.short_range(np.zeros(1))[0])


@dataclass(frozen=True)
class EmptyCore(LocalForm):
    """Ashcroft empty core: v = 0 inside ``core_radius``, -Z/r outside.

    Notes
    -----
    v(q) = -4 pi Z cos(q r_c) / q^2, so w(q) = 4 pi Z (1 - cos q r_c)/q^2 -> 2 pi Z r_c^2.

    References
    ----------
    N. W. Ashcroft, Phys. Lett. 23, 48 (1966).
    """

    valence: float
    core_radius: float

    def short_range(self, q):
        q = np.asarray(q, float)
        x = q * self.core_radius
        small = np.abs(x) < 1e-3
        xs = np.where(small, 1.0, x)
        # (1 - cos x)/x^2 with its series near 0 to avoid cancellation
        ratio = np.where(small, 0.5 - x * x / 24 + x ** 4 / 720, (1 - np.cos(xs)) / (xs * xs))
        return 4 * np.pi * self.valence * self.core_radius ** 2 * ratio

    def short_range_derivative(self, q):
        q = np.asarray(q, float)
        rc = self.core_radius
        x = q * rc
        small = np.abs(x) < 1e-3
        xs = np.where(small, 1.0, x)
        # d/dx [(1 - cos x)/x^2] = sin x / x^2 - 2 (1 - cos x) / x^3
        slope = np.where(small, -x / 12 + x ** 3 / 180,
                         np.sin(xs) / xs ** 2 - 2 * (1 - np.cos(xs)) / xs ** 3)
        return 4 * np.pi * self.valence * rc ** 3 * slope

    def real_space(self, r):
        r = np.asarray(r, float)
        return np.where(r < self.core_radius, 0.0, -self.valence / np.maximum(r, 1e-300))


@dataclass(frozen=True)
class AppelbaumHamann(LocalForm):
    """Appelbaum-Hamann local pseudopotential.

    Notes
    -----
    v(r) = -(Z/r) erf(sqrt(alpha) r) + (v1 + v2 r^2) exp(-alpha r^2) (Ha, bohr);

    w(q) = 4 pi Z (1 - exp(-q^2/4 alpha))/q^2
           + (pi/alpha)^{3/2} exp(-q^2/4 alpha) [v1 + v2 (3/(2 alpha) - q^2/(4 alpha^2))].

    References
    ----------
    J. A. Appelbaum and D. R. Hamann, Phys. Rev. B 8, 1777 (1973).
    """

    valence: float
    alpha: float
    v1: float
    v2: float

    def short_range(self, q):
        q = np.asarray(q, float)
        q2 = q * q
        a = self.alpha
        e = np.exp(-q2 / (4 * a))
        small = q2 < 1e-8
        q2s = np.where(small, 1.0, q2)
        coul = np.where(small, 4 * np.pi * self.valence / (4 * a) * (1 - q2 / (8 * a)),
                        4 * np.pi * self.valence * (1 - e) / q2s)
        gauss = (np.pi / a) ** 1.5 * e * (self.v1 + self.v2 * (1.5 / a - q2 / (4 * a * a)))
        return coul + gauss

    def short_range_derivative(self, q):
        q = np.asarray(q, float)
        q2 = q * q
        a = self.alpha
        e = np.exp(-q2 / (4 * a))
        small = q2 < 1e-8
        qs = np.where(small, 1.0, q)
        coul = np.where(small, -4 * np.pi * self.valence * q / (16 * a * a),
                        4 * np.pi * self.valence * (e / (2 * a * qs) - 2 * (1 - e) / qs ** 3))
        poly = self.v1 + self.v2 * (1.5 / a - q2 / (4 * a * a))
        gauss = (np.pi / a) ** 1.5 * e * (-q / (2 * a) * poly - self.v2 * q / (2 * a * a))
        return coul + gauss

    def real_space(self, r):
        r = np.asarray(r, float)
        rs = np.maximum(r, 1e-300)
        a = self.alpha
        coul = np.where(r > 1e-12, -self.valence * erf(np.sqrt(a) * rs) / rs,
                        -self.valence * 2 * np.sqrt(a / np.pi))
        return coul + (self.v1 + self.v2 * r * r) * np.exp(-a * r * r)


@dataclass(frozen=True)
class GaussianLocal(LocalForm):
    """Local part of the Goedecker-Teter-Hutter dual-space Gaussian form.

    Notes
    -----
    With x = r / r_loc:
    v(r) = -(Z/r) erf(x/sqrt 2) + exp(-x^2/2) [C1 + C2 x^2 + C3 x^4 + C4 x^6];
    with g = q r_loc:
    w(q) = 4 pi Z (1 - exp(-g^2/2))/q^2 + sqrt(8 pi^3) r_loc^3 exp(-g^2/2)
           {C1 + C2 (3 - g^2) + C3 (15 - 10 g^2 + g^4) + C4 (105 - 105 g^2 + 21 g^4 - g^6)}.

    References
    ----------
    S. Goedecker, M. Teter and J. Hutter, Phys. Rev. B 54, 1703 (1996).
    """

    valence: float
    r_loc: float
    c1: float = 0.0
    c2: float = 0.0
    c3: float = 0.0
    c4: float = 0.0

    def short_range(self, q):
        q = np.asarray(q, float)
        q2 = q * q
        g2 = q2 * self.r_loc ** 2
        e = np.exp(-g2 / 2)
        small = g2 < 1e-8
        q2s = np.where(small, 1.0, q2)
        coul = np.where(small, 4 * np.pi * self.valence * self.r_loc ** 2 / 2 * (1 - g2 / 4),
                        4 * np.pi * self.valence * (1 - e) / q2s)
        poly = (self.c1 + self.c2 * (3 - g2) + self.c3 * (15 - 10 * g2 + g2 * g2)
                + self.c4 * (105 - 105 * g2 + 21 * g2 * g2 - g2 ** 3))
        return coul + math.sqrt(8 * np.pi ** 3) * self.r_loc ** 3 * e * poly

    def short_range_derivative(self, q):
        q = np.asarray(q, float)
        r2 = self.r_loc ** 2
        g2 = q * q * r2
        e = np.exp(-g2 / 2)
        small = g2 < 1e-8
        qs = np.where(small, 1.0, q)
        coul = np.where(small, -np.pi * self.valence * q * r2 * r2,
                        4 * np.pi * self.valence * (r2 * e / qs - 2 * (1 - e) / qs ** 3))
        poly = (self.c1 + self.c2 * (3 - g2) + self.c3 * (15 - 10 * g2 + g2 * g2)
                + self.c4 * (105 - 105 * g2 + 21 * g2 * g2 - g2 ** 3))
        slope = (-self.c2 + self.c3 * (2 * g2 - 10)
                 + self.c4 * (-105 + 42 * g2 - 3 * g2 * g2))          # d poly / d g^2
        # d/dq = 2 q r_loc^2 d/d(g^2)
        return coul + math.sqrt(8 * np.pi ** 3) * self.r_loc ** 3 * e * 2 * q * r2 * (
            slope - poly / 2)

    def real_space(self, r):
        r = np.asarray(r, float)
        x = r / self.r_loc
        rs = np.maximum(r, 1e-300)
        coul = np.where(r > 1e-12, -self.valence * erf(x / np.sqrt(2)) / rs,
                        -self.valence * np.sqrt(2 / np.pi) / self.r_loc)
        x2 = x * x
        return coul + np.exp(-x2 / 2) * (self.c1 + self.c2 * x2 + self.c3 * x2 ** 2 + self.c4 * x2 ** 3)


@dataclass(frozen=True)
class EvanescentCore(LocalForm):
    """Evanescent-core local pseudopotential of Fiolhais et al.

    Notes
    -----
    With x = r / R, beta = (alpha^3 - 2 alpha) / (4 (alpha^2 - 1)) and
    A = alpha^2/2 - alpha beta:

    v(r) = -(Z/R) {(1/x) [1 - (1 + beta x) exp(-alpha x)] - A exp(-x)},

    analytic at r = 0 with vanishing linear and cubic terms. With Q = q R:

    w(q) = 4 pi Z R^2 [1/(Q^2 + alpha^2) + 2 alpha beta/(Q^2 + alpha^2)^2 + 2A/(Q^2 + 1)^2].

    References
    ----------
    C. Fiolhais, J. P. Perdew, S. Q. Armster, J. M. MacLaren and M. Brajczewska,
    Phys. Rev. B 51, 14001 (1995).
    """

    valence: float
    alpha: float
    decay_length: float

    @property
    def beta(self) -> float:
        a = self.alpha
        return (a ** 3 - 2 * a) / (4 * (a * a - 1))

    @property
    def amplitude(self) -> float:
        return self.alpha ** 2 / 2 - self.alpha * self.beta

    def short_range(self, q):
        q = np.asarray(q, float)
        big_q2 = (q * self.decay_length) ** 2
        a2 = self.alpha ** 2
        return (4 * np.pi * self.valence * self.decay_length ** 2
                * (1 / (big_q2 + a2) + 2 * self.alpha * self.beta / (big_q2 + a2) ** 2
                   + 2 * self.amplitude / (big_q2 + 1) ** 2))

    def short_range_derivative(self, q):
        q = np.asarray(q, float)
        length = self.decay_length
        big_q2 = (q * length) ** 2
        a2 = self.alpha ** 2
        # d/dq = 2 q R^2 d/d(Q^2)
        return (4 * np.pi * self.valence * length ** 2 * 2 * q * length ** 2
                * (-1 / (big_q2 + a2) ** 2 - 4 * self.alpha * self.beta / (big_q2 + a2) ** 3
                   - 4 * self.amplitude / (big_q2 + 1) ** 3))

    def real_space(self, r):
        r = np.asarray(r, float)
        x = r / self.decay_length
        xs = np.maximum(x, 1e-300)
        a, b = self.alpha, self.beta
        # (1/x)[1 - (1 + b x) e^{-a x}] -> (a - b) as x -> 0
        core = np.where(x > 1e-8, (1 - (1 + b * xs) * np.exp(-a * xs)) / xs, a - b)
        return -(self.valence / self.decay_length) * (core - self.amplitude * np.exp(-x))


#: Local forms by the name used in pseudopotential files, with the parameters
#: each needs and the unit kind of each parameter.
LOCAL_FORMS = {
    "empty-core": (EmptyCore, {"core_radius": "length"}),
    "appelbaum-hamann": (AppelbaumHamann, {"alpha": "inverse_area", "v1": "energy",
                                           "v2": "energy_per_area"}),
    "evanescent-core": (EvanescentCore, {"alpha": "number", "decay_length": "length"}),
    "goedecker-teter-hutter-local": (GaussianLocal, {"r_loc": "length", "c1": "energy",
                                                     "c2": "energy", "c3": "energy",
                                                     "c4": "energy"}),
}
