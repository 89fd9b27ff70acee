"""Exchange-correlation functionals written by users in Python files (layer 1).

A functional file is a plain Python module that defines, at its top level:

``energy_per_electron(n_up, n_down)`` (required)
    The energy per electron in hartree for spin densities in bohr^-3, vectorised:
    it receives float64 arrays of one shape and returns an array of that shape.
``potentials(n_up, n_down)`` (optional)
    ``(v_up, v_down)``, the derivatives ``d(n eps)/dn_up`` and ``d(n eps)/dn_down``
    in hartree. Without it the potentials are obtained by fourth-order numerical
    differentiation of ``n eps`` (:mod:`pwsolid.xc.derivatives`; about 1e-8
    relative accuracy or better away from an empty spin channel).
``ENERGY_TERM`` (optional string)
    What ``energy_per_electron`` covers: ``"exchange-correlation"`` (the default),
    ``"correlation"`` (Slater exchange is added and the two are kept as parts, so
    that the exchange and correlation checks can be told apart) or ``"exchange"``.
``NAME``, ``DESCRIPTION`` (optional strings)
    The registry name (default: the file's stem) and a line for reports.

Points whose total density is at or below :data:`pwsolid.xc.DENSITY_FLOOR` are
never passed to the file's functions (they get zero energy and potential), and
negative spin densities are passed as zero, as for the built-in kernels.

A file that defines ``meta_energy_per_electron`` instead is a meta-GGA (a function
of the densities, their gradients and the kinetic-energy densities): see
:mod:`pwsolid.xc.user_meta`.

Loading a file executes its code with the rights of the running program: load
only files you trust. Nothing is ever unpickled.
"""

from __future__ import annotations

import importlib.util
import itertools
import sys
from pathlib import Path
from typing import Any, Callable

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .derivatives import density_derivative, spin_derivatives
from .lda import _apply_on_occupied_pair, density_from_radius
from .registry import FUNCTIONALS, SLATER_EXCHANGE, Functional, combine_exchange_correlation

__all__ = ["ENERGY_TERMS", "VALIDATION_RS", "VALIDATION_ZETA", "load_user_functional"]

Array = NDArray[np.float64]

#: Accepted values of a functional file's ``ENERGY_TERM``.
ENERGY_TERMS: tuple[str, ...] = ("exchange-correlation", "correlation", "exchange")

#: Wigner-Seitz radii (bohr) of the grid a file is checked on when it is loaded.
VALIDATION_RS: Array = np.geomspace(0.1, 50.0, 24)
#: Spin polarisations of that grid, both ends (one spin channel empty) included.
VALIDATION_ZETA: Array = np.linspace(-1.0, 1.0, 9)

_counter = itertools.count()


def _fail(path: Path, message: str) -> InputError:
    return InputError(message, source=str(path))


def _execute(path: Path) -> Any:
    """Run the file as a fresh module (not left in sys.modules) and return it."""
    name = f"_pwsolid_user_functional_{next(_counter)}"
    spec = importlib.util.spec_from_file_location(name, path)
    if spec is None or spec.loader is None:
        raise _fail(path, "cannot be read as a Python module")
    module = importlib.util.module_from_spec(spec)
    # Registered while it runs so that dataclasses and the like defined in it work.
    sys.modules[name] = module
    try:
        spec.loader.exec_module(module)
    except Exception as exc:  # noqa: BLE001 - any failure of user code is an input error
        raise _fail(path, f"running the functional file failed: "
                          f"{type(exc).__name__}: {exc}") from exc
    finally:
        sys.modules.pop(name, None)
    return module


def _optional_text(module: Any, attribute: str, path: Path) -> str | None:
    value = getattr(module, attribute, None)
    if value is not None and not isinstance(value, str):
        raise _fail(path, f"{attribute} must be a string (got {value!r})")
    return value


