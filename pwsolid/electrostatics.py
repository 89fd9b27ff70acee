"""Classical electrostatics: Hartree potential and Ewald ion-ion energy (layer 3).

Both work in a neutralising convention: the G = 0 Fourier component of every
Coulomb interaction is dropped. For a neutral cell (valence electrons + ions)
the dropped pieces cancel exactly, apart from the finite non-Coulomb part of the
pseudopotentials, which ``pwsolid.energies`` adds as its own term.
"""

from __future__ import annotations

import itertools
import math

from dataclasses import dataclass

import numpy as np
from scipy.special import erfc

__all__ = ["hartree_potential", "hartree_energy", "ewald_energy", "ewald_forces",
           "coulomb_kernel", "hartree_stress", "ewald_stress"]


def coulomb_kernel(g2: np.ndarray) -> np.ndarray:
    """4 pi / G^2 with the G = 0 entry set to 0 (neutralising background)."""
    return np.divide(4 * np.pi, g2, out=np.zeros_like(g2, dtype=float), where=g2 > 1e-12)


def hartree_potential(density_g: np.ndarray, g2: np.ndarray) -> np.ndarray:
    """Hartree potential coefficients V_H(G) = 4 pi n(G) / G^2 (G = 0 term dropped).

    Parameters
    ----------
    density_g : ndarray, complex
        Fourier coefficients n(G) of the density (bohr^-3), any shape.
    g2 : ndarray, float
        |G|^2 (bohr^-2) of the same shape.
    """
    return coulomb_kernel(g2) * density_g


def hartree_energy(density_g: np.ndarray, g2: np.ndarray, volume: float) -> float:
    """E_H = (Omega/2) sum_{G != 0} 4 pi |n(G)|^2 / G^2  (Ha)."""
    return float(0.5 * volume * np.sum(coulomb_kernel(g2) * np.abs(density_g) ** 2))


def ewald_energy(lattice: np.ndarray, positions: np.ndarray, charges: np.ndarray,
                 tolerance: float = 1e-12, splitting: float | None = None) -> float:
    """Electrostatic energy of point charges in a neutralising background (Ha).

    Parameters
    ----------
    lattice : (3, 3) float, bohr
        Lattice vectors as rows.
    positions : (n, 3) float, bohr
        Cartesian positions of the charges.
    charges : (n,) float
        Charges in units of e (ions carry +Z).
    tolerance : float
        Each neglected term of the two series is below this (Ha).
    splitting : float, optional
        The Ewald parameter eta (1/bohr); the default balances the two sums.
        The result does not depend on it (a test checks that).

    Notes
    -----
    E = 1/2 sum_ij sum_L' q_i q_j erfc(eta |r_ij + L|)/|r_ij + L|
        + (2 pi / Omega) sum_{G != 0} exp(-G^2 / 4 eta^2) / G^2 |sum_i q_i exp(i G r_i)|^2
        - eta/sqrt(pi) sum_i q_i^2 - pi (sum_i q_i)^2 / (2 Omega eta^2).

    References
    ----------
    P. P. Ewald, Ann. Phys. 369, 253 (1921).
    """
    sums = _ewald_sums(lattice, positions, charges, tolerance, splitting)
    q, eta = sums.charges, sums.eta
    qq = q[:, None] * q[None, :]
    e_real = 0.0
    for _, ds, mask in sums.real_space_pairs():
        e_real += 0.5 * float(np.sum(qq[:, :, None] * np.where(mask, erfc(eta * ds) / ds, 0.0)))
    structure = np.exp(1j * sums.g @ sums.positions.T) @ q
    e_recip = float(2 * np.pi / sums.volume * np.sum(sums.screened_coulomb
                                                    * np.abs(structure) ** 2))
    e_self = -eta / math.sqrt(math.pi) * float(np.sum(q * q))
    e_background = -math.pi * float(np.sum(q)) ** 2 / (2 * sums.volume * eta * eta)
    return e_real + e_recip + e_self + e_background


