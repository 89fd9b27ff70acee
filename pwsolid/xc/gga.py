"""Perdew-Burke-Ernzerhof 1996 generalised-gradient exchange and correlation (layer 1).

Pure, vectorised kernels of the density and of the invariants of its gradient. Nothing
here knows about grids: :mod:`pwsolid.xc_grid` takes the gradients and folds the
derivatives below back into a potential.

Conventions
-----------
* Unlike the local kernels of :mod:`pwsolid.xc.lda`, which return the energy *per
  electron*, the gradient kernels return the energy *per volume* ``e`` (hartree
  bohr^-3), because that is the quantity whose partial derivatives make the
  potential, and it stays finite where the density vanishes.
* Gradient invariants: unpolarised ``sigma = |grad n|^2``; polarised
  ``sigma_uu = |grad n_up|^2``, ``sigma_ud = grad n_up . grad n_down``,
  ``sigma_dd = |grad n_down|^2`` (bohr^-8). The total is
  ``|grad n|^2 = sigma_uu + 2 sigma_ud + sigma_dd``.
* Every kernel returns ``e`` and its partial derivatives: unpolarised
  ``(e, de/dn, de/dsigma)``; polarised ``(e, de/dn_up, de/dn_down, de/dsigma_uu,
  de/dsigma_ud, de/dsigma_dd)``, all analytic.
* Points with density at or below :data:`~pwsolid.xc.lda.DENSITY_FLOOR` give zero
  energy and derivatives (per spin channel for exchange); negative spin densities
  are treated as zero and negative ``sigma`` (impossible, but guarded) as zero.

References
----------
J. P. Perdew, K. Burke and M. Ernzerhof, Phys. Rev. Lett. 77, 3865 (1996), Eqs. (3),
(4), (7), (8), (13), (14); correlation on top of J. P. Perdew and Y. Wang, Phys. Rev. B
45, 13244 (1992), with the more precise A constants of the PBE form
(:mod:`pwsolid.xc.pw92_precise`).
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .lda import DENSITY_FLOOR, SLATER_EXCHANGE_COEFFICIENT
# PBE correlation sits on Perdew-Wang 1992 with the PBE form's more precise A constants.
from .pw92_precise import (pw92_precise_correlation as pw92_correlation,
                           pw92_precise_correlation_polarized as pw92_correlation_polarized)

__all__ = [
    "PBE_KAPPA",
    "PBE_BETA",
    "PBE_GAMMA",
    "PBE_MU",
    "pbe_exchange_enhancement",
    "pbe_gradient_correction",
    "spin_scaling_factor",
    "reduced_gradient_squared",
    "correlation_gradient_squared",
    "pbe_exchange",
    "pbe_exchange_polarized",
    "pbe_correlation",
    "pbe_correlation_polarized",
]

Array = NDArray[np.float64]

#: kappa = 0.804 of the exchange enhancement factor, PBE 1996 below Eq. (14), chosen
#: so that the local Lieb-Oxford bound holds (1 + kappa = 1.804).
PBE_KAPPA: float = 0.804
#: beta = 0.066725 of PBE 1996 below Eq. (8), to the digits in common use (common
#: practice): the second-order gradient coefficient of correlation of Ma & Brueckner.
PBE_BETA: float = 0.06672455060314922
#: gamma = (1 - ln 2)/pi^2 = 0.031091, PBE 1996 below Eq. (8).
PBE_GAMMA: float = (1.0 - math.log(2.0)) / math.pi ** 2
#: mu = beta pi^2 / 3 = 0.21951, PBE 1996 below Eq. (12): cancels the gradient terms
#: of exchange and correlation to second order.
PBE_MU: float = PBE_BETA * math.pi ** 2 / 3.0

_THREE_PI2 = 3.0 * math.pi ** 2
# s^2 = sigma / (4 kF^2 n^2) = sigma * _S2_FACTOR / n^(8/3), kF = (3 pi^2 n)^(1/3).
_S2_FACTOR = 1.0 / (4.0 * _THREE_PI2 ** (2.0 / 3.0))
# t^2 = sigma / (4 phi^2 ks^2 n^2), ks^2 = 4 kF / pi: t^2 = sigma * _T2_FACTOR
# / (phi^2 n^(7/3)).
_T2_FACTOR = math.pi / (16.0 * _THREE_PI2 ** (1.0 / 3.0))
_BETA_OVER_GAMMA = PBE_BETA / PBE_GAMMA
# 1 +- zeta are floored here for the derivative of phi, which diverges at full
# polarisation; the energy uses the exact phi.
_SPIN_DERIVATIVE_FLOOR = 1e-12


# ----------------------------------------------------------------------------------
# building blocks
# ----------------------------------------------------------------------------------

def pbe_exchange_enhancement(s2: ArrayLike) -> tuple[Array, Array]:
    """The PBE exchange enhancement factor and its derivative.

    Parameters
    ----------
    s2 : array_like, float64
        Squared reduced gradient ``s^2 = |grad n|^2 / (2 kF n)^2`` (dimensionless).

    Returns
    -------
    F_x, dF_x/d(s^2) : ndarray, float64, shape of ``s2``

    Notes
    -----
    ``F_x(s) = 1 + kappa - kappa / (1 + mu s^2 / kappa)`` (PBE 1996, Eq. 14): 1 at
    s = 0, ``1 + mu s^2`` for small s and ``1 + kappa`` as s -> infinity.
    """
    s2 = np.asarray(s2, dtype=np.float64)
    inverse = 1.0 / (1.0 + (PBE_MU / PBE_KAPPA) * s2)
    # (1/x)^2, not 1/x^2: no overflow at vacuum-like points with a huge s^2.
    return 1.0 + PBE_KAPPA - PBE_KAPPA * inverse, PBE_MU * inverse * inverse


def spin_scaling_factor(zeta: ArrayLike) -> tuple[Array, Array]:
    """phi(zeta) = [(1 + zeta)^(2/3) + (1 - zeta)^(2/3)] / 2 and its derivative.

    The derivative, infinite at zeta = +-1, is taken with 1 +- zeta floored at 1e-12.
    """
    zeta = np.asarray(zeta, dtype=np.float64)
    phi = 0.5 * (np.cbrt(1.0 + zeta) ** 2 + np.cbrt(1.0 - zeta) ** 2)
    plus = np.cbrt(np.maximum(1.0 + zeta, _SPIN_DERIVATIVE_FLOOR))
    minus = np.cbrt(np.maximum(1.0 - zeta, _SPIN_DERIVATIVE_FLOOR))
    return phi, (1.0 / plus - 1.0 / minus) / 3.0


def reduced_gradient_squared(n: ArrayLike, sigma: ArrayLike) -> Array:
    """``s^2 = |grad n|^2 / (2 kF n)^2`` with ``kF = (3 pi^2 n)^(1/3)`` (n > 0)."""
    n = np.asarray(n, dtype=np.float64)
    return np.asarray(sigma, dtype=np.float64) * _S2_FACTOR / (n * n * np.cbrt(n) ** 2)


def correlation_gradient_squared(n: ArrayLike, zeta: ArrayLike, sigma: ArrayLike) -> Array:
    """``t^2 = |grad n|^2 / (2 phi ks n)^2`` with ``ks = (4 kF / pi)^(1/2)`` (n > 0)."""
    n = np.asarray(n, dtype=np.float64)
    phi, _ = spin_scaling_factor(zeta)
    return (np.asarray(sigma, dtype=np.float64) * _T2_FACTOR
            / (phi * phi * n * n * np.cbrt(n)))


def pbe_gradient_correction(eps_c: ArrayLike, phi: ArrayLike,
                            t2: ArrayLike) -> tuple[Array, Array, Array, Array]:
    """The gradient term H of PBE correlation and its partial derivatives.

    Parameters
    ----------
    eps_c : array_like, float64, hartree
        Local (Perdew-Wang 1992) correlation energy per electron, negative.
    phi : array_like, float64
        Spin-scaling factor, in [2^(-1/3), 1].
    t2 : array_like, float64
        Squared correlation reduced gradient ``t^2``.

    Returns
    -------
    H, dH/d eps_c, dH/d phi, dH/d(t^2) : ndarray, float64, hartree (per unit)
        ``dH/d phi`` is at fixed ``eps_c`` and ``t^2``.

    Notes
    -----
    ``H = gamma phi^3 ln{1 + (beta/gamma) t^2 (1 + A t^2) / (1 + A t^2 + A^2 t^4)}``
    with ``A = (beta/gamma) / (exp(-eps_c / (gamma phi^3)) - 1)`` (PBE 1996, Eqs. 7-8).
    With ``y = A t^2`` the ratio is written ``1 / (y + 1 / (1 + y))`` so that nothing
    overflows at vacuum-like points where ``t^2`` is huge.
    """
    eps_c = np.asarray(eps_c, dtype=np.float64)
    phi = np.asarray(phi, dtype=np.float64)
    t2 = np.asarray(t2, dtype=np.float64)
    phi3 = phi ** 3
    x = -eps_c / (PBE_GAMMA * phi3)
    growth = np.expm1(x)
    a = _BETA_OVER_GAMMA / growth
    da_dx = -a * (growth + 1.0) / growth
    y = a * t2
    ratio = 1.0 / (y + 1.0 / (1.0 + y))                 # (1 + y) / (1 + y + y^2)
    curvature = y * (2.0 + y) / (1.0 + y) ** 2          # -d ratio/dy / ratio^2
    q = t2 * ratio
    dq_dt2 = ratio - (ratio * y) ** 2 * (2.0 + y) / (1.0 + y) ** 2
    dq_da = -(t2 * ratio) ** 2 * curvature
    argument = 1.0 + _BETA_OVER_GAMMA * q
    h = PBE_GAMMA * phi3 * np.log(argument)
    dh_dq = PBE_BETA * phi3 / argument
    dh_dx = dh_dq * dq_da * da_dx
    dh_deps = dh_dx * (-1.0 / (PBE_GAMMA * phi3))
    dh_dphi = 3.0 * h / phi + dh_dx * (-3.0 * x / phi)
    return h, dh_deps, dh_dphi, dh_dq * dq_dt2


def _masked(kernel: Callable[..., tuple[Array, ...]], mask: Array, arrays: list[Array],
            n_out: int) -> tuple[Array, ...]:
    """Run ``kernel`` on the points of ``mask``; zero elsewhere."""
    if mask.all():
        return tuple(kernel(*arrays))
    outs = tuple(np.zeros(mask.shape) for _ in range(n_out))
    if mask.any():
        for out, value in zip(outs, kernel(*(a[mask] for a in arrays))):
            out[mask] = value
    return outs


def _as_arrays(*values: ArrayLike) -> list[Array]:
    arrays = [np.asarray(v, dtype=np.float64) for v in values]
    shape = arrays[0].shape
    if any(a.shape != shape for a in arrays):
        raise ValueError("densities and gradient invariants must share one shape, got "
                         + ", ".join(str(a.shape) for a in arrays))
    return arrays


def _occupied(n: Array) -> Array:
    # ~(n <= floor) rather than n > floor lets a NaN through (as in the local kernels).
    return ~(n <= DENSITY_FLOOR)


# ----------------------------------------------------------------------------------
# exchange
# ----------------------------------------------------------------------------------

def _exchange_kernel(n: Array, sigma: Array) -> tuple[Array, Array, Array]:
    cbrt_n = np.cbrt(n)
    e_uniform = -SLATER_EXCHANGE_COEFFICIENT * n * cbrt_n
    ds2_dsigma = _S2_FACTOR / (n * n * cbrt_n * cbrt_n)
    s2 = np.maximum(sigma, 0.0) * ds2_dsigma
    f, df = pbe_exchange_enhancement(s2)
    de_dn = (4.0 / 3.0) * e_uniform / n * f - (8.0 / 3.0) * e_uniform * df * s2 / n
    return e_uniform * f, de_dn, e_uniform * df * ds2_dsigma


def pbe_exchange(n: ArrayLike, sigma: ArrayLike) -> tuple[Array, Array, Array]:
    """PBE exchange of a spin-unpolarised density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Density, any shape.
    sigma : array_like, float64, bohr^-8
        ``|grad n|^2``, same shape.

    Returns
    -------
    e_x, de_x/dn, de_x/dsigma : ndarray, float64, same shape
        Energy per volume (Ha bohr^-3) and its partial derivatives.

    Notes
    -----
    ``e_x = -C_x n^(4/3) F_x(s)`` with ``s^2 = sigma / (2 kF n)^2`` and ``F_x`` of
    :func:`pbe_exchange_enhancement` (PBE 1996, Eqs. 13-14).
    """
    n, sigma = _as_arrays(n, sigma)
    return _masked(_exchange_kernel, _occupied(n), [n, sigma], 3)


def pbe_exchange_polarized(n_up: ArrayLike, n_down: ArrayLike, sigma_uu: ArrayLike,
                           sigma_ud: ArrayLike, sigma_dd: ArrayLike) -> tuple[Array, ...]:
    """PBE exchange of a spin-polarised density.

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
    sigma_uu, sigma_ud, sigma_dd : array_like, float64, bohr^-8
        Gradient invariants (see the module notes), all of one shape.

    Returns
    -------
    e_x, de/dn_up, de/dn_down, de/dsigma_uu, de/dsigma_ud, de/dsigma_dd : ndarray
        ``de/dsigma_ud`` is identically zero.

    Notes
    -----
    Exact spin scaling (G. L. Oliver and J. P. Perdew, Phys. Rev. A 20, 397 (1979)):
    ``e_x[n_up, n_down] = (e_x[2 n_up] + e_x[2 n_down]) / 2`` with the unpolarised
    ``e_x(n, sigma)``, the gradient of ``2 n_sigma`` having the invariant
    ``4 sigma_ss``.
    """
    up, down, s_uu, s_ud, s_dd = _as_arrays(n_up, n_down, sigma_uu, sigma_ud, sigma_dd)
    channels = []
    for n_s, sigma_s in ((up, s_uu), (down, s_dd)):
        doubled = 2.0 * np.maximum(n_s, 0.0)
        channels.append(_masked(_exchange_kernel, _occupied(doubled),
                                [doubled, 4.0 * sigma_s], 3))
    (e_u, dn_u, ds_u), (e_d, dn_d, ds_d) = channels
    return 0.5 * (e_u + e_d), dn_u, dn_d, 2.0 * ds_u, np.zeros_like(s_ud), 2.0 * ds_d


# ----------------------------------------------------------------------------------
# correlation
# ----------------------------------------------------------------------------------

def _correlation_core(n: Array, zeta: Array, sigma: Array, eps_c: Array, n_deps_dn: Array,
                      deps_dzeta: Array) -> tuple[Array, Array, Array, Array]:
    """e_c = n (eps_c + H) and its derivatives in (n, zeta, |grad n|^2)."""
    phi, dphi_dzeta = spin_scaling_factor(zeta)
    dt2_dsigma = _T2_FACTOR / (phi * phi * n * n * np.cbrt(n))
    t2 = np.maximum(sigma, 0.0) * dt2_dsigma
    h, dh_deps, dh_dphi, dh_dt2 = pbe_gradient_correction(eps_c, phi, t2)
    n_dh_dn = dh_deps * n_deps_dn - (7.0 / 3.0) * dh_dt2 * t2
    dh_dzeta = dh_deps * deps_dzeta + (dh_dphi - 2.0 * dh_dt2 * t2 / phi) * dphi_dzeta
    e = n * (eps_c + h)
    return e, eps_c + h + n_deps_dn + n_dh_dn, n * (deps_dzeta + dh_dzeta), \
        n * dh_dt2 * dt2_dsigma


def _correlation_kernel(n: Array, sigma: Array) -> tuple[Array, Array, Array]:
    eps_c, v_c = pw92_correlation(n)
    zero = np.zeros_like(n)
    e, de_dn, _, de_dsigma = _correlation_core(n, zero, sigma, eps_c, v_c - eps_c, zero)
    return e, de_dn, de_dsigma


def pbe_correlation(n: ArrayLike, sigma: ArrayLike) -> tuple[Array, Array, Array]:
    """PBE correlation of a spin-unpolarised density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
    sigma : array_like, float64, bohr^-8
        ``|grad n|^2``, same shape.

    Returns
    -------
    e_c, de_c/dn, de_c/dsigma : ndarray, float64, same shape

    Notes
    -----
    ``e_c = n [eps_c^PW92(rs) + H(rs, t)]`` with H of :func:`pbe_gradient_correction`
    at phi = 1 (PBE 1996, Eqs. 3, 7, 8).
    """
    n, sigma = _as_arrays(n, sigma)
    return _masked(_correlation_kernel, _occupied(n), [n, sigma], 3)


def _correlation_polarized_kernel(up: Array, down: Array,
                                  sigma: Array) -> tuple[Array, Array, Array, Array]:
    n = up + down
    zeta = np.clip((up - down) / n, -1.0, 1.0)
    eps_c, v_up, v_down = pw92_correlation_polarized(up, down)
    # v_up/down = eps + n d eps/dn + (+-1 - zeta) d eps/dzeta (Perdew-Wang 1992).
    deps_dzeta = 0.5 * (v_up - v_down)
    n_deps_dn = 0.5 * (v_up + v_down) - eps_c + zeta * deps_dzeta
    e, de_dn, de_dzeta, de_dsigma = _correlation_core(n, zeta, sigma, eps_c, n_deps_dn,
                                                      deps_dzeta)
    return (e, de_dn + (1.0 - zeta) * de_dzeta / n, de_dn - (1.0 + zeta) * de_dzeta / n,
            de_dsigma)


def pbe_correlation_polarized(n_up: ArrayLike, n_down: ArrayLike, sigma_uu: ArrayLike,
                              sigma_ud: ArrayLike, sigma_dd: ArrayLike) -> tuple[Array, ...]:
    """PBE correlation of a spin-polarised density.

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
    sigma_uu, sigma_ud, sigma_dd : array_like, float64, bohr^-8

    Returns
    -------
    e_c, de/dn_up, de/dn_down, de/dsigma_uu, de/dsigma_ud, de/dsigma_dd : ndarray

    Notes
    -----
    ``e_c = n [eps_c^PW92(rs, zeta) + H(rs, zeta, t)]`` depends on the gradients only
    through ``|grad n|^2 = sigma_uu + 2 sigma_ud + sigma_dd``, so
    ``de/dsigma_ud = 2 de/dsigma_uu = 2 de/dsigma_dd``.
    """
    up, down, s_uu, s_ud, s_dd = _as_arrays(n_up, n_down, sigma_uu, sigma_ud, sigma_dd)
    up = np.maximum(up, 0.0)
    down = np.maximum(down, 0.0)
    total_sigma = s_uu + 2.0 * s_ud + s_dd
    e, d_up, d_down, d_sigma = _masked(_correlation_polarized_kernel, _occupied(up + down),
                                       [up, down, total_sigma], 4)
    return e, d_up, d_down, d_sigma, 2.0 * d_sigma, d_sigma
