"""Plane-wave sets, FFT grids and the batched transforms."""

import numpy as np
import pytest

from pwsolid import fft as fftmod
from pwsolid.basis import density_sphere, fft_grid_for_cutoff, grid_g_vectors, make_basis
from pwsolid.fft import fast_fft_size, make_fft_grid


def _smooth(n):
    for p in (2, 3, 5, 7):
        while n % p == 0:
            n //= p
    return n == 1


def test_fast_sizes_are_the_next_7_smooth_numbers():
    for n in range(1, 200):
        m = fast_fft_size(n)
        assert m >= n and _smooth(m)
        assert not any(_smooth(j) for j in range(n, m))


def test_basis_is_the_cutoff_sphere(silicon):
    cutoff = 6.0
    grid = fft_grid_for_cutoff(silicon.lattice, cutoff)
    k = np.array([0.1, -0.2, 0.3])
    basis = make_basis(silicon.lattice, k, cutoff, grid)
    assert np.all(basis.kinetic <= cutoff + 1e-12)
    assert np.all(np.diff(basis.kinetic) >= -1e-12)
    # brute force over a generous box: nothing inside the sphere is missing
    r = np.arange(-12, 13)
    m = np.stack(np.meshgrid(r, r, r, indexing="ij"), -1).reshape(-1, 3)
    kin = 0.5 * np.sum(((m + k) @ silicon.reciprocal) ** 2, axis=1)
    assert basis.size == np.count_nonzero(kin <= cutoff)
    # the count approaches Omega k_max^3 / (6 pi^2) (volume of the sphere / cell of G-space)
    expected = silicon.volume * (2 * cutoff) ** 1.5 / (6 * np.pi ** 2)
    assert abs(basis.size - expected) / expected < 0.1


def test_grid_holds_the_density_sphere_without_aliasing(silicon):
    for cutoff in (4.0, 9.0, 15.0):
        grid = fft_grid_for_cutoff(silicon.lattice, cutoff)
        sphere = density_sphere(silicon.lattice, cutoff, grid)
        span = sphere.max(axis=0) - sphere.min(axis=0) + 1
        assert np.all(span <= np.array(grid))
        assert np.all(np.array(grid) < span + 8)   # and it is not wastefully large


def test_grid_too_small_is_refused(silicon):
    with pytest.raises(ValueError):
        make_basis(silicon.lattice, [0, 0, 0], 10.0, (6, 6, 6))


def test_transforms_are_inverse_and_match_numpy(silicon, rng):
    grid = (10, 12, 9)
    f = make_fft_grid(grid, batch=3)
    c = rng.standard_normal((7, *grid)) + 1j * rng.standard_normal((7, *grid))
    real = f.to_real(c)
    assert np.allclose(real, np.fft.ifftn(c, axes=(1, 2, 3)) * np.prod(grid))
    assert np.allclose(f.to_reciprocal(real), c)
    assert f.n_transforms == 14


def test_numpy_fallback_gives_the_same_numbers(monkeypatch, rng):
    grid = (8, 8, 8)
    c = rng.standard_normal((4, *grid)) + 0j
    ref = make_fft_grid(grid).to_real(c)
    monkeypatch.setattr(fftmod, "_HAVE_PYFFTW", False)
    assert np.allclose(make_fft_grid(grid).to_real(c), ref)


def test_scatter_gather_round_trip(silicon, rng):
    grid = fft_grid_for_cutoff(silicon.lattice, 5.0)
    basis = make_basis(silicon.lattice, [0.25, 0.25, 0.0], 5.0, grid)
    c = rng.standard_normal((3, basis.size)) + 1j * rng.standard_normal((3, basis.size))
    assert np.array_equal(basis.gather(basis.scatter(c)), c)
    g = grid_g_vectors(silicon.lattice, grid).reshape(-1, 3)[basis.grid_index]
    assert np.allclose(g + basis.k_fractional @ silicon.reciprocal, basis.kpg)


def test_fused_kernels_with_shared_buffers_match_plain_transforms(silicon, rng):
    # one buffer pair serves every block size and both spheres: alternate them,
    # with blocks longer than the batch, and compare with unfused transforms
    grid = fft_grid_for_cutoff(silicon.lattice, 5.0)
    bases = [make_basis(silicon.lattice, k, 5.0, grid) for k in ([0, 0, 0], [0.25, 0.5, 0.1])]
    fft = make_fft_grid(grid, batch=4)
    v = rng.standard_normal(grid)
    for nb, basis in [(3, bases[0]), (6, bases[1]), (1, bases[0]), (4, bases[1]), (9, bases[0])]:
        c = rng.standard_normal((nb, basis.size)) + 1j * rng.standard_normal((nb, basis.size))
        psi = fft.to_real(basis.scatter(c))
        ref = fft.to_reciprocal(psi * v).reshape(nb, -1)[:, basis.grid_index]
        # the fused kernel folds 1/N into V: equal to rounding
        assert np.allclose(fft.apply_potential(c, basis.grid_index, v), ref, rtol=0, atol=1e-12)
        w = rng.uniform(0.1, 2.0, nb)
        dens = np.ones(grid)
        fft.accumulate_density(c, basis.grid_index, w, dens)
        assert np.allclose(dens, 1 + np.einsum("b,bxyz->xyz", w, np.abs(psi) ** 2),
                           rtol=1e-13, atol=0)


def test_coefficients_carried_by_miller_index_between_cells_and_cutoffs():
    """Same Miller index, same coefficient; plane waves only one basis has get zero."""
    from pwsolid.basis import make_basis, transfer_coefficients
    from pwsolid.crystal import diamond

    rng = np.random.default_rng(3)
    si = diamond(10.2, "Si")
    small = make_basis(si.lattice, (0.25, 0.0, 0.5), 4.0, (18, 18, 18))
    large = make_basis(si.scaled(0.97).lattice, (0.25, 0.0, 0.5), 6.0, (18, 18, 18))
    c = rng.standard_normal((3, small.size)) + 1j * rng.standard_normal((3, small.size))
    up = transfer_coefficients(small.miller, c, large)
    back = transfer_coefficients(large.miller, up, small)
    assert np.array_equal(back, c)                       # every small-basis wave is in the large one
    where = {tuple(m): i for i, m in enumerate(small.miller)}
    for j, m in enumerate(large.miller):
        i = where.get(tuple(m))
        assert np.array_equal(up[:, j], c[:, i] if i is not None else np.zeros(3))
    assert transfer_coefficients(small.miller, c, small).tolist() == c.tolist()
