"""Space-group operations of a crystal and symmetrisation of densities (layer 2).

Conventions
-----------
An operation ``{W | t}`` maps a point with fractional (direct) coordinates ``x`` to

    x' = W x + t,

with ``W`` an integer 3x3 matrix (determinant +-1) and ``t`` a fractional
translation in [0, 1). A scalar field ``n`` of the crystal is symmetric when
``n(W x + t) = n(x)`` for every operation.

For Fourier components ``n(x) = sum_m n(m) exp(2 pi i m . x)`` over integer Miller
indices ``m`` (``G = m . B`` with the reciprocal vectors ``B`` as rows), the field
``n(W x + t)`` has components ``n(W^{-T} m) exp(2 pi i (W^{-T} m) . t)``, so the
group average is

    n_s(m) = (1 / N_ops) sum_ops n(W^{-T} m) exp(+2 pi i (W^{-T} m) . t).

The operations are found with spglib (Togo & Tanaka, arXiv:1808.01590 (2018)).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import spglib

from .crystal import ELEMENTS, Crystal
from .errors import InputError

__all__ = [
    "SymmetryOperations",
    "find_symmetry",
    "identity_only",
    "atom_permutations",
    "DensitySymmetrizer",
    "make_density_symmetrizer",
    "reduced_lattice",
]

# Translations closer than this to 0 or 1 are set to exactly 0 (spglib returns
# them symmetrised to ~1e-15, and a clean 0 keeps phases exactly 1).
_TRANSLATION_SNAP = 1e-8


@dataclass(frozen=True, eq=False)
class SymmetryOperations:
    """A set of space-group operations ``x' = W x + t`` in fractional coordinates.

    Attributes
    ----------
    rotations : ndarray, shape (n_ops, 3, 3), int
        Rotation parts ``W`` acting on fractional direct coordinates (column vectors).
    translations : ndarray, shape (n_ops, 3), float64
        Fractional translations ``t`` in [0, 1).
    international_symbol : str
        Hermann-Mauguin symbol of the space group (e.g. ``"Fd-3m"``); for a proper
        subgroup made by :meth:`subgroup` it reads ``"subgroup of Fd-3m"``.
    space_group_number : int
        Number in International Tables Vol. A (1..230); 0 for a proper subgroup,
        whose type is not identified.
    """

    rotations: np.ndarray
    translations: np.ndarray
    international_symbol: str
    space_group_number: int

    def __post_init__(self):
        rot = np.array(self.rotations, dtype=np.int64).reshape(-1, 3, 3)
        tr = np.array(self.translations, dtype=float).reshape(-1, 3)
        if len(rot) != len(tr) or len(rot) == 0:
            raise ValueError(f"{len(rot)} rotations for {len(tr)} translations")
        tr = tr - np.floor(tr)
        tr[(tr < _TRANSLATION_SNAP) | (tr > 1.0 - _TRANSLATION_SNAP)] = 0.0
        rot.setflags(write=False)
        tr.setflags(write=False)
        object.__setattr__(self, "rotations", rot)
        object.__setattr__(self, "translations", tr)
        object.__setattr__(self, "space_group_number", int(self.space_group_number))

    @property
    def n_ops(self) -> int:
        """Number of operations."""
        return len(self.rotations)

    def subgroup(self, mask) -> "SymmetryOperations":
        """Return the operations selected by ``mask``.

        Parameters
        ----------
        mask : array_like of bool, shape (n_ops,), or of int indices
            Which operations to keep; the selection must form a group (this is the
            caller's responsibility; :meth:`is_group` checks it).

        Returns
        -------
        SymmetryOperations
            ``self`` when every operation is kept; otherwise a new set labelled
            ``"subgroup of <symbol>"`` with ``space_group_number = 0``.
        """
        mask = np.asarray(mask)
        if mask.dtype == bool:
            if mask.shape != (self.n_ops,):
                raise ValueError(f"mask of shape {mask.shape} for {self.n_ops} operations")
            index = np.flatnonzero(mask)
        else:
            index = np.unique(mask.astype(np.int64).ravel())
        if len(index) == 0:
            raise ValueError("a subgroup needs at least the identity")
        if len(index) == self.n_ops:
            return self
        symbol = self.international_symbol
        if not symbol.startswith("subgroup of "):
            symbol = f"subgroup of {symbol}"
        return SymmetryOperations(self.rotations[index], self.translations[index], symbol, 0)

    def is_group(self, tolerance: float = 1e-6) -> bool:
        """True when the operations are closed under composition (modulo lattice translations)."""
        w, t = self.rotations, self.translations
        # {W1|t1}{W2|t2} = {W1 W2 | W1 t2 + t1}
        w12 = np.einsum("aij,bjk->abik", w, w).reshape(-1, 3, 3)
        t12 = (np.einsum("aij,bj->abi", w, t) + t[:, None, :]).reshape(-1, 3)
        same_w = np.all(w12[:, None] == w[None], axis=(2, 3))                 # (n^2, n)
        dt = t12[:, None, :] - t[None, :, :]
        same_t = np.all(np.abs(dt - np.rint(dt)) < tolerance, axis=2)
        return bool(np.all(np.any(same_w & same_t, axis=1)))


def identity_only() -> SymmetryOperations:
    """The trivial group P1: only the identity."""
    return SymmetryOperations(np.eye(3, dtype=np.int64)[None], np.zeros((1, 3)), "P1", 1)


def find_symmetry(crystal: Crystal, tolerance: float = 1e-5) -> SymmetryOperations:
    """Find the space group of ``crystal`` with spglib.

    Parameters
    ----------
    crystal : Crystal
        The cell, as given (a supercell keeps its pure translations as operations).
    tolerance : float
        Distance tolerance in bohr for matching atoms (spglib ``symprec``).

    Returns
    -------
    SymmetryOperations
        Operations acting on the fractional coordinates of ``crystal``.
    """
    tolerance = float(tolerance)
    if not np.isfinite(tolerance) or tolerance <= 0:
        raise InputError("the symmetry tolerance must be a positive length in bohr",
                         key="symmetry.tolerance", value=tolerance)
    numbers = [ELEMENTS.index(s) + 1 for s in crystal.species]
    cell = (np.asarray(crystal.lattice), np.asarray(crystal.positions), numbers)
    try:
        # spglib >= 2.5 raises on failure with _throw (and does not warn about its
        # old error handling); older 2.x releases return None instead.
        try:
            dataset = spglib.get_symmetry_dataset(cell, symprec=tolerance, _throw=True)
        except TypeError:
            dataset = spglib.get_symmetry_dataset(cell, symprec=tolerance)
    except Exception as exc:       # spglib's own error type differs between releases
        dataset, reason = None, f": {exc}"
    else:
        reason = ""
    if dataset is None:
        raise InputError(f"spglib could not determine the space group of this crystal{reason}; "
                         "try another tolerance", key="symmetry.tolerance", value=tolerance)

    def get(name):
        return dataset[name] if isinstance(dataset, dict) else getattr(dataset, name)

    return SymmetryOperations(get("rotations"), get("translations"),
                              str(get("international")), int(get("number")))


def atom_permutations(operations: SymmetryOperations, positions: np.ndarray, species,
                      tolerance: float = 1e-4) -> np.ndarray:
    """Where each operation sends each atom.

    Parameters
    ----------
    operations : SymmetryOperations
    positions : ndarray, shape (n_atoms, 3), float
        Fractional coordinates.
    species : sequence of str, one per atom
    tolerance : float
        Largest fractional mismatch (modulo 1) accepted as the same site.

    Returns
    -------
    ndarray, shape (n_ops, n_atoms), int
        ``perm[o, i] = j`` when ``W_o x_i + t_o`` equals ``x_j`` modulo a lattice
        vector and atom j has the species of atom i.

    Raises
    ------
    ValueError
        When an operation maps an atom onto no atom of its species (the
        operations are not symmetries of these positions).
    """
    pos = np.asarray(positions, float).reshape(-1, 3)
    labels = np.array(list(species))
    images = np.einsum("oij,aj->oai", operations.rotations, pos) + operations.translations[:, None]
    diff = images[:, :, None, :] - pos[None, None, :, :]                  # (n_ops, i, j, 3)
    close = np.all(np.abs(diff - np.rint(diff)) < tolerance, axis=-1)
    close &= labels[:, None] == labels[None, :]
    if not np.all(close.any(axis=-1)):
        raise ValueError("an operation maps an atom onto no atom of its species")
    return np.argmax(close, axis=-1)


def _inverse_transposes(rotations: np.ndarray) -> np.ndarray:
    """``W^{-T}`` of each integer rotation, exactly (integer inverse since det = +-1)."""
    inv = np.rint(np.linalg.inv(rotations.astype(float))).astype(np.int64)
    return np.transpose(inv, (0, 2, 1))


@dataclass(frozen=True, eq=False)
class DensitySymmetrizer:
    """Group average of a real periodic field, restricted to a G-sphere.

    Build it with :func:`make_density_symmetrizer`; call it on a real-space field.

    Attributes
    ----------
    grid_shape : tuple of int
        Shape ``(n1, n2, n3)`` of the real-space fields it accepts.
    miller : ndarray, shape (n_G, 3), int
        Miller indices of the sphere, as given by the caller.
    kept : ndarray, shape (n_G,), bool
        Components that survive: those whose whole orbit (under the operations and
        under m -> -m) lies inside the sphere. The others are set to zero.
    grid_index : ndarray, shape (n_G,), int
        Flat (C-order) index of each sphere component in the FFT array.
    gather : ndarray, shape (n_rot, n_G), int
        For each distinct rotation ``W``, the sphere position of ``W^{-T} m``
        (0 where the image is outside the sphere; those columns are not kept).
    phases : ndarray, shape (n_rot, n_G), complex128
        ``(1/N_ops) sum_{t of W} exp(2 pi i (W^{-T} m) . t)``: operations sharing a
        rotation (pure translations of a supercell) are folded into one factor.
    n_ops : int
        Number of operations averaged over.
    """

    grid_shape: tuple[int, int, int]
    miller: np.ndarray
    kept: np.ndarray
    grid_index: np.ndarray
    gather: np.ndarray
    phases: np.ndarray
    n_ops: int

    @property
    def n_dropped(self) -> int:
        """Number of sphere components zeroed because their orbit leaves the sphere."""
        return int(np.count_nonzero(~self.kept))

    def symmetrise_coefficients(self, coefficients: np.ndarray) -> np.ndarray:
        """Group average of Fourier components given on the sphere.

        Parameters
        ----------
        coefficients : ndarray, shape (n_G,) or (n_G, ...), complex
            Components in the order of :attr:`miller` (any normalisation).

        Returns
        -------
        ndarray, same shape, complex128
            ``n_s(m) = (1/N_ops) sum_ops n(W^{-T} m) exp(2 pi i (W^{-T} m) . t)``;
            zero where :attr:`kept` is false.
        """
        c = np.asarray(coefficients)
        if c.shape[0] != len(self.miller):
            raise ValueError(f"{c.shape[0]} coefficients for a sphere of {len(self.miller)}")
        out = np.einsum("rg,rg...->g...", self.phases, c[self.gather])
        out[~self.kept] = 0.0
        return out

    def __call__(self, field: np.ndarray) -> np.ndarray:
        """Symmetrise a real-space field.

        Parameters
        ----------
        field : ndarray, shape grid_shape, float64
            Values on the grid points ``x = (j1/n1, j2/n2, j3/n3)``.

        Returns
        -------
        ndarray, shape grid_shape, float64
            The group-averaged field, with all components outside the sphere removed.
        """
        field = np.asarray(field)
        if field.shape != self.grid_shape:
            raise ValueError(f"field of shape {field.shape} for a symmetriser on {self.grid_shape}")
        coeff = np.fft.fftn(field).ravel()[self.grid_index]
        sym = self.symmetrise_coefficients(coeff)
        full = np.zeros(int(np.prod(self.grid_shape)), dtype=complex)
        full[self.grid_index] = sym
        return np.ascontiguousarray(np.fft.ifftn(full.reshape(self.grid_shape)).real)


def make_density_symmetrizer(operations: SymmetryOperations, grid_shape,
                             miller: np.ndarray) -> DensitySymmetrizer:
    """Precompute the gather indices and phases of the density group average.

    Parameters
    ----------
    operations : SymmetryOperations
        A group of operations (e.g. ``KPointSet.operations``).
    grid_shape : sequence of 3 int
        FFT grid of the real-space fields.
    miller : ndarray, shape (n_G, 3), int
        Miller indices of the density's G-sphere, ``|m . B| <= G_max``; must contain
        ``(0, 0, 0)`` and fit the grid without two indices aliasing.

    Returns
    -------
    DensitySymmetrizer

    Notes
    -----
    Rotations preserve ``|G|`` exactly in exact arithmetic, but a sphere built in
    floating point may hold ``m`` and miss a rotated image whose ``|G|`` rounded
    just above ``G_max``. Rather than growing the set past the caller's sphere, we
    keep only the largest subset closed under the group and under ``m -> -m``
    (the components whose whole orbit is inside) and zero the rest; those lie on
    the sphere's edge, where a density has negligible weight, and the result stays
    an exact projection (idempotent, real, symmetric, charge-conserving).
    """
    shape = tuple(int(n) for n in grid_shape)
    if len(shape) != 3 or min(shape) < 1:
        raise ValueError(f"grid_shape must be three positive integers, got {grid_shape!r}")
    m = np.asarray(miller)
    if m.ndim != 2 or m.shape[1] != 3 or not np.issubdtype(m.dtype, np.integer):
        raise ValueError("miller must be an integer array of shape (n_G, 3)")
    m = m.astype(np.int64)
    n_g = len(m)
    flat = np.ravel_multi_index(tuple((m % np.array(shape)).T), shape)
    if len(np.unique(flat)) != n_g:
        raise ValueError(f"the G-sphere does not fit the grid {shape}: some Miller indices alias "
                         "(or repeat); use a larger grid")
    if not np.any(np.all(m == 0, axis=1)):
        raise ValueError("the G-sphere must contain G = 0")

    # Distinct rotations; operations sharing one are folded into a single phase sum.
    rots, inverse = np.unique(operations.rotations.reshape(-1, 9), axis=0, return_inverse=True)
    inverse = inverse.ravel()
    rots = rots.reshape(-1, 3, 3)
    w_inv_t = _inverse_transposes(rots)                                   # (n_rot, 3, 3)
    images = np.einsum("rij,gj->rgi", w_inv_t, m)                         # (n_rot, n_G, 3)

    # Locate images in the sphere by integer keys and a sorted search.
    span = int(max(np.abs(images).max(), np.abs(m).max())) + 1
    base = 2 * span + 1

    def keys(v):
        v = v + span
        return (v[..., 0] * base + v[..., 1]) * base + v[..., 2]

    sphere_keys = keys(m)
    order = np.argsort(sphere_keys)
    sorted_keys = sphere_keys[order]

    def locate(v):
        k = keys(v)
        pos = np.clip(np.searchsorted(sorted_keys, k), 0, n_g - 1)
        found = sorted_keys[pos] == k
        return np.where(found, order[pos], 0), found

    gather, found = locate(images)
    _, found_neg = locate(-images)
    kept = np.all(found & found_neg, axis=0)
    # Closing the kept set: an orbit with one member missing is dropped as a whole,
    # so iterate until no kept component has a dropped image (usually one pass).
    while True:
        closed = kept & np.all(kept[gather], axis=0)
        if np.array_equal(closed, kept):
            break
        kept = closed

    # phases[r, g] = (1/N_ops) sum over ops with rotation r of exp(2 pi i (W^{-T} m) . t)
    phases = np.empty((len(rots), n_g), dtype=complex)
    for r in range(len(rots)):        # at most 48 distinct rotations; set-up only
        t_r = operations.translations[inverse == r]                       # (n_t, 3)
        phases[r] = np.exp(2j * np.pi * (images[r] @ t_r.T)).sum(axis=1)
    phases /= operations.n_ops
    gather = np.where(kept[None, :], gather, 0)

    for arr in (m, kept, flat, gather, phases):
        arr.setflags(write=False)
    return DensitySymmetrizer(shape, m, kept, flat, gather, phases, operations.n_ops)


def reduced_lattice(lattice: np.ndarray) -> np.ndarray:
    """Shorter, more nearly orthogonal vectors (rows, bohr) of the same lattice.

    Pairwise Gauss-Lagrange reduction, repeated until no vector can be shortened by
    subtracting an integer multiple of another (a_i -> a_i - round(a_i.a_j / a_j.a_j) a_j);
    the result spans the same lattice (each step is unimodular) and keeps the
    handedness. This is not a full Niggli reduction, but it undoes the skew that
    makes an FFT grid large (common practice; cf. I. Krivy and B. Gruber, Acta
    Cryst. A 32, 297 (1976), for the complete algorithm).
    """
    a = np.array(lattice, float)
    for _ in range(200):
        changed = False
        for i in range(3):
            for j in range(3):
                if i == j:
                    continue
                m = np.rint(a[i] @ a[j] / (a[j] @ a[j]))
                if m != 0:
                    shorter = a[i] - m * a[j]
                    if shorter @ shorter < a[i] @ a[i] * (1 - 1e-12):
                        a[i] = shorter
                        changed = True
        if not changed:
            break
    return a
