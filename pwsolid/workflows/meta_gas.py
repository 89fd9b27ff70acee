"""Meta-GGA tables of the uniform-gas testbench: alpha and s as axes (layer 5).

:func:`meta_dependence` tabulates, for a meta-GGA, the exchange enhancement factor
``F_x(s, alpha) = e_x / e_x^unif`` (spin-unpolarised; independent of the density by
uniform scaling) and the correlation energy per electron ``eps_c(rs, s, alpha)`` at a
few Wigner-Seitz radii, both spin-unpolarised and fully polarised, over grids of the
reduced gradient s and the iso-orbital indicator alpha (alpha = 0: one orbital,
tau = tau_W; alpha = 1: uniform-gas-like; alpha >> 1: overlapping closed shells).
The testbench report carries it as ``meta`` (:mod:`pwsolid.workflows.uniform_gas`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..xc import density_from_radius, functional_parts
from ..xc.meta_conditions import meta_grid_point

__all__ = ["MetaDependence", "meta_dependence", "META_TABLE_S", "META_TABLE_ALPHA",
           "META_TABLE_RS"]

Array = NDArray[np.float64]

#: Reduced gradients of the tables.
META_TABLE_S: tuple[float, ...] = (0.0, 0.25, 0.5, 1.0, 1.5, 2.0, 3.0)
#: Iso-orbital indicators of the tables.
META_TABLE_ALPHA: tuple[float, ...] = (0.0, 0.25, 0.5, 0.75, 1.0, 1.5, 2.0, 3.0, 5.0)
#: Wigner-Seitz radii (bohr) of the correlation tables.
META_TABLE_RS: tuple[float, ...] = (1.0, 5.0)
_EXCHANGE_RS = 2.0
# dense axes for the plots (not written to the document)
_CURVE_ALPHA = np.linspace(0.0, 5.0, 201)
_CURVE_S = np.linspace(0.0, 3.0, 121)


def _finite(values: Array) -> list:
    return np.where(np.isfinite(values), values, np.nan).tolist()


@dataclass(frozen=True)
class MetaDependence:
    """Tables of a meta-GGA against s and alpha (``[s][alpha]`` layout).

    ``exchange_enhancement`` (n_s, n_alpha) or None without an exchange part;
    ``correlation`` (n_rs, 2 polarisations zeta = 0, 1, n_s, n_alpha), Ha, or None;
    the ``curve_*`` arrays are the same on dense axes for plots.
    """

    s: Array
    alpha: Array
    rs: Array
    exchange_enhancement: Array | None
    correlation: Array | None
    curve_alpha: Array
    curve_s: Array
    curve_exchange: Array | None          # (n_s, n_curve_alpha)
    curve_correlation: Array | None       # (n_alpha, n_curve_s) at rs[0], zeta = 0

    def as_document(self) -> dict:
        c = self.correlation
        return {
            "reduced_gradient_s": self.s.tolist(),
            "iso_orbital_alpha": self.alpha.tolist(),
            "exchange_enhancement": None if self.exchange_enhancement is None
            else _finite(self.exchange_enhancement),
            "exchange_layout": "exchange_enhancement[s][alpha], spin-unpolarised",
            "correlation_rs_bohr": self.rs.tolist(),
            "correlation_mHa": None if c is None else _finite(1e3 * c),
            "correlation_layout": "correlation_mHa[rs][zeta = 0, 1][s][alpha]",
        }


def _exchange_table(exchange, s: Array, alpha: Array) -> Array:
    ss, aa = np.meshgrid(s, alpha, indexing="ij")
    n = np.full(ss.shape, density_from_radius(_EXCHANGE_RS))
    args = meta_grid_point(n, np.zeros_like(n), ss, aa)
    e = exchange.evaluate_meta_polarized(*args)[0]
    return e / (-0.75 * (3.0 / math.pi) ** (1.0 / 3.0) * n ** (4.0 / 3.0))


def _correlation_table(correlation, rs_values, zetas, s: Array, alpha: Array) -> Array:
    rs, zeta, ss, aa = np.meshgrid(rs_values, zetas, s, alpha, indexing="ij")
    n = density_from_radius(rs)
    return correlation.evaluate_meta_polarized(*meta_grid_point(n, zeta, ss, aa))[0] / n


def meta_dependence(functional) -> MetaDependence | None:
    """The tables of a meta-GGA (None for other functionals)."""
    if not getattr(functional, "needs_kinetic_density", False):
        return None
    parts = functional_parts(functional)
    exchange = parts.exchange if getattr(parts.exchange, "needs_kinetic_density",
                                         False) else None
    correlation = parts.correlation if getattr(parts.correlation, "needs_kinetic_density",
                                               False) else None
    s, alpha, rs = (np.array(v, float) for v in (META_TABLE_S, META_TABLE_ALPHA,
                                                  META_TABLE_RS))
    with np.errstate(all="ignore"):
        fx = None if exchange is None else _exchange_table(exchange, s, alpha)
        curve_x = None if exchange is None else _exchange_table(exchange, s, _CURVE_ALPHA)
        ec = None if correlation is None else _correlation_table(correlation, rs, [0.0, 1.0],
                                                                 s, alpha)
        # rows alpha, columns the dense s axis, at rs[0] and zeta = 0
        curve_c = None if correlation is None else _correlation_table(
            correlation, rs[:1], [0.0], _CURVE_S, alpha)[0, 0].T.copy()
    return MetaDependence(s, alpha, rs, fx, ec, _CURVE_ALPHA, _CURVE_S, curve_x, curve_c)
