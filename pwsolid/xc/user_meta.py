"""Meta-GGA functionals written by users in Python files (layer 1).

A meta-GGA file is a functional file (:mod:`pwsolid.xc.user`) that defines, at its
top level:

``meta_energy_per_electron(n_up, n_down, sigma_uu, sigma_ud, sigma_dd, tau_up, tau_down)``
    (required) The energy per electron in hartree, vectorised over float64 arrays
    of one shape: spin densities (bohr^-3), gradient invariants ``sigma_uu =
    |grad n_up|^2``, ``sigma_ud = grad n_up . grad n_down``, ``sigma_dd`` (bohr^-8)
    and spin kinetic-energy densities ``tau_s = 1/2 sum_i |grad psi_i,s|^2``
    (Ha bohr^-3, the Libxc convention).
``meta_derivatives(...)`` (optional, same arguments)
    The 7 derivatives of the energy per volume ``e = (n_up + n_down) eps`` by each
    argument, in that order. Without it they are taken by fourth-order central
    differences of ``e`` (forward differences where a sigma or tau would turn
    negative), about 1e-8 relative.
``ENERGY_TERM`` (optional) ``"exchange-correlation"`` (default), ``"exchange"`` or
    ``"correlation"``; a correlation is completed with the exchange named by
    ``EXCHANGE`` (default ``"r2scan-exchange"``) and both are kept as parts.
``NAME``, ``DESCRIPTION`` (optional strings).

Points whose total density is at or below :data:`pwsolid.xc.DENSITY_FLOOR` are never
passed to the file's functions. Loading a file executes its code: load only files
you trust.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Callable

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .lda import DENSITY_FLOOR, density_from_radius
from .meta_functional import MetaFunctional, combine_meta, meta_functional

__all__ = ["META_ENERGY_TERMS", "meta_from_module"]

Array = NDArray[np.float64]

#: Accepted values of a meta-GGA file's ``ENERGY_TERM``.
META_ENERGY_TERMS: tuple[str, ...] = ("exchange-correlation", "correlation", "exchange")
_STEP = 1e-4
_KF2 = (3.0 * math.pi ** 2) ** (2.0 / 3.0)


def _fail(path: Path, message: str) -> InputError:
    return InputError(message, source=str(path))


class _MetaKernels:
    """The file's functions as registry meta kernels (8 arrays, polarised)."""

    def __init__(self, path: Path, energy: Callable, derivatives: Callable | None):
        self.path, self.energy, self.derivatives = path, energy, derivatives

    def _call(self, function: Callable, args, count: int) -> tuple[Array, ...]:
        try:
            result = function(*args)
        except Exception as exc:  # noqa: BLE001 - user code
            raise _fail(self.path, f"{function.__name__} raised {type(exc).__name__}: "
                                   f"{exc}") from exc
        items = (result,) if count == 1 else result
        try:
            arrays = tuple(np.asarray(a, dtype=np.float64) for a in items)
        except (TypeError, ValueError):
            arrays = ()
        shape = args[0].shape
        if len(arrays) != count or any(a.shape != shape for a in arrays):
            raise _fail(self.path, f"{function.__name__} must return {count} array(s) of "
                                   f"the density's shape {shape}")
        return arrays

    def energy_density(self, args) -> Array:
        return (args[0] + args[1]) * self._call(self.energy, args, 1)[0]

    def _numerical(self, args) -> list[Array]:
        up, down = args[0], args[1]
        n = up + down
        # steps relative to each argument, floored where it is (nearly) zero
        sigma_unit = 4 * _KF2 * n ** (8 / 3)
        tau_unit = 0.3 * _KF2 * n ** (5 / 3)
        scales = [1e-6 * n, 1e-6 * n, 1e-3 * sigma_unit, 1e-3 * sigma_unit,
                  1e-3 * sigma_unit, 1e-3 * tau_unit, 1e-3 * tau_unit]
        out = []
        for k in range(7):
            h = _STEP * np.maximum(np.abs(args[k]), scales[k])
            forward = (args[k] - 2 * h < 0) if k in (0, 1, 2, 4, 5, 6) else np.zeros(
                up.shape, bool)

            def at(step):
                shifted = list(args)
                shifted[k] = args[k] + step * h
                return self.energy_density(shifted)

            central = (-at(2) + 8 * at(1) - 8 * at(-1) + at(-2)) / (12 * h) \
                if not forward.all() else 0.0
            one_sided = ((-25 * at(0) + 48 * at(1) - 36 * at(2) + 16 * at(3) - 3 * at(4))
                         / (12 * h)) if forward.any() else 0.0
            out.append(np.where(forward, one_sided, central))
        return out

    def polarized(self, *args) -> tuple[Array, ...]:
        args = [np.asarray(a, float) for a in args]
        args[0], args[1] = np.maximum(args[0], 0.0), np.maximum(args[1], 0.0)
        mask = args[0] + args[1] > DENSITY_FLOOR
        out = [np.zeros_like(args[0]) for _ in range(8)]
        if not mask.any():
            return tuple(out)
        sub = [a[mask] for a in args]
        with np.errstate(all="ignore"):
            e = self.energy_density(sub)
            derivatives = (self._call(self.derivatives, sub, 7) if self.derivatives
                           else self._numerical(sub))
        for o, v in zip(out, (e, *derivatives)):
            o[mask] = v
        return tuple(out)

    def unpolarized(self, n, sigma, tau) -> tuple[Array, ...]:
        half = 0.5 * np.asarray(n, float)
        quarter = 0.25 * np.asarray(sigma, float)
        t = 0.5 * np.asarray(tau, float)
        e, d_up, d_dn, d_uu, d_ud, d_dd, t_up, t_dn = self.polarized(
            half, half, quarter, quarter, quarter, t, t)
        return e, 0.5 * (d_up + d_dn), 0.25 * (d_uu + d_ud + d_dd), 0.5 * (t_up + t_dn)


