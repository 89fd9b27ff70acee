"""Faults: interrupted runs resume, checkpoints are checked, results are not clobbered,
a stalled SCF tries its remedies and then says what to change."""

import json
import os
import signal
import subprocess
import sys
import time
import warnings

import pytest

import pwsolid
from pwsolid.cli import main
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_NOT_CONVERGED, EXIT_OK

SETTINGS = pwsolid.GroundStateSettings(cutoff=8.0, kpoint_mesh=(2, 2, 2))
INPUT = """
title = "Brightfilm resume drill"
[crystal]
prototype = "diamond"
lattice_constant = "5.43 angstrom"
species = "Si"
[basis]
cutoff = "{cutoff} Ha"
[brillouin_zone]
mesh = [{mesh}, {mesh}, {mesh}]
"""


@pytest.fixture
def silicon_small():
    return pwsolid.diamond(pwsolid.angstrom(5.431), "Si")


def test_interrupted_run_resumes_to_the_same_energy(silicon_small, tmp_path):
    # Resume invariance: continuing from the checkpoint of iteration 3 must reach the
    # uninterrupted run's energy to 1e-8 Ha (here: the same iterations, bit for bit).
    reference = pwsolid.ground_state(silicon_small, SETTINGS)
    ckpt = tmp_path / "si.checkpoint.npz"

    def interrupt_at_four(line):
        if line.startswith("   4 "):
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        pwsolid.ground_state(silicon_small, SETTINGS, log=interrupt_at_four, checkpoint=ckpt)
    assert ckpt.exists()
    resumed = pwsolid.ground_state(silicon_small, SETTINGS, checkpoint=ckpt)
    assert resumed.converged
    assert abs(resumed.total_energy - reference.total_energy) < 1e-8
    assert any("resumed" in m for m in resumed.messages)


