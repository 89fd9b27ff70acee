"""Monkhorst-Pack k-point meshes and their irreducible wedge (layer 2).

Conventions
-----------
k-points are given in fractional reciprocal coordinates, ``k = sum_i k_i b_i``
with the rows ``b_i`` of ``Crystal.reciprocal`` (``a_i . b_j = 2 pi delta_ij``).

A mesh ``(n1, n2, n3)`` with shift ``(s1, s2, s3)``, each ``s_i`` 0 or 1/2, holds the
points ``k_i = (j_i + s_i) / n_i``, ``j_i = 0 .. n_i - 1``, each coordinate mapped to
(-1/2, 1/2]. Shift 0 contains Gamma. Shift 1/2 with an even ``n`` gives the points
``u_r = (2r - q - 1) / (2q)``, ``r = 1 .. q``, of Monkhorst & Pack, Phys. Rev. B 13,
5188 (1976); for an odd ``q`` their points are our shift 0.

Symmetry acts on k through the rotation parts only: for an operation
``x' = W x + t`` on fractional direct coordinates, ``k`` is equivalent to ``W^T k``
(and to ``W^{-T} k``, the Cartesian image ``S k``; both sweep the same orbit since
the operations form a group). With time reversal ``k`` is also equivalent to ``-k``.
"""

from __future__ import annotations

from dataclasses import dataclass
from numbers import Integral, Real

import numpy as np

from .errors import InputError
from .symmetry import SymmetryOperations, identity_only

__all__ = ["monkhorst_pack", "KPointSet", "irreducible_kpoints", "join_by_full_symmetry"]

_MESH_KEY = "brillouin_zone.mesh"
_SHIFT_KEY = "brillouin_zone.shift"


def _check_mesh(mesh) -> tuple[int, int, int]:
    try:
        items = list(mesh)
    except TypeError:
        raise InputError("the k-point mesh must be three positive integers, e.g. [4, 4, 4]",
                         key=_MESH_KEY, value=mesh) from None
    if len(items) != 3:
        raise InputError(f"the k-point mesh needs three divisions, one per reciprocal vector; "
                         f"got {len(items)}", key=_MESH_KEY, value=mesh)
    out = []
    for n in items:
        if isinstance(n, bool) or not isinstance(n, Integral):
            if isinstance(n, Real) and not isinstance(n, bool) and float(n).is_integer():
                n = int(n)
            else:
                raise InputError("the k-point mesh divisions must be integers", key=_MESH_KEY,
                                 value=mesh)
        if n < 1:
            raise InputError("the k-point mesh divisions must be at least 1", key=_MESH_KEY,
                             value=mesh)
        out.append(int(n))
    return tuple(out)


def _check_shift(shift) -> tuple[float, float, float]:
    if isinstance(shift, Real) and not isinstance(shift, bool):
        items = [shift] * 3
    else:
        try:
            items = list(shift)
        except TypeError:
            raise InputError("the mesh shift must be 0 or 0.5 for each reciprocal vector",
                             key=_SHIFT_KEY, value=shift) from None
    if len(items) != 3:
        raise InputError(f"the mesh shift needs three values (each 0 or 0.5); got {len(items)}",
                         key=_SHIFT_KEY, value=shift)
    out = []
    for s in items:
        if isinstance(s, bool) or not isinstance(s, Real) or float(s) not in (0.0, 0.5):
            raise InputError("each mesh shift must be 0 (mesh through Gamma) or 0.5 "
                             "(half a step off)", key=_SHIFT_KEY, value=shift)
        out.append(float(s))
    return tuple(out)


def _mesh_numerators(mesh, shift) -> np.ndarray:
    """Integer numerators ``p`` of the mesh points ``k_i = p_i / (2 n_i)``, in (-n_i, n_i].

    Shape (N, 3), C order over ``(j1, j2, j3)`` (``j3`` fastest).
    """
    n = np.array(mesh, dtype=np.int64)
    s2 = np.rint(2 * np.array(shift)).astype(np.int64)
    j = np.stack(np.meshgrid(*(np.arange(x) for x in mesh), indexing="ij"), axis=-1).reshape(-1, 3)
    p = 2 * j + s2                                    # in [0, 2n)
    return np.where(p > n, p - 2 * n, p)              # (-n, n]  <->  k in (-1/2, 1/2]


