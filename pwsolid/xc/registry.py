"""Exchange-correlation functionals by name (layer 1).

A :class:`Functional` bundles the kernels of :mod:`pwsolid.xc.lda`,
:mod:`pwsolid.xc.extra_lda` and :mod:`pwsolid.xc.gga` under a registry name. A
gradient-dependent functional carries gradient kernels (energy per volume and its
derivatives in the density and the gradient invariants) besides its local kernels,
which give its uniform-gas (zero-gradient) limit. :func:`get_functional` turns
what a user wrote (a name, ``"file:path/to/functional.py"``, a callable, or a ready
:class:`Functional`) into one, and is the only place that knows the names.
Functionals loaded from files (:mod:`pwsolid.xc.user`) or built in Python can be
added under a name of their own with :func:`register_functional`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError
from .extra_lda import (hedin_lundqvist_correlation, hedin_lundqvist_correlation_polarized,
                        von_barth_hedin_correlation, von_barth_hedin_correlation_polarized,
                        vwn_correlation, vwn_correlation_polarized, wigner_correlation,
                        wigner_correlation_polarized)
from .gga import (pbe_correlation, pbe_correlation_polarized, pbe_exchange,
                  pbe_exchange_polarized)
from .pw92_precise import pw92_precise_correlation, pw92_precise_correlation_polarized
from .lda import (DENSITY_FLOOR, pw92_correlation, pw92_correlation_polarized, pz81_correlation,
                  pz81_correlation_polarized, slater_exchange, slater_exchange_polarized)

__all__ = [
    "UnpolarizedKernel",
    "PolarizedKernel",
    "GradientKernel",
    "PolarizedGradientKernel",
    "Functional",
    "FUNCTIONALS",
    "FILE_PREFIX",
    "SLATER_EXCHANGE",
    "PBE_EXCHANGE",
    "PBE_CORRELATION",
    "combine_exchange_correlation",
    "gradient_functional",
    "get_functional",
    "register_functional",
    "unregister_functional",
    "available_functionals",
]

_KEY = "exchange_correlation.functional"
Array = NDArray[np.float64]


class UnpolarizedKernel(Protocol):
    """``f(n) -> (eps_xc, v_xc)``: arrays of the shape of ``n`` (hartree)."""

    def __call__(self, n: Array, /) -> tuple[Array, Array]: ...


class PolarizedKernel(Protocol):
    """``f(n_up, n_down) -> (eps_xc, v_up, v_down)``: arrays of the input shape."""

    def __call__(self, n_up: Array, n_down: Array, /) -> tuple[Array, Array, Array]: ...


class GradientKernel(Protocol):
    """``f(n, sigma) -> (e, de/dn, de/dsigma)``, ``e`` per volume, ``sigma = |grad n|^2``."""

    def __call__(self, n: Array, sigma: Array, /) -> tuple[Array, Array, Array]: ...


class PolarizedGradientKernel(Protocol):
    """``f(n_up, n_down, sigma_uu, sigma_ud, sigma_dd) -> (e, de/dn_up, de/dn_down,
    de/dsigma_uu, de/dsigma_ud, de/dsigma_dd)`` (see :mod:`pwsolid.xc.gga`)."""

    def __call__(self, n_up: Array, n_down: Array, sigma_uu: Array, sigma_ud: Array,
                 sigma_dd: Array, /) -> tuple[Array, ...]: ...


@dataclass(frozen=True)
class Functional:
    """An exchange-correlation functional: local, or of the density and its gradient.

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
    exchange, correlation : Functional or None
        The exchange and correlation parts, when the functional is their sum and
        exposes them (all built-in ones do). Both ``None``: the split is unknown,
        and the exact-condition checks take the exchange to be Slater's. Only one
        given: the other part is absent (e.g. ``slater-exchange`` has no
        correlation).
    origin : str
        Where it came from: ``"built-in"``, ``"file:<path>"``, ``"callable"`` or
        ``"libxc <version>"``.
    gradient, gradient_polarized : GradientKernel, PolarizedGradientKernel or None
        Given for a functional that depends on the density gradient
        (:attr:`needs_gradients`); its ``unpolarized``/``polarized`` kernels are then
        its zero-gradient (uniform-gas) limit.
    lda_parent : str or None
        Registry name of the local functional a gradient functional reduces to at
        zero gradient.
    """

    name: str
    description: str
    unpolarized: UnpolarizedKernel = field(repr=False, compare=False)
    polarized: PolarizedKernel | None = field(default=None, repr=False, compare=False)
    exchange: Functional | None = field(default=None, repr=False, compare=False)
    correlation: Functional | None = field(default=None, repr=False, compare=False)
    origin: str = field(default="built-in", compare=False)
    gradient: GradientKernel | None = field(default=None, repr=False, compare=False)
    gradient_polarized: PolarizedGradientKernel | None = field(default=None, repr=False,
                                                               compare=False)
    lda_parent: str | None = field(default=None, compare=False)

    @property
    def needs_gradients(self) -> bool:
        """Whether the functional depends on the density gradient."""
        return self.gradient is not None

    @property
    def has_parts(self) -> bool:
        """Whether the exchange/correlation split is known (either part given)."""
        return self.exchange is not None or self.correlation is not None

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

    def evaluate_gradient(self, n: ArrayLike, sigma: ArrayLike) -> tuple[Array, ...]:
        """Energy per volume and its derivatives, spin-unpolarised.

        Parameters
        ----------
        n : array_like, float64, bohr^-3
        sigma : array_like, float64, bohr^-8
            ``|grad n|^2``, shape of ``n``.

        Returns
        -------
        e, de/dn, de/dsigma : ndarray, float64
            For a local functional ``e = n eps_xc``, ``de/dn = v_xc`` and
            ``de/dsigma = 0``.
        """
        n = np.asarray(n, dtype=np.float64)
        if self.gradient is None:
            eps, v = self.evaluate(n)
            return n * eps, v, np.zeros_like(n)
        return self._checked(self.gradient(n, np.asarray(sigma, dtype=np.float64)), 3,
                             n.shape)

    def evaluate_gradient_polarized(self, n_up: ArrayLike, n_down: ArrayLike,
                                    sigma_uu: ArrayLike, sigma_ud: ArrayLike,
                                    sigma_dd: ArrayLike) -> tuple[Array, ...]:
        """Energy per volume and its six derivatives, spin-polarised.

        Returns ``(e, de/dn_up, de/dn_down, de/dsigma_uu, de/dsigma_ud, de/dsigma_dd)``
        (the invariants of :mod:`pwsolid.xc.gga`); a local functional has zero
        gradient derivatives.
        """
        up = np.asarray(n_up, dtype=np.float64)
        down = np.asarray(n_down, dtype=np.float64)
        if self.gradient is None:
            eps, v_up, v_down = self.evaluate_polarized(up, down)
            zero = np.zeros_like(up)
            return (up + down) * eps, v_up, v_down, zero, zero, zero
        if self.gradient_polarized is None:
            raise InputError(f"functional '{self.name}' has no spin-polarised form",
                             key=_KEY, value=self.name)
        sigmas = (np.asarray(s, dtype=np.float64) for s in (sigma_uu, sigma_ud, sigma_dd))
        return self._checked(self.gradient_polarized(up, down, *sigmas), 6, up.shape)

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


def combine_exchange_correlation(name: str, description: str, exchange: Functional,
                                 correlation: Functional, *, origin: str = "built-in",
                                 lda_parent: str | None = None) -> Functional:
    """The sum of an exchange and a correlation functional, keeping both as parts.

    Parameters
    ----------
    name, description : str
        Of the combined functional.
    exchange, correlation : Functional
        The parts; the spin-polarised form exists when both parts have one.
    origin, lda_parent : str
        See :class:`Functional`.

    Returns
    -------
    Functional
        ``eps_xc = eps_x + eps_c`` and ``v_xc = v_x + v_c`` (and per spin); when a
        part needs gradients, so does the sum, with the gradient kernels added.
    """
    def unpolarized(n: Array) -> tuple[Array, Array]:
        eps_x, v_x = exchange.evaluate(n)
        eps_c, v_c = correlation.evaluate(n)
        return eps_x + eps_c, v_x + v_c

    polarized = None
    if exchange.has_spin_polarized_form and correlation.has_spin_polarized_form:
        def polarized(n_up: Array, n_down: Array) -> tuple[Array, Array, Array]:
            eps_x, vx_up, vx_down = exchange.evaluate_polarized(n_up, n_down)
            eps_c, vc_up, vc_down = correlation.evaluate_polarized(n_up, n_down)
            return eps_x + eps_c, vx_up + vc_up, vx_down + vc_down

    gradient = gradient_polarized = None
    if exchange.needs_gradients or correlation.needs_gradients:
        def gradient(n: Array, sigma: Array) -> tuple[Array, ...]:
            return _sum(exchange.evaluate_gradient(n, sigma),
                        correlation.evaluate_gradient(n, sigma))

        if polarized is not None:
            def gradient_polarized(*arrays: Array) -> tuple[Array, ...]:
                return _sum(exchange.evaluate_gradient_polarized(*arrays),
                            correlation.evaluate_gradient_polarized(*arrays))

    return Functional(name, description, unpolarized, polarized, exchange=exchange,
                      correlation=correlation, origin=origin, gradient=gradient,
                      gradient_polarized=gradient_polarized, lda_parent=lda_parent)


def _sum(first: tuple[Array, ...], second: tuple[Array, ...]) -> tuple[Array, ...]:
    return tuple(a + b for a, b in zip(first, second))


def _per_electron(n: Array, e: Array) -> Array:
    """``e / n`` where the density is above the floor, 0 elsewhere."""
    occupied = ~(n <= DENSITY_FLOOR)
    return np.divide(e, n, out=np.zeros_like(e), where=occupied)


def gradient_functional(name: str, description: str, gradient: GradientKernel,
                        gradient_polarized: PolarizedGradientKernel | None = None, *,
                        lda_parent: str | None = None, exchange: Functional | None = None,
                        origin: str = "built-in") -> Functional:
    """A functional of the density and its gradient from its gradient kernels.

    Its local kernels (``evaluate``, ``evaluate_polarized``) are the gradient kernels
    at zero gradient: the uniform-gas limit, which the testbench tabulates.

    Parameters
    ----------
    name, description, origin : str
        See :class:`Functional`.
    gradient, gradient_polarized : callable
        See :class:`GradientKernel` and :class:`PolarizedGradientKernel`.
    lda_parent : str or None
        Registry name of the zero-gradient limit.
    exchange : Functional or None
        The exchange part of a pure exchange functional (see :class:`Functional`).
    """
    def unpolarized(n: Array) -> tuple[Array, Array]:
        e, de_dn, _ = gradient(n, np.zeros_like(n))
        return _per_electron(n, e), de_dn

    polarized = None
    if gradient_polarized is not None:
        def polarized(n_up: Array, n_down: Array) -> tuple[Array, Array, Array]:
            zero = np.zeros_like(n_up)
            e, d_up, d_down, *_ = gradient_polarized(n_up, n_down, zero, zero, zero)
            return _per_electron(np.maximum(n_up, 0.0) + np.maximum(n_down, 0.0), e), \
                d_up, d_down

    return Functional(name, description, unpolarized, polarized, exchange=exchange,
                      origin=origin, gradient=gradient,
                      gradient_polarized=gradient_polarized, lda_parent=lda_parent)


#: Slater (Dirac) exchange as a part of the combined functionals.
SLATER_EXCHANGE = Functional("slater-exchange", "Slater (Dirac) exchange",
                             slater_exchange, slater_exchange_polarized)

_CORRELATIONS = {
    "lda-pz81": Functional(
        "pz81-correlation", "Perdew-Zunger 1981 correlation (fit to Ceperley-Alder)",
        pz81_correlation, pz81_correlation_polarized),
    "lda-pw92": Functional(
        "pw92-correlation", "Perdew-Wang 1992 correlation",
        pw92_correlation, pw92_correlation_polarized),
    "lda-pw92-precise": Functional(
        "pw92-precise-correlation",
        "Perdew-Wang 1992 correlation with the PBE form's more precise A constants",
        pw92_precise_correlation, pw92_precise_correlation_polarized),
    "lda-vwn": Functional(
        "vwn-correlation", "Vosko-Wilk-Nusair 1980 correlation (fit to Ceperley-Alder)",
        vwn_correlation, vwn_correlation_polarized),
    "lda-wigner": Functional(
        "wigner-correlation",
        "Wigner 1934 correlation; spin-polarised form pwsolid's own construction "
        "(taken independent of zeta, no published source)",
        wigner_correlation, wigner_correlation_polarized),
    "lda-hedin-lundqvist": Functional(
        "hedin-lundqvist-correlation",
        "Hedin-Lundqvist 1971 correlation; spin-polarised form pwsolid's own "
        "construction (ferromagnetic branch by spin scaling, no published source)",
        hedin_lundqvist_correlation, hedin_lundqvist_correlation_polarized),
    "lda-von-barth-hedin": Functional(
        "von-barth-hedin-correlation", "von Barth-Hedin 1972 correlation",
        von_barth_hedin_correlation, von_barth_hedin_correlation_polarized),
}

_REGISTRY: dict[str, Functional] = {
    name: combine_exchange_correlation(
        name, f"LDA: Slater exchange + {part.description}",
        SLATER_EXCHANGE, part)
    for name, part in _CORRELATIONS.items()
}
_REGISTRY["slater-exchange"] = Functional(
    "slater-exchange", "Slater exchange only, no correlation", slater_exchange,
    slater_exchange_polarized, exchange=SLATER_EXCHANGE)

#: Perdew-Burke-Ernzerhof 1996 exchange as a part of the PBE functional.
PBE_EXCHANGE = gradient_functional(
    "pbe-exchange", "Perdew-Burke-Ernzerhof 1996 exchange", pbe_exchange,
    pbe_exchange_polarized, lda_parent="slater-exchange")
#: Perdew-Burke-Ernzerhof 1996 correlation (on Perdew-Wang 1992) as a part of PBE.
PBE_CORRELATION = gradient_functional(
    "pbe-correlation",
    "Perdew-Burke-Ernzerhof 1996 correlation on Perdew-Wang 1992 (precise A constants)",
    pbe_correlation, pbe_correlation_polarized, lda_parent="lda-pw92-precise")
_REGISTRY["pbe"] = combine_exchange_correlation(
    "pbe", "GGA: Perdew-Burke-Ernzerhof 1996 exchange and correlation", PBE_EXCHANGE,
    PBE_CORRELATION, lda_parent="lda-pw92-precise")
_REGISTRY["pbe-exchange"] = gradient_functional(
    "pbe-exchange", "Perdew-Burke-Ernzerhof 1996 exchange only, no correlation",
    pbe_exchange, pbe_exchange_polarized, lda_parent="slater-exchange",
    exchange=PBE_EXCHANGE)

# meta-GGAs (SCAN, r2SCAN): their module needs Functional, defined above
from .meta_functional import built_in_meta_functionals  # noqa: E402

_REGISTRY.update(built_in_meta_functionals())

#: Registry names of the built-in functionals accepted by :func:`get_functional`.
FUNCTIONALS: tuple[str, ...] = tuple(_REGISTRY)

#: Prefix of a functional specification naming a Python file, ``"file:/path/x.py"``.
FILE_PREFIX = "file:"
#: Prefix of a functional specification naming Libxc functionals, ``"libxc:gga_x_pbe"``
#: (:mod:`pwsolid.xc.libxc_bridge`).
LIBXC_PREFIX = "libxc:"

# Functionals registered at run time under a name of their own (register_functional).
_USER_REGISTRY: dict[str, Functional] = {}


def _normalized(name: str) -> str:
    return name.strip().lower()


def available_functionals() -> tuple[str, ...]:
    """Built-in names followed by the names registered with :func:`register_functional`."""
    return FUNCTIONALS + tuple(_USER_REGISTRY)


def register_functional(functional: Functional, *, replace: bool = False) -> Functional:
    """Make ``functional`` available to :func:`get_functional` under its name.

    Parameters
    ----------
    functional : Functional
        E.g. from :func:`pwsolid.xc.load_user_functional`. Its name (case and
        surrounding blanks ignored) must not be a built-in name nor start with
        ``"file:"``.
    replace : bool
        Replace an earlier registration of the same name instead of refusing it.

    Returns
    -------
    Functional
        The functional, for chaining.

    Raises
    ------
    pwsolid.errors.InputError
        For a clash with a built-in or (without ``replace``) a registered name.
    """
    if not isinstance(functional, Functional):
        raise InputError("register_functional takes a Functional", key=_KEY,
                         value=functional, has_value=True)
    key = _normalized(functional.name)
    if (not key or key.startswith((FILE_PREFIX, LIBXC_PREFIX))
            or any(c.isspace() for c in key)):
        raise InputError("a functional's name must be non-empty, without blanks and not "
                         f"start with '{FILE_PREFIX}' or '{LIBXC_PREFIX}'", key=_KEY,
                         value=functional.name)
    if key in _REGISTRY:
        raise InputError("this name belongs to a built-in functional; choose another",
                         key=_KEY, value=functional.name)
    if key in _USER_REGISTRY and not replace and _USER_REGISTRY[key] is not functional:
        raise InputError("a functional of this name is already registered; pass "
                         "replace=True to replace it", key=_KEY, value=functional.name)
    _USER_REGISTRY[key] = functional
    return functional


def unregister_functional(name: str) -> None:
    """Remove a functional added with :func:`register_functional` (no error if absent)."""
    _USER_REGISTRY.pop(_normalized(name), None)


def get_functional(spec: str | UnpolarizedKernel | Functional) -> Functional:
    """Look up a functional by name or file, or wrap a user callable.

    Parameters
    ----------
    spec : str, callable or Functional
        A name of :data:`FUNCTIONALS` or one registered with
        :func:`register_functional` (case and surrounding blanks ignored);
        ``"libxc:<name>[+<name>...]"``, functionals of the Libxc C library
        (:func:`pwsolid.xc.libxc_bridge.libxc_functional`, LDA and GGA families);
        ``"file:/path/to/functional.py"``, a Python file loaded with
        :func:`pwsolid.xc.load_user_functional` (this runs the file's code; a
        relative path is taken from the working directory, so callers holding an
        input file resolve it against that file first); a callable
        ``f(n) -> (eps_xc, v_xc)`` in hartree, wrapped without a spin-polarised
        form; or a :class:`Functional`, returned unchanged.

    Returns
    -------
    Functional

    Raises
    ------
    pwsolid.errors.InputError
        For an unknown name (the message lists the valid ones), a file that does
        not load, or a value that is neither a name nor a callable.
    """
    if isinstance(spec, Functional):
        return spec
    if isinstance(spec, str):
        text = spec.strip()
        if text.lower().startswith(FILE_PREFIX):
            from .user import load_user_functional   # user imports this module

            return load_user_functional(text[len(FILE_PREFIX):].strip())
        if text.lower().startswith(LIBXC_PREFIX):
            from .libxc_bridge import libxc_functional   # the bridge imports this module

            return libxc_functional(text)
        key = _normalized(text)
        found = _REGISTRY.get(key) or _USER_REGISTRY.get(key)
        if found is None:
            raise InputError("unknown exchange-correlation functional; valid names are "
                             + ", ".join(repr(name) for name in available_functionals())
                             + f", '{LIBXC_PREFIX}<Libxc name>' or "
                             f"'{FILE_PREFIX}path/to/functional.py'",
                             key=_KEY, value=spec)
        return found
    if callable(spec):
        name = getattr(spec, "__name__", None) or type(spec).__name__
        return Functional(str(name), "user-supplied callable f(n) -> (eps_xc, v_xc)", spec,
                          origin="callable")
    raise InputError("expected a functional name (one of "
                     + ", ".join(repr(name) for name in available_functionals())
                     + ") or a callable f(n) -> (eps_xc, v_xc)", key=_KEY, value=spec,
                     has_value=True)
