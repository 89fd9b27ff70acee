"""How the results change with cutoff and k-point mesh (layer 6).

:class:`ConvergencePlot` draws a
:class:`~pwsolid.workflows.convergence.ConvergenceStudy`: one column for the
cutoff series and one for the mesh series; in the first row the size of the
energy change per atom against the most expensive setting (log scale), and when
the study scanned volumes, rows for the change of the lattice constant (log
scale) and of the bulk modulus (per cent). The requested precision is a dashed
line and the recommended setting a shaded band. The reference setting has no
change by construction and is marked on the axis instead of plotted.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import BOHR_ANGSTROM, HARTREE_EV
from . import PALETTE, new_axes, save_figure

__all__ = ["ConvergencePlot"]


_INK = "#2b2f36"


@dataclass(frozen=True)
class _Series:
    x: np.ndarray            # cutoff (Ha), or the position of a mesh in its series
    labels: tuple            # tick labels
    energy: np.ndarray       # |dE| meV/atom
    lattice: np.ndarray | None   # |da| 1e-3 angstrom
    bulk: np.ndarray | None      # dB0/B0 in per cent
    recommended: int


@dataclass(frozen=True)
class ConvergencePlot:
    """Data of a convergence figure (meV/atom, milli-angstrom, per cent)."""

    cutoff: _Series
    mesh: _Series
    energy_precision: float            # meV/atom
    lattice_precision: float | None    # milli-angstrom
    title: str = "Convergence of the settings"

    @classmethod
    def from_study(cls, study, title: str = "") -> "ConvergencePlot":
        def series(points, x, labels, best):
            lat = None
            bulk = None
            if study.with_lattice:
                lat = np.array([np.nan if p.lattice_change is None
                                else abs(p.lattice_change) * BOHR_ANGSTROM * 1e3 for p in points])
                bulk = np.array([np.nan if p.bulk_modulus_change is None
                                 else 100.0 * p.bulk_modulus_change for p in points])
            return _Series(np.asarray(x, float), tuple(labels),
                           np.array([abs(p.energy_change) * HARTREE_EV * 1e3 for p in points]),
                           lat, bulk, best)

        cuts = study.cutoff_series
        meshes = study.mesh_series
        i_cut = [p.cutoff for p in cuts].index(study.recommended_cutoff)
        i_mesh = [p.mesh for p in meshes].index(tuple(study.recommended_mesh))
        return cls(
            cutoff=series(cuts, [p.cutoff for p in cuts], [f"{p.cutoff:g}" for p in cuts], i_cut),
            # meshes sit at even steps (their cost rises much faster than linearly)
            mesh=series(meshes, list(range(len(meshes))),
                        ["x".join(map(str, p.mesh)) for p in meshes], i_mesh),
            energy_precision=study.energy_precision * HARTREE_EV * 1e3,
            lattice_precision=(None if study.lattice_precision is None
                               else study.lattice_precision * BOHR_ANGSTROM * 1e3),
            title=title or "Convergence of the settings")

    def plot(self, axes=None):
        """Draw into an (n_rows, 2) array of axes or a new figure; returns the figure."""
        rows = 3 if self.cutoff.lattice is not None else 1
        if axes is None:
            fig, axes = new_axes(rows, 2, sharex="col", squeeze=False,
                                 figsize=(8.2, 2.6 + 2.1 * (rows - 1)),
                                 gridspec_kw={"hspace": 0.12, "wspace": 0.28})
        else:
            axes = np.asarray(axes).reshape(rows, 2)
            fig = axes[0, 0].figure
        for col, (s, colour, xlabel) in enumerate((
                (self.cutoff, PALETTE[0], "cutoff (Ha)"),
                (self.mesh, PALETTE[1], "k-point mesh"))):
            panels = [(s.energy, "|ΔE| (meV/atom)", self.energy_precision, True)]
            if rows == 3:
                panels += [(s.lattice, "|Δa| (mÅ)", self.lattice_precision, True),
                           (s.bulk, "ΔB0 / B0 (%)", None, False)]
            for row, (values, ylabel, precision, log) in enumerate(panels):
                ax = axes[row, col]
                self._panel(ax, s, values, colour, precision, log,
                            top=row == 0, bottom=row == len(panels) - 1)
                if col == 0:
                    ax.set_ylabel(ylabel)
            bottom = axes[rows - 1, col]
            bottom.set_xlabel(xlabel)
            bottom.set_xticks(s.x)
            bottom.set_xticklabels(s.labels, rotation=0 if col == 0 else 30)
            axes[0, col].set_title("energy cutoff" if col == 0 else "Brillouin-zone sampling",
                                   loc="left")
        fig.suptitle(self.title, x=0.07, ha="left", fontweight="bold", fontsize=11.5)
        return fig

    @staticmethod
    def _panel(ax, s: _Series, values, colour, precision, log, top, bottom):
        ref = len(s.x) - 1
        x = s.x[:ref]
        y = np.asarray(values, float)[:ref]
        span = np.ptp(s.x) if len(s.x) > 1 else 1.0
        half = 0.035 * span
        rx = s.x[s.recommended]
        ax.axvspan(rx - half, rx + half, color="#e7dfc6", zorder=0, lw=0)
        if log:
            # changes far below the precision are rounding, not convergence: not drawn
            floor = 1e-6 * (precision if precision is not None else 1.0)
            shown = np.isfinite(y) & (y > floor)
            ax.set_yscale("log")
            ax.plot(x[shown], y[shown], marker="o", ms=4.5, color=colour, zorder=3)
            if not np.any(shown):
                ax.text(0.5, 0.5, "no change beyond rounding", transform=ax.transAxes,
                        ha="center", va="center", fontsize=8, color="#8a8477")
            if precision is not None:
                ax.axhline(precision, color=_INK, ls=(0, (5, 3)), lw=1.0, zorder=2)
                ax.text(0.01, precision, "requested", transform=ax.get_yaxis_transform(),
                        ha="left", va="bottom", fontsize=7.5, color=_INK)
        else:
            # a linear axis can show the reference itself (zero change)
            y_all = np.asarray(values, float)
            shown = np.isfinite(y_all)
            ax.plot(s.x[shown], y_all[shown], marker="o", ms=4.5, color=colour, zorder=3)
            ax.axhline(0.0, color=_INK, lw=0.8, zorder=2)
            # at least +-1 %, so rounding-size changes look flat rather than magnified
            lo = min(float(np.nanmin(y_all)) if np.any(shown) else 0.0, -1.0)
            hi = max(float(np.nanmax(y_all)) if np.any(shown) else 0.0, 1.0)
            ax.set_ylim(lo - 0.08 * (hi - lo), hi + 0.08 * (hi - lo))
        ax.plot([s.x[ref]], [0.0], marker="^", ms=6, color="#8a8477", clip_on=False,
                transform=ax.get_xaxis_transform(), zorder=4)
        if bottom:
            ax.annotate("reference", xy=(s.x[ref], 0.0), xycoords=("data", "axes fraction"),
                        xytext=(0, 4), textcoords="offset points", ha="center", va="bottom",
                        fontsize=7.5, color="#8a8477")
        if top:
            ax.annotate("recommended", xy=(rx, 0.97), xycoords=("data", "axes fraction"),
                        ha="center", va="top", rotation=90, fontsize=7.5, color="#7a6a3a")

    def save(self, stem, formats=("png", "svg")):
        """Draw a new figure and write ``stem.<format>`` for each format; returns the paths."""
        fig = self.plot()
        try:
            return save_figure(fig, stem, formats)
        finally:
            import matplotlib.pyplot as plt

            plt.close(fig)
