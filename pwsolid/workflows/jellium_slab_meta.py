"""The jellium slab with a meta-GGA solved self-consistently (layer 5).

A meta-GGA adds the generalised Kohn-Sham term -1/2 div(v_tau grad psi), v_tau = de/dtau.
For an orbital exp(i k_par . r_par) phi(z) with q = k_par^2 / 2 it gives

    H(q) = A + q B,   A = -1/2 d^2/dz^2 + v(z) - 1/2 d/dz v_tau(z) d/dz,   B = 1 + v_tau(z),

so the in-plane motion no longer separates: the subband energies lambda_j(q) and
orbitals phi_jq depend on q. Subband j is occupied for 0 <= q <= q_j with
lambda_j(q_j) = mu, and per unit area (both spins, d^2k / (2 pi)^2 = dq / (2 pi))

    n(z)   = (1/pi) sum_j int_0^{q_j} |phi_jq(z)|^2 dq,
    tau(z) = (1/pi) sum_j int_0^{q_j} [1/2 |phi_jq'(z)|^2 + q |phi_jq(z)|^2] dq,
    N      = (1/pi) sum_j q_j.

The q-dependence is smooth (analytic between avoided crossings, which the small v_tau
of these functionals does not produce), so H(q) is diagonalised at Chebyshev-Lobatto
nodes in q and everything is integrated through the interpolating polynomial in q:
lambda_j(q) for the Fermi level and the q_j, and the integrals above with weights
that integrate the interpolant from 0 to q_j exactly. The density and tau are mixed
together (Pulay, Kerker on the density part).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.polynomial import chebyshev as _cheb
from scipy.optimize import brentq

from ..errors import ConvergenceError
from ..mixing import PulayMixer, kerker_preconditioner, thomas_fermi_wavevector
from ..parallel import single_threaded_blas
from ..xc import get_functional
from .jellium_slab import (SlabGrid, SlabState, _electrostatic, _energies, _parity,
                           kinetic_energy_density, self_consistency, solve_slab)

__all__ = ["solve_meta_slab", "VACUUM_DENSITY"]

#: Times the q range may grow by 1.5 before a falling subband is declared (1.5^12 = 130).
_WIDENINGS = 12


def _matrices(grid: SlabGrid, v: np.ndarray, v_tau: np.ndarray):
    """A and B of H(q) = A + q B in plane waves exp(i G (z - c/2)) (real symmetric)."""
    size = grid.z.size
    idx = grid.wave_index
    diff = (idx[:, None] - idx[None, :]) % size
    sign = np.outer(_parity(grid), _parity(grid))
    g = grid.g[idx]
    vg = np.real((np.fft.fft(v) / size)[diff]) * sign
    tg = np.real((np.fft.fft(v_tau) / size)[diff]) * sign
    a = vg + 0.5 * np.outer(g, g) * tg
    a[np.diag_indices_from(a)] += 0.5 * g ** 2
    b = tg.copy()
    b[np.diag_indices_from(b)] += 1.0
    return a, b


class _Nodes:
    """Chebyshev-Lobatto nodes on [0, q_top] and integration of their interpolant."""

    def __init__(self, count: int, q_top: float):
        self.x = -np.cos(np.pi * np.arange(count) / (count - 1))
        self.q = 0.5 * q_top * (self.x + 1)
        self.q_top = q_top
        self.inverse = np.linalg.inv(_cheb.chebvander(self.x, count - 1))
        eye = np.eye(count)
        self._integrals = [_cheb.chebint(eye[k], lbnd=-1) for k in range(count)]

    def interpolant(self, values: np.ndarray) -> np.ndarray:
        """Chebyshev coefficients of the interpolant of values at the nodes."""
        return self.inverse @ values

    def weights(self, q_end: float) -> np.ndarray:
        """w with sum_i w_i f(q_i) = int_0^{q_end} of the interpolant of f."""
        x = 2 * q_end / self.q_top - 1
        ints = np.array([_cheb.chebval(x, c) for c in self._integrals])
        return 0.5 * self.q_top * (self.inverse.T @ ints)


def _fermi(nodes: _Nodes, levels: np.ndarray, electrons: float):
    """mu and the q_j from the interpolated lambda_j(q); None when q_top is too small.

    ``levels`` is (nodes, bands), ascending per node.
    """
    top = _cheb.chebval(1.0, nodes.interpolant(levels[:, 0]))   # lowest subband at q_top
    bands = int(np.count_nonzero(levels[0] < top))
    coeffs = nodes.interpolant(levels[:, :bands]).T

    def q_of(mu, c):
        if mu <= _cheb.chebval(-1.0, c):
            return 0.0
        if mu >= _cheb.chebval(1.0, c):
            return math.inf
        x = brentq(lambda t: _cheb.chebval(t, c) - mu, -1.0, 1.0, xtol=1e-15, rtol=1e-15)
        return 0.5 * nodes.q_top * (x + 1)

    def excess(mu):
        return sum(q_of(mu, c) for c in coeffs) - math.pi * electrons

    mu_hi = top - 1e-12 * max(1.0, abs(top))
    if excess(mu_hi) < 0:
        return None
    mu = brentq(excess, levels[0, 0], mu_hi, xtol=1e-15, rtol=1e-15)
    q_end = np.zeros(levels.shape[1])
    q_end[:bands] = [q_of(mu, c) for c in coeffs]
    return mu, q_end


def _output(grid: SlabGrid, a, b, electrons: float, q_top: float, count: int):
    """n, tau, mu, the q_j and the q = 0 subbands of H(q) = A + q B (see the notes)."""
    size = grid.z.size
    with single_threaded_blas():
        for _ in range(_WIDENINGS):
            nodes = _Nodes(count, q_top)
            solved = [np.linalg.eigh(a + q * b) for q in nodes.q]
            levels = np.array([s[0] for s in solved])
            found = _fermi(nodes, levels, electrons)
            if found is not None:
                mu, q_end = found
                break
            q_top *= 1.5
        else:
            raise ConvergenceError(
                "the meta-GGA slab has a subband whose energy falls with the in-plane "
                "momentum (1 + v_tau < 0 somewhere, a spurious state of the vacuum tail); "
                "evaluate this functional on an LDA or GGA density instead")
    occupied = np.flatnonzero(q_end > 0)
    sign = _parity(grid)
    norm = size / math.sqrt(grid.length)
    density = np.zeros(size)
    tau = np.zeros(size)
    for j in occupied:
        w = nodes.weights(q_end[j]) / math.pi
        block = np.zeros((count, size), complex)
        block[:, grid.wave_index] = np.array([s[1][:, j] for s in solved]) * sign
        phi = np.fft.ifft(block, axis=1) * norm
        dphi = np.fft.ifft(1j * grid.g * block, axis=1) * norm
        p2 = np.abs(phi) ** 2
        density += w @ p2
        tau += w @ (0.5 * np.abs(dphi) ** 2 + nodes.q[:, None] * p2)
    levels0 = levels[0, occupied]
    block = np.zeros((occupied.size, size), complex)
    block[:, grid.wave_index] = solved[0][1][:, occupied].T * sign
    orbitals0 = np.fft.ifft(block, axis=1) * norm
    return density, tau, mu, q_end[occupied], levels0, orbitals0, q_top


def _meta_terms(fn, density, tau, g, dz, floor: float = 0.0):
    """E_xc per area, the multiplicative potential and v_tau of (n, tau).

    A mixed (n, tau) pair need not come from orbitals: tau is raised to the von
    Weizsaecker bound |grad n|^2 / (8 n), which every set of orbitals satisfies, so that
    the iso-orbital indicator stays non-negative. Where n < ``floor`` the functional is
    switched off (energy and both potentials zero): in the far vacuum tail a meta-GGA's
    v_tau and potential grow as the density vanishes, turn the effective mass
    1 + v_tau negative and bind spurious states.
    """
    n = np.maximum(density, 0.0)
    grad = np.real(np.fft.ifft(1j * g * np.fft.fft(n)))
    sigma = grad * grad
    bound = np.divide(sigma, 8 * n, out=np.zeros_like(n), where=n > 0)
    e, de_dn, de_dsigma, de_dtau = fn.evaluate_meta(n, sigma, np.maximum(tau, bound))
    off = n < floor
    e, de_dn, de_dsigma, de_dtau = (np.where(off, 0.0, x) for x in (e, de_dn, de_dsigma,
                                                                       de_dtau))
    flux = np.real(np.fft.ifft(1j * g * np.fft.fft(2.0 * de_dsigma * grad)))
    return float(np.sum(e) * dz), de_dn - flux, de_dtau


#: Density (bohr^-3) below which the meta-GGA is switched off in the slab's vacuum tail.
VACUUM_DENSITY = 1e-6


def solve_meta_slab(grid: SlabGrid, functional, *, tolerance: float = 1e-10,
                    max_iterations: int = 300, nodes: int = 12,
                    vacuum_density: float = VACUUM_DENSITY, log=None) -> SlabState:
    """Self-consistent jellium slab for a meta-GGA (see the module notes).

    Starts from the slab of the functional's uniform-gas parent (or PW92); ``nodes``
    Chebyshev-Lobatto points in q = k_par^2 / 2. Below ``vacuum_density`` (bohr^-3) the
    functional is switched off (see ``_meta_terms``); for SCAN and r2SCAN its share of
    E_xc there is below 1e-4 of sigma_xc at r_s 2 to 6 (measured). Returns a :class:`SlabState` whose
    ``kinetic_density`` is the self-consistent tau and whose ``subbands`` and
    ``orbitals`` are those at k_par = 0; ``xc_potential`` is the multiplicative part.
    """
    fn = get_functional(functional)
    size, dz = grid.z.size, grid.spacing
    electrons = grid.electrons_per_area
    start = solve_slab(grid, fn.lda_parent or "lda-pw92", tolerance=1e-6)
    n_in = start.density
    tau_in = kinetic_energy_density(grid, start)
    q_top = 1.5 * (start.fermi_level - start.subbands[0])
    kerker = kerker_preconditioner((grid.g ** 2).reshape(size, 1, 1),
                                   thomas_fermi_wavevector(grid.mean_density))

    def precondition(r):
        return np.concatenate([kerker(r[:size]), r[size:]])
    mixer = PulayMixer(0.5, 10, precondition)
    tau_scale = float(np.sum(tau_in) * dz)
    nodes_top = [q_top]

    def step(x):
        n, tau = x[:size], x[size:]
        v_es, _ = _electrostatic(grid, n)
        _, v_xc, v_tau = _meta_terms(fn, n, tau, grid.g, dz, vacuum_density)
        a, b = _matrices(grid, v_es + v_xc, v_tau)
        n_out, tau_out, mu, _, levels0, orbitals0, nodes_top[0] = _output(
            grid, a, b, electrons, nodes_top[0], nodes)
        residual = max(float(np.sum(np.abs(n_out - n)) * dz / electrons),
                       float(np.sum(np.abs(tau_out - tau)) * dz / tau_scale))
        return np.concatenate([n_out, tau_out]), residual, (mu, levels0, orbitals0)

    x, (mu, levels0, orbitals0), converged, history = self_consistency(
        step, np.concatenate([n_in, tau_in]), mixer, tolerance, max_iterations, log, grid,
        "meta-GGA slab")
    n_out, tau_out = x[:size], x[size:]
    v_es, e_es = _electrostatic(grid, n_out)
    e_xc, v_xc, _ = _meta_terms(fn, n_out, tau_out, grid.g, dz, vacuum_density)
    energies = _energies(float(np.sum(tau_out) * dz), e_es, e_xc)
    return SlabState(grid, fn.name, n_out, v_es, v_xc, levels0, orbitals0, mu, energies,
                     converged, len(history), history, kinetic_density=tau_out)