def test_foreign_or_corrupted_checkpoints_are_refused(silicon_small, tmp_path):
    ckpt = tmp_path / "c.npz"
    with pytest.raises(KeyboardInterrupt):
        pwsolid.ground_state(silicon_small, SETTINGS, checkpoint=ckpt,
                             log=lambda line: (_ for _ in ()).throw(KeyboardInterrupt)
                             if line.startswith("   2 ") else None)
    with pytest.raises(pwsolid.InputError, match="cutoff_Ha"):
        pwsolid.ground_state(silicon_small, SETTINGS.replace(cutoff=9.0), checkpoint=ckpt)
    good = ckpt.read_bytes()
    raw = bytearray(good)
    raw[len(raw) // 3] ^= 0x55                       # a flipped bit
    ckpt.write_bytes(bytes(raw))
    with pytest.raises(pwsolid.InputError, match="c.npz"):
        pwsolid.ground_state(silicon_small, SETTINGS, checkpoint=ckpt)
    ckpt.write_bytes(good[: len(good) // 2])         # a truncated file
    with pytest.raises(pwsolid.InputError, match="c.npz"):
        pwsolid.ground_state(silicon_small, SETTINGS, checkpoint=ckpt)


def test_finished_results_are_not_overwritten_unless_asked(tmp_path, capsys):
    path = tmp_path / "run.toml"
    path.write_text(INPUT.format(cutoff=5, mesh=2))
    assert main(["ground-state", str(path), "--quiet"]) == EXIT_OK
    assert not (tmp_path / "run.checkpoint.npz").exists()     # removed once final
    assert main(["ground-state", str(path), "--quiet"]) == EXIT_INVALID_INPUT
    assert "--overwrite" in capsys.readouterr().err
    assert main(["ground-state", str(path), "--quiet", "--overwrite"]) == EXIT_OK


def test_a_stalled_scf_tries_remedies_then_says_what_to_change(silicon_small):
    # A density tolerance below round-off can never be met: the residual stalls, the
    # documented remedies are tried in turn, and the run ends unconverged with advice.
    # (At 1e-15 the first remedy alone gets there: a smaller weight and a longer
    # history take the residual from a 1e-9 plateau to 1e-15.) Each remedy waits for a
    # fresh stall of 12 iterations; the third came at iteration 50 in one run, so 60
    # leaves it room to act.
    s = SETTINGS.replace(density_tolerance=1e-18, energy_tolerance=1e-18, max_iterations=60)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pwsolid.ConvergenceWarning)
        gs = pwsolid.ground_state(silicon_small, s)
    assert not gs.converged
    remedies = [m for m in gs.messages if "remedy" in m]
    assert len(remedies) == 3
    # silicon without smearing mixes with the model dielectric at full weight by default
    assert "mixing weight 1 -> 0.5" in remedies[0] and "Kerker" in remedies[1]
    assert "bands 8 -> 12" in remedies[2]
    assert gs.eigenvalues.shape[1] == 12 and gs.setup.n_bands == 12
    assert "self_consistency.max_iterations" in gs.messages[-1]


def test_not_converged_result_is_marked_and_exit_code_is_four(tmp_path):
    path = tmp_path / "short.toml"
    path.write_text(INPUT.format(cutoff=5, mesh=2) + "[self_consistency]\nmax_iterations = 3\n")
    assert main(["ground-state", str(path), "--quiet"]) == EXIT_NOT_CONVERGED
    doc = json.loads((tmp_path / "short.result.json").read_text())
    assert doc["converged"] is False and "max_iterations" in doc["messages"][-1]
    assert (tmp_path / "short.checkpoint.npz").exists()    # kept: the run can continue


@pytest.mark.slow
@pytest.mark.parametrize("how", [signal.SIGTERM, signal.SIGKILL], ids=["sigterm", "sigkill"])
def test_a_stopped_run_resumes_with_the_same_command(tmp_path, how):
    # A terminated (SIGTERM, as a batch system sends) or killed (SIGKILL: no chance to
    # clean up) process resumes from the last periodic checkpoint with the same command
    # and reaches the uninterrupted energy to 1e-8 Ha.
    path = tmp_path / "long.toml"
    path.write_text(INPUT.format(cutoff=14, mesh=6))
    ckpt = tmp_path / "long.checkpoint.npz"
    cmd = [sys.executable, "-m", "pwsolid.cli", "ground-state", str(path), "--quiet"]
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    deadline = time.time() + 120
    while not ckpt.exists() and proc.poll() is None and time.time() < deadline:
        time.sleep(0.02)
    if proc.poll() is not None:
        pytest.skip("the run finished before it could be interrupted (machine too fast)")
    time.sleep(0.3)                   # stop it somewhere inside a later iteration
    proc.send_signal(how)
    _, err = proc.communicate(timeout=120)
    if how == signal.SIGTERM:
        assert proc.returncode == 130 and "run the same command" in err
    else:
        assert proc.returncode == -signal.SIGKILL
    assert ckpt.exists()
    done = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=600)
    assert done.returncode == 0, done.stderr
    resumed = json.loads((tmp_path / "long.result.json").read_text())["energy"]["total_Ha"]
    run = pwsolid.load_input(path)
    reference = pwsolid.ground_state(run.crystal, run.settings).total_energy
    assert abs(resumed - reference) < 1e-8


@pytest.mark.slow
def test_a_killed_volume_scan_resumes_skipping_finished_points(tmp_path):
    # Kill (SIGKILL) an equation-of-state scan once some of its points are stored, at a
    # random moment inside a later point; the same command then skips the stored points
    # and gives the same energy curve as an uninterrupted scan.
    import random

    path = tmp_path / "scan.toml"
    path.write_text(INPUT.format(cutoff=10, mesh=2))
    store = tmp_path / "scan.eos-points.json"
    # 9 points: warm-started points take about 0.13 s each here, so 5 points could all be
    # stored inside the random delay below (measured: one CI run killed a finished scan)
    points = 9
    cmd = [sys.executable, "-m", "pwsolid.cli", "equation-of-state", str(path), "--quiet",
           "--points", str(points), "--volume-range", "0.05"]
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    wanted = random.Random().randint(1, 3)
    deadline = time.time() + 300

    def stored():
        try:
            return len(json.loads(store.read_text()).get("points", []))
        except (OSError, ValueError):
            return 0

    while stored() < wanted and proc.poll() is None and time.time() < deadline:
        time.sleep(0.01)
    if proc.poll() is not None:
        pytest.skip("the scan finished before it could be killed (machine too fast)")
    time.sleep(random.Random().uniform(0.0, 0.1))
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    kept = stored()
    assert 1 <= kept < points
    done = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=600)
    assert done.returncode == 0, done.stderr
    assert f"{kept} from the restart file" in done.stdout
    resumed = json.loads((tmp_path / "scan.eos.json").read_text())
    # the uninterrupted scan, in a directory of its own
    fresh_dir = tmp_path / "fresh"
    fresh_dir.mkdir()
    (fresh_dir / "scan.toml").write_text(path.read_text())
    cmd[4] = str(fresh_dir / "scan.toml")
    ref = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=600)
    assert ref.returncode == 0, ref.stderr
    reference = json.loads((fresh_dir / "scan.eos.json").read_text())
    assert "from the restart file" not in ref.stdout
    # every point converged to 1e-8 Ha, from different starts: the curves agree to 1e-7
    got, want = resumed["energy_curve"], reference["energy_curve"]
    assert got["volumes_bohr3"] == pytest.approx(want["volumes_bohr3"], rel=1e-12)
    assert got["energies_Ha"] == pytest.approx(want["energies_Ha"], abs=1e-7)
