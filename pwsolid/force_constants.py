"""Real-space force constants from finite displacements in a supercell (layer 2).

The harmonic energy of a crystal is E = (1/2) sum Phi[i a, j b] u[i a] u[j b] over
the displacements u of the atoms i (Cartesian components a, b); with one atom j
displaced by u, the force on atom i is F_i = -Phi[i, j] u. Each computed
displacement gives a column block Phi[:, j] along u; the crystal's operations
(including the pure translations of the supercell) turn it into displacements of
every symmetry-equivalent atom along the rotated direction, with the forces
permuted and rotated alike, so that a few computed displacements determine every
column by least squares:

    Phi[:, j]^T = -pinv(U_j) F_j,

where the rows of U_j are all displacements of atom j (computed or made by an
operation) and F_j the matching forces. Because every operation enters, the
result carries the full symmetry of the crystal.

What the module offers:

* :func:`make_supercell`: a supercell by an integer matrix, with the map from its
  atoms back to the primitive cell;
* :func:`plan_displacements`: the symmetry-reduced displacement set: one atom per
  orbit, and directions whose images under the atom's site symmetry span three
  dimensions; each with both signs, the minus sign left out of the computed set
  when a site operation turns +u into -u (its forces are then made by symmetry);
* :func:`force_constants_from_forces`: the least-squares reconstruction above;
* :func:`site_symmetry_violation`, :func:`acoustic_sum_violation`,
  :func:`fit_residual`: health checks of the raw forces, reported before anything
  is imposed;
* :func:`impose_acoustic_sum_rule`: the nearest force constants (Frobenius norm)
  that obey both the acoustic sum rule sum_j Phi[i, j] = 0 and Phi[i, j] = Phi[j, i]^T;
* :class:`ForceConstants` and :func:`make_force_constants`: the dynamical matrix at
  any wave vector, with every supercell image at the shortest distance weighted
  equally (so the interpolation is smooth and exact at the supercell's
  commensurate wave vectors), frequencies and eigenvectors.

Units: bohr, Ha/bohr^2, masses in electron masses; frequencies out in THz
(negative numbers stand for imaginary frequencies, i.e. unstable modes).

References
----------
K. Kunc and R. M. Martin, Phys. Rev. Lett. 48, 406 (1982) (frozen phonons in
supercells); K. Parlinski, Z. Q. Li and Y. Kawazoe, Phys. Rev. Lett. 78, 4063 (1997)
(force constants from symmetry-reduced displacements by least squares).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from .crystal import Crystal
from .errors import InputError
from .symmetry import SymmetryOperations, atom_permutations
from .units import HARTREE_THZ

__all__ = ["SupercellMap", "make_supercell", "Displacement", "plan_displacements",
           "cartesian_rotations", "operation_permutations", "force_constants_from_forces",
           "site_symmetry_violation", "acoustic_sum_violation", "fit_residual",
           "impose_acoustic_sum_rule", "ForceConstants", "make_force_constants",
           "full_from_origin_rows"]

#: Largest (ops x atoms x atoms) block compared at once when mapping atoms.
_PERMUTATION_CHUNK = 4_000_000
#: Candidate directions tried in order (fractional-free, Cartesian): axes first.
_CANDIDATES = np.array([[1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 0], [1, 0, 1], [0, 1, 1],
                        [1, 1, 1], [1, -1, 0], [1, 0, -1], [0, 1, -1]], float)


# --- supercells -----------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class SupercellMap:
    """A supercell of a primitive crystal and where its atoms come from.

    Attributes
    ----------
    primitive, supercell : Crystal
    matrix : ndarray (3, 3) int
        Rows of the supercell lattice in units of the primitive ones (A_s = M A_p).
    primitive_index : ndarray (n_super,) int
        The primitive atom each supercell atom copies.
    cell : ndarray (n_super, 3) int
        Primitive lattice vector (fractional) from the primitive atom to its copy.
    origin_atoms : ndarray (n_prim,) int
        Supercell index of each primitive atom itself (cell (0, 0, 0)).
    """

    primitive: Crystal
    supercell: Crystal
    matrix: np.ndarray
    primitive_index: np.ndarray
    cell: np.ndarray
    origin_atoms: np.ndarray

    @property
    def n_cells(self) -> int:
        return int(round(abs(np.linalg.det(self.matrix))))


def make_supercell(primitive: Crystal, matrix) -> SupercellMap:
    """The supercell ``A_s = M A_p`` of ``primitive`` (``matrix`` 3 ints = diagonal)."""
    m = np.asarray(matrix)
    if m.shape == (3,):
        m = np.diag(m)
    if m.shape != (3, 3) or not np.all(np.equal(np.mod(m, 1), 0)):
        raise InputError("the supercell must be three positive integers or a 3 x 3 integer "
                         "matrix", key="phonons.supercell", value=np.asarray(matrix).tolist())
    m = m.astype(np.int64)
    det = int(round(np.linalg.det(m)))
    if det <= 0:
        raise InputError("the supercell matrix must have a positive determinant (a right-"
                         "handed cell of at least one primitive cell)", key="phonons.supercell",
                         value=m.tolist())
    # lattice points of the primitive lattice inside the supercell: fractional
    # supercell coordinates n M^-1 in [0, 1); search the box spanned by M's corners
    corners = np.array(list(itertools.product((0, 1), repeat=3))) @ m
    lo, hi = corners.min(axis=0), corners.max(axis=0)
    box = np.array(list(itertools.product(*(range(a, b + 1) for a, b in zip(lo, hi)))))
    inv = np.linalg.inv(m.astype(float))
    frac = box @ inv
    inside = np.all((frac > -1e-9) & (frac < 1 - 1e-9), axis=1)
    cells = box[inside]
    cells = cells[np.argsort(np.abs(cells).sum(axis=1), kind="stable")]   # (0,0,0) first
    if len(cells) != det:
        raise RuntimeError(f"found {len(cells)} lattice points for a supercell of {det} cells")
    n_p = primitive.n_atoms
    pos_prim = primitive.positions[None, :, :] + cells[:, None, :]          # (cells, atoms, 3)
    pos = (pos_prim.reshape(-1, 3) @ inv)
    sup = Crystal(m @ primitive.lattice, primitive.species * det, pos, primitive.min_distance)
    index = np.tile(np.arange(n_p), det)
    cell = np.repeat(cells, n_p, axis=0)
    for a in (index, cell):
        a.setflags(write=False)
    return SupercellMap(primitive, sup, m, index, cell, np.arange(n_p))


# --- operations -----------------------------------------------------------------------

def cartesian_rotations(operations: SymmetryOperations, lattice: np.ndarray) -> np.ndarray:
    """Rotation parts as Cartesian matrices: x' = R x with R = A^T W A^-T (rows of A = lattice)."""
    a = np.asarray(lattice, float)
    return np.einsum("ji,ojk,lk->oil", a, operations.rotations.astype(float), np.linalg.inv(a))


