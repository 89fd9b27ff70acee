"""Functionals of the Libxc C library by name, through ctypes (layer 1).

``"libxc:<name>"`` or ``"libxc:<name>+<name>..."`` in place of a functional name
evaluates the named Libxc functionals (``lda_x``, ``gga_c_pbe``, ... in Libxc's own
names, case ignored, an ``xc_`` prefix allowed) and adds them. The shared library is
found with :func:`ctypes.util.find_library` (Debian and Ubuntu: ``apt-get install
libxc9``), or taken from the path in the environment variable ``PWSOLID_LIBXC``; it is
loaded the first time a ``libxc:`` name is used, never at import. No Python bindings
are needed.

Accepted are the local (LDA) and gradient (GGA) families of exchange, correlation and
exchange-correlation functionals of three-dimensional systems. Refused, each with one
message saying why:

* meta-GGA functionals: they need the kinetic-energy density (and some the Laplacian),
  which this bridge does not pass;
* hybrid functionals: they need a fraction of exact (Fock) exchange, which pwsolid does
  not compute;
* range-separated (screened) functionals, whose interaction has a range parameter
  omega: they stand for only part of the Coulomb interaction, the rest being exact
  exchange that pwsolid does not compute;
* functionals with non-local (VV10) correlation, a double integral over the cell that
  pwsolid does not compute;
* kinetic-energy functionals: not exchange-correlation;
* functionals made for one- or two-dimensional systems.

The energies and potentials are Libxc's, with pwsolid's conventions around them:
negative spin densities are taken as zero and points whose total density is at or
below :data:`~pwsolid.xc.lda.DENSITY_FLOOR` give zero energy and potential. The Libxc
version (:func:`libxc_version`) goes into every record fingerprint and result document
of a calculation that uses one.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import difflib
import os
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .lda import DENSITY_FLOOR
from .registry import (LIBXC_PREFIX, Functional, combine_exchange_correlation,
                       gradient_functional)

__all__ = [
    "LIBXC_PREFIX",
    "LIBXC_PATH_VARIABLE",
    "LIBXC_INSTALL_HINT",
    "LibxcComponent",
    "libxc_available",
    "libxc_version",
    "libxc_component",
    "libxc_functional",
    "is_libxc_spec",
]

Array = NDArray[np.float64]

#: Environment variable holding the path of the Libxc shared library, when it is not
#: where :func:`ctypes.util.find_library` looks.
LIBXC_PATH_VARIABLE = "PWSOLID_LIBXC"
#: How to install the library (said by every message about a missing one).
LIBXC_INSTALL_HINT = (
    "install the Libxc C library (Debian/Ubuntu: 'sudo apt-get install libxc9'; "
    "conda: 'conda install -c conda-forge libxc') or set "
    f"{LIBXC_PATH_VARIABLE}=/path/to/libxc.so; no Python bindings are needed")

_KEY = "exchange_correlation.functional"

# Libxc's constants (xc.h of the 5.x series).
_UNPOLARIZED, _POLARIZED = 1, 2
_FAMILY_LDA, _FAMILY_GGA, _FAMILY_MGGA = 1, 2, 4
_FAMILY_HYBRID = {32: "hybrid GGA", 64: "hybrid meta-GGA", 128: "hybrid LDA"}
_KINDS = {0: "exchange", 1: "correlation", 2: "exchange-correlation", 3: "kinetic"}
_FLAG_3D = 1 << 7
_FLAGS_RANGE_SEPARATED = (1 << 8) | (1 << 9) | (1 << 11) | (1 << 12)
_FLAG_VV10 = 1 << 10

_REFUSALS = {
    "meta-gga": "is a meta-GGA: it needs the kinetic-energy density, which the Libxc "
                "bridge does not pass (it takes LDA and GGA functionals only)",
    "hybrid": "is a {family} functional: it needs a fraction of exact (Fock) exchange, "
              "which pwsolid does not compute",
    "range": "is range-separated (screened, with a range parameter omega): it covers "
             "only part of the Coulomb interaction, the rest being exact exchange that "
             "pwsolid does not compute",
    "vv10": "has non-local (VV10) correlation, a double integral over the cell that "
            "pwsolid does not compute",
    "kinetic": "is a kinetic-energy functional, not exchange-correlation",
    "dimension": "is made for one- or two-dimensional systems; pwsolid computes "
                 "three-dimensional crystals",
    "family": "belongs to a family the bridge does not take (family number {family}); "
              "it takes LDA and GGA functionals only",
}


class _Library:
    """The loaded shared library with the argument types of the calls we make."""

    def __init__(self, path: str):
        lib = ctypes.CDLL(path)
        p, i, s, d = ctypes.c_void_p, ctypes.c_int, ctypes.c_size_t, ctypes.c_void_p
        lib.xc_version_string.restype = ctypes.c_char_p
        lib.xc_functional_get_number.argtypes = [ctypes.c_char_p]
        lib.xc_functional_get_number.restype = i
        lib.xc_func_alloc.restype = p
        lib.xc_func_init.argtypes = [p, i, i]
        lib.xc_func_init.restype = i
        lib.xc_func_end.argtypes = [p]
        lib.xc_func_free.argtypes = [p]
        lib.xc_func_get_info.argtypes = [p]
        lib.xc_func_get_info.restype = p
        for name in ("family", "kind", "flags", "n_ext_params"):
            getattr(lib, f"xc_func_info_get_{name}").argtypes = [p]
            getattr(lib, f"xc_func_info_get_{name}").restype = i
        lib.xc_func_info_get_name.argtypes = [p]
        lib.xc_func_info_get_name.restype = ctypes.c_char_p
        lib.xc_func_info_get_ext_params_name.argtypes = [p, i]
        lib.xc_func_info_get_ext_params_name.restype = ctypes.c_char_p
        lib.xc_number_of_functionals.restype = i
        lib.xc_maximum_name_length.restype = i
        lib.xc_available_functional_names.argtypes = [ctypes.POINTER(ctypes.c_char_p)]
        lib.xc_lda_exc_vxc.argtypes = [p, s, d, d, d]
        lib.xc_gga_exc_vxc.argtypes = [p, s, d, d, d, d, d]
        self.lib = lib
        self.path = path
        self.version = lib.xc_version_string().decode()

    def names(self) -> tuple[str, ...]:
        count = self.lib.xc_number_of_functionals()
        width = self.lib.xc_maximum_name_length() + 1
        buffers = [ctypes.create_string_buffer(width) for _ in range(count)]
        pointers = (ctypes.c_char_p * count)(*(ctypes.addressof(b) for b in buffers))
        self.lib.xc_available_functional_names(pointers)
        return tuple(b.value.decode() for b in buffers)


@lru_cache(maxsize=1)
def _load() -> _Library | None:
    # Loading a shared library is a one-off set-up, hence the cache.
    path = os.environ.get(LIBXC_PATH_VARIABLE) or ctypes.util.find_library("xc")
    if not path:
        return None
    try:
        library = _Library(path)
    except (OSError, AttributeError):
        return None
    return library


def _library() -> _Library:
    library = _load()
    if library is None:
        where = os.environ.get(LIBXC_PATH_VARIABLE)
        found = (f"the library at {LIBXC_PATH_VARIABLE}={where} could not be loaded"
                 if where else "the Libxc C library was not found")
        raise InputError(f"a 'libxc:' functional needs Libxc, but {found}: "
                         f"{LIBXC_INSTALL_HINT}", key=_KEY)
    return library


def libxc_available() -> bool:
    """Whether the Libxc C library can be loaded."""
    return _load() is not None


def libxc_version() -> str | None:
    """The version of the loaded Libxc (e.g. ``"5.2.3"``), or None without one."""
    library = _load()
    return None if library is None else library.version


def is_libxc_spec(spec: object) -> bool:
    """Whether ``spec`` is a string naming Libxc functionals (``"libxc:..."``)."""
    return isinstance(spec, str) and spec.strip().lower().startswith(LIBXC_PREFIX)


@dataclass(frozen=True)
class LibxcComponent:
    """One Libxc functional, checked to be usable.

    Attributes
    ----------
    name : str
        Libxc's name, lower case without an ``xc_`` prefix (``"gga_c_pbe"``).
    number : int
        Libxc's identifier.
    family : str
        ``"lda"`` or ``"gga"``.
    kind : str
        ``"exchange"``, ``"correlation"`` or ``"exchange-correlation"``.
    description : str
        Libxc's one-line description.
    """

    name: str
    number: int
    family: str
    kind: str
    description: str


class _Handle:
    """An initialised ``xc_func_type`` for the duration of a ``with`` block."""

    def __init__(self, library: _Library, number: int, spin: int):
        self.lib = library.lib
        self.pointer = self.lib.xc_func_alloc()
        if not self.pointer or self.lib.xc_func_init(self.pointer, number, spin) != 0:
            if self.pointer:
                self.lib.xc_func_free(self.pointer)
            raise InputError(f"Libxc could not set up functional number {number}",
                             key=_KEY, value=number)

    def __enter__(self) -> _Handle:
        return self

    def __exit__(self, *exc) -> None:
        self.lib.xc_func_end(self.pointer)
        self.lib.xc_func_free(self.pointer)


def libxc_component(name: str) -> LibxcComponent:
    """Look up one Libxc functional by name and check that pwsolid can use it.

    Raises
    ------
    pwsolid.errors.InputError
        Without Libxc (the message says how to install it), for a name Libxc does
        not know (with the nearest names), and for each refused kind (see the module
        notes).
    """
    library = _library()
    text = name.strip().lower()
    text = text[3:] if text.startswith("xc_") else text
    number = library.lib.xc_functional_get_number(text.encode()) if text else -1
    value = f"{LIBXC_PREFIX}{name.strip()}"
    if number < 0:
        near = difflib.get_close_matches(text, library.names(), n=3, cutoff=0.6)
        hint = (f"; did you mean {', '.join(repr(n) for n in near)}?" if near else
                "; names look like 'lda_x', 'lda_c_pw', 'gga_x_pbe', 'gga_c_pbe'")
        raise InputError(f"Libxc {library.version} has no functional named '{text}'{hint}",
                         key=_KEY, value=value)
    with _Handle(library, number, _UNPOLARIZED) as handle:
        info = library.lib.xc_func_get_info(handle.pointer)
        family = library.lib.xc_func_info_get_family(info)
        kind = library.lib.xc_func_info_get_kind(info)
        flags = library.lib.xc_func_info_get_flags(info)
        description = library.lib.xc_func_info_get_name(info).decode()
        parameters = [library.lib.xc_func_info_get_ext_params_name(info, k).decode()
                      for k in range(library.lib.xc_func_info_get_n_ext_params(info))]
    reason = _refusal(family, kind, flags, parameters)
    if reason is not None:
        raise InputError(f"Libxc functional '{text}' ({description}) {reason}",
                         key=_KEY, value=value)
    return LibxcComponent(text, number, "lda" if family == _FAMILY_LDA else "gga",
                          _KINDS[kind], description)


def _refusal(family: int, kind: int, flags: int, parameters: list[str]) -> str | None:
    if family in _FAMILY_HYBRID:
        return _REFUSALS["hybrid"].format(family=_FAMILY_HYBRID[family])
    if family == _FAMILY_MGGA:
        return _REFUSALS["meta-gga"]
    if family not in (_FAMILY_LDA, _FAMILY_GGA):
        return _REFUSALS["family"].format(family=family)
    if kind == 3 or kind not in _KINDS:
        return _REFUSALS["kinetic"]
    if flags & _FLAGS_RANGE_SEPARATED or any("omega" in p.lower() for p in parameters):
        return _REFUSALS["range"]
    if flags & _FLAG_VV10:
        return _REFUSALS["vv10"]
    if not flags & _FLAG_3D:
        return _REFUSALS["dimension"]
    return None


# ----------------------------------------------------------------------------------
# evaluation
# ----------------------------------------------------------------------------------

def _pointer(array: Array) -> ctypes.c_void_p:
    return ctypes.c_void_p(array.ctypes.data)


def _call(component: LibxcComponent, spin: int, rho: Array,
          sigma: Array | None) -> tuple[Array, ...]:
    """Libxc's (zk, vrho[, vsigma]) for flat, C-ordered, interleaved inputs."""
    library = _library()
    points = rho.size // spin
    zk = np.zeros(points)
    vrho = np.zeros(points * spin)
    with _Handle(library, component.number, spin) as handle:
        if sigma is None:
            library.lib.xc_lda_exc_vxc(handle.pointer, points, _pointer(rho), _pointer(zk),
                                       _pointer(vrho))
            return zk, vrho
        vsigma = np.zeros(sigma.size)
        library.lib.xc_gga_exc_vxc(handle.pointer, points, _pointer(rho), _pointer(sigma),
                                   _pointer(zk), _pointer(vrho), _pointer(vsigma))
        return zk, vrho, vsigma


