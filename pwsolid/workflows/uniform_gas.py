"""Uniform-electron-gas testbench for exchange-correlation functionals (layer 5).

:func:`uniform_gas_table` tabulates exchange, correlation and their sum per electron
for several functionals on a grid of Wigner-Seitz radii and spin polarisations;
:func:`testbench_report` puts one functional beside reference parametrisations and
the Ceperley-Alder quantum Monte Carlo energies (D. M. Ceperley and B. J. Alder,
Phys. Rev. Lett. 45, 566 (1980), from a secondary transcription of their table) and
runs the exact-condition checks of :mod:`pwsolid.xc.conditions`. Both results have
``as_document()`` for JSON (schema :data:`TESTBENCH_SCHEMA`).

No self-consistent calculation is involved: the uniform gas is fully described by
its density, so each functional is simply evaluated at ``n = 3 / (4 pi rs^3)``. A
functional that depends on the density gradient is tabulated in this uniform-gas
(zero-gradient) limit; its report adds :class:`GradientDependence`, the exchange
enhancement factor against the reduced gradient s and the correlation gradient term
against t, and the gradient conditions of :mod:`pwsolid.xc.conditions`. A meta-GGA's
gradient tables are its slice alpha = 1, and its report adds the tables against s and
alpha of :mod:`pwsolid.workflows.meta_gas` and the meta-GGA conditions.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterable, Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError
from ..units import HARTREE_EV
from ..xc import (CEPERLEY_ALDER_1980, ConditionResult, Functional, check_exact_conditions,
                  density_from_radius, functional_parts, get_functional)
from ..xc.gga import correlation_gradient_squared, reduced_gradient_squared
from .meta_gas import meta_dependence

__all__ = [
    "TESTBENCH_SCHEMA",
    "DEFAULT_RS",
    "DEFAULT_ZETA",
    "DEFAULT_REFERENCES",
    "UniformGasTable",
    "MonteCarloComparison",
    "GradientDependence",
    "UniformGasReport",
    "uniform_gas_table",
    "testbench_report",
]

Array = NDArray[np.float64]

#: Schema name and version of :meth:`UniformGasReport.as_document`.
TESTBENCH_SCHEMA = "pwsolid.xc-testbench/1"
#: Wigner-Seitz radii (bohr) of the report's table.
DEFAULT_RS: tuple[float, ...] = (0.5, 1.0, 2.0, 3.0, 5.0, 10.0, 20.0, 50.0, 100.0)
#: Spin polarisations of the report's table.
DEFAULT_ZETA: tuple[float, ...] = (0.0, 0.5, 1.0)
#: Reference parametrisations a functional is compared with by default.
DEFAULT_REFERENCES: tuple[str, ...] = ("lda-pw92", "lda-vwn")

# Dense grids kept in the report for plots (not written to the document).
_CURVE_RS = np.geomspace(0.1, 100.0, 121)
_CURVE_ZETA = (0.0, 1.0)
_ZETA_CURVE_RS = (1.0, 10.0)
_ZETA_CURVE_ZETA = np.linspace(0.0, 1.0, 41)
# Gradient dependence of a gradient functional (unpolarised): reduced gradients s of
# exchange at rs = 2 (F_x does not depend on rs for the spin-scaled forms), and t of
# correlation at the rs of the spin curves.
_GRADIENT_S = np.linspace(0.0, 5.0, 101)
_GRADIENT_T = np.geomspace(1e-2, 1e2, 81)
_GRADIENT_RS = (1.0, 10.0)
_EXCHANGE_RS = 2.0


def _finite_or_none(values: ArrayLike):
    """Nested lists with NaN (not available) as None, for JSON."""
    array = np.asarray(values, dtype=np.float64)
    if array.ndim == 0:
        return float(array) if np.isfinite(array) else None
    return [_finite_or_none(v) for v in array]


@dataclass(frozen=True)
class UniformGasTable:
    """Energies per electron of the uniform gas for several functionals.

    Attributes
    ----------
    functionals : tuple of str
        Names, in the order of the first axis.
    descriptions : tuple of str
    rs : ndarray, float64, (n_rs,), bohr
    zeta : ndarray, float64, (n_zeta,)
    exchange, correlation, total : ndarray, float64, (n_functionals, n_rs, n_zeta), Ha
        eps_x, eps_c and eps_xc. NaN where a functional has no spin-polarised form
        and zeta is not 0.
    exchange_assumed : tuple of bool
        True where the functional exposes no parts, so that its exchange was taken
        to be Slater's and its correlation is eps_xc minus that.
    """

    functionals: tuple[str, ...]
    descriptions: tuple[str, ...]
    rs: Array
    zeta: Array
    exchange: Array = field(repr=False)
    correlation: Array = field(repr=False)
    total: Array = field(repr=False)
    exchange_assumed: tuple[bool, ...]

    def index(self, name: str) -> int:
        """Position of functional ``name`` on the first axis."""
        return self.functionals.index(name)

    def in_ev(self, quantity: str) -> Array:
        """``"exchange"``, ``"correlation"`` or ``"total"`` in eV."""
        return getattr(self, quantity) * HARTREE_EV

    def as_document(self) -> dict:
        """Plain data: grids and energies in Ha and eV (None where not available)."""
        doc = {"functionals": list(self.functionals),
               "descriptions": list(self.descriptions),
               "exchange_assumed_slater": list(self.exchange_assumed),
               "rs_bohr": self.rs.tolist(), "zeta": self.zeta.tolist(),
               "layout": "[functional][rs][zeta]"}
        for quantity in ("exchange", "correlation", "total"):
            doc[f"{quantity}_Ha"] = _finite_or_none(getattr(self, quantity))
            doc[f"{quantity}_eV"] = _finite_or_none(self.in_ev(quantity))
        return doc


def _energies(functional: Functional, rs: Array,
              zeta: Array) -> tuple[Array, Array, Array, bool]:
    """eps_x, eps_c, eps_xc on the (rs, zeta) grid, NaN where no polarised form."""
    parts = functional_parts(functional)
    shape = (rs.size, zeta.size)
    r, z = np.meshgrid(rs, zeta, indexing="ij")
    n = density_from_radius(r)
    up, down = 0.5 * n * (1.0 + z), 0.5 * n * (1.0 - z)
    out = []
    for part in (parts.exchange, parts.correlation, functional):
        values = np.full(shape, np.nan)
        if part is None:
            values[:] = 0.0
        elif part.has_spin_polarized_form:
            values = part.evaluate_polarized(up, down)[0]
        else:
            unpolarized = z == 0.0
            values[unpolarized] = part.evaluate(n[unpolarized])[0]
        out.append(values)
    return out[0], out[1], out[2], parts.exchange_assumed


def uniform_gas_table(functionals: Iterable[str | Functional], rs_values: ArrayLike,
                      zeta_values: ArrayLike = (0.0,)) -> UniformGasTable:
    """Exchange, correlation and total per electron of the uniform gas.

    Parameters
    ----------
    functionals : iterable of str or Functional
        Anything :func:`pwsolid.xc.get_functional` accepts.
    rs_values : array_like, bohr
        Positive Wigner-Seitz radii.
    zeta_values : array_like
        Spin polarisations in [0, 1] (the gas is symmetric under zeta -> -zeta).

    Returns
    -------
    UniformGasTable

    Raises
    ------
    pwsolid.errors.InputError
        For an unknown functional, a non-positive rs or a zeta outside [0, 1].
    """
    resolved = [get_functional(f) for f in functionals]
    if not resolved:
        raise InputError("give at least one functional", key="functionals")
    rs = np.atleast_1d(np.asarray(rs_values, dtype=np.float64))
    zeta = np.atleast_1d(np.asarray(zeta_values, dtype=np.float64))
    if rs.ndim != 1 or not np.all(np.isfinite(rs)) or np.any(rs <= 0.0):
        raise InputError("Wigner-Seitz radii must be positive numbers (bohr)", key="rs",
                         value=rs_values, has_value=True)
    if zeta.ndim != 1 or not np.all((zeta >= 0.0) & (zeta <= 1.0)):
        raise InputError("spin polarisations must lie in [0, 1]", key="zeta",
                         value=zeta_values, has_value=True)
    columns = [_energies(f, rs, zeta) for f in resolved]
    return UniformGasTable(
        functionals=tuple(f.name for f in resolved),
        descriptions=tuple(f.description for f in resolved),
        rs=rs, zeta=zeta,
        exchange=np.stack([c[0] for c in columns]),
        correlation=np.stack([c[1] for c in columns]),
        total=np.stack([c[2] for c in columns]),
        exchange_assumed=tuple(c[3] for c in columns))


@dataclass(frozen=True)
class MonteCarloComparison:
    """A functional's correlation against one Ceperley-Alder point (all Ha)."""

    rs: float
    zeta: float
    monte_carlo: float
    monte_carlo_error: float
    functional: float | None

    @property
    def difference(self) -> float | None:
        """Functional minus Monte Carlo (Ha); None without a polarised form."""
        return None if self.functional is None else self.functional - self.monte_carlo

    def as_dict(self) -> dict:
        diff = self.difference
        return {"rs_bohr": self.rs, "zeta": self.zeta,
                "monte_carlo_mHa": 1e3 * self.monte_carlo,
                "monte_carlo_error_mHa": 1e3 * self.monte_carlo_error,
                "functional_mHa": None if self.functional is None else 1e3 * self.functional,
                "difference_mHa": None if diff is None else 1e3 * diff}


