"""The vibrational-thermodynamics and quasi-harmonic commands end to end.

vibrational-thermodynamics reads a phonon result written by hand here: a Debye
density of states (P. Debye, Ann. Phys. 39, 789 (1912)), whose zero-point energy
(9/8) k_B Theta per atom and Dulong-Petit limit 3 R are exact; the quasi-harmonic
command runs with the static scan and the phonons replaced by a Grueneisen model
(the physics is checked in tests/validation/test_quasi_harmonic_models.py): these
tests check the plumbing, the files and the refusals.
"""

import json
from types import SimpleNamespace

import numpy as np
import pytest

from pwsolid.cli import main
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_OK
from pwsolid.units import GAS_CONSTANT_J_PER_MOL_K, HARTREE_EV, HARTREE_THZ, KELVIN_HA


def _debye_document(theta=645.0, n_atoms=2, points=2001):
    nu_d = theta * KELVIN_HA * HARTREE_THZ          # Debye frequency, THz
    f = np.linspace(0.0, nu_d, points)
    g = 9 * n_atoms * f ** 2 / nu_d ** 3             # states per THz per cell, 3 N in all
    return {"schema": "pwsolid.phonons/1",
            "primitive_cell": {"species": ["Si"] * n_atoms},
            "density_of_states": {"frequencies_THz": f.tolist(),
                                  "states_per_THz_per_cell": g.tolist(), "q_mesh": [8, 8, 8]}}


def test_vibrational_thermodynamics_command(tmp_path, capsys):
    path = tmp_path / "si.phonons.json"
    path.write_text(json.dumps(_debye_document()))
    code = main(["vibrational-thermodynamics", str(path), "--highest-temperature", "20000",
                 "--temperature-step", "100"])
    assert code == EXIT_OK
    assert "zero-point energy" in capsys.readouterr().out
    doc = json.loads((tmp_path / "si.thermal.json").read_text())
    assert doc["schema"] == "pwsolid.vibrational-thermodynamics/1" and doc["converged"]
    # (9/8) k_B Theta per atom (Debye); trapezoid on 2001 points: 1e-6
    zpe = 9 / 8 * 645.0 * KELVIN_HA * HARTREE_EV * 1e3
    assert doc["zero_point_energy_meV_per_atom"] == pytest.approx(zpe, rel=1e-5)
    # Dulong-Petit 3R per mole of atoms with the Debye correction 1 - (Theta/T)^2/20
    c = doc["heat_capacity_J_per_mol_K"][-1]
    assert c == pytest.approx(3 * GAS_CONSTANT_J_PER_MOL_K * (1 - (645 / 20000) ** 2 / 20),
                              rel=1e-5)
    assert (tmp_path / "si.thermal.csv").read_text().count("\n") == 202
    assert (tmp_path / "si.thermal.png").stat().st_size > 1000


@pytest.mark.parametrize("content, option", [
    ('{"schema": "pwsolid.result/3"}', []),
    ("not json", []),
    (None, ["--temperature-step", "0"]),
    (None, ["--highest-temperature", "hot"]),
])
def test_vibrational_thermodynamics_refusals(tmp_path, capsys, content, option):
    path = tmp_path / "x.json"
    path.write_text(content if content is not None else json.dumps(_debye_document()))
    assert main(["vibrational-thermodynamics", str(path), *option]) == EXIT_INVALID_INPUT
    assert "Traceback" not in capsys.readouterr().err


INPUT = """
title = "Brightfilm substrate expansion (model)"
[crystal]
prototype = "diamond"
lattice_constant = "5.43 angstrom"
species = ["Si"]
[thermal]
highest_temperature = "300 K"
temperature_step = "50 K"
volume_points = 7
volume_range = 0.03
q_mesh = [1, 1, 1]
"""


def test_quasi_harmonic_command_with_model_solvers(tmp_path, monkeypatch, capsys):
    import pwsolid.workflows.thermal_expansion as qh
    from pwsolid.eos import birch_murnaghan_energy

    v_ref = 270.0

    def scan_solver(cell, settings, warm):
        e = birch_murnaghan_energy(cell.volume, -7.9, v_ref, 0.0033, 4.2)
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=1, density=None)

    def phonon_solver(cell, settings, phonon_settings, **kwargs):
        nu = np.array([[3.0, 3.0, 6.0, 12.0, 12.0, 13.0]]) * (cell.volume / v_ref) ** -1.1
        mesh = SimpleNamespace(frequencies_THz=nu, weights=np.ones(1), mesh=(1, 1, 1))
        return SimpleNamespace(mesh_frequencies=lambda q: mesh, converged=True, messages=())

    real = qh.quasi_harmonic
    monkeypatch.setattr(qh, "quasi_harmonic", lambda *a, **k: real(
        *a, **{**k, "scan_solver": scan_solver, "phonon_solver": phonon_solver}))
    monkeypatch.setattr("pwsolid.commands.quasi_harmonic._phonon_settings", lambda run: None)
    path = tmp_path / "si-model.toml"
    path.write_text(INPUT)
    assert main(["quasi-harmonic", str(path), "--output-dir", str(tmp_path)]) == EXIT_OK
    out = capsys.readouterr().out
    assert "zero-point" in out and "alpha (1e-6/K)" in out
    doc = json.loads((tmp_path / "si-model.quasi-harmonic.json").read_text())
    assert doc["schema"] == "pwsolid.quasi-harmonic/1" and doc["converged"]
    assert doc["temperatures_K"] == [0.0, 50.0, 100.0, 150.0, 200.0, 250.0, 300.0]
    assert doc["zero_point"]["lattice_change_percent"] > 0
    assert doc["input"]["thermal"]["q_mesh"] == [1, 1, 1]
    assert (tmp_path / "si-model.quasi-harmonic.png").stat().st_size > 1000


def test_thermal_table_refusals(tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text(INPUT.replace('"300 K"', "300"))
    assert main(["quasi-harmonic", str(path)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "thermal.highest_temperature" in err and "Traceback" not in err
