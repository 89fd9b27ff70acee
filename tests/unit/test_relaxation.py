"""The relaxation workflow on a model energy (a Gaussian pair potential).

The model stands in for the SCF so that the workflow's mechanics (coordinates,
signs, symmetry, checkpoints, stopping rules) are checked in milliseconds; the
model's own forces and stress are first checked against finite differences of its
energy, and the workflow's gradient against finite differences of the enthalpy.
"""

import itertools

import numpy as np
import pytest

from pwsolid.crystal import Crystal, diamond, face_centred_cubic, hexagonal_close_packed
from pwsolid.errors import InputError
from pwsolid.settings import GroundStateSettings
from pwsolid.store import load_record
from pwsolid.symmetry import find_symmetry
from pwsolid.units import HA_PER_BOHR3_GPA
from pwsolid.workflows.relaxation import (Evaluation, RelaxationSettings, _Coordinates,
                                          _relaxation_fingerprint, relax_lattice,
                                          relax_structure)

_A, _RA, _C, _RC = 10.0, 2.0, 0.1, 3.5     # repulsive and attractive Gaussians (Ha, bohr)
_REACH = _RC * 6.2                           # exp(-6.2^2) < 1e-16: images beyond add nothing


def _phi(r):
    return _A * np.exp(-(r / _RA) ** 2) - _C * np.exp(-(r / _RC) ** 2)


def _dphi(r):
    return (-2 * r / _RA ** 2 * _A * np.exp(-(r / _RA) ** 2)
            + 2 * r / _RC ** 2 * _C * np.exp(-(r / _RC) ** 2))


def model(crystal: Crystal, previous=None) -> Evaluation:
    """E = 1/2 sum_{i,j,T} phi(|r_j + T - r_i|), forces and virial stress analytic."""
    lat = crystal.lattice
    reach = np.ceil(_REACH * np.linalg.norm(np.linalg.inv(lat), axis=0)).astype(int)
    shifts = np.array(list(itertools.product(*(range(-n, n + 1) for n in reach))), float) @ lat
    r = crystal.cartesian_positions
    d = r[None, :, None, :] + shifts[None, None] - r[:, None, None, :]     # (i, j, T, 3)
    dist = np.linalg.norm(d, axis=-1)
    self_pair = dist < 1e-9
    dist = np.where(self_pair, 1.0, dist)
    w = np.where(self_pair, 0.0, 1.0)
    energy = 0.5 * float((w * _phi(dist)).sum())
    dd = w * _dphi(dist) / dist                                            # phi'(r)/r
    forces = np.einsum("ijt,ijtk->ik", dd, d)
    stress = 0.5 * np.einsum("ijt,ijta,ijtb->ab", dd, d, d) / crystal.volume
    return Evaluation(energy, forces, stress, scf_iterations=1)


def _displaced(crystal, amount, seed):
    rng = np.random.default_rng(seed)
    shift = rng.normal(size=(crystal.n_atoms, 3))
    shift *= amount / np.linalg.norm(shift, axis=1)[:, None]
    frac = (crystal.cartesian_positions + shift) @ np.linalg.inv(crystal.lattice)
    return Crystal(crystal.lattice, crystal.species, frac)


def _strained(crystal, eps):
    return Crystal(crystal.lattice @ (np.eye(3) + eps), crystal.species, crystal.positions)


def test_model_forces_and_stress_are_derivatives_of_its_energy():
    # central differences, step 1e-4 bohr / 1e-5 strain: error ~ h^2 E''' ~ 1e-9
    c = _displaced(diamond(12.5, "Si").supercell((1, 1, 2)), 0.2, 1)
    ev = model(c)
    h = 1e-4
    for atom, axis in ((0, 0), (2, 1), (3, 2)):
        shift = np.zeros((c.n_atoms, 3))
        shift[atom, axis] = h
        plus = Crystal(c.lattice, c.species, (c.cartesian_positions + shift) @ np.linalg.inv(c.lattice))
        minus = Crystal(c.lattice, c.species, (c.cartesian_positions - shift) @ np.linalg.inv(c.lattice))
        fd = -(model(plus).energy - model(minus).energy) / (2 * h)
        assert ev.forces[atom, axis] == pytest.approx(fd, abs=1e-8)
    h = 1e-5
    for a, b in ((0, 0), (1, 2), (0, 1)):
        e = np.zeros((3, 3))
        # symmetric strain: eps_ab = eps_ba = h/2 changes E by Omega (s_ab + s_ba) h/2
        e[a, b] = e[b, a] = h / (1 if a == b else 2)
        fd = (model(_strained(c, e)).energy - model(_strained(c, -e)).energy) / (2 * h)
        assert ev.stress[a, b] * c.volume == pytest.approx(fd, abs=1e-8)