@dataclass(frozen=True)
class GradientDependence:
    """How a gradient functional departs from its uniform-gas limit (unpolarised).

    Attributes
    ----------
    s : ndarray, float64, (n_s,)
        Reduced density gradients ``|grad n| / (2 kF n)``.
    exchange_enhancement : ndarray, float64, (n_s,) or None
        ``F_x(s) = e_x(n, grad n) / e_x(n, 0)`` at rs = 2 bohr; None without a
        gradient-dependent exchange part.
    rs : ndarray, float64, (n_rs,), bohr
    t : ndarray, float64, (n_t,)
        Correlation reduced gradients ``|grad n| / (2 phi ks n)``.
    correlation_gradient_term : ndarray, float64, (n_rs, n_t), Ha, or None
        ``H = eps_c(n, grad n) - eps_c(n, 0)``; None without a gradient-dependent
        correlation part.
    local_correlation : ndarray, float64, (n_rs,), Ha
        ``eps_c(n, 0)`` at each rs (H -> -eps_c as t -> infinity).
    """

    s: Array
    exchange_enhancement: Array | None
    rs: Array
    t: Array
    correlation_gradient_term: Array | None
    local_correlation: Array | None

    def as_document(self) -> dict:
        term = self.correlation_gradient_term
        return {
            "exchange_at_rs_bohr": _EXCHANGE_RS,
            "reduced_gradient_s": self.s.tolist(),
            "exchange_enhancement": None if self.exchange_enhancement is None
            else _finite_or_none(self.exchange_enhancement),
            "correlation_rs_bohr": self.rs.tolist(),
            "correlation_reduced_gradient_t": self.t.tolist(),
            "correlation_gradient_term_mHa": None if term is None
            else _finite_or_none(1e3 * term),
            "local_correlation_mHa": None if self.local_correlation is None
            else _finite_or_none(1e3 * self.local_correlation),
            "layout": "correlation_gradient_term_mHa[rs][t]"}


