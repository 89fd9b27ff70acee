"""More local-density correlation fits of the uniform electron gas (layer 1).

Vosko-Wilk-Nusair 1980, Wigner 1934, Hedin-Lundqvist 1971 and von Barth-Hedin 1972,
each as a pure, vectorised kernel in the conventions of :mod:`pwsolid.xc.lda`:
densities in (bohr^-3, any shape), energy per electron ``eps`` and potentials
``v = d(n eps)/dn`` (or ``d(n eps)/dn_sigma``) out, in hartree, of the same shape.
Every potential here is analytic.

Provenance of the parameters (tags of the project's reference notes, section 1):

* Vosko-Wilk-Nusair: the paramagnetic and ferromagnetic rows are from memory,
  cross-checked: A = 2 c0 in Ry, and both rows reproduce the Ceperley-Alder data
  and the Perdew-Zunger and Perdew-Wang fits to 0.3 mHa. The spin-stiffness row is
  from memory and unverified (it agrees with the Perdew-Wang stiffness to 5 %).
* Wigner: ``eps_c = -0.44 / (rs + 7.8)`` hartree, from memory.
* Hedin-Lundqvist: ``A = 21`` and ``C = 0.045 Ry = 0.0225 Ha``, from memory,
  cross-checked: the potential that follows, ``v_c = -C ln(1 + A/rs)``, is the
  published form ``v_xc = v_x [1 + B x ln(1 + 1/x)]``, ``x = rs/A``, where
  ``|v_x| rs = 2 / (pi alpha) = 1.2218 Ry bohr`` (``alpha = (4/(9 pi))^(1/3)``)
  gives ``B = C A / 1.2218 = 0.7734``, the value remembered for that form.
* von Barth-Hedin: ``c_P = 0.0504 Ry, r_P = 30; c_F = 0.0254 Ry, r_F = 75``, from
  memory and unverified; they are consistent with the random-phase-approximation spin
  scaling ``c_F = c_P / 2, r_F = 2^(4/3) r_P`` to 1 %.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .lda import (SPIN_INTERPOLATION_CURVATURE, _apply_on_occupied,
                  _apply_on_occupied_pair, _polarization, spin_interpolation,
                  wigner_seitz_radius)

__all__ = [
    "VoskoWilkNusairParameters",
    "HedinLundqvistParameters",
    "VWN_PARAMAGNETIC",
    "VWN_FERROMAGNETIC",
    "VWN_SPIN_STIFFNESS",
    "WIGNER_NUMERATOR",
    "WIGNER_OFFSET",
    "HL_PARAMAGNETIC",
    "HL_FERROMAGNETIC",
    "VBH_PARAMAGNETIC",
    "VBH_FERROMAGNETIC",
    "vwn_correlation",
    "vwn_correlation_polarized",
    "wigner_correlation",
    "wigner_correlation_polarized",
    "hedin_lundqvist_correlation",
    "hedin_lundqvist_correlation_polarized",
    "von_barth_hedin_correlation",
    "von_barth_hedin_correlation_polarized",
]

Array = NDArray[np.float64]

_RYDBERG = 0.5  # hartree; the papers of VWN, HL and vBH give energies in Ry


# ----------------------------------------------------------------------------------
# parameter tables
# ----------------------------------------------------------------------------------

@dataclass(frozen=True)
class VoskoWilkNusairParameters:
    """One row of the Vosko-Wilk-Nusair 1980 interpolation (``a`` in hartree).

    With ``x = sqrt(rs)``, ``X(x) = x^2 + b x + c`` and ``Q = sqrt(4c - b^2)``::

        G = a { ln(x^2/X) + (2b/Q) atan(Q/(2x + b))
                - [b x0 / X(x0)] [ ln((x - x0)^2/X) + (2(b + 2 x0)/Q) atan(Q/(2x + b)) ] }

    The paper prints ``a`` in rydberg; the values stored here are half of those.
    """

    a: float
    x0: float
    b: float
    c: float


@dataclass(frozen=True)
class HedinLundqvistParameters:
    """One spin branch of the Hedin-Lundqvist form (``c`` in hartree, ``r`` in bohr).

    ``eps_c = -c F(rs / r)`` with
    ``F(x) = (1 + x^3) ln(1 + 1/x) + x/2 - x^2 - 1/3``.
    """

    c: float
    r: float


# Vosko, Wilk & Nusair, Can. J. Phys. 58, 1200 (1980): the fit to the Ceperley-Alder
# data (paramagnetic, ferromagnetic) and the spin stiffness. A printed in Ry: halved.
#: Paramagnetic row; A = 0.0621814 Ry = 2 (1 - ln 2)/pi^2 Ry.
VWN_PARAMAGNETIC = VoskoWilkNusairParameters(
    a=0.0621814 * _RYDBERG, x0=-0.10498, b=3.72744, c=12.9352)
#: Ferromagnetic row; A = 0.0310907 Ry, half the paramagnetic one.
VWN_FERROMAGNETIC = VoskoWilkNusairParameters(
    a=0.0310907 * _RYDBERG, x0=-0.32500, b=7.06042, c=18.0578)
#: Spin stiffness alpha_c(rs) (positive); A = -1/(3 pi^2) Ry. From memory, unverified.
VWN_SPIN_STIFFNESS = VoskoWilkNusairParameters(
    a=-1.0 / (3.0 * math.pi ** 2) * _RYDBERG, x0=-0.0047584, b=1.13107, c=13.0045)

#: Wigner (1934) correlation ``eps_c = -WIGNER_NUMERATOR / (rs + WIGNER_OFFSET)`` Ha.
WIGNER_NUMERATOR: float = 0.44
#: Offset in bohr of the Wigner interpolation (from memory).
WIGNER_OFFSET: float = 7.8

# Hedin & Lundqvist, J. Phys. C 4, 2064 (1971): C = 0.045 Ry, A = 21 (from memory).
#: Paramagnetic Hedin-Lundqvist branch.
HL_PARAMAGNETIC = HedinLundqvistParameters(c=0.045 * _RYDBERG, r=21.0)
#: Ferromagnetic branch built here from the paramagnetic one by the spin scaling of the
#: random-phase approximation, c_F = c_P / 2 and r_F = 2^(4/3) r_P, which von Barth
#: and Hedin's own parameters follow to 1 %. Not a published fit.
HL_FERROMAGNETIC = HedinLundqvistParameters(c=0.5 * 0.045 * _RYDBERG,
                                            r=2.0 ** (4.0 / 3.0) * 21.0)

# von Barth & Hedin, J. Phys. C 5, 1629 (1972) (from memory, unverified).
#: Paramagnetic von Barth-Hedin branch, c_P = 0.0504 Ry, r_P = 30.
VBH_PARAMAGNETIC = HedinLundqvistParameters(c=0.0504 * _RYDBERG, r=30.0)
#: Ferromagnetic von Barth-Hedin branch, c_F = 0.0254 Ry, r_F = 75.
VBH_FERROMAGNETIC = HedinLundqvistParameters(c=0.0254 * _RYDBERG, r=75.0)


# ----------------------------------------------------------------------------------
# spin interpolations shared by the fits
# ----------------------------------------------------------------------------------

def _two_branch(zeta: Array, e_para: Array, rs_de_para: Array, e_ferro: Array,
                rs_de_ferro: Array) -> tuple[Array, Array, Array]:
    """eps, v_up, v_down of ``eps_P + f(zeta) (eps_F - eps_P)`` (von Barth-Hedin)."""
    f, df = spin_interpolation(zeta)
    difference = e_ferro - e_para
    eps = e_para + f * difference
    rs_deps = rs_de_para + f * (rs_de_ferro - rs_de_para)
    deps_dzeta = df * difference
    common = eps - rs_deps / 3.0
    return eps, common + (1.0 - zeta) * deps_dzeta, common - (1.0 + zeta) * deps_dzeta


def _with_stiffness(zeta: Array, e_para: Array, rs_de_para: Array, e_ferro: Array,
                    rs_de_ferro: Array, alpha: Array,
                    rs_dalpha: Array) -> tuple[Array, Array, Array]:
    """eps, v_up, v_down of the interpolation with a spin stiffness alpha_c(rs).

    ``eps = eps_P + alpha_c f (1 - zeta^4) / f''(0) + (eps_F - eps_P) f zeta^4``,
    so that ``eps = eps_P + alpha_c zeta^2 / 2 + O(zeta^4)``.
    """
    f, df = spin_interpolation(zeta)
    zeta3 = zeta ** 3
    zeta4 = zeta3 * zeta
    stiffness_weight = f * (1.0 - zeta4) / SPIN_INTERPOLATION_CURVATURE
    ferro_weight = f * zeta4
    difference = e_ferro - e_para
    eps = e_para + alpha * stiffness_weight + difference * ferro_weight
    rs_deps = (rs_de_para + rs_dalpha * stiffness_weight
               + (rs_de_ferro - rs_de_para) * ferro_weight)
    deps_dzeta = (alpha * (df * (1.0 - zeta4) - 4.0 * zeta3 * f)
                  / SPIN_INTERPOLATION_CURVATURE
                  + difference * (df * zeta4 + 4.0 * zeta3 * f))
    common = eps - rs_deps / 3.0
    return eps, common + (1.0 - zeta) * deps_dzeta, common - (1.0 + zeta) * deps_dzeta


# ----------------------------------------------------------------------------------
# Vosko-Wilk-Nusair 1980
# ----------------------------------------------------------------------------------

def _vwn_g(x: Array, p: VoskoWilkNusairParameters) -> tuple[Array, Array]:
    """G(rs) of one VWN row and rs dG/drs, with x = sqrt(rs)."""
    q = math.sqrt(4.0 * p.c - p.b * p.b)
    big_x = x * (x + p.b) + p.c
    big_x0 = p.x0 * (p.x0 + p.b) + p.c
    ratio = p.b * p.x0 / big_x0
    angle = np.arctan(q / (2.0 * x + p.b))
    g = p.a * (np.log(x * x / big_x) + (2.0 * p.b / q) * angle
               - ratio * (np.log((x - p.x0) ** 2 / big_x)
                          + (2.0 * (p.b + 2.0 * p.x0) / q) * angle))
    # d atan(Q/(2x+b))/dx = -Q/(2X) because (2x+b)^2 + Q^2 = 4X; rs d/drs = (x/2) d/dx.
    dg_dx = p.a * (2.0 / x - (2.0 * x + p.b) / big_x - p.b / big_x
                   - ratio * (2.0 / (x - p.x0) - (2.0 * x + p.b) / big_x
                              - (p.b + 2.0 * p.x0) / big_x))
    return g, 0.5 * x * dg_dx


def _vwn_kernel(n: Array) -> tuple[Array, Array]:
    x = np.sqrt(wigner_seitz_radius(n))
    eps, rs_deps = _vwn_g(x, VWN_PARAMAGNETIC)
    return eps, eps - rs_deps / 3.0


def vwn_correlation(n: ArrayLike) -> tuple[Array, Array]:
    """Vosko-Wilk-Nusair 1980 correlation of a spin-unpolarised density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Density, any shape.

    Returns
    -------
    eps_c : ndarray, float64, hartree
        Correlation energy per electron, same shape as ``n``.
    v_c : ndarray, float64, hartree
        Correlation potential ``d(n eps_c)/dn``, same shape as ``n``.

    Notes
    -----
    ``eps_c = G(rs)`` with the paramagnetic row of
    :class:`VoskoWilkNusairParameters` (the interpolation of the Ceperley-Alder
    data), and ``v_c = eps_c - (rs/3) dG/drs`` with the derivative analytic:
    ``dG/dx = a {2/x - (2x + 2b)/X - [b x0/X(x0)] [2/(x - x0) - (2x + 2b + 2x0)/X]}``.
    As rs -> 0 it recovers the Gell-Mann-Brueckner term ``a ln rs``.

    References
    ----------
    S. H. Vosko, L. Wilk and M. Nusair, Can. J. Phys. 58, 1200 (1980);
    D. M. Ceperley and B. J. Alder, Phys. Rev. Lett. 45, 566 (1980).
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(_vwn_kernel, n, 2)


