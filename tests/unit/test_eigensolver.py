"""Block Davidson on analytic toy problems."""

import numpy as np
import pytest

from pwsolid.eigensolver import davidson, dense_lowest_eigenpairs, orthonormalize


def _toy(rng, n=300):
    d = np.sort(rng.uniform(0, 40, n))
    a = rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))
    h = np.diag(d) + 0.02 * (a + a.conj().T)
    precondition = lambda r, e: r / np.maximum(np.abs(d[None, :] - e[:, None]), 0.3)  # noqa: E731
    return h, precondition


def test_orthonormalize_gives_orthonormal_rows(rng):
    x = rng.standard_normal((6, 50)) + 1j * rng.standard_normal((6, 50))
    q = orthonormalize(x)
    assert np.allclose(q.conj() @ q.T, np.eye(6), atol=1e-12)
    # and spans the same space
    coeffs = np.linalg.lstsq(q.T, x.T, rcond=None)[0]
    assert np.allclose(q.T @ coeffs, x.T)


def test_davidson_finds_the_lowest_eigenpairs(rng):
    h, pre = _toy(rng)
    ref, _ = dense_lowest_eigenpairs(h, 6)
    res = davidson(lambda x: x @ h.T, pre, rng.standard_normal((6, 300)) + 0j, tolerance=1e-10,
                   max_iterations=300)
    assert res.converged
    assert np.allclose(res.eigenvalues, ref, atol=1e-10)
    assert np.allclose(res.vectors.conj() @ res.vectors.T, np.eye(6), atol=1e-10)
    resid = res.vectors @ h.T - res.eigenvalues[:, None] * res.vectors
    assert np.all(np.linalg.norm(resid, axis=1) <= 1e-10)


def test_warm_start_needs_fewer_applications(rng):
    h, pre = _toy(rng)
    cold = davidson(lambda x: x @ h.T, pre, rng.standard_normal((6, 300)) + 0j, tolerance=1e-8,
                    max_iterations=300)
    perturbed = h + np.diag(rng.uniform(0, 1e-3, 300))
    warm = davidson(lambda x: x @ perturbed.T, pre, cold.vectors, tolerance=1e-8,
                    max_iterations=300)
    assert warm.converged and warm.n_applications < cold.n_applications / 2


def test_partial_convergence_and_failures(rng):
    h, pre = _toy(rng)
    res = davidson(lambda x: x @ h.T, pre, rng.standard_normal((8, 300)) + 0j, tolerance=1e-9,
                   n_converge=4, max_iterations=300)
    assert np.all(res.residual_norms[:4] <= 1e-9)
    with pytest.raises(FloatingPointError):
        davidson(lambda x: x * np.nan, pre, rng.standard_normal((2, 300)) + 0j)


def test_orthonormalize_leaves_its_input_and_drops_dependent_rows(rng):
    x = rng.standard_normal((4, 40)) + 1j * rng.standard_normal((4, 40))
    x[3] = x[0] + 2j * x[1]            # Cholesky fails; the symmetric step keeps three rows
    before = x.copy()
    q = orthonormalize(x)
    assert np.array_equal(x, before)
    assert q.shape == (3, 40) and np.allclose(q.conj() @ q.T, np.eye(3), atol=1e-12)


def test_davidson_with_dependent_corrections_and_restarts(rng):
    # a tiny subspace limit forces restarts; the result must not depend on them
    h, pre = _toy(rng, n=120)
    ref, _ = dense_lowest_eigenpairs(h, 4)
    res = davidson(lambda x: x @ h.T, pre, rng.standard_normal((4, 120)) + 0j, tolerance=1e-9,
                   max_iterations=400, max_subspace_factor=2)
    assert res.converged and np.allclose(res.eigenvalues, ref, atol=1e-9)
