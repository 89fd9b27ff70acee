"""Exact conditions for meta-GGAs, on a grid of (rs, zeta, s, alpha) (layer 1).

:func:`check_meta_conditions` judges any :class:`~pwsolid.xc.meta_functional.MetaFunctional`
(built-in or from a user file) on the grid :data:`META_RS` x :data:`META_ZETA` x
:data:`META_S` x :data:`META_ALPHA`. A point of the grid is a density ``n`` with spin
polarisation ``zeta``, both spin densities varying alike (``grad n_s = (n_s/n) grad n``),
total reduced gradient ``s`` and iso-orbital indicator ``alpha`` (each spin's
``tau_s = tau_W,s + alpha tau_unif,s``; then the total alpha is the same). Each
condition gives one :class:`~pwsolid.xc.conditions.ConditionResult` with the worst
point found.

Sources:

* uniform-gas limit (s = 0, alpha = 1): Slater exchange plus Perdew-Wang 1992
  correlation (J. Sun, A. Ruzsinszky, J. P. Perdew, Phys. Rev. Lett. 115, 036402
  (2015); J. W. Furness et al., J. Phys. Chem. Lett. 11, 8208 (2020)), to rounding,
  with the digits of PW92 the functional declares;
* negativity of exchange and correlation energies per volume [C];
* the Lieb-Oxford bound, locally ``e_xc >= -1.679 n^(4/3)`` (E. H. Lieb and S.
  Oxford, Int. J. Quantum Chem. 19, 427 (1981), value from memory);
* uniform coordinate scaling of exchange, ``e_x(l^3 n, l^8 sigma, l^5 tau) =
  l^4 e_x(n, sigma, tau)`` [C];
* spin scaling of exchange, ``E_x[n_up, n_down] = (E_x[2 n_up] + E_x[2 n_down]) / 2``
  (G. L. Oliver and J. P. Perdew, Phys. Rev. A 20, 397 (1979));
* the single-orbital limit (tau = tau_W, alpha = 0): a one-electron density (zeta = 1)
  has no correlation energy [C], one of the constraints SCAN is built on;
* the same limit for exchange, spin-unpolarised (two electrons in one orbital):
  ``F_x <= 1.174`` (J. P. Perdew, A. Ruzsinszky, J. Sun and K. Burke, J. Chem. Phys.
  140, 18A533 (2014), from memory);
* the kernel's derivatives in n_up, n_down, the three sigmas and the two taus equal
  central differences of its energy per volume [C].
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from .conditions import LIEB_OXFORD_LAMBDA, ConditionResult
from .lda import (PW92_FERROMAGNETIC, PW92_PARAMAGNETIC, PW92_SPIN_STIFFNESS,
                  SPIN_INTERPOLATION_CURVATURE, _pw92_g, density_from_radius,
                  slater_exchange_polarized, spin_interpolation, wigner_seitz_radius)

__all__ = ["META_RS", "META_ZETA", "META_S", "META_ALPHA", "TWO_ELECTRON_EXCHANGE_BOUND",
           "check_meta_conditions", "meta_grid_point", "pw92_energy_density"]

Array = NDArray[np.float64]

#: Wigner-Seitz radii (bohr) of the grid.
META_RS: Array = np.geomspace(0.05, 50.0, 10)
#: Spin polarisations of the grid.
META_ZETA: Array = np.array([0.0, 0.5, 1.0])
#: Reduced gradients s of the grid.
META_S: Array = np.array([0.0, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0])
#: Iso-orbital indicators alpha of the grid.
META_ALPHA: Array = np.array([0.0, 0.25, 0.5, 0.9, 1.0, 1.1, 1.5, 2.5, 5.0, 10.0])
#: Tight bound on F_x for two-electron (single-orbital, unpolarised) densities.
TWO_ELECTRON_EXCHANGE_BOUND = 1.174

_KF2 = (3.0 * math.pi ** 2) ** (2.0 / 3.0)
_SCALING_TOLERANCE = 1e-10
_LIMIT_TOLERANCE = 1e-12
_DERIVATIVE_TOLERANCE = 1e-6
_SLATER = 0.75 * (3.0 / math.pi) ** (1.0 / 3.0)


def meta_grid_point(n: Array, zeta: Array, s: Array, alpha: Array) -> tuple[Array, ...]:
    """The 7 meta-GGA arguments of densities ``n`` with polarisation ``zeta``, reduced
    gradient ``s`` and iso-orbital indicator ``alpha`` (arrays of one shape)."""
    up, down = 0.5 * n * (1.0 + zeta), 0.5 * n * (1.0 - zeta)
    sigma = s * s * 4.0 * _KF2 * n ** (8.0 / 3.0)
    tau_unif_spin = 0.3 * (6.0 * math.pi ** 2) ** (2.0 / 3.0)
    out = [up, down]
    for a, b in ((up, up), (up, down), (down, down)):
        out.append(a * b / (n * n) * sigma)
    for m in (up, down):
        tau_w = np.divide(m * sigma, 8.0 * n * n)
        out.append(tau_w + alpha * tau_unif_spin * m ** (5.0 / 3.0))
    return tuple(out)


def pw92_energy_density(n_up: Array, n_down: Array, parameters=None) -> Array:
    """Perdew-Wang 1992 correlation per volume with given (para, ferro, stiffness)
    parameters (default: the LDA module's, as printed in the paper)."""
    para, ferro, stiff = parameters or (PW92_PARAMAGNETIC, PW92_FERROMAGNETIC,
                                        PW92_SPIN_STIFFNESS)
    n = n_up + n_down
    zeta = (n_up - n_down) / n
    rs = wigner_seitz_radius(n)
    root = np.sqrt(rs)
    g0 = _pw92_g(rs, root, para)[0]
    g1 = _pw92_g(rs, root, ferro)[0]
    minus_alpha = _pw92_g(rs, root, stiff)[0]
    f = spin_interpolation(zeta)[0]
    z4 = zeta ** 4
    return n * (g0 - minus_alpha * f * (1.0 - z4) / SPIN_INTERPOLATION_CURVATURE
                + (g1 - g0) * f * z4)


def _grid(alpha_values=META_ALPHA, s_values=META_S, zeta_values=META_ZETA):
    rs, zeta, s, alpha = np.meshgrid(META_RS, zeta_values, s_values, alpha_values,
                                     indexing="ij")
    return rs, zeta, s, alpha, meta_grid_point(density_from_radius(rs), zeta, s, alpha)


def _where(rs, zeta, s, alpha, index) -> str:
    return (f"rs = {rs[index]:.3g} bohr, zeta = {zeta[index]:.2g}, s = {s[index]:.3g}, "
            f"alpha = {alpha[index]:.3g}")


def _na(name: str, why: str, source: str) -> ConditionResult:
    return ConditionResult(name, None, why, source=source)


def _uniform_gas_limit(functional) -> ConditionResult:
    name = "meta-uniform-gas-limit"
    source = ("Sun, Ruzsinszky & Perdew, Phys. Rev. Lett. 115, 036402 (2015); "
              "Furness et al., J. Phys. Chem. Lett. 11, 8208 (2020)")
    rs, zeta, s, alpha, args = _grid(np.array([1.0]), np.array([0.0]),
                                     np.linspace(0.0, 1.0, 11))
    e = functional.evaluate_meta_polarized(*args)[0]
    up, down = args[0], args[1]
    parent = functional.lda_parent
    digits = getattr(functional, "pw92_parameters", None)
    reference = slater_exchange_polarized(up, down)[0] * (up + down)
    if parent == "lda-pw92":
        reference = reference + pw92_energy_density(up, down, digits)
        what = ("Slater + PW92" + (" (the functional's PW92 digits, a = "
                                   f"{digits[0].a:g})" if digits else ""))
    elif parent == "slater-exchange":
        what = "Slater exchange"
    else:
        return _na(name, f"the local parent {parent!r} is not Slater (+ PW92)", source)
    error = np.abs(e - reference) / np.abs(reference)
    worst = int(np.argmax(error))
    index = np.unravel_index(worst, error.shape)
    value = float(error[index])
    return ConditionResult(
        name, bool(value <= _LIMIT_TOLERANCE),
        f"at s = 0 and alpha = 1 the energy must equal {what}: largest relative difference "
        f"{value:.1e} at {_where(rs, zeta, s, alpha, index)} (tolerance "
        f"{_LIMIT_TOLERANCE:.0e})", value, _LIMIT_TOLERANCE, source)


def _negative(part, name: str, label: str, strict: bool) -> ConditionResult:
    source = "exact property of exchange and correlation energies [C]"
    if part is None:
        return _na(name, f"the functional has no {label} part", source)
    rs, zeta, s, alpha, args = _grid()
    e = part.evaluate_meta_polarized(*args)[0]
    scale = _SLATER * (args[0] + args[1]) ** (4.0 / 3.0)
    ratio = e / scale
    index = np.unravel_index(int(np.argmax(ratio)), ratio.shape)
    value = float(ratio[index])
    passed = value < 0.0 if strict else value <= 1e-14
    relation = "< 0" if strict else "<= 0"
    return ConditionResult(
        name, bool(passed),
        f"{label} energy per volume {relation} on rs 0.05..50, zeta 0..1, s 0..8, alpha "
        f"0..10: largest e / (C_x n^(4/3)) is {value:.3g} at "
        f"{_where(rs, zeta, s, alpha, index)}", value, 0.0, source)


def _lieb_oxford(functional) -> ConditionResult:
    name = "meta-lieb-oxford-bound"
    source = "Lieb & Oxford, Int. J. Quantum Chem. 19, 427 (1981), locally"
    rs, zeta, s, alpha, args = _grid()
    e = functional.evaluate_meta_polarized(*args)[0]
    ratio = -e / (LIEB_OXFORD_LAMBDA * (args[0] + args[1]) ** (4.0 / 3.0))
    index = np.unravel_index(int(np.argmax(ratio)), ratio.shape)
    value = float(ratio[index])
    return ConditionResult(
        name, bool(value <= 1.0),
        f"e_xc >= -{LIEB_OXFORD_LAMBDA} n^(4/3) at every point: largest e_xc / "
        f"(-{LIEB_OXFORD_LAMBDA} n^(4/3)) is {value:.4f} at "
        f"{_where(rs, zeta, s, alpha, index)} (must be <= 1)", value, 1.0, source)


def _exchange_uniform_scaling(exchange) -> ConditionResult:
    name = "meta-exchange-uniform-scaling"
    source = "uniform coordinate scaling of exchange [C]"
    if exchange is None:
        return _na(name, "the functional has no exchange part", source)
    rs, zeta, s, alpha, args = _grid()
    base = exchange.evaluate_meta_polarized(*args)[0]
    worst, index = 0.0, (0, 0, 0, 0)
    for lam in (0.5, 2.0, 10.0):
        powers = (3, 3, 8, 8, 8, 5, 5)
        scaled = exchange.evaluate_meta_polarized(
            *(a * lam ** p for a, p in zip(args, powers)))[0]
        error = np.abs(scaled - lam ** 4 * base) / np.abs(lam ** 4 * base)
        i = np.unravel_index(int(np.argmax(error)), error.shape)
        if error[i] > worst:
            worst, index = float(error[i]), i
    return ConditionResult(
        name, bool(worst <= _SCALING_TOLERANCE),
        f"e_x(l^3 n, l^8 sigma, l^5 tau) = l^4 e_x for l = 0.5, 2, 10: largest relative "
        f"difference {worst:.1e} at {_where(rs, zeta, s, alpha, index)} (tolerance "
        f"{_SCALING_TOLERANCE:.0e})", worst, _SCALING_TOLERANCE, source)


def _exchange_spin_scaling(exchange) -> ConditionResult:
    name = "meta-exchange-spin-scaling"
    source = "Oliver & Perdew, Phys. Rev. A 20, 397 (1979)"
    if exchange is None:
        return _na(name, "the functional has no exchange part", source)
    rs, zeta, s, alpha, args = _grid()
    up, down, s_uu, _, s_dd, t_up, t_dn = args
    e = exchange.evaluate_meta_polarized(*args)[0]
    spin_up = exchange.evaluate_meta(2 * up, 4 * s_uu, 2 * t_up)[0]
    spin_dn = exchange.evaluate_meta(2 * down, 4 * s_dd, 2 * t_dn)[0]
    reference = 0.5 * (spin_up + spin_dn)
    error = np.abs(e - reference) / np.abs(reference)
    index = np.unravel_index(int(np.argmax(error)), error.shape)
    worst = float(error[index])
    return ConditionResult(
        name, bool(worst <= _SCALING_TOLERANCE),
        f"E_x[n_up, n_down] = (E_x[2 n_up] + E_x[2 n_down]) / 2 with sigma x 4, tau x 2: "
        f"largest relative difference {worst:.1e} at {_where(rs, zeta, s, alpha, index)} "
        f"(tolerance {_SCALING_TOLERANCE:.0e})", worst, _SCALING_TOLERANCE, source)


def _single_orbital_correlation(correlation) -> ConditionResult:
    name = "single-orbital-correlation-free"
    source = ("one-electron densities have no correlation energy [C]; a SCAN constraint "
              "(Sun, Ruzsinszky & Perdew 2015)")
    if correlation is None:
        return _na(name, "the functional has no correlation part", source)
    rs, zeta, s, alpha, args = _grid(np.array([0.0]), zeta_values=np.array([1.0]))
    e = correlation.evaluate_meta_polarized(*args)[0]
    ratio = np.abs(e) / (_SLATER * (args[0] + args[1]) ** (4.0 / 3.0))
    index = np.unravel_index(int(np.argmax(ratio)), ratio.shape)
    worst = float(ratio[index])
    return ConditionResult(
        name, bool(worst <= _LIMIT_TOLERANCE),
        f"tau = tau_W (alpha = 0) and zeta = 1: |e_c| / (C_x n^(4/3)) must vanish; largest "
        f"{worst:.1e} at {_where(rs, zeta, s, alpha, index)}", worst, _LIMIT_TOLERANCE,
        source)


def _two_electron_exchange(exchange) -> ConditionResult:
    name = "two-electron-exchange-bound"
    source = "Perdew, Ruzsinszky, Sun & Burke, J. Chem. Phys. 140, 18A533 (2014)"
    if exchange is None:
        return _na(name, "the functional has no exchange part", source)
    rs, zeta, s, alpha, args = _grid(np.array([0.0]), np.linspace(0.0, 10.0, 41),
                                     np.array([0.0]))
    e = exchange.evaluate_meta_polarized(*args)[0]
    enhancement = e / (-_SLATER * (args[0] + args[1]) ** (4.0 / 3.0))
    index = np.unravel_index(int(np.argmax(enhancement)), enhancement.shape)
    worst = float(enhancement[index])
    bound = TWO_ELECTRON_EXCHANGE_BOUND
    return ConditionResult(
        name, bool(worst <= bound + 1e-12),
        f"alpha = 0, zeta = 0 (one doubly occupied orbital): F_x <= {bound} on s 0..10; "
        f"largest F_x is {worst:.6f} at {_where(rs, zeta, s, alpha, index)}", worst, bound,
        source)


def _derivatives(functional) -> ConditionResult:
    name = "meta-derivatives-consistency"
    source = "the potentials are derivatives of the energy [C]"
    rs, zeta, s, alpha, args = _grid(np.array([0.0, 0.5, 1.5, 4.0]),
                                     np.array([0.3, 1.0, 3.0]), np.array([0.0, 0.6]))
    args = [a.ravel() for a in args]
    values = functional.evaluate_meta_polarized(*args)
    labels = ("n_up", "n_down", "sigma_uu", "sigma_ud", "sigma_dd", "tau_up", "tau_down")
    worst, where = 0.0, ""
    for k in range(7):
        h = 1e-4 * np.abs(args[k])
        estimates = []
        for step in (2, 1, -1, -2):
            shifted = list(args)
            shifted[k] = args[k] + step * h
            estimates.append(functional.evaluate_meta_polarized(*shifted)[0])
        numeric = (-estimates[0] + 8 * estimates[1] - 8 * estimates[2] + estimates[3]) / (12 * h)
        scale = np.abs(values[0]) / np.abs(args[k])
        error = np.abs(numeric - values[k + 1]) / (np.abs(values[k + 1]) + 1e-3 * scale)
        i = int(np.argmax(error))
        if error[i] > worst:
            worst, where = float(error[i]), f"de/d{labels[k]} at point {i}"
    return ConditionResult(
        name, bool(worst <= _DERIVATIVE_TOLERANCE),
        f"the kernel's 7 derivatives against fourth-order central differences (step 1e-4 "
        f"relative): largest relative difference {worst:.1e} ({where or 'everywhere'}; "
        f"tolerance {_DERIVATIVE_TOLERANCE:.0e})", worst, _DERIVATIVE_TOLERANCE, source)


def check_meta_conditions(functional, exchange, correlation) -> list[ConditionResult]:
    """The meta-GGA conditions (module notes) for ``functional`` and its parts.

    ``exchange`` / ``correlation`` are the parts (meta functionals) or None when absent.
    A failed condition is a finding, never an exception.
    """
    exchange = exchange if getattr(exchange, "needs_kinetic_density", False) else None
    correlation = (correlation if getattr(correlation, "needs_kinetic_density", False)
                   else None)
    with np.errstate(all="ignore"):
        return [_uniform_gas_limit(functional),
                _negative(exchange, "meta-exchange-negative", "exchange", strict=True),
                _negative(correlation, "meta-correlation-nonpositive", "correlation",
                          strict=False),
                _lieb_oxford(functional), _exchange_uniform_scaling(exchange),
                _exchange_spin_scaling(exchange), _single_orbital_correlation(correlation),
                _two_electron_exchange(exchange), _derivatives(functional)]
