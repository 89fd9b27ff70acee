"""The settings-convergence study (pwsolid.workflows.convergence) on model energies.

A model solver stands in for the SCF (own construction): the energy per atom
approaches its limit as A exp(-cutoff / tau) for the cutoff and as C / n^4 for
an n x n x n mesh, and the equilibrium volume drifts with the cutoff as
V0 (1 + d exp(-cutoff / tau)). The errors are therefore known exactly and so
is the cheapest setting within a given precision.
"""

import json
import math
from types import SimpleNamespace

import numpy as np
import pytest

from pwsolid.crystal import diamond, hexagonal_close_packed
from pwsolid.eos import birch_murnaghan_energy
from pwsolid.errors import InputError
from pwsolid.settings import GroundStateSettings
from pwsolid.units import BOHR_ANGSTROM, HARTREE_EV
from pwsolid.workflows.convergence import converge_settings, mesh_for_density

V0, B0, B0P = 270.0, 0.0033, 4.2
A, TAU, C = 0.05, 1.0, 0.1         # Ha, Ha, Ha (per cell)
DRIFT = 0.3                        # relative volume drift at zero cutoff (lattice tests)
MEV = 1e-3 / HARTREE_EV
SETTINGS = GroundStateSettings(cutoff=8.0, kpoint_mesh=(4, 4, 4), kpoint_shift=(0, 0, 0))


class ModelSolver:
    def __init__(self, drift=0.0):
        self.calls = []
        self.drift = drift

    def __call__(self, crystal, settings, warm):
        self.calls.append((settings.cutoff, settings.kpoint_mesh, crystal.volume))
        c, n = settings.cutoff, settings.kpoint_mesh[0]
        v0 = V0 * (1 + self.drift * math.exp(-c / TAU))
        e = (birch_murnaghan_energy(crystal.volume, -7.9, v0, B0, B0P)
             + A * math.exp(-c / TAU) + C / n ** 4)
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=5,
                               density=np.full((4, 4, 4), 8.0 / crystal.volume))


def _crystal():
    return diamond((4 * V0) ** (1 / 3), "Si")


def _energy_error(c, c_ref):      # per atom (2 atoms)
    return A * (math.exp(-c / TAU) - math.exp(-c_ref / TAU)) / 2


def test_energy_only_recommendation_is_the_cheapest_within_precision():
    cutoffs = [4, 6, 8, 10, 12, 14]
    meshes = [2, 4, 6, 8]
    solver = ModelSolver()
    study = converge_settings(_crystal(), SETTINGS, cutoffs=cutoffs, meshes=meshes,
                              with_lattice=False, solver=solver)
    # the input setting (8 Ha, 4x4x4) is in both series and is computed once
    assert len(solver.calls) == len(cutoffs) + len(meshes) - 1
    for p in study.cutoff_series:
        assert p.energy_change == pytest.approx(_energy_error(p.cutoff, 14), abs=1e-12)
        assert p.mesh == (4, 4, 4)
    expected_cut = min(c for c in cutoffs if all(abs(_energy_error(x, 14)) <= MEV
                                                 for x in cutoffs if x >= c))
    assert study.recommended_cutoff == expected_cut == 8
    # mesh errors per atom: C (1/n^4 - 1/8^4) / 2 -> 6x6x6 is the first within 1 meV
    errors = {n: C * (n ** -4 - 8.0 ** -4) / 2 for n in meshes}
    assert [p.energy_change for p in study.mesh_series] == pytest.approx(
        [errors[n] for n in meshes], abs=1e-12)
    assert study.recommended_mesh == (6, 6, 6)
    assert study.recommended_settings.cutoff == 8 and study.lattice_precision is None
    doc = json.loads(json.dumps(study.as_document(), allow_nan=False))
    assert doc["recommendation"] == {"cutoff_Ha": 8.0, "cutoff_eV": 8 * HARTREE_EV,
                                     "kpoint_mesh": [6, 6, 6]}


def test_a_setting_that_falls_back_outside_precision_moves_the_recommendation():
    # 8 Ha is accidentally close to the reference, 10 Ha is not: the recommendation
    # must be the first setting from which on *all* stay within precision.
    def solver(crystal, settings, warm):
        errors = {4: 5.0, 6: 3.0, 8: 0.1, 10: 2.0, 12: 0.5, 14: 0.0}   # meV/atom, own choice
        e = 2 * errors[int(settings.cutoff)] * MEV
        return SimpleNamespace(total_energy=e, converged=True, iterations=1, density=None)

    study = converge_settings(_crystal(), SETTINGS, cutoffs=[4, 6, 8, 10, 12, 14],
                              meshes=[2, 4], with_lattice=False, solver=solver)
    assert study.recommended_cutoff == 12


