"""Elastic-tensor kernels (pwsolid.elasticity) and the elastic-constants workflow on model
energies: symmetry patterns found by spglib and group averaging against the published
tables of each Laue class, the Voigt-Reuss-Hill formulas against exact isotropic and cubic
cases, Born stability, the fit, the restart file and the k-mesh refusal."""

import json

import numpy as np
import pytest

import pwsolid
from pwsolid.crystal import Crystal
from pwsolid.elasticity import (born_stability, elastic_pattern, fit_stress_strain,
                                strain_patterns, stress_voigt, symmetrize_elastic,
                                voigt_reuss_hill, voigt_strain_tensor)
from pwsolid.errors import InputError
from pwsolid.stress import cartesian_rotations
from pwsolid.symmetry import find_symmetry
from pwsolid.workflows.elastic_constants import (ElasticSettings, check_mesh_symmetry,
                                                 elastic_constants, internal_strain_parameter)
from pwsolid.workflows.relaxation_evaluation import Evaluation


def _pattern(crystal):
    ops = find_symmetry(crystal)
    return elastic_pattern(cartesian_rotations(crystal.lattice, ops.rotations)), ops


def _tetragonal_4_over_m():
    """A cell of point group 4/m: four atoms on a general (x, y, 0) orbit of the 4-fold
    axis around one on the axis; no mirror contains the axis."""
    x, y = 0.1, 0.3
    pos = [[0, 0, 0], [x, y, 0], [-y, x, 0], [-x, -y, 0], [y, -x, 0]]
    return Crystal(np.diag([9.0, 9.0, 6.0]), ["Si"] * 5, np.array(pos) % 1.0)


# --- symmetry patterns (J. F. Nye, Physical Properties of Crystals, 1957, Table 9, ch. VIII)

@pytest.mark.parametrize("crystal", [pwsolid.diamond(10.26, "Si"),
                                     pwsolid.face_centred_cubic(7.6, "Al"),
                                     pwsolid.zincblende(10.68, ("Ga", "As")),
                                     pwsolid.body_centred_cubic(6.6, "Li")],
                         ids=["diamond", "fcc", "zincblende", "bcc"])
def test_cubic_crystals_have_three_constants(crystal):
    pattern, _ = _pattern(crystal)
    assert pattern.names == ("C11", "C12", "C44")
    rel = pattern.relations()
    assert rel == {"C13": "C12", "C22": "C11", "C23": "C12", "C33": "C11", "C55": "C44",
                   "C66": "C44"}
    assert strain_patterns(pattern) == [0, 3]          # e_xx and one shear suffice


def test_hexagonal_close_packing_has_five_constants_and_c66_follows():
    pattern, ops = _pattern(pwsolid.hexagonal_close_packed(6.06, "Mg", 1.624))
    assert ops.international_symbol == "P6_3/mmc"
    assert pattern.names == ("C11", "C12", "C13", "C33", "C44")
    # transverse isotropy: C66 = (C11 - C12)/2 (Nye, Table 9)
    assert pattern.relations()["C66"] == "0.5 C11 - 0.5 C12"
    assert strain_patterns(pattern) == [0, 2, 3]


def test_tetragonal_4_over_mmm_has_six_constants():
    bct = Crystal(np.diag([5.0, 5.0, 7.0]), ["Si", "Si"], np.array([[0, 0, 0], [.5, .5, .5]]))
    pattern, ops = _pattern(bct)
    assert ops.international_symbol == "I4/mmm"
    assert pattern.names == ("C11", "C12", "C13", "C33", "C44", "C66")


def test_tetragonal_4_over_m_has_seven_constants_with_c16():
    # the lower tetragonal Laue class keeps C16 = -C26 (Nye, Table 9): a case that a
    # table of "tetragonal = six constants" would get wrong
    pattern, ops = _pattern(_tetragonal_4_over_m())
    assert ops.international_symbol == "P4/m"
    assert pattern.names == ("C11", "C12", "C13", "C16", "C33", "C44", "C66")
    assert pattern.relations()["C26"] == "- C16"