def test_enthalpy_gradient_matches_finite_differences():
    # a point away from the start (nonzero strain, moved atoms) and a nonzero pressure
    c = _displaced(diamond(12.0, "Si"), 0.15, 2)
    relax = RelaxationSettings(moves="both", keep_symmetry=False,
                               target_pressure=3.0 / HA_PER_BOHR3_GPA)
    coords = _Coordinates.of(c, relax)
    rng = np.random.default_rng(5)
    z = coords.start() + 0.05 * coords.project(rng.normal(size=coords.start().size))
    p = relax.target_pressure

    def enthalpy(z):
        cell = coords.crystal_at(z)
        return model(cell).energy + p * cell.volume

    g = coords.gradient(z, model(coords.crystal_at(z)), p)
    h = 1e-5
    for i in range(len(z)):
        dz = np.zeros_like(z)
        dz[i] = h
        # strain entries come in symmetric pairs: the gradient is for symmetric changes
        if i >= 3 * c.n_atoms:
            a, b = divmod(i - 3 * c.n_atoms, 3)
            dz[3 * c.n_atoms + 3 * b + a] = h
            expect = g[i] + g[3 * c.n_atoms + 3 * b + a] if a != b else g[i]
        else:
            expect = g[i]
        fd = (enthalpy(z + dz) - enthalpy(z - dz)) / (2 * h)
        assert expect == pytest.approx(fd, abs=2e-8), i     # central difference, h^2 E'''


def test_positions_relax_to_the_force_threshold():
    start = _displaced(diamond(12.5, "Si").supercell((1, 1, 2)), 0.1, 3)
    relax = RelaxationSettings(moves="positions", force_threshold=1e-5, max_steps=60,
                               keep_symmetry=False)
    res = relax_structure(start, relaxation=relax, evaluator=model)
    assert res.converged
    assert res.final["largest_force_Ha_per_bohr"] < 1e-5
    assert model(res.crystal).energy < model(start).energy
    np.testing.assert_allclose(res.crystal.lattice, start.lattice)


def test_cell_relaxation_keeps_the_space_group_and_moves_c_over_a():
    start = hexagonal_close_packed(6.0, "Mg", c_over_a=1.5)
    res = relax_lattice(start, evaluator=model, stress_threshold=1e-3 / HA_PER_BOHR3_GPA,
                        max_steps=60)
    assert res.converged
    assert find_symmetry(res.crystal).space_group_number == 194     # P6_3/mmc kept
    q = res.lattice_constants["c_over_a"]
    assert abs(q - 1.5) > 0.01                # c/a relaxed on its own, not only the volume
    np.testing.assert_allclose(res.crystal.positions, start.positions, atol=1e-12)
    # the relaxed cell carries no stress beyond the threshold
    assert np.abs(model(res.crystal).stress).max() * HA_PER_BOHR3_GPA < 1e-3


def test_cubic_cell_relaxation_moves_only_the_lattice_constant():
    start = face_centred_cubic(8.0, "Al")
    res = relax_lattice(start, evaluator=model)
    assert res.converged
    scale = res.lattice_constants["a"] / 8.0
    assert abs(scale - 1) > 1e-3                                          # it did move
    # a scaled copy of the start: round-off only (the strain is projected each step)
    np.testing.assert_allclose(res.crystal.lattice, scale * start.lattice, atol=1e-12)


def test_target_pressure_is_reached():
    start = face_centred_cubic(8.0, "Al")
    p = 5.0 / HA_PER_BOHR3_GPA
    res = relax_lattice(start, evaluator=model, target_pressure=p)
    assert res.converged
    assert res.final["pressure_GPa"] == pytest.approx(5.0, abs=0.01)
    assert res.crystal.volume < relax_lattice(start, evaluator=model).crystal.volume


def test_zero_steps_on_a_relaxed_symmetric_crystal():
    # diamond: every force vanishes by symmetry (site symmetry -43m)
    res = relax_structure(diamond(12.5, "Si"), relaxation=RelaxationSettings(max_steps=0),
                          evaluator=model)
    assert res.converged and res.n_moves == 0
    assert res.final["largest_force_Ha_per_bohr"] < 1e-12


