"""Thread budgets, communicators and work distribution (layer 4).

Threads. The SCF alternates batched FFTs with small dense products. OpenBLAS
threads that spin between calls starve FFTW threads (and the other way round),
which made a silicon run eight times slower in our measurements; so the two
thread pools are set together: BLAS runs single-threaded inside an SCF (its
matrices are small), and FFTW gets the cores only for grids large enough to
profit. Under an MPI launcher the cores of a node are shared among the
processes on it, so each process gets its share, never the whole node.

Processes. A run started by an MPI launcher (``mpiexec -n 2 pwsolid ...``)
uses :func:`world`, a :class:`MPICommunicator`; otherwise every function sees
a :class:`SerialCommunicator`, whose reductions are the identity, so the same
code runs serially without mpi4py. Two levels of distribution exist:

* inside one ground state, the irreducible k-points are spread over the
  processes (:func:`distribute`, used by :func:`pwsolid.scf.prepare`); when
  there are more processes than k-points, the idle ones share the Hamiltonian
  applications of an owner's k-point, a slice of the bands each
  (:func:`band_group`);
* in a workflow of independent calculations (the volumes of an equation of
  state, the settings of a convergence study), whole calculations are spread
  over the processes with :func:`map_over_ranks`; each runs inside
  :func:`serial_section`, where :func:`world` is serial, so the calculations
  inside do not try to talk to processes that are busy with other points.

Reductions are done as a reduction to process 0 followed by a broadcast, so
every process holds bit-identical sums: each then takes the same stopping
decision in the SCF loop, and none can wait forever for the others.
"""

from __future__ import annotations

import contextlib
import contextvars
import os
import pickle
from typing import Callable, Sequence

from threadpoolctl import threadpool_limits

from .fft import default_threads

__all__ = ["fft_threads_for", "single_threaded_blas", "SerialCommunicator", "MPICommunicator",
           "world", "distribute", "split_evenly", "serial_section", "map_over_ranks",
           "processes_on_this_node", "band_group", "apply_across", "serve_rows", "release"]

#: Grids with fewer points than this run their FFTs on one thread.
_THREADED_FFT_POINTS = 48 ** 3

#: Variables by which launchers tell a process how many processes share its node
#: (MPICH/Hydra, Open MPI, Slurm).
_LOCAL_SIZE_ENV = ("MPI_LOCALNRANKS", "OMPI_COMM_WORLD_LOCAL_SIZE", "SLURM_NTASKS_PER_NODE")


def processes_on_this_node() -> int:
    """Processes of this MPI run on this node (1 when not launched by an MPI launcher)."""
    for key in _LOCAL_SIZE_ENV:
        value = os.environ.get(key, "")
        if value.isdigit() and int(value) > 0:
            return int(value)
    return 1


