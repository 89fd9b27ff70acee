"""Plot of a lattice-constant test set: relative errors of a0 and B0 per solid (layer 6)."""

from __future__ import annotations

import numpy as np

from . import new_axes, save_figure

__all__ = ["LatticeTestPlot"]


class LatticeTestPlot:
    """Relative error (%) of a0 (bars) and B0 (markers, right axis) against the
    all-electron references, with the +-0.3 % and +-1 % bands of the a0 goal."""

    def __init__(self, result):
        self.result = result

    @classmethod
    def from_result(cls, result) -> "LatticeTestPlot":
        return cls(result)

    def plot(self, ax=None):
        if ax is None:
            fig, ax = new_axes(figsize=(6.0, 3.8))
        else:
            fig = ax.figure
        rows = self.result.results
        x = np.arange(len(rows))
        a = [100 * r.a0_error for r in rows]
        ax.axhspan(-1.0, 1.0, color="0.92", lw=0)
        ax.axhspan(-0.3, 0.3, color="0.82", lw=0)
        ax.bar(x, a, width=0.55, color="#2a6f97", label="a0")
        ax.axhline(0.0, color="0.2", lw=0.8)
        ax.set_xticks(x, [r.name for r in rows])
        ax.set_ylabel("a0 - all-electron (%)")
        right = ax.twinx()
        right.plot(x, [100 * r.b0_error for r in rows], "D", color="#c8553d", label="B0")
        right.set_ylabel("B0 - all-electron (%)", color="#c8553d")
        ax.set_title(f"Fitted table '{self.result.set_name}', {self.result.cutoff:g} Ha: "
                     f"mean |a0 error| {100 * self.result.mean_absolute_a0_error:.2f} %")
        return fig, ax

    def save(self, stem, formats=("png", "svg")):
        fig, _ = self.plot()
        return save_figure(fig, stem, formats)
