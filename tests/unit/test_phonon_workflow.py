"""The phonon workflow with an analytic force model in place of the SCF.

The solver seam takes a harmonic spring model of diamond (tests/spring_model.py:
springs along and across the nearest-neighbour bonds, attached at the equilibrium
bond directions): its forces are exact and instant, so the plumbing (displacements,
records, resume, document, mesh frequencies for thermodynamics) is checked
against the model's own force constants.
"""

import json

import numpy as np
import pytest

from pwsolid.crystal import diamond, zincblende
from pwsolid.errors import InputError
from pwsolid.force_constants import make_supercell
from pwsolid.settings import GroundStateSettings
from pwsolid.units import AMU_ELECTRON_MASSES
from pwsolid.workflows.phonons import (POLAR_CAUTION, PhononSettings,
                                       force_constants_from_document, phonons)
from spring_model import spring_solver

A_SI = 10.26          # bohr, near the LDA lattice constant of silicon (from memory)
CUTOFF = 6.5          # bohr: first neighbours (4.44 bohr) only; second are at 7.25
SETTINGS = GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2))


def _run(tmp_path=None, crystal=None, calls=None, **kw):
    crystal = crystal or diamond(A_SI, "Si")
    calls = [] if calls is None else calls
    sup = make_supercell(crystal, (2, 2, 2)).supercell
    ps = PhononSettings(supercell=(2, 2, 2), dos_mesh=(6, 6, 6), path_points=40)
    return phonons(crystal, SETTINGS, ps, solver=spring_solver(sup, CUTOFF, calls=calls),
                   record_dir=None if tmp_path is None else tmp_path / "records", **kw), calls


def test_workflow_result_and_document():
    result, calls = _run()
    assert len(calls) == 1 and result.converged
    assert result.checks["acoustic_sum_violation_before"] < 1e-12
    # the Gamma-centred supercell mesh keeps the primitive spacing: 2x2x2 -> 1x1x1
    assert result.supercell_kpoint_mesh == (1, 1, 1)
    gamma = result.special_points["Γ"]
    assert np.allclose(gamma[:3], 0, atol=1e-4)
    doc = json.loads(json.dumps(result.as_document()))
    assert doc["schema"] == "pwsolid.phonons/1"
    assert doc["density_of_states"]["integrated_states"][-1] == pytest.approx(6.0, abs=1e-6)
    assert "LO-TO" not in " ".join(doc["messages"])
    assert any("Gamma-centred" in m for m in doc["messages"])   # the input mesh was shifted


def test_mesh_frequencies_for_thermodynamics():
    result, _ = _run()
    grid = result.mesh_frequencies((4, 4, 4))
    assert grid.frequencies_THz.shape == (64, 6)
    assert grid.weights.sum() == pytest.approx(1.0)
    # the same numbers as the force constants give directly
    fc = result.force_constants
    assert np.allclose(grid.frequencies_THz, fc.frequencies(grid.q_fractional))
    # masses: the standard atomic weight of Si
    assert fc.masses[0] == pytest.approx(28.085 * AMU_ELECTRON_MASSES)


def test_force_constants_come_back_from_the_saved_document():
    result, _ = _run()
    doc = json.loads(json.dumps(result.as_document()))
    fc = force_constants_from_document(doc)
    # every row rebuilt by translation equals the computed one
    assert np.allclose(fc.phi, result.force_constants.phi, atol=1e-15)
    q = np.random.default_rng(0).uniform(-0.5, 0.5, (5, 3))
    assert np.allclose(fc.frequencies(q), result.frequencies(q), atol=1e-12)


def test_resume_from_records_without_recomputing(tmp_path):
    first, calls = _run(tmp_path)
    assert len(calls) == 1
    assert len(list((tmp_path / "records").glob("*.npz"))) == 1
    again, calls2 = _run(tmp_path)
    assert calls2 == [] and again.history[0]["reused_from_record"]
    assert np.allclose(again.forces, first.forces)


def test_records_of_another_calculation_are_refused(tmp_path):
    _run(tmp_path)
    other = diamond(A_SI * 1.01, "Si")
    with pytest.raises(InputError, match="differs"):
        _run(tmp_path, crystal=other)
    result, calls = _run(tmp_path, crystal=other, accept_mismatch=True)
    assert calls == [] and any("another calculation" in m for m in result.messages)


def test_polar_caution_for_two_elements():
    result, _ = _run(crystal=zincblende(10.68, ("Ga", "As")))
    assert POLAR_CAUTION in result.messages


@pytest.mark.parametrize("kw", [dict(supercell=(0, 1, 1)), dict(amplitude=1.0),
                                dict(dos_method="histogram"), dict(dos_mesh=(4, 4)),
                                dict(path_points=3)])
def test_bad_phonon_settings(kw):
    with pytest.raises(InputError):
        PhononSettings(**kw)


def test_a_run_killed_midway_resumes_with_the_missing_displacements_only(tmp_path):
    gaas = zincblende(10.68, ("Ga", "As"))      # two inequivalent atoms: two displacements
    sup = make_supercell(gaas, (2, 2, 2)).supercell
    model = spring_solver(sup, 5.0)
    calls = []
    settings = GroundStateSettings(pseudopotentials={
        "Ga": "Ga-hartwigsen-goedecker-hutter.toml", "As": "As-hartwigsen-goedecker-hutter.toml"})
    ps = PhononSettings(supercell=(2, 2, 2), dos_mesh=(4, 4, 4), path_points=20)

    def dies_on_the_second(crystal, s, start):
        calls.append(crystal)
        if len(calls) == 2:
            raise KeyboardInterrupt
        return model(crystal, s, start)

    with pytest.raises(KeyboardInterrupt):
        phonons(gaas, settings, ps, solver=dies_on_the_second, record_dir=tmp_path)
    assert [p.name for p in tmp_path.glob("*.npz")] == ["displacement-001.npz"]
    again = []
    result = phonons(gaas, settings, ps, record_dir=tmp_path,
                     solver=spring_solver(sup, 5.0, calls=again))
    assert len(again) == 1
    assert [h["reused_from_record"] for h in result.history] == [True, False]