def operation_permutations(operations: SymmetryOperations, crystal: Crystal) -> np.ndarray:
    """``perm[o, i]``: the atom operation o sends atom i to (chunked over operations)."""
    n = crystal.n_atoms
    step = max(1, _PERMUTATION_CHUNK // max(3 * n * n, 1))
    out = []
    for start in range(0, operations.n_ops, step):
        idx = np.arange(start, min(start + step, operations.n_ops))
        sub = SymmetryOperations(operations.rotations[idx], operations.translations[idx],
                                 operations.international_symbol, 0)
        out.append(atom_permutations(sub, crystal.positions, crystal.species))
    return np.concatenate(out, axis=0)


# --- the displacement set -------------------------------------------------------------

@dataclass(frozen=True)
class Displacement:
    """One displaced atom of the supercell: ``vector`` (Cartesian, bohr) on ``atom``."""

    atom: int
    vector: tuple[float, float, float]

    def as_dict(self) -> dict:
        return {"atom": self.atom + 1, "vector_bohr": [float(x) for x in self.vector]}


def _span_rank(vectors) -> int:
    return int(np.linalg.matrix_rank(np.asarray(vectors), tol=1e-6)) if len(vectors) else 0


def plan_displacements(crystal: Crystal, operations: SymmetryOperations, amplitude: float, *,
                       both_signs: bool = True) -> tuple[Displacement, ...]:
    """The symmetry-reduced displacements of ``crystal`` (a supercell with its own group).

    One atom per orbit of the operations; for it, candidate directions (axes, then
    face and body diagonals) are added while the images of the chosen ones under
    the atom's site symmetry do not yet span three dimensions. Each direction is
    displaced by ``+amplitude`` and, with ``both_signs``, by ``-amplitude`` unless a
    site operation maps +u onto -u (the forces of -u then follow by symmetry).
    """
    amplitude = float(amplitude)
    if not amplitude > 0:
        raise InputError("the displacement amplitude must be a positive length",
                         key="phonons.displacement_length", value=amplitude)
    perm = operation_permutations(operations, crystal)
    rot = cartesian_rotations(operations, crystal.lattice)
    seen = np.zeros(crystal.n_atoms, bool)
    out: list[Displacement] = []
    for atom in range(crystal.n_atoms):
        if seen[atom]:
            continue
        seen[perm[:, atom]] = True
        site = rot[perm[:, atom] == atom]                       # site-symmetry rotations
        chosen: list[np.ndarray] = []
        images: list[np.ndarray] = []
        for d in _CANDIDATES:
            if _span_rank(images) == 3:
                break
            d = d / np.linalg.norm(d)
            new = site @ d
            if _span_rank(images + list(new)) > _span_rank(images):
                chosen.append(d)
                images.extend(new)
        for d in chosen:
            out.append(Displacement(atom, tuple(amplitude * d)))
            if both_signs and not np.any(np.all(np.abs(site @ d + d) < 1e-8, axis=1)):
                out.append(Displacement(atom, tuple(-amplitude * d)))
    return tuple(out)


# --- from forces to force constants ---------------------------------------------------

def _orbit_data(crystal, operations, displacements, forces):
    """Every (atom, displacement, forces) made from the computed ones by the operations."""
    perm = operation_permutations(operations, crystal)
    rot = cartesian_rotations(operations, crystal.lattice)
    forces = np.asarray(forces, float).reshape(len(displacements), crystal.n_atoms, 3)
    atoms, vecs, frcs = [], [], []
    for d, f in zip(displacements, forces):
        u = np.asarray(d.vector, float)
        atoms.append(perm[:, d.atom])
        vecs.append(rot @ u)                                     # (n_ops, 3)
        rotated = np.einsum("oab,jb->oja", rot, f)                # R F_j, to be placed at perm
        placed = np.empty_like(rotated)
        placed[np.arange(len(rot))[:, None], perm] = rotated
        frcs.append(placed)
    return np.concatenate(atoms), np.concatenate(vecs), np.concatenate(frcs)


def force_constants_from_forces(crystal: Crystal, operations: SymmetryOperations,
                                displacements, forces) -> np.ndarray:
    """Force constants ``phi[i, j, a, b]`` (Ha/bohr^2) of the supercell by least squares.

    Parameters
    ----------
    crystal : Crystal
        The undisplaced supercell.
    operations : SymmetryOperations
        Its space group (with the supercell's pure translations).
    displacements : sequence of Displacement
    forces : array (n_displacements, n_atoms, 3), Ha/bohr
        Forces of each displaced supercell (minus those of the perfect one, if any).
    """
    n = crystal.n_atoms
    atoms, vecs, frcs = _orbit_data(crystal, operations, displacements, forces)
    phi = np.zeros((n, n, 3, 3))
    for j in range(n):
        rows = atoms == j
        u = vecs[rows]
        if _span_rank(u) < 3:
            raise ValueError(f"the displacements of atom {j + 1} do not span three directions")
        x = -np.linalg.pinv(u) @ frcs[rows].reshape(len(u), n * 3)   # (3 b, n i * 3 a)
        phi[:, j] = x.reshape(3, n, 3).transpose(1, 2, 0)            # [i, a, b]
    return phi


def fit_residual(phi: np.ndarray, displacements, forces) -> float:
    """max |F - (-Phi u)| over the computed displacements, relative to max |F|."""
    forces = np.asarray(forces, float)
    worst, scale = 0.0, 0.0
    for d, f in zip(displacements, forces):
        predicted = -phi[:, d.atom] @ np.asarray(d.vector, float)
        worst = max(worst, float(np.max(np.abs(f - predicted))))
        scale = max(scale, float(np.max(np.abs(f))))
    return worst / scale if scale else 0.0


def site_symmetry_violation(crystal: Crystal, operations: SymmetryOperations,
                            displacements, forces) -> float:
    """How far the raw forces break the symmetry left to each displaced cell.

    Every operation that keeps the displaced atom and its displacement (R u = u)
    must map the force pattern onto itself: F[perm j] = R F[j]. Returns the
    largest mismatch relative to the largest force (0 when no such operation).
    """
    perm = operation_permutations(operations, crystal)
    rot = cartesian_rotations(operations, crystal.lattice)
    worst, scale = 0.0, 0.0
    for d, f in zip(displacements, np.asarray(forces, float)):
        u = np.asarray(d.vector, float)
        keep = (perm[:, d.atom] == d.atom) & np.all(np.abs(rot @ u - u) < 1e-8 * (1 + abs(u).max()),
                                                    axis=1)
        scale = max(scale, float(np.max(np.abs(f))))
        for o in np.flatnonzero(keep):
            worst = max(worst, float(np.max(np.abs(f[perm[o]] - f @ rot[o].T))))
    return worst / scale if scale else 0.0


def acoustic_sum_violation(phi: np.ndarray) -> float:
    """max_i |sum_j Phi[i, j]| relative to max_i |Phi[i, i]| (0 for exact translation invariance)."""
    total = np.abs(phi.sum(axis=1)).max()
    scale = max(np.abs(phi[np.arange(len(phi)), np.arange(len(phi))]).max(), 1e-300)
    return float(total / scale)


def impose_acoustic_sum_rule(phi: np.ndarray, *, tolerance: float = 1e-13,
                             max_rounds: int = 200) -> np.ndarray:
    """The force constants nearest to ``phi`` obeying the sum rule and Phi[i, j] = Phi[j, i]^T.

    Alternating orthogonal projections on the two linear subspaces (the sum rule:
    subtract the row sum spread evenly over j; the exchange symmetry: average with
    the transpose) converge to the projection on their intersection. Both commute
    with the crystal's operations, so the symmetry of ``phi`` is kept.
    """
    p = np.array(phi, float)
    n = len(p)
    for _ in range(max_rounds):
        p = 0.5 * (p + p.transpose(1, 0, 3, 2))
        if acoustic_sum_violation(p) < tolerance:
            break
        p = p - p.sum(axis=1, keepdims=True) / n
    return p


# --- the dynamical matrix -------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class ForceConstants:
    """Force constants of a crystal, ready to give the dynamical matrix at any q.

    Built by :func:`make_force_constants`. ``pairs`` lists, for every primitive atom
    k and every supercell atom j, the shortest vectors from k to the images of j
    (weights 1 / number of images at that distance).

    Attributes
    ----------
    supercell : SupercellMap
    phi : ndarray (n_super, n_super, 3, 3), Ha/bohr^2
    masses : ndarray (n_prim,), electron masses
    pair_from, pair_to : ndarray (n_pairs,) int
        Primitive atom k and primitive atom of the supercell atom j of each pair.
    pair_vectors : ndarray (n_pairs, 3), bohr
    pair_weights : ndarray (n_pairs,)
    pair_blocks : ndarray (n_pairs, 3, 3), Ha/bohr^2 / sqrt(m_k m_j)
    """

    supercell: SupercellMap
    phi: np.ndarray
    masses: np.ndarray
    pair_from: np.ndarray
    pair_to: np.ndarray
    pair_vectors: np.ndarray
    pair_weights: np.ndarray
    pair_blocks: np.ndarray

    @property
    def primitive(self) -> Crystal:
        return self.supercell.primitive

    @property
    def n_modes(self) -> int:
        return 3 * self.primitive.n_atoms

    def dynamical_matrices(self, q_fractional) -> np.ndarray:
        """D(q) (n_q, 3 n_prim, 3 n_prim), Ha^2 (hbar = 1), q in primitive reciprocal units."""
        q = np.atleast_2d(np.asarray(q_fractional, float)) @ self.primitive.reciprocal
        n_p = self.primitive.n_atoms
        phase = np.exp(1j * q @ self.pair_vectors.T) * self.pair_weights       # (n_q, n_pairs)
        d = np.zeros((len(q), n_p, n_p, 3, 3), complex)
        for k in range(n_p):
            for m in range(n_p):
                sel = (self.pair_from == k) & (self.pair_to == m)
                d[:, k, m] = np.einsum("qp,pab->qab", phase[:, sel], self.pair_blocks[sel])
        d = d.transpose(0, 1, 3, 2, 4).reshape(len(q), 3 * n_p, 3 * n_p)
        return 0.5 * (d + d.conj().transpose(0, 2, 1))

    def modes(self, q_fractional) -> tuple[np.ndarray, np.ndarray]:
        """(frequencies THz (n_q, n_modes), eigenvectors (n_q, n_modes, n_modes) as columns)."""
        w2, vec = np.linalg.eigh(self.dynamical_matrices(q_fractional))
        return np.sign(w2) * np.sqrt(np.abs(w2)) * HARTREE_THZ, vec

    def frequencies(self, q_fractional) -> np.ndarray:
        """Frequencies in THz (n_q, n_modes), ascending; negative = imaginary."""
        w2 = np.linalg.eigvalsh(self.dynamical_matrices(q_fractional))
        return np.sign(w2) * np.sqrt(np.abs(w2)) * HARTREE_THZ


def _shortest_images(vectors: np.ndarray, lattice: np.ndarray, reach: int = 2,
                     tolerance: float = 1e-5):
    """For each vector, the equally shortest images v + T (T supercell vectors)."""
    shifts = np.array(list(itertools.product(range(-reach, reach + 1), repeat=3))) @ lattice
    cand = vectors[:, None, :] + shifts[None]                                 # (n, s, 3)
    dist = np.linalg.norm(cand, axis=-1)
    best = dist.min(axis=1, keepdims=True)
    close = dist < best + tolerance * max(1.0, float(np.abs(lattice).max()))
    return cand, close


def make_force_constants(supercell: SupercellMap, phi: np.ndarray, masses) -> ForceConstants:
    """The :class:`ForceConstants` of ``phi`` (Ha/bohr^2) on ``supercell``; ``masses`` per
    primitive atom in electron masses."""
    masses = np.asarray(masses, float)
    sup = supercell.supercell
    cart = sup.cartesian_positions
    p_from, p_to, vecs, weights, blocks = [], [], [], [], []
    for k, ik in enumerate(supercell.origin_atoms):
        diff = cart - cart[ik]
        frac = diff @ np.linalg.inv(sup.lattice)
        diff = (frac - np.rint(frac)) @ sup.lattice
        cand, close = _shortest_images(diff, sup.lattice)
        count = close.sum(axis=1)
        for j in range(sup.n_atoms):
            m = supercell.primitive_index[j]
            for v in cand[j][close[j]]:
                p_from.append(k)
                p_to.append(m)
                vecs.append(v)
                weights.append(1.0 / count[j])
                blocks.append(phi[ik, j] / np.sqrt(masses[k] * masses[m]))
    arrays = [np.asarray(x) for x in (p_from, p_to, vecs, weights, blocks)]
    for a in arrays:
        a.setflags(write=False)
    return ForceConstants(supercell, np.asarray(phi), masses, *arrays)


def full_from_origin_rows(supercell: SupercellMap, rows: np.ndarray) -> np.ndarray:
    """All of Phi (n_super, n_super, 3, 3) from the rows of the primitive atoms.

    By translation symmetry Phi[i, j] = Phi[k, j'] where atom i is primitive atom k
    moved by a lattice vector t and j' is the atom at x_j - t (modulo the supercell).
    """
    sup = supercell.supercell
    rows = np.asarray(rows, float)
    frac = sup.positions
    inv = np.linalg.inv(supercell.matrix.astype(float))
    phi = np.zeros((sup.n_atoms, sup.n_atoms, 3, 3))
    for i in range(sup.n_atoms):
        k = supercell.primitive_index[i]
        shift = supercell.cell[i] @ inv                  # t in supercell fractions
        moved = frac - shift
        diff = moved[:, None, :] - frac[None, :, :]
        match = np.all(np.abs(diff - np.rint(diff)) < 1e-6, axis=-1)   # [j, j']
        phi[i] = rows[k][np.argmax(match, axis=1)]
    return phi