def _occupied(n: Array) -> Array:
    # ~(n <= floor): a NaN density is passed on, never turned into zero.
    return ~(n <= DENSITY_FLOOR)


def _unpolarized(component: LibxcComponent, n: Array,
                 sigma: Array | None) -> tuple[Array, ...]:
    """(n zk, vrho[, vsigma]) of the points above the floor, zero elsewhere."""
    n = np.asarray(n, dtype=np.float64)
    shape, mask = n.shape, _occupied(n)
    outs = [np.zeros(shape) for _ in range(2 if sigma is None else 3)]
    if mask.any():
        rho = np.ascontiguousarray(n[mask])
        flat_sigma = (None if sigma is None else
                      np.ascontiguousarray(np.maximum(np.asarray(sigma, float)[mask], 0.0)))
        values = _call(component, _UNPOLARIZED, rho, flat_sigma)
        outs[0][mask] = rho * values[0]
        for out, value in zip(outs[1:], values[1:]):
            out[mask] = value
    return tuple(outs)


def _polarized(component: LibxcComponent, n_up: Array, n_down: Array,
               sigmas: tuple[Array, Array, Array] | None) -> tuple[Array, ...]:
    """(n zk, v_up, v_down[, vs_uu, vs_ud, vs_dd]) above the floor, zero elsewhere."""
    up = np.maximum(np.asarray(n_up, dtype=np.float64), 0.0)
    down = np.maximum(np.asarray(n_down, dtype=np.float64), 0.0)
    if up.shape != down.shape:
        raise ValueError(f"n_up and n_down differ in shape: {up.shape} != {down.shape}")
    shape, mask = up.shape, _occupied(up + down)
    outs = [np.zeros(shape) for _ in range(3 if sigmas is None else 6)]
    if mask.any():
        rho = np.ascontiguousarray(np.stack([up[mask], down[mask]], axis=-1).ravel())
        flat_sigma = None
        if sigmas is not None:
            uu, ud, dd = (np.asarray(s, dtype=np.float64)[mask] for s in sigmas)
            uu, dd = np.maximum(uu, 0.0), np.maximum(dd, 0.0)
            flat_sigma = np.ascontiguousarray(np.stack([uu, ud, dd], axis=-1).ravel())
        values = _call(component, _POLARIZED, rho, flat_sigma)
        outs[0][mask] = (up[mask] + down[mask]) * values[0]
        vrho = values[1].reshape(-1, 2)
        outs[1][mask], outs[2][mask] = vrho[:, 0], vrho[:, 1]
        if sigmas is not None:
            vsigma = values[2].reshape(-1, 3)
            for k in range(3):
                outs[3 + k][mask] = vsigma[:, k]
    return tuple(outs)


