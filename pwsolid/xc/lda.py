"""Local-density exchange and correlation of the uniform electron gas (layer 1).

Pure, vectorised kernels: densities in (any shape, float64, bohr^-3), energies per
electron and potentials out (same shape, float64, hartree). Nothing here knows about
grids, cells or bases.

Conventions
-----------
* ``n`` is the total density, ``n_up``/``n_down`` the spin densities,
  ``r_s = (3 / (4 pi n))^(1/3)`` the Wigner-Seitz radius (bohr) and
  ``zeta = (n_up - n_down) / n`` the spin polarisation.
* Every kernel returns the energy per electron ``eps`` (so that the energy density
  is ``n * eps``) and the functional derivative ``v = d(n eps)/dn`` (or
  ``d(n eps)/dn_sigma`` for each spin).
* Points whose total density is at or below :data:`DENSITY_FLOOR` get
  ``eps = v = 0``; negative spin densities (which density mixing can produce) are
  treated as zero. No warning is ever raised for such points.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "DENSITY_FLOOR",
    "SLATER_EXCHANGE_COEFFICIENT",
    "SPIN_INTERPOLATION_CURVATURE",
    "PerdewZungerParameters",
    "PerdewWangParameters",
    "PZ81_PARAMAGNETIC",
    "PZ81_FERROMAGNETIC",
    "PW92_PARAMAGNETIC",
    "PW92_FERROMAGNETIC",
    "PW92_SPIN_STIFFNESS",
    "wigner_seitz_radius",
    "density_from_radius",
    "spin_interpolation",
    "slater_exchange",
    "slater_exchange_polarized",
    "pz81_correlation",
    "pz81_correlation_polarized",
    "pw92_correlation",
    "pw92_correlation_polarized",
]

Array = NDArray[np.float64]

#: Densities (bohr^-3) at or below this value give zero energy and potential.
DENSITY_FLOOR: float = 1e-30

#: C_x = (3/4)(3/pi)^(1/3) = 0.7385588 hartree bohr, the Slater exchange constant.
SLATER_EXCHANGE_COEFFICIENT: float = 0.75 * (3.0 / math.pi) ** (1.0 / 3.0)

#: f''(0) = 4 / (9 (2^(1/3) - 1)) = 1.709921 of the spin interpolation f(zeta).
SPIN_INTERPOLATION_CURVATURE: float = 4.0 / (9.0 * (2.0 ** (1.0 / 3.0) - 1.0))

_FOUR_THIRDS_PI = 4.0 * math.pi / 3.0
_SPIN_DENOMINATOR = 2.0 ** (4.0 / 3.0) - 2.0
_CBRT2 = 2.0 ** (1.0 / 3.0)


# ----------------------------------------------------------------------------------
# parameter tables
# ----------------------------------------------------------------------------------

@dataclass(frozen=True)
class PerdewZungerParameters:
    """One spin branch of the Perdew-Zunger 1981 correlation fit (hartree).

    ``eps_c = gamma / (1 + beta1 sqrt(rs) + beta2 rs)`` for ``rs >= 1`` and
    ``eps_c = a ln rs + b + c rs ln rs + d rs`` for ``rs < 1``.
    """

    gamma: float
    beta1: float
    beta2: float
    a: float
    b: float
    c: float
    d: float


@dataclass(frozen=True)
class PerdewWangParameters:
    """Parameters of the Perdew-Wang 1992 function G(rs) (hartree; exponent p = 1).

    ``G = -2 a (1 + alpha1 rs) ln[1 + 1 / (2 a (beta1 rs^1/2 + beta2 rs
    + beta3 rs^3/2 + beta4 rs^2))]``.
    """

    a: float
    alpha1: float
    beta1: float
    beta2: float
    beta3: float
    beta4: float


# Perdew & Zunger, Phys. Rev. B 23, 5048 (1981), Appendix C (hartree).
#: Paramagnetic (zeta = 0) branch of the Perdew-Zunger 1981 fit.
PZ81_PARAMAGNETIC = PerdewZungerParameters(
    gamma=-0.1423, beta1=1.0529, beta2=0.3334,
    a=0.0311, b=-0.048, c=0.0020, d=-0.0116)
#: Ferromagnetic (zeta = 1) branch of the Perdew-Zunger 1981 fit.
PZ81_FERROMAGNETIC = PerdewZungerParameters(
    gamma=-0.0843, beta1=1.3981, beta2=0.2611,
    a=0.01555, b=-0.0269, c=0.0007, d=-0.0048)

# Perdew & Wang, Phys. Rev. B 45, 13244 (1992), Table I (hartree), digits as printed.
#: eps_c(rs, 0) of Perdew-Wang 1992.
PW92_PARAMAGNETIC = PerdewWangParameters(
    a=0.031091, alpha1=0.21370, beta1=7.5957, beta2=3.5876, beta3=1.6382, beta4=0.49294)
#: eps_c(rs, 1) of Perdew-Wang 1992.
PW92_FERROMAGNETIC = PerdewWangParameters(
    a=0.015545, alpha1=0.20548, beta1=14.1189, beta2=6.1977, beta3=3.3662, beta4=0.62517)
#: -alpha_c(rs), minus the spin stiffness, of Perdew-Wang 1992.
PW92_SPIN_STIFFNESS = PerdewWangParameters(
    a=0.016887, alpha1=0.11125, beta1=10.357, beta2=3.6231, beta3=0.88026, beta4=0.49671)


# ----------------------------------------------------------------------------------
# helpers
# ----------------------------------------------------------------------------------

def wigner_seitz_radius(n: ArrayLike) -> Array:
    """Wigner-Seitz radius of a density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Positive density.

    Returns
    -------
    ndarray, float64, bohr
        ``rs = (3 / (4 pi n))^(1/3)``, same shape as ``n``.
    """
    return np.cbrt(1.0 / (_FOUR_THIRDS_PI * np.asarray(n, dtype=np.float64)))


def density_from_radius(rs: ArrayLike) -> Array:
    """Density of the uniform gas with Wigner-Seitz radius ``rs`` (bohr).

    Returns ``n = 3 / (4 pi rs^3)`` in bohr^-3, same shape as ``rs``.
    """
    rs = np.asarray(rs, dtype=np.float64)
    return 1.0 / (_FOUR_THIRDS_PI * rs ** 3)


def spin_interpolation(zeta: ArrayLike) -> tuple[Array, Array]:
    """Spin interpolation function f(zeta) and its derivative.

    Parameters
    ----------
    zeta : array_like, float64, dimensionless, in [-1, 1]

    Returns
    -------
    f, df_dzeta : ndarray, float64, same shape as ``zeta``

    Notes
    -----
    ``f(zeta) = [(1 + zeta)^(4/3) + (1 - zeta)^(4/3) - 2] / (2^(4/3) - 2)``,
    with f(0) = 0, f(+-1) = 1 and f''(0) = 1.709921.

    References
    ----------
    U. von Barth and L. Hedin, J. Phys. C 5, 1629 (1972).
    """
    zeta = np.asarray(zeta, dtype=np.float64)
    c_plus = np.cbrt(1.0 + zeta)
    c_minus = np.cbrt(1.0 - zeta)
    f = ((1.0 + zeta) * c_plus + (1.0 - zeta) * c_minus - 2.0) / _SPIN_DENOMINATOR
    df = (4.0 / 3.0) * (c_plus - c_minus) / _SPIN_DENOMINATOR
    return f, df


def _apply_on_occupied(kernel: Callable[[Array], tuple[Array, ...]], n: Array,
                       n_out: int) -> tuple[Array, ...]:
    """Run ``kernel`` only where ``n`` exceeds the floor; zero elsewhere.

    ``~(n <= floor)`` rather than ``n > floor`` lets a NaN through to the result,
    so that a broken density upstream is never silently turned into zero.
    """
    mask = ~(n <= DENSITY_FLOOR)
    if mask.all():
        return tuple(np.asarray(out, dtype=np.float64) for out in kernel(n))
    outs = tuple(np.zeros(n.shape, dtype=np.float64) for _ in range(n_out))
    if mask.any():
        for out, value in zip(outs, kernel(n[mask])):
            out[mask] = value
    return outs


def _apply_on_occupied_pair(kernel: Callable[[Array, Array], tuple[Array, ...]],
                            n_up: ArrayLike, n_down: ArrayLike,
                            n_out: int) -> tuple[Array, ...]:
    """Spin-resolved version of :func:`_apply_on_occupied`.

    Negative spin densities are clipped to zero first (np.maximum keeps NaN).
    """
    up = np.asarray(n_up, dtype=np.float64)
    down = np.asarray(n_down, dtype=np.float64)
    if up.shape != down.shape:
        raise ValueError(f"n_up and n_down differ in shape: {up.shape} != {down.shape}")
    up = np.maximum(up, 0.0)
    down = np.maximum(down, 0.0)
    total = up + down
    mask = ~(total <= DENSITY_FLOOR)
    if mask.all():
        return tuple(np.asarray(out, dtype=np.float64) for out in kernel(up, down))
    outs = tuple(np.zeros(up.shape, dtype=np.float64) for _ in range(n_out))
    if mask.any():
        for out, value in zip(outs, kernel(up[mask], down[mask])):
            out[mask] = value
    return outs


def _polarization(up: Array, down: Array) -> tuple[Array, Array]:
    """Total density and zeta, the latter clipped to [-1, 1] against rounding."""
    total = up + down
    zeta = np.clip((up - down) / total, -1.0, 1.0)
    return total, zeta


# ----------------------------------------------------------------------------------
# Slater exchange
# ----------------------------------------------------------------------------------

def _slater_kernel(n: Array) -> tuple[Array, Array]:
    eps = -SLATER_EXCHANGE_COEFFICIENT * np.cbrt(n)
    return eps, (4.0 / 3.0) * eps


def slater_exchange(n: ArrayLike) -> tuple[Array, Array]:
    """Slater (Dirac) exchange of a spin-unpolarised density.

    Parameters
    ----------
    n : array_like, float64, bohr^-3
        Density, any shape.

    Returns
    -------
    eps_x : ndarray, float64, hartree
        Exchange energy per electron, same shape as ``n``.
    v_x : ndarray, float64, hartree
        Exchange potential ``d(n eps_x)/dn``, same shape as ``n``.

    Notes
    -----
    ``eps_x = -C_x n^(1/3)`` with ``C_x = (3/4)(3/pi)^(1/3)``, i.e.
    ``eps_x = -0.4581653 / rs``, and ``v_x = (4/3) eps_x = -(3 n / pi)^(1/3)``.

    References
    ----------
    P. A. M. Dirac, Proc. Cambridge Philos. Soc. 26, 376 (1930);
    J. C. Slater, Phys. Rev. 81, 385 (1951).
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(_slater_kernel, n, 2)