def _gradient_dependence(functional: Functional) -> GradientDependence | None:
    if not functional.needs_gradients:
        return None
    parts = functional_parts(functional)
    enhancement = None
    if parts.exchange is not None and parts.exchange.needs_gradients:
        n = np.full(_GRADIENT_S.shape, density_from_radius(_EXCHANGE_RS))
        sigma = _GRADIENT_S ** 2 / reduced_gradient_squared(n, np.ones_like(n))
        enhancement = (parts.exchange.evaluate_gradient(n, sigma)[0]
                       / parts.exchange.evaluate_gradient(n, np.zeros_like(n))[0])
    term = local = None
    if parts.correlation is not None and parts.correlation.needs_gradients:
        rs, t = np.meshgrid(_GRADIENT_RS, _GRADIENT_T, indexing="ij")
        n = density_from_radius(rs)
        sigma = t ** 2 / correlation_gradient_squared(n, np.zeros_like(n), np.ones_like(n))
        local_2d = parts.correlation.evaluate_gradient(n, np.zeros_like(n))[0] / n
        term = parts.correlation.evaluate_gradient(n, sigma)[0] / n - local_2d
        local = local_2d[:, 0]
    return GradientDependence(_GRADIENT_S, enhancement, np.array(_GRADIENT_RS), _GRADIENT_T,
                              term, local)


