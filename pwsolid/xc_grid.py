"""Exchange-correlation energy and potential of a density on the FFT grid (layer 3).

The one place where the SCF meets a functional: local (LDA/LSDA) functionals are
evaluated point by point; functionals that also depend on the density gradient
take their gradients here, on the FFT grid, and fold the derivative with respect to
the gradient back into the potential (``v = de/dn - div(de/d grad n)``), so that the
potential stays the functional derivative of the grid energy.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["GridExchangeCorrelation", "exchange_correlation_on_grid", "gradient_stress"]


@dataclass(frozen=True)
class GridExchangeCorrelation:
    """Energy density ``n * eps_xc`` (Ha/bohr^3, on the grid) and potential (Ha).

    ``potential`` has the shape of the density given: ``(*grid)`` unpolarised,
    ``(2, *grid)`` for (up, down).

    Gradient functionals also keep what the stress needs: ``gradients``
    ``(n_spin, 3, *grid)`` (bohr^-4), the spectral gradients of the density (up,
    down), and ``sigma_derivatives``, the fields ``de/dsigma`` (unpolarised, one) or
    ``(de/dsigma_uu, de/dsigma_ud, de/dsigma_dd)`` (polarised) in Ha bohr^5; both
    ``None`` for local functionals.

    Meta-GGAs (``functional.needs_kinetic_density``) also give ``tau_potential``,
    ``v_tau = de/dtau`` (dimensionless), of the density's shape; the Hamiltonian
    applies it as ``-1/2 div(v_tau grad psi)``.
    """

    energy_density: np.ndarray
    potential: np.ndarray
    gradients: np.ndarray | None = None
    sigma_derivatives: tuple | None = None
    tau_potential: np.ndarray | None = None   # de/dtau (meta-GGAs), shape of the density

    def energy(self, volume: float) -> float:
        """E_xc = int n eps_xc d^3r as a grid sum (Ha)."""
        return float(np.mean(self.energy_density)) * volume


def exchange_correlation_on_grid(functional, density: np.ndarray, fft=None,
                                 g_vectors: np.ndarray | None = None,
                                 kinetic_density: np.ndarray | None = None, *,
                                 energy_only: bool = False) -> GridExchangeCorrelation:
    """E_xc density and V_xc of ``density`` (``(*grid)`` or ``(2, *grid)``, bohr^-3).

    ``fft`` (a :class:`pwsolid.fft.FFTGrid`) and ``g_vectors`` (Cartesian G of the
    grid, shape ``(*grid, 3)``, bohr^-1) are needed only by gradient-dependent
    functionals (``functional.needs_gradients``).

    Notes
    -----
    For a gradient functional the gradients are spectral, ``grad n = F^-1[i G n(G)]``
    (real part), and the potential is
    ``v = de/dn - div(de/d grad n)`` with the divergence taken the same way:
    unpolarised ``de/d grad n = 2 (de/dsigma) grad n``; polarised
    ``de/d grad n_up = 2 (de/dsigma_uu) grad n_up + (de/dsigma_ud) grad n_down`` and
    likewise for down. The real part of the spectral derivative is an antisymmetric
    operator on the grid, so this ``v`` is the exact derivative of the grid sum
    ``E = (Omega/N) sum_r e(r)`` with respect to the density at each point, divided by
    ``Omega/N`` (including the grid's Nyquist planes): energy and potential agree to
    rounding.

    A meta-GGA also needs ``kinetic_density`` (tau, the density's shape, Ha bohr^-3);
    its derivative ``de/dtau`` is returned as ``tau_potential``. With ``energy_only``
    a meta-GGA returns the energy density alone (``potential`` is None): no derivatives
    are made, which is several times cheaper.
    """
    if getattr(functional, "needs_kinetic_density", False):
        return _meta_on_grid(functional, density, fft, g_vectors, kinetic_density,
                             energy_only)
    if not getattr(functional, "needs_gradients", False):
        if density.ndim == 3:
            eps, v = functional.evaluate(density)
            return GridExchangeCorrelation(density * eps, v)
        eps, v_up, v_down = functional.evaluate_polarized(density[0], density[1])
        return GridExchangeCorrelation(density.sum(axis=0) * eps, np.stack([v_up, v_down]))
    if fft is None or g_vectors is None:
        raise ValueError(f"functional '{functional.name}' depends on the density gradient: "
                         "pass the FFT grid and its G vectors")
    if density.ndim == 3:
        (grad,) = _gradients(fft, g_vectors, density[None])
        e, de_dn, de_dsigma = functional.evaluate_gradient(density, _dot(grad, grad))
        (divergence,) = _divergences(fft, g_vectors, [2.0 * de_dsigma * grad])
        return GridExchangeCorrelation(e, de_dn - divergence, grad[None], (de_dsigma,))
    grad_up, grad_down = _gradients(fft, g_vectors, density)
    e, d_up, d_down, d_uu, d_ud, d_dd = functional.evaluate_gradient_polarized(
        density[0], density[1], _dot(grad_up, grad_up), _dot(grad_up, grad_down),
        _dot(grad_down, grad_down))
    div_up, div_down = _divergences(fft, g_vectors, [
        2.0 * d_uu * grad_up + d_ud * grad_down, 2.0 * d_dd * grad_down + d_ud * grad_up])
    return GridExchangeCorrelation(e, np.stack([d_up - div_up, d_down - div_down]),
                                   np.stack([grad_up, grad_down]), (d_uu, d_ud, d_dd))


def _meta_on_grid(functional, density, fft, g_vectors, tau,
                  energy_only: bool = False) -> GridExchangeCorrelation:
    """The meta-GGA branch of :func:`exchange_correlation_on_grid`."""
    if fft is None or g_vectors is None or tau is None:
        raise ValueError(f"functional '{functional.name}' is a meta-GGA: pass the FFT grid, "
                         "its G vectors and the kinetic-energy density")
    if tau.shape != density.shape:
        raise ValueError(f"the kinetic-energy density has shape {tau.shape}, the density "
                         f"{density.shape}")
    if energy_only:
        grads = _gradients(fft, g_vectors, density if density.ndim == 4 else density[None])
        if density.ndim == 3:
            return GridExchangeCorrelation(functional.evaluate_meta_energy(
                density, _dot(grads[0], grads[0]), tau), None)
        up, down = grads
        return GridExchangeCorrelation(functional.evaluate_meta_energy(
            density[0], density[1], _dot(up, up), _dot(up, down), _dot(down, down), tau[0],
            tau[1]), None)
    if density.ndim == 3:
        (grad,) = _gradients(fft, g_vectors, density[None])
        e, de_dn, de_dsigma, de_dtau = functional.evaluate_meta(density, _dot(grad, grad), tau)
        (divergence,) = _divergences(fft, g_vectors, [2.0 * de_dsigma * grad])
        return GridExchangeCorrelation(e, de_dn - divergence, grad[None], (de_dsigma,),
                                       de_dtau)
    grad_up, grad_down = _gradients(fft, g_vectors, density)
    e, d_up, d_down, d_uu, d_ud, d_dd, t_up, t_down = functional.evaluate_meta_polarized(
        density[0], density[1], _dot(grad_up, grad_up), _dot(grad_up, grad_down),
        _dot(grad_down, grad_down), tau[0], tau[1])
    div_up, div_down = _divergences(fft, g_vectors, [
        2.0 * d_uu * grad_up + d_ud * grad_down, 2.0 * d_dd * grad_down + d_ud * grad_up])
    return GridExchangeCorrelation(e, np.stack([d_up - div_up, d_down - div_down]),
                                   np.stack([grad_up, grad_down]), (d_uu, d_ud, d_dd),
                                   np.stack([t_up, t_down]))


def _dot(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Point-wise dot product of two vector fields of shape (3, *grid)."""
    return np.einsum("a...,a...->...", a, b)


def _gradients(fft, g_vectors: np.ndarray, fields: np.ndarray) -> list[np.ndarray]:
    """Spectral gradients (3, *grid) of a stack of real fields (n_fields, *grid)."""
    coefficients = fft.to_reciprocal(fields.astype(complex))
    g = np.moveaxis(g_vectors, -1, 0)
    derivatives = fft.to_real((1j * g[None] * coefficients[:, None]).reshape(
        -1, *fields.shape[1:])).real
    return list(derivatives.reshape(len(fields), 3, *fields.shape[1:]))


def _divergences(fft, g_vectors: np.ndarray, vectors: list[np.ndarray]) -> list[np.ndarray]:
    """Spectral divergences (*grid) of vector fields, each of shape (3, *grid)."""
    stack = np.stack(vectors)
    shape = stack.shape
    coefficients = fft.to_reciprocal(stack.reshape(-1, *shape[2:]).astype(complex))
    g = np.moveaxis(g_vectors, -1, 0)
    summed = np.einsum("fa...,a...->f...", coefficients.reshape(shape), 1j * g)
    return list(fft.to_real(summed).real)


def gradient_stress(xc: GridExchangeCorrelation) -> np.ndarray:
    """Gradient part of the exchange-correlation stress (3, 3), Ha/bohr^3.

    Notes
    -----
    A strain eps changes the gradient invariants beyond their scaling with the
    density: d|grad n|^2 / d eps_ab = -2 |grad n|^2 delta_ab - 2 d_a n d_b n. The uniform part
    belongs to the diagonal term (E_xc - int v_xc n) delta_ab / Omega; what is left is

        sigma_ab = -(1/Omega) int [2 e_uu d_a n_up d_b n_up
                                   + e_ud (d_a n_up d_b n_dn + d_a n_dn d_b n_up)
                                   + 2 e_dd d_a n_dn d_b n_dn] d^3r,

    e_xy = de/dsigma_xy (unpolarised: -(1/Omega) int 2 (de/dsigma) d_a n d_b n), a grid
    mean here. Zero for a local functional.

    References
    ----------
    O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780 (1985) (the stress theorem);
    the gradient term as in A. Dal Corso and R. Resta, Phys. Rev. B 50, 4327 (1994)
    (from memory).
    """
    if xc.gradients is None:
        return np.zeros((3, 3))

    def outer(a, b, weight):
        return np.einsum("ag,bg,g->ab", a.reshape(3, -1), b.reshape(3, -1),
                         weight.reshape(-1)) / weight.size

    if len(xc.gradients) == 1:
        (grad,), (d,) = xc.gradients, xc.sigma_derivatives
        return -2.0 * outer(grad, grad, d)
    up, down = xc.gradients
    d_uu, d_ud, d_dd = xc.sigma_derivatives
    cross = outer(up, down, d_ud)
    return -(2.0 * outer(up, up, d_uu) + cross + cross.T + 2.0 * outer(down, down, d_dd))
