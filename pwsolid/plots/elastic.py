"""Stress against strain with the fitted lines (layer 6).

:class:`StressStrainPlot` holds, for every strained Voigt component of an
:class:`~pwsolid.workflows.elastic_constants.ElasticResult`, the computed stresses (GPa)
against the applied strain (%) and the fitted polynomials: one panel per strain, the
stress components that respond drawn as dots (relaxed ions) and rings (clamped ions,
when they differ) over their fitted curves, the slope of each line written in the legend.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import HA_PER_BOHR3_GPA
from . import PALETTE, new_axes, save_and_close

__all__ = ["StressStrainPlot"]

_LABELS = ("xx", "yy", "zz", "yz", "xz", "xy")
#: Stress components whose linear change is below this share of a panel's largest one
#: are left out of it (they only say the symmetry holds; the JSON keeps them), and so
#: are clamped-ion lines closer than this to the relaxed ones.
_QUIET_SHARE = 0.03
_SILENT_GPA = 1e-3


@dataclass(frozen=True)
class StressStrainPlot:
    """Data of a stress-strain figure (GPa and percent), drawn by :meth:`plot`."""

    panels: tuple        # (component, amplitudes %, stresses (n, 6), clamped (n, 6), coef, coef_c)
    title: str = "Stress against strain"

    @classmethod
    def from_result(cls, result, title: str = "") -> "StressStrainPlot":
        from ..elasticity import stress_voigt

        ref = result.points[0]
        panels = []
        for j in result.strained_components:
            pts = [ref] + [p for p in result.points if p["strain_component"] == j + 1]
            amps = np.array([0.0 if p is ref else p["amplitude"] for p in pts]) * 100
            rel = np.array([stress_voigt(p["stress_Ha_per_bohr3"]) for p in pts])
            cl = np.array([stress_voigt(p["clamped_stress_Ha_per_bohr3"]) for p in pts])
            order = np.argsort(amps)
            panels.append((j, amps[order], rel[order] * HA_PER_BOHR3_GPA,
                           cl[order] * HA_PER_BOHR3_GPA,
                           result.relaxed.polynomials[j] * HA_PER_BOHR3_GPA,
                           result.clamped.polynomials[j] * HA_PER_BOHR3_GPA))
        return cls(tuple(panels), title or f"Stress against strain, {result.symmetry}")

    def plot(self, axes=None):
        """Draw one panel per strain (or into the given axes); returns the figure."""
        n = len(self.panels)
        if axes is None:
            fig, axes = new_axes(1, n, figsize=(3.6 * n + 0.6, 3.9), squeeze=False)
            axes = axes[0]
        fig = axes[0].figure
        for ax, (j, amps, rel, cl, coef, coef_c) in zip(axes, self.panels):
            fine = np.linspace(amps.min(), amps.max(), 60)
            # a component responds when its linear part over the strain range is visible
            linear = np.abs(coef[1]) * np.abs(amps).max() / 100
            scale = max(float(linear.max()), _SILENT_GPA)
            for i in range(6):
                if linear[i] < _QUIET_SHARE * scale:
                    continue
                colour = PALETTE[i % len(PALETTE)]
                curve = np.polynomial.polynomial.polyval(fine / 100, coef[:, i])
                slope = coef[1, i]
                ax.plot(fine, curve, color=colour, lw=1.3,
                        label=f"$\\sigma_{{{_LABELS[i]}}}$: slope {slope:.1f} GPa")
                ax.scatter(amps, rel[:, i], s=20, color=colour, zorder=3)
                if np.abs(cl[:, i] - rel[:, i]).max() > _QUIET_SHARE * scale:
                    ax.plot(fine, np.polynomial.polynomial.polyval(fine / 100, coef_c[:, i]),
                            color=colour, lw=0.9, ls=(0, (4, 3)),
                            label=f"clamped ions: slope {coef_c[1, i]:.1f} GPa")
                    ax.scatter(amps, cl[:, i], s=24, facecolors="none", edgecolors=colour,
                               zorder=3)
            ax.axhline(0.0, color="#8a8578", lw=0.6)
            ax.set_xlabel(f"strain $e_{{{_LABELS[j]}}}$ (%)")
            ax.legend(fontsize=7.5, frameon=False, loc="best")
        axes[0].set_ylabel("stress (GPa)")
        fig.suptitle(self.title, x=0.06, ha="left", fontweight="bold", fontsize=11.5)
        fig.tight_layout()
        return fig

    def save(self, stem, formats=("png", "svg")):
        """Draw a new figure and write ``stem.<format>`` for each format; returns the paths."""
        return save_and_close(self.plot(), stem, formats)
