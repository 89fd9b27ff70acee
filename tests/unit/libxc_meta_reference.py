"""Test-only bridge to the Libxc C library for meta-GGA reference values.

Loads the system library (Debian's libxc9) with ctypes and evaluates a meta-GGA
through ``xc_mgga_exc_vxc``. Functional ids are looked up by name with
``xc_functional_get_number``. ``load()`` returns None when the library is absent,
so tests can skip cleanly. Not part of the package: the package's own bridge to
Libxc (for LDA/GGA) lives elsewhere.
"""

from __future__ import annotations

import ctypes
import ctypes.util

import numpy as np

_CANDIDATES = ("libxc.so.9", "libxc.so", "libxc.so.5")
_DOUBLE_P = np.ctypeslib.ndpointer(dtype=np.float64, flags="C_CONTIGUOUS")


class LibxcMeta:
    def __init__(self, lib):
        self.lib = lib
        lib.xc_functional_get_number.restype = ctypes.c_int
        lib.xc_functional_get_number.argtypes = [ctypes.c_char_p]
        lib.xc_func_alloc.restype = ctypes.c_void_p
        lib.xc_func_init.argtypes = [ctypes.c_void_p, ctypes.c_int, ctypes.c_int]
        lib.xc_func_init.restype = ctypes.c_int
        lib.xc_func_end.argtypes = [ctypes.c_void_p]
        lib.xc_func_free.argtypes = [ctypes.c_void_p]
        lib.xc_mgga_exc_vxc.argtypes = [ctypes.c_void_p, ctypes.c_size_t] + [_DOUBLE_P] * 9
        lib.xc_mgga_exc_vxc.restype = None
        lib.xc_version_string.restype = ctypes.c_char_p

    def version(self) -> str:
        return self.lib.xc_version_string().decode()

    def number(self, name: str) -> int:
        return int(self.lib.xc_functional_get_number(name.encode()))

    def evaluate(self, name: str, rho, sigma, tau, polarized: bool):
        """(zk, vrho, vsigma, vtau) in Libxc's layout: per point (rho (np, 2), sigma
        (np, 3), tau (np, 2) when polarised)."""
        fid = self.number(name)
        if fid <= 0:
            raise LookupError(name)
        func = self.lib.xc_func_alloc()
        nspin = 2 if polarized else 1
        if self.lib.xc_func_init(func, fid, nspin) != 0:
            raise RuntimeError(f"xc_func_init failed for {name}")
        try:
            rho = np.ascontiguousarray(rho, dtype=np.float64)
            sigma = np.ascontiguousarray(sigma, dtype=np.float64)
            tau = np.ascontiguousarray(tau, dtype=np.float64)
            npts = rho.shape[0]
            lapl = np.zeros_like(tau)
            zk = np.zeros(npts)
            vrho = np.zeros_like(rho)
            vsigma = np.zeros_like(sigma)
            vlapl = np.zeros_like(tau)
            vtau = np.zeros_like(tau)
            self.lib.xc_mgga_exc_vxc(func, npts, rho, sigma, lapl, tau, zk, vrho, vsigma,
                                     vlapl, vtau)
        finally:
            self.lib.xc_func_end(func)
            self.lib.xc_func_free(func)
        return zk, vrho, vsigma, vtau


def load() -> LibxcMeta | None:
    names = list(_CANDIDATES)
    found = ctypes.util.find_library("xc")
    if found:
        names.append(found)
    for name in names:
        try:
            return LibxcMeta(ctypes.CDLL(name))
        except OSError:
            continue
    return None