def ewald_forces(lattice: np.ndarray, positions: np.ndarray, charges: np.ndarray,
                 tolerance: float = 1e-12, splitting: float | None = None) -> np.ndarray:
    """Forces -dE/dr_i of :func:`ewald_energy` on every charge (Ha/bohr).

    Parameters
    ----------
    lattice, positions, charges, tolerance, splitting
        As for :func:`ewald_energy` (the same lattice sums are used).

    Returns
    -------
    ndarray (n, 3) float, Ha/bohr
        Cartesian forces; they sum to zero (Newton's third law).

    Notes
    -----
    With d = r_i - r_j + L and phi(d) = erfc(eta d)/d,

    F_i = -q_i sum_j q_j sum_L' phi'(|d|) d/|d|
          + (4 pi q_i / Omega) sum_{G != 0} exp(-G^2/4 eta^2)/G^2 G Im[e^{i G r_i} S(G)*],

    phi'(d) = -erfc(eta d)/d^2 - (2 eta/sqrt pi) exp(-eta^2 d^2)/d and
    S(G) = sum_j q_j e^{i G r_j}; the self and background terms do not depend on
    the positions.

    References
    ----------
    P. P. Ewald, Ann. Phys. 369, 253 (1921).
    """
    sums = _ewald_sums(lattice, positions, charges, tolerance, splitting)
    forces = np.zeros((len(sums.charges), 3))
    q, eta = sums.charges, sums.eta
    qq = np.outer(q, q)
    for vec, ds, mask in sums.real_space_pairs():
        slope = -(erfc(eta * ds) / ds
                  + 2 * eta / math.sqrt(math.pi) * np.exp(-(eta * ds) ** 2)) / ds
        weight = np.where(mask, qq[:, :, None] * slope / ds, 0.0)          # phi'(d)/d
        forces -= np.einsum("ijc,ijcx->ix", weight, vec)
    phase = np.exp(1j * sums.g @ sums.positions.T)                          # (n_g, n)
    structure = phase @ q
    imag = (phase * structure.conj()[:, None]).imag                       # (n_g, n)
    forces += (4 * np.pi / sums.volume) * q[:, None] * (
        (sums.screened_coulomb[:, None] * imag).T @ sums.g)
    return forces


