"""Thread budgets for FFTW and BLAS (layer 4).

The SCF alternates batched FFTs with small dense products. OpenBLAS threads
that spin between calls starve FFTW threads (and the other way round), which
made a silicon run eight times slower in our measurements; so the two thread
pools are set together: BLAS runs single-threaded inside an SCF (its matrices
are small), and FFTW gets the cores only for grids large enough to profit.
"""

from __future__ import annotations

import contextlib

from threadpoolctl import threadpool_limits

from .fft import default_threads

__all__ = ["fft_threads_for", "single_threaded_blas"]

#: Grids with fewer points than this run their FFTs on one thread.
_THREADED_FFT_POINTS = 48 ** 3


def fft_threads_for(grid_shape) -> int:
    """FFTW threads for a grid: all usable cores for large grids, one for small ones."""
    n = 1
    for s in grid_shape:
        n *= int(s)
    return default_threads() if n >= _THREADED_FFT_POINTS else 1


@contextlib.contextmanager
def single_threaded_blas():
    """Limit BLAS (OpenBLAS, MKL, BLIS) to one thread inside the block."""
    with threadpool_limits(limits=1, user_api="blas"):
        yield
