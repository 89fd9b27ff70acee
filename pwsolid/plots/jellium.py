"""Plot of a jellium convergence study (layer 6)."""

from __future__ import annotations

import numpy as np

from . import new_axes, save_figure

__all__ = ["JelliumPlot"]


class JelliumPlot:
    """|E/N - analytic| in mHa against the k-mesh divisions (log scale)."""

    def __init__(self, study):
        self.study = study

    @classmethod
    def from_study(cls, study) -> "JelliumPlot":
        return cls(study)

    def plot(self, ax=None):
        if ax is None:
            fig, ax = new_axes(figsize=(5.2, 3.6))
        else:
            fig = ax.figure
        s = self.study
        err = np.maximum(np.abs(s.errors) * 1e3, 1e-9)
        ax.semilogy(s.meshes, err, marker="o")
        ax.set_xlabel("k-mesh divisions per axis")
        ax.set_ylabel("|E/N - uniform gas| (mHa)")
        ax.set_title(f"Jellium, r_s = {s.rs:g} bohr, {s.functional}")
        return fig, ax

    def save(self, stem, formats=("png", "svg")):
        fig, _ = self.plot()
        return save_figure(fig, stem, formats)