def _as_arrays(result: Any, count: int, shape: tuple[int, ...], what: str,
               path: Path) -> tuple[Array, ...]:
    """``count`` float64 arrays of ``shape`` from a user function's result."""
    items = (result,) if count == 1 else result
    try:
        arrays = tuple(np.asarray(item, dtype=np.float64) for item in items)
    except (TypeError, ValueError):
        arrays = ()
    if len(arrays) != count or any(a.shape != shape for a in arrays):
        got = ", ".join(str(np.shape(a)) for a in arrays) if arrays else type(result).__name__
        plural = "an array" if count == 1 else f"{count} arrays"
        raise _fail(path, f"{what} must return {plural} of the density's shape {shape} "
                          f"(got {got})")
    return arrays


class _UserKernels:
    """The file's functions wrapped into the kernel shapes of the registry."""

    def __init__(self, path: Path, energy: Callable, potentials: Callable | None):
        self.path = path
        self.energy = energy
        self.potentials = potentials

    def _call(self, function: Callable, *args: Array) -> Any:
        try:
            return function(*args)
        except InputError:
            raise
        except Exception as exc:  # noqa: BLE001 - user code
            raise _fail(self.path, f"{function.__name__} raised "
                                   f"{type(exc).__name__}: {exc}") from exc

    def eps(self, up: Array, down: Array) -> Array:
        return _as_arrays(self._call(self.energy, up, down), 1, up.shape,
                          "energy_per_electron", self.path)[0]

    def _polarized_kernel(self, up: Array, down: Array) -> tuple[Array, Array, Array]:
        eps = self.eps(up, down)
        if self.potentials is not None:
            v_up, v_down = _as_arrays(self._call(self.potentials, up, down), 2, up.shape,
                                      "potentials", self.path)
        else:
            v_up, v_down = spin_derivatives(self.eps, up, down)
        return eps, v_up, v_down

    def polarized(self, n_up: Array, n_down: Array) -> tuple[Array, Array, Array]:
        return _apply_on_occupied_pair(self._polarized_kernel, n_up, n_down, 3)

    def unpolarized(self, n: Array) -> tuple[Array, Array]:
        n = np.asarray(n, dtype=np.float64)
        half = 0.5 * n
        if self.potentials is not None:
            eps, v_up, v_down = self.polarized(half, half)
            return eps, 0.5 * (v_up + v_down)
        # Along n_up = n_down = n/2, d(n eps)/dn = (v_up + v_down)/2: one derivative.
        eps = _apply_on_occupied_pair(lambda a, b: (self.eps(a, b),), half, half, 1)[0]
        clipped = np.maximum(n, 0.0)
        v = density_derivative(lambda m: self.eps(0.5 * m, 0.5 * m), clipped)
        return eps, v


def _first_bad_point(bad: Array, rs: Array, zeta: Array) -> str:
    i, j = np.argwhere(bad)[0]
    return f"rs = {rs[i, j]:.4g} bohr, zeta = {zeta[i, j]:+.2f}"


def _validate(functional: Functional, kernels: _UserKernels, term: str, path: Path) -> None:
    """Run the file's functions on the validation grid and refuse what is unusable."""
    rs, zeta = np.meshgrid(VALIDATION_RS, VALIDATION_ZETA, indexing="ij")
    n = density_from_radius(rs)
    up = 0.5 * n * (1.0 + zeta)
    down = 0.5 * n * (1.0 - zeta)
    with np.errstate(all="ignore"):      # non-finite values are reported below instead
        eps = kernels.eps(up, down)      # the raw function, shape checked
        if kernels.potentials is not None:
            _as_arrays(kernels._call(kernels.potentials, up, down), 2, up.shape,
                       "potentials", path)
        eps_total, v_up, v_down = functional.evaluate_polarized(up, down)
        eps_unpolarized, v = functional.evaluate(n[:, 0])
    for label, values in (("energy_per_electron", eps),
                          ("the up-spin potential", v_up),
                          ("the down-spin potential", v_down)):
        bad = ~np.isfinite(values)
        if bad.any():
            raise _fail(path, f"{label} is not finite at {_first_bad_point(bad, rs, zeta)} "
                              "(checked on rs 0.1..50 bohr, zeta -1..1)")
    if not (np.all(np.isfinite(eps_unpolarized)) and np.all(np.isfinite(v))):
        raise _fail(path, "the spin-unpolarised energy or potential is not finite")
    positive = eps_total > 0.0
    if positive.any():
        what = {"exchange-correlation": "exchange-correlation energy",
                "correlation": "exchange-correlation energy (Slater exchange + this "
                               "correlation)",
                "exchange": "exchange energy"}[term]
        worst = float(np.max(eps_total))
        raise _fail(path, f"the {what} per electron is positive ({worst:.3g} Ha) at "
                          f"{_first_bad_point(positive, rs, zeta)}; it must be negative "
                          "for every density of the uniform gas")


