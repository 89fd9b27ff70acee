"""Block Davidson eigensolver and a dense reference (layer 1).

The solver knows nothing of plane waves: it receives a function that applies
the Hermitian operator to a block of vectors and one that preconditions a block
of residuals. Vectors are rows: blocks have shape (n_vectors, n_basis),
complex128, C-contiguous, so every subspace step is one matrix product.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable, Protocol

import numpy as np
from scipy.linalg import eigh

__all__ = ["ApplyOperator", "Preconditioner", "DavidsonResult", "davidson",
           "dense_lowest_eigenpairs", "orthonormalize"]


class ApplyOperator(Protocol):
    """Apply a Hermitian operator to a block (n, n_basis) -> (n, n_basis)."""

    def __call__(self, block: np.ndarray) -> np.ndarray: ...


class Preconditioner(Protocol):
    """Approximate (H - e)^-1 on residuals (n, n_basis) given Ritz values (n,)."""

    def __call__(self, residuals: np.ndarray, ritz_values: np.ndarray) -> np.ndarray: ...


@dataclass
class DavidsonResult:
    """Outcome of :func:`davidson`.

    Attributes
    ----------
    eigenvalues : (n,) float
    vectors : (n, n_basis) complex, orthonormal rows
    residual_norms : (n,) float, ||H x - e x||
    n_applications : int
        Number of single vectors the operator was applied to.
    iterations : int
    converged : bool
        All requested residual norms below the tolerance.
    seconds_blas : float
        Wall time inside the dense subspace products (for the benchmarks).
    """

    eigenvalues: np.ndarray
    vectors: np.ndarray
    residual_norms: np.ndarray
    n_applications: int
    iterations: int
    converged: bool
    seconds_blas: float = 0.0


def orthonormalize(block: np.ndarray) -> np.ndarray:
    """Orthonormalise rows by Cholesky QR, falling back to a symmetric (Loewdin) step."""
    # Gram matrix S_ij = <b_i|b_j>; with S = L L^H the rows of conj(L)^-1 B are orthonormal.
    s = block.conj() @ block.T
    try:
        chol = np.linalg.cholesky(s)
        return np.linalg.solve(chol.conj(), block)
    except np.linalg.LinAlgError:
        w, u = np.linalg.eigh(s)
        keep = w > 1e-12 * max(w.max(), 1e-300)
        return (u[:, keep] / np.sqrt(w[keep])).T @ block


def dense_lowest_eigenpairs(matrix: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``n`` eigenpairs of a dense Hermitian matrix; vectors as rows. For tests and tiny bases."""
    w, v = eigh(matrix, subset_by_index=(0, min(n, matrix.shape[0]) - 1))
    return w, np.ascontiguousarray(v.T)


def _checked(block: np.ndarray) -> np.ndarray:
    if not np.all(np.isfinite(block)):
        raise FloatingPointError("the operator returned non-finite values in the eigensolver")
    return block


def davidson(apply_h: ApplyOperator, precondition: Preconditioner, guess: np.ndarray, *,
             tolerance: float = 1e-6, max_iterations: int = 100, n_converge: int | None = None,
             max_subspace_factor: int = 3) -> DavidsonResult:
    """Lowest eigenpairs of a Hermitian operator by block Davidson with restarts.

    Parameters
    ----------
    apply_h
        Applies the operator to a block of row vectors.
    precondition
        Maps residual rows and their Ritz values to correction rows.
    guess : (n, n_basis) complex
        Starting vectors (need not be orthonormal); n eigenpairs are returned.
    tolerance
        Residual norm ||H x - e x|| below which a pair counts as converged.
    max_iterations
        Largest number of expansion steps.
    n_converge
        Only the lowest ``n_converge`` pairs must converge (default: all).
    max_subspace_factor
        The subspace is restarted from the Ritz vectors when it exceeds this
        many times n.

    Notes
    -----
    Each step adds the preconditioned residuals of the unconverged pairs only
    (converged pairs are kept but not expanded), orthogonalised twice against
    the subspace, and solves the Rayleigh-Ritz problem in the enlarged space.

    References
    ----------
    E. R. Davidson, J. Comput. Phys. 17, 87 (1975).
    """
    n = guess.shape[0]
    n_conv = n if n_converge is None else min(n, n_converge)
    blas = 0.0
    v = orthonormalize(np.ascontiguousarray(guess, dtype=complex))
    if v.shape[0] < n:
        raise np.linalg.LinAlgError("starting vectors are linearly dependent")
    hv = _checked(apply_h(v))
    n_apply = v.shape[0]
    t0 = time.perf_counter()
    h_sub = v.conj() @ hv.T
    blas += time.perf_counter() - t0
    max_sub = max(max_subspace_factor * n, n + 1)
    iterations = 0
    while True:
        h_sub = 0.5 * (h_sub + h_sub.conj().T)
        w, c = eigh(h_sub)
        t0 = time.perf_counter()
        x = c[:, :n].T @ v
        hx = c[:, :n].T @ hv
        blas += time.perf_counter() - t0
        theta = w[:n]
        residuals = hx - theta[:, None] * x
        norms = np.linalg.norm(residuals, axis=1)
        if not np.all(np.isfinite(norms)):
            raise FloatingPointError("non-finite residuals in the eigensolver")
        active = np.flatnonzero(norms[:n_conv] > tolerance)
        if active.size == 0 or iterations >= max_iterations:
            break
        iterations += 1
        if v.shape[0] + active.size > max_sub:
            v, hv = x, hx           # restart from the current Ritz vectors
            h_sub = np.diag(theta).astype(complex)
        t = precondition(residuals[active], theta[active])
        t0 = time.perf_counter()
        for _ in range(2):          # twice is enough (Kahan-Parlett)
            t -= (t @ v.conj().T) @ v
        blas += time.perf_counter() - t0
        t = orthonormalize(t)
        if t.shape[0] == 0:
            break
        ht = _checked(apply_h(t))
        n_apply += t.shape[0]
        t0 = time.perf_counter()
        off = v.conj() @ ht.T
        tt = t.conj() @ ht.T
        blas += time.perf_counter() - t0
        h_sub = np.block([[h_sub, off], [off.conj().T, tt]])
        v = np.concatenate([v, t])
        hv = np.concatenate([hv, ht])
    return DavidsonResult(theta.copy(), np.ascontiguousarray(x), norms, n_apply, iterations,
                          bool(np.all(norms[:n_conv] <= tolerance)), blas)
