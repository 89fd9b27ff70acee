"""Results do not depend on the number of MPI processes.

The tests run in the ordinary (serial) pytest process and launch small programs
(``mpi_programs.py``) serially and under ``mpiexec -n 2`` as subprocesses, then
compare what process 0 wrote. They need mpi4py and an ``mpiexec``; the project's
``test`` extra installs both (the ``mpich`` wheel ships the launcher). Without
them the tests are skipped with the reason.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

HERE = Path(__file__).resolve().parent
PROGRAMS = HERE / "mpi_programs.py"


def _launcher() -> str | None:
    try:
        import mpi4py  # noqa: F401
    except ImportError:
        return None
    beside = Path(sys.executable).parent / "mpiexec"
    return str(beside) if beside.exists() else shutil.which("mpiexec")


LAUNCHER = _launcher()
pytestmark = [
    pytest.mark.slow,     # a few seconds each: every test starts Python processes
    pytest.mark.skipif(LAUNCHER is None,
                       reason="MPI tests need mpi4py and mpiexec (pip install mpi4py mpich, "
                              "or the project's test extra)"),
]


def _env():
    env = dict(os.environ)
    env.pop("PWSOLID_THREADS", None)
    env["PYTHONWARNINGS"] = "error::RuntimeWarning"   # as strict as the test suite
    return env


def _run(args, tmp_path, processes=None, name="out.json", timeout=120):
    out = tmp_path / name
    cmd = [sys.executable, str(PROGRAMS), *args, str(out)]
    if processes is not None:
        cmd = [LAUNCHER, "-n", str(processes)] + cmd
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=_env(),
                          cwd=tmp_path)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    return json.loads(out.read_text())


@pytest.mark.parametrize("pseudopotential", ["Si-appelbaum-hamann.toml",
                                             "Si-goedecker-teter-hutter.toml"])
def test_ground_state_is_independent_of_the_process_count(tmp_path, pseudopotential):
    serial = _run([pseudopotential], tmp_path, name="serial.json")
    two = _run([pseudopotential], tmp_path, processes=2, name="two.json")
    assert serial["processes"] == 1 and two["processes"] == 2
    # the k-points are split between the processes, each owned exactly once
    owned = sorted(k for part in two["owned_kpoints"] for k in part)
    assert owned == list(range(serial["kpoints"])) and all(two["owned_kpoints"])
    # every process holds the same (broadcast) energy
    assert len(set(two["energies_on_every_process"])) == 1
    # the reductions change only the order of additions (1e-16 relative); the
    # variational energy is insensitive to it far below the 1e-10 Ha tolerance
    assert abs(two["total_energy_Ha"] - serial["total_energy_Ha"]) < 1e-10
    # eigenvalues: the last SCF iterations may differ by one, and the eigensolver
    # works to 1e-7 residual norm near convergence (see scf._eigensolver_tolerance)
    eig1, eig2 = np.array(serial["eigenvalues_Ha"]), np.array(two["eigenvalues_Ha"])
    assert eig1.shape == eig2.shape
    np.testing.assert_allclose(eig2, eig1, atol=1e-7, rtol=0)
    assert abs(two["density_integral"] - serial["density_integral"]) < 1e-10


def test_forces_are_independent_of_the_process_count(tmp_path):
    serial = _run(["forces"], tmp_path, name="serial.json")
    two = _run(["forces"], tmp_path, processes=2, name="two.json")
    f1, f2 = np.array(serial["forces_Ha_per_bohr"]), np.array(two["forces_Ha_per_bohr"])
    # every process holds the same (summed) forces
    assert two["forces_on_every_process"][0] == two["forces_on_every_process"][1]
    assert np.abs(np.array(serial["nonlocal_Ha_per_bohr"])).max() > 1e-3
    # forces are first order in the SCF residual (1e-7 here): agreement well inside 1e-6
    np.testing.assert_allclose(f2, f1, atol=1e-6, rtol=0)


def test_volume_scan_points_are_spread_over_the_processes(tmp_path):
    serial = _run(["volume-scan"], tmp_path, name="serial.json")
    two = _run(["volume-scan"], tmp_path, processes=2, name="two.json")
    # both processes end with the whole scan
    assert two["points_on_every_process"][0] == two["points_on_every_process"][1]
    v1, e1 = np.array(serial["points"]).T
    v2, e2 = np.array(two["points"]).T
    np.testing.assert_allclose(v2, v1, rtol=1e-14)
    # a block's first point starts cold under MPI, warm serially: agreement to the
    # SCF tolerance (1e-9 Ha) with room, not to the last bit
    np.testing.assert_allclose(e2, e1, atol=1e-8, rtol=0)
    assert abs(two["v0"] - serial["v0"]) < 1e-6 * serial["v0"]


def test_command_line_under_mpiexec_prints_and_writes_once(tmp_path):
    inp = tmp_path / "tiny.toml"
    inp.write_text("\n".join([
        'title = "Brightfilm parallel check"',
        "[crystal]", 'prototype = "diamond"', 'lattice_constant = "5.431 angstrom"',
        'species = ["Si"]', "[basis]", 'cutoff = "5 Ha"', "[brillouin_zone]",
        "mesh = [2, 2, 2]", "shift = [0, 0, 0]", "[output]",
        'result_file = "tiny.result.json"', 'density_file = "tiny.density.npz"', ""]))
    cmd = [LAUNCHER, "-n", "2", sys.executable, "-m", "pwsolid.cli", "ground-state",
           str(inp), "--quiet"]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=120, env=_env(),
                          cwd=tmp_path)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert proc.stdout.count("Total energy and its terms") == 1
    assert (tmp_path / "tiny.result.json").exists() and (tmp_path / "tiny.density.npz").exists()
    doc = json.loads((tmp_path / "tiny.result.json").read_text())
    assert doc["converged"]
    serial = subprocess.run([sys.executable, "-m", "pwsolid.cli", "ground-state", str(inp),
                             "--quiet", "--result-file", "serial.json",
                             "--density-file", "serial.npz"],
                            capture_output=True, text=True, timeout=120, env=_env(), cwd=tmp_path)
    assert serial.returncode == 0, serial.stdout + serial.stderr
    ref = json.loads((tmp_path / "serial.json").read_text())
    assert abs(doc["energy"]["total_Ha"] - ref["energy"]["total_Ha"]) < 1e-10


def test_gamma_supercell_shares_the_bands_of_its_one_kpoint(tmp_path):
    serial = _run(["gamma-supercell"], tmp_path, name="serial.json")
    two = _run(["gamma-supercell"], tmp_path, processes=2, name="two.json")
    # one k-point: process 0 owns it, process 1 owns none but does transforms
    assert two["owned_kpoints"] == [[0], []]
    assert two["transforms_per_process"][1] > 0
    assert sum(two["transforms_per_process"]) >= serial["transforms_per_process"][0]
    assert len(set(two["energies_on_every_process"])) == 1
    # the rows of each H block are computed in other FFT batches: rounding only,
    # far below the 1e-10 Ha of the SCF tolerance
    assert abs(two["total_energy_Ha"] - serial["total_energy_Ha"]) < 1e-10
    # a Ritz value lies within its residual norm of an eigenvalue, and every band
    # meets the eigensolver's residual tolerance (at most 1e-6); the 16 occupied
    # bands as in the k-point test above, the empty ones (the top one cuts a
    # degenerate set) to that bound
    eig1, eig2 = np.array(serial["eigenvalues_Ha"]), np.array(two["eigenvalues_Ha"])
    np.testing.assert_allclose(eig2, eig1, atol=2e-6, rtol=0)
    np.testing.assert_allclose(eig2[:, :16], eig1[:, :16], atol=1e-7, rtol=0)


def test_band_structure_kpoints_are_spread_and_gathered(tmp_path):
    serial = _run(["band-path"], tmp_path, name="serial.json")
    two = _run(["band-path"], tmp_path, processes=2, name="two.json")
    assert two["bands_on_every_process"][0] == two["bands_on_every_process"][1]
    # the same eigensolver per k-point on densities that agree to the SCF
    # tolerance (1e-7): eigenvalues to well below the 1e-6 residual norm
    np.testing.assert_allclose(two["bands_Ha"], serial["bands_Ha"], atol=1e-8, rtol=0)
    assert two["progress"] == serial["progress"] == [[i, 5] for i in range(1, 6)]


def test_phonon_displacements_are_shared_and_recorded_by_their_process(tmp_path):
    (tmp_path / "one").mkdir()
    (tmp_path / "two").mkdir()
    serial = _run(["phonons"], tmp_path / "one", name="serial.json")
    two = _run(["phonons"], tmp_path / "two", processes=2, name="two.json")
    assert serial["computed_by"] == [0, 0] and two["computed_by"] == [0, 1]
    # each process wrote the record of the displacement it computed
    assert two["records"] == serial["records"] == ["displacement-001.npz",
                                                   "displacement-002.npz"]
    # the same forces whichever process computed them (an analytic model: to rounding)
    assert np.allclose(two["frequencies"], serial["frequencies"], rtol=1e-12)
    assert all(np.allclose(f, two["frequencies"]) for f in two["frequencies_on_every_process"])
