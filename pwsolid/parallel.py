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
  there are more processes than k-points, the idle ones share the
  eigensolver of an owner's k-point: each holds a slice of the plane waves of
  every band for the dense algebra and transforms a slice of the bands for
  the Hamiltonian (:func:`band_group`);
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
           "processes_on_this_node", "band_group", "plane_wave_slice", "share_columns",
           "collect_columns", "apply_by_plane_waves"]

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

    def alltoall_arrays(self, pieces, shapes) -> list:
        """Send ``pieces[r]`` to process r; receive arrays of ``shapes[r]`` from each: ``pieces``."""
        return [piece.reshape(shape) for piece, shape in zip(pieces, shapes)]

    def barrier(self) -> None:
        pass

def _sum_op():
    from mpi4py import MPI

    return MPI.SUM


def _offsets(counts) -> list[int]:
    out, at = [], 0
    for c in counts:
        out.append(at)
        at += c
    return out


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

    def alltoall_arrays(self, pieces, shapes) -> list:
        """Send the array ``pieces[r]`` to process r; receive one of ``shapes[r]`` from each.

        One ``Alltoallv`` of complex (or any one dtype) buffers; returns the
        received arrays by sending process.
        """
        import numpy as np

        dtype = np.result_type(*pieces)
        send = np.concatenate([np.ascontiguousarray(p, dtype=dtype).reshape(-1) for p in pieces])
        send_counts = [int(np.prod(np.shape(p))) for p in pieces]
        recv_counts = [int(np.prod(shape)) for shape in shapes]
        recv = np.empty(sum(recv_counts), dtype=dtype)
        kind = _mpi_type(dtype)
        self._comm.Alltoallv([send, send_counts, _offsets(send_counts), kind],
                             [recv, recv_counts, _offsets(recv_counts), kind])
        offsets = _offsets(recv_counts)
        return [recv[o:o + c].reshape(shape) for o, c, shape in zip(offsets, recv_counts, shapes)]

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


# ------------------------------------------------- plane waves of one k-point's bands

def band_group(comm, owned) -> tuple:
    """The processes that share the eigensolver of this process's k-points, and those k-points.

    When there are more processes than channels (a Gamma-only supercell on two
    processes), :func:`distribute` leaves some processes without a k-point.
    Each such idle process joins the group of one owner (round robin over the
    owners). Returns ``(group, channels)``: the group is a sub-communicator in
    which the owner is rank 0, and ``channels`` are the owner's k-points, which
    every member then solves together, each holding a slice of the plane waves
    (:func:`plane_wave_slice`, :func:`apply_by_plane_waves`). With no idle
    process every group is one process and ``channels`` is ``owned``.

    Collective over ``comm``; the groups are made once per assignment and kept
    on the communicator.
    """
    owned = tuple(int(j) for j in owned)
    if comm.size == 1:
        return SerialCommunicator(), owned
    everyone = tuple(tuple(int(j) for j in part) for part in comm.allgather(owned))
    kept = comm.__dict__.setdefault("_band_groups", {})
    if everyone not in kept:
        owners = [r for r, part in enumerate(everyone) if part]
        idle = [r for r, part in enumerate(everyone) if not part]
        leader = {r: r for r in owners}
        for i, r in enumerate(idle):
            leader[r] = owners[i % len(owners)] if owners else r
        me = comm.rank
        group = comm.split(leader[me], 0 if me in owners else me + 1)
        kept[everyone] = (group if group.size > 1 else SerialCommunicator(),
                          everyone[leader[me]])
    return kept[everyone]


def plane_wave_slice(group, n_pw: int) -> slice:
    """The plane waves (columns of a band block) this member of a band group holds."""
    part = split_evenly(n_pw, group.size, group.rank)
    return slice(part.start, part.stop)


def share_columns(group, block):
    """This member's columns of rank 0's ``block`` (the others pass None)."""
    import numpy as np

    if group.size == 1:
        return block
    shape = group.bcast(None if block is None else block.shape)
    full = np.ascontiguousarray(block, dtype=complex) if group.rank == 0 else \
        np.empty(shape, dtype=complex)
    group.bcast_array(full)
    return np.ascontiguousarray(full[:, plane_wave_slice(group, shape[1])])


def collect_columns(group, local):
    """The whole block on rank 0 from every member's columns (None on the others)."""
    import numpy as np

    if group.size == 1:
        return local
    parts = group.gather(local)
    return np.concatenate(parts, axis=1) if group.rank == 0 else None


def apply_by_plane_waves(group, n_pw: int, apply: Callable) -> Callable:
    """``apply`` (full rows -> full rows) for blocks whose columns are spread over a group.

    The returned function takes this member's columns of a block and returns
    its columns of ``apply(block)``: the block is transposed among the members
    (each receives whole rows, a slice of the bands), ``apply`` runs on those
    rows, and the result is transposed back. Two all-to-all exchanges; a group
    of one process gets ``apply`` itself.
    """
    if group.size == 1:
        return apply
    import numpy as np

    size, me = group.size, group.rank
    columns = [split_evenly(n_pw, size, r) for r in range(size)]
    mine = columns[me]

    def spread(local):
        rows = [split_evenly(len(local), size, r) for r in range(size)]
        pieces = group.alltoall_arrays([local[r.start:r.stop] for r in rows],
                                       [(len(rows[me]), len(c)) for c in columns])
        whole = np.empty((len(rows[me]), n_pw), dtype=complex)
        for c, piece in zip(columns, pieces):
            whole[:, c.start:c.stop] = piece
        result = apply(whole)
        pieces = group.alltoall_arrays([result[:, c.start:c.stop] for c in columns],
                                       [(len(r), len(mine)) for r in rows])
        out = np.empty((len(local), len(mine)), dtype=complex)
        for r, piece in zip(rows, pieces):
            out[r.start:r.stop] = piece
        return out

    return spread


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
