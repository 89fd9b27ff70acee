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
from scipy.linalg.blas import zgemm, zherk, ztrsm
from scipy.linalg.lapack import zpotrf

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


def _overlap(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Overlaps S_ij = <a_i|b_j> = sum_k conj(a_ik) b_jk of two row blocks, (n_a, n_b).

    One BLAS call on the blocks as they lie in memory (C-ordered rows are the
    columns of a Fortran matrix): no conjugated copy of either block.
    """
    return zgemm(1.0, a.T, b.T, trans_a=2)


class _Clock:
    """Times the dense linear-algebra calls (BLAS and LAPACK) for the benchmarks."""

    def __init__(self):
        self.seconds = 0.0

    def __call__(self, fn, *args, **kwargs):
        t0 = time.perf_counter()
        out = fn(*args, **kwargs)
        self.seconds += time.perf_counter() - t0
        return out


def _same(x):
    return x


def _project_out(basis: np.ndarray, block: np.ndarray, clock, total=_same) -> None:
    """block <- block - basis^T (conj(basis) block^T)^T: remove the span of orthonormal rows.

    Two BLAS calls; the update runs in place on the rows of ``block`` (C-contiguous).
    ``total`` sums the overlaps over the processes holding other columns.
    """
    coef = total(clock(_overlap, basis, block))
    out = clock(zgemm, -1.0, basis.T, coef, 1.0, block.T, 0, 0, 1)
    if not np.may_share_memory(out, block):    # f2py had to copy (non-contiguous block)
        block.T[...] = out


def _orthonormalize_in_place(block: np.ndarray, clock=None, total=_same) -> np.ndarray:
    """Orthonormal rows spanning ``block`` (C-contiguous complex), overwriting it when it can.

    Cholesky QR: S = U^H U from the Gram matrix (one Hermitian rank-k update),
    then the rows of U^-T B are orthonormal (one triangular solve); both run in
    BLAS and LAPACK on the block in place. When S is not numerically positive
    definite (the factorisation fails, or a pivot is below 1e-6 of the largest), a
    symmetric (Loewdin) step keeps the well-conditioned directions.
    ``total`` sums the Gram matrix over the processes holding other columns.
    """
    clock = clock or _Clock()
    gram = total(clock(zherk, 1.0, block.T, trans=2))       # upper triangle of S
    upper, info = clock(zpotrf, gram, lower=0, overwrite_a=1)
    # A dependent row can still pass the factorisation with a pivot at round-off level
    # (sqrt(eps) of the largest); its row of U^-T B would then be noise, not a direction.
    pivots = np.abs(np.diagonal(upper))
    if info == 0 and pivots.min() > 1e-6 * pivots.max():
        return clock(ztrsm, 1.0, upper, block.T, side=1, lower=0, overwrite_b=1).T
    s = total(clock(_overlap, block, block))
    w, u = clock(np.linalg.eigh, s)
    keep = w > 1e-12 * max(w.max(), 1e-300)
    return clock(np.matmul, (u[:, keep] / np.sqrt(w[keep])).T, block)


def orthonormalize(block: np.ndarray) -> np.ndarray:
    """Orthonormalise rows by Cholesky QR, falling back to a symmetric (Loewdin) step.

    Returns a new array; ``block`` is not changed.
    """
    return np.ascontiguousarray(_orthonormalize_in_place(np.array(block, dtype=complex)))


def dense_lowest_eigenpairs(matrix: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``n`` eigenpairs of a dense Hermitian matrix; vectors as rows. For tests and tiny bases."""
    w, v = eigh(matrix, subset_by_index=(0, min(n, matrix.shape[0]) - 1))
    return w, np.ascontiguousarray(v.T)


def _check_finite(h_sub: np.ndarray) -> None:
    # Non-finite values in an H block reach the subspace matrix through the
    # overlaps, so checking the small matrix is enough.
    if not np.isfinite(h_sub).all():
        raise FloatingPointError("the operator returned non-finite values in the eigensolver")


def davidson(apply_h: ApplyOperator, precondition: Preconditioner, guess: np.ndarray, *,
             tolerance: float = 1e-6, max_iterations: int = 100, n_converge: int | None = None,
             max_subspace_factor: int = 3,
             total: Callable[[np.ndarray], np.ndarray] | None = None) -> DavidsonResult:
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
    total
        For vectors whose components (columns) are spread over several
        processes: sums an array over them, giving every process the same bits.
        Each process then passes its own columns of ``guess``, ``apply_h`` and
        ``precondition`` map its columns to its columns, and the result holds
        its columns of the eigenvectors. Every decision is taken on summed
        quantities, so all processes take the same steps. Default: one process.

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
    total = total or _same
    clock = _Clock()
    v0 = _orthonormalize_in_place(np.array(guess, dtype=complex), clock, total)
    if v0.shape[0] < n:
        raise np.linalg.LinAlgError("starting vectors are linearly dependent")
    n_local = v0.shape[1]
    n_basis = int(round(float(total(np.array([float(n_local)]))[0])))
    max_sub = min(max(max_subspace_factor * n, n + 1), n_basis)
    # Subspace and its image under H live in preallocated row buffers: no
    # concatenation per step. Rows [0, m) are in use; new directions are built
    # in place in the rows after them.
    v = np.empty((max_sub + n, n_local), dtype=complex)
    hv = np.empty_like(v)
    m = n
    v[:n] = v0
    hv[:n] = apply_h(v[:n])
    n_apply = n
    h_sub = total(clock(_overlap, v[:n], hv[:n]))
    _check_finite(h_sub)
    iterations = 0
    while True:
        h_sub = 0.5 * (h_sub + h_sub.conj().T)
        w, c = clock(np.linalg.eigh, h_sub)
        cn = c[:, :n].T
        x = clock(np.matmul, cn, v[:m])
        hx = clock(np.matmul, cn, hv[:m])
        theta = w[:n]
        residuals = hx - theta[:, None] * x
        parts = residuals.view(float)
        norms = np.sqrt(total(np.einsum("ij,ij->i", parts, parts)))
        if not np.isfinite(norms).all():
            raise FloatingPointError("non-finite residuals in the eigensolver")
        active = np.flatnonzero(norms[:n_conv] > tolerance)
        if active.size == 0 or iterations >= max_iterations:
            break
        iterations += 1
        if m + active.size > max_sub:
            v[:n], hv[:n] = x, hx           # restart from the current Ritz vectors
            m = n
            h_sub = np.diag(theta).astype(complex)
        k = active.size
        t = v[m:m + k]
        t[...] = precondition(residuals[active], theta[active])
        for _ in range(2):          # twice is enough (Kahan-Parlett)
            _project_out(v[:m], t, clock, total)
        q = _orthonormalize_in_place(t, clock, total)
        k = q.shape[0]
        if k == 0:
            break
        if not np.may_share_memory(q, t):     # the Loewdin fallback returns new rows
            v[m:m + k] = q
        t = v[m:m + k]
        ht = hv[m:m + k]
        ht[...] = apply_h(t)
        n_apply += k
        # the new columns of the subspace matrix, <v_i|H t_j> for i < m + k, at once
        new = total(clock(_overlap, v[:m + k], ht))
        grown = np.empty((m + k, m + k), dtype=complex)
        grown[:m, :m] = h_sub
        grown[:, m:] = new
        grown[m:, :m] = new[:m].conj().T
        _check_finite(grown)
        h_sub = grown
        m += k
    blas = clock.seconds
    return DavidsonResult(theta.copy(), np.ascontiguousarray(x), norms, n_apply, iterations,
                          bool(np.all(norms[:n_conv] <= tolerance)), blas)
