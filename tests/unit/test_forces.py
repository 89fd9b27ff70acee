"""Force kernels against central finite differences of the energy terms they differentiate.

Every kernel is the derivative of an energy expression the SCF evaluates; the checks
move one atom by +-h and difference that expression (common practice). A second-order
central difference has an error h^2/6 f''' (about 1e-9 here), well below the tolerances.
"""

import json
import math

import numpy as np
import pytest

from pwsolid.basis import fft_grid_for_cutoff, grid_g_vectors, grid_miller_indices, make_basis
from pwsolid.crystal import Crystal, diamond
from pwsolid.electrostatics import ewald_energy, ewald_forces
from pwsolid.energies import local_energy, nonlocal_energy
from pwsolid.forces import (EV_PER_ANGSTROM, AtomicForces, nonlocal_forces,
                            structure_factor_forces, symmetrize_forces)
from pwsolid.hamiltonian import core_density, local_potential
from pwsolid.pseudo import (AppelbaumHamann, EmptyCore, EvanescentCore, GaussianLocal,
                            PartialCore, ProjectorChannel, SeparablePart, nonlocal_operator)
from pwsolid.pseudo.separable import hgh_off_diagonal
from pwsolid.symmetry import atom_permutations, find_symmetry
from pwsolid.units import BOHR_ANGSTROM, HARTREE_EV

LATTICE = np.array([[0.2, 5.1, 5.0], [5.3, 0.1, 5.1], [5.0, 5.2, 0.3]])   # triclinic, bohr
H = 1e-4           # bohr


def _central_difference(energy, positions, atom, axis, h=H):
    """-dE/dx of atom ``atom`` along Cartesian ``axis``, positions Cartesian (n, 3)."""
    plus, minus = positions.copy(), positions.copy()
    plus[atom, axis] += h
    minus[atom, axis] -= h
    return -(energy(plus) - energy(minus)) / (2 * h)


def test_ewald_forces_are_the_gradient_of_the_ewald_energy(rng):
    # Ewald, Ann. Phys. 369, 253 (1921): the forces differentiate the same lattice sums.
    pos = rng.random((3, 3)) @ LATTICE
    charges = np.array([4.0, 3.0, 5.0])
    forces = ewald_forces(LATTICE, pos, charges)
    for atom, axis in [(0, 0), (1, 2), (2, 1)]:
        fd = _central_difference(lambda p: ewald_energy(LATTICE, p, charges), pos, atom, axis)
        # forces of order 1-10 Ha/bohr: h^2 f''' / 6 stays below 1e-6
        assert abs(forces[atom, axis] - fd) < 1e-6
    # Newton's third law, and the splitting parameter is a convergence device only
    assert np.abs(forces.sum(axis=0)).max() < 1e-10
    assert np.abs(ewald_forces(LATTICE, pos, charges, splitting=0.45) - forces).max() < 1e-9


LOCAL_FORMS = [EmptyCore(3.0, 1.1), AppelbaumHamann(4.0, 0.61, 3.04, -1.37),
               GaussianLocal(5.0, 0.43, -6.1, 1.2, 0.3, -0.05), EvanescentCore(1.0, 3.5, 0.35)]


