"""Linear elasticity on arrays: Voigt notation, the symmetry pattern of the elastic
tensor, strain patterns, stress-strain fits, Voigt-Reuss-Hill averages and Born
stability (layer 1: arrays only; the crystal enters as Cartesian rotations).

Conventions
-----------
Voigt order 1..6 = xx, yy, zz, yz, xz, xy. A strain vector holds the engineering
shears, e = (e_xx, e_yy, e_zz, 2 e_yz, 2 e_xz, 2 e_xy); a stress vector the plain
components, s = (s_xx, s_yy, s_zz, s_yz, s_xz, s_xy). Then s_i = sum_j C_ij e_j and
the elastic energy per volume is (1/2) e.C.e (common practice). The stress is
sigma = (1/Omega) dE/d eps, positive when the cell pulls in (the sign of
:mod:`pwsolid.stress`), so a stretched cell has a positive sigma and C comes out
positive for a stable crystal.

The pattern of independent constants is not tabulated by crystal system: a general
tensor is averaged over the point group, C'_abcd = (1/N) sum_R R_ai R_bj R_ck R_dl
C_ijkl, and the image of that projector (a linear space of dimension 3 for cubic, 5 for
hexagonal, 6 or 7 for tetragonal, ..., 21 for triclinic) is written in terms of the
first Voigt entries C_ij (i <= j, row by row) that fix it: the usual C11, C12, C44 of
a cubic crystal, C11, C12, C13, C33, C44 of a hexagonal one (C66 = (C11 - C12)/2 follows).

References
----------
J. F. Nye, Physical Properties of Crystals (Oxford, 1957), ch. VIII (tensor symmetry).
W. Voigt, Lehrbuch der Kristallphysik (1928); A. Reuss, Z. Angew. Math. Mech. 9, 49
(1929); R. Hill, Proc. Phys. Soc. A 65, 349 (1952) (the averages).
M. Born and K. Huang, Dynamical Theory of Crystal Lattices (Oxford, 1954); F. Mouhat and
F.-X. Coudert, Phys. Rev. B 90, 224104 (2014) (stability: C positive definite).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["VOIGT_PAIRS", "voigt_strain_tensor", "stress_voigt", "full_tensor", "voigt_matrix",
           "symmetrize_elastic", "ElasticPattern", "elastic_pattern", "strain_patterns",
           "fit_stress_strain", "StressStrainFit", "ElasticAverages", "voigt_reuss_hill",
           "born_stability"]

#: Cartesian index pairs of the Voigt components 1..6.
VOIGT_PAIRS = ((0, 0), (1, 1), (2, 2), (1, 2), (0, 2), (0, 1))
_VOIGT_INDEX = np.array([[0, 5, 4], [5, 1, 3], [4, 3, 2]])


def voigt_strain_tensor(e) -> np.ndarray:
    """The symmetric (3, 3) strain tensor of a Voigt strain vector (engineering shears)."""
    e = np.asarray(e, float)
    return np.array([[e[0], e[5] / 2, e[4] / 2],
                     [e[5] / 2, e[1], e[3] / 2],
                     [e[4] / 2, e[3] / 2, e[2]]])


def stress_voigt(sigma) -> np.ndarray:
    """The Voigt 6-vector of a (3, 3) stress (symmetrised first)."""
    s = 0.5 * (np.asarray(sigma, float) + np.asarray(sigma, float).T)
    return np.array([s[i, j] for i, j in VOIGT_PAIRS])


def full_tensor(c) -> np.ndarray:
    """The (..., 3, 3, 3, 3) tensor C_abcd of (..., 6, 6) Voigt matrices."""
    c = np.asarray(c, float)
    return c[..., _VOIGT_INDEX[:, :, None, None], _VOIGT_INDEX[None, None, :, :]]


def voigt_matrix(t) -> np.ndarray:
    """The (..., 6, 6) Voigt matrices of (..., 3, 3, 3, 3) tensors with the elastic index
    symmetries."""
    t = np.asarray(t, float)
    rows = np.array([p for p in VOIGT_PAIRS])
    return t[..., rows[:, 0, None], rows[:, 1, None], rows[None, :, 0], rows[None, :, 1]]


def symmetrize_elastic(c, rotations) -> np.ndarray:
    """Group average (1/N) sum_R R R R R C of (..., 6, 6) matrices over Cartesian
    rotations (n_ops, 3, 3); the result is also made symmetric (C_ij = C_ji)."""
    c = np.asarray(c, float)
    c = 0.5 * (c + np.swapaxes(c, -1, -2))
    r = np.asarray(rotations, float)
    # one (81, 81) map per operation, summed: R_ai R_bj R_ck R_dl
    rr = np.einsum("nai,nbj->nabij", r, r).reshape(len(r), 9, 9)
    m = np.einsum("nxy,nzw->xzyw", rr, rr).reshape(81, 81) / len(r)
    flat = full_tensor(c).reshape(*c.shape[:-2], 81)
    return voigt_matrix((flat @ m.T).reshape(*c.shape[:-2], 3, 3, 3, 3))


def _symmetric_basis() -> list[np.ndarray]:
    out = []
    for i in range(6):
        for j in range(i, 6):
            m = np.zeros((6, 6))
            m[i, j] = m[j, i] = 1.0
            out.append(m)
    return out


@dataclass(frozen=True, eq=False)
class ElasticPattern:
    """The independent elastic constants allowed by a point group.

    Attributes
    ----------
    names : tuple of str
        ``"C11"``, ``"C12"``, ... the independent constants (Voigt indices from 1).
    basis : ndarray (m, 6, 6)
        C = sum_k c_k basis[k] for the values c_k of ``names``.
    """

    names: tuple
    basis: np.ndarray

    @property
    def size(self) -> int:
        return len(self.names)

    def matrix(self, values) -> np.ndarray:
        """The (6, 6) matrix of the independent values (same order as ``names``)."""
        return np.einsum("k,kij->ij", np.asarray(values, float), self.basis)

    def values(self, c) -> np.ndarray:
        """The independent values read off a (6, 6) matrix of this pattern."""
        return np.array([c[int(n[1]) - 1, int(n[2]) - 1] for n in self.names])

    def relations(self, tol: float = 1e-8) -> dict:
        """Every non-zero Voigt entry (i <= j) as a text relation, e.g. C66 = 0.5 C11 - 0.5 C12."""
        out = {}
        for i in range(6):
            for j in range(i, 6):
                coef = self.basis[:, i, j]
                name = f"C{i + 1}{j + 1}"
                if name in self.names or np.all(np.abs(coef) < tol):
                    continue
                terms = [("+ " if c > 0 else "- ") + ("" if abs(abs(c) - 1) < tol
                                                      else f"{abs(c):.6g} ") + n
                         for c, n in zip(coef, self.names) if abs(c) > tol]
                out[name] = " ".join(terms).removeprefix("+ ")
        return out


def elastic_pattern(rotations, tol: float = 1e-6) -> ElasticPattern:
    """The independent constants of the point group given by Cartesian rotations.

    The group average of the 21 elementary symmetric matrices spans the allowed
    space; its members are named by the first Voigt entries (row by row, i <= j)
    whose values fix them (a greedy rank test), and the basis is the dual one
    (basis[k] has 1 at its own entry and 0 at the other chosen entries).
    """
    images = symmetrize_elastic(np.array(_symmetric_basis()), rotations)
    flat = images.reshape(len(images), -1)
    u, s, vt = np.linalg.svd(flat, full_matrices=False)
    rank = int(np.sum(s > tol * max(s[0], 1.0)))
    space = vt[:rank].reshape(rank, 6, 6)          # orthonormal basis of the allowed space
    chosen, rows = [], np.zeros((0, rank))
    for i in range(6):
        for j in range(i, 6):
            row = space[:, i, j]
            trial = np.vstack([rows, row])
            if np.linalg.matrix_rank(trial, tol=tol) > len(rows):
                chosen.append((i, j))
                rows = trial
            if len(chosen) == rank:
                break
        if len(chosen) == rank:
            break
    # basis[k] = sum_m x_km space[m] with basis[k][chosen_l] = delta_kl
    x = np.linalg.inv(rows.T)
    basis = np.einsum("km,mij->kij", x, space)
    basis[np.abs(basis) < 1e-10] = 0.0
    return ElasticPattern(tuple(f"C{i + 1}{j + 1}" for i, j in chosen), basis)


def strain_patterns(pattern: ElasticPattern, tol: float = 1e-8) -> list[int]:
    """The fewest unit Voigt strains (indices 0..5) whose stresses fix every independent
    constant: strains are taken in Voigt order and kept when they raise the rank of the
    map from the constants to the stresses they produce."""
    kept, rows, rank = [], np.zeros((0, pattern.size)), 0
    for j in range(6):
        trial = np.vstack([rows, pattern.basis[:, :, j].T])     # (stresses, constants)
        r = int(np.linalg.matrix_rank(trial, tol=tol))
        if r > rank:
            kept.append(j)
            rows, rank = trial, r
        if rank == pattern.size:
            break
    return kept


@dataclass(frozen=True, eq=False)
class StressStrainFit:
    """Least-squares elastic constants from stress-strain lines.

    Attributes
    ----------
    slopes : ndarray (6, 6)
        slopes[:, j] = d s / d e_j of every strained pattern j (NaN for patterns not run),
        the raw derivatives before the symmetry is imposed.
    matrix : ndarray (6, 6)
        The elastic constants of the pattern that fit all slopes best.
    values : ndarray (m,)
        The independent constants (``pattern.names`` order).
    symmetry_residual : float
        Largest |slope - matrix| over the strained columns: how far the raw
        stress-strain lines are from the crystal's symmetry (same units).
    fit_residual : float
        Largest residual of the polynomial fits of the stresses.
    """

    slopes: np.ndarray
    matrix: np.ndarray
    values: np.ndarray
    symmetry_residual: float
    fit_residual: float
    polynomials: dict


def fit_stress_strain(pattern: ElasticPattern, lines: dict, degree: int = 2) -> StressStrainFit:
    """Fit the stress-strain lines and solve for the independent constants.

    Parameters
    ----------
    pattern
        The symmetry pattern (:func:`elastic_pattern`).
    lines
        ``{j: (amplitudes (n,), stresses (n, 6))}`` for each strained Voigt component j:
        the Voigt strain amplitudes (including 0 for the reference) and the Voigt
        stresses.
    degree
        Polynomial degree of each stress component against the amplitude (1 or 2;
        lowered to the number of points minus one): the quadratic term takes up the
        second-order elasticity that symmetric amplitudes would otherwise leave in the
        residual, without biasing the slope at zero strain.
    """
    slopes = np.full((6, 6), np.nan)
    rows, rhs, worst, polys = [], [], 0.0, {}
    for j, (amps, stresses) in sorted(lines.items()):
        amps = np.asarray(amps, float)
        stresses = np.asarray(stresses, float)
        deg = max(1, min(degree, len(np.unique(amps)) - 1))
        coef = np.polynomial.polynomial.polyfit(amps, stresses, deg)      # (deg + 1, 6)
        fitted = np.polynomial.polynomial.polyval(amps, coef).T
        worst = max(worst, float(np.abs(fitted - stresses).max()))
        slopes[:, j] = coef[1]
        polys[j] = coef
        rows.append(pattern.basis[:, :, j].T)
        rhs.append(coef[1])
    a = np.vstack(rows)
    values, *_ = np.linalg.lstsq(a, np.concatenate(rhs), rcond=None)
    matrix = pattern.matrix(values)
    done = sorted(lines)
    sym = float(np.abs(slopes[:, done] - matrix[:, done]).max()) if done else 0.0
    return StressStrainFit(slopes, matrix, values, sym, worst, polys)


@dataclass(frozen=True)
class ElasticAverages:
    """Polycrystal moduli (same unit as C) and Poisson ratios."""

    bulk_voigt: float
    bulk_reuss: float
    bulk_hill: float
    shear_voigt: float
    shear_reuss: float
    shear_hill: float

    @staticmethod
    def _young(k, g):
        return 9 * k * g / (3 * k + g)

    @staticmethod
    def _poisson(k, g):
        return (3 * k - 2 * g) / (2 * (3 * k + g))

    @property
    def young_hill(self) -> float:
        return self._young(self.bulk_hill, self.shear_hill)

    @property
    def poisson_hill(self) -> float:
        return self._poisson(self.bulk_hill, self.shear_hill)

    def as_dict(self, unit: str = "GPa", scale: float = 1.0) -> dict:
        out = {f"{name}_{unit}": getattr(self, name) * scale
               for name in ("bulk_voigt", "bulk_reuss", "bulk_hill", "shear_voigt",
                            "shear_reuss", "shear_hill")}
        for which in ("voigt", "reuss", "hill"):
            k, g = getattr(self, f"bulk_{which}"), getattr(self, f"shear_{which}")
            out[f"young_{which}_{unit}"] = self._young(k, g) * scale
            out[f"poisson_ratio_{which}"] = self._poisson(k, g)
        return out


def voigt_reuss_hill(c) -> ElasticAverages:
    """Voigt (uniform strain), Reuss (uniform stress) and Hill (mean) bulk and shear
    moduli of a (6, 6) elastic matrix; Young's modulus E = 9KG/(3K + G) and Poisson's
    ratio (3K - 2G)/(2(3K + G)) follow (isotropic relations, common practice)."""
    c = np.asarray(c, float)
    s = np.linalg.inv(c)
    a = c[0, 0] + c[1, 1] + c[2, 2]
    b = c[0, 1] + c[0, 2] + c[1, 2]
    g3 = c[3, 3] + c[4, 4] + c[5, 5]
    sa = s[0, 0] + s[1, 1] + s[2, 2]
    sb = s[0, 1] + s[0, 2] + s[1, 2]
    sg = s[3, 3] + s[4, 4] + s[5, 5]
    kv, gv = (a + 2 * b) / 9, (a - b + 3 * g3) / 15
    kr, gr = 1 / (sa + 2 * sb), 15 / (4 * sa - 4 * sb + 3 * sg)
    return ElasticAverages(kv, kr, (kv + kr) / 2, gv, gr, (gv + gr) / 2)


def born_stability(c) -> tuple[bool, np.ndarray]:
    """(stable, eigenvalues ascending) of a (6, 6) elastic matrix: a crystal is
    mechanically stable when C is positive definite (Born; Mouhat and Coudert's general
    form), which for a cubic crystal is C11 - C12 > 0, C11 + 2 C12 > 0, C44 > 0."""
    w = np.linalg.eigvalsh(0.5 * (np.asarray(c, float) + np.asarray(c, float).T))
    return bool(w[0] > 0), w