def monkhorst_pack(mesh, shift=(0.0, 0.0, 0.0)) -> np.ndarray:
    """Points of a Monkhorst-Pack mesh.

    Parameters
    ----------
    mesh : sequence of 3 int
        Divisions ``n_i >= 1`` along the reciprocal vectors.
    shift : float or sequence of 3 floats, each 0 or 0.5
        Offset in units of one mesh step; 0 puts Gamma on the mesh.

    Returns
    -------
    ndarray, shape (n1 n2 n3, 3), float64
        Fractional reciprocal coordinates ``(j_i + s_i)/n_i`` mapped to (-1/2, 1/2],
        in C order over ``(j1, j2, j3)``.

    References
    ----------
    H. J. Monkhorst and J. D. Pack, Phys. Rev. B 13, 5188 (1976).
    """
    mesh = _check_mesh(mesh)
    shift = _check_shift(shift)
    return _mesh_numerators(mesh, shift) / (2.0 * np.array(mesh, dtype=float))


@dataclass(frozen=True, eq=False)
class KPointSet:
    """Irreducible k-points of a mesh with their weights.

    Attributes
    ----------
    fractional : ndarray, shape (n_k, 3), float64
        Fractional reciprocal coordinates, each in (-1/2, 1/2].
    weights : ndarray, shape (n_k,), float64
        Orbit size over mesh size; sum to 1.
    mesh : tuple of 3 int
    shift : tuple of 3 float
    operations : SymmetryOperations
        The subgroup of the given operations whose rotations map the full mesh onto
        itself; these are the ones to symmetrise the density with.
    full_mesh_size : int
        ``n1 n2 n3``.
    time_reversal : bool
        Whether ``k`` and ``-k`` were identified.
    """

    fractional: np.ndarray
    weights: np.ndarray
    mesh: tuple[int, int, int]
    shift: tuple[float, float, float]
    operations: SymmetryOperations
    full_mesh_size: int
    time_reversal: bool

    @property
    def n_kpoints(self) -> int:
        """Number of irreducible points."""
        return len(self.weights)

    def cartesian(self, reciprocal: np.ndarray) -> np.ndarray:
        """Cartesian k-points in 1/bohr, shape (n_k, 3), for reciprocal vectors as rows."""
        return self.fractional @ np.asarray(reciprocal, dtype=float)


