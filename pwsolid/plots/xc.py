"""Plots of the uniform-electron-gas testbench (layer 6).

:class:`UniformGasPlot` draws three panels from a
:class:`~pwsolid.workflows.uniform_gas.UniformGasReport`:

1. the correlation energy per electron against rs (log axis) for the functional
   under test (thick line) and its references, at zeta = 0 (solid) and 1 (dashed),
   with the Ceperley-Alder quantum Monte Carlo points (filled: zeta = 0, open:
   zeta = 1);
2. the differences of the functional to each reference and to the Monte Carlo
   points, in mHa;
3. the spin dependence eps_c(zeta) / eps_c(0) at rs = 1 (solid) and rs = 10 (dashed);
4. only for a functional that depends on the density gradient (whose panels 1-3 show
   its uniform-gas limit): the exchange enhancement factor F_x against s, and
   the correlation gradient term as a fraction -H / eps_c of the local correlation
   against t, at rs = 1 (solid) and 10 (dashed), on a second axis.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import _INK, PALETTE, _pyplot, house_style, new_axes, save_figure

__all__ = ["UniformGasPlot"]

_LINE_STYLES = ("-", "--", ":", "-.")


def _legend(ax, key: str, **kwargs) -> None:
    """Legend whose title is the line-style key of the panel."""
    legend = ax.legend(fontsize=8, title=key, title_fontsize=8, **kwargs)
    legend.get_title().set_color(_INK)


@dataclass(frozen=True)
class UniformGasPlot:
    """Correlation curves, differences and spin dependence of a testbench report.

    Build it with :meth:`from_report` (alias :meth:`from_result`); draw with
    :meth:`plot`; write PNG and SVG with :meth:`save`.
    """

    report: object

    @classmethod
    def from_report(cls, report) -> "UniformGasPlot":
        """From a :class:`~pwsolid.workflows.uniform_gas.UniformGasReport`."""
        return cls(report)

    from_result = from_report

    @property
    def n_panels(self) -> int:
        """3, or 4 for a functional that depends on the density gradient."""
        return 3 if getattr(self.report, "gradient", None) is None else 4

    def plot(self, ax=None):
        """Draw the panels; ``ax`` is a sequence of :attr:`n_panels` axes or None.

        Returns the figure.
        """
        plt = _pyplot()
        count = self.n_panels
        with plt.rc_context(house_style()):
            if ax is None:
                fig, axes = new_axes(1, count, figsize=(14.0 * count / 3, 4.4))
            else:
                axes = list(ax)
                if len(axes) != count:
                    raise ValueError(f"UniformGasPlot.plot needs {count} axes")
                fig = axes[0].figure
            self._curves(axes[0])
            self._differences(axes[1])
            self._spin(axes[2])
            if count == 4:
                self._gradient(axes[3])
            fig.suptitle(f"Uniform electron gas: {self.report.functional.name}",
                         color=_INK, fontweight="bold", fontsize=12)
            fig.tight_layout()
        return fig

    def save(self, stem, formats=("png", "svg")) -> list[Path]:
        """Draw and write ``stem.png`` and ``stem.svg``; return the paths."""
        fig = self.plot()
        try:
            return save_figure(fig, stem, formats)
        finally:
            _pyplot().close(fig)

    # -- panels ----------------------------------------------------------------------

    def _colour(self, i: int) -> str:
        return PALETTE[i % len(PALETTE)]

    def _curves(self, ax) -> None:
        curves = self.report.curves
        for i, name in enumerate(curves.functionals):
            width = 2.4 if i == 0 else 1.3
            for j, zeta in enumerate(curves.zeta):
                values = 1e3 * curves.correlation[i, :, j]
                if not np.any(np.isfinite(values)):
                    continue
                ax.plot(curves.rs, values, _LINE_STYLES[j % 4], color=self._colour(i),
                        lw=width, label=name if j == 0 else None, zorder=3 if i == 0 else 2)
        for zeta, marker, face in ((0.0, "o", _INK), (1.0, "s", "none")):
            points = [p for p in self.report.monte_carlo if p.zeta == zeta]
            if points:
                ax.errorbar([p.rs for p in points], [1e3 * p.monte_carlo for p in points],
                            yerr=[1e3 * p.monte_carlo_error for p in points], fmt=marker,
                            ms=5, mfc=face, mec=_INK, ecolor=_INK, elinewidth=0.8,
                            label=f"Ceperley-Alder QMC, zeta = {zeta:g}", zorder=4)
        ax.set_xscale("log")
        ax.set_xlabel("Wigner-Seitz radius rs (bohr)")
        ax.set_ylabel("correlation energy per electron (mHa)")
        ax.set_title("Correlation energy", loc="left", fontweight="bold")
        _legend(ax, "solid: zeta = 0, dashed: zeta = 1", loc="lower right")

    def _differences(self, ax) -> None:
        curves = self.report.curves
        ax.axhline(0.0, color=_INK, lw=0.8)
        for i, name in enumerate(curves.functionals[1:], start=1):
            for j, zeta in enumerate(curves.zeta):
                diff = 1e3 * (curves.correlation[0, :, j] - curves.correlation[i, :, j])
                if not np.any(np.isfinite(diff)):
                    continue
                ax.plot(curves.rs, diff, _LINE_STYLES[j % 4], color=self._colour(i), lw=1.4,
                        label=f"minus {name}" if j == 0 else None)
        for zeta, marker, face in ((0.0, "o", _INK), (1.0, "s", "none")):
            points = [p for p in self.report.monte_carlo
                      if p.zeta == zeta and p.difference is not None]
            if points:
                ax.errorbar([p.rs for p in points], [1e3 * p.difference for p in points],
                            yerr=[1e3 * p.monte_carlo_error for p in points], fmt=marker,
                            ms=5, mfc=face, mec=_INK, ecolor=_INK, elinewidth=0.8,
                            label=f"minus QMC, zeta = {zeta:g}", zorder=4)
        ax.set_xscale("log")
        ax.set_xlabel("Wigner-Seitz radius rs (bohr)")
        ax.set_ylabel(f"{self.report.functional.name} minus other (mHa)")
        ax.set_title("Differences in the correlation energy", loc="left", fontweight="bold")
        _legend(ax, "solid: zeta = 0, dashed: zeta = 1")

    def _spin(self, ax) -> None:
        curves = self.report.zeta_curves
        for i, name in enumerate(curves.functionals):
            width = 2.4 if i == 0 else 1.3
            for k, rs in enumerate(curves.rs):
                eps = curves.correlation[i, k, :]
                if not np.all(np.isfinite(eps)) or eps[0] == 0.0:
                    continue
                ax.plot(curves.zeta, eps / eps[0], _LINE_STYLES[k % 4], color=self._colour(i),
                        lw=width, label=name if k == 0 else None)
        ax.set_xlabel("spin polarisation zeta")
        ax.set_ylabel("eps_c(zeta) / eps_c(0)")
        ax.set_title("Spin dependence of correlation", loc="left", fontweight="bold")
        ax.set_xlim(0.0, 1.0)
        _legend(ax, ", ".join(f"{style}: rs = {rs:g}" for style, rs in
                              zip(("solid", "dashed", "dotted", "dash-dot"), curves.rs)),
                loc="lower left")

    def _gradient(self, ax) -> None:
        gradient = self.report.gradient
        if gradient.exchange_enhancement is not None:
            ax.plot(gradient.s, gradient.exchange_enhancement, "-", color=self._colour(0),
                    lw=2.4, label="exchange F_x(s)")
        ax.set_xlabel("reduced gradient s (exchange) and t (correlation)")
        ax.set_ylabel("exchange enhancement F_x")
        ax.set_title("Gradient dependence", loc="left", fontweight="bold")
        if gradient.correlation_gradient_term is not None:
            twin = ax.twinx()
            inside = gradient.t <= gradient.s.max()
            for k, rs in enumerate(gradient.rs):
                fraction = -gradient.correlation_gradient_term[k] / gradient.local_correlation[k]
                twin.plot(gradient.t[inside], fraction[inside], _LINE_STYLES[(k + 1) % 4],
                          color=self._colour(1), lw=1.4, label=f"correlation, rs = {rs:g}")
            twin.set_ylabel("-H / eps_c (1: correlation cancelled)")
            twin.set_ylim(0.0, 1.05)
            _legend(twin, "correlation", loc="center right")
        _legend(ax, "exchange", loc="lower right")
