"""Exchange-correlation functionals by name (layer 1).

A :class:`Functional` bundles the kernels of :mod:`pwsolid.xc.lda` under a registry
name. :func:`get_functional` turns what a user wrote (a name, a callable, or a
ready :class:`Functional`) into one, and is the only place that knows the names.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError
from .lda import (pw92_correlation, pw92_correlation_polarized, pz81_correlation,
                  pz81_correlation_polarized, slater_exchange, slater_exchange_polarized)

__all__ = [
    "UnpolarizedKernel",
    "PolarizedKernel",
    "Functional",
    "FUNCTIONALS",
    "get_functional",
]

_KEY = "exchange_correlation.functional"
Array = NDArray[np.float64]


class UnpolarizedKernel(Protocol):
    """``f(n) -> (eps_xc, v_xc)``: arrays of the shape of ``n`` (hartree)."""

    def __call__(self, n: Array, /) -> tuple[Array, Array]: ...


class PolarizedKernel(Protocol):
    """``f(n_up, n_down) -> (eps_xc, v_up, v_down)``: arrays of the input shape."""

    def __call__(self, n_up: Array, n_down: Array, /) -> tuple[Array, Array, Array]: ...


@dataclass(frozen=True)
class Functional:
    """A local exchange-correlation functional.

    Parameters
    ----------
    name : str
        Registry name (or the name of a user callable).
    description : str
        One line for logs and result documents.
    unpolarized : UnpolarizedKernel
        ``f(n) -> (eps_xc, v_xc)``.
    polarized : PolarizedKernel or None
        ``f(n_up, n_down) -> (eps_xc, v_up, v_down)``; ``None`` when the functional
        has no spin-polarised form (e.g. a user callable of the density only).
    """

    name: str
    description: str
    unpolarized: UnpolarizedKernel = field(repr=False, compare=False)
    polarized: PolarizedKernel | None = field(default=None, repr=False, compare=False)

    @property
    def has_spin_polarized_form(self) -> bool:
        """Whether :meth:`evaluate_polarized` is available."""
        return self.polarized is not None

    def evaluate(self, n: ArrayLike) -> tuple[Array, Array]:
        """Energy per electron and potential of a spin-unpolarised density.

        Parameters
        ----------
        n : array_like, float64, bohr^-3
            Density, any shape (the engine passes ``(n1, n2, n3)`` grids).

        Returns
        -------
        eps_xc, v_xc : ndarray, float64, hartree
            Same shape as ``n``; the energy density is ``n * eps_xc``.
        """
        n = np.asarray(n, dtype=np.float64)
        return self._checked(self.unpolarized(n), 2, n.shape)

    def evaluate_polarized(self, n_up: ArrayLike,
                           n_down: ArrayLike) -> tuple[Array, Array, Array]:
        """Energy per electron and spin potentials of a spin-polarised density.

        Parameters
        ----------
        n_up, n_down : array_like, float64, bohr^-3
            Spin densities of the same shape.

        Returns
        -------
        eps_xc, v_up, v_down : ndarray, float64, hartree
            Same shape as the inputs.
        """
        if self.polarized is None:
            raise InputError(f"functional '{self.name}' has no spin-polarised form",
                             key=_KEY, value=self.name)
        n_up = np.asarray(n_up, dtype=np.float64)
        n_down = np.asarray(n_down, dtype=np.float64)
        return self._checked(self.polarized(n_up, n_down), 3, n_up.shape)

    def _checked(self, result: Any, count: int, shape: tuple[int, ...]) -> tuple:
        # Built-in kernels always pass; this catches a user callable of the wrong shape.
        try:
            arrays = tuple(np.asarray(a, dtype=np.float64) for a in result)
        except TypeError:
            arrays = ()
        if len(arrays) != count or any(a.shape != shape for a in arrays):
            raise InputError(
                f"functional '{self.name}' must return {count} arrays of the density's "
                f"shape {shape}", key=_KEY, value=self.name)
        return arrays


def _lda_pz81(n: Array) -> tuple[Array, Array]:
    eps_x, v_x = slater_exchange(n)
    eps_c, v_c = pz81_correlation(n)
    return eps_x + eps_c, v_x + v_c


def _lda_pz81_polarized(n_up: Array, n_down: Array) -> tuple[Array, Array, Array]:
    eps_x, vx_up, vx_down = slater_exchange_polarized(n_up, n_down)
    eps_c, vc_up, vc_down = pz81_correlation_polarized(n_up, n_down)
    return eps_x + eps_c, vx_up + vc_up, vx_down + vc_down


def _lda_pw92(n: Array) -> tuple[Array, Array]:
    eps_x, v_x = slater_exchange(n)
    eps_c, v_c = pw92_correlation(n)
    return eps_x + eps_c, v_x + v_c


def _lda_pw92_polarized(n_up: Array, n_down: Array) -> tuple[Array, Array, Array]:
    eps_x, vx_up, vx_down = slater_exchange_polarized(n_up, n_down)
    eps_c, vc_up, vc_down = pw92_correlation_polarized(n_up, n_down)
    return eps_x + eps_c, vx_up + vc_up, vx_down + vc_down


_REGISTRY: dict[str, Functional] = {
    f.name: f for f in (
        Functional("lda-pz81",
                   "LDA: Slater exchange + Perdew-Zunger 1981 correlation",
                   _lda_pz81, _lda_pz81_polarized),
        Functional("lda-pw92",
                   "LDA: Slater exchange + Perdew-Wang 1992 correlation",
                   _lda_pw92, _lda_pw92_polarized),
        Functional("slater-exchange",
                   "Slater exchange only, no correlation",
                   slater_exchange, slater_exchange_polarized),
    )
}

#: Registry names accepted by :func:`get_functional`.
FUNCTIONALS: tuple[str, ...] = tuple(_REGISTRY)


def get_functional(spec: str | UnpolarizedKernel | Functional) -> Functional:
    """Look up a functional by name, or wrap a user callable.

    Parameters
    ----------
    spec : str, callable or Functional
        A name of :data:`FUNCTIONALS` (case and surrounding blanks ignored); a
        callable ``f(n) -> (eps_xc, v_xc)`` in hartree, wrapped without a
        spin-polarised form; or a :class:`Functional`, returned unchanged.

    Returns
    -------
    Functional

    Raises
    ------
    pwsolid.errors.InputError
        For an unknown name (the message lists the valid ones) or a value that is
        neither a name nor a callable.
    """
    if isinstance(spec, Functional):
        return spec
    if isinstance(spec, str):
        found = _REGISTRY.get(spec.strip().lower())
        if found is None:
            raise InputError("unknown exchange-correlation functional; valid names are "
                             + ", ".join(repr(name) for name in FUNCTIONALS),
                             key=_KEY, value=spec)
        return found
    if callable(spec):
        name = getattr(spec, "__name__", None) or type(spec).__name__
        return Functional(str(name), "user-supplied callable f(n) -> (eps_xc, v_xc)", spec)
    raise InputError("expected a functional name (one of "
                     + ", ".join(repr(name) for name in FUNCTIONALS)
                     + ") or a callable f(n) -> (eps_xc, v_xc)", key=_KEY, value=spec,
                     has_value=True)
