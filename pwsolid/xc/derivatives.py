"""Potentials of local functionals by numerical differentiation (layer 1).

For a functional given only by its energy per electron ``eps(n_up, n_down)``, the
potentials are the partial derivatives of the energy density ``e = n eps``. They
are taken here by fourth-order finite differences with a step relative to the
density, so that the same formula works from rs = 0.01 to rs = 1e4.

Accuracy
--------
With the default relative step ``delta = 1e-3`` the truncation error of the
central formula is about ``delta^4 / 30 ~ 3e-14`` of the derivative for the
power laws and logarithms of the uniform gas, and the rounding error about
``1.5 * 1.1e-16 / delta ~ 2e-13``; in practice the result agrees with analytic
potentials to 1e-11 relative or better. We promise 1e-8 relative, which leaves
room for functionals with sharper structure. At an empty spin channel
(``n_sigma = 0``) one-sided fourth-order formulas with the steps ``h = 1e-6 n`` and
``8 h`` are used. There the spin interpolation and exchange contain
``n_sigma^(4/3)``, whose second derivative is infinite at zero, so a single formula
errs by ``c h^(1/3)`` (5e-3 relative for the usual correlation fits at
``h = 1e-8 n``); the two steps remove that term (Richardson extrapolation) and leave
an error ~ h^(4/3), about 2e-7 relative for those fits.
"""

from __future__ import annotations

from typing import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .lda import DENSITY_FLOOR

__all__ = ["DEFAULT_RELATIVE_STEP", "density_derivative", "spin_derivatives"]

Array = NDArray[np.float64]
EnergyPerElectron = Callable[[Array, Array], ArrayLike]

#: Step of the finite differences relative to the density being varied.
DEFAULT_RELATIVE_STEP: float = 1e-3

# A spin density below this fraction of the total counts as empty (one-sided step).
_EMPTY_FRACTION = 1e-12
# One-sided step at an empty channel, relative to the total density; after the
# extrapolation below the error goes as step^(4/3) (2e-7 relative for PW92 and VWN
# correlation), the rounding as ~20 * 1e-16 / step ~ 2e-9.
_EMPTY_STEP = 1e-6
# Fourth-order stencils: central (-2..2) and forward (0..4), weights over 12 h.
_CENTRAL_OFFSETS = np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
_CENTRAL_WEIGHTS = np.array([1.0, -8.0, 0.0, 8.0, -1.0]) / 12.0
_FORWARD_OFFSETS = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
_FORWARD_WEIGHTS = np.array([-25.0, 48.0, -36.0, 16.0, -3.0]) / 12.0


def _stencil(energy_density: Callable[[Array], Array], x: Array, h: Array,
             empty: Array) -> Array:
    """One pass of the central (or, where ``empty``, forward) fourth-order stencil."""
    derivative = np.zeros_like(x)
    for k in range(5):
        offset = np.where(empty, _FORWARD_OFFSETS[k], _CENTRAL_OFFSETS[k])
        weight = np.where(empty, _FORWARD_WEIGHTS[k], _CENTRAL_WEIGHTS[k])
        if not np.any(weight):
            continue
        values = np.asarray(energy_density(x + offset * h), dtype=np.float64)
        derivative = derivative + weight * values
    return derivative / h


def _derivative(energy_density: Callable[[Array], Array], x: Array, scale: Array,
                relative_step: float) -> Array:
    """d energy_density / dx at x, stepping by relative_step * x (or forward if x ~ 0)."""
    empty = x <= _EMPTY_FRACTION * scale
    h = np.where(empty, _EMPTY_STEP * scale, relative_step * x)
    derivative = _stencil(energy_density, x, h, empty)
    if np.any(empty):
        # At an empty channel the energy density has a term in h^(4/3), which leaves an
        # error c h^(1/3) in the forward stencil; with steps h and 8h that error is c and
        # 2c times h^(1/3), and 2 D(h) - D(8h) removes it (Richardson extrapolation).
        # (The pass runs on the whole array because energy_density is bound to the
        # other spin's full array; the values at the other points are discarded.)
        coarse = _stencil(energy_density, x, np.where(empty, 8.0 * h, h), empty)
        derivative[empty] = 2.0 * derivative[empty] - coarse[empty]
    return derivative