@pytest.mark.parametrize("form", LOCAL_FORMS, ids=lambda f: type(f).__name__)
def test_local_forces_differentiate_the_local_energy(form, rng):
    # E_loc = Omega sum_G V_loc(G)* n(G) (pwsolid.energies.local_energy) at a fixed density;
    # the Coulomb tail is in the form factor, the G = 0 part is position independent.
    grid = (12, 12, 12)
    volume = abs(np.linalg.det(LATTICE))
    density = rng.random(grid) + 0.5
    n_g = np.fft.fftn(density) / density.size
    frac = rng.random((2, 3))
    species = ["X", "Y"]
    forms = {"X": form, "Y": GaussianLocal(3.0, 0.5, -2.0)}

    def energy(cart):
        v = local_potential(LATTICE, cart @ np.linalg.inv(LATTICE), species, forms, grid)
        return sum(local_energy(v, n_g, volume))

    g = grid_g_vectors(LATTICE, grid).reshape(-1, 3)
    q = np.linalg.norm(g, axis=1)
    forces = structure_factor_forces(g, grid_miller_indices(grid).reshape(-1, 3), n_g.ravel(),
                                     [forms[s].form_factor(q) for s in species], frac)
    cart = frac @ LATTICE
    for atom, axis in [(0, 0), (0, 2), (1, 1)]:
        fd = _central_difference(energy, cart, atom, axis)
        assert abs(forces[atom, axis] - fd) < 1e-7 * max(1.0, abs(fd))


def test_core_forces_differentiate_the_core_energy(rng):
    # int V(r) n_core(r) d^3r as a grid sum, with V a fixed field and the Gaussian core
    # of pwsolid.pseudo.core on one of two atoms.
    grid = (12, 12, 12)
    volume = abs(np.linalg.det(LATTICE))
    potential = rng.standard_normal(grid)
    v_g = np.fft.fftn(potential) / potential.size
    frac = rng.random((2, 3))
    cores = {"X": PartialCore(1.3, 0.7), "Y": None}

    def energy(cart):
        n_c = core_density(LATTICE, cart @ np.linalg.inv(LATTICE), ["X", "Y"], cores, grid)
        return float(np.mean(potential * np.fft.ifftn(n_c).real * n_c.size)) * volume

    g = grid_g_vectors(LATTICE, grid).reshape(-1, 3)
    ff = [cores["X"].form_factor(np.linalg.norm(g, axis=1)), None]
    forces = structure_factor_forces(g, grid_miller_indices(grid).reshape(-1, 3), v_g.ravel(),
                                     ff, frac)
    assert np.all(forces[1] == 0)
    for axis in range(3):
        fd = _central_difference(energy, frac @ LATTICE, 0, axis)
        assert abs(forces[0, axis] - fd) < 1e-8 * max(1.0, abs(fd))


def _separable(l_max):
    # s, p, d channels with the off-diagonal h of Hartwigsen, Goedecker & Hutter,
    # Phys. Rev. B 58, 3641 (1998)
    return SeparablePart(tuple(ProjectorChannel(l, 0.4 + 0.1 * l, hgh_off_diagonal(l, d))
                               for l, d in zip(range(l_max + 1),
                                               ([2.1, -1.3, 0.7], [1.1, -0.6], [-3.0, 1.4]))))


def test_nonlocal_forces_differentiate_the_nonlocal_energy(rng):
    # E_nl = sum_n w_n <psi_n|V_nl|psi_n> (pwsolid.energies.nonlocal_energy) at fixed
    # coefficients; only the projector phases exp(-i (k+G).tau) move with the atom.
    volume = abs(np.linalg.det(LATTICE))
    basis = make_basis(LATTICE, [0.13, -0.21, 0.3], 4.0, fft_grid_for_cutoff(LATTICE, 4.0))
    nb = 5
    c, _ = np.linalg.qr(rng.standard_normal((basis.size, nb))
                        + 1j * rng.standard_normal((basis.size, nb)))
    c = np.ascontiguousarray(c.T)
    occupation = np.array([2.0, 2.0, 1.5, 0.4, -0.01])     # smeared occupations may dip below 0
    parts = [_separable(2), _separable(1), _separable(2)]
    cart = rng.random((3, 3)) @ LATTICE

    def energy(positions):
        op = nonlocal_operator(basis.kpg, list(zip(positions, parts)), volume)
        return nonlocal_energy([c], [op], occupation[None], np.array([0.37]))

    proj, coupling = nonlocal_operator(basis.kpg, list(zip(cart, parts)), volume)
    owner = np.repeat(np.arange(3), [p.n_projectors for p in parts])
    forces = nonlocal_forces(c, 0.37 * occupation, proj, coupling, basis.kpg, owner, 3)
    for atom, axis in [(0, 0), (1, 1), (2, 2), (2, 0)]:
        fd = _central_difference(energy, cart, atom, axis)
        assert abs(forces[atom, axis] - fd) < 1e-7 * max(1.0, abs(fd))


