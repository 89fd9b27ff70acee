"""Densities of states from band energies (layer 1: arrays only).

Two estimators of the density of states per cell:

* :func:`gaussian_dos`: every state broadened by a normalised Gaussian, from
  eigenvalues at any set of weighted k-points;
* :func:`tetrahedron_dos`: the linear tetrahedron method on a full uniform mesh,
  with :func:`tetrahedron_weights` (Bloechl-corrected integration weights for a
  Fermi level) and :func:`tetrahedron_fermi_level`.

Units and counting
------------------
Energies in hartree. Densities of states are **states per hartree per cell,
spin degeneracy included** (factor ``spin_degeneracy = 2`` by default): the
integrated DOS of ``n`` filled bands is ``2 n``, the number of electrons they
hold. Pass ``spin_degeneracy=1`` for states per spin channel.

Mesh convention (tetrahedron method): ``eigenvalues[i, j, l, n]`` is band ``n``
at ``k = ((i + s1)/n1, (j + s2)/n2, (l + s3)/n3)`` in units of the reciprocal
vectors, for any fixed shift ``s``; the mesh is periodic (point ``n1`` is point
0). Each mesh cell is split into six tetrahedra sharing its shortest main
diagonal (Cartesian length through the reciprocal vectors), which keeps the
tetrahedra as compact as possible.

References
----------
P. E. Bloechl, O. Jepsen and O. K. Andersen, Phys. Rev. B 49, 16223 (1994).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from scipy.special import erfc

__all__ = [
    "DensityOfStates",
    "gaussian_dos",
    "tetrahedron_dos",
    "tetrahedron_weights",
    "tetrahedron_fermi_level",
    "mesh_tetrahedra",
]

# Energies are evaluated in chunks so that (n_tetrahedra * n_bands, chunk) arrays
# stay below this many numbers.
_CHUNK_ELEMENTS = 4_000_000


@dataclass(frozen=True, eq=False)
class DensityOfStates:
    """A density of states on an energy grid.

    Attributes
    ----------
    energies : ndarray (n_e,), Ha
    dos : ndarray (n_e,), states / Ha / cell (spin degeneracy included)
    integrated : ndarray (n_e,), states / cell
        Number of states below each energy.
    method : str
        ``"gaussian"`` or ``"tetrahedron"``.
    """

    energies: np.ndarray
    dos: np.ndarray
    integrated: np.ndarray
    method: str


def _check_energies(energies) -> np.ndarray:
    e = np.atleast_1d(np.asarray(energies, float))
    if e.ndim != 1 or not np.all(np.isfinite(e)):
        raise ValueError("energies must be a finite 1-d array (Ha)")
    return e


# ----------------------------------------------------------------------------- Gaussian


def gaussian_dos(eigenvalues, weights, energies, width: float, *,
                 spin_degeneracy: float = 2.0) -> DensityOfStates:
    """Gaussian-broadened density of states.

    Parameters
    ----------
    eigenvalues : array (n_k, n_bands), Ha
    weights : array (n_k,)
        k-point weights summing to 1.
    energies : array (n_e,), Ha
    width : float, Ha
        Standard deviation ``sigma`` of each Gaussian.
    spin_degeneracy : float
        States per band and k-point (2 without spin polarisation).

    Returns
    -------
    DensityOfStates

    Notes
    -----
    ``g(E) = s sum_kn w_k exp(-(E - e_kn)^2 / 2 sigma^2) / (sqrt(2 pi) sigma)`` and
    ``N(E) = s sum_kn w_k erfc((e_kn - E) / (sqrt 2 sigma)) / 2``.
    """
    eps = np.asarray(eigenvalues, float)
    w = np.asarray(weights, float)
    if eps.ndim != 2 or w.shape != (eps.shape[0],):
        raise ValueError(f"eigenvalues {eps.shape} must be (n_k, n_bands) and weights (n_k,), "
                         f"got {w.shape}")
    if abs(w.sum() - 1.0) > 1e-8:
        raise ValueError(f"k-point weights must sum to 1 (they sum to {w.sum():.12g})")
    width = float(width)
    if not width > 0:
        raise ValueError("the Gaussian width must be positive (Ha)")
    e = _check_energies(energies)
    flat_e = eps.ravel()
    flat_w = np.repeat(w, eps.shape[1]) * spin_degeneracy
    dos = np.empty_like(e)
    integ = np.empty_like(e)
    step = max(1, _CHUNK_ELEMENTS // max(flat_e.size, 1))
    for start in range(0, len(e), step):
        x = (e[start:start + step, None] - flat_e[None, :]) / width
        dos[start:start + step] = (np.exp(-0.5 * x * x) @ flat_w) / (np.sqrt(2 * np.pi) * width)
        integ[start:start + step] = 0.5 * (erfc(-x / np.sqrt(2.0)) @ flat_w)
    return DensityOfStates(e, dos, integ, "gaussian")


# ----------------------------------------------------------------------------- tetrahedra


def mesh_tetrahedra(mesh, reciprocal) -> np.ndarray:
    """Corner indices of the tetrahedra of a periodic mesh.

    Parameters
    ----------
    mesh : 3 ints (n1, n2, n3)
    reciprocal : array (3, 3), 1/bohr
        Reciprocal vectors as rows (only used to find the shortest diagonal).

    Returns
    -------
    ndarray (6 n1 n2 n3, 4), int
        Flat C-order mesh indices of the four corners of every tetrahedron.
    """
    n = np.asarray(mesh, int)
    if n.shape != (3,) or np.any(n < 1):
        raise ValueError(f"mesh must be three positive integers, got {mesh}")
    b = np.asarray(reciprocal, float) / n[:, None]            # mesh steps as rows
    corners = np.array(list(itertools.product((0, 1), repeat=3)))   # (8, 3)
    # Main diagonals join corner c and 7 - c (c = 0..3); pick the shortest.
    lengths = [np.linalg.norm((corners[7 - c] - corners[c]) @ b) for c in range(4)]
    start = corners[int(np.argmin(lengths))]
    step = 1 - 2 * start                                       # +1 or -1 along each axis
    tetra = []
    for order in itertools.permutations(range(3)):
        v = start.copy()
        verts = [v.copy()]
        for axis in order:
            v[axis] += step[axis]
            verts.append(v.copy())
        tetra.append(verts)
    offsets = np.array(tetra)                                  # (6, 4, 3)
    cells = np.stack(np.meshgrid(*(np.arange(m) for m in n), indexing="ij"), -1).reshape(-1, 3)
    idx = (cells[:, None, None, :] + offsets[None]) % n       # (n_cells, 6, 4, 3)
    flat = (idx[..., 0] * n[1] + idx[..., 1]) * n[2] + idx[..., 2]
    return flat.reshape(-1, 4)


def _sorted_corner_energies(eigenvalues, reciprocal):
    eps = np.asarray(eigenvalues, float)
    if eps.ndim != 4:
        raise ValueError(f"eigenvalues must be (n1, n2, n3, n_bands), got shape {eps.shape}")
    if not np.all(np.isfinite(eps)):
        raise ValueError("eigenvalues must be finite")
    mesh = eps.shape[:3]
    tet = mesh_tetrahedra(mesh, reciprocal)                    # (n_t, 4)
    corner = eps.reshape(-1, eps.shape[3])[tet]                # (n_t, 4, n_b)
    corner = np.moveaxis(corner, 1, 2).reshape(-1, 4)          # (n_t * n_b, 4)
    order = np.argsort(corner, axis=1, kind="stable")
    return np.take_along_axis(corner, order, axis=1), order, tet, eps.shape


def _tetra_number_and_dos(e_sorted: np.ndarray, energy: np.ndarray):
    """Occupied fraction n_T(E) and its derivative for sorted corners (m, 4) at energies (m, k)."""
    e1, e2, e3, e4 = (e_sorted[:, i, None] for i in range(4))
    shape = np.broadcast_shapes(e1.shape, energy.shape)
    e1, e2, e3, e4, x = (np.broadcast_to(v, shape) for v in (e1, e2, e3, e4, energy))
    num = np.zeros(shape)
    dos = np.zeros(shape)
    num[x >= e4] = 1.0
    # Region boundaries are half-open, so every denominator below is strictly positive.
    r = (x >= e1) & (x < e2)
    if r.any():
        a, d21, d31, d41 = x[r] - e1[r], e2[r] - e1[r], e3[r] - e1[r], e4[r] - e1[r]
        den = d21 * d31 * d41
        num[r] = a ** 3 / den
        dos[r] = 3 * a * a / den
    r = (x >= e2) & (x < e3)
    if r.any():
        a = x[r] - e2[r]
        d21, d31, d41 = e2[r] - e1[r], e3[r] - e1[r], e4[r] - e1[r]
        d32, d42 = e3[r] - e2[r], e4[r] - e2[r]
        c = (d31 + d42) / (d32 * d42)
        num[r] = (d21 * d21 + 3 * d21 * a + 3 * a * a - c * a ** 3) / (d31 * d41)
        dos[r] = (3 * d21 + 6 * a - 3 * c * a * a) / (d31 * d41)
    r = (x >= e3) & (x < e4)
    if r.any():
        a = e4[r] - x[r]
        den = (e4[r] - e1[r]) * (e4[r] - e2[r]) * (e4[r] - e3[r])
        num[r] = 1.0 - a ** 3 / den
        dos[r] = 3 * a * a / den
    return num, dos


def tetrahedron_dos(eigenvalues, reciprocal, energies, *,
                    spin_degeneracy: float = 2.0) -> DensityOfStates:
    """Density of states by the linear tetrahedron method.

    Parameters
    ----------
    eigenvalues : array (n1, n2, n3, n_bands), Ha
        Bands on the full (unreduced) uniform mesh, see the module notes.
    reciprocal : array (3, 3), 1/bohr
        Reciprocal vectors of the cell as rows.
    energies : array (n_e,), Ha
    spin_degeneracy : float
        States per band and k-point (2 without spin polarisation).

    Returns
    -------
    DensityOfStates
        ``dos`` in states / Ha / cell and ``integrated`` in states / cell.

    Notes
    -----
    Within each tetrahedron the band is interpolated linearly between the four
    corner energies ``e1 <= e2 <= e3 <= e4``; the occupied volume fraction below
    ``E`` and its derivative are the closed forms of Bloechl, Jepsen & Andersen
    (1994), Appendix. Bloechl's correction adds ``D_T(E) sum_j (e_j - e_i) / 40``
    to the weight of corner ``i``; summed over the four corners it vanishes, so it
    leaves the total DOS and the integrated DOS unchanged (it matters for the
    corner weights of :func:`tetrahedron_weights` and for projected quantities).
    """
    e_sorted, _, tet, shape = _sorted_corner_energies(eigenvalues, reciprocal)
    e = _check_energies(energies)
    scale = spin_degeneracy / len(tet)               # every tetrahedron has volume V_BZ / n_tet
    order = np.argsort(e)
    es = e[order]
    num = np.empty_like(e)
    dos = np.empty_like(e)
    lowest, highest = e_sorted[:, 0], e_sorted[:, 3]
    top_sorted = np.sort(highest)
    # Energies in small sorted chunks: a tetrahedron entirely below a chunk counts as
    # full, one entirely above as empty; only those spanning it are evaluated.
    step = 16
    for start in range(0, len(es), step):
        chunk = es[start:start + step]
        active = (highest > chunk[0]) & (lowest <= chunk[-1])
        full = np.searchsorted(top_sorted, chunk[0], side="right")   # e4 <= every energy
        n_t, d_t = _tetra_number_and_dos(e_sorted[active], chunk[None, :])
        num[order[start:start + step]] = (n_t.sum(axis=0) + full) * scale
        dos[order[start:start + step]] = d_t.sum(axis=0) * scale
    return DensityOfStates(e, dos, num, "tetrahedron")


def tetrahedron_weights(eigenvalues, reciprocal, fermi_level: float, *,
                        spin_degeneracy: float = 2.0, bloechl: bool = True) -> np.ndarray:
    """Integration weights of every mesh state for occupation up to a Fermi level.

    Parameters
    ----------
    eigenvalues : array (n1, n2, n3, n_bands), Ha
        Bands on the full uniform mesh.
    reciprocal : array (3, 3), 1/bohr
    fermi_level : float, Ha
    spin_degeneracy : float
    bloechl : bool
        Add Bloechl's correction (default), which removes the leading error of the
        linear method for band-energy-like integrals.

    Returns
    -------
    ndarray (n1, n2, n3, n_bands)
        Weights ``w_kn`` such that ``sum_kn w_kn f(e_kn)`` approximates
        ``s int_BZ f(e_n(k)) theta(E_F - e_n(k)) dk / V_BZ``; they sum to the number
        of electrons below ``fermi_level`` per cell.

    Notes
    -----
    Corner weights of one tetrahedron (volume fraction ``v = V_T / V_BZ``), from
    Bloechl, Jepsen & Andersen (1994), Appendix; ``e_ij = e_i - e_j``:

    * ``e1 < E < e2``: ``C = v (E-e1)^3 / (4 e21 e31 e41)``;
      ``w1 = C [4 - (E-e1)(1/e21 + 1/e31 + 1/e41)]``, ``w_i = C (E-e1)/e_i1`` (i > 1);
    * ``e2 < E < e3``: with ``C1 = v (E-e1)^2 / (4 e41 e31)``,
      ``C2 = v (E-e1)(E-e2)(e3-E) / (4 e41 e32 e31)``, ``C3 = v (E-e2)^2 (e4-E) / (4 e42 e32 e41)``:
      ``w1 = C1 + (C1+C2)(e3-E)/e31 + (C1+C2+C3)(e4-E)/e41``,
      ``w2 = C1+C2+C3 + (C2+C3)(e3-E)/e32 + C3 (e4-E)/e42``,
      ``w3 = (C1+C2)(E-e1)/e31 + (C2+C3)(E-e2)/e32``,
      ``w4 = (C1+C2+C3)(E-e1)/e41 + C3 (E-e2)/e42``;
    * ``e3 < E < e4``: ``C = v (e4-E)^3 / (4 e41 e42 e43)``; ``w_i = v/4 - C (e4-E)/e4i``
      (i < 4), ``w4 = v/4 - C [4 - (e4-E)(1/e41 + 1/e42 + 1/e43)]``;
    * ``E >= e4``: ``w_i = v/4``.

    Correction: ``dw_i = D_T(E) sum_j (e_j - e_i) / 40`` with ``D_T`` the tetrahedron's DOS.
    """
    e_sorted, order, tet, shape = _sorted_corner_energies(eigenvalues, reciprocal)
    ef = float(fermi_level)
    v = 1.0 / len(tet)
    e1, e2, e3, e4 = (e_sorted[:, i] for i in range(4))
    w = np.zeros_like(e_sorted)
    w[ef >= e4] = v / 4

    r = (ef > e1) & (ef < e2)
    if r.any():
        a = ef - e1[r]
        d21, d31, d41 = e2[r] - e1[r], e3[r] - e1[r], e4[r] - e1[r]
        c = v * a ** 3 / (4 * d21 * d31 * d41)
        w[r, 0] = c * (4 - a * (1 / d21 + 1 / d31 + 1 / d41))
        w[r, 1] = c * a / d21
        w[r, 2] = c * a / d31
        w[r, 3] = c * a / d41
    r = (ef >= e2) & (ef < e3) & (ef > e1)
    if r.any():
        a1, a2, b3, b4 = ef - e1[r], ef - e2[r], e3[r] - ef, e4[r] - ef
        d31, d41, d32, d42 = e3[r] - e1[r], e4[r] - e1[r], e3[r] - e2[r], e4[r] - e2[r]
        c1 = v * a1 * a1 / (4 * d41 * d31)
        c2 = v * a1 * a2 * b3 / (4 * d41 * d32 * d31)
        c3 = v * a2 * a2 * b4 / (4 * d42 * d32 * d41)
        w[r, 0] = c1 + (c1 + c2) * b3 / d31 + (c1 + c2 + c3) * b4 / d41
        w[r, 1] = c1 + c2 + c3 + (c2 + c3) * b3 / d32 + c3 * b4 / d42
        w[r, 2] = (c1 + c2) * a1 / d31 + (c2 + c3) * a2 / d32
        w[r, 3] = (c1 + c2 + c3) * a1 / d41 + c3 * a2 / d42
    r = (ef >= e3) & (ef < e4)
    if r.any():
        b = e4[r] - ef
        d41, d42, d43 = e4[r] - e1[r], e4[r] - e2[r], e4[r] - e3[r]
        c = v * b ** 3 / (4 * d41 * d42 * d43)
        w[r, 0] = v / 4 - c * b / d41
        w[r, 1] = v / 4 - c * b / d42
        w[r, 2] = v / 4 - c * b / d43
        w[r, 3] = v / 4 - c * (4 - b * (1 / d41 + 1 / d42 + 1 / d43))
    if bloechl:
        _, d_t = _tetra_number_and_dos(e_sorted, np.full((len(e_sorted), 1), ef))
        total = e_sorted.sum(axis=1, keepdims=True)
        w += v * d_t * (total - 4 * e_sorted) / 40.0

    # Back to the unsorted corners, then onto the mesh states.
    w_corner = np.empty_like(w)
    np.put_along_axis(w_corner, order, w, axis=1)
    n_b = shape[3]
    w_corner = w_corner.reshape(len(tet), n_b, 4)
    state = tet[:, None, :] * n_b + np.arange(n_b)[None, :, None]   # flat (k, band) index
    out = np.bincount(state.ravel(), weights=w_corner.ravel(), minlength=int(np.prod(shape)))
    return spin_degeneracy * out.reshape(shape)


def tetrahedron_fermi_level(eigenvalues, reciprocal, n_electrons: float, *,
                            spin_degeneracy: float = 2.0, tolerance: float = 1e-12) -> float:
    """Fermi level (Ha) at which the tetrahedron integrated DOS equals ``n_electrons`` per cell.

    Found by bisection; for an insulator it is the middle of the gap.
    """
    eps = np.asarray(eigenvalues, float)
    capacity = spin_degeneracy * eps.shape[-1]
    if not 0 < n_electrons <= capacity:
        raise ValueError(f"{n_electrons} electrons do not fit in {eps.shape[-1]} bands "
                         f"(at most {capacity})")
    e_sorted, _, tet, _ = _sorted_corner_energies(eps, reciprocal)
    scale = spin_degeneracy / len(tet)

    def count(x):
        return _tetra_number_and_dos(e_sorted, np.full((len(e_sorted), 1), x))[0].sum() * scale

    lo, hi = float(eps.min()) - 1e-6, float(eps.max()) + 1e-6
    # Lowest energy holding the electrons and highest leaving them: a gap's two edges.
    a, b = lo, hi
    while b - a > tolerance * max(1.0, abs(a) + abs(b)):
        m = 0.5 * (a + b)
        a, b = (m, b) if count(m) < n_electrons - 1e-10 else (a, m)
    upper = b
    a, b = lo, hi
    while b - a > tolerance * max(1.0, abs(a) + abs(b)):
        m = 0.5 * (a + b)
        a, b = (m, b) if count(m) <= n_electrons + 1e-10 else (a, m)
    lower_end = a
    return 0.5 * (upper + lower_end)