def _slater_polarized_kernel(up: Array, down: Array) -> tuple[Array, Array, Array]:
    coefficient = SLATER_EXCHANGE_COEFFICIENT * _CBRT2
    c_up = np.cbrt(up)
    c_down = np.cbrt(down)
    energy_density = -coefficient * (up * c_up + down * c_down)
    eps = energy_density / (up + down)
    return eps, -(4.0 / 3.0) * coefficient * c_up, -(4.0 / 3.0) * coefficient * c_down


def slater_exchange_polarized(n_up: ArrayLike,
                              n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """Slater exchange of a spin-polarised density.

    Parameters
    ----------
    n_up, n_down : array_like, float64, bohr^-3
        Spin densities of the same shape.

    Returns
    -------
    eps_x : ndarray, float64, hartree
        Exchange energy per electron (of the total density).
    v_up, v_down : ndarray, float64, hartree
        ``d(n eps_x)/dn_up`` and ``d(n eps_x)/dn_down``.

    Notes
    -----
    Exact spin scaling, ``E_x[n_up, n_down] = (E_x[2 n_up] + E_x[2 n_down]) / 2``,
    gives ``n eps_x = -2^(1/3) C_x (n_up^(4/3) + n_down^(4/3))`` and
    ``v_sigma = -(4/3) 2^(1/3) C_x n_sigma^(1/3) = -(6 n_sigma / pi)^(1/3)``.
    At full polarisation eps_x is 2^(1/3) times its unpolarised value.

    References
    ----------
    G. L. Oliver and J. P. Perdew, Phys. Rev. A 20, 397 (1979).
    """
    return _apply_on_occupied_pair(_slater_polarized_kernel, n_up, n_down, 3)


# ----------------------------------------------------------------------------------
# Perdew-Zunger 1981
# ----------------------------------------------------------------------------------

def _pz81_branch(rs: Array, sqrt_rs: Array, log_rs: Array,
                 p: PerdewZungerParameters) -> tuple[Array, Array]:
    """eps_c and rs * d eps_c / d rs of one Perdew-Zunger spin branch."""
    # Both forms are finite for every rs > 0, so np.where needs no masking.
    denominator = 1.0 + p.beta1 * sqrt_rs + p.beta2 * rs
    eps_low_density = p.gamma / denominator
    rs_deps_low_density = (-p.gamma * (0.5 * p.beta1 * sqrt_rs + p.beta2 * rs)
                           / denominator ** 2)
    eps_high_density = p.a * log_rs + p.b + p.c * rs * log_rs + p.d * rs
    rs_deps_high_density = p.a + p.c * rs * (log_rs + 1.0) + p.d * rs
    high = rs < 1.0
    return (np.where(high, eps_high_density, eps_low_density),
            np.where(high, rs_deps_high_density, rs_deps_low_density))


def _pz81_kernel(n: Array) -> tuple[Array, Array]:
    rs = wigner_seitz_radius(n)
    eps, rs_deps = _pz81_branch(rs, np.sqrt(rs), np.log(rs), PZ81_PARAMAGNETIC)
    return eps, eps - rs_deps / 3.0


def pz81_correlation(n: ArrayLike) -> tuple[Array, Array]:
    """Perdew-Zunger 1981 correlation of a spin-unpolarised density.

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
    For ``rs >= 1``: ``eps_c = gamma / (1 + beta1 sqrt(rs) + beta2 rs)`` and
    ``v_c = eps_c (1 + 7/6 beta1 sqrt(rs) + 4/3 beta2 rs)
    / (1 + beta1 sqrt(rs) + beta2 rs)``.
    For ``rs < 1``: ``eps_c = A ln rs + B + C rs ln rs + D rs`` and
    ``v_c = A ln rs + (B - A/3) + (2/3) C rs ln rs + (2D - C) rs / 3``.
    Both follow from ``v_c = eps_c - (rs/3) d eps_c / d rs``. The published
    parameters make the two pieces continuous at rs = 1 only to their rounding
    (about 3e-5 Ha).

    References
    ----------
    J. P. Perdew and A. Zunger, Phys. Rev. B 23, 5048 (1981), Appendix C;
    fitted to D. M. Ceperley and B. J. Alder, Phys. Rev. Lett. 45, 566 (1980).
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(_pz81_kernel, n, 2)


def _pz81_polarized_kernel(up: Array, down: Array) -> tuple[Array, Array, Array]:
    total, zeta = _polarization(up, down)
    rs = wigner_seitz_radius(total)
    sqrt_rs = np.sqrt(rs)
    log_rs = np.log(rs)
    e_para, rs_de_para = _pz81_branch(rs, sqrt_rs, log_rs, PZ81_PARAMAGNETIC)
    e_ferro, rs_de_ferro = _pz81_branch(rs, sqrt_rs, log_rs, PZ81_FERROMAGNETIC)
    f, df = spin_interpolation(zeta)
    difference = e_ferro - e_para
    eps = e_para + f * difference
    rs_deps = rs_de_para + f * (rs_de_ferro - rs_de_para)
    deps_dzeta = df * difference
    common = eps - rs_deps / 3.0
    return eps, common + (1.0 - zeta) * deps_dzeta, common - (1.0 + zeta) * deps_dzeta


def pz81_correlation_polarized(n_up: ArrayLike,
                               n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """Perdew-Zunger 1981 correlation of a spin-polarised density.

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
    ``eps_c(rs, zeta) = eps_P(rs) + f(zeta) [eps_F(rs) - eps_P(rs)]`` with the
    paramagnetic (P) and ferromagnetic (F) fits of :func:`pz81_correlation` and
    f from :func:`spin_interpolation`. The potentials are
    ``v_up = eps_c - (rs/3) d eps_c/d rs + (1 - zeta) d eps_c/d zeta`` and
    ``v_down = eps_c - (rs/3) d eps_c/d rs - (1 + zeta) d eps_c/d zeta``.

    References
    ----------
    J. P. Perdew and A. Zunger, Phys. Rev. B 23, 5048 (1981);
    U. von Barth and L. Hedin, J. Phys. C 5, 1629 (1972).
    """
    return _apply_on_occupied_pair(_pz81_polarized_kernel, n_up, n_down, 3)


# ----------------------------------------------------------------------------------
# Perdew-Wang 1992
# ----------------------------------------------------------------------------------

def _pw92_g(rs: Array, sqrt_rs: Array, p: PerdewWangParameters) -> tuple[Array, Array]:
    """G(rs) of Perdew-Wang 1992 and rs * dG/drs (exponent p = 1)."""
    x = sqrt_rs
    two_a = 2.0 * p.a
    q = two_a * x * (p.beta1 + x * (p.beta2 + x * (p.beta3 + x * p.beta4)))
    rs_dq = two_a * x * (0.5 * p.beta1 + x * (p.beta2 + x * (1.5 * p.beta3
                                                             + x * 2.0 * p.beta4)))
    # log1p keeps full precision at low density, where 1/q is small.
    log_term = np.log1p(1.0 / q)
    prefactor = 1.0 + p.alpha1 * rs
    g = -two_a * prefactor * log_term
    rs_dg = -two_a * p.alpha1 * rs * log_term + two_a * prefactor * rs_dq / (q * (q + 1.0))
    return g, rs_dg


def _pw92_kernel(n: Array) -> tuple[Array, Array]:
    rs = wigner_seitz_radius(n)
    eps, rs_deps = _pw92_g(rs, np.sqrt(rs), PW92_PARAMAGNETIC)
    return eps, eps - rs_deps / 3.0


def pw92_correlation(n: ArrayLike) -> tuple[Array, Array]:
    """Perdew-Wang 1992 correlation of a spin-unpolarised density.

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
    ``eps_c(rs, 0) = G(rs) = -2A (1 + alpha1 rs)
    ln[1 + 1 / (2A (beta1 rs^1/2 + beta2 rs + beta3 rs^3/2 + beta4 rs^2))]``
    with the first row of Table I, and ``v_c = eps_c - (rs/3) dG/drs``
    (derivative taken analytically). As rs -> 0 it recovers the
    Gell-Mann-Brueckner term ``A ln rs`` with ``A = (1 - ln 2)/pi^2``.

    References
    ----------
    J. P. Perdew and Y. Wang, Phys. Rev. B 45, 13244 (1992), Eq. (10), Table I.
    """
    n = np.asarray(n, dtype=np.float64)
    return _apply_on_occupied(_pw92_kernel, n, 2)


def _pw92_polarized_kernel(up: Array, down: Array,
                           tables: tuple[PerdewWangParameters, ...] | None = None
                           ) -> tuple[Array, Array, Array]:
    # tables: (paramagnetic, ferromagnetic, spin stiffness); None: Table I as printed.
    para, ferro, stiffness = tables or (PW92_PARAMAGNETIC, PW92_FERROMAGNETIC,
                                        PW92_SPIN_STIFFNESS)
    total, zeta = _polarization(up, down)
    rs = wigner_seitz_radius(total)
    sqrt_rs = np.sqrt(rs)
    e_para, rs_de_para = _pw92_g(rs, sqrt_rs, para)
    e_ferro, rs_de_ferro = _pw92_g(rs, sqrt_rs, ferro)
    minus_alpha, rs_d_minus_alpha = _pw92_g(rs, sqrt_rs, stiffness)
    alpha = -minus_alpha
    rs_dalpha = -rs_d_minus_alpha

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


def pw92_correlation_polarized(n_up: ArrayLike,
                               n_down: ArrayLike) -> tuple[Array, Array, Array]:
    """Perdew-Wang 1992 correlation of a spin-polarised density.

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
    ``eps_c(rs, zeta) = eps_c(rs, 0) + alpha_c(rs) f(zeta) (1 - zeta^4) / f''(0)
    + [eps_c(rs, 1) - eps_c(rs, 0)] f(zeta) zeta^4`` (Eq. 8), each of
    ``eps_c(rs, 0)``, ``eps_c(rs, 1)`` and ``-alpha_c(rs)`` being a G(rs) of
    Table I. The potentials are
    ``v_up = eps_c - (rs/3) d eps_c/d rs + (1 - zeta) d eps_c/d zeta`` and
    ``v_down = eps_c - (rs/3) d eps_c/d rs - (1 + zeta) d eps_c/d zeta``.

    ``f''(0)`` is the exact ``4 / (9 (2^(1/3) - 1))``, not the six printed digits
    1.709921 (which differ by 6.6e-8; Libxc's ``lda_c_pw`` uses the printed ones, so
    the two differ by up to 3.5e-8 relative at intermediate polarisation). The paper
    defines ``f''(0)`` as the second derivative of its f(zeta) at zeta = 0 (below
    Eq. 9) so that the second term of Eq. (8) is ``alpha_c zeta^2 / 2`` for small
    zeta, i.e. so that ``alpha_c`` is the spin stiffness; only the exact value keeps
    that, and the printed value is its rounding.

    References
    ----------
    J. P. Perdew and Y. Wang, Phys. Rev. B 45, 13244 (1992), Eqs. (8)-(10), Table I.
    """
    return _apply_on_occupied_pair(_pw92_polarized_kernel, n_up, n_down, 3)
