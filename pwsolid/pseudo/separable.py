"""Separable (nonlocal) parts of dual-space Gaussian pseudopotentials (layer 3).

V_nl = sum_atoms sum_{l,m} sum_{i,j} |p_i^{lm}> h^l_ij <p_j^{lm}|, with Gaussian
projectors p_i^l(r) Y_lm(r_hat) whose Fourier transforms are closed-form. In a
plane-wave basis the whole nonlocal operator of a k-point is two dense products,
(C P^dagger) D P, with P the (n_projectors, n_pw) matrix of projector
coefficients <k+G|p> of every atom (structure phases included) and D the
block-diagonal coupling matrix of the h^l_ij.

References
----------
S. Goedecker, M. Teter and J. Hutter, Phys. Rev. B 54, 1703 (1996);
C. Hartwigsen, S. Goedecker and J. Hutter, Phys. Rev. B 58, 3641 (1998).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import gamma

__all__ = ["ProjectorChannel", "SeparablePart", "projector_radial", "projector_radial_real",
           "real_spherical_harmonics", "hgh_off_diagonal", "nonlocal_operator",
           "projector_gradients"]

_PI54 = math.pi ** 1.25


@dataclass(frozen=True, eq=False)
class ProjectorChannel:
    """Projectors of one angular momentum.

    Attributes
    ----------
    l : int
        Angular momentum (0, 1 or 2).
    radius : float
        r_l in bohr.
    h : (n, n) float, Ha
        Coupling matrix h^l_ij (symmetric), n = 1..3 radial projectors.
    """

    l: int
    radius: float
    h: np.ndarray

    @property
    def n_radial(self) -> int:
        return self.h.shape[0]


@dataclass(frozen=True, eq=False)
class SeparablePart:
    """All projector channels of one species."""

    channels: tuple[ProjectorChannel, ...]

    @property
    def n_projectors(self) -> int:
        """Projectors per atom, counting the 2l+1 orientations."""
        return sum((2 * c.l + 1) * c.n_radial for c in self.channels)


def hgh_off_diagonal(l: int, diagonal) -> np.ndarray:
    """Full h^l matrix from its diagonal with the fixed off-diagonal relations of
    Hartwigsen, Goedecker & Hutter (1998), for their 1998 parameter sets."""
    d = list(diagonal)
    n = len(d)
    h = np.diag(np.array(d, float))
    rel = {
        0: ((-0.5 * math.sqrt(3 / 5), 1), (0.5 * math.sqrt(5 / 21), 2), (-0.5 * math.sqrt(100 / 63), 2)),
        1: ((-0.5 * math.sqrt(5 / 7), 1), (math.sqrt(35 / 11) / 6, 2), (-14 / (6 * math.sqrt(11)), 2)),
        2: ((-0.5 * math.sqrt(7 / 9), 1), (0.5 * math.sqrt(63 / 143), 2), (-0.5 * 18 / math.sqrt(143), 2)),
    }[l]
    # (coefficient, index of the diagonal element it multiplies) for h12, h13, h23
    if n >= 2:
        h[0, 1] = h[1, 0] = rel[0][0] * d[rel[0][1]]
    if n >= 3:
        h[0, 2] = h[2, 0] = rel[1][0] * d[rel[1][1]]
        h[1, 2] = h[2, 1] = rel[2][0] * d[rel[2][1]]
    return h


def projector_radial_real(l: int, i: int, radius: float, r: np.ndarray) -> np.ndarray:
    """p_i^l(r) = sqrt2 r^(l+2(i-1)) exp(-r^2/2r_l^2) / (r_l^(l+(4i-1)/2) sqrt(Gamma(l+(4i-1)/2))),
    i = 1, 2, 3; normalised to int r^2 p^2 dr = 1."""
    r = np.asarray(r, float)
    e = l + (4 * i - 1) / 2
    return (math.sqrt(2) * r ** (l + 2 * (i - 1)) * np.exp(-r * r / (2 * radius ** 2))
            / (radius ** e * math.sqrt(gamma(e))))


def projector_radial(l: int, i: int, radius: float, q: np.ndarray) -> np.ndarray:
    """4 pi int r^2 j_l(q r) p_i^l(r) dr in closed form (bohr^(3/2)).

    Notes
    -----
    With g = q r_l and E = exp(-g^2/2), the transforms are
    (l=0) 4 sqrt(2 r^3) pi^(5/4) E; 8 sqrt(2 r^3/15) pi^(5/4) (3 - g^2) E;
    (16/3) sqrt(2 r^3/105) pi^(5/4) (15 - 10 g^2 + g^4) E;
    (l=1) 8 sqrt(r^5/3) pi^(5/4) q E; 16 sqrt(r^5/105) pi^(5/4) q (5 - g^2) E;
    (32/3) sqrt(r^5/1155) pi^(5/4) q (35 - 14 g^2 + g^4) E;
    (l=2) 8 sqrt(2 r^7/15) pi^(5/4) q^2 E; 16 sqrt(2 r^7/945) pi^(5/4) q^2 (7 - g^2) E;
    (32/3) sqrt(2 r^7/15015) pi^(5/4) q^2 (63 - 18 g^2 + g^4) E.
    The polynomials are Laguerre polynomials L_(i-1)^(l+1/2)(g^2/2), scaled.
    """
    q = np.asarray(q, float)
    r = radius
    g2 = (q * r) ** 2
    e = np.exp(-g2 / 2)
    table = {
        (0, 1): lambda: 4 * math.sqrt(2 * r ** 3) * _PI54 * e,
        (0, 2): lambda: 8 * math.sqrt(2 * r ** 3 / 15) * _PI54 * (3 - g2) * e,
        (0, 3): lambda: 16 / 3 * math.sqrt(2 * r ** 3 / 105) * _PI54 * (15 - 10 * g2 + g2 * g2) * e,
        (1, 1): lambda: 8 * math.sqrt(r ** 5 / 3) * _PI54 * q * e,
        (1, 2): lambda: 16 * math.sqrt(r ** 5 / 105) * _PI54 * q * (5 - g2) * e,
        (1, 3): lambda: 32 / 3 * math.sqrt(r ** 5 / 1155) * _PI54 * q * (35 - 14 * g2 + g2 * g2) * e,
        (2, 1): lambda: 8 * math.sqrt(2 * r ** 7 / 15) * _PI54 * q * q * e,
        (2, 2): lambda: 16 * math.sqrt(2 * r ** 7 / 945) * _PI54 * q * q * (7 - g2) * e,
        (2, 3): lambda: 32 / 3 * math.sqrt(2 * r ** 7 / 15015) * _PI54 * q * q
        * (63 - 18 * g2 + g2 * g2) * e,
    }
    if (l, i) not in table:
        raise ValueError(f"no closed-form projector for l={l}, i={i}")
    return table[(l, i)]()


def real_spherical_harmonics(l: int, vectors: np.ndarray) -> np.ndarray:
    """Real spherical harmonics Y_lm(v_hat), shape (2l+1, n); zero for v = 0 when l > 0."""
    v = np.asarray(vectors, float)
    norm = np.linalg.norm(v, axis=1)
    safe = np.where(norm > 1e-12, norm, 1.0)
    x, y, z = (v / safe[:, None]).T
    if l == 0:
        return np.full((1, len(v)), 1 / math.sqrt(4 * math.pi))
    mask = norm > 1e-12
    if l == 1:
        out = math.sqrt(3 / (4 * math.pi)) * np.stack([x, y, z])
    elif l == 2:
        c = math.sqrt(15 / (4 * math.pi))
        out = np.stack([c * x * y, c * y * z, c * x * z,
                        math.sqrt(5 / (16 * math.pi)) * (3 * z * z - 1),
                        math.sqrt(15 / (16 * math.pi)) * (x * x - y * y)])
    else:
        raise ValueError("angular momenta above 2 are not supported")
    return out * mask


def nonlocal_operator(kpg: np.ndarray, atoms: list[tuple[np.ndarray, SeparablePart]],
                      volume: float) -> tuple[np.ndarray, np.ndarray]:
    """Projector coefficients P (n_proj, n_pw) and coupling D (n_proj, n_proj) at one k.

    Parameters
    ----------
    kpg : (n_pw, 3), 1/bohr
        Cartesian k + G of the basis.
    atoms : list of (position_cart (3,), SeparablePart)
        Every atom carrying projectors.
    volume : float
        Cell volume (bohr^3).

    Notes
    -----
    P[a, G] = Y_lm(k+G) p_i^l(|k+G|) exp(-i (k+G).tau) / sqrt(Omega), the plane-wave
    coefficients of projector a (the (-i)^l factor of the plane-wave expansion
    cancels between bra and ket and is left out), so that
    V_nl psi = P^T-contracted: (C P^dagger) D P for coefficient rows C.
    """
    q = np.linalg.norm(kpg, axis=1)
    rows, blocks = [], []
    for tau, part in atoms:
        phase = np.exp(-1j * kpg @ np.asarray(tau, float)) / math.sqrt(volume)
        for ch in part.channels:
            ylm = real_spherical_harmonics(ch.l, kpg)                     # (2l+1, n_pw)
            radial = np.array([projector_radial(ch.l, i + 1, ch.radius, q)
                               for i in range(ch.n_radial)])             # (n_i, n_pw)
            # order: radial index outer, m inner; D couples equal m across radial indices
            block = (radial[:, None, :] * ylm[None, :, :]).reshape(-1, len(q)) * phase
            rows.append(block)
            blocks.append(np.kron(ch.h, np.eye(2 * ch.l + 1)))
    if not rows:
        return np.zeros((0, len(q)), complex), np.zeros((0, 0))
    proj = np.ascontiguousarray(np.concatenate(rows))
    n = sum(b.shape[0] for b in blocks)
    coupling = np.zeros((n, n))
    start = 0
    for b in blocks:
        coupling[start:start + b.shape[0], start:start + b.shape[0]] = b
        start += b.shape[0]
    return proj, coupling


# p_i^l(q) = A q^l L(g^2) exp(-g^2/2), g = q r_l: A / (pi^(5/4) r_l^(l+3/2)) and the
# coefficients of L in powers of g^2 (the table of projector_radial, Notes)
_RADIAL_POLYNOMIALS = {
    (0, 1): (4 * math.sqrt(2), (1.0,)),
    (0, 2): (8 * math.sqrt(2 / 15), (3.0, -1.0)),
    (0, 3): (16 / 3 * math.sqrt(2 / 105), (15.0, -10.0, 1.0)),
    (1, 1): (8 * math.sqrt(1 / 3), (1.0,)),
    (1, 2): (16 * math.sqrt(1 / 105), (5.0, -1.0)),
    (1, 3): (32 / 3 * math.sqrt(1 / 1155), (35.0, -14.0, 1.0)),
    (2, 1): (8 * math.sqrt(2 / 15), (1.0,)),
    (2, 2): (16 * math.sqrt(2 / 945), (7.0, -1.0)),
    (2, 3): (32 / 3 * math.sqrt(2 / 15015), (63.0, -18.0, 1.0)),
}


def _solid_harmonics(l: int, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """S_lm(v) = |v|^l Y_lm(v_hat) (2l+1, n) and its gradient (3, 2l+1, n), the
    homogeneous polynomials behind :func:`real_spherical_harmonics` (same order)."""
    x, y, z = np.asarray(v, float).T
    zero, one = np.zeros_like(x), np.ones_like(x)
    if l == 0:
        c = 1 / math.sqrt(4 * math.pi)
        return np.full((1, len(x)), c), np.zeros((3, 1, len(x)))
    if l == 1:
        c = math.sqrt(3 / (4 * math.pi))
        grad = np.stack([np.stack([one, zero, zero]), np.stack([zero, one, zero]),
                         np.stack([zero, zero, one])], axis=1)       # (3 b, 3 m, n)
        return c * np.stack([x, y, z]), c * grad
    c, c0, c2 = (math.sqrt(15 / (4 * math.pi)), math.sqrt(5 / (16 * math.pi)),
                 math.sqrt(15 / (16 * math.pi)))
    values = np.stack([c * x * y, c * y * z, c * x * z, c0 * (2 * z * z - x * x - y * y),
                       c2 * (x * x - y * y)])
    grad = np.stack([
        np.stack([c * y, zero, c * z, -2 * c0 * x, 2 * c2 * x]),
        np.stack([c * x, c * z, zero, -2 * c0 * y, -2 * c2 * y]),
        np.stack([zero, c * y, c * x, 4 * c0 * z, zero]),
    ])
    return values, grad


def projector_gradients(kpg: np.ndarray, tau: np.ndarray, part: SeparablePart,
                        volume: float) -> np.ndarray:
    """Gradients of one atom's projector coefficients with respect to k + G.

    Parameters
    ----------
    kpg : (n_pw, 3), 1/bohr
        Cartesian k + G of the basis.
    tau : (3,), bohr
        Cartesian position of the atom.
    part : SeparablePart
    volume : float
        Cell volume (bohr^3).

    Returns
    -------
    ndarray (3, n_proj, n_pw) complex
        ``[b, a, G] = d/dq_b [p_i^l(|q|) Y_lm(q_hat)]`` at q = k + G, times the
        structure phase exp(-i (k+G).tau) / sqrt(Omega) held fixed; rows in the
        order of :func:`nonlocal_operator` for this atom alone.

    Notes
    -----
    With p_i^l(q) Y_lm = A L(g^2) exp(-g^2/2) S_lm(q), S_lm = q^l Y_lm the solid
    harmonic and g = q r_l, the gradient is

        A exp(-g^2/2) [2 r_l^2 (L'(g^2) - L/2) S_lm q + L grad S_lm],

    free of any division by |q|. A homogeneous strain changes k + G at fixed Miller
    index and fixed (k+G).tau; its derivative of the nonlocal energy follows from
    these gradients (Nielsen and Martin, Phys. Rev. B 32, 3780 (1985)).
    """
    q = np.asarray(kpg, float)
    phase = np.exp(-1j * q @ np.asarray(tau, float)) / math.sqrt(volume)
    g2_over_r2 = np.einsum("ij,ij->i", q, q)
    rows = []
    for ch in part.channels:
        r2 = ch.radius ** 2
        g2 = g2_over_r2 * r2
        e = np.exp(-g2 / 2)
        s, grad_s = _solid_harmonics(ch.l, q)
        for i in range(ch.n_radial):
            amp, coeffs = _RADIAL_POLYNOMIALS[(ch.l, i + 1)]
            amp *= _PI54 * ch.radius ** (ch.l + 1.5)
            poly = np.polynomial.polynomial.polyval(g2, coeffs)
            slope = np.polynomial.polynomial.polyval(
                g2, np.polynomial.polynomial.polyder(coeffs)) if len(coeffs) > 1 else 0.0
            along_q = 2 * r2 * (slope - poly / 2)                        # (n_pw,)
            rows.append(amp * e * (along_q * s[None] * q.T[:, None, :] + poly * grad_s))
    if not rows:
        return np.zeros((3, 0, len(q)), complex)
    return np.concatenate(rows, axis=1) * phase