def _per_electron(total: Array, energy: Array) -> Array:
    return np.divide(energy, total, out=np.zeros_like(energy), where=_occupied(total))


def _component_functional(component: LibxcComponent, origin: str) -> Functional:
    """A :class:`Functional` evaluating one Libxc component."""
    name = f"{LIBXC_PREFIX}{component.name}"
    description = f"Libxc {component.name}: {component.description}"
    if component.family == "gga":
        return gradient_functional(
            name, description,
            lambda n, sigma: _unpolarized(component, n, sigma),
            lambda up, down, uu, ud, dd: _polarized(component, up, down, (uu, ud, dd)),
            origin=origin)

    def unpolarized(n: Array) -> tuple[Array, Array]:
        energy, v = _unpolarized(component, n, None)
        return _per_electron(np.asarray(n, dtype=np.float64), energy), v

    def polarized(n_up: Array, n_down: Array) -> tuple[Array, Array, Array]:
        energy, v_up, v_down = _polarized(component, n_up, n_down, None)
        total = np.maximum(n_up, 0.0) + np.maximum(n_down, 0.0)
        return _per_electron(total, energy), v_up, v_down

    return Functional(name, description, unpolarized, polarized, origin=origin)


def libxc_functional(spec: str) -> Functional:
    """The functional of a ``"libxc:<name>[+<name>...]"`` specification.

    Parameters
    ----------
    spec : str
        ``"libxc:"`` followed by one or more Libxc names joined by ``+``, e.g.
        ``"libxc:gga_x_pbe+gga_c_pbe"`` or ``"libxc:lda_xc_teter93"``.

    Returns
    -------
    Functional
        Named ``"libxc:<names>"`` in Libxc's lower-case names, with origin
        ``"libxc <version>"``. An exchange plus a correlation component carry them as
        parts (the exact-condition checks then judge each); a lone exchange or
        correlation component is that part only; any other sum has no known split.

    Raises
    ------
    pwsolid.errors.InputError
        Without Libxc, for an empty or repeated name, an unknown name, or a refused
        family (see the module notes), with one message each.
    """
    if not is_libxc_spec(spec):
        raise InputError(f"a Libxc functional is written '{LIBXC_PREFIX}<name>'",
                         key=_KEY, value=spec)
    names = [part.strip() for part in spec.strip()[len(LIBXC_PREFIX):].split("+")]
    if not all(names):
        raise InputError(f"write Libxc functionals as '{LIBXC_PREFIX}<name>' or "
                         f"'{LIBXC_PREFIX}<name>+<name>' with no empty name",
                         key=_KEY, value=spec)
    library = _library()
    components = [libxc_component(name) for name in names]
    if len({c.number for c in components}) != len(components):
        raise InputError("a Libxc functional is named twice", key=_KEY, value=spec)
    origin = f"libxc {library.version}"
    parts = [_component_functional(c, origin) for c in components]
    full_name = LIBXC_PREFIX + "+".join(c.name for c in components)
    kinds = [c.kind for c in components]
    if len(parts) == 1:
        part, kind = parts[0], kinds[0]
        if kind == "exchange":
            return replace(part, exchange=part)
        if kind == "correlation":
            return replace(part, correlation=part)
        return part
    total = parts[0]
    for part in parts[1:]:
        total = combine_exchange_correlation(full_name, "", total, part, origin=origin)
    description = "Libxc " + library.version + ": " + " + ".join(
        f"{c.name} ({c.description})" for c in components)
    if sorted(kinds) == ["correlation", "exchange"]:
        exchange, correlation = (parts if kinds[0] == "exchange" else parts[::-1])
        return replace(total, description=description, exchange=exchange,
                       correlation=correlation)
    return replace(total, description=description, exchange=None, correlation=None)