def _images(numerators: np.ndarray, mesh, shift, rotations: np.ndarray):
    """Mesh indices of ``W^T k`` for every rotation and mesh point.

    Returns
    -------
    index : ndarray, shape (n_rot, N), int
        Flat mesh index of the image (meaningless where ``on_mesh`` is false).
    on_mesh : ndarray, shape (n_rot,), bool
        Whether the rotation maps every mesh point onto the mesh.
    """
    n = np.array(mesh, dtype=np.int64)
    # k_i = p_i / (2 n_i); (W^T k)_j = sum_i W_ij p_i / (2 n_i). Scale by L = lcm(2 n)
    # to stay in exact integer arithmetic.
    lcm = int(np.lcm.reduce(2 * n))
    q = numerators * (lcm // (2 * n))                      # k_i * L, integers
    q_rot = np.einsum("rij,ki->rkj", rotations, q)         # (W^T k)_j * L
    # On the mesh when (W^T k)_j * 2 n_j is an integer with the parity of the shift.
    scale = lcm // (2 * n)                                 # L / (2 n_j)
    whole = q_rot % scale == 0
    p_rot = q_rot // scale                                 # candidate numerators
    s2 = np.rint(2 * np.array(shift)).astype(np.int64)     # parity fixed by the shift
    good = whole & ((p_rot - s2) % 2 == 0)
    on_mesh = np.all(good, axis=(1, 2))
    j = ((p_rot - s2) // 2) % n                            # mesh indices j_i
    index = (j[..., 0] * n[1] + j[..., 1]) * n[2] + j[..., 2]
    return index, on_mesh


def irreducible_kpoints(mesh, shift=(0.0, 0.0, 0.0), operations: SymmetryOperations | None = None,
                        time_reversal: bool = True) -> KPointSet:
    """Reduce a Monkhorst-Pack mesh to its irreducible points.

    Parameters
    ----------
    mesh : sequence of 3 int
    shift : float or sequence of 3 floats (each 0 or 0.5)
    operations : SymmetryOperations, optional
        Operations of the crystal (e.g. :func:`pwsolid.symmetry.find_symmetry`).
        Those whose rotation does not map the mesh onto itself are dropped (a
        shifted mesh of a hexagonal cell, a non-cubic mesh of a cubic one). ``None``
        means no symmetry other than time reversal.
    time_reversal : bool
        Identify ``k`` with ``-k`` (a non-magnetic crystal). The meshes here always
        contain ``-k`` with ``k``.

    Returns
    -------
    KPointSet
        One representative per orbit, the orbit member that comes first in the
        mesh order of :func:`monkhorst_pack`; sets listed in that order too.
        ``weights = orbit size / mesh size``.

    Notes
    -----
    ``k ~ W^T k`` for every kept rotation (see the module notes); the orbit of a
    point is the set of its images, so its label is the smallest mesh index among
    them, found for all points at once.
    """
    mesh = _check_mesh(mesh)
    shift = _check_shift(shift)
    ops = identity_only() if operations is None else operations
    numerators = _mesh_numerators(mesh, shift)
    n_full = len(numerators)

    index, on_mesh = _images(numerators, mesh, shift, ops.rotations)
    kept_ops = ops.subgroup(on_mesh)
    index = index[on_mesh]
    if time_reversal:
        minus, _ = _images(numerators, mesh, shift, -np.eye(3, dtype=np.int64)[None])
        index = np.concatenate([index, minus[0][index]])
    label = index.min(axis=0)                               # first orbit member in mesh order
    reps, counts = np.unique(label, return_counts=True)    # sorted = first-occurrence order

    frac = numerators[reps] / (2.0 * np.array(mesh, dtype=float))
    weights = counts / float(n_full)
    frac.setflags(write=False)
    weights.setflags(write=False)
    return KPointSet(frac, weights, mesh, shift, kept_ops, n_full, bool(time_reversal))


def join_by_full_symmetry(kset: KPointSet, operations: SymmetryOperations) -> KPointSet:
    """Join irreducible points of a mesh that the crystal's full group relates.

    Parameters
    ----------
    kset : KPointSet
        A mesh reduced with the operations that map the mesh onto itself
        (:func:`irreducible_kpoints`).
    operations : SymmetryOperations
        All operations of the crystal.

    Returns
    -------
    KPointSet
        ``kset`` itself when its operations are already all of them; otherwise the
        points with those that an operation of the full group (or time reversal
        with it) maps onto each other joined (weights added, the first kept), and
        ``operations`` set to the full group.

    Notes
    -----
    A mesh that some operations do not map onto itself (a shifted mesh of an fcc
    cell, say) samples the zone unevenly in their eyes. Symmetrising the density
    with the full group then gives the density of the mesh's star (every point
    with all its images, the weight of each point spread evenly over them), which
    is what makes the density, the potential and the eigenvalues carry the
    crystal's symmetry (degenerate levels at Gamma stay degenerate). In that star
    the images of joined points share their eigenvalues, so one representative
    with the summed weight gives the same band sums (common practice).
    """
    if operations is None or kset.operations.n_ops >= operations.n_ops:
        return kset
    # Mesh points and all their images are multiples of 1/L per axis: integer labels.
    period = 2 * int(np.lcm.reduce(np.asarray(kset.mesh, dtype=np.int64)))
    k = np.asarray(kset.fractional, float)
    images = np.einsum("ka,rab->rkb", np.rint(k * period).astype(np.int64),
                       np.asarray(operations.rotations, dtype=np.int64))  # (n_ops, n_k, 3)
    if kset.time_reversal:
        images = np.concatenate([images, -images])
    images %= period
    keys = (images[..., 0] * period + images[..., 1]) * period + images[..., 2]
    orbit = keys.min(axis=0)                        # the same for all points of one orbit
    _, first, which = np.unique(orbit, return_index=True, return_inverse=True)
    order = np.argsort(first)                       # keep the first point of each orbit
    keep = first[order]
    weights = np.zeros(len(first))
    np.add.at(weights, which.ravel(), kset.weights)
    weights = weights[order]
    frac, w = k[keep].copy(), weights
    frac.setflags(write=False)
    w.setflags(write=False)
    return KPointSet(frac, w, kset.mesh, kset.shift, operations, kset.full_mesh_size,
                     kset.time_reversal)
