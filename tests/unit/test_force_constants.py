"""Force constants from displacements, against harmonic spring models with analytic forces.

A harmonic spring model (central spring k_L along each bond, transverse spring k_T
across it, springs attached at the equilibrium bond direction) has forces exactly
linear in the displacements, so finite displacements must give its force constants
to rounding error, whatever the amplitude, and its dispersion is known in closed form.
"""

import itertools

import numpy as np
import pytest

from pwsolid.atomic_masses import STANDARD_ATOMIC_WEIGHTS, atomic_mass_au
from pwsolid.crystal import Crystal, diamond, face_centred_cubic, hexagonal_close_packed
from pwsolid.errors import InputError
from pwsolid.force_constants import (acoustic_sum_violation, cartesian_rotations,
                                     fit_residual, force_constants_from_forces,
                                     impose_acoustic_sum_rule, make_force_constants,
                                     make_supercell, operation_permutations,
                                     plan_displacements, site_symmetry_violation)
from pwsolid.phonon_spectra import mesh_frequencies, phonon_dos
from pwsolid.symmetry import find_symmetry, identity_only
from pwsolid.units import AMU_ELECTRON_MASSES, HARTREE_THZ

A_FCC = 7.6           # bohr (any value: the model is scale-free)
K_L, K_T = 0.05, 0.01  # Ha/bohr^2


def bond_block(r, k_l=K_L, k_t=K_T):
    e = r / np.linalg.norm(r)
    return k_l * np.outer(e, e) + k_t * (np.eye(3) - np.outer(e, e))


def spring_phi(crystal: Crystal, cutoff: float, k_l=K_L, k_t=K_T) -> np.ndarray:
    """Supercell force constants of the periodic spring model (all images within cutoff)."""
    cart = crystal.cartesian_positions
    n = crystal.n_atoms
    phi = np.zeros((n, n, 3, 3))
    shifts = np.array(list(itertools.product(range(-2, 3), repeat=3))) @ crystal.lattice
    for i, j in itertools.product(range(n), repeat=2):
        for t in shifts:
            r = cart[j] + t - cart[i]
            if 1e-8 < np.linalg.norm(r) < cutoff:
                k = bond_block(r, k_l, k_t)
                phi[i, j] -= k
                phi[i, i] += k
    return phi


def model_forces(phi, displacements):
    return np.array([-(phi[:, d.atom] @ np.asarray(d.vector)) for d in displacements])


def fcc_reference_frequencies(q_cart, k_l=K_L, k_t=K_T, mass=1.0):
    """Closed form: D(q) = (1/m) sum_delta (1 - cos q.delta) K_delta over the 12 fcc neighbours."""
    deltas = [np.array(v) * A_FCC / 2 for v in itertools.product((-1, 0, 1), repeat=3)
              if sum(abs(x) for x in v) == 2]
    d = sum((1 - np.cos(q_cart @ dl)) * bond_block(dl, k_l, k_t) for dl in deltas) / mass
    w2 = np.linalg.eigvalsh(d)
    return np.sqrt(np.abs(w2)) * HARTREE_THZ


@pytest.fixture(scope="module")
def fcc_model():
    prim = face_centred_cubic(A_FCC, "Al")
    sup = make_supercell(prim, (3, 3, 3))
    ops = find_symmetry(sup.supercell)
    disp = plan_displacements(sup.supercell, ops, 0.03)
    phi_model = spring_phi(sup.supercell, A_FCC / np.sqrt(2) + 1e-3)
    return prim, sup, ops, disp, phi_model


def test_supercell_by_matrix_is_the_conventional_cube():
    prim = diamond(10.26, "Si")
    sup = make_supercell(prim, [[-1, 1, 1], [1, -1, 1], [1, 1, -1]])
    assert np.allclose(sup.supercell.lattice, 10.26 * np.eye(3))
    assert sup.supercell.n_atoms == 8 and sup.n_cells == 4
    # every supercell atom is its primitive atom moved by a primitive lattice vector
    cart = sup.supercell.cartesian_positions
    expect = prim.cartesian_positions[sup.primitive_index] + sup.cell @ prim.lattice
    frac = (cart - expect) @ np.linalg.inv(sup.supercell.lattice)
    assert np.allclose(frac - np.rint(frac), 0, atol=1e-10)
    assert np.all(sup.cell[sup.origin_atoms] == 0)


