"""Separable dual-space Gaussian projectors: transforms, operator, Hermiticity."""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import eval_legendre, spherical_jn

import pwsolid
from pwsolid.basis import fft_grid_for_cutoff, make_basis
from pwsolid.eigensolver import davidson, dense_lowest_eigenpairs
from pwsolid.fft import make_fft_grid
from pwsolid.hamiltonian import KPointHamiltonian, kinetic_preconditioner
from pwsolid.pseudo import load_pseudopotential
from pwsolid.pseudo.separable import (hgh_off_diagonal, nonlocal_operator, projector_radial,
                                      projector_radial_real, real_spherical_harmonics)
from pwsolid.resources import pseudopotential_dir

CASES = [(0, 1), (0, 2), (0, 3), (1, 1), (1, 2), (1, 3), (2, 1), (2, 2), (2, 3)]


@pytest.mark.parametrize("l,i", CASES)
def test_projector_normalisation(l, i):
    # The real-space projectors of Goedecker, Teter & Hutter (Phys. Rev. B 54, 1703 (1996),
    # Eq. 3) are normalised: int r^2 p(r)^2 dr = 1.
    val, _ = quad(lambda r: r * r * projector_radial_real(l, i, 0.6, r) ** 2, 0, 30, limit=200)
    assert abs(val - 1) < 1e-10


@pytest.mark.parametrize("l,i", CASES)
@pytest.mark.parametrize("q", [0.0, 0.4, 1.3, 3.1, 6.0])
def test_reciprocal_projectors_equal_numerical_fourier_bessel(l, i, q):
    r_l = 0.55
    def integrand(r):
        return 4 * math.pi * r * r * spherical_jn(l, q * r) * projector_radial_real(l, i, r_l, r)
    numeric, _ = quad(integrand, 0, 25, limit=400, epsabs=1e-13, epsrel=1e-13)
    assert abs(projector_radial(l, i, r_l, np.array([q]))[0] - numeric) < 1e-8


def test_spherical_harmonics_addition_theorem(rng):
    # sum_m Y_lm(a) Y_lm(b) = (2l+1)/(4 pi) P_l(a.b) for real harmonics (common practice)
    a = rng.standard_normal((30, 3))
    b = rng.standard_normal((30, 3))
    cos = np.einsum("ij,ij->i", a, b) / np.linalg.norm(a, axis=1) / np.linalg.norm(b, axis=1)
    for l in (0, 1, 2):
        s = np.einsum("mi,mi->i", real_spherical_harmonics(l, a), real_spherical_harmonics(l, b))
        assert np.allclose(s, (2 * l + 1) / (4 * math.pi) * eval_legendre(l, cos))


def test_hgh_off_diagonal_relations():
    # Hartwigsen, Goedecker & Hutter, Phys. Rev. B 58, 3641 (1998), Eq. (6)-(8)
    h = hgh_off_diagonal(0, [1.0, 2.0, 3.0])
    assert np.isclose(h[0, 1], -0.5 * math.sqrt(3 / 5) * 2.0)
    assert np.isclose(h[0, 2], 0.5 * math.sqrt(5 / 21) * 3.0)
    assert np.isclose(h[1, 2], -0.5 * math.sqrt(100 / 63) * 3.0)
    h1 = hgh_off_diagonal(1, [1.0, 2.0, 3.0])
    assert np.isclose(h1[0, 1], -0.5 * math.sqrt(5 / 7) * 2.0)
    assert np.allclose(h1, h1.T)


def _silicon_operator(silicon, k, cutoff=5.0):
    pp = load_pseudopotential(pseudopotential_dir() / "Si-goedecker-teter-hutter.toml")
    grid = fft_grid_for_cutoff(silicon.lattice, cutoff)
    basis = make_basis(silicon.lattice, k, cutoff, grid)
    atoms = [(tau, pp.separable) for tau in silicon.cartesian_positions]
    proj, coupling = nonlocal_operator(basis.kpg, atoms, silicon.volume)
    return pp, basis, grid, proj, coupling