def test_triclinic_cell_has_twenty_one_constants():
    cell = Crystal(np.array([[5.0, 0.3, 0.2], [0.4, 6.0, 0.1], [0.2, 0.5, 7.0]]), ["Si"] * 2,
                   np.array([[0, 0, 0], [0.31, 0.17, 0.43]]))
    pattern, _ = _pattern(cell)
    assert pattern.size == 21


def test_group_average_is_a_projector_and_hexagonal_tensors_are_transversely_isotropic():
    pattern, ops = _pattern(pwsolid.hexagonal_close_packed(6.06, "Mg", 1.624))
    rot = cartesian_rotations(pwsolid.hexagonal_close_packed(6.06, "Mg", 1.624).lattice,
                              ops.rotations)
    rng = np.random.default_rng(3)
    c = rng.normal(size=(6, 6))
    once = symmetrize_elastic(c, rot)
    assert np.allclose(symmetrize_elastic(once, rot), once, atol=1e-12)
    # a hexagonal tensor is invariant under any rotation about c (common practice), not
    # only the six-fold ones averaged over
    t = 0.37
    r = np.array([[np.cos(t), -np.sin(t), 0], [np.sin(t), np.cos(t), 0], [0, 0, 1]])
    assert np.allclose(symmetrize_elastic(once, r[None]), once, atol=1e-12)


# --- Voigt-Reuss-Hill (R. Hill, Proc. Phys. Soc. A 65, 349 (1952)) ----------------------

def _isotropic(lam, mu):
    c = np.zeros((6, 6))
    c[:3, :3] = lam
    c[np.arange(3), np.arange(3)] = lam + 2 * mu
    c[np.arange(3, 6), np.arange(3, 6)] = mu
    return c


def test_isotropic_solid_averages_are_exact():
    lam, mu = 58.0, 26.0                 # any Lame constants
    avg = voigt_reuss_hill(_isotropic(lam, mu))
    for which in ("voigt", "reuss", "hill"):
        assert getattr(avg, f"bulk_{which}") == pytest.approx(lam + 2 * mu / 3, rel=1e-12)
        assert getattr(avg, f"shear_{which}") == pytest.approx(mu, rel=1e-12)
    # textbook isotropic relations: E = mu (3 lam + 2 mu)/(lam + mu), nu = lam/(2 (lam + mu))
    assert avg.young_hill == pytest.approx(mu * (3 * lam + 2 * mu) / (lam + mu), rel=1e-12)
    assert avg.poisson_hill == pytest.approx(lam / (2 * (lam + mu)), rel=1e-12)


def test_cubic_averages_match_the_closed_forms():
    c11, c12, c44 = 165.7, 63.9, 79.6
    c = pwsolid_cubic(c11, c12, c44)
    avg = voigt_reuss_hill(c)
    # for cubic crystals (from memory, standard): K_V = K_R = (C11 + 2 C12)/3,
    # G_V = (C11 - C12 + 3 C44)/5, G_R = 5 (C11 - C12) C44 / (4 C44 + 3 (C11 - C12))
    assert avg.bulk_voigt == pytest.approx((c11 + 2 * c12) / 3, rel=1e-12)
    assert avg.bulk_reuss == pytest.approx((c11 + 2 * c12) / 3, rel=1e-12)
    assert avg.shear_voigt == pytest.approx((c11 - c12 + 3 * c44) / 5, rel=1e-12)
    assert avg.shear_reuss == pytest.approx(5 * (c11 - c12) * c44 / (4 * c44 + 3 * (c11 - c12)),
                                            rel=1e-12)
    assert avg.shear_reuss < avg.shear_hill < avg.shear_voigt      # Hill's bounds


def pwsolid_cubic(c11, c12, c44):
    c = np.zeros((6, 6))
    c[:3, :3] = c12
    c[np.arange(3), np.arange(3)] = c11
    c[np.arange(3, 6), np.arange(3, 6)] = c44
    return c