def _vwn_polarized_kernel(up: Array, down: Array) -> tuple[Array, Array, Array]:
    total, zeta = _polarization(up, down)
    x = np.sqrt(wigner_seitz_radius(total))
    e_para, rs_de_para = _vwn_g(x, VWN_PARAMAGNETIC)
    e_ferro, rs_de_ferro = _vwn_g(x, VWN_FERROMAGNETIC)
    alpha, rs_dalpha = _vwn_g(x, VWN_SPIN_STIFFNESS)
    return _with_stiffness(zeta, e_para, rs_de_para, e_ferro, rs_de_ferro, alpha,
                           rs_dalpha)


def vwn_correlation_polarized(n_up: ArrayLike,
                              n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """Vosko-Wilk-Nusair 1980 correlation of a spin-polarised density.

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
        Spin densities of the same shape.

    Returns
    -------
    eps_c : ndarray, float64, hartree
        Correlation energy per electron.
    v_up, v_down : ndarray, float64, hartree
        ``d(n eps_c)/dn_up`` and ``d(n eps_c)/dn_down``.

    Notes
    -----
    ``eps_c(rs, zeta) = eps_P + alpha_c f(zeta) (1 - zeta^4) / f''(0)
    + (eps_F - eps_P) f(zeta) zeta^4``, each of ``eps_P``, ``eps_F`` and
    ``alpha_c`` a G(rs) of :class:`VoskoWilkNusairParameters`. The potentials are
    ``v_up = eps_c - (rs/3) d eps_c/d rs + (1 - zeta) d eps_c/d zeta`` and
    ``v_down = eps_c - (rs/3) d eps_c/d rs - (1 + zeta) d eps_c/d zeta``.

    References
    ----------
    S. H. Vosko, L. Wilk and M. Nusair, Can. J. Phys. 58, 1200 (1980).
    """
    return _apply_on_occupied_pair(_vwn_polarized_kernel, n_up, n_down, 3)


# ----------------------------------------------------------------------------------
# Wigner 1934
# ----------------------------------------------------------------------------------

def _wigner_kernel(n: Array) -> tuple[Array, Array]:
    rs = wigner_seitz_radius(n)
    denominator = rs + WIGNER_OFFSET
    eps = -WIGNER_NUMERATOR / denominator
    # v = eps - (rs/3) d eps/d rs = -a (4 rs/3 + b) / (rs + b)^2
    v = -WIGNER_NUMERATOR * (4.0 * rs / 3.0 + WIGNER_OFFSET) / denominator ** 2
    return eps, v


def wigner_correlation(n: ArrayLike) -> tuple[Array, Array]:
    """Wigner's 1934 interpolation of the correlation energy (spin-unpolarised).

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Density, any shape.

    Returns
    -------
    eps_c, v_c : ndarray, float64, hartree
        Energy per electron and potential ``d(n eps_c)/dn``, same shape as ``n``.

    Notes
    -----
    ``eps_c = -0.44 / (rs + 7.8)`` and
    ``v_c = -0.44 (4 rs / 3 + 7.8) / (rs + 7.8)^2`` (hartree; the two numbers are
    from memory). It interpolates between a constant at high density (there is no
    Gell-Mann-Brueckner logarithm) and ``-0.44/rs`` at low density, the correlation
    part of the electron-crystal energy.

    References
    ----------
    E. Wigner, Phys. Rev. 46, 1002 (1934).
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(_wigner_kernel, n, 2)


def _wigner_polarized_kernel(up: Array, down: Array) -> tuple[Array, Array, Array]:
    eps, v = _wigner_kernel(up + down)
    return eps, v, v.copy()


def wigner_correlation_polarized(n_up: ArrayLike,
                                 n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """Wigner correlation of a spin-polarised density, taken independent of zeta.

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
        Spin densities of the same shape.

    Returns
    -------
    eps_c, v_up, v_down : ndarray, float64, hartree
        ``eps_c`` of the total density; ``v_up = v_down = d(n eps_c)/dn``.

    Notes
    -----
    Wigner's form has no spin dependence, so the common zeta-independent
    extension is used: ``eps_c(rs, zeta) = eps_c(rs, 0)``. This overestimates the
    correlation of a polarised gas (the exact ``|eps_c|`` falls with zeta), which
    the exact-condition checks report.
    """
    return _apply_on_occupied_pair(_wigner_polarized_kernel, n_up, n_down, 3)


# ----------------------------------------------------------------------------------
# Hedin-Lundqvist 1971 and von Barth-Hedin 1972
# ----------------------------------------------------------------------------------

# For large x the closed form of F loses digits to the cancellation of its x^2 terms
# (relative loss ~ x^3 * 1e-16, 1e-13 at x = 10, enough to spoil finite-difference
# checks of the potential); beyond x = 4 the series
# F = sum_m (-1)^(m+1) 3 x^-m / (m (m + 3)), which follows from
# ln(1 + 1/x) = sum_k (-1)^(k+1) x^-k / k, is used instead. With 32 terms its
# truncation is below 1e-19 relative at x = 4; at the switch both forms agree to ~1e-14.
_SERIES_START = 4.0
_SERIES_COEFFICIENTS = np.array([(-1.0) ** (m + 1) * 3.0 / (m * (m + 3.0))
                                 for m in range(1, 33)])


def _hedin_lundqvist_f(x: Array) -> Array:
    """F(x) = (1 + x^3) ln(1 + 1/x) + x/2 - x^2 - 1/3, accurate for every x > 0."""
    far = x > _SERIES_START
    near_x = np.where(far, 1.0, x)
    closed = (1.0 + near_x ** 3) * np.log1p(1.0 / near_x) + near_x * (0.5 - near_x) - 1.0 / 3.0
    inverse = 1.0 / np.where(far, x, _SERIES_START)
    series = np.zeros_like(inverse)
    for coefficient in _SERIES_COEFFICIENTS[::-1]:   # Horner in 1/x
        series = (series + coefficient) * inverse
    return np.where(far, series, closed)


def _hl_branch(rs: Array, p: HedinLundqvistParameters) -> tuple[Array, Array, Array]:
    """eps, v and rs d eps/d rs of one Hedin-Lundqvist-form branch."""
    x = rs / p.r
    log_term = np.log1p(1.0 / x)
    eps = -p.c * _hedin_lundqvist_f(x)
    # v = eps - (rs/3) d eps/d rs simplifies to -c ln(1 + 1/x): the x^2, x and
    # constant terms of F cancel against those of (x/3) F'(x).
    v = -p.c * log_term
    return eps, v, 3.0 * (eps - v)


def _hl_unpolarized(n: Array, p: HedinLundqvistParameters) -> tuple[Array, Array]:
    eps, v, _ = _hl_branch(wigner_seitz_radius(n), p)
    return eps, v


def _hl_polarized(up: Array, down: Array, para: HedinLundqvistParameters,
                  ferro: HedinLundqvistParameters) -> tuple[Array, Array, Array]:
    total, zeta = _polarization(up, down)
    rs = wigner_seitz_radius(total)
    e_para, _, rs_de_para = _hl_branch(rs, para)
    e_ferro, _, rs_de_ferro = _hl_branch(rs, ferro)
    return _two_branch(zeta, e_para, rs_de_para, e_ferro, rs_de_ferro)


def hedin_lundqvist_correlation(n: ArrayLike) -> tuple[Array, Array]:
    """Hedin-Lundqvist 1971 correlation of a spin-unpolarised density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Density, any shape.

    Returns
    -------
    eps_c, v_c : ndarray, float64, hartree
        Energy per electron and potential ``d(n eps_c)/dn``, same shape as ``n``.

    Notes
    -----
    ``eps_c = -C [(1 + x^3) ln(1 + 1/x) + x/2 - x^2 - 1/3]`` with ``x = rs/A``,
    ``A = 21`` and ``C = 0.045 Ry = 0.0225 Ha`` (from memory, cross-checked, see the
    module notes); the potential is ``v_c = -C ln(1 + A/rs)``. At high density the
    slope is ``C ln rs``, smaller than the Gell-Mann-Brueckner 0.0311 Ha; at low
    density ``eps_c -> -3 C A / (4 rs) = -0.354/rs``.

    References
    ----------
    L. Hedin and B. I. Lundqvist, J. Phys. C 4, 2064 (1971).
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(lambda m: _hl_unpolarized(m, HL_PARAMAGNETIC), n, 2)


def hedin_lundqvist_correlation_polarized(n_up: ArrayLike,
                                          n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """Hedin-Lundqvist correlation extended to spin polarisation (von Barth-Hedin form).

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
        Spin densities of the same shape.

    Returns
    -------
    eps_c, v_up, v_down : ndarray, float64, hartree
        Energy per electron and ``d(n eps_c)/dn_sigma``.

    Notes
    -----
    ``eps_c = eps_P + f(zeta) (eps_F - eps_P)`` with the paramagnetic branch of
    :func:`hedin_lundqvist_correlation` and a ferromagnetic branch obtained from it
    by the random-phase-approximation spin scaling ``C_F = C/2``,
    ``A_F = 2^(4/3) A`` (:data:`HL_FERROMAGNETIC`). This is a construction of this
    module, not a published fit: it makes the ferromagnetic correlation about 40 %
    too strong against the Ceperley-Alder data at metallic densities, and its
    low-density tail ``-3 C_F A_F / (4 rs)`` is 2^(1/3) times the paramagnetic one,
    so beyond rs ~ 30 the polarised gas is (wrongly) the more correlated.

    References
    ----------
    L. Hedin and B. I. Lundqvist, J. Phys. C 4, 2064 (1971);
    U. von Barth and L. Hedin, J. Phys. C 5, 1629 (1972).
    """
    return _apply_on_occupied_pair(
        lambda a, b: _hl_polarized(a, b, HL_PARAMAGNETIC, HL_FERROMAGNETIC),
        n_up, n_down, 3)


def von_barth_hedin_correlation(n: ArrayLike) -> tuple[Array, Array]:
    """von Barth-Hedin 1972 correlation of a spin-unpolarised density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Density, any shape.

    Returns
    -------
    eps_c, v_c : ndarray, float64, hartree
        Energy per electron and potential, same shape as ``n``.

    Notes
    -----
    The Hedin-Lundqvist form with ``c_P = 0.0504 Ry`` and ``r_P = 30`` (from memory,
    unverified). Fitted to a random-phase-like calculation, it is 15-20 mHa deeper
    than the Ceperley-Alder data at metallic densities.

    References
    ----------
    U. von Barth and L. Hedin, J. Phys. C 5, 1629 (1972).
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(lambda m: _hl_unpolarized(m, VBH_PARAMAGNETIC), n, 2)


def von_barth_hedin_correlation_polarized(n_up: ArrayLike,
                                          n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """von Barth-Hedin 1972 correlation of a spin-polarised density.

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
        Spin densities of the same shape.

    Returns
    -------
    eps_c, v_up, v_down : ndarray, float64, hartree
        Energy per electron and ``d(n eps_c)/dn_sigma``.

    Notes
    -----
    ``eps_c = eps_P + f(zeta) (eps_F - eps_P)``, both branches of the
    Hedin-Lundqvist form: ``c_P = 0.0504 Ry, r_P = 30; c_F = 0.0254 Ry, r_F = 75``
    (from memory, unverified), with the interpolation f(zeta) these authors
    introduced (:func:`pwsolid.xc.spin_interpolation`). With these values the
    ferromagnetic branch is the deeper one beyond rs ~ 45, and with its tail
    ``-0.71/rs`` the fully polarised gas breaks the Lieb-Oxford bound beyond
    rs ~ 47; the exact-condition checks report both.

    References
    ----------
    U. von Barth and L. Hedin, J. Phys. C 5, 1629 (1972).
    """
    return _apply_on_occupied_pair(
        lambda a, b: _hl_polarized(a, b, VBH_PARAMAGNETIC, VBH_FERROMAGNETIC),
        n_up, n_down, 3)
