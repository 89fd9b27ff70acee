"""Batched three-dimensional FFTs on one grid (layer 2).

A :class:`FFTGrid` is built once per grid shape and reused for every transform
of an SCF run. It holds planned pyfftw transforms for batches of bands
(numpy.fft is the fallback when pyfftw cannot be imported) and counts the time
spent inside the transforms, which the benchmarks report.

Conventions (no hidden factors): for coefficients ``c_G`` of a Bloch function,
``to_real`` returns ``psi(r_j) = sum_G c_G exp(i G r_j)`` (an unnormalised
backward transform) and ``to_reciprocal`` returns ``(1/N) sum_j f(r_j)
exp(-i G r_j)``, the Fourier coefficients of a periodic field, so the two are
exact inverses.
"""

from __future__ import annotations

import os
import time
from dataclasses import dataclass, field

import numpy as np

try:  # pragma: no cover - exercised by whichever branch is installed
    import pyfftw

    _HAVE_PYFFTW = True
except ImportError:  # pragma: no cover
    pyfftw = None
    _HAVE_PYFFTW = False

__all__ = ["FFTGrid", "make_fft_grid", "fast_fft_size", "default_threads", "HAVE_PYFFTW"]

HAVE_PYFFTW = _HAVE_PYFFTW


def default_threads() -> int:
    """Threads for FFTs: ``PWSOLID_THREADS`` if set, else the usable cores."""
    env = os.environ.get("PWSOLID_THREADS")
    if env and env.isdigit() and int(env) > 0:
        return int(env)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover
        return max(1, os.cpu_count() or 1)


def fast_fft_size(n: int) -> int:
    """Smallest integer >= n whose only prime factors are 2, 3, 5 and 7."""
    m = max(1, int(n))
    while True:
        k = m
        for p in (2, 3, 5, 7):
            while k % p == 0:
                k //= p
        if k == 1:
            return m
        m += 1


@dataclass(eq=False)
class FFTGrid:
    """Planned batched FFTs on a fixed real-space grid.

    Attributes
    ----------
    shape : tuple of 3 int
        Grid points along the three lattice vectors.
    batch : int
        Largest number of fields transformed in one call; longer blocks are
        cut into chunks of this size.
    threads : int
        FFTW threads.
    seconds : float
        Wall time spent inside transforms so far (for the benchmarks).
    n_transforms : int
        Number of single-field 3-D transforms done so far.
    """

    shape: tuple[int, int, int]
    batch: int = 8
    threads: int = 1
    seconds: float = 0.0
    n_transforms: int = 0
    _plans: dict = field(default_factory=dict, repr=False)

    @property
    def size(self) -> int:
        return int(np.prod(self.shape))

    # -- planning ----------------------------------------------------------
    def _plan(self, nb: int):
        plan = self._plans.get(nb)
        if plan is None:
            buf = pyfftw.empty_aligned((nb, *self.shape), dtype="complex128")
            flags = ("FFTW_MEASURE", "FFTW_DESTROY_INPUT")
            fwd = pyfftw.FFTW(buf, buf, axes=(1, 2, 3), direction="FFTW_FORWARD",
                              flags=flags, threads=self.threads)
            bwd = pyfftw.FFTW(buf, buf, axes=(1, 2, 3), direction="FFTW_BACKWARD",
                              flags=flags, threads=self.threads)
            plan = self._plans[nb] = (buf, fwd, bwd)
        return plan

    # -- single fields -----------------------------------------------------
    def field_to_reciprocal(self, f: np.ndarray) -> np.ndarray:
        """Fourier coefficients of a real or complex field of shape ``shape``."""
        return self.to_reciprocal(f[None].astype(complex))[0]

    def field_to_real(self, c: np.ndarray) -> np.ndarray:
        """Field on the grid from its Fourier coefficients (complex result)."""
        return self.to_real(c[None])[0]

    # -- batches -----------------------------------------------------------
    def to_real(self, c: np.ndarray) -> np.ndarray:
        """``sum_G c_G exp(iGr)`` for a batch ``c`` of shape (nb, *shape); returns a new array."""
        return self._transform(c, backward=True, scale=1.0)

    def to_reciprocal(self, f: np.ndarray) -> np.ndarray:
        """``(1/N) sum_r f(r) exp(-iGr)`` for a batch of shape (nb, *shape); returns a new array."""
        return self._transform(f, backward=False, scale=1.0 / self.size)

    def _transform(self, a: np.ndarray, backward: bool, scale: float) -> np.ndarray:
        t0 = time.perf_counter()
        nb = a.shape[0]
        out = np.empty((nb, *self.shape), dtype=complex)
        if not _HAVE_PYFFTW:
            if backward:
                out[...] = np.fft.ifftn(a, axes=(1, 2, 3)) * self.size
            else:
                out[...] = np.fft.fftn(a, axes=(1, 2, 3)) * scale
        else:
            for start in range(0, nb, self.batch):
                stop = min(nb, start + self.batch)
                buf, fwd, bwd = self._plan(stop - start)
                buf[...] = a[start:stop]
                if backward:
                    bwd(normalise_idft=False)
                else:
                    fwd()
                out[start:stop] = buf
            if scale != 1.0:
                out *= scale
        self.seconds += time.perf_counter() - t0
        self.n_transforms += nb
        return out

    def reset_counters(self) -> None:
        self.seconds = 0.0
        self.n_transforms = 0


def make_fft_grid(shape, batch: int = 8, threads: int | None = None) -> FFTGrid:
    """Build the FFT object for a grid; plans are made on first use of each batch size."""
    shape = tuple(int(n) for n in shape)
    return FFTGrid(shape=shape, batch=max(1, int(batch)),
                   threads=default_threads() if threads is None else int(threads))