def test_born_stability_of_a_cubic_crystal_is_its_three_conditions():
    # the eigenvalues of a cubic matrix are C11 + 2 C12, C11 - C12 (twice) and C44
    # (three times): positive definiteness is Born's C11 - C12 > 0, C11 + 2 C12 > 0, C44 > 0
    stable, w = born_stability(pwsolid_cubic(165.7, 63.9, 79.6))
    assert stable
    assert np.allclose(sorted(w), sorted([165.7 + 2 * 63.9, 101.8, 101.8, 79.6, 79.6, 79.6]))
    assert not born_stability(pwsolid_cubic(60.0, 70.0, 30.0))[0]      # C12 > C11
    assert not born_stability(pwsolid_cubic(160.0, 60.0, -1.0))[0]     # C44 < 0


# --- fits -------------------------------------------------------------------------------

def test_fit_recovers_slopes_beside_a_quadratic_term():
    pattern, _ = _pattern(pwsolid.diamond(10.26, "Si"))
    c = pwsolid_cubic(0.0056, 0.0022, 0.0027)
    amps = np.array([-0.01, -0.005, 0.0, 0.005, 0.01])
    lines = {}
    for j in (0, 3):
        e = np.zeros((len(amps), 6))
        e[:, j] = amps
        lines[j] = (amps, e @ c.T + 0.03 * amps[:, None] ** 2 + 1e-4)
    fit = fit_stress_strain(pattern, lines)
    assert np.allclose(fit.matrix, c, atol=1e-12)
    assert fit.symmetry_residual < 1e-12


def test_voigt_conventions_round_trip():
    e = np.array([0.01, -0.02, 0.03, 0.004, -0.005, 0.006])
    eps = voigt_strain_tensor(e)
    assert np.allclose(eps, eps.T)
    # engineering shears: e_4 = 2 eps_yz; the energy density (1/2) e.C.e equals
    # (1/2) eps_ab C_abcd eps_cd
    c = pwsolid_cubic(3.0, 1.0, 0.7)
    from pwsolid.elasticity import full_tensor
    assert 0.5 * e @ c @ e == pytest.approx(0.5 * np.einsum("ab,abcd,cd", eps, full_tensor(c),
                                                            eps), rel=1e-12)
    assert np.allclose(stress_voigt(eps), [0.01, -0.02, 0.03, 0.002, -0.0025, 0.003])


# --- the internal-strain parameter (L. Kleinman, Phys. Rev. 128, 2614 (1962)) --------------

def test_zeta_is_zero_for_homogeneous_and_one_for_bond_keeping_positions():
    si = pwsolid.diamond(10.26, "Si")
    eps = voigt_strain_tensor([0, 0, 0, 0, 0, 0.01])              # e_xy
    cell = Crystal(si.lattice @ (np.eye(3) + eps), si.species, si.positions)
    assert internal_strain_parameter(cell, cell) == pytest.approx(0.0, abs=1e-12)
    # rigid-bond shift by hand: atom 1 at (a/4)(1,1,1) moves by -(a/2) eps_xy along z
    # (the four bonds then have equal lengths to first order)
    a = 10.26
    shift = np.array([0.0, 0.0, -a / 2 * eps[0, 1]])
    pos = cell.positions.copy()
    pos[1] += shift @ np.linalg.inv(cell.lattice)
    moved = Crystal(cell.lattice, cell.species, pos)
    assert internal_strain_parameter(cell, moved) == pytest.approx(1.0, rel=1e-9)


# --- the workflow on model energies --------------------------------------------------------

class _Harmonic:
    """Stress C e of the strain of a cell against a reference lattice; no forces."""

    def __init__(self, crystal, c):
        self.lattice0, self.c, self.calls = crystal.lattice, c, 0

    def __call__(self, crystal, previous):
        self.calls += 1
        d = np.linalg.solve(self.lattice0, crystal.lattice)
        eps = 0.5 * (d + d.T) - np.eye(3)
        e = np.array([eps[0, 0], eps[1, 1], eps[2, 2], 2 * eps[1, 2], 2 * eps[0, 2],
                      2 * eps[0, 1]])
        s = self.c @ e
        sigma = np.array([[s[0], s[5], s[4]], [s[5], s[1], s[3]], [s[4], s[3], s[2]]])
        return Evaluation(float(0.5 * e @ self.c @ e), np.zeros((crystal.n_atoms, 3)), sigma)