def test_atom_permutations_of_diamond():
    # Fd-3m (48 operations) maps each silicon site onto itself or the other one, half each
    # (International Tables A, Wyckoff position 8a; common practice).
    si = diamond(10.26, "Si")
    ops = find_symmetry(si)
    perm = atom_permutations(ops, si.positions, si.species)
    assert perm.shape == (48, 2)
    assert sorted(np.bincount(perm[:, 0])) == [24, 24]
    assert np.all(perm[:, 0] != perm[:, 1])


def test_symmetrised_forces_vanish_on_a_site_without_a_fixed_vector(rng):
    # The site symmetry -43m of diamond leaves no vector invariant: the group average
    # of any set of forces is zero (group theory, common practice).
    si = diamond(10.26, "Si")
    ops = find_symmetry(si)
    out = symmetrize_forces(rng.standard_normal((2, 3)), ops, si.lattice, si.positions, si.species)
    assert np.abs(out).max() < 1e-14


def test_symmetrisation_is_a_covariant_projection(rng):
    # A rotated crystal gives rotated averaged forces, and averaging twice changes nothing.
    lat = np.array([[6.0, 0.0, 0.0], [-3.0, 3.0 * math.sqrt(3), 0.0], [0.0, 0.0, 9.0]])
    crystal = Crystal(lat, ("Mg", "Mg", "O"), [[1 / 3, 2 / 3, 0.25], [2 / 3, 1 / 3, 0.75],
                                               [1 / 3, 2 / 3, 0.61]])
    ops = find_symmetry(crystal)
    assert ops.n_ops > 1
    forces = rng.standard_normal((3, 3))
    once = symmetrize_forces(forces, ops, lat, crystal.positions, crystal.species)
    assert np.abs(symmetrize_forces(once, ops, lat, crystal.positions, crystal.species)
                  - once).max() < 1e-13
    angle = 0.7
    rot = np.array([[math.cos(angle), -math.sin(angle), 0], [math.sin(angle), math.cos(angle), 0],
                    [0, 0, 1]])
    turned = symmetrize_forces(forces @ rot.T, ops, lat @ rot.T, crystal.positions,
                               crystal.species)
    assert np.abs(turned - once @ rot.T).max() < 1e-13
    assert np.abs(once[:, :2]).max() < 1e-13        # a threefold axis along z: only F_z


def test_document_and_screen_lines_carry_both_units():
    # 1 Ha/bohr = 51.42208 eV/angstrom (CODATA 2018 Hartree energy and Bohr radius)
    assert abs(EV_PER_ANGSTROM - HARTREE_EV / BOHR_ANGSTROM) < 1e-12
    assert abs(EV_PER_ANGSTROM - 51.42208) < 1e-4
    f = np.array([[0.01, 0.0, -0.02], [-0.01, 0.0, 0.02]])
    forces = AtomicForces(f, {"local": f}, np.array([0.0, 1e-9, 0.0]), ("Ga", "As"), False)
    doc = json.loads(json.dumps(forces.as_document()))
    assert doc["atoms"][1]["species"] == "As"
    assert np.allclose(doc["atoms"][0]["force_eV_per_angstrom"], f[0] * EV_PER_ANGSTROM)
    assert abs(doc["largest_force_Ha_per_bohr"] - math.sqrt(5e-4)) < 1e-15
    lines = forces.summary_lines()
    assert len(lines) == 1 + 2 + 2 and "As" in lines[2] and "largest" in lines[3]
    assert lines[4].startswith("net force")