@dataclass(frozen=True)
class _EwaldSums:
    """The real-space cells and reciprocal vectors both Ewald series run over."""

    positions: np.ndarray        # (n, 3) bohr
    charges: np.ndarray          # (n,)
    volume: float
    eta: float
    diffs: np.ndarray            # (n, n, 3) r_i - r_j, bohr
    cells: np.ndarray            # (n_L, 3) lattice translations, bohr
    g: np.ndarray                # (n_G, 3) reciprocal vectors, G != 0
    screened_coulomb: np.ndarray  # (n_G,) exp(-G^2/4 eta^2)/G^2

    def real_space_pairs(self):
        """Chunks of (r_i - r_j + L (n, n, c, 3), |.| with 1 at d = 0, mask of d != 0)."""
        for chunk in np.array_split(self.cells, max(1, len(self.cells) // 2000 + 1)):
            vec = self.diffs[:, :, None, :] + chunk[None, None, :, :]
            d = np.linalg.norm(vec, axis=-1)
            mask = d > 1e-10
            yield vec, np.where(mask, d, 1.0), mask


def _ewald_sums(lattice, positions, charges, tolerance, splitting) -> _EwaldSums:
    lattice = np.asarray(lattice, float)
    pos = np.asarray(positions, float).reshape(-1, 3)
    q = np.asarray(charges, float).reshape(-1)
    volume = abs(np.linalg.det(lattice))
    recip = 2 * np.pi * np.linalg.inv(lattice).T
    eta = splitting if splitting is not None else math.sqrt(math.pi) / volume ** (1 / 3)
    log_tol = -math.log(tolerance)

    # real space: erfc(eta r)/r < tol  for r > r_max
    r_max = math.sqrt(log_tol) / eta
    while erfc(eta * r_max) / r_max > tolerance:
        r_max *= 1.1
    diffs = pos[:, None, :] - pos[None, :, :]
    span = np.max(np.linalg.norm(diffs, axis=-1)) if len(pos) > 1 else 0.0
    n_l = _lattice_range(lattice, r_max + span)
    cells = np.array(list(itertools.product(*(range(-n, n + 1) for n in n_l))), float) @ lattice

    # reciprocal space: exp(-G^2/4eta^2)/G^2 < tol for G > g_max
    g_max = 2 * eta * math.sqrt(log_tol)
    n_g = _lattice_range(recip, g_max)
    m = np.array(list(itertools.product(*(range(-n, n + 1) for n in n_g))), float)
    g = m @ recip
    g2 = np.einsum("ij,ij->i", g, g)
    keep = (g2 > 1e-12) & (g2 <= g_max * g_max)
    g, g2 = g[keep], g2[keep]
    return _EwaldSums(pos, q, volume, eta, diffs, cells, g, np.exp(-g2 / (4 * eta * eta)) / g2)


def _lattice_range(vectors: np.ndarray, radius: float) -> list[int]:
    """Repeats along each vector needed to cover a sphere of ``radius``."""
    # the distance between lattice planes spanned by the other two vectors
    inv = np.linalg.inv(vectors).T
    plane_spacing = 1.0 / np.linalg.norm(inv, axis=1)
    return [int(math.ceil(radius / s)) for s in plane_spacing]


def hartree_stress(density_g: np.ndarray, g_vectors: np.ndarray, volume: float) -> np.ndarray:
    """Strain derivative of E_H divided by the volume (3, 3), Ha/bohr^3.

    Parameters
    ----------
    density_g : (*grid) complex
        n(G), bohr^-3 (FFT normalisation: to_reciprocal).
    g_vectors : (*grid, 3) float
        Cartesian G, bohr^-1.
    volume : float
        Cell volume, bohr^3.

    Notes
    -----
    Omega n(G) is fixed under strain while G_a -> G_a - eps_ba G_b, so
    sigma_ab = -E_H delta_ab / Omega + sum_{G != 0} 4 pi |n(G)|^2 G_a G_b / G^4
    (O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780 (1985)).
    """
    g = np.asarray(g_vectors, float).reshape(-1, 3)
    g2 = np.einsum("ij,ij->i", g, g)
    kernel = coulomb_kernel(g2)
    n2 = np.abs(np.asarray(density_g).reshape(-1)) ** 2
    energy = 0.5 * volume * float(np.sum(kernel * n2))
    weight = np.divide(kernel * n2, g2, out=np.zeros_like(g2), where=g2 > 1e-12)
    return -energy / volume * np.eye(3) + np.einsum("g,ga,gb->ab", weight, g, g)


def ewald_stress(lattice: np.ndarray, positions: np.ndarray, charges: np.ndarray,
                 tolerance: float = 1e-12, splitting: float | None = None) -> np.ndarray:
    """Strain derivative of :func:`ewald_energy` divided by the volume (3, 3), Ha/bohr^3.

    Parameters are those of :func:`ewald_energy`.

    Notes
    -----
    With x = r_ij + L and f(d) = erfc(eta d)/d, a strain x -> (1 + eps) x and
    G -> (1 + eps)^-T G gives

        Omega sigma_ab = 1/2 sum_ij sum_L' q_i q_j f'(|x|) x_a x_b / |x|
            + (2 pi / Omega) sum_{G != 0} |S(G)|^2 exp(-G^2/4eta^2)/G^2
              [2 (1/(4 eta^2) + 1/G^2) G_a G_b - delta_ab]
            + pi (sum q)^2 / (2 Omega eta^2) delta_ab,

    f'(d) = -erfc(eta d)/d^2 - 2 eta exp(-eta^2 d^2)/(sqrt(pi) d); the self term
    does not depend on the cell.

    References
    ----------
    O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780 (1985), Appendix (Ewald
    stress); P. P. Ewald, Ann. Phys. 369, 253 (1921).
    """
    sums = _ewald_sums(lattice, positions, charges, tolerance, splitting)
    q, eta, volume, g = sums.charges, sums.eta, sums.volume, sums.g
    out = np.zeros((3, 3))
    qq = q[:, None] * q[None, :]
    for x, ds, mask in sums.real_space_pairs():
        slope = (-erfc(eta * ds) / ds ** 2
                 - 2 * eta / math.sqrt(math.pi) * np.exp(-(eta * ds) ** 2) / ds)
        weight = np.where(mask, 0.5 * qq[:, :, None] * slope / ds, 0.0)
        out += np.einsum("ijl,ijla,ijlb->ab", weight, x, x)

    g2 = np.einsum("ij,ij->i", g, g)
    term = (2 * np.pi / volume * sums.screened_coulomb
            * np.abs(np.exp(1j * g @ sums.positions.T) @ q) ** 2)
    out += np.einsum("g,ga,gb->ab", term * 2 * (1 / (4 * eta * eta) + 1 / g2), g, g)
    out -= float(np.sum(term)) * np.eye(3)
    out += math.pi * float(np.sum(q)) ** 2 / (2 * volume * eta * eta) * np.eye(3)
    return out / volume