def fft_threads_for(grid_shape) -> int:
    """FFTW threads for a grid: this process's share of the cores for large grids, else one.

    ``PWSOLID_THREADS``, when set, is taken as the per-process count as it is.
    """
    n = 1
    for s in grid_shape:
        n *= int(s)
    if n < _THREADED_FFT_POINTS:
        return 1
    if os.environ.get("PWSOLID_THREADS", "").isdigit():
        return default_threads()
    return max(1, default_threads() // processes_on_this_node())


@contextlib.contextmanager
def single_threaded_blas():
    """Limit BLAS (OpenBLAS, MKL, BLIS) to one thread inside the block."""
    with threadpool_limits(limits=1, user_api="blas"):
        yield


# --------------------------------------------------------------------------- MPI

_MPI_ENV = ("PMI_SIZE", "PMI_RANK", "OMPI_COMM_WORLD_SIZE", "PMIX_RANK", "MPI_LOCALNRANKS",
            "HYDRA_CONTROL_FD")

#: True inside :func:`serial_section`: :func:`world` then answers serially.
_SERIAL_ONLY = contextvars.ContextVar("pwsolid_serial_only", default=False)


class SerialCommunicator:
    """The one-process communicator: every reduction is the identity."""

    rank = 0
    size = 1

    def allreduce_sum(self, value):
        return value

    def bcast(self, obj, root: int = 0):
        return obj

    def gather(self, obj, root: int = 0):
        """``[obj]`` (the list of every process's object, on the root)."""
        return [obj]

    def allgather(self, obj) -> list:
        """``[obj]`` (the list of every process's object, on every process)."""
        return [obj]

    def split(self, color: int, key: int = 0) -> "SerialCommunicator":
        """A sub-communicator of the processes with the same ``color``: this one."""
        return self

    def bcast_array(self, array, root: int = 0):
        """Overwrite ``array`` on every process with the root's (in place); returns it."""
        return array

    def gather_rows(self, rows, n_rows: int, root: int = 0):
        """Stack every process's rows (split as :func:`split_evenly`) on ``root``."""
        return rows

    def barrier(self) -> None:
        pass


def _sum_op():
    from mpi4py import MPI

    return MPI.SUM


def _mpi_type(dtype):
    from mpi4py import MPI

    return MPI._typedict[dtype.char]


class MPICommunicator:
    """Thin wrapper over an mpi4py communicator (sums of numbers and numpy arrays).

    Sums are reduced to process 0 and broadcast, so that every process holds the
    same bits (see the module notes); objects travel pickled.
    """

    def __init__(self, comm):
        self._comm = comm
        self.rank = comm.Get_rank()
        self.size = comm.Get_size()

    def allreduce_sum(self, value):
        import numpy as np

        op = _sum_op()
        if isinstance(value, np.ndarray):
            send = np.ascontiguousarray(value)
            out = np.empty_like(send)
            self._comm.Reduce(send, out if self.rank == 0 else None, op=op, root=0)
            self._comm.Bcast(out, root=0)
            return out
        return self._comm.bcast(self._comm.reduce(value, op=op, root=0), root=0)

    def bcast(self, obj, root: int = 0):
        return self._comm.bcast(obj, root=root)

    def gather(self, obj, root: int = 0):
        """The list of every process's ``obj`` (by rank) on ``root``; None elsewhere."""
        return self._comm.gather(obj, root=root)

    def allgather(self, obj) -> list:
        """The list of every process's ``obj`` (by rank), on every process."""
        return self._comm.allgather(obj)

    def split(self, color: int, key: int = 0) -> "MPICommunicator":
        """Sub-communicator of the processes that pass the same ``color``, ordered by ``key``."""
        return MPICommunicator(self._comm.Split(int(color), int(key)))

    def bcast_array(self, array, root: int = 0):
        """Overwrite the contiguous numpy ``array`` on every process with the root's; returns it.

        The buffer travels as it is (no pickling); every process passes an
        array of the same shape and dtype.
        """
        self._comm.Bcast(array, root=root)
        return array

    def gather_rows(self, rows, n_rows: int, root: int = 0):
        """Stack the row blocks of every process on ``root`` (None elsewhere).

        Process ``r`` passes the rows ``split_evenly(n_rows, size, r)`` of a
        C-contiguous 2-D array; the root receives the whole (n_rows, n_cols)
        array in one ``Gatherv``, the buffers as they are.
        """
        import numpy as np

        rows = np.ascontiguousarray(rows)
        n_cols = rows.shape[1]
        counts = [len(split_evenly(n_rows, self.size, r)) * n_cols for r in range(self.size)]
        displacements = [sum(counts[:r]) for r in range(self.size)]
        out = np.empty((n_rows, n_cols), dtype=rows.dtype) if self.rank == root else None
        self._comm.Gatherv(rows, [out, counts, displacements, _mpi_type(rows.dtype)]
                           if self.rank == root else None, root=root)
        return out

    def barrier(self) -> None:
        self._comm.Barrier()


def world():
    """The communicator of this run: MPI when launched by an MPI launcher, else serial.

    Inside :func:`serial_section` it is always serial.
    """
    if _SERIAL_ONLY.get() or not any(k in os.environ for k in _MPI_ENV):
        return SerialCommunicator()
    try:
        from mpi4py import MPI
    except ImportError:  # launched under mpiexec without mpi4py: run serially, say nothing
        return SerialCommunicator()
    comm = MPI.COMM_WORLD
    return SerialCommunicator() if comm.Get_size() == 1 else MPICommunicator(comm)


@contextlib.contextmanager
def serial_section():
    """Inside the block :func:`world` is serial: for work one process does on its own."""
    token = _SERIAL_ONLY.set(True)
    try:
        yield
    finally:
        _SERIAL_ONLY.reset(token)


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


def split_evenly(n_items: int, size: int, rank: int) -> range:
    """The contiguous block of ``range(n_items)`` that ``rank`` of ``size`` owns.

    Blocks differ in length by at most one, the longer ones first; their
    concatenation over the ranks is ``range(n_items)``.
    """
    if size < 1 or not 0 <= rank < size:
        raise ValueError(f"rank {rank} is not one of {size} processes")
    base, extra = divmod(int(n_items), size)
    start = rank * base + min(rank, extra)
    return range(start, start + base + (1 if rank < extra else 0))


# ------------------------------------------------------- rows of one k-point's block

def band_group(comm, owned):
    """The processes that share the Hamiltonian applications of this process's k-points.

    When there are more processes than channels (a Gamma-only supercell on two
    processes), :func:`distribute` leaves some processes without a k-point.
    Each such idle process joins the group of one owner (round robin over the
    owners); in the group (a sub-communicator) the owner is rank 0 and runs
    the eigensolver, and every member applies H to a slice of the rows of each
    block (:func:`apply_across`, :func:`serve_rows`). With no idle process
    every group is a single process and nothing changes.

    Collective over ``comm``; the groups are made once per assignment and kept
    on the communicator.
    """
    if comm.size == 1:
        return SerialCommunicator()
    everyone = tuple(tuple(int(j) for j in part) for part in comm.allgather(tuple(owned)))
    kept = comm.__dict__.setdefault("_band_groups", {})
    if everyone not in kept:
        owners = [r for r, part in enumerate(everyone) if part]
        idle = [r for r, part in enumerate(everyone) if not part]
        leader = {r: r for r in owners}
        for i, r in enumerate(idle):
            leader[r] = owners[i % len(owners)] if owners else r
        me = comm.rank
        group = comm.split(leader[me], 0 if me in owners else me + 1)
        kept[everyone] = group if group.size > 1 else SerialCommunicator()
    return kept[everyone]


def _apply_my_rows(group, apply: Callable, block):
    rows = split_evenly(len(block), group.size, group.rank)
    mine = apply(block[rows.start:rows.stop])
    return group.gather_rows(mine, len(block))


def apply_across(group, key, apply: Callable) -> Callable:
    """On rank 0 of a :func:`band_group`: ``apply`` with the rows of each block spread.

    The returned function sends the block and ``key`` (which tells the other
    members which operator to use, see :func:`serve_rows`) to the group, applies
    ``apply`` to its own first rows, and gathers the other rows' results, so it
    returns what ``apply(block)`` returns, up to rounding. A group of one
    process gets ``apply`` itself.
    """
    if group.size == 1:
        return apply
    import numpy as np

    def spread(block):
        block = np.ascontiguousarray(block, dtype=complex)
        group.bcast((key, block.shape))
        group.bcast_array(block)
        return _apply_my_rows(group, apply, block)

    return spread


def serve_rows(group, operator_for: Callable) -> None:
    """On the other members of a :func:`band_group`: apply to rows until rank 0 releases.

    ``operator_for(key)`` returns the function to apply for a ``key`` sent by
    :func:`apply_across`.
    """
    import numpy as np

    while True:
        message = group.bcast(None)
        if message is None:
            return
        key, shape = message
        block = group.bcast_array(np.empty(shape, dtype=complex))
        _apply_my_rows(group, operator_for(key), block)


def release(group) -> None:
    """On rank 0 of a :func:`band_group`: end the other members' :func:`serve_rows`."""
    if group.size > 1:
        group.bcast(None)


class _RemoteFailure:
    """An exception raised while a process worked on one item, carried to the others."""

    def __init__(self, exc: BaseException):
        try:
            pickle.loads(pickle.dumps(exc))
            self.exc = exc
        except Exception:  # noqa: BLE001 - not every exception survives pickling
            self.exc = RuntimeError(f"{type(exc).__name__}: {exc}")


def map_over_ranks(function: Callable, items: Sequence, comm=None, *,
                   costs: Sequence[float] | None = None,
                   on_result: Callable[[int, object, bool], None] | None = None) -> list:
    """``[function(item) for item in items]`` with the items spread over the processes.

    Parameters
    ----------
    function
        Called once per item, on the process that owns it, inside
        :func:`serial_section`; the items a process owns are called in order,
        so state kept by ``function`` (a warm start) chains along them.
    items
        The independent pieces of work.
    comm
        Communicator (default :func:`world`). With one process this is a plain loop.
    costs
        Estimated cost per item: items are then balanced with :func:`distribute`
        (not contiguous); without, each process owns one contiguous block
        (:func:`split_evenly`), which keeps neighbouring items together.
    on_result
        ``on_result(index, result, computed_here)``: called on every process
        for its own items as they finish, then for the other processes' items
        after the exchange (in item order).

    Returns
    -------
    list
        Every item's result, in item order, on every process. Results must be
        picklable.

    Raises
    ------
    Exception
        The first (in item order) exception raised by ``function`` on any
        process is raised on every process, after the exchange, so that none
        is left waiting.
    """
    comm = comm if comm is not None else world()
    items = list(items)
    if comm.size == 1:
        out = []
        for i, item in enumerate(items):
            out.append(function(item))
            if on_result is not None:
                on_result(i, out[-1], True)
        return out
    if costs is not None:
        mine = distribute(costs, comm.size, comm.rank)
    else:
        mine = list(split_evenly(len(items), comm.size, comm.rank))
    done: dict[int, object] = {}
    failed: dict[int, _RemoteFailure] = {}
    with serial_section():
        for i in mine:
            try:
                done[i] = function(items[i])
            except Exception as exc:  # noqa: BLE001 - carried to every process below
                failed[i] = _RemoteFailure(exc)
                break
            if on_result is not None:
                on_result(i, done[i], True)
    gathered = comm.allgather((done, failed))
    results: dict[int, object] = {}
    failures: dict[int, _RemoteFailure] = {}
    for d, f in gathered:
        results.update(d)
        failures.update(f)
    if failures:
        raise failures[min(failures)].exc
    if on_result is not None:
        for i in range(len(items)):
            if i not in done:
                on_result(i, results[i], False)
    return [results[i] for i in range(len(items))]
