"""The plane-wave Hamiltonian: FFT application against an explicit matrix."""

import numpy as np

from pwsolid.basis import fft_grid_for_cutoff, make_basis
from pwsolid.eigensolver import davidson, dense_lowest_eigenpairs
from pwsolid.fft import make_fft_grid
from pwsolid.hamiltonian import KPointHamiltonian, kinetic_preconditioner


def _random_hamiltonian(crystal, rng, cutoff=4.0, k=(0.1, 0.2, -0.15)):
    grid = fft_grid_for_cutoff(crystal.lattice, cutoff)
    basis = make_basis(crystal.lattice, k, cutoff, grid)
    v = rng.standard_normal(grid)
    return KPointHamiltonian(basis, make_fft_grid(grid), v)


def test_fft_application_equals_dense_matrix(silicon, rng):
    ham = _random_hamiltonian(silicon, rng)
    x = rng.standard_normal((5, ham.basis.size)) + 1j * rng.standard_normal((5, ham.basis.size))
    dense = ham.dense_matrix()
    assert np.allclose(ham.apply(x), x @ dense.T, atol=1e-11)


def test_hamiltonian_is_hermitian(silicon, rng):
    ham = _random_hamiltonian(silicon, rng)
    h = ham.dense_matrix()
    assert np.allclose(h, h.conj().T, atol=1e-12)
    x = rng.standard_normal((2, ham.basis.size)) + 1j * rng.standard_normal((2, ham.basis.size))
    hx = ham.apply(x)
    assert np.isclose(np.vdot(x[0], hx[1]), np.vdot(hx[0], x[1]))


def test_davidson_matches_dense_on_the_plane_wave_hamiltonian(silicon, rng):
    ham = _random_hamiltonian(silicon, rng, cutoff=5.0)
    n = 8
    ref, _ = dense_lowest_eigenpairs(ham.dense_matrix(), n)
    guess = rng.standard_normal((n, ham.basis.size)) + 0j
    res = davidson(ham.apply, kinetic_preconditioner(ham.basis.kinetic), guess,
                   tolerance=1e-9, max_iterations=200)
    assert res.converged
    # residual 1e-9 bounds the eigenvalue error far below 1e-8 Ha
    assert np.max(np.abs(res.eigenvalues - ref)) < 1e-8


def test_preconditioner_is_a_positive_damping(rng):
    kin = np.linspace(0, 50, 200)
    p = kinetic_preconditioner(kin)
    r = rng.standard_normal((3, 200)) + 0j
    out = p(r, np.zeros(3))
    ratio = (out / r).real
    assert np.all(ratio > 0) and np.all(ratio <= 1 + 1e-12)
    assert np.all(np.diff(ratio, axis=1) <= 1e-12)   # fast plane waves damped more


def test_preconditioner_matches_its_formula(rng):
    # the in-place real arithmetic against the Teter-Payne-Allan expression written out
    kin = np.linspace(0, 30, 80)
    r = rng.standard_normal((4, 80)) + 1j * rng.standard_normal((4, 80))
    ekin = (np.abs(r) ** 2 @ kin) / np.sum(np.abs(r) ** 2, axis=1)
    x = kin[None, :] / ekin[:, None]
    poly = 27 + 18 * x + 12 * x ** 2 + 8 * x ** 3
    expected = r * poly / (poly + 16 * x ** 4)
    assert np.allclose(kinetic_preconditioner(kin)(r, np.zeros(4)), expected, rtol=1e-13, atol=0)
