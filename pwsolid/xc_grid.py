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

__all__ = ["GridExchangeCorrelation", "exchange_correlation_on_grid"]


@dataclass(frozen=True)
class GridExchangeCorrelation:
    """Energy density ``n * eps_xc`` (Ha/bohr^3, on the grid) and potential (Ha).

    ``potential`` has the shape of the density given: ``(*grid)`` unpolarised,
    ``(2, *grid)`` for (up, down).
    """

    energy_density: np.ndarray
    potential: np.ndarray

    def energy(self, volume: float) -> float:
        """E_xc = int n eps_xc d^3r as a grid sum (Ha)."""
        return float(np.mean(self.energy_density)) * volume


def exchange_correlation_on_grid(functional, density: np.ndarray, fft=None,
                                 g_vectors: np.ndarray | None = None) -> GridExchangeCorrelation:
    """E_xc density and V_xc of ``density`` (``(*grid)`` or ``(2, *grid)``, bohr^-3).

    ``fft`` (a :class:`pwsolid.fft.FFTGrid`) and ``g_vectors`` (Cartesian G of the
    grid, shape ``(*grid, 3)``, bohr^-1) are needed only by gradient-dependent
    functionals.
    """
    if density.ndim == 3:
        eps, v = functional.evaluate(density)
        return GridExchangeCorrelation(density * eps, v)
    eps, v_up, v_down = functional.evaluate_polarized(density[0], density[1])
    return GridExchangeCorrelation(density.sum(axis=0) * eps, np.stack([v_up, v_down]))