def test_precision_met_only_by_the_reference_is_reported():
    study = converge_settings(_crystal(), SETTINGS, cutoffs=[2, 3], meshes=[1, 2],
                              with_lattice=False, solver=ModelSolver())
    assert study.recommended_cutoff == 3 and study.recommended_mesh == (2, 2, 2)
    assert sum("not demonstrated" in m for m in study.messages) == 2


def test_lattice_precision_can_demand_more_than_the_energy():
    crystal = _crystal()
    cutoffs = [4, 6, 8, 10, 12, 14]
    study = converge_settings(crystal, SETTINGS, cutoffs=cutoffs, meshes=[2, 4],
                              energy_precision=1.0 * MEV, lattice_precision=1e-4 / BOHR_ANGSTROM,
                              solver=ModelSolver(drift=DRIFT))
    a_of = {c: (4 * V0 * (1 + DRIFT * math.exp(-c / TAU))) ** (1 / 3) for c in cutoffs}
    for p in study.cutoff_series:
        # 5-point Birch-Murnaghan fits of Birch-Murnaghan data: exact to fit precision
        assert p.lattice_constant == pytest.approx(a_of[p.cutoff], rel=1e-8)
        assert p.lattice_change == pytest.approx(a_of[p.cutoff] - a_of[14], abs=1e-7)
        assert p.bulk_modulus_change is not None
    lattice_ok = min(c for c in cutoffs if all(abs(a_of[x] - a_of[14]) <= 1e-4 / BOHR_ANGSTROM
                                               for x in cutoffs if x >= c))
    energy_only = converge_settings(crystal, SETTINGS, cutoffs=cutoffs, meshes=[2, 4],
                                    with_lattice=False, solver=ModelSolver(drift=DRIFT))
    assert lattice_ok == 10 and energy_only.recommended_cutoff == 8
    assert study.recommended_cutoff == 10
    # the energy is that of the middle volume, the input's own
    centre = [p for p in study.cutoff_series if p.cutoff == 14][0]
    v0 = V0 * (1 + DRIFT * math.exp(-14 / TAU))
    e = (birch_murnaghan_energy(crystal.volume, -7.9, v0, B0, B0P) + A * math.exp(-14 / TAU)
         + C / 4 ** 4)
    assert centre.energy_per_atom == pytest.approx(e / 2, abs=1e-12)


def test_default_series_and_meshes_for_hexagonal_cells():
    study = converge_settings(_crystal(), SETTINGS, with_lattice=False, solver=ModelSolver())
    assert [p.cutoff for p in study.cutoff_series] == [5.0, 6.5, 8.0, 9.5, 11.0]
    assert [p.mesh for p in study.mesh_series] == [(2,) * 3, (4,) * 3, (6,) * 3, (8,) * 3]
    hcp = hexagonal_close_packed(6.0, "Mg", 1.62)
    # |b3| / |b1| = sqrt(3) / (2 c/a) = 0.535, and 8 x 0.535 rounds to 4
    assert mesh_for_density(hcp, 8) == (8, 8, 4)


@pytest.mark.parametrize("options, key", [
    ({"cutoffs": [6]}, "cutoffs"), ({"cutoffs": [6, -1]}, "cutoffs"),
    ({"meshes": [4]}, "meshes"), ({"meshes": [(2, 2)]}, "meshes"), ({"meshes": [0, 2]}, "meshes"),
    ({"energy_precision": 0.0}, "energy_precision"), ({"n_points": 6}, "points"),
])
def test_bad_study_options_are_input_errors(options, key):
    with pytest.raises(InputError) as err:
        converge_settings(_crystal(), SETTINGS, solver=ModelSolver(), **options)
    assert err.value.key == key


def test_convergence_plot_writes_png_and_svg(tmp_path):
    from pwsolid.plots.convergence import ConvergencePlot

    study = converge_settings(_crystal(), SETTINGS, cutoffs=[4, 6, 8, 10, 12],
                              meshes=[2, 4, 6, 8], solver=ModelSolver(drift=DRIFT))
    paths = ConvergencePlot.from_study(study, title="Model convergence").save(tmp_path / "m.conv")
    assert [p.name for p in paths] == ["m.conv.png", "m.conv.svg"]
    assert all(p.stat().st_size > 1000 for p in paths)
