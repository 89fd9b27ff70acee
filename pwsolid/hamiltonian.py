"""The Kohn-Sham Hamiltonian in a plane-wave basis (layer 3).

H = -1/2 nabla^2 + V_eff(r) with V_eff = V_loc + V_H + V_xc local (plus, for a
meta-GGA, the generalised Kohn-Sham term -1/2 div(v_tau grad)). The kinetic
part is diagonal in plane waves; the potential is applied on the FFT grid:
psi(r) = sum_G c_G e^{iGr} -> V_eff(r) psi(r) -> back to the basis sphere, all
bands of a block in one batched transform.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .basis import PlaneWaveSet, grid_g_vectors
from .fft import FFTGrid

__all__ = ["KPointHamiltonian", "local_potential", "core_density", "structure_factors",
           "superposed_density", "kinetic_preconditioner"]


def structure_factors(fractional_positions: np.ndarray, miller: np.ndarray) -> np.ndarray:
    """S(G) = sum_atoms exp(-i G . tau) for Miller indices of shape (..., 3)."""
    phase = -2j * np.pi * (miller @ np.asarray(fractional_positions, float).T)
    return np.exp(phase).sum(axis=-1)


def local_potential(lattice: np.ndarray, fractional_positions: np.ndarray, species, forms: dict,
                    grid_shape) -> np.ndarray:
    """Fourier coefficients of the ionic local potential on the FFT grid.

    Parameters
    ----------
    lattice : (3, 3) bohr
    fractional_positions : (n_atoms, 3)
    species : sequence of str, one per atom
    forms : mapping species -> object with ``form_factor(q)`` and ``g0_integral``
    grid_shape : 3 ints

    Returns
    -------
    ndarray (*grid_shape) complex, Ha
        V_loc(G) = (1/Omega) sum_s v_s(|G|) S_s(G); the G = 0 entry holds
        (1/Omega) sum_atoms w_s(0), the finite non-Coulomb average (the Coulomb
        G = 0 part cancels against Hartree and Ewald in a neutral cell).
    """
    return _species_sum(lattice, fractional_positions, species, grid_shape,
                        lambda s, q: _with_g0(forms[s].form_factor(q), forms[s].g0_integral))


def core_density(lattice: np.ndarray, fractional_positions: np.ndarray, species, cores: dict,
                 grid_shape) -> np.ndarray | None:
    """Fourier coefficients of the crystal's model core density, or None without one.

    ``cores`` maps species to a :class:`pwsolid.pseudo.PartialCore` or None;
    n_c(G) = (1/Omega) sum_s n_c,s(|G|) S_s(G), bohr^-3.
    """
    if not any(cores.get(s) is not None for s in species):
        return None
    return _species_sum(lattice, fractional_positions, species, grid_shape,
                        lambda s, q: (cores[s].form_factor(q) if cores.get(s) is not None
                                      else np.zeros_like(q)))


def superposed_density(lattice: np.ndarray, fractional_positions: np.ndarray, species,
                       forms: dict, grid_shape) -> np.ndarray:
    """Superposition of spherical atomic densities on the real-space FFT grid.

    Parameters
    ----------
    lattice : (3, 3) bohr
    fractional_positions : (n_atoms, 3)
    species : sequence of str, one per atom
    forms : mapping species -> object with ``form_factor(q)``, the Fourier transform
        int n_s(r) e^{-i q.r} d^3r (electrons) of that species' density
    grid_shape : 3 ints

    Returns
    -------
    ndarray (*grid_shape) float64, bohr^-3
        n(r) = sum_G n(G) e^{iG.r}, n(G) = (1/Omega) sum_s n_s(|G|) S_s(G), on the
        grid points r = sum_i (j_i / N_i) a_i; it integrates to sum_atoms n_s(0).

    Notes
    -----
    Components beyond the grid's frequencies are dropped, so a density narrower
    than the grid spacing is smoothed, not aliased.
    """
    coef = _species_sum(lattice, fractional_positions, species, grid_shape,
                        lambda s, q: forms[s].form_factor(q))
    return np.fft.ifftn(coef).real * coef.size


def _with_g0(form_factor: np.ndarray, g0: float) -> np.ndarray:
    form_factor[0, 0, 0] = g0
    return form_factor


def _species_sum(lattice, fractional_positions, species, grid_shape, factor) -> np.ndarray:
    """(1/Omega) sum_s factor(s, |G|) S_s(G) on the FFT grid."""
    from .basis import grid_miller_indices

    volume = abs(np.linalg.det(lattice))
    q = np.linalg.norm(grid_g_vectors(lattice, grid_shape), axis=-1)
    m = grid_miller_indices(grid_shape)
    species = list(species)
    pos = np.asarray(fractional_positions, float)
    v = np.zeros(tuple(grid_shape), dtype=complex)
    for s in dict.fromkeys(species):
        sel = [i for i, x in enumerate(species) if x == s]
        v += factor(s, q) * structure_factors(pos[sel], m)
    return v / volume


def kinetic_preconditioner(kinetic: np.ndarray, total=None):
    """Teter-Payne-Allan preconditioner for residual rows of a plane-wave block.

    Notes
    -----
    K(x) = (27 + 18x + 12x^2 + 8x^3) / (27 + 18x + 12x^2 + 8x^3 + 16x^4), with
    x = |k+G|^2/2 divided by the kinetic energy of the residual itself; it is
    1 for slow plane waves and falls as 1/(8x) ... for fast ones.

    When the plane waves are spread over processes, ``kinetic`` holds this
    process's and ``total`` sums the residuals' kinetic energies and norms over
    the processes (see :func:`pwsolid.eigensolver.davidson`).

    References
    ----------
    M. P. Teter, M. C. Payne and D. C. Allan, Phys. Rev. B 40, 12255 (1989).
    """
    kin = np.asarray(kinetic, float)

    def apply(residuals: np.ndarray, ritz_values: np.ndarray) -> np.ndarray:
        # real arithmetic and in-place polynomial: two (nb, n_pw) float scratch arrays
        r2 = np.square(residuals.real)
        r2 += np.square(residuals.imag)
        sums = np.empty((2, len(r2)))
        np.matmul(r2, kin, out=sums[0])
        r2.sum(axis=1, out=sums[1])
        if total is not None:
            sums = total(sums)
        ekin = sums[0] / np.maximum(sums[1], 1e-300)
        x = np.divide(kin[None, :], np.maximum(ekin, 1e-3)[:, None])
        p = np.multiply(x, 8.0)
        p += 12
        p *= x
        p += 18
        p *= x
        p += 27
        x4 = np.square(x, out=r2)
        x4 *= x4
        x4 *= 16
        x4 += p
        p /= x4
        return residuals * p

    return apply


@dataclass(frozen=True, eq=False)
class KPointHamiltonian:
    """H at one k-point for a fixed effective potential.

    Attributes
    ----------
    basis : PlaneWaveSet
    fft : FFTGrid
    potential : (*grid_shape) float, Ha
        V_eff(r) on the grid.
    """

    basis: PlaneWaveSet
    fft: FFTGrid
    potential: np.ndarray
    projectors: np.ndarray | None = None   # (n_proj, n_pw) complex, see pseudo.separable
    coupling: np.ndarray | None = None     # (n_proj, n_proj) float, Ha
    tau_potential: np.ndarray | None = None   # v_tau(r) of a meta-GGA (dimensionless)
    tau_laplacian: np.ndarray | None = None   # its Laplacian on the grid, bohr^-2

    @cached_property
    def _prepared_potential(self) -> np.ndarray:
        if self.tau_potential is not None:
            return self.fft.prepare_potential(self.potential + 0.25 * self.tau_laplacian)
        return self.fft.prepare_potential(self.potential)

    @cached_property
    def _prepared_tau(self) -> np.ndarray:
        return self.fft.prepare_potential(self.tau_potential)

    def apply(self, block: np.ndarray) -> np.ndarray:
        """H applied to rows of ``block`` (nb, n_pw) -> (nb, n_pw).

        With a meta-GGA's ``tau_potential`` the generalised Kohn-Sham term
        ``-1/2 div(v_tau grad psi)`` is added (:meth:`pwsolid.fft.FFTGrid.apply_prepared_meta`).
        """
        if self.tau_potential is not None:
            vpsi = self.fft.apply_prepared_meta(block, self.basis.grid_index,
                                                self._prepared_potential, self._prepared_tau,
                                                2.0 * self.basis.kinetic)
        else:
            vpsi = self.fft.apply_prepared_potential(block, self.basis.grid_index,
                                                     self._prepared_potential)
        vpsi += self.basis.kinetic[None, :] * block
        if self.projectors is not None and len(self.projectors):
            # all atoms and bands at once: two BLAS-3 products
            proj = block @ self.projectors.conj().T
            vpsi += (proj @ self.coupling.T) @ self.projectors
        return vpsi

    def dense_matrix(self) -> np.ndarray:
        """Explicit H_{GG'} = |k+G|^2/2 delta + V(G - G') (tests and tiny bases only)."""
        shape = np.array(self.fft.shape)
        v_g = self.fft.field_to_reciprocal(self.potential)
        dm = (self.basis.miller[:, None, :] - self.basis.miller[None, :, :]) % shape
        h = v_g[dm[..., 0], dm[..., 1], dm[..., 2]]
        h[np.diag_indices_from(h)] += self.basis.kinetic
        if self.tau_potential is not None:
            # (1/2) (k+G).(k+G') v_tau(G - G'): the gradient form of -1/2 div(v_tau grad)
            vt = self.fft.field_to_reciprocal(self.tau_potential)
            h += 0.5 * (self.basis.kpg @ self.basis.kpg.T) * vt[dm[..., 0], dm[..., 1],
                                                                 dm[..., 2]]
        if self.projectors is not None and len(self.projectors):
            h += self.projectors.T @ self.coupling @ self.projectors.conj()
        return h