def spin_derivatives(energy_per_electron: EnergyPerElectron, n_up: ArrayLike,
                     n_down: ArrayLike, *,
                     relative_step: float = DEFAULT_RELATIVE_STEP) -> tuple[Array, Array]:
    """Partial derivatives of ``(n_up + n_down) eps(n_up, n_down)``.

    Parameters
    ----------
    energy_per_electron : callable
        ``eps(n_up, n_down) -> array`` in hartree, vectorised, any shape.
    n_up, n_down : array_like, float64, bohr^-3
        Spin densities of the same shape; negative values count as zero.
    relative_step : float
        Step relative to the spin density varied (see the module notes).

    Returns
    -------
    v_up, v_down : ndarray, float64, hartree
        ``d(n eps)/dn_up`` and ``d(n eps)/dn_down``; zero where the total density is
        at or below :data:`pwsolid.xc.DENSITY_FLOOR`.

    Notes
    -----
    Central ``f' = [f(x-2h) - 8 f(x-h) + 8 f(x+h) - f(x+2h)] / (12 h)`` with
    ``h = delta n_sigma``; at an empty channel the one-sided
    ``f' = [-25 f(x) + 48 f(x+h) - 36 f(x+2h) + 16 f(x+3h) - 3 f(x+4h)] / (12 h)``
    with ``h = 1e-6 n`` and ``8 h``, extrapolated to remove the ``h^(1/3)`` error of
    the ``n_sigma^(4/3)`` terms. Ten calls of ``energy_per_electron`` (fifteen when a
    channel is empty).
    """
    up = np.maximum(np.asarray(n_up, dtype=np.float64), 0.0)
    down = np.maximum(np.asarray(n_down, dtype=np.float64), 0.0)
    if up.shape != down.shape:
        raise ValueError(f"n_up and n_down differ in shape: {up.shape} != {down.shape}")
    v_up = np.zeros(up.shape)
    v_down = np.zeros(up.shape)
    mask = (up + down) > DENSITY_FLOOR
    if not mask.any():
        return v_up, v_down
    a, b = up[mask], down[mask]
    total = a + b
    v_up[mask] = _derivative(
        lambda t: (t + b) * np.asarray(energy_per_electron(t, b), dtype=np.float64),
        a, total, relative_step)
    v_down[mask] = _derivative(
        lambda t: (a + t) * np.asarray(energy_per_electron(a, t), dtype=np.float64),
        b, total, relative_step)
    return v_up, v_down


def density_derivative(energy_per_electron: Callable[[Array], ArrayLike], n: ArrayLike, *,
                       relative_step: float = DEFAULT_RELATIVE_STEP) -> Array:
    """``d(n eps(n))/dn`` of a spin-unpolarised energy per electron.

    Parameters
    ----------
    energy_per_electron : callable
        ``eps(n) -> array`` in hartree, vectorised.
    n : array_like, float64, bohr^-3
        Density, any shape.
    relative_step : float
        Step relative to ``n``.

    Returns
    -------
    ndarray, float64, hartree
        The potential, zero at or below the density floor. Central fourth-order
        differences (module notes); four calls of ``energy_per_electron``.
    """
    n = np.asarray(n, dtype=np.float64)
    v = np.zeros(n.shape)
    mask = n > DENSITY_FLOOR
    if mask.any():
        m = n[mask]
        v[mask] = _derivative(
            lambda t: t * np.asarray(energy_per_electron(t), dtype=np.float64),
            m, m, relative_step)
    return v
