"""Phonon dispersion and density-of-states figure (layer 6).

:class:`PhononPlot` draws the branches against the path distance in the house
style: acoustic branches (the three lowest) and optical ones in two palette
colours, thin rules at the special points, hatched strips at path jumps, a
shaded strip below zero when there are imaginary (unstable) modes, optional
reference points (e.g. measured frequencies) as open markers, and the density
of states in a side panel sharing the frequency axis. A right-hand axis gives
the same scale in cm^-1. matplotlib is imported only when drawing.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..units import THZ_INVERSE_CM
from . import PALETTE, _pyplot, house_style, new_axes, save_and_close

__all__ = ["PhononPlot"]

_RULE = "#a49e90"
_HATCH = "#cfc8b8"
_ACOUSTIC, _OPTICAL, _MARK = PALETTE[0], PALETTE[1], PALETTE[4]
_BREAK_FRACTION = 0.04


@dataclass(frozen=True, eq=False)
class PhononPlot:
    """A dispersion (THz) along a path, with an optional DOS panel.

    Attributes
    ----------
    x : ndarray (n_path,)
        Plot abscissa (path distance, with strips inserted at jumps).
    frequencies : ndarray (n_path, n_modes), THz
    ticks : list of (x, label)
    pieces : list of (start, stop) index ranges drawn as continuous lines
    dos : (frequencies THz, states per THz) or None
    references : dict label -> list of THz, drawn at the label's tick
    """

    x: np.ndarray
    frequencies: np.ndarray
    ticks: list
    pieces: list
    dos: tuple | None = None
    references: dict = field(default_factory=dict)
    title: str = ""
    strips: list = field(default_factory=list)

    @classmethod
    def from_result(cls, result, *, title: str = "", references=None) -> "PhononPlot":
        path = result.path
        x = np.array(path.distance, float)
        gap = _BREAK_FRACTION * (x[-1] if x[-1] > 0 else 1.0)
        breaks = list(path.breaks)
        strips = []
        for b in breaks:                      # widen each jump into a hatched strip
            x[b:] += gap
            strips.append((x[b - 1], x[b]))
        starts = [0, *breaks]
        stops = [*breaks, len(x)]
        labels: dict[float, list[str]] = {}
        for index, label in path.labels:
            labels.setdefault(round(float(x[index]), 9), []).append(label)
        ticks = [(xt, "|".join(dict.fromkeys(v))) for xt, v in sorted(labels.items())]
        dos = (np.asarray(result.dos.frequencies_THz), np.asarray(result.dos.dos_per_THz))
        return cls(x, np.asarray(result.dispersion_THz), ticks, list(zip(starts, stops)), dos,
                   dict(references or {}), title, strips)

    def plot(self):
        """Draw and return the figure."""
        plt = _pyplot()
        with plt.rc_context(house_style()):
            if self.dos is not None:
                fig, (ax, dax) = new_axes(1, 2, figsize=(7.6, 4.6), sharey=True,
                                          gridspec_kw={"width_ratios": [3.3, 1.0],
                                                       "wspace": 0.08})
            else:
                fig, ax = new_axes(figsize=(6.4, 4.6))
                dax = None
            self._draw(ax)
            if dax is not None:
                self._draw_dos(dax)
        return fig

    def save(self, stem, formats=("png", "svg")) -> list[Path]:
        return save_and_close(self.plot(), stem, formats)

    def _draw(self, ax):
        f = self.frequencies
        lo = min(0.0, float(f.min()))
        hi = float(f.max()) * 1.06 if f.max() > 0 else 1.0
        if lo < -1e-3:
            ax.axhspan(lo * 1.1, 0.0, color="#e9e5da", alpha=0.6, lw=0, zorder=0)
            ax.annotate("imaginary (unstable) modes", xy=(self.x[0], lo * 1.05), xytext=(4, 2),
                        textcoords="offset points", fontsize=7.5, color="#6f6a5c")
        for start, stop in self.pieces:
            for mode in range(f.shape[1]):
                ax.plot(self.x[start:stop], f[start:stop, mode], lw=1.35,
                        color=_ACOUSTIC if mode < 3 else _OPTICAL, solid_capstyle="round",
                        zorder=3)
        for left, right in self.strips:
            ax.axvspan(left, right, facecolor="none", edgecolor=_HATCH, hatch="////", lw=0,
                       zorder=1)
        for xt, label in self.ticks:
            ax.axvline(xt, color=_RULE, lw=0.7, zorder=2)
            for value in self.references.get(label, ()):
                ax.plot([xt], [value], marker="o", mfc="none", mec=_MARK, ms=5.5, mew=1.2,
                        zorder=5, clip_on=False)
        ax.axhline(0.0, color=_RULE, lw=0.7, zorder=2)
        ax.set_xticks([t[0] for t in self.ticks])
        ax.set_xticklabels([t[1] for t in self.ticks])
        ax.tick_params(axis="x", length=0, pad=5)
        ax.set_xlim(self.x[0], self.x[-1])
        ax.set_ylim(lo * 1.1 if lo < -1e-3 else 0.0, hi)
        ax.set_ylabel("frequency (THz)")
        if self.title:
            ax.set_title(self.title, loc="left")
        if self.references:
            ax.plot([], [], marker="o", mfc="none", mec=_MARK, ls="none", label="measured")
            ax.plot([], [], color=_ACOUSTIC, label="acoustic")
            ax.plot([], [], color=_OPTICAL, label="optical")
            ax.legend(loc="lower right", fontsize=8)

    def _draw_dos(self, ax):
        nu, g = self.dos
        ax.fill_betweenx(nu, 0, g, color=_OPTICAL, alpha=0.25, lw=0)
        ax.plot(g, nu, color=_OPTICAL, lw=1.1)
        ax.set_xlim(0, 1.1 * float(g.max()) if g.max() > 0 else 1.0)
        ax.set_xlabel("states/THz")
        ax.tick_params(axis="y", left=False)
        twin = ax.twinx()
        twin.set_ylim(*(np.array(ax.get_ylim()) * THZ_INVERSE_CM))
        twin.set_ylabel("wavenumber (cm$^{-1}$)")
        twin.grid(False)
