"""SCAN and r2SCAN meta-GGA exchange and correlation (layer 1).

A meta-GGA depends on the density, its gradient and the kinetic-energy density
``tau = 1/2 sum_i f_i |grad psi_i|^2`` (bohr^-5, hartree per volume, the same
convention as Libxc). Kernels here return the energy per volume ``e`` and its
partial derivatives, written once with dual numbers (:mod:`pwsolid.xc.dual`) so
that the derivatives are exact to rounding.

Variables (atomic units):

* ``p = s^2 = |grad n|^2 / (4 (3 pi^2)^(2/3) n^(8/3))``, the reduced gradient squared;
* ``alpha = (tau - tau_W) / tau_unif`` (SCAN), the iso-orbital indicator, with
  ``tau_W = |grad n|^2 / (8 n)`` and ``tau_unif = (3/10) (3 pi^2)^(2/3) n^(5/3)``;
  r2SCAN uses ``alpha_bar = (tau - tau_W) / (tau_unif + eta tau_W)``, eta = 0.001;
  correlation uses the total density and ``tau_unif d_s(zeta)``,
  ``d_s = [(1+zeta)^(5/3) + (1-zeta)^(5/3)] / 2``.

Exchange of a spin-polarised density follows the exact spin-scaling relation
``E_x[n_up, n_down] = (E_x[2 n_up] + E_x[2 n_down]) / 2``.

Kernel signatures (arrays of one shape, e per volume in Ha bohr^-3):

* unpolarised ``f(n, sigma, tau) -> (e, de/dn, de/dsigma, de/dtau)``;
* polarised ``f(n_up, n_down, sigma_uu, sigma_ud, sigma_dd, tau_up, tau_down) ->
  (e, de/dn_up, de/dn_down, de/dsigma_uu, de/dsigma_ud, de/dsigma_dd, de/dtau_up,
  de/dtau_down)``.

Points whose density is at or below :data:`pwsolid.xc.lda.DENSITY_FLOOR` get zero.
No clipping of tau to tau >= tau_W is done (alpha < 0 is evaluated by the same
formulas), so that the potential stays the derivative of the energy the engine sums.

References
----------
J. Sun, A. Ruzsinszky and J. P. Perdew, Phys. Rev. Lett. 115, 036402 (2015) and its
supplemental material (SCAN).
J. W. Furness, A. D. Kaplan, J. Ning, J. P. Perdew and J. Sun, J. Phys. Chem. Lett.
11, 8208 (2020), and its supplemental material (r2SCAN).
J. P. Perdew and Y. Wang, Phys. Rev. B 45, 13244 (1992) (the LSDA correlation inside).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray

from . import dual as D
from .lda import (DENSITY_FLOOR, PW92_FERROMAGNETIC, PW92_PARAMAGNETIC, PW92_SPIN_STIFFNESS,
                  SPIN_INTERPOLATION_CURVATURE, PerdewWangParameters)

__all__ = [
    "MetaParameters", "SCAN", "R2SCAN", "PW92_EXTENDED_DIGITS",
    "meta_exchange", "meta_exchange_polarized", "meta_correlation",
    "meta_correlation_polarized", "iso_orbital_indicator", "uniform_kinetic_density",
    "weizsaecker_kinetic_density", "reduced_gradient_squared",
]

Array = NDArray[np.float64]

_KF2 = (3.0 * math.pi ** 2) ** (2.0 / 3.0)        # k_F^2 / n^(2/3)
_TAU_UNIF = 0.3 * _KF2                             # tau_unif = (3/10) k_F^2 n
_P_FACTOR = 4.0 * _KF2                             # p = sigma / (_P_FACTOR n^(8/3))
_SLATER = 0.75 * (3.0 / math.pi) ** (1.0 / 3.0)    # e_x^unif = -_SLATER n^(4/3)
_GAMMA = (1.0 - math.log(2.0)) / math.pi ** 2      # PBE gamma
_MU_AK = 10.0 / 81.0                               # second-order exchange coefficient
_T2_FACTOR = (3.0 * math.pi ** 2 / 16.0) ** (2.0 / 3.0)   # t^2 = _T2_FACTOR p / (phi^2 rs)
_G_CNST = 2.363                                    # G_c(zeta) of SCAN correlation
# beta(rs = 0) of H1: the PBE value with all the digits of its definition (Libxc's);
# the SCAN paper prints 0.066725 (1e-5 relative apart)
_BETA_MB = 0.06672455060314922
_B1C, _B2C, _B3C = 0.0285764, 0.0889, 0.125541     # eps_c^LDA0 of SCAN


def _chi_infinity() -> float:
    """chi_inf of SCAN: (3 pi^2/16)^(2/3) beta(rs->inf) / (0.9 - c_x), c_x = 3/(4 pi)
    (9 pi/4)^(1/3); 0.128026 in the SCAN paper."""
    beta_inf = 0.066725 * 0.1 / 0.1778
    cx = 3.0 / (4.0 * math.pi) * (9.0 * math.pi / 4.0) ** (1.0 / 3.0)
    return _T2_FACTOR * beta_inf / (0.9 - cx)


_CHI_INF = _chi_infinity()

#: Perdew-Wang 1992 with the more digits of ``a`` many programs and Libxc use
#: (0.0310907, 0.01554535, 0.0168869 instead of 0.031091, 0.015545, 0.016887).
PW92_EXTENDED_DIGITS = (replace(PW92_PARAMAGNETIC, a=0.0310907),
                        replace(PW92_FERROMAGNETIC, a=0.01554535),
                        replace(PW92_SPIN_STIFFNESS, a=0.0168869))


@dataclass(frozen=True)
class MetaParameters:
    """Parameters of a SCAN-family meta-GGA.

    ``interpolation`` is ``"exponential"`` (SCAN: f(alpha) = exp[-c1 alpha/(1-alpha)]
    below 1, -d exp[c2/(1-alpha)] above) or ``"polynomial"`` (r2SCAN: the polynomial
    ``sum_i c_i alpha^i`` up to alpha = 2.5, the exponential tail above).
    ``eta`` regularises alpha (0 for SCAN); ``gradient_damping`` is d_p2 of r2SCAN's
    second-order gradient correction (None for SCAN).
    """

    name: str
    interpolation: str
    k1: float = 0.065
    h0x: float = 1.174
    a1: float = 4.9479
    c1x: float = 0.667
    c2x: float = 0.8
    dx: float = 1.24
    c1c: float = 0.64
    c2c: float = 1.5
    dc: float = 0.7
    eta: float = 0.0
    gradient_damping: float | None = None
    exchange_polynomial: tuple[float, ...] = ()
    correlation_polynomial: tuple[float, ...] = ()
    pw92: tuple[PerdewWangParameters, ...] = PW92_EXTENDED_DIGITS


#: SCAN, Sun, Ruzsinszky and Perdew 2015 (parameters of the paper's supplement).
SCAN = MetaParameters("scan", "exponential")
#: r2SCAN, Furness et al. 2020 (parameters of the paper's supplement).
R2SCAN = MetaParameters(
    "r2scan", "polynomial", eta=0.001, gradient_damping=0.361,
    exchange_polynomial=(1.0, -0.667, -0.4445555, -0.663086601049, 1.451297044490,
                         -0.887998041597, 0.234528941479, -0.023185843322),
    correlation_polynomial=(1.0, -0.64, -0.4352, -1.535685604549, 3.061560252175,
                            -1.915710236206, 0.516884468372, -0.051848879792))


# ----------------------------------------------------------------------------------
# invariants
# ----------------------------------------------------------------------------------
def uniform_kinetic_density(n: ArrayLike) -> Array:
    """tau_unif = (3/10) (3 pi^2)^(2/3) n^(5/3) (Ha bohr^-3), spin-unpolarised gas."""
    return _TAU_UNIF * np.asarray(n, float) ** (5.0 / 3.0)


def weizsaecker_kinetic_density(n: ArrayLike, sigma: ArrayLike) -> Array:
    """tau_W = |grad n|^2 / (8 n), the single-orbital (von Weizsaecker) value."""
    return np.asarray(sigma, float) / (8.0 * np.asarray(n, float))


def reduced_gradient_squared(n: ArrayLike, sigma: ArrayLike) -> Array:
    """p = s^2 = |grad n|^2 / (4 (3 pi^2)^(2/3) n^(8/3))."""
    return np.asarray(sigma, float) / (_P_FACTOR * np.asarray(n, float) ** (8.0 / 3.0))


def iso_orbital_indicator(n: ArrayLike, sigma: ArrayLike, tau: ArrayLike,
                          eta: float = 0.0) -> Array:
    """alpha = (tau - tau_W) / (tau_unif + eta tau_W), spin-unpolarised."""
    tw = weizsaecker_kinetic_density(n, sigma)
    return (np.asarray(tau, float) - tw) / (uniform_kinetic_density(n) + eta * tw)


# ----------------------------------------------------------------------------------
# pieces, on duals
# ----------------------------------------------------------------------------------
def _interpolation(alpha, par: MetaParameters, exchange: bool):
    """f(alpha): 1 at alpha = 0, 0 at alpha = 1, negative beyond."""
    c1, c2, d = ((par.c1x, par.c2x, par.dx) if exchange else (par.c1c, par.c2c, par.dc))
    a = D.value(alpha)
    if par.interpolation == "polynomial":
        coefficients = par.exchange_polynomial if exchange else par.correlation_polynomial
        low = a <= 2.5
        x = D.where(low, alpha, 0.0)
        poly = 0.0 * x + coefficients[-1]
        for c in coefficients[-2::-1]:
            poly = poly * x + c
        y = D.where(low, 3.0, alpha)
        return D.where(low, poly, -d * D.exp(c2 / (1.0 - y)))
    below, above = a < 1.0, a > 1.0
    x = D.where(below, alpha, 0.0)
    left = D.exp(-c1 * x / (1.0 - x))
    y = D.where(above, alpha, 2.0)
    right = -d * D.exp(c2 / (1.0 - y))
    return D.where(below, left, D.where(above, right, 0.0 * left))


def _exchange_energy(n, sigma, tau, par: MetaParameters):
    """e_x = -(3/4)(3/pi)^(1/3) n^(4/3) F_x(p, alpha) of a spin-unpolarised density."""
    n13 = n ** (1.0 / 3.0)
    n53 = n13 * n13 * n13 * n13 * n13
    p = sigma / (_P_FACTOR * n53 * n)
    tau_w = sigma / (8.0 * n)
    tau_unif = _TAU_UNIF * n53
    alpha = (tau - tau_w) / (tau_unif + par.eta * tau_w)
    k1 = par.k1
    if par.gradient_damping is None:
        b2 = math.sqrt(5913.0 / 405000.0)
        b1 = (511.0 / 13500.0) / (2.0 * b2)
        b3 = 0.5
        b4 = _MU_AK ** 2 / k1 - 1606.0 / 18225.0 - b1 ** 2
        one_minus = 1.0 - alpha
        x = (_MU_AK * p + b4 * p * p * D.exp(-abs(b4) * p / _MU_AK)
             + (b1 * p + b2 * one_minus * D.exp(-b3 * one_minus * one_minus)) ** 2)
    else:
        c_eta = 20.0 / 27.0 + par.eta * 5.0 / 3.0
        slope = sum(i * c for i, c in enumerate(par.exchange_polynomial))
        c2x = slope * (par.h0x - 1.0)
        dp4 = par.gradient_damping ** 4
        x = (c_eta * c2x * D.exp(-p * p / dp4) + _MU_AK) * p
    h1x = 1.0 + k1 - k1 / (1.0 + x / k1)
    f = _interpolation(alpha, par, exchange=True)
    # g_x = 1 - exp(-a1 / p^(1/4)), 1 to rounding for p < 1e-10
    tiny = D.value(p) < 1e-10
    p_safe = D.where(tiny, 1.0, p)
    gx = D.where(tiny, 1.0, 1.0 - D.exp(-par.a1 / p_safe ** 0.25))
    fx = (h1x + f * (par.h0x - h1x)) * gx
    return -_SLATER * n13 * n * fx


def _pw92_g(rs, sqrt_rs, p: PerdewWangParameters):
    """G(rs) of Perdew-Wang 1992 and dG/drs, both duals."""
    two_a = 2.0 * p.a
    x = sqrt_rs
    q = two_a * x * (p.beta1 + x * (p.beta2 + x * (p.beta3 + x * p.beta4)))
    dq = two_a * (0.5 * p.beta1 / x + p.beta2 + x * (1.5 * p.beta3 + 2.0 * p.beta4 * x))
    log_term = D.log1p(1.0 / q)
    prefactor = 1.0 + p.alpha1 * rs
    g = -two_a * prefactor * log_term
    dg = -two_a * p.alpha1 * log_term + two_a * prefactor * dq / (q * (q + 1.0))
    return g, dg


def _pw92(rs, zeta, par: MetaParameters):
    """eps_c^PW92(rs, zeta) and its rs derivative at fixed zeta."""
    sqrt_rs = D.sqrt(rs)
    para, ferro, stiff = par.pw92
    e0, de0 = _pw92_g(rs, sqrt_rs, para)
    e1, de1 = _pw92_g(rs, sqrt_rs, ferro)
    ma, dma = _pw92_g(rs, sqrt_rs, stiff)          # -alpha_c
    f = (_opz(zeta, 4.0 / 3.0) + _omz(zeta, 4.0 / 3.0) - 2.0) / (2.0 ** (4.0 / 3.0) - 2.0)
    z4 = zeta * zeta * zeta * zeta
    w_stiff = f * (1.0 - z4) / SPIN_INTERPOLATION_CURVATURE
    w_ferro = f * z4
    eps = e0 - ma * w_stiff + (e1 - e0) * w_ferro
    deps = de0 - dma * w_stiff + (de1 - de0) * w_ferro
    return eps, deps


_ZETA_FLOOR = 1e-12


def _opz(zeta, power):
    """(1 + zeta)^power with 1 + zeta kept above a tiny floor."""
    x = 1.0 + zeta
    return D.where(D.value(x) > _ZETA_FLOOR, x, _ZETA_FLOOR) ** power


def _omz(zeta, power):
    return _opz(-zeta, power)


def _correlation_energy(n_up, n_down, sigma, tau, par: MetaParameters):
    """e_c of the SCAN family (total sigma = |grad n|^2 and total tau)."""
    n = n_up + n_down
    zeta = (n_up - n_down) / n
    n13 = n ** (1.0 / 3.0)
    rs = (3.0 / (4.0 * math.pi)) ** (1.0 / 3.0) / n13
    n53 = n13 * n13 * n13 * n13 * n13
    p = sigma / (_P_FACTOR * n53 * n)
    phi = 0.5 * (_opz(zeta, 2.0 / 3.0) + _omz(zeta, 2.0 / 3.0))
    phi3 = phi * phi * phi
    ds = 0.5 * (_opz(zeta, 5.0 / 3.0) + _omz(zeta, 5.0 / 3.0))
    dx = 0.5 * (_opz(zeta, 4.0 / 3.0) + _omz(zeta, 4.0 / 3.0))
    tau_w = sigma / (8.0 * n)
    alpha = (tau - tau_w) / (_TAU_UNIF * n53 * ds + par.eta * tau_w)
    t2 = _T2_FACTOR * p / (phi * phi * rs)

    # alpha = 0 branch (single orbital): eps_c^0 = (eps_c^LDA0 + H0) G_c(zeta)
    sqrt_rs = D.sqrt(rs)
    denominator = 1.0 + _B2C * sqrt_rs + _B3C * rs
    eps_lda0 = -_B1C / denominator
    w0 = D.exp(-eps_lda0 / _B1C) - 1.0
    g_inf = (1.0 + 4.0 * _CHI_INF * p) ** -0.25
    h0 = _B1C * D.log1p(w0 * (1.0 - g_inf))
    z12 = (zeta * zeta * zeta) ** 4
    gc = (1.0 - _G_CNST * (dx - 1.0)) * (1.0 - z12)
    eps0 = (eps_lda0 + h0) * gc

    # alpha = 1 branch: eps_c^1 = eps_c^LSDA1 + H1 (PBE-like)
    eps_lsda, deps_lsda = _pw92(rs, zeta, par)
    beta = _BETA_MB * (1.0 + 0.1 * rs) / (1.0 + 0.1778 * rs)
    gp3 = _GAMMA * phi3
    w1 = D.exp(-eps_lsda / gp3) - 1.0
    y = beta / (_GAMMA * w1) * t2
    if par.gradient_damping is not None:
        # r2SCAN's correction restoring the second-order gradient expansion
        slope = sum(i * c for i, c in enumerate(par.correlation_polynomial))
        deps_lda0 = _B1C * (0.5 * _B2C / sqrt_rs + _B3C) / (denominator * denominator)
        bracket = (20.0 * rs * (gc * deps_lda0 - deps_lsda)
                   - 45.0 * par.eta * (gc * eps_lda0 - eps_lsda))
        damping = D.exp(-p * p / par.gradient_damping ** 4)
        y = y - slope / (27.0 * _GAMMA * ds * phi3 * w1) * bracket * p * damping
    g = (1.0 + 4.0 * y) ** -0.25
    h1 = gp3 * D.log1p(w1 * (1.0 - g))
    eps1 = eps_lsda + h1

    f = _interpolation(alpha, par, exchange=False)
    return n * (eps1 + f * (eps0 - eps1))


# ----------------------------------------------------------------------------------
# kernels
# ----------------------------------------------------------------------------------
def _occupied_apply(kernel, mask: Array, arrays: list[Array], count: int) -> tuple[Array, ...]:
    """Evaluate ``kernel`` on the points of ``mask``; zero elsewhere."""
    shape = arrays[0].shape
    out = tuple(np.zeros(shape) for _ in range(count))
    if mask.any():
        with np.errstate(all="ignore"):
            results = kernel(*(a[mask] for a in arrays))
        for o, r in zip(out, results):
            o[mask] = r
    return out


def _arrays(*values) -> list[Array]:
    arrays = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in values))
    return [np.array(a) for a in arrays]


def meta_exchange(n: ArrayLike, sigma: ArrayLike, tau: ArrayLike,
                  parameters: MetaParameters = SCAN, *,
                  derivatives: bool = True) -> tuple[Array, ...]:
    """Exchange of a spin-unpolarised density: ``(e_x, de/dn, de/dsigma, de/dtau)``;
    ``(e_x,)`` alone with ``derivatives=False`` (plain arrays, about 4x cheaper)."""
    n, sigma, tau = _arrays(n, sigma, tau)

    def kernel(n, s, t):
        if not derivatives:
            return (_exchange_energy(n, s, t, parameters),)
        e = _exchange_energy(*D.variables(n, s, t), parameters)
        return (e.v, *e.d)

    return _occupied_apply(kernel, n > DENSITY_FLOOR, [n, sigma, tau], 4 if derivatives else 1)


def meta_exchange_polarized(n_up: ArrayLike, n_down: ArrayLike, sigma_uu: ArrayLike,
                            sigma_ud: ArrayLike, sigma_dd: ArrayLike, tau_up: ArrayLike,
                            tau_down: ArrayLike, parameters: MetaParameters = SCAN, *,
                            derivatives: bool = True) -> tuple[Array, ...]:
    """Exchange of a spin-polarised density by spin scaling (8 arrays, see the module;
    ``(e_x,)`` alone with ``derivatives=False``)."""
    up, down, s_uu, s_ud, s_dd, t_up, t_down = _arrays(n_up, n_down, sigma_uu, sigma_ud,
                                                       sigma_dd, tau_up, tau_down)
    up, down = np.maximum(up, 0.0), np.maximum(down, 0.0)
    if not derivatives:
        return (0.5 * (meta_exchange(2.0 * up, 4.0 * s_uu, 2.0 * t_up, parameters,
                                     derivatives=False)[0]
                       + meta_exchange(2.0 * down, 4.0 * s_dd, 2.0 * t_down, parameters,
                                       derivatives=False)[0]),)
    e_up, dn_up, ds_up, dt_up = meta_exchange(2.0 * up, 4.0 * s_uu, 2.0 * t_up, parameters)
    e_dn, dn_dn, ds_dn, dt_dn = meta_exchange(2.0 * down, 4.0 * s_dd, 2.0 * t_down, parameters)
    return (0.5 * (e_up + e_dn), dn_up, dn_dn, 2.0 * ds_up, np.zeros_like(s_ud),
            2.0 * ds_dn, dt_up, dt_dn)


def meta_correlation(n: ArrayLike, sigma: ArrayLike, tau: ArrayLike,
                     parameters: MetaParameters = SCAN, *,
                     derivatives: bool = True) -> tuple[Array, ...]:
    """Correlation of a spin-unpolarised density: ``(e_c, de/dn, de/dsigma, de/dtau)``;
    ``(e_c,)`` alone with ``derivatives=False``."""
    n, sigma, tau = _arrays(n, sigma, tau)

    def kernel(n, s, t):
        if not derivatives:
            return (_correlation_energy(0.5 * n, 0.5 * n, s, t, parameters),)
        dn, ds, dt = D.variables(n, s, t)
        half = 0.5 * dn
        e = _correlation_energy(half, half, ds, dt, parameters)
        return (e.v, *e.d)

    return _occupied_apply(kernel, n > DENSITY_FLOOR, [n, sigma, tau], 4 if derivatives else 1)


def meta_correlation_polarized(n_up: ArrayLike, n_down: ArrayLike, sigma_uu: ArrayLike,
                               sigma_ud: ArrayLike, sigma_dd: ArrayLike, tau_up: ArrayLike,
                               tau_down: ArrayLike, parameters: MetaParameters = SCAN, *,
                               derivatives: bool = True) -> tuple[Array, ...]:
    """Correlation of a spin-polarised density (8 arrays, see the module; ``(e_c,)``
    alone with ``derivatives=False``).

    It depends on the gradients through ``|grad n|^2 = sigma_uu + 2 sigma_ud +
    sigma_dd`` and on ``tau = tau_up + tau_down`` only.
    """
    up, down, s_uu, s_ud, s_dd, t_up, t_down = _arrays(n_up, n_down, sigma_uu, sigma_ud,
                                                       sigma_dd, tau_up, tau_down)
    up, down = np.maximum(up, 0.0), np.maximum(down, 0.0)

    def kernel(u, d, s, t):
        if not derivatives:
            return (_correlation_energy(u, d, s, t, parameters),)
        e = _correlation_energy(*D.variables(u, d, s, t), parameters)
        return (e.v, *e.d)

    arrays = [up, down, s_uu + 2.0 * s_ud + s_dd, t_up + t_down]
    if not derivatives:
        return _occupied_apply(kernel, up + down > DENSITY_FLOOR, arrays, 1)
    e, d_up, d_down, d_s, d_t = _occupied_apply(kernel, up + down > DENSITY_FLOOR, arrays, 5)
    return e, d_up, d_down, d_s, 2.0 * d_s, d_s, d_t, d_t
