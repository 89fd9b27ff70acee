"""Plots of a meta-GGA on the uniform-gas testbench: alpha and s as axes (layer 6).

:class:`MetaGasPlot` draws two panels from a testbench report whose functional is a
meta-GGA (:class:`~pwsolid.workflows.meta_gas.MetaDependence`):

1. the exchange enhancement factor F_x against the iso-orbital indicator alpha, one
   line per reduced gradient s (spin-unpolarised);
2. the correlation energy per electron at rs = 1 bohr (zeta = 0) against s, one line
   per alpha.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from . import _INK, PALETTE, _pyplot, house_style, new_axes, save_figure

__all__ = ["MetaGasPlot"]

_LINE_STYLES = ("-", "--", ":", "-.")


@dataclass(frozen=True)
class MetaGasPlot:
    """F_x(alpha) per s and eps_c(s) per alpha of a meta-GGA testbench report."""

    report: object

    @classmethod
    def from_report(cls, report) -> "MetaGasPlot":
        """From a :class:`~pwsolid.workflows.uniform_gas.UniformGasReport` with ``meta``."""
        if getattr(report, "meta", None) is None:
            raise ValueError("the report's functional is not a meta-GGA")
        return cls(report)

    def plot(self, ax=None):
        """Draw both panels (``ax``: two axes or None); returns the figure."""
        plt = _pyplot()
        meta = self.report.meta
        with plt.rc_context(house_style()):
            if ax is None:
                fig, axes = new_axes(1, 2, figsize=(10.0, 4.4))
            else:
                axes = list(ax)
                fig = axes[0].figure
            left, right = axes
            if meta.curve_exchange is not None:
                for i, s in enumerate(meta.s):
                    left.plot(meta.curve_alpha, meta.curve_exchange[i],
                              _LINE_STYLES[i % 4], color=PALETTE[i % len(PALETTE)],
                              label=f"s = {s:g}")
                left.axvline(1.0, color=_INK, lw=0.6, alpha=0.4)
                left.legend(fontsize=8)
            left.set_xlabel("iso-orbital indicator alpha")
            left.set_ylabel("exchange enhancement F_x")
            left.set_title("exchange (alpha = 1: uniform-gas-like)", fontsize=10)
            if meta.curve_correlation is not None:
                for i, a in enumerate(meta.alpha):
                    right.plot(meta.curve_s, 1e3 * meta.curve_correlation[i],
                               _LINE_STYLES[i % 4], color=PALETTE[i % len(PALETTE)],
                               label=f"alpha = {a:g}")
                right.legend(fontsize=8, ncol=2)
            right.set_xlabel("reduced gradient s")
            right.set_ylabel("eps_c (mHa), rs = %g bohr, zeta = 0" % meta.rs[0])
            right.set_title("correlation", fontsize=10)
            fig.suptitle(f"Meta-GGA dependence on alpha and s: {self.report.functional.name}",
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