def load_user_functional(path: str | Path, name: str | None = None) -> Functional:
    """Load an exchange-correlation functional from a Python file.

    **This executes the file's code** (with the rights of the running program):
    load only files you trust. The file format is described in the module notes.

    Parameters
    ----------
    path : str or Path
        The ``.py`` file. A relative path is taken from the working directory.
    name : str, optional
        Name of the functional; default the file's ``NAME`` or else its stem.

    Returns
    -------
    Functional
        With a spin-polarised form, ``origin = "file:<absolute path>"``, and
        exchange and correlation parts when ``ENERGY_TERM`` is ``"correlation"``
        (Slater exchange added) or ``"exchange"``. It is not registered: pass it to
        :func:`pwsolid.xc.register_functional` to use it by name.

    Raises
    ------
    pwsolid.errors.InputError
        Naming the file, when it is missing, does not run, lacks
        ``energy_per_electron``, or when on the validation grid
        (:data:`VALIDATION_RS` x :data:`VALIDATION_ZETA`) a function returns
        arrays of the wrong shape or non-finite values, or the (total)
        exchange-correlation energy per electron is positive somewhere.
    """
    path = Path(path).expanduser()
    if not path.is_file():
        raise _fail(path, "functional file not found")
    if path.suffix != ".py":
        raise _fail(path, "a functional file must be a Python file ending in .py")
    path = path.resolve()
    module = _execute(path)
    if hasattr(module, "meta_energy_per_electron"):      # a meta-GGA file
        from .user_meta import meta_from_module

        return meta_from_module(module, path, name, FUNCTIONALS)
    energy = getattr(module, "energy_per_electron", None)
    if not callable(energy):
        raise _fail(path, "the file defines no function energy_per_electron(n_up, n_down)")
    potentials = getattr(module, "potentials", None)
    if potentials is not None and not callable(potentials):
        raise _fail(path, "potentials must be a function potentials(n_up, n_down) -> "
                          "(v_up, v_down)")
    term = _optional_text(module, "ENERGY_TERM", path) or "exchange-correlation"
    if term not in ENERGY_TERMS:
        raise _fail(path, f"ENERGY_TERM must be one of {', '.join(ENERGY_TERMS)} "
                          f"(got {term!r})")
    name = (name or _optional_text(module, "NAME", path) or path.stem).strip()
    if name.lower() in FUNCTIONALS:
        raise _fail(path, f"the name '{name}' belongs to a built-in functional; set NAME "
                          "in the file (or pass name=...) to one of your own")
    description = (_optional_text(module, "DESCRIPTION", path)
                   or f"user functional from {path.name}")
    origin = f"file:{path}"
    how = "analytic potentials" if potentials is not None else "numerical potentials"
    kernels = _UserKernels(path, energy, potentials)
    own = Functional(name, f"{description} ({how})", kernels.unpolarized, kernels.polarized,
                     origin=origin)
    if term == "correlation":
        part = Functional(f"{name}-correlation", own.description, kernels.unpolarized,
                          kernels.polarized, origin=origin)
        functional = combine_exchange_correlation(
            name, f"Slater exchange + {own.description}", SLATER_EXCHANGE, part,
            origin=origin)
    elif term == "exchange":
        functional = Functional(name, own.description, kernels.unpolarized,
                                kernels.polarized, exchange=own, origin=origin)
    else:
        functional = own
    _validate(functional, kernels, term, path)
    return functional