def test_one_displacement_suffices_for_cubic_sites(fcc_model):
    # fcc (Oh) and diamond (Td) sites: the images of x under the site group span
    # 3D and include -x, so one computed displacement (common practice)
    assert len(fcc_model[3]) == 1
    si = make_supercell(diamond(10.26, "Si"), (2, 2, 2)).supercell
    assert len(plan_displacements(si, find_symmetry(si), 0.02)) == 1


def test_displacements_without_symmetry_are_three_directions_both_signs():
    cell = make_supercell(hexagonal_close_packed(6.0, "Mg"), (1, 1, 1)).supercell
    disp = plan_displacements(cell, identity_only(), 0.02)
    assert len(disp) == 2 * 3 * cell.n_atoms
    # with symmetry: fewer, and every representative's set spans three dimensions
    ops = find_symmetry(cell)
    few = plan_displacements(cell, ops, 0.02)
    assert len(few) < len(disp)
    rot = cartesian_rotations(ops, cell.lattice)
    perm = operation_permutations(ops, cell)
    for atom in {d.atom for d in few}:
        site = rot[perm[:, atom] == atom]
        images = np.concatenate([site @ np.asarray(d.vector) for d in few if d.atom == atom])
        assert np.linalg.matrix_rank(images) == 3


def test_spring_model_force_constants_reproduced_exactly(fcc_model):
    prim, sup, ops, disp, phi_model = fcc_model
    forces = model_forces(phi_model, disp)
    phi = force_constants_from_forces(sup.supercell, ops, disp, forces)
    # linear forces: exact up to rounding (1e-12 of the largest constant)
    assert np.abs(phi - phi_model).max() < 1e-12 * np.abs(phi_model).max()
    assert acoustic_sum_violation(phi) < 1e-12
    assert site_symmetry_violation(sup.supercell, ops, disp, forces) < 1e-12
    assert fit_residual(phi, disp, forces) < 1e-12


def test_fcc_spring_dispersion_matches_closed_form_at_any_q(fcc_model):
    prim, sup, ops, disp, phi_model = fcc_model
    fc = make_force_constants(sup, phi_model, [1.0])
    rng = np.random.default_rng(3)
    q = rng.uniform(-0.5, 0.5, (20, 3))
    got = fc.frequencies(q)
    want = np.array([np.sort(fcc_reference_frequencies(qq @ prim.reciprocal)) for qq in q])
    # nearest neighbours lie well inside the 3x3x3 supercell: interpolation is exact
    assert np.allclose(got, want, atol=1e-9 * want.max())
    # X = (2 pi / a)(1, 0, 0), derived by hand from the closed form: the eight neighbours
    # with q.delta = pi give D = 2 [k_L diag(4, 2, 2) + k_T diag(4, 6, 6)] / m, so
    # omega_L^2 = 8 (k_L + k_T) / m and omega_T^2 = (4 k_L + 12 k_T) / m
    x = fc.frequencies([[0.5, 0.0, 0.5]])[0] / HARTREE_THZ
    assert np.allclose(np.sort(x ** 2), np.sort([4 * K_L + 12 * K_T] * 2 + [8 * (K_L + K_T)]),
                       rtol=1e-10)
    # acoustic branches vanish at Gamma (to the square root of rounding: omega^2 ~ 1e-16)
    assert np.abs(fc.frequencies([[0, 0, 0]])).max() < 1e-7 * want.max()


def test_equal_distance_images_share_weight_so_commensurate_q_are_exact():
    # 2x2x2 fcc supercell: each nearest neighbour and one of its images are equally
    # far; with weights 1/2 the dispersion is exact at the supercell's own q (X, L)
    prim = face_centred_cubic(A_FCC, "Al")
    sup = make_supercell(prim, (2, 2, 2))
    phi = spring_phi(sup.supercell, A_FCC / np.sqrt(2) + 1e-3)
    fc = make_force_constants(sup, phi, [1.0])
    assert np.any(fc.pair_weights < 1.0)
    for q in ([0.5, 0.0, 0.5], [0.5, 0.5, 0.5], [0.5, 0.0, 0.0]):
        want = np.sort(fcc_reference_frequencies(np.asarray(q) @ prim.reciprocal))
        assert np.allclose(fc.frequencies([q])[0], want, atol=1e-9 * want.max())


