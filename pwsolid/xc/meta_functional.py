"""Meta-GGA functionals as registry entries (layer 1).

A :class:`MetaFunctional` is a :class:`pwsolid.xc.registry.Functional` that also
depends on the kinetic-energy density tau. Besides the meta kernels
(:meth:`MetaFunctional.evaluate_meta`, :meth:`MetaFunctional.evaluate_meta_polarized`)
it carries, for code written for local and gradient functionals:

* local kernels = the uniform-gas limit (zero gradient, tau = tau_unif, alpha = 1);
* gradient kernels = the slice alpha = 1 (tau = tau_W + tau_unif per spin), with the
  chain rule through tau folded into the derivatives.

The engine (:mod:`pwsolid.xc_grid`) checks :attr:`MetaFunctional.needs_kinetic_density`
first and uses the meta kernels.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError
from .lda import DENSITY_FLOOR
from .meta_gga import (R2SCAN, SCAN, MetaParameters, meta_correlation,
                       meta_correlation_polarized, meta_exchange, meta_exchange_polarized)
from .registry import Functional

__all__ = ["MetaFunctional", "meta_functional", "combine_meta", "built_in_meta_functionals",
           "spin_uniform_kinetic_density"]

Array = NDArray[np.float64]
_KEY = "exchange_correlation.functional"
_TAU_UNIF_SPIN = 0.3 * (6.0 * math.pi ** 2) ** (2.0 / 3.0)


def spin_uniform_kinetic_density(n_spin: ArrayLike) -> Array:
    """tau_unif of one spin channel: (3/10) (6 pi^2)^(2/3) n_sigma^(5/3)."""
    return _TAU_UNIF_SPIN * np.maximum(np.asarray(n_spin, float), 0.0) ** (5.0 / 3.0)


def _safe_inverse(x: Array) -> Array:
    return np.divide(1.0, x, out=np.zeros_like(x), where=x > DENSITY_FLOOR)


@dataclass(frozen=True)
class MetaFunctional(Functional):
    """A functional of the density, its gradient and the kinetic-energy density.

    ``meta(n, sigma, tau) -> (e, de/dn, de/dsigma, de/dtau)`` and
    ``meta_polarized(n_up, n_down, s_uu, s_ud, s_dd, tau_up, tau_down) -> 8 arrays``
    (see :mod:`pwsolid.xc.meta_gga`); ``e`` is per volume.
    """

    meta: Callable | None = field(default=None, repr=False, compare=False)
    meta_polarized: Callable | None = field(default=None, repr=False, compare=False)
    #: (paramagnetic, ferromagnetic, stiffness) Perdew-Wang 1992 parameters of its
    #: uniform-gas limit when they are not the LDA module's printed digits
    pw92_parameters: tuple | None = field(default=None, repr=False, compare=False)
    #: optional energy-only kernels (same arguments, return ``e`` alone): cheaper where
    #: no potential is needed (the SCF's energy)
    meta_energy: Callable | None = field(default=None, repr=False, compare=False)
    meta_energy_polarized: Callable | None = field(default=None, repr=False, compare=False)

    @property
    def needs_kinetic_density(self) -> bool:
        return self.meta is not None

    def evaluate_meta(self, n: ArrayLike, sigma: ArrayLike,
                      tau: ArrayLike) -> tuple[Array, ...]:
        """``(e, de/dn, de/dsigma, de/dtau)`` of a spin-unpolarised density."""
        n = np.asarray(n, dtype=np.float64)
        return self._checked(self.meta(n, np.asarray(sigma, float), np.asarray(tau, float)),
                             4, n.shape)

    def evaluate_meta_energy(self, *arrays: ArrayLike) -> Array:
        """The energy per volume alone, of 3 (unpolarised) or 7 (polarised) arrays."""
        fast = self.meta_energy if len(arrays) == 3 else self.meta_energy_polarized
        if fast is None:
            full = (self.evaluate_meta if len(arrays) == 3 else self.evaluate_meta_polarized)
            return full(*arrays)[0]
        arrays = [np.asarray(a, float) for a in arrays]
        return self._checked((fast(*arrays),), 1, arrays[0].shape)[0]

    def evaluate_meta_polarized(self, n_up: ArrayLike, n_down: ArrayLike, sigma_uu: ArrayLike,
                                sigma_ud: ArrayLike, sigma_dd: ArrayLike, tau_up: ArrayLike,
                                tau_down: ArrayLike) -> tuple[Array, ...]:
        """The 8 arrays of a spin-polarised density (see :mod:`pwsolid.xc.meta_gga`)."""
        if self.meta_polarized is None:
            raise InputError(f"functional '{self.name}' has no spin-polarised form",
                             key=_KEY, value=self.name)
        up = np.asarray(n_up, dtype=np.float64)
        arrays = [np.asarray(a, float) for a in (n_down, sigma_uu, sigma_ud, sigma_dd, tau_up,
                                                 tau_down)]
        return self._checked(self.meta_polarized(up, *arrays), 8, up.shape)


def _slices(meta: Callable, meta_polarized: Callable | None):
    """Local (uniform-gas) and gradient (alpha = 1) kernels of a meta-GGA."""
    def gradient(n, sigma):
        n = np.maximum(n, 0.0)
        inv = _safe_inverse(n)
        tau_unif = 2.0 * spin_uniform_kinetic_density(0.5 * n)
        e, dn, ds, dt = meta(n, sigma, 0.125 * sigma * inv + tau_unif)
        return (e, dn + dt * (-0.125 * sigma * inv * inv + 5.0 / 3.0 * tau_unif * inv),
                ds + 0.125 * dt * inv)

    def unpolarized(n):
        n = np.asarray(n, float)
        e, dn, _ = gradient(n, np.zeros_like(n))
        return e * _safe_inverse(n), dn

    gradient_polarized = polarized = None
    if meta_polarized is not None:
        def gradient_polarized(up, down, s_uu, s_ud, s_dd):
            up, down = np.maximum(up, 0.0), np.maximum(down, 0.0)
            i_up, i_dn = _safe_inverse(up), _safe_inverse(down)
            u_up, u_dn = spin_uniform_kinetic_density(up), spin_uniform_kinetic_density(down)
            e, d_up, d_dn, d_uu, d_ud, d_dd, t_up, t_dn = meta_polarized(
                up, down, s_uu, s_ud, s_dd, 0.125 * s_uu * i_up + u_up,
                0.125 * s_dd * i_dn + u_dn)
            return (e, d_up + t_up * (-0.125 * s_uu * i_up ** 2 + 5.0 / 3.0 * u_up * i_up),
                    d_dn + t_dn * (-0.125 * s_dd * i_dn ** 2 + 5.0 / 3.0 * u_dn * i_dn),
                    d_uu + 0.125 * t_up * i_up, d_ud, d_dd + 0.125 * t_dn * i_dn)

        def polarized(up, down):
            up, down = np.asarray(up, float), np.asarray(down, float)
            zero = np.zeros_like(up)
            e, d_up, d_dn, *_ = gradient_polarized(up, down, zero, zero, zero)
            return e * _safe_inverse(np.maximum(up, 0) + np.maximum(down, 0)), d_up, d_dn

    return unpolarized, polarized, gradient, gradient_polarized


def meta_functional(name: str, description: str, meta: Callable,
                    meta_polarized: Callable | None = None, *, exchange=None,
                    correlation=None, origin: str = "built-in",
                    lda_parent: str | None = None,
                    pw92_parameters: tuple | None = None,
                    energies: tuple = (None, None)) -> MetaFunctional:
    """A :class:`MetaFunctional` from its meta kernels (slices made here); ``energies``
    are optional energy-only kernels (unpolarised, polarised)."""
    unpolarized, polarized, gradient, gradient_polarized = _slices(meta, meta_polarized)
    return MetaFunctional(name, description, unpolarized, polarized, exchange=exchange,
                          correlation=correlation, origin=origin, gradient=gradient,
                          gradient_polarized=gradient_polarized, lda_parent=lda_parent,
                          meta=meta, meta_polarized=meta_polarized,
                          pw92_parameters=pw92_parameters, meta_energy=energies[0],
                          meta_energy_polarized=energies[1])


def combine_meta(name: str, description: str, exchange: MetaFunctional,
                 correlation: MetaFunctional, *, origin: str = "built-in",
                 lda_parent: str | None = None) -> MetaFunctional:
    """The sum of a meta-GGA exchange and correlation, keeping both as parts."""
    def meta(*arrays):
        return tuple(a + b for a, b in zip(exchange.evaluate_meta(*arrays),
                                           correlation.evaluate_meta(*arrays)))

    meta_polarized = None
    if exchange.meta_polarized is not None and correlation.meta_polarized is not None:
        def meta_polarized(*arrays):
            return tuple(a + b for a, b in zip(exchange.evaluate_meta_polarized(*arrays),
                                               correlation.evaluate_meta_polarized(*arrays)))

    def energy(*arrays):
        return exchange.evaluate_meta_energy(*arrays) + correlation.evaluate_meta_energy(*arrays)

    return meta_functional(name, description, meta, meta_polarized, exchange=exchange,
                           correlation=correlation, origin=origin, lda_parent=lda_parent,
                           pw92_parameters=getattr(correlation, "pw92_parameters", None),
                           energies=(energy, energy))


def _parts(parameters: MetaParameters, label: str) -> tuple[MetaFunctional, MetaFunctional]:
    def bind(kernel):
        return lambda *arrays: kernel(*arrays, parameters)

    def bind_energy(kernel):
        return lambda *arrays: kernel(*arrays, parameters, derivatives=False)[0]

    exchange = meta_functional(f"{parameters.name}-exchange", f"{label} exchange",
                               bind(meta_exchange), bind(meta_exchange_polarized),
                               lda_parent="slater-exchange",
                               energies=(bind_energy(meta_exchange),
                                         bind_energy(meta_exchange_polarized)))
    correlation = meta_functional(f"{parameters.name}-correlation", f"{label} correlation",
                                  bind(meta_correlation), bind(meta_correlation_polarized),
                                  lda_parent="lda-pw92", pw92_parameters=parameters.pw92,
                                  energies=(bind_energy(meta_correlation),
                                            bind_energy(meta_correlation_polarized)))
    return exchange, correlation


def built_in_meta_functionals() -> dict[str, MetaFunctional]:
    """Registry rows: ``scan``, ``r2scan`` and their exchange-only forms."""
    rows = {}
    for parameters, label in ((SCAN, "SCAN (Sun, Ruzsinszky, Perdew 2015)"),
                              (R2SCAN, "r2SCAN (Furness et al. 2020)")):
        exchange, correlation = _parts(parameters, label)
        name = parameters.name
        rows[name] = combine_meta(name, f"meta-GGA: {label} exchange and correlation",
                                  exchange, correlation, lda_parent="lda-pw92")
        rows[f"{name}-exchange"] = meta_functional(
            f"{name}-exchange", f"{label} exchange only, no correlation",
            exchange.meta, exchange.meta_polarized, exchange=exchange,
            lda_parent="slater-exchange",
            energies=(exchange.meta_energy, exchange.meta_energy_polarized))
    return rows