def test_model_hexagonal_constants_are_recovered_and_a_rerun_resumes(tmp_path):
    mg = pwsolid.hexagonal_close_packed(6.06, "Mg", 1.624)
    c = np.zeros((6, 6))
    c11, c12, c13, c33, c44 = 2.0e-3, 0.9e-3, 0.7e-3, 2.1e-3, 0.6e-3
    c[0, 0] = c[1, 1] = c11
    c[0, 1] = c[1, 0] = c12
    c[0, 2] = c[2, 0] = c[1, 2] = c[2, 1] = c13
    c[2, 2] = c33
    c[3, 3] = c[4, 4] = c44
    c[5, 5] = (c11 - c12) / 2
    model = _Harmonic(mg, c)
    settings = pwsolid.GroundStateSettings(kpoint_shift=(0, 0, 0))
    restart = tmp_path / "mg.elastic-points.json"
    res = elastic_constants(mg, settings, ElasticSettings(relax_internal=False),
                            evaluator=model, restart_file=restart)
    assert res.converged and res.pattern.names == ("C11", "C12", "C13", "C33", "C44")
    assert np.allclose(res.relaxed.matrix, c, rtol=1e-9, atol=1e-12)
    assert model.calls == 1 + 3 * 4                     # reference + 3 strains x 4 amplitudes
    again = elastic_constants(mg, settings, ElasticSettings(relax_internal=False),
                              evaluator=model, restart_file=restart)
    assert model.calls == 13 and again.resumed_points == 13
    doc = json.loads(json.dumps(again.as_document()))
    assert doc["schema"] == "pwsolid.elastic-constants/1"
    assert doc["elastic_constants_GPa"]["C33"] == pytest.approx(c33 * 29421.02, rel=1e-5)
    # a restart file of other strains is refused, naming the setting
    with pytest.raises(InputError, match="elastic_constants.largest_strain"):
        elastic_constants(mg, settings, ElasticSettings(relax_internal=False,
                                                         largest_strain=0.02),
                          evaluator=model, restart_file=restart)


def test_shifted_mesh_of_an_fcc_cell_is_refused_with_its_reason():
    si = pwsolid.diamond(10.26, "Si")
    with pytest.raises(InputError, match="sample the Brillouin zone differently") as info:
        check_mesh_symmetry(si, pwsolid.GroundStateSettings(kpoint_mesh=(4, 4, 4),
                                                            kpoint_shift=(0.5, 0.5, 0.5)))
    assert "brillouin_zone.shift" in str(info.value) and "shift = [0, 0, 0]" in str(info.value)
    check_mesh_symmetry(si, pwsolid.GroundStateSettings(kpoint_mesh=(4, 4, 4),
                                                        kpoint_shift=(0, 0, 0)))
    # a simple-cubic cell keeps all its operations on a shifted mesh: accepted
    check_mesh_symmetry(pwsolid.simple_cubic(5.0, "Po"),
                        pwsolid.GroundStateSettings(kpoint_shift=(0.5, 0.5, 0.5)))


def test_a_killed_run_resumes_without_recomputing_its_finished_points(tmp_path):
    si = pwsolid.diamond(10.26, "Si")
    model = _Harmonic(si, pwsolid_cubic(5.6e-3, 2.2e-3, 2.7e-3))

    def dies_after_four(crystal, previous):
        if model.calls == 4:
            raise KeyboardInterrupt        # the run is killed during its fifth point
        return model(crystal, previous)

    restart = tmp_path / "si.elastic-points.json"
    elastic = ElasticSettings(relax_internal=False)
    settings = pwsolid.GroundStateSettings(kpoint_shift=(0, 0, 0))
    with pytest.raises(KeyboardInterrupt):
        elastic_constants(si, settings, elastic, evaluator=dies_after_four, restart_file=restart)
    res = elastic_constants(si, settings, elastic, evaluator=model, restart_file=restart)
    assert res.resumed_points == 4 and model.calls == 9       # 1 + 2 strains x 4 amplitudes
    assert np.allclose(res.relaxed.matrix, model.c, atol=1e-12)