def test_nonlocal_matrix_equals_the_legendre_formula(silicon):
    # Independent construction of <k+G|V_nl|k+G'> with the addition theorem (no
    # spherical harmonics), REFERENCES 5a matrix-element formula.
    k = np.array([0.1, 0.25, -0.3])
    pp, basis, _, proj, coupling = _silicon_operator(silicon, k)
    dense = proj.T @ coupling @ proj.conj()
    atoms = [(tau, pp.separable) for tau in silicon.cartesian_positions]
    assert np.allclose(dense, _legendre_matrix(basis.kpg, atoms, silicon.volume), atol=1e-12)


def _legendre_matrix(g, atoms, volume):
    """<k+G|V_nl|k+G'> summed over atoms with the addition theorem, no harmonics."""
    q = np.linalg.norm(g, axis=1)
    cos = np.clip((g @ g.T) / np.outer(q, q), -1, 1)
    ref = np.zeros((len(q), len(q)), complex)
    for tau, part in atoms:
        phase = np.exp(-1j * (g @ tau))
        pair = np.outer(phase, phase.conj())
        for ch in part.channels:
            radial = np.array([projector_radial(ch.l, i + 1, ch.radius, q) for i in range(ch.n_radial)])
            ang = (2 * ch.l + 1) / (4 * math.pi) * eval_legendre(ch.l, cos)
            ref += pair * ang * (radial.T @ ch.h @ radial) / volume
    return ref


def test_hamiltonian_with_projectors_is_hermitian_and_davidson_matches_dense(silicon, rng):
    _, basis, grid, proj, coupling = _silicon_operator(silicon, [0.2, -0.1, 0.35])
    ham = KPointHamiltonian(basis, make_fft_grid(grid), rng.standard_normal(grid) * 0.3,
                            proj, coupling)
    h = ham.dense_matrix()
    assert np.allclose(h, h.conj().T, atol=1e-12)
    x = rng.standard_normal((4, basis.size)) + 1j * rng.standard_normal((4, basis.size))
    assert np.allclose(ham.apply(x), x @ h.T, atol=1e-10)
    ref, _ = dense_lowest_eigenpairs(h, 8)
    res = davidson(ham.apply, kinetic_preconditioner(basis.kinetic),
                   rng.standard_normal((8, basis.size)) + 0j, tolerance=1e-9, max_iterations=300)
    assert np.max(np.abs(res.eigenvalues - ref)) < 1e-8


def test_d_projectors_and_three_s_projectors_match_the_legendre_formula():
    # Gallium arsenide with the 1998 Ga and As files: three s, two p and one d projector
    # per atom, two species. Same independent construction as above (REFERENCES 5a).
    crystal = pwsolid.zincblende(pwsolid.angstrom(5.6), ["Ga", "As"])
    pps = [load_pseudopotential(pseudopotential_dir() / f"{el}-hartwigsen-goedecker-hutter.toml")
           for el in ("Ga", "As")]
    assert [len(c.h) for c in pps[0].separable.channels] == [3, 2, 1]
    k = np.array([0.05, -0.2, 0.3])
    grid = fft_grid_for_cutoff(crystal.lattice, 4.0)
    basis = make_basis(crystal.lattice, k, 4.0, grid)
    atoms = list(zip(crystal.cartesian_positions, [p.separable for p in pps]))
    proj, coupling = nonlocal_operator(basis.kpg, atoms, crystal.volume)
    assert proj.shape[0] == 2 * (3 + 2 * 3 + 5)
    dense = proj.T @ coupling @ proj.conj()
    assert np.allclose(dense, _legendre_matrix(basis.kpg, atoms, crystal.volume), atol=1e-12)


def test_hgh_off_diagonal_relations_for_d():
    # Hartwigsen, Goedecker & Hutter (1998), Eq. (8) as recalled in REFERENCES 5a [M]
    h = hgh_off_diagonal(2, [1.0, 2.0, 3.0])
    assert np.isclose(h[0, 1], -0.5 * math.sqrt(7 / 9) * 2.0)
    assert np.isclose(h[0, 2], 0.5 * math.sqrt(63 / 143) * 3.0)
    assert np.isclose(h[1, 2], -0.5 * 18 / math.sqrt(143) * 3.0)
    assert np.allclose(h, h.T)
