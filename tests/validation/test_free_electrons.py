"""Exact limit: with the potential switched off, H has the eigenvalues |k+G|^2/2."""

import numpy as np

from pwsolid.basis import fft_grid_for_cutoff, make_basis
from pwsolid.eigensolver import davidson
from pwsolid.fft import make_fft_grid
from pwsolid.hamiltonian import KPointHamiltonian, kinetic_preconditioner


def test_free_electron_eigenvalues_are_kinetic_energies(silicon, rng):
    cutoff = 6.0
    grid = fft_grid_for_cutoff(silicon.lattice, cutoff)
    fft = make_fft_grid(grid)
    for k in ([0, 0, 0], [0.5, 0.5, 0.0], [0.13, -0.27, 0.41]):
        basis = make_basis(silicon.lattice, k, cutoff, grid)
        ham = KPointHamiltonian(basis, fft, np.zeros(grid))
        n = 10
        res = davidson(ham.apply, kinetic_preconditioner(basis.kinetic),
                       rng.standard_normal((n, basis.size)) + 0j, tolerance=1e-10,
                       max_iterations=300)
        # independent enumeration of |k+G|^2/2 over a large box of G
        r = np.arange(-8, 9)
        m = np.stack(np.meshgrid(r, r, r, indexing="ij"), -1).reshape(-1, 3)
        exact = np.sort(0.5 * np.sum(((m + k) @ silicon.reciprocal) ** 2, axis=1))[:n]
        assert np.max(np.abs(res.eigenvalues - exact)) < 1e-10
