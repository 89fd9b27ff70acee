"""Thread budgets, communicators and work distribution (pwsolid.parallel).

MPI itself is exercised in tests/parallel (under mpiexec). Here fake processes
run as threads that take turns (a token passed at every exchange), so the code
under test runs one process at a time, as it would on one core, and the global
warnings state that the workflows touch is never shared between two of them.
"""

from __future__ import annotations

import copy
import threading
from types import SimpleNamespace

import numpy as np
import pytest

from pwsolid import parallel
from pwsolid.crystal import diamond
from pwsolid.parallel import (MPICommunicator, SerialCommunicator, distribute, fft_threads_for,
                              map_over_ranks, processes_on_this_node, serial_section,
                              split_evenly, world)
from pwsolid.settings import GroundStateSettings


# --------------------------------------------------------------------------- fakes

class _Group:
    """``size`` fake processes in threads; one runs at a time, exchanges meet at a barrier."""

    def __init__(self, size):
        self.size = size
        self.slots = [None] * size
        self.barrier = threading.Barrier(size, timeout=30)
        self.turn = threading.Lock()

    def exchange(self, rank, obj) -> list:
        self.slots[rank] = copy.deepcopy(obj)    # what pickling would do
        self.turn.release()
        self.barrier.wait()
        out = list(self.slots)
        self.barrier.wait()
        self.turn.acquire()
        return out

    def run(self, make_comm, body):
        """``body(comm)`` on every fake process; the list of results by rank."""
        results, errors = [None] * self.size, [None] * self.size

        def main(rank):
            self.turn.acquire()
            try:
                results[rank] = body(make_comm(self, rank))
            except BaseException as exc:  # noqa: BLE001 - handed to the test thread
                errors[rank] = exc
                self.barrier.abort()
            finally:
                self.turn.release()

        threads = [threading.Thread(target=main, args=(r,)) for r in range(self.size)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(60)
        real = [e for e in errors if e is not None and not isinstance(e, threading.BrokenBarrierError)]
        if real:
            raise real[0]
        if any(errors):
            raise errors[0]
        return results


class _FakeCommunicator:
    """The pwsolid communicator interface over a thread group."""

    def __init__(self, group, rank):
        self.group, self.rank, self.size = group, rank, group.size

    def allgather(self, obj):
        return self.group.exchange(self.rank, obj)

    def gather(self, obj, root=0):
        out = self.allgather(obj)
        return out if self.rank == root else None

    def bcast(self, obj, root=0):
        return self.allgather(obj)[root]

    def allreduce_sum(self, value):
        return sum(self.allgather(value))

    def barrier(self):
        self.allgather(None)


class _FakeMPI4PyComm:
    """Just enough of an mpi4py communicator, over a thread group."""

    def __init__(self, group, rank):
        self.group, self.rank = group, rank

    def Get_rank(self):
        return self.rank

    def Get_size(self):
        return self.group.size

    def Reduce(self, send, recv, op, root):
        assert op == "SUM"
        parts = self.group.exchange(self.rank, np.array(send))
        if self.rank == root:
            recv[...] = sum(parts)

    def Bcast(self, buf, root):
        parts = self.group.exchange(self.rank, np.array(buf))
        buf[...] = parts[root]

    def reduce(self, value, op, root):
        assert op == "SUM"
        parts = self.group.exchange(self.rank, value)
        return sum(parts) if self.rank == root else None

    def bcast(self, obj, root):
        return self.group.exchange(self.rank, obj)[root]

    def gather(self, obj, root):
        parts = self.group.exchange(self.rank, obj)
        return parts if self.rank == root else None

    def allgather(self, obj):
        return self.group.exchange(self.rank, obj)

    def Split(self, color, key):
        members = self.group.exchange(self.rank, (color, key))
        mine = sorted((k, r) for r, (c, k) in enumerate(members) if c == color)
        return SimpleNamespace(Get_rank=lambda: [r for _, r in mine].index(self.rank),
                               Get_size=lambda: len(mine))

    def Barrier(self):
        self.group.exchange(self.rank, None)


# --------------------------------------------------------------------------- distribute

@pytest.mark.parametrize("size", [1, 2, 3, 7])
def test_distribute_covers_every_index_once_and_is_deterministic(size, rng):
    costs = rng.integers(1, 1000, size=23).astype(float)
    parts = [distribute(costs, size, r) for r in range(size)]
    flat = sorted(i for p in parts for i in p)
    assert flat == list(range(len(costs)))
    assert parts == [distribute(list(costs), size, r) for r in range(size)]
    assert all(p == sorted(p) for p in parts)


def test_distribute_balances_the_loads(rng):
    for _ in range(20):
        costs = rng.uniform(1.0, 10.0, size=int(rng.integers(5, 60)))
        size = int(rng.integers(2, 6))
        loads = [costs[distribute(costs, size, r)].sum() for r in range(size)]
        # longest-first greedy: no process is more than one item above the lightest
        assert max(loads) - min(loads) <= costs.max() + 1e-12


def test_distribute_with_more_processes_than_items():
    parts = [distribute([3.0, 1.0], 4, r) for r in range(4)]
    assert parts == [[0], [1], [], []]


def test_split_evenly_gives_contiguous_blocks_in_order():
    for n in range(0, 12):
        for size in range(1, 5):
            blocks = [split_evenly(n, size, r) for r in range(size)]
            assert [i for b in blocks for i in b] == list(range(n))
            assert max(map(len, blocks)) - min(map(len, blocks)) <= 1
            assert [len(b) for b in blocks] == sorted((len(b) for b in blocks), reverse=True)
    with pytest.raises(ValueError):
        split_evenly(5, 2, 2)


# --------------------------------------------------------------------------- communicators

def test_serial_communicator_is_the_identity():
    comm = SerialCommunicator()
    x = np.arange(3.0)
    assert comm.allreduce_sum(x) is x and comm.allreduce_sum(2.5) == 2.5
    assert comm.bcast("a") == "a" and comm.gather(1) == [1] and comm.allgather(1) == [1]
    assert comm.split(3) is comm and (comm.rank, comm.size) == (0, 1)
    comm.barrier()


def test_mpi_communicator_wrapper_over_a_fake_comm(monkeypatch):
    monkeypatch.setattr(parallel, "_sum_op", lambda: "SUM")

    def body(raw):
        comm = MPICommunicator(raw)
        r = comm.rank
        total = comm.allreduce_sum(np.full((2, 2), r + 1.0))
        scalar = comm.allreduce_sum(r + 1)
        sub = comm.split(r % 2, key=-r)
        comm.barrier()
        return dict(total=total, scalar=scalar, bcast=comm.bcast(f"from {r}", root=1),
                    gather=comm.gather(r * 10, root=0), allgather=comm.allgather(r),
                    sub=(sub.rank, sub.size), size=comm.size)

    out = _Group(3).run(_FakeMPI4PyComm, body)
    for r, o in enumerate(out):
        np.testing.assert_array_equal(o["total"], np.full((2, 2), 6.0))
        assert o["scalar"] == 6 and o["bcast"] == "from 1" and o["allgather"] == [0, 1, 2]
        assert o["gather"] == ([0, 10, 20] if r == 0 else None) and o["size"] == 3
    # colour 0 holds ranks 0 and 2, ordered by key -r: rank 2 first
    assert [o["sub"] for o in out] == [(1, 2), (0, 1), (0, 2)]


def test_world_is_serial_without_a_launcher_and_inside_a_serial_section(monkeypatch):
    for key in parallel._MPI_ENV:
        monkeypatch.delenv(key, raising=False)
    assert isinstance(world(), SerialCommunicator)
    # with a launcher's variable set, a serial section still answers serially
    # (and never imports mpi4py to find out)
    monkeypatch.setenv("PMI_SIZE", "2")
    with serial_section():
        assert isinstance(world(), SerialCommunicator)
        with serial_section():
            pass
        assert isinstance(world(), SerialCommunicator)


def test_fft_threads_share_the_cores_between_the_processes_of_a_node(monkeypatch):
    monkeypatch.setattr(parallel, "default_threads", lambda: 4)
    for key in parallel._LOCAL_SIZE_ENV + ("PWSOLID_THREADS",):
        monkeypatch.delenv(key, raising=False)
    assert processes_on_this_node() == 1
    assert fft_threads_for((64, 64, 64)) == 4 and fft_threads_for((20, 20, 20)) == 1
    monkeypatch.setenv("MPI_LOCALNRANKS", "2")
    assert processes_on_this_node() == 2 and fft_threads_for((64, 64, 64)) == 2
    monkeypatch.setenv("MPI_LOCALNRANKS", "8")
    assert fft_threads_for((64, 64, 64)) == 1
    monkeypatch.setenv("PWSOLID_THREADS", "3")      # an explicit per-process count wins
    assert fft_threads_for((64, 64, 64)) == 4      # (default_threads reads it; faked here)


# --------------------------------------------------------------------------- map_over_ranks

def test_map_over_ranks_serially_is_a_loop():
    seen = []
    out = map_over_ranks(lambda x: x * x, [1, 2, 3], SerialCommunicator(),
                         on_result=lambda i, r, here: seen.append((i, r, here)))
    assert out == [1, 4, 9] and seen == [(0, 1, True), (1, 4, True), (2, 9, True)]


@pytest.mark.parametrize("size", [2, 3])
def test_map_over_ranks_runs_contiguous_blocks_and_shares_every_result(size, monkeypatch):
    monkeypatch.setenv("PMI_SIZE", str(size))      # as under a launcher
    items = list(range(8))

    def body(comm):
        calls, seen, state = [], [], {"last": None}

        def work(x):
            assert isinstance(world(), SerialCommunicator)   # inner work is serial
            calls.append((x, state["last"]))
            state["last"] = x
            return 10 * x

        out = map_over_ranks(work, items, comm,
                             on_result=lambda i, r, here: seen.append((i, r, here)))
        return out, calls, seen

    results = _Group(size).run(_FakeCommunicator, body)
    done = []
    for rank, (out, calls, seen) in enumerate(results):
        assert out == [10 * x for x in items]
        block = list(split_evenly(len(items), size, rank))
        assert [c[0] for c in calls] == block
        # state chains along the block; the first item of each block starts fresh
        assert [c[1] for c in calls] == [None] + block[:-1]
        assert sorted(i for i, _, _ in seen) == items
        assert [i for i, _, here in seen if here] == block
        done += block
    assert sorted(done) == items


def test_map_over_ranks_balances_by_cost():
    costs = [5.0, 1.0, 1.0, 1.0, 1.0, 1.0]

    def body(comm):
        mine = []
        map_over_ranks(lambda x: mine.append(x) or x, range(6), comm, costs=costs)
        return mine

    a, b = _Group(2).run(_FakeCommunicator, body)
    assert a == [0] and b == [1, 2, 3, 4, 5]


def test_map_over_ranks_raises_the_first_failure_on_every_process():
    def work(x):
        if x in (3, 5):
            raise ValueError(f"bad item {x}")
        return x

    def body(comm):
        try:
            map_over_ranks(work, range(6), comm)
        except ValueError as exc:
            return str(exc)
        return "no error"

    assert _Group(2).run(_FakeCommunicator, body) == ["bad item 3", "bad item 3"]


# --------------------------------------------------------------------------- workflows

class _ModelOutcome(SimpleNamespace):
    pass


class _ModelSolver:
    """A cheap E(V) with a minimum at V0 (own construction), recording warm starts."""

    def __init__(self, v0):
        self.v0, self.calls, self.warm = v0, [], []

    def __call__(self, crystal, settings, warm):
        self.calls.append(crystal.volume)
        self.warm.append(None if warm is None else warm.volume)
        x = crystal.volume / self.v0 - 1.0
        energy = -8.0 + 2.0 * x * x - 1.5 * x ** 3 + 1e-3 / settings.cutoff
        return _ModelOutcome(total_energy=energy, converged=True, iterations=7,
                             density=np.full((4, 4, 4), 8.0 / crystal.volume), messages=())


def test_volume_scan_on_two_processes_matches_the_serial_scan(tmp_path):
    from pwsolid.workflows.equation_of_state import scan_volumes

    si = diamond(10.26, "Si")
    s = GroundStateSettings(cutoff=8.0, kpoint_mesh=(2, 2, 2))
    serial_solver = _ModelSolver(si.volume * 0.97)
    serial = scan_volumes(si, s, solver=serial_solver, comm=SerialCommunicator())

    solvers = [_ModelSolver(si.volume * 0.97) for _ in range(2)]
    stores = [tmp_path / "points.json", tmp_path / "points-not-written.json"]

    def body(comm):
        # rank 1 gets a store path of its own to show that it never writes one
        return scan_volumes(si, s, solver=solvers[comm.rank], comm=comm,
                            store=stores[comm.rank])

    scans = _Group(2).run(_FakeCommunicator, body)
    for scan in scans:
        assert [p.volume for p in scan.points] == [p.volume for p in serial.points]
        assert [p.energy for p in scan.points] == [p.energy for p in serial.points]
        assert scan.v0 == pytest.approx(serial.v0, rel=1e-12)
    # every point was solved once, by one process, and rank 0 wrote all of them
    assert sorted(solvers[0].calls + solvers[1].calls) == pytest.approx(sorted(serial_solver.calls))
    assert solvers[0].warm[0] is None and solvers[1].warm[0] is None
    # each process walks its contiguous block of volumes down from the largest
    assert solvers[0].calls == sorted(solvers[0].calls, reverse=True) and min(
        solvers[0].calls) > max(solvers[1].calls)
    import json
    assert len(json.loads(stores[0].read_text())["points"]) == len(serial.points)
    assert not stores[1].exists()


def test_convergence_study_on_two_processes_matches_the_serial_study():
    from pwsolid.workflows.convergence import converge_settings

    si = diamond(10.26, "Si")
    s = GroundStateSettings(cutoff=8.0, kpoint_mesh=(2, 2, 2))
    kwargs = dict(cutoffs=[6.0, 8.0, 10.0], meshes=[2, 4], with_lattice=True)
    serial = converge_settings(si, s, solver=_ModelSolver(si.volume), comm=SerialCommunicator(),
                               **kwargs)

    def body(comm):
        return converge_settings(si, s, solver=_ModelSolver(si.volume), comm=comm, **kwargs)

    for study in _Group(2).run(_FakeCommunicator, body):
        for got, ref in ((study.cutoff_series, serial.cutoff_series),
                         (study.mesh_series, serial.mesh_series)):
            assert [p.energy_per_atom for p in got] == [p.energy_per_atom for p in ref]
            assert [p.lattice_constant for p in got] == pytest.approx(
                [p.lattice_constant for p in ref], rel=1e-10)
        assert study.recommended_cutoff == serial.recommended_cutoff
        assert study.recommended_mesh == serial.recommended_mesh
        assert study.messages == serial.messages


class _BlockCommunicator(_FakeCommunicator):
    """The fake communicator with the buffer calls of the band groups."""

    def bcast_array(self, array, root=0):
        array[...] = self.bcast(np.array(array), root)
        return array

    def alltoall_arrays(self, pieces, shapes):
        sent = self.allgather([np.array(p) for p in pieces])
        return [sent[r][self.rank].reshape(shape) for r, shape in enumerate(shapes)]


def test_plane_wave_columns_are_shared_and_transposed_for_the_operator():
    # three fake processes hold column slices; the operator sees whole rows, a
    # slice of them on each process, and every process gets its columns back
    rng = np.random.default_rng(5)
    matrix = rng.standard_normal((10, 10)) + 1j * rng.standard_normal((10, 10))
    block = rng.standard_normal((4, 10)) + 0j

    def body(comm):
        seen = []

        def apply(rows):
            seen.append(rows.shape)
            return rows @ matrix.T

        local = parallel.share_columns(comm, block if comm.rank == 0 else None)
        out = parallel.apply_by_plane_waves(comm, 10, apply)(local)
        return parallel.collect_columns(comm, out), local.shape, seen

    results = _Group(3).run(_BlockCommunicator, body)
    np.testing.assert_allclose(results[0][0], block @ matrix.T, rtol=0, atol=1e-12)
    assert results[1][0] is None
    assert [r[1] for r in results] == [(4, 4), (4, 3), (4, 3)]
    assert [r[2] for r in results] == [[(2, 10)], [(1, 10)], [(1, 10)]]


def test_davidson_on_plane_wave_slices_matches_one_process():
    # the eigensolver with its vectors' columns on two fake processes, the
    # overlaps summed by the communicator, against the same problem on one
    from pwsolid.eigensolver import davidson

    rng = np.random.default_rng(7)
    n = 80
    d = np.sort(rng.uniform(0, 30, n))
    a = rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))
    h = np.diag(d) + 0.05 * (a + a.conj().T)
    guess = rng.standard_normal((5, n)) + 0j

    def precondition_for(cols):
        return lambda r, e: r / np.maximum(np.abs(d[cols][None, :] - e[:, None]), 0.3)

    serial = davidson(lambda x: x @ h.T, precondition_for(slice(0, n)), guess, tolerance=1e-9,
                      max_iterations=300)

    def body(comm):
        cols = parallel.plane_wave_slice(comm, n)
        res = davidson(parallel.apply_by_plane_waves(comm, n, lambda x: x @ h.T),
                       precondition_for(cols), guess[:, cols], tolerance=1e-9,
                       max_iterations=300, total=comm.allreduce_sum)
        return res.eigenvalues, res.iterations, parallel.collect_columns(comm, res.vectors)

    (e0, it0, vectors), (e1, it1, _) = _Group(2).run(_BlockCommunicator, body)
    assert np.array_equal(e0, e1) and it0 == it1    # every process took the same steps
    np.testing.assert_allclose(e0, serial.eigenvalues, rtol=0, atol=1e-10)
    overlap = np.abs(vectors.conj() @ serial.vectors.T)
    np.testing.assert_allclose(overlap, np.eye(5), atol=1e-6)


def test_band_groups_are_single_processes_serially():
    group, channels = parallel.band_group(SerialCommunicator(), (0, 1))
    apply = lambda x: x  # noqa: E731
    assert group.size == 1 and channels == (0, 1)
    assert parallel.apply_by_plane_waves(group, 4, apply) is apply