def test_step_limit_gives_not_converged_and_a_message(tmp_path):
    start = _displaced(diamond(12.5, "Si"), 0.1, 4)
    relax = RelaxationSettings(moves="both", max_steps=2, keep_symmetry=False)
    res = relax_structure(start, relaxation=relax, evaluator=model,
                          checkpoint=tmp_path / "c.npz")
    assert not res.converged and res.n_moves == 2
    assert any("max_steps" in m for m in res.messages)
    assert (tmp_path / "c.npz").exists()
    doc = res.as_document()
    assert doc["converged"] is False and len(doc["steps"]) == 3


def test_a_killed_run_resumes_where_it_stopped(tmp_path):
    # fcc is stable under the pair model (diamond is not: its cell shears away)
    start = _displaced(face_centred_cubic(8.3, "Al").supercell((1, 1, 2)), 0.1, 6)
    relax = RelaxationSettings(moves="both", keep_symmetry=False, force_threshold=1e-5,
                               stress_threshold=1e-3 / HA_PER_BOHR3_GPA)
    whole = relax_structure(start, relaxation=relax, evaluator=model)
    calls = []

    def killed_at_five(crystal, previous):
        calls.append(1)
        if len(calls) == 5:
            raise KeyboardInterrupt
        return model(crystal)

    path = tmp_path / "relax.npz"
    with pytest.raises(KeyboardInterrupt):
        relax_structure(start, relaxation=relax, evaluator=killed_at_five, checkpoint=path)
    resumed = relax_structure(start, relaxation=relax, evaluator=model, checkpoint=path)
    assert any("resumed" in m for m in resumed.messages)
    assert resumed.converged and len(resumed.steps) == len(whole.steps)
    np.testing.assert_allclose(resumed.crystal.lattice, whole.crystal.lattice, atol=1e-12)
    assert not path.exists()          # removed once converged


def _copy(path, to):
    to.write_bytes(path.read_bytes())
    return to


def test_a_checkpoint_of_another_relaxation_is_refused(tmp_path):
    path = tmp_path / "relax.npz"
    relax = RelaxationSettings(moves="both", max_steps=1, keep_symmetry=False)
    start = face_centred_cubic(8.3, "Al").supercell((1, 1, 2))
    relax_structure(_displaced(start, 0.1, 7), relaxation=relax, evaluator=model, checkpoint=path)
    before = path.read_bytes()
    with pytest.raises(InputError, match="fractional_positions differs: file"):
        relax_structure(_displaced(start, 0.1, 8), relaxation=relax, evaluator=model,
                        checkpoint=path)
    # another relaxation setting of the same crystal: refused naming that setting
    with pytest.raises(InputError, match="relaxation.target_pressure_GPa differs: file 0"):
        relax_structure(_displaced(start, 0.1, 7), evaluator=model, checkpoint=path,
                        relaxation=RelaxationSettings(moves="both", max_steps=1,
                                                      keep_symmetry=False,
                                                      target_pressure=1e-4))
    assert path.read_bytes() == before                      # nothing overwritten
    # a difference accepted on purpose: the run continues and says so, in its messages
    # and in the checkpoint it goes on writing
    pressed = RelaxationSettings(moves="both", max_steps=2, keep_symmetry=False,
                                 target_pressure=1e-4)
    res = relax_structure(_displaced(start, 0.1, 7), relaxation=pressed, evaluator=model,
                          checkpoint=_copy(path, tmp_path / "copy.npz"),
                          accept_mismatch=True)
    assert any("relaxation.target_pressure_GPa differs" in m for m in res.messages)
    kept = load_record(tmp_path / "copy.npz", "relaxation-step", _relaxation_fingerprint(
        _displaced(start, 0.1, 7), GroundStateSettings(), pressed))
    assert any("target_pressure" in m for m in kept.mismatches)
    # ... but not when other coordinates move: the optimiser state cannot carry over
    with pytest.raises(InputError, match="cannot be continued"):
        relax_structure(_displaced(start, 0.1, 7), evaluator=model, checkpoint=path,
                        relaxation=RelaxationSettings(max_steps=2, keep_symmetry=False),
                        accept_mismatch=True)
    assert path.read_bytes() == before
    # more moves allowed (or SCFs started otherwise) is the same relaxation: it resumes
    more = RelaxationSettings(moves="both", max_steps=2, keep_symmetry=False,
                              warm_start=False, adaptive_scf_tolerance=False)
    res = relax_structure(_displaced(start, 0.1, 7), relaxation=more, evaluator=model,
                          checkpoint=path)
    assert any("resumed" in m for m in res.messages) and res.n_moves == 2