def test_dispersion_is_symmetric_under_the_crystal_operations():
    prim = diamond(10.26, "Si")
    sup = make_supercell(prim, (2, 2, 2))
    phi = spring_phi(sup.supercell, 6.5)          # first and second neighbours
    fc = make_force_constants(sup, phi, [atomic_mass_au("Si")] * 2)
    ops = find_symmetry(prim)
    q = np.random.default_rng(5).uniform(-0.5, 0.5, (4, 3))
    base = fc.frequencies(q)
    for w in ops.rotations:
        # k-points transform as k' = W^T k (DEVELOPERS.md conventions)
        assert np.allclose(fc.frequencies(q @ w), base, atol=1e-9 * base.max())


def test_dynamical_matrix_is_hermitian():
    prim = diamond(10.26, "Si")
    sup = make_supercell(prim, (2, 2, 2))
    fc = make_force_constants(sup, spring_phi(sup.supercell, 6.5), [1.0, 1.0])
    d = fc.dynamical_matrices(np.random.default_rng(1).uniform(-1, 1, (3, 3)))
    assert np.allclose(d, d.conj().transpose(0, 2, 1), atol=1e-15)


def test_acoustic_sum_violation_reported_then_imposed(fcc_model):
    prim, sup, ops, disp, phi_model = fcc_model
    forces = model_forces(phi_model, disp)
    # a net force along the displacement (the grid's egg-box error) of size c on every
    # atom: each column sum gains -n c / u and each diagonal block -c / u, so the
    # relative violation is n c / (u Phi_ii - c)
    c, u = 1e-6, 0.03
    n = sup.supercell.n_atoms
    forces_off = forces + c * np.array([1.0, 0.0, 0.0])
    raw = force_constants_from_forces(sup.supercell, ops, disp, forces_off)
    expected = n * c / (u * phi_model[0, 0, 0, 0] - c)
    assert acoustic_sum_violation(raw) == pytest.approx(expected, rel=1e-6)
    fixed = impose_acoustic_sum_rule(raw)
    assert acoustic_sum_violation(fixed) < 1e-12
    assert np.allclose(fixed, fixed.transpose(1, 0, 3, 2), atol=1e-15)
    # the projection removes the offset and nothing else: the model comes back
    assert np.abs(fixed - phi_model).max() < 1e-10 * np.abs(phi_model).max()


def test_site_symmetry_check_sees_broken_symmetry(fcc_model):
    prim, sup, ops, disp, phi_model = fcc_model
    forces = model_forces(phi_model, disp)
    noisy = forces + 1e-4 * np.random.default_rng(2).standard_normal(forces.shape)
    assert site_symmetry_violation(sup.supercell, ops, disp, noisy) > 1e-3


def test_bz_average_of_omega_squared_is_the_trace_sum_rule(fcc_model):
    # sum over a full mesh of Tr D(q) / N = sum_k Tr Phi[k, k] / m_k exactly (the
    # off-site phases average to zero on a mesh finer than the interaction range)
    prim, sup, ops, disp, phi_model = fcc_model
    fc = make_force_constants(sup, phi_model, [2.0])
    grid = mesh_frequencies(fc, (6, 6, 6))
    w2 = np.sum(grid.weights[:, None] * (grid.frequencies_THz / HARTREE_THZ) ** 2)
    assert w2 == pytest.approx(np.trace(phi_model[0, 0]) / 2.0, rel=1e-12)
    for method in ("tetrahedron", "gaussian"):
        dos = phonon_dos(grid, method=method, width_THz=0.05)
        # every mode counted once: 3 per atom (exact for tetrahedra, erfc tail for Gaussians)
        assert dos.integrated[-1] == pytest.approx(3.0, abs=1e-6)


def test_standard_atomic_weights():
    # CIAAW 2021 abridged values (from memory): Si 28.085, Ga 69.723, As 74.922
    assert STANDARD_ATOMIC_WEIGHTS["Si"] == 28.085
    assert STANDARD_ATOMIC_WEIGHTS["Ga"] == 69.723
    # one dalton is 1822.888 electron masses (CODATA, from memory)
    assert AMU_ELECTRON_MASSES == pytest.approx(1822.888, abs=1e-3)
    with pytest.raises(InputError):
        make_supercell(diamond(10.26, "Si"), [[1, 0, 0], [0, 1, 0], [0, 0, 0]])
