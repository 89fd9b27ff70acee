"""Result documents, density checkpoints and the command line."""

import json

import numpy as np
import pytest

from pwsolid.cli import main
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_NOT_CONVERGED, EXIT_OK, InputError
from pwsolid.results import load_density, save_density

SMALL_INPUT = """
title = "Brightfilm quick check"
[crystal]
prototype = "diamond"
lattice_constant = "5.43 angstrom"
species = ["Si"]
[basis]
cutoff = "5 Ha"
[brillouin_zone]
mesh = [2, 2, 2]
[self_consistency]
energy_tolerance = "1e-7 Ha"
density_tolerance = 1e-5
{extra}
"""


@pytest.fixture
def small_input(tmp_path):
    path = tmp_path / "quick.toml"
    path.write_text(SMALL_INPUT.format(extra=""))
    return path


def test_ground_state_command_writes_a_complete_document(small_input, capsys):
    assert main(["ground-state", str(small_input), "--quiet"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "Total energy" in out and "band gap" in out
    doc = json.loads((small_input.parent / "quick.result.json").read_text())
    assert doc["schema"] == "pwsolid.ground-state/1" and doc["converged"] is True
    for key in ("energy", "scf", "kpoints", "eigenvalues_eV", "band_edges", "basis", "input",
                "program", "timing", "crystal"):
        assert key in doc
    terms = doc["energy"]["terms_Ha"]
    assert abs(sum(terms.values()) - doc["energy"]["total_Ha"]) < 1e-12
    assert len(doc["eigenvalues_eV"]) == len(doc["kpoints"]["weights"])
    assert abs(sum(doc["kpoints"]["weights"]) - 1) < 1e-12
    assert doc["input"]["basis"]["cutoff"] == "5 Ha"
    dens = load_density(small_input.parent / "quick.density.npz")
    assert list(dens["density"].shape) == doc["basis"]["fft_grid"]
    # forces and stress by default: ideal diamond has zero forces by symmetry (site
    # symmetry -43m), a cubic crystal an isotropic stress; pressure = -trace/3
    forces, stress = doc["forces"], doc["stress"]
    assert len(forces["atoms"]) == 2 and forces["largest_force_Ha_per_bohr"] < 1e-10
    assert "largest force" in out and "pressure" in out
    tensor = np.array(stress["tensor_GPa"])
    np.testing.assert_allclose(tensor, tensor[0, 0] * np.eye(3), atol=1e-8)
    assert stress["pressure_GPa"] == pytest.approx(-np.trace(tensor) / 3)


def test_energy_only_skips_forces_and_stress(small_input, capsys):
    assert main(["ground-state", str(small_input), "--quiet", "--energy-only"]) == EXIT_OK
    doc = json.loads((small_input.parent / "quick.result.json").read_text())
    assert doc["forces"] is None and doc["stress"] is None
    assert "largest force" not in capsys.readouterr().out


def test_not_converged_exit_code(small_input, capsys):
    small_input.write_text(SMALL_INPUT.format(extra="max_iterations = 2"))
    assert main(["ground-state", str(small_input), "--quiet"]) == EXIT_NOT_CONVERGED
    doc = json.loads((small_input.parent / "quick.result.json").read_text())
    assert doc["converged"] is False and doc["messages"]
    assert "max_iterations" in capsys.readouterr().err


def test_invalid_input_exit_code_and_message(tmp_path, capsys):
    path = tmp_path / "typo.toml"
    path.write_text(SMALL_INPUT.format(extra="").replace("cutoff", "cutof"))
    assert main(["ground-state", str(path)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "typo.toml" in err and "cutoff" in err and "Traceback" not in err
    assert main(["check-input", str(tmp_path / "missing.toml")]) == EXIT_INVALID_INPUT


def test_usage_errors_and_listings(capsys):
    assert main([]) == 2
    assert main(["no-such-command"]) == 2
    assert main(["list-pseudopotentials"]) == EXIT_OK
    assert "Si-appelbaum-hamann.toml" in capsys.readouterr().out
    assert main(["input-keys"]) == EXIT_OK
    assert "basis.cutoff" in capsys.readouterr().out


def test_density_checkpoint_refuses_corruption(small_input, tmp_path):
    from pwsolid.config import load_input
    from pwsolid.scf import ground_state

    run = load_input(small_input)
    gs = ground_state(run.crystal, run.settings)
    path = tmp_path / "d.npz"
    save_density(path, gs)
    data = load_density(path)
    assert np.array_equal(data["density"], gs.density)
    raw = bytearray(path.read_bytes())
    raw[len(raw) // 2] ^= 0xFF
    path.write_bytes(bytes(raw))
    with pytest.raises(InputError):
        load_density(path)
    (tmp_path / "junk.npz").write_bytes(b"not an archive")
    with pytest.raises(InputError, match="junk.npz"):
        load_density(tmp_path / "junk.npz")


@pytest.mark.parametrize("moment", [2.0, None])
def test_spin_polarised_documents_count_each_electron_once(moment):
    # issue 15: occupations of both spin channels, weighted by the k-point weights, sum to
    # the electron count (they were 0..2 per state in each channel, twice the count)
    import warnings

    from pwsolid.crystal import diamond
    from pwsolid.results import ground_state_document
    from pwsolid.scf import ground_state
    from pwsolid.settings import GroundStateSettings

    settings = GroundStateSettings(cutoff=4.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0),
                                   spin_polarized=True, fixed_moment=moment,
                                   initial_moment=1.0, smearing="fermi-dirac",
                                   smearing_width=0.02, max_iterations=3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")        # three iterations do not converge
        gs = ground_state(diamond(10.26, "Si"), settings)
    doc = ground_state_document(gs)
    w = np.array(doc["kpoints"]["weights"])
    up = np.array(doc["occupations"]).sum(axis=1)
    down = np.array(doc["spin"]["occupations_down"]).sum(axis=1)
    assert np.all(np.array(doc["occupations"]) <= 1 + 1e-12)
    assert w @ (up + down) == pytest.approx(doc["electrons_per_cell"], abs=1e-8)
    if moment is not None:
        assert w @ (up - down) == pytest.approx(moment, abs=1e-8)
