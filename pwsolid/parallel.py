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

__all__ = ["fft_threads_for", "single_threaded_blas", "SerialCommunicator", "MPICommunicator",
           "world", "distribute"]

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


# --------------------------------------------------------------------------- MPI

_MPI_ENV = ("PMI_SIZE", "PMI_RANK", "OMPI_COMM_WORLD_SIZE", "PMIX_RANK", "MPI_LOCALNRANKS",
            "HYDRA_CONTROL_FD")


class SerialCommunicator:
    """The one-process communicator: every reduction is the identity."""

    rank = 0
    size = 1

    def allreduce_sum(self, value):
        return value

    def bcast(self, obj, root: int = 0):
        return obj

    def barrier(self) -> None:
        pass


class MPICommunicator:
    """Thin wrapper over an mpi4py communicator (sums of numbers and numpy arrays)."""

    def __init__(self, comm):
        self._comm = comm
        self.rank = comm.Get_rank()
        self.size = comm.Get_size()

    def allreduce_sum(self, value):
        import numpy as np
        from mpi4py import MPI

        if isinstance(value, np.ndarray):
            out = np.empty_like(value)
            self._comm.Allreduce(np.ascontiguousarray(value), out, op=MPI.SUM)
            return out
        return self._comm.allreduce(value, op=MPI.SUM)

    def bcast(self, obj, root: int = 0):
        return self._comm.bcast(obj, root=root)

    def barrier(self) -> None:
        self._comm.Barrier()


def world():
    """The communicator of this run: MPI when launched by an MPI launcher, else serial."""
    import os

    if not any(k in os.environ for k in _MPI_ENV):
        return SerialCommunicator()
    try:
        from mpi4py import MPI
    except ImportError:  # launched under mpiexec without mpi4py: run serially, say nothing
        return SerialCommunicator()
    comm = MPI.COMM_WORLD
    return SerialCommunicator() if comm.Get_size() == 1 else MPICommunicator(comm)


def distribute(costs, size: int, rank: int) -> list[int]:
    """Indices of the items this rank owns: greedy longest-first balancing of ``costs``.

    Deterministic, so every rank computes the same assignment without talking.
    """
    order = sorted(range(len(costs)), key=lambda i: (-float(costs[i]), i))
    load = [0.0] * size
    owner = [0] * len(costs)
    for i in order:
        r = min(range(size), key=lambda j: (load[j], j))
        owner[i] = r
        load[r] += float(costs[i])
    return [i for i in range(len(costs)) if owner[i] == rank]