@dataclass(frozen=True)
class UniformGasReport:
    """One functional on the uniform-gas testbench.

    Attributes
    ----------
    functional : Functional
    references : tuple of str
        Names of the functionals it is compared with.
    table : UniformGasTable
        The functional first, then the references, on the report's rs and zeta.
    differences : dict of str to ndarray, (n_rs, n_zeta), Ha
        eps_c of the functional minus eps_c of each reference.
    monte_carlo : tuple of MonteCarloComparison
    conditions : tuple of ConditionResult
    curves, zeta_curves : UniformGasTable
        Dense tables for plots: rs from 0.1 to 100 at zeta 0 and 1; zeta from 0 to 1
        at rs 1 and 10.
    gradient : GradientDependence or None
        For a functional that needs gradients (the tables are its zero-gradient
        limit); None for a local functional.
    """

    functional: Functional
    references: tuple[str, ...]
    table: UniformGasTable
    differences: dict[str, Array] = field(repr=False)
    monte_carlo: tuple[MonteCarloComparison, ...] = field(repr=False)
    conditions: tuple[ConditionResult, ...] = field(repr=False)
    curves: UniformGasTable = field(repr=False)
    zeta_curves: UniformGasTable = field(repr=False)
    gradient: GradientDependence | None = field(default=None, repr=False)
    meta: object | None = field(default=None, repr=False)   # meta_gas.MetaDependence

    @property
    def failed_conditions(self) -> tuple[str, ...]:
        """Names of the exact conditions that failed."""
        return tuple(c.name for c in self.conditions if c.passed is False)

    def monte_carlo_summary(self) -> dict:
        """Largest and root-mean-square |difference| to the QMC data (mHa) per zeta."""
        summary = {}
        for zeta in sorted({p.zeta for p in self.monte_carlo}):
            diffs = [p.difference for p in self.monte_carlo
                     if p.zeta == zeta and p.difference is not None]
            if diffs:
                d = 1e3 * np.abs(np.array(diffs))
                summary[f"zeta={zeta:g}"] = {"max_abs_mHa": float(d.max()),
                                             "rms_mHa": float(np.sqrt(np.mean(d ** 2))),
                                             "points": len(diffs)}
        return summary

    def as_document(self) -> dict:
        """The report as plain data (JSON-ready; dense plot curves left out)."""
        f = self.functional
        document = {
            "schema": TESTBENCH_SCHEMA,
            "functional": {"name": f.name, "description": f.description,
                           "origin": f.origin,
                           "spin_polarized": f.has_spin_polarized_form,
                           "needs_gradients": f.needs_gradients,
                           "needs_kinetic_density": bool(getattr(f, "needs_kinetic_density",
                                                                 False)),
                           "lda_parent": f.lda_parent},
            "references": list(self.references),
            "table": self.table.as_document(),
            "correlation_differences_mHa": {
                name: _finite_or_none(1e3 * d) for name, d in self.differences.items()},
            "monte_carlo": {
                "source": "D. M. Ceperley and B. J. Alder, Phys. Rev. Lett. 45, 566 (1980); "
                          "secondary transcription of their table",
                "points": [p.as_dict() for p in self.monte_carlo],
                "summary": self.monte_carlo_summary()},
            "exact_conditions": [c.as_dict() for c in self.conditions],
            "failed_conditions": list(self.failed_conditions),
        }
        if self.gradient is not None:
            document["table"]["gradient"] = "zero (uniform-gas limit)"
            document["gradient_dependence"] = self.gradient.as_document()
        if self.meta is not None:
            document["table"]["gradient"] = "zero, alpha = 1 (uniform-gas limit)"
            document["gradient_dependence"]["slice"] = "alpha = 1 (tau = tau_W + tau_unif)"
            document["meta_dependence"] = self.meta.as_document()
        return document


def _monte_carlo(functional: Functional) -> tuple[MonteCarloComparison, ...]:
    has_correlation = functional_parts(functional).correlation is not None
    points = []
    for point in CEPERLEY_ALDER_1980:
        value = None
        if has_correlation:
            _, correlation, _, _ = _energies(functional, np.array([point.rs]),
                                             np.array([point.zeta]))
            value = float(correlation[0, 0]) if np.isfinite(correlation[0, 0]) else None
        points.append(MonteCarloComparison(point.rs, point.zeta, point.correlation,
                                           point.correlation_error, value))
    return tuple(points)


def testbench_report(functional: str | Functional,
                     compare_with: Sequence[str | Functional] = DEFAULT_REFERENCES, *,
                     rs_values: ArrayLike = DEFAULT_RS,
                     zeta_values: ArrayLike = DEFAULT_ZETA) -> UniformGasReport:
    """Put a functional on the uniform-gas testbench.

    Parameters
    ----------
    functional : str or Functional
        Anything :func:`pwsolid.xc.get_functional` accepts (a name, ``"file:..."``).
    compare_with : sequence of str or Functional
        Reference parametrisations; the functional itself is left out if listed.
    rs_values : array_like, bohr
        Wigner-Seitz radii of the table.
    zeta_values : array_like
        Spin polarisations of the table, in [0, 1].

    Returns
    -------
    UniformGasReport
        The table, the correlation differences to each reference, the comparison
        with the Ceperley-Alder data and the exact-condition results. A failed
        condition is part of the report, not an error.
    """
    subject = get_functional(functional)
    references = [r for r in (get_functional(c) for c in compare_with)
                  if r.name != subject.name]
    everything = [subject, *references]
    table = uniform_gas_table(everything, rs_values, zeta_values)
    differences = {r.name: table.correlation[0] - table.correlation[i + 1]
                   for i, r in enumerate(references)}
    return UniformGasReport(
        functional=subject,
        references=tuple(r.name for r in references),
        table=table,
        differences=differences,
        monte_carlo=_monte_carlo(subject),
        conditions=tuple(check_exact_conditions(subject)),
        curves=uniform_gas_table(everything, _CURVE_RS, _CURVE_ZETA),
        zeta_curves=uniform_gas_table(everything, _ZETA_CURVE_RS, _ZETA_CURVE_ZETA),
        gradient=_gradient_dependence(subject),
        meta=meta_dependence(subject))


# Its name starts with "test": keep test collectors from taking it for a test.
testbench_report.__test__ = False