def test_a_collapsing_cell_stops_with_one_message():
    # -2000 GPa target pressure pulls the cell apart; a 3 bohr step cap lets it try
    relax = RelaxationSettings(moves="cell", target_pressure=-2000 / HA_PER_BOHR3_GPA,
                               largest_step=3.0, max_steps=20)
    res = relax_structure(face_centred_cubic(8.0, "Al"), relaxation=relax, evaluator=model)
    assert not res.converged
    assert sum("blows up" in m or "collapses" in m for m in res.messages) == 1


@pytest.mark.parametrize("kwargs, key", [
    ({"moves": "none"}, "relaxation.moves"),
    ({"moves": "atoms"}, "relaxation.moves"),
    ({"max_steps": -1}, "relaxation.max_steps"),
    ({"force_threshold": 0.0}, "relaxation.force_threshold"),
    ({"stress_threshold": -1e-6}, "relaxation.stress_threshold"),
])
def test_bad_relaxation_settings_name_their_key(kwargs, key):
    with pytest.raises(InputError) as err:
        RelaxationSettings(**kwargs)
    assert err.value.key == key


def test_scf_tolerances_follow_the_forces():
    from pwsolid.workflows.relaxation_evaluation import _step_settings

    s = GroundStateSettings(energy_tolerance=1e-8, density_tolerance=1e-6)
    assert _step_settings(s, {}, 1e-4) == (s, False)              # first step: as given
    # early: energy change 0.03 bohr x F, density residual 0.15 F per Ha/bohr
    loose, flag = _step_settings(s, {"force": 3e-3}, 1e-4)          # 30 x the threshold
    assert flag and loose.density_tolerance == pytest.approx(4.5e-4)
    assert loose.energy_tolerance == pytest.approx(9e-5)
    capped, _ = _step_settings(s, {"force": 10.0}, 1e-4)
    assert capped.density_tolerance == 2e-3 and capped.energy_tolerance == 1e-3
    # never tighter than the settings' own
    floor, _ = _step_settings(s.replace(density_tolerance=1e-3), {"force": 1e-3}, 1e-4)
    assert floor.density_tolerance == 1e-3 and floor.energy_tolerance == pytest.approx(3e-5)
    assert _step_settings(s, {"force": 2e-4}, 1e-4) == (s, False)   # near the end: as given
    assert _step_settings(s, {"force": 3e-2}, None) == (s, False)   # cell moves only


def test_fresh_ignores_a_checkpoint(tmp_path):
    path = tmp_path / "relax.npz"
    start = _displaced(face_centred_cubic(8.3, "Al").supercell((1, 1, 2)), 0.1, 9)
    relax = RelaxationSettings(moves="both", max_steps=1, keep_symmetry=False)
    relax_structure(start, relaxation=relax, evaluator=model, checkpoint=path)
    again = relax_structure(start, relaxation=relax, evaluator=model, checkpoint=path,
                            fresh=True)
    assert not any("resumed" in m for m in again.messages) and len(again.steps) == 2



@pytest.mark.slow
def test_a_loose_step_is_confirmed_by_carrying_its_scf_on():
    # The confirmation of a loosely converged step carries the same SCF on to the
    # settings' tolerances; the result must be that of a straight SCF at those
    # tolerances (invariance: the ground state does not depend on the path), and the
    # step counts only the further iterations.
    from conftest import LOCAL_SILICON
    from pwsolid.workflows.relaxation_evaluation import scf_evaluator

    s = GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0),
                            pseudopotentials=LOCAL_SILICON)
    si = diamond(10.26, "Si")

    def displaced(d):
        return Crystal(si.lattice, si.species, si.positions + np.array([[d, -d, 0.5 * d],
                                                                        [0, 0, 0]]))

    evaluate = scf_evaluator(s, symmetrize=False, force_threshold=1e-3)
    far = evaluate(displaced(0.01), None)           # large forces: the next step runs loose
    assert np.abs(far.forces).max() > 3e-3
    loose = evaluate(displaced(0.0005), far)
    assert loose.loose and np.abs(loose.forces).max() < 1e-3
    confirmed = evaluate(displaced(0.0005), loose)
    assert not confirmed.loose and confirmed.scf_converged
    gs, before = confirmed.ground_state, loose.ground_state
    assert gs.iterations == before.iterations + confirmed.scf_iterations   # carried on
    straight = scf_evaluator(s, symmetrize=False)(displaced(0.0005), None)
    assert confirmed.energy == pytest.approx(straight.energy, abs=1e-8)
    assert np.abs(confirmed.forces - straight.forces).max() < 1e-5
