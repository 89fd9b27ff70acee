"""Plane-wave bases and FFT grids (layer 2).

For a k-point the basis is the set of reciprocal-lattice vectors G with
|k+G|^2/2 <= cutoff. Products of two such functions (the density) contain
|G| up to 2 sqrt(2 cutoff); the FFT grid is the smallest fast size that holds
that sphere without aliasing, so densities are exact on the grid.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .fft import fast_fft_size

__all__ = [
    "PlaneWaveSet",
    "make_basis",
    "basis_from_miller",
    "fft_grid_for_cutoff",
    "grid_miller_indices",
    "grid_g_vectors",
    "density_sphere",
    "transfer_coefficients",
]


@dataclass(frozen=True, eq=False)
class PlaneWaveSet:
    """Plane waves of one k-point.

    Attributes
    ----------
    k_fractional : ndarray (3,)
        k in units of the reciprocal vectors.
    miller : ndarray (n_pw, 3) int
        Integer coordinates m of G = m . B.
    kpg : ndarray (n_pw, 3) float, 1/bohr
        Cartesian k + G.
    kinetic : ndarray (n_pw,) float, Ha
        |k+G|^2 / 2, sorted ascending.
    grid_index : ndarray (n_pw,) int
        Flat index of each G on the FFT grid (C order).
    grid_shape : tuple of 3 int
    """

    k_fractional: np.ndarray
    miller: np.ndarray
    kpg: np.ndarray
    kinetic: np.ndarray
    grid_index: np.ndarray
    grid_shape: tuple[int, int, int]

    @property
    def size(self) -> int:
        return len(self.kinetic)

    def scatter(self, coefficients: np.ndarray) -> np.ndarray:
        """Place a block (nb, n_pw) on zero-filled grids (nb, *grid_shape)."""
        nb = coefficients.shape[0]
        out = np.zeros((nb, int(np.prod(self.grid_shape))), dtype=complex)
        out[:, self.grid_index] = coefficients
        return out.reshape(nb, *self.grid_shape)

    def gather(self, grids: np.ndarray) -> np.ndarray:
        """Pick the basis coefficients (nb, n_pw) out of grids (nb, *grid_shape)."""
        nb = grids.shape[0]
        return grids.reshape(nb, -1)[:, self.grid_index]


def _box_bounds(lattice: np.ndarray, gmax: float) -> np.ndarray:
    # |m_i| = |G . a_i| / 2 pi <= gmax |a_i| / 2 pi
    return np.floor(gmax * np.linalg.norm(lattice, axis=1) / (2 * np.pi) + 1e-9).astype(int)


def fft_grid_for_cutoff(lattice: np.ndarray, cutoff: float) -> tuple[int, int, int]:
    """Smallest fast FFT grid holding the density sphere |G| <= 2 sqrt(2 cutoff)."""
    bounds = _box_bounds(np.asarray(lattice, float), 2.0 * np.sqrt(2.0 * cutoff))
    return tuple(fast_fft_size(2 * b + 1) for b in bounds)


def make_basis(lattice: np.ndarray, k_fractional, cutoff: float, grid_shape) -> PlaneWaveSet:
    """Plane waves with |k+G|^2/2 <= cutoff for one k-point.

    Raises
    ------
    ValueError
        If the grid cannot hold the basis (some G would alias).
    """
    lattice = np.asarray(lattice, float)
    recip = 2 * np.pi * np.linalg.inv(lattice).T
    k = np.asarray(k_fractional, float)
    kc = k @ recip
    gmax = np.sqrt(2.0 * cutoff)
    bounds = _box_bounds(lattice, gmax + np.linalg.norm(kc)) + 1
    axes = [np.arange(-b, b + 1) for b in bounds]
    m = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    kpg = (m + k) @ recip
    kin = 0.5 * np.einsum("ij,ij->i", kpg, kpg)
    keep = kin <= cutoff * (1 + 1e-12)
    m, kpg, kin = m[keep], kpg[keep], kin[keep]
    order = np.lexsort((m[:, 2], m[:, 1], m[:, 0], np.round(kin, 10)))
    return _plane_wave_set(k, m[order], kpg[order], kin[order], grid_shape)


def basis_from_miller(lattice: np.ndarray, k_fractional, miller, grid_shape) -> PlaneWaveSet:
    """The plane waves of the given Miller indices at one k-point, whatever their energy.

    Keeps a basis fixed under a deformation of the cell: the Miller set of a reference
    cell's :func:`make_basis` describes the same Bloch functions in a strained copy
    (fractional coordinates), so energies of strained cells differ by the physics and
    not by plane waves entering or leaving the cutoff sphere (no Pulay stress).

    Parameters
    ----------
    lattice : (3, 3) bohr
    k_fractional : (3,)
    miller : (n_pw, 3) int
    grid_shape : 3 ints

    Raises
    ------
    ValueError
        If the grid cannot hold the plane waves.
    """
    lattice = np.asarray(lattice, float)
    recip = 2 * np.pi * np.linalg.inv(lattice).T
    k = np.asarray(k_fractional, float)
    m = np.asarray(miller, int).reshape(-1, 3)
    kpg = (m + k) @ recip
    kin = 0.5 * np.einsum("ij,ij->i", kpg, kpg)
    order = np.lexsort((m[:, 2], m[:, 1], m[:, 0], np.round(kin, 10)))
    return _plane_wave_set(k, m[order], kpg[order], kin[order], grid_shape)


def _plane_wave_set(k, m, kpg, kin, grid_shape) -> PlaneWaveSet:
    shape = tuple(int(n) for n in grid_shape)
    span = m.max(axis=0) - m.min(axis=0) + 1 if len(m) else np.zeros(3, int)
    if np.any(span > np.array(shape)):
        raise ValueError(f"FFT grid {shape} too small for the basis (span {span.tolist()})")
    idx = np.ravel_multi_index(tuple((m % np.array(shape)).T), shape)
    return PlaneWaveSet(k, m.astype(int), kpg, kin, idx.astype(np.intp), shape)


def grid_miller_indices(grid_shape) -> np.ndarray:
    """Integer frequencies of every grid point, shape (*grid_shape, 3), in FFT order."""
    axes = [np.fft.fftfreq(n, 1.0 / n).round().astype(int) for n in grid_shape]
    return np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1)


def grid_g_vectors(lattice: np.ndarray, grid_shape) -> np.ndarray:
    """Cartesian G of every grid point, shape (*grid_shape, 3), 1/bohr."""
    recip = 2 * np.pi * np.linalg.inv(np.asarray(lattice, float)).T
    return grid_miller_indices(grid_shape) @ recip


def density_sphere(lattice: np.ndarray, cutoff: float, grid_shape) -> np.ndarray:
    """Miller indices (n_G, 3) of the density sphere |G| <= 2 sqrt(2 cutoff) that fit the grid."""
    m = grid_miller_indices(grid_shape).reshape(-1, 3)
    g = grid_g_vectors(lattice, grid_shape).reshape(-1, 3)
    gd = 2.0 * np.sqrt(2.0 * cutoff)
    inside = np.einsum("ij,ij->i", g, g) <= gd * gd * (1 + 1e-10)
    return m[inside]


def transfer_coefficients(old_miller: np.ndarray, coefficients: np.ndarray,
                          new_basis: PlaneWaveSet) -> np.ndarray:
    """Carry plane-wave coefficients to another basis by Miller index.

    Parameters
    ----------
    old_miller : ndarray (n_old, 3) int
        Miller indices of the old basis (same k-point in fractional coordinates).
    coefficients : ndarray (n_bands, n_old) complex
        Coefficient rows on the old basis.
    new_basis : PlaneWaveSet
        The basis to carry them to.

    Returns
    -------
    ndarray (n_bands, n_new) complex
        Coefficients at the Miller indices both bases share; zero elsewhere.

    Notes
    -----
    Under a homogeneous deformation of the cell a Bloch function keeps its
    fractional-coordinate shape, so the same Miller indices describe it; only the
    cutoff sphere (in Cartesian G) gains or loses its outermost shell. The rows are
    not re-orthonormalised here: the eigensolver does that with its start vectors.
    """
    old_miller = np.asarray(old_miller, int)
    new_miller = new_basis.miller
    span = int(max(np.abs(old_miller).max(initial=0), np.abs(new_miller).max(initial=0))) + 1
    width = 2 * span + 1

    def keys(m):
        s = m + span
        return (s[:, 0] * width + s[:, 1]) * width + s[:, 2]

    old_keys = keys(old_miller)
    order = np.argsort(old_keys)
    new_keys = keys(new_miller)
    pos = np.searchsorted(old_keys[order], new_keys)
    pos = np.minimum(pos, len(order) - 1)
    found = old_keys[order][pos] == new_keys
    out = np.zeros((coefficients.shape[0], new_basis.size), dtype=complex)
    out[:, found] = coefficients[:, order[pos[found]]]
    return out
