"""A jellium slab: the 1-D Kohn-Sham problem of a positive background with vacuum (layer 5).

A slab of uniform positive background (density ``n_bar = 3 / (4 pi r_s^3)``) of
thickness ``L`` sits in the middle of a periodic cell of length ``c = L + vacuum``
along z; it is infinite and uniform in x and y. The Kohn-Sham orbitals factor as
``exp(i k_par . r_par) psi_j(z)`` with energies ``eps_j + k_par^2 / 2``, so the
in-plane directions are free electrons and are integrated exactly: subband ``j``
below the Fermi level ``mu`` holds ``(mu - eps_j) / pi`` electrons per unit area
(both spins, the 2-D density of states ``1 / (2 pi)`` per spin) and an in-plane
kinetic energy ``(mu - eps_j)^2 / (2 pi)`` per unit area. Only the 1-D equation

    [-1/2 d^2/dz^2 + v_es(z) + v_xc(z)] psi_j = eps_j psi_j

is solved, in plane waves ``exp(i G z)`` up to a kinetic cutoff (Gamma point along z:
the vacuum decouples the images). This is the standard exact treatment of the jellium
slab in Kohn-Sham theory (N. D. Lang and W. Kohn, Phys. Rev. B 1, 4555 (1970) for the
semi-infinite case); nothing is approximated beyond the basis, the grid and the slab.

Energies are per unit area (Ha / bohr^2). The neutral, mirror-symmetric slab has no
dipole, so the periodic Hartree problem along z (G = 0 dropped) is exact.

The background's Fourier coefficients are the exact ones of the sharp step, so a
derivative of the energy with respect to the slab thickness is the Hellmann-Feynman
sum ``n_bar [phi(edge) + mu]`` over both edges (``phi`` the electrostatic potential of
the total charge): :func:`edge_force` gives it for the checks.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import fft as _fft

from ..errors import ConvergenceWarning, InputError
from ..parallel import single_threaded_blas
from ..mixing import PulayMixer, kerker_preconditioner, thomas_fermi_wavevector
from ..xc import get_functional

__all__ = ["SlabGrid", "SlabState", "slab_grid", "solve_slab", "fermi_wavevector",
           "uniform_density", "bulk_energy_per_electron", "kinetic_energy_density",
           "edge_force"]


def uniform_density(rs: float) -> float:
    """n = 3 / (4 pi r_s^3) (bohr^-3)."""
    return 3.0 / (4.0 * math.pi * rs ** 3)


def fermi_wavevector(rs: float) -> float:
    """k_F = (9 pi / 4)^(1/3) / r_s (1/bohr)."""
    return (9.0 * math.pi / 4.0) ** (1.0 / 3.0) / rs


def bulk_energy_per_electron(rs: float, functional) -> dict:
    """Kinetic, exchange-correlation and total energy per electron of the uniform gas (Ha).

    The exchange-correlation part is the functional at zero gradient (and, for a
    meta-GGA, at the uniform kinetic-energy density), i.e. its uniform-gas limit.
    """
    fn = get_functional(functional)
    n = uniform_density(rs)
    kinetic = 0.3 * fermi_wavevector(rs) ** 2
    eps_xc = float(fn.evaluate(np.array([n]))[0][0])
    return {"kinetic": kinetic, "exchange_correlation": eps_xc, "total": kinetic + eps_xc}


@dataclass(frozen=True)
class SlabGrid:
    """Fixed set-up of one slab: the cell, the plane waves, the grid and the background.

    Attributes
    ----------
    rs, thickness, vacuum, cutoff : float
        Background r_s (bohr), slab thickness and vacuum width (bohr), kinetic cutoff (Ha).
    length : float
        Cell length c = thickness + vacuum (bohr); the slab spans c/2 -+ thickness/2.
    z : (M,) float64, bohr
        Grid points i c / M.
    g : (M,) float64, 1/bohr
        Grid wave numbers in numpy FFT order.
    wave_index : (P,) int
        Grid indices (numpy FFT order) of the P plane waves of the orbitals.
    background : (M,) complex128
        Fourier coefficients (1/c) int n_+(z) exp(-i g z) dz of the sharp slab, exact.
    """

    rs: float
    thickness: float
    vacuum: float
    cutoff: float
    length: float
    z: np.ndarray = field(repr=False)
    g: np.ndarray = field(repr=False)
    wave_index: np.ndarray = field(repr=False)
    background: np.ndarray = field(repr=False)

    @property
    def mean_density(self) -> float:
        return uniform_density(self.rs)

    @property
    def electrons_per_area(self) -> float:
        return self.mean_density * self.thickness

    @property
    def spacing(self) -> float:
        return self.length / self.z.size

    @property
    def edges(self) -> tuple[float, float]:
        return 0.5 * (self.length - self.thickness), 0.5 * (self.length + self.thickness)

    def background_profile(self) -> np.ndarray:
        """The background on the grid as the band-limited Fourier series (bohr^-3)."""
        return np.real(np.fft.ifft(self.background) * self.z.size)


def slab_grid(rs: float, thickness: float, vacuum: float, cutoff: float) -> SlabGrid:
    """Build the fixed set-up of a slab (see :class:`SlabGrid`).

    The grid holds every wave vector of the density (twice the orbitals' largest).
    """
    for name, value in (("rs", rs), ("thickness", thickness), ("vacuum", vacuum),
                        ("cutoff", cutoff)):
        if not (math.isfinite(value) and value > 0):
            raise InputError("must be a positive number", key=name, value=value)
    length = thickness + vacuum
    g_max = math.sqrt(2.0 * cutoff)
    m_max = int(math.floor(g_max * length / (2 * math.pi)))
    size = _fft.next_fast_len(4 * m_max + 2)
    g = 2 * math.pi * np.fft.fftfreq(size, d=length / size)
    m = np.rint(g * length / (2 * math.pi)).astype(int)
    wave_index = np.flatnonzero(np.abs(m) <= m_max)
    n_bar = uniform_density(rs)
    # (1/c) int_{c/2-L/2}^{c/2+L/2} n e^{-igz} dz = (n/c) e^{-igc/2} 2 sin(gL/2)/g
    half = 0.5 * thickness
    safe = np.where(g == 0, 1.0, g)
    coeff = np.where(g == 0, n_bar * thickness / length,
                     n_bar / length * 2 * np.sin(safe * half) / safe)
    background = coeff * np.exp(-0.5j * g * length)
    z = np.arange(size) * length / size
    return SlabGrid(float(rs), float(thickness), float(vacuum), float(cutoff), length, z, g,
                    wave_index, background)


@dataclass(frozen=True)
class SlabState:
    """The self-consistent slab: density, potentials, subbands and energies per area.

    Energies in Ha/bohr^2 (per unit area of the slab, both surfaces); potentials in Ha;
    densities in bohr^-3. ``electrostatic`` is the electron's potential energy
    ``-phi`` (zero mean over the cell).
    """

    grid: SlabGrid = field(repr=False)
    functional: str
    density: np.ndarray = field(repr=False)
    electrostatic: np.ndarray = field(repr=False)
    xc_potential: np.ndarray = field(repr=False)
    subbands: np.ndarray = field(repr=False)     # occupied eps_j (Ha)
    orbitals: np.ndarray = field(repr=False)     # (j, M) complex psi_j(z), int |psi|^2 = 1
    fermi_level: float
    energies: dict
    converged: bool
    iterations: int
    history: tuple = field(repr=False)
    #: tau(z) when the solver computed it (the meta-GGA slab); None: from the subbands
    kinetic_density: np.ndarray | None = field(default=None, repr=False)

    @property
    def occupations(self) -> np.ndarray:
        """Electrons per unit area in each occupied subband, (mu - eps_j) / pi."""
        return (self.fermi_level - self.subbands) / math.pi

    def potential_at(self, z: float) -> float:
        """The electrostatic energy of an electron at z from the Fourier series (Ha)."""
        coeff = np.fft.fft(self.electrostatic) / self.grid.z.size
        return float(np.real(np.sum(coeff * np.exp(1j * self.grid.g * z))))


def _xc_terms(fn, density: np.ndarray, g: np.ndarray, dz: float):
    """Exchange-correlation energy per area and potential of a 1-D profile.

    For a gradient functional sigma = (dn/dz)^2 and v = de/dn - d/dz(2 de/dsigma dn/dz),
    derivatives by FFT.
    """
    n = np.maximum(density, 0.0)
    if not fn.needs_gradients:
        eps, v = fn.evaluate(n)
        return float(np.sum(n * eps) * dz), v
    grad = np.real(np.fft.ifft(1j * g * np.fft.fft(n)))
    e, de_dn, de_dsigma = fn.evaluate_gradient(n, grad * grad)
    flux = np.real(np.fft.ifft(1j * g * np.fft.fft(2.0 * de_dsigma * grad)))
    return float(np.sum(e) * dz), de_dn - flux


def _fermi_level(eps: np.ndarray, electrons: float) -> tuple[float, int]:
    """mu with sum_j max(mu - eps_j, 0) / pi = electrons; eps ascending."""
    partial = np.cumsum(eps)
    for k in range(1, eps.size + 1):
        mu = (math.pi * electrons + partial[k - 1]) / k
        if k == eps.size or mu <= eps[k]:
            return mu, k
    raise AssertionError("unreachable")


def _parity(grid: SlabGrid) -> np.ndarray:
    """exp(i G c/2) = (-1)^m for the orbitals' plane waves."""
    m = np.rint(grid.g[grid.wave_index] * grid.length / (2 * math.pi)).astype(int)
    return np.where(m % 2 == 0, 1.0, -1.0)


def _hamiltonian(grid: SlabGrid, potential: np.ndarray) -> np.ndarray:
    """Dense H_{GG'} = G^2/2 delta + V(G - G') in plane waves exp(i G (z - c/2)).

    The mirror-symmetric slab has a real potential even about c/2, whose Fourier
    coefficients in the centred frame, V(G) exp(i G c/2), are real: H is real symmetric
    (the imaginary rounding residue is dropped).
    """
    size = grid.z.size
    vg = np.fft.fft(potential) / size
    idx = grid.wave_index
    diff = (idx[:, None] - idx[None, :]) % size
    sign = _parity(grid)
    h = np.real(vg[diff]) * np.outer(sign, sign)
    h[np.diag_indices_from(h)] += 0.5 * grid.g[idx] ** 2
    return h


def _electrostatic(grid: SlabGrid, density: np.ndarray) -> tuple[np.ndarray, float]:
    """Electron potential energy 4 pi (n - n_+)(G)/G^2 on the grid and E_es per area."""
    size = grid.z.size
    q = np.fft.fft(density) / size - grid.background
    g2 = grid.g ** 2
    vg = np.zeros_like(q)
    vg[1:] = 4 * math.pi * q[1:] / g2[1:]
    energy = 0.5 * grid.length * float(np.real(np.sum(vg[1:] * np.conj(q[1:]))))
    return np.real(np.fft.ifft(vg) * size), energy


def _subbands(grid: SlabGrid, potential: np.ndarray):
    with single_threaded_blas():
        eps, vecs = np.linalg.eigh(_hamiltonian(grid, potential))
    mu, k = _fermi_level(eps, grid.electrons_per_area)
    # back from the centred frame: c_G = c'_G exp(-i G c/2)
    return eps[:k], vecs[:, :k].T * _parity(grid), mu


def _orbitals(grid: SlabGrid, coefficients: np.ndarray) -> np.ndarray:
    """psi_j(z) on the grid, (j, M), normalised to int |psi|^2 dz = 1."""
    size = grid.z.size
    block = np.zeros((coefficients.shape[0], size), complex)
    block[:, grid.wave_index] = coefficients
    return np.fft.ifft(block, axis=1) * size / math.sqrt(grid.length)


def _initial_density(grid: SlabGrid) -> np.ndarray:
    a, b = grid.edges
    width = 0.5 / fermi_wavevector(grid.rs)
    z = grid.z
    profile = 1.0 / (1 + np.exp((a - z) / width)) / (1 + np.exp((z - b) / width))
    return profile * grid.electrons_per_area / (np.sum(profile) * grid.spacing)


def kinetic_energy_density(grid: SlabGrid, state: "SlabState") -> np.ndarray:
    """tau(z) = 1/2 sum_i f_i |grad phi_i|^2 of the 3-D orbitals, per spin summed (Ha/bohr^3).

    Notes
    -----
    Subband j contributes (mu - eps_j)/pi |psi_j'|^2 / 2 from the z motion and
    (mu - eps_j)^2/(2 pi) |psi_j|^2 from the in-plane free-electron disc
    (sum over k_par of k_par^2/2 for both spins). A meta-GGA slab, whose subbands do
    not separate, carries its own tau (``state.kinetic_density``).
    """
    if state.kinetic_density is not None:
        return state.kinetic_density
    w = state.fermi_level - state.subbands
    size = grid.z.size
    coeff = np.fft.fft(state.orbitals, axis=1) / size
    dpsi = np.fft.ifft(1j * grid.g * coeff, axis=1) * size
    along = np.sum((w / math.pi)[:, None] * 0.5 * np.abs(dpsi) ** 2, axis=0)
    across = np.sum((w ** 2 / (2 * math.pi))[:, None] * np.abs(state.orbitals) ** 2, axis=0)
    return along + across


def solve_slab(grid: SlabGrid, functional="lda-pw92", *, tolerance: float = 1e-10,
               max_iterations: int = 300, initial_density: np.ndarray | None = None,
               log=None) -> SlabState:
    """Self-consistent Kohn-Sham jellium slab (see the module notes).

    Parameters
    ----------
    grid : SlabGrid
    functional : str or Functional
        Any registered functional (or ``file:...``); a meta-GGA is handed to
        :func:`.jellium_slab_meta.solve_meta_slab`.
    tolerance : float
        Stop when int |n_out - n_in| dz / N falls below it.
    initial_density : (M,) float64 or None
        A start (e.g. a neighbouring slab's density interpolated); a smooth
        step otherwise.

    Returns
    -------
    SlabState
        ``converged`` False (with a ``ConvergenceWarning``) after ``max_iterations``.
    """
    fn = get_functional(functional)
    if getattr(fn, "needs_kinetic_density", False):
        from .jellium_slab_meta import solve_meta_slab   # it builds on this module

        return solve_meta_slab(grid, fn, tolerance=tolerance, max_iterations=max_iterations,
                               log=log)
    size, dz = grid.z.size, grid.spacing
    n_in = _initial_density(grid) if initial_density is None else np.array(initial_density)
    k0 = thomas_fermi_wavevector(grid.mean_density)
    mixer = PulayMixer(0.5, 10, kerker_preconditioner((grid.g ** 2).reshape(size, 1, 1), k0))
    electrons = grid.electrons_per_area

    def step(n):
        v_es, _ = _electrostatic(grid, n)
        _, v_xc = _xc_terms(fn, n, grid.g, dz)
        eps, coeff, mu = _subbands(grid, v_es + v_xc)
        psi = _orbitals(grid, coeff)
        n_out = np.sum(((mu - eps) / math.pi)[:, None] * np.abs(psi) ** 2, axis=0)
        return n_out, float(np.sum(np.abs(n_out - n)) * dz / electrons), (eps, coeff, psi, mu)

    density, (eps, coeff, psi, mu), converged, history = self_consistency(
        step, n_in, mixer, tolerance, max_iterations, log, grid, "slab")
    v_es, e_es = _electrostatic(grid, density)
    e_xc, v_xc = _xc_terms(fn, density, grid.g, dz)
    w = mu - eps
    kinetic_z = float(np.sum((w / math.pi) * np.sum(0.5 * grid.g[grid.wave_index] ** 2
                                                     * np.abs(coeff) ** 2, axis=1)))
    kinetic = kinetic_z + float(np.sum(w ** 2) / (2 * math.pi))
    return SlabState(grid, fn.name, density, v_es, v_xc, eps, psi, mu,
                     _energies(kinetic, e_es, e_xc), converged, len(history), history)


def _energies(kinetic: float, electrostatic: float, xc: float) -> dict:
    return {"kinetic": kinetic, "electrostatic": electrostatic, "exchange_correlation": xc,
            "total": kinetic + electrostatic + xc}


def self_consistency(step, x_in, mixer, tolerance: float, max_iterations: int, log,
                     grid: SlabGrid, label: str):
    """Drive ``step(x) -> (x_out, residual, extra)`` to its fixed point with ``mixer``.

    Returns ``(x_out, extra, converged, history)`` of the last step; warns with a
    ``ConvergenceWarning`` after ``max_iterations`` steps without ``residual < tolerance``.
    """
    import warnings

    history = []
    for it in range(1, max_iterations + 1):
        x_out, residual, extra = step(x_in)
        history.append(residual)
        if log is not None:
            log(f"{label} iteration {it}: residual {residual:.3e}")
        if residual < tolerance:
            return x_out, extra, True, tuple(history)
        x_in = mixer.mix(x_in, x_out)
    warnings.warn(f"jellium {label} (r_s {grid.rs:g}, thickness {grid.thickness:.3g} bohr) "
                  f"not converged after {max_iterations} iterations (residual "
                  f"{history[-1]:.2e})", ConvergenceWarning, stacklevel=3)
    return x_out, extra, False, tuple(history)


def edge_force(state: SlabState) -> float:
    """n_bar [phi(a) + phi(b) + 2 mu], the Hellmann-Feynman dE/dL of the slab (Ha/bohr^3).

    ``phi = -electrostatic`` is the potential of the total charge; the thickness grows
    by dL/2 at each edge, adding background and, at the Fermi level, electrons.
    """
    a, b = state.grid.edges
    phi = -(state.potential_at(a) + state.potential_at(b))
    return 0.5 * state.grid.mean_density * (phi + 2 * state.fermi_level)