def _validate(functional: MetaFunctional, path: Path) -> None:
    """Evaluate on a small (rs, zeta, s, alpha) grid; refuse non-finite values."""
    from .meta_conditions import meta_grid_point

    rs, zeta, s, alpha = np.meshgrid(np.geomspace(0.1, 50.0, 8), [0.0, 0.5, 1.0],
                                     [0.0, 0.5, 2.0], [0.0, 1.0, 3.0], indexing="ij")
    args = meta_grid_point(density_from_radius(rs), zeta, s, alpha)
    values = functional.evaluate_meta_polarized(*args)
    for label, v in zip(("the energy", "de/dn_up", "de/dn_down", "de/dsigma_uu",
                         "de/dsigma_ud", "de/dsigma_dd", "de/dtau_up", "de/dtau_down"), values):
        bad = ~np.isfinite(v)
        if bad.any():
            i = tuple(np.argwhere(bad)[0])
            raise _fail(path, f"{label} is not finite at rs = {rs[i]:.3g} bohr, zeta = "
                              f"{zeta[i]:g}, s = {s[i]:g}, alpha = {alpha[i]:g} (checked on "
                              "rs 0.1..50, zeta 0..1, s 0..2, alpha 0..3)")


def meta_from_module(module: Any, path: Path, name: str | None, reserved) -> MetaFunctional:
    """The :class:`MetaFunctional` of an executed meta-GGA file (see the module notes).

    ``reserved`` holds the built-in names a user functional may not take.
    """
    from .registry import get_functional

    energy = getattr(module, "meta_energy_per_electron")
    if not callable(energy):
        raise _fail(path, "meta_energy_per_electron must be a function")
    derivatives = getattr(module, "meta_derivatives", None)
    if derivatives is not None and not callable(derivatives):
        raise _fail(path, "meta_derivatives must be a function returning 7 arrays")
    texts = {}
    for key in ("ENERGY_TERM", "NAME", "DESCRIPTION", "EXCHANGE"):
        value = getattr(module, key, None)
        if value is not None and not isinstance(value, str):
            raise _fail(path, f"{key} must be a string (got {value!r})")
        texts[key] = value
    term = texts["ENERGY_TERM"] or "exchange-correlation"
    if term not in META_ENERGY_TERMS:
        raise _fail(path, f"ENERGY_TERM must be one of {', '.join(META_ENERGY_TERMS)} "
                          f"(got {term!r})")
    name = (name or texts["NAME"] or path.stem).strip()
    if name.lower() in reserved:
        raise _fail(path, f"the name '{name}' belongs to a built-in functional; set NAME "
                          "in the file (or pass name=...) to one of your own")
    how = "analytic derivatives" if derivatives is not None else "numerical derivatives"
    description = f"{texts['DESCRIPTION'] or f'user meta-GGA from {path.name}'} ({how})"
    origin = f"file:{path}"
    kernels = _MetaKernels(path, energy, derivatives)
    parent = "slater-exchange" if term == "exchange" else "lda-pw92"
    own = meta_functional(name, description, kernels.unpolarized, kernels.polarized,
                          origin=origin, lda_parent=parent)
    if term == "exchange":
        functional = meta_functional(name, description, kernels.unpolarized,
                                     kernels.polarized, exchange=own, origin=origin,
                                     lda_parent=parent)
    elif term == "correlation":
        partner_name = texts["EXCHANGE"] or "r2scan-exchange"
        try:
            partner = get_functional(partner_name)
        except InputError:
            partner = None
        if not getattr(partner, "needs_kinetic_density", False):
            raise _fail(path, f"EXCHANGE must name a meta-GGA exchange such as "
                              f"'r2scan-exchange' or 'scan-exchange' (got {partner_name!r})")
        functional = combine_meta(name, f"{partner.description} + {description}",
                                  partner.exchange or partner, own, origin=origin,
                                  lda_parent="lda-pw92")
    else:
        functional = own
    _validate(functional, path)
    return functional
