"""Band-structure and density-of-states plots (layer 6).

:class:`BandStructurePlot` draws bands against the path distance: valence and
conduction bands in two palette colours, thin vertical rules at the special
points, a hatched strip where the path jumps (a break, with the labels of both
sides), the gap as a tinted band with its value, the band edges marked and
joined by an arrow, and optionally the density of states in a panel on the
right that shares the energy axis. :class:`DensityOfStatesPlot` draws a DOS
alone, with the integrated DOS on a second axis.

Both are thin objects over computed results (``from_result``), with
``plot(ax=None) -> Figure`` and ``save(stem, formats)``; matplotlib is imported
only when drawing.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..units import HARTREE_EV
from . import PALETTE, _pyplot, house_style, new_axes, save_figure

__all__ = ["BandStructurePlot", "DensityOfStatesPlot", "FIGURE_FORMATS"]

#: Figure formats the plots are saved in by default (and the ones accepted).
FIGURE_FORMATS = ("png", "svg", "pdf")

_INK = "#2b2f36"
_RULE = "#a49e90"
_HATCH = "#cfc8b8"
_VALENCE, _CONDUCTION, _GAP = PALETTE[0], PALETTE[1], PALETTE[3]
# Width of the strip drawn at a break, as a fraction of the path length.
_BREAK_FRACTION = 0.04


def _save(fig, stem, formats) -> list[Path]:
    """Save as ``<stem>.<format>``, keeping any dots in the stem (``si.bands`` ->
    ``si.bands.png``), then close the figure."""
    try:
        written = []
        for fmt in formats:
            written += save_figure(fig, stem, (fmt,))
        return written
    finally:
        _pyplot().close(fig)


@dataclass(frozen=True, eq=False)
class _DOSCurve:
    energies: np.ndarray        # eV, relative to the band structure's reference
    dos: np.ndarray             # states / eV / cell
    complete_below: float       # eV, relative
    gap: tuple | None           # (low, high) eV, relative, or None


def _dos_curve(dos, reference_ha: float) -> _DOSCurve:
    ev = HARTREE_EV
    e = (np.asarray(dos.dos.energies) - reference_ha) * ev
    top = (dos.complete_below - reference_ha) * ev
    gap = None
    if not dos.metallic and dos.gap is not None:
        low = (dos.reference - reference_ha) * ev
        gap = (low, low + dos.gap * ev)
    return _DOSCurve(e, np.asarray(dos.dos_per_ev), top, gap)


def _fill_dos(ax, curve: _DOSCurve, *, horizontal: bool, metallic: bool):
    """Shade a DOS curve: valence part, conduction part, outline."""
    keep = curve.energies <= curve.complete_below + 1e-9
    e, g = curve.energies[keep], curve.dos[keep]
    if curve.gap is not None and not metallic:
        parts = ((e <= curve.gap[0] + 1e-9, _VALENCE), (e >= curve.gap[1] - 1e-9, _CONDUCTION))
    else:
        parts = ((e <= 0.0, _VALENCE), (e >= 0.0, _CONDUCTION))
    for mask, colour in parts:
        if not mask.any():
            continue
        if horizontal:
            ax.fill_betweenx(e, 0, g, where=mask, color=colour, alpha=0.32, lw=0)
        else:
            ax.fill_between(e, 0, g, where=mask, color=colour, alpha=0.32, lw=0)
    if horizontal:
        ax.plot(g, e, color=_INK, lw=0.8)
    else:
        ax.plot(e, g, color=_INK, lw=0.8)


@dataclass(frozen=True, eq=False)
class BandStructurePlot:
    """Bands along a path, ready to draw (energies in eV relative to the reference).

    Build with :meth:`from_result`; the fields are the plotted data.
    """

    x: np.ndarray                # (n_k,) display position: path distance plus break strips
    energies: np.ndarray         # (n_k, n_bands) eV
    pieces: tuple                # (start, stop) index ranges of the continuous pieces
    ticks: tuple                 # ((x, label), ...)
    break_strips: tuple          # ((x_left, x_right), ...)
    n_valence: int
    metallic: bool
    reference_kind: str
    valence_top: tuple | None    # (x, energy) of the valence-band maximum
    conduction_bottom: tuple | None
    gap: float | None            # eV
    gap_kind: str | None
    complete_below: float        # eV: every band is computed below this
    window: tuple
    title: str = ""
    dos: _DOSCurve | None = None

    @classmethod
    def from_result(cls, bs, dos=None, *, window=None, title: str | None = None):
        """From a :class:`~pwsolid.workflows.band_structure.BandStructure` (and a
        :class:`~pwsolid.workflows.density_of_states.DOSResult` for the side panel).

        ``window`` is the energy range (eV, relative to the reference); default
        about -13 to +8 eV, widened to show the bottom of the lowest band.
        """
        ev = HARTREE_EV
        path = bs.path
        n = path.n_points
        total = float(path.distance[-1]) if n > 1 else 1.0
        strip = _BREAK_FRACTION * (total if total > 0 else 1.0)
        shift = np.zeros(n)
        for b in path.breaks:
            shift[b:] += strip
        x = np.asarray(path.distance, float) + shift
        starts = (0,) + tuple(path.breaks)
        stops = tuple(path.breaks) + (n,)
        pieces = tuple(zip(starts, stops))
        ticks = tuple((float(x[i]), name) for i, name in path.labels)
        strips = tuple((float(x[b - 1]), float(x[b])) for b in path.breaks)
        energies = bs.energies_ev()
        g = bs.gaps
        vt = cb = None
        if not g.metallic:
            vt = (float(x[g.valence_maximum.index]), (g.valence_maximum.energy - bs.reference) * ev)
            cb = (float(x[g.conduction_minimum.index]),
                  (g.conduction_minimum.energy - bs.reference) * ev)
        bottom = (g.band_bottom.energy - bs.reference) * ev
        if window is None:
            # Semiconductors: about -13 to +8 eV. Metals: from just below the band bottom.
            low = np.floor(bottom) - 1.0 if g.metallic else min(-13.0, np.floor(bottom) - 0.5)
            window = (float(low), 8.0)
        window = (float(window[0]), float(window[1]))
        if not window[0] < window[1]:
            raise ValueError(f"the energy window must be (low, high) with low < high, got {window}")
        return cls(x, energies, pieces, ticks, strips, g.n_valence, g.metallic, g.reference_kind,
                   vt, cb, None if g.band_gap is None else g.band_gap * ev, g.gap_kind,
                   (bs.complete_below - bs.reference) * ev, window,
                   bs.title if title is None else title,
                   None if dos is None else _dos_curve(dos, bs.reference))

    # ------------------------------------------------------------------ drawing

    def plot(self, ax=None):
        """Draw on ``ax`` (bands; a pair ``(bands_ax, dos_ax)`` with a DOS) or a new
        figure; return the figure."""
        plt = _pyplot()
        with plt.rc_context(house_style()):
            if ax is None:
                if self.dos is not None:
                    fig, axes = new_axes(1, 2, figsize=(7.6, 4.8), sharey=True,
                                         gridspec_kw={"width_ratios": [3.3, 1.0], "wspace": 0.08})
                    band_ax, dos_ax = axes
                else:
                    fig, band_ax = new_axes(figsize=(6.4, 4.8))
                    dos_ax = None
            else:
                band_ax, dos_ax = (ax if isinstance(ax, (tuple, list, np.ndarray)) else (ax, None))
                fig = band_ax.figure
            self._draw_bands(band_ax)
            if dos_ax is not None and self.dos is not None:
                self._draw_dos(dos_ax)
        return fig

    def save(self, stem, formats=FIGURE_FORMATS) -> list[Path]:
        """Draw and save as ``stem.<format>``; return the paths written."""
        return _save(self.plot(), stem, formats)

    def _draw_bands(self, ax):
        lo, hi = self.window
        x0, x1 = float(self.x[0]), float(self.x[-1])
        for start, stop in self.pieces:
            xs = self.x[start:stop]
            for band in range(self.energies.shape[1]):
                colour = _VALENCE if (self.metallic or band < self.n_valence) else _CONDUCTION
                ax.plot(xs, self.energies[start:stop, band], color=colour, lw=1.35,
                        solid_capstyle="round", zorder=3)
        for left, right in self.break_strips:
            ax.axvspan(left, right, facecolor="none", edgecolor=_HATCH, hatch="////", lw=0,
                       zorder=1)
        for xt, _ in self.ticks:
            ax.axvline(xt, color=_RULE, lw=0.7, zorder=2)
        ax.set_xticks([t[0] for t in self.ticks])
        ax.set_xticklabels([t[1] for t in self.ticks])
        ax.tick_params(axis="x", length=0, pad=5)
        ax.set_xlim(x0, x1)
        ax.set_ylim(lo, hi)
        ax.set_ylabel(f"energy − {self.reference_kind} (eV)")
        if self.title:
            ax.set_title(self.title, loc="left")

        if self.complete_below < hi:
            ax.axhspan(max(self.complete_below, lo), hi, color="#e9e5da", alpha=0.55, lw=0,
                       zorder=0)
            ax.annotate("higher bands not computed", xy=(x1, hi), xytext=(-4, -4),
                        textcoords="offset points", ha="right", va="top", fontsize=7.5,
                        color="#6f6a5c", zorder=8,
                        bbox={"boxstyle": "round,pad=0.2", "fc": "#fbfaf6", "ec": "none",
                              "alpha": 0.9})
        if self.metallic:
            ax.axhline(0.0, color=_CONDUCTION, lw=1.0, ls=(0, (5, 3)), zorder=4)
            ax.annotate("Fermi level", xy=(x0, 0.0), xytext=(4, 3), textcoords="offset points",
                        ha="left", va="bottom", fontsize=8, color=_CONDUCTION, zorder=7,
                        bbox={"boxstyle": "round,pad=0.15", "fc": "#fbfaf6", "ec": "none",
                              "alpha": 0.85})
            return
        (xv, ev_), (xc, ec) = self.valence_top, self.conduction_bottom
        ax.axhspan(ev_, ec, color=_GAP, alpha=0.16, lw=0, zorder=0)
        ax.annotate("", xy=(xc, ec), xytext=(xv, ev_), zorder=5,
                    arrowprops={"arrowstyle": "-|>", "color": _INK, "lw": 0.9,
                                "shrinkA": 4, "shrinkB": 4, "mutation_scale": 9,
                                "connectionstyle": "arc3,rad=0.0" if abs(xc - xv) < 1e-9
                                else "arc3,rad=-0.25"})
        ax.plot([xv], [ev_], marker="o", ms=6.5, color=_VALENCE, mec="white", mew=1.2, zorder=6,
                ls="none", clip_on=False)
        ax.plot([xc], [ec], marker="D", ms=6.0, color=_CONDUCTION, mec="white", mew=1.2,
                zorder=6, ls="none", clip_on=False)
        text = f"gap {self.gap:.2f} eV ({self.gap_kind})"
        ax.annotate(text, xy=(self._label_x(), 0.5 * (ev_ + ec)), ha="center", va="center",
                    fontsize=8.5, color=_INK, zorder=7,
                    bbox={"boxstyle": "round,pad=0.25", "fc": "#fbfaf6", "ec": _GAP, "lw": 0.8})

    def _label_x(self) -> float:
        """Where the gap label has most room: the stretch of path, about a fifth of it wide,
        whose bands stay farthest from the middle of the gap."""
        (_, ev_), (_, ec) = self.valence_top, self.conduction_bottom
        mid = 0.5 * (ev_ + ec)
        e = self.energies
        clearance = np.minimum(e[:, self.n_valence:].min(axis=1) - mid,
                               mid - e[:, :self.n_valence].max(axis=1))
        x = self.x
        half = 0.11 * (x[-1] - x[0])
        best, where = -np.inf, 0.5 * (x[0] + x[-1])
        for xc in x[(x >= x[0] + half) & (x <= x[-1] - half)]:
            score = clearance[np.abs(x - xc) <= half].min()
            if score > best:
                best, where = score, float(xc)
        return where

    def _draw_dos(self, ax):
        curve = self.dos
        _fill_dos(ax, curve, horizontal=True, metallic=self.metallic)
        lo, hi = self.window
        inside = (curve.energies >= lo) & (curve.energies <= min(hi, curve.complete_below))
        top = float(curve.dos[inside].max()) if inside.any() else 1.0
        ax.set_xlim(0, 1.08 * top if top > 0 else 1.0)
        ax.set_xlabel("DOS (states/eV)")
        ax.tick_params(axis="y", labelleft=False)
        from matplotlib.ticker import MaxNLocator

        # no "0" under the panel's left edge, where it would crowd the last path label
        ax.xaxis.set_major_locator(MaxNLocator(3, prune="lower"))
        if curve.gap is not None and not self.metallic:
            ax.axhspan(curve.gap[0], curve.gap[1], color=_GAP, alpha=0.16, lw=0, zorder=0)
        if curve.complete_below < hi:
            ax.axhspan(max(curve.complete_below, lo), hi, color="#e9e5da", alpha=0.55, lw=0,
                       zorder=0)
        if self.metallic:
            ax.axhline(0.0, color=_CONDUCTION, lw=1.0, ls=(0, (5, 3)))


@dataclass(frozen=True, eq=False)
class DensityOfStatesPlot:
    """A density of states against energy, with the integrated DOS on a second axis."""

    energies: np.ndarray         # eV, relative to the reference
    dos: np.ndarray              # states / eV / cell
    integrated: np.ndarray       # states / cell
    curve: _DOSCurve
    metallic: bool
    reference_kind: str
    n_electrons: float
    method: str
    window: tuple
    title: str = ""

    @classmethod
    def from_result(cls, result, *, window=None, title: str | None = None):
        """From a :class:`~pwsolid.workflows.density_of_states.DOSResult`; ``window`` in eV
        relative to the reference (default: the whole computed range, at most +8 eV)."""
        curve = _dos_curve(result, result.reference)
        e = curve.energies
        if window is None:
            window = (float(e[0]), float(min(e[-1], curve.complete_below, 8.0)))
        window = (float(window[0]), float(window[1]))
        if not window[0] < window[1]:
            raise ValueError(f"the energy window must be (low, high) with low < high, got {window}")
        return cls(e, curve.dos, np.asarray(result.integrated), curve, result.metallic,
                   result.reference_kind, result.n_electrons, result.method, window,
                   result.title if title is None else title)

    def plot(self, ax=None):
        """Draw on ``ax`` or a new figure; return the figure."""
        plt = _pyplot()
        with plt.rc_context(house_style()):
            if ax is None:
                fig, ax = new_axes(figsize=(6.6, 3.8))
            else:
                fig = ax.figure
            lo, hi = self.window
            _fill_dos(ax, self.curve, horizontal=False, metallic=self.metallic)
            inside = (self.energies >= lo) & (self.energies <= hi)
            top = float(self.dos[inside].max()) if inside.any() else 1.0
            ax.set_xlim(lo, hi)
            ax.set_ylim(0, 1.1 * top if top > 0 else 1.0)
            ax.set_xlabel(f"energy − {self.reference_kind} (eV)")
            ax.set_ylabel("DOS (states/eV/cell)")
            if self.curve.gap is not None and not self.metallic:
                ax.axvspan(*self.curve.gap, color=_GAP, alpha=0.18, lw=0, zorder=0)
            ax.axvline(0.0, color=_INK, lw=0.8, ls=(0, (4, 3)))
            if self.title:
                ax.set_title(f"{self.title}", loc="left")
            twin = ax.twinx()
            twin.spines["right"].set_visible(True)
            twin.grid(False)
            keep = self.energies <= self.curve.complete_below + 1e-9
            twin.plot(self.energies[keep], self.integrated[keep], color=PALETTE[2], lw=1.4)
            twin.axhline(self.n_electrons, color=PALETTE[2], lw=0.7, ls=":")
            twin.text(lo, self.n_electrons, f"  {self.n_electrons:g} electrons", color=PALETTE[2],
                      fontsize=8, va="bottom", ha="left")
            twin.set_ylabel("states below (per cell)", color=PALETTE[2])
            twin.tick_params(axis="y", colors=PALETTE[2])
            twin.set_ylim(0, 1.15 * max(float(self.integrated[keep & inside].max())
                                        if (keep & inside).any() else 1.0, self.n_electrons))
            ax.text(0.99, 0.97, f"{self.method} integration", transform=ax.transAxes,
                    ha="right", va="top", fontsize=7.5, color="#8a8474")
        return fig

    def save(self, stem, formats=FIGURE_FORMATS) -> list[Path]:
        """Draw and save as ``stem.<format>``; return the paths written."""
        return _save(self.plot(), stem, formats)
