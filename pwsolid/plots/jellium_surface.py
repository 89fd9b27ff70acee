"""Plots of jellium surfaces (layer 6): density profiles, surface energies, convergence."""

from __future__ import annotations

import math

import numpy as np

from ..units import HA_PER_BOHR2_ERG_PER_CM2, HARTREE_EV
from . import new_axes, save_and_close

__all__ = ["SurfaceProfilePlot", "SurfaceEnergyPlot", "SurfaceConvergencePlot"]


def _k_f(rs: float) -> float:
    return (9 * math.pi / 4) ** (1 / 3) / rs


class _Figure:
    """``save(stem, formats)`` for a plot object whose ``plot()`` returns (fig, axes)."""

    def plot(self):
        raise NotImplementedError

    def save(self, stem, formats=("png", "svg")):
        fig, _ = self.plot()
        return save_and_close(fig, stem, formats)


class SurfaceProfilePlot(_Figure):
    """n(z)/n_bar against k_F z (z = 0 at the background edge, vacuum at z > 0):
    the Friedel oscillations inside and the spill-out, one line per r_s."""

    def __init__(self, points):
        self.points = [p for p in points if p.profile]

    @classmethod
    def from_study(cls, study) -> "SurfaceProfilePlot":
        return cls(study.points)

    def plot(self, ax=None):
        fig, ax = new_axes(figsize=(6.0, 3.8)) if ax is None else (ax.figure, ax)
        for p in self.points:
            x = np.asarray(p.profile["z_bohr"]) * _k_f(p.rs)
            keep = (x > -12) & (x < 5)
            ax.plot(x[keep], np.asarray(p.profile["density_over_background"])[keep],
                    label=f"r_s = {p.rs:g}")
        ax.step([-12, 0, 0, 5], [1, 1, 0, 0], where="post", color="0.45", lw=0.9, ls="--",
                label="background")
        ax.set_xlabel("k_F z   (background edge at 0, vacuum to the right)")
        ax.set_ylabel("n(z) / n_background")
        ax.set_title("Jellium surface: density profile and Friedel oscillations")
        ax.legend(fontsize=8)
        return fig, ax


class SurfaceEnergyPlot(_Figure):
    """Surface energy and its exchange-correlation part (erg/cm^2) against r_s, with
    the non-self-consistent xc parts of the extra functionals."""

    def __init__(self, study):
        self.study = study

    @classmethod
    def from_study(cls, study) -> "SurfaceEnergyPlot":
        return cls(study)

    def plot(self, ax=None):
        fig, ax = new_axes(figsize=(5.6, 3.8)) if ax is None else (ax.figure, ax)
        pts = self.study.points
        rs = [p.rs for p in pts]
        erg = HA_PER_BOHR2_ERG_PER_CM2
        name = self.study.settings.functional
        ax.plot(rs, [p.mean() * erg for p in pts], marker="o", label=f"total ({name})")
        ax.plot(rs, [p.mean("exchange_correlation") * erg for p in pts], marker="s",
                label=f"exchange-correlation ({name})")
        for extra in self.study.settings.extra_functionals:
            ax.plot(rs, [p.mean_extra(extra) * erg for p in pts], marker="^", ls=":",
                    label=f"exchange-correlation ({extra}, on the {name} density)")
        ax.set_yscale("symlog", linthresh=100)
        ax.axhline(0.0, color="0.5", lw=0.8)
        ax.set_xlabel("r_s (bohr)")
        ax.set_ylabel("surface energy (erg/cm^2)")
        ax.set_title("Jellium surface energy")
        ax.legend(fontsize=7.5)
        return fig, ax


class SurfaceConvergencePlot(_Figure):
    """Change of sigma and sigma_xc from the last value of each scan, one panel per
    setting (thickness, vacuum, cutoff)."""

    def __init__(self, convergence):
        self.convergence = convergence

    @classmethod
    def from_convergence(cls, convergence) -> "SurfaceConvergencePlot":
        return cls(convergence)

    _UNITS = {"thickness": "slab thickness (Fermi wavelengths)",
              "vacuum": "vacuum (Fermi wavelengths)",
              "cutoff": "cutoff (Fermi energies)"}

    def plot(self):
        rows = self.convergence.rows
        fig, axes = new_axes(1, len(rows), figsize=(3.2 * len(rows), 3.4), sharey=True)
        axes = np.atleast_1d(axes)
        erg = HA_PER_BOHR2_ERG_PER_CM2
        for ax, (key, data) in zip(axes, rows.items()):
            v = np.array([r[0] for r in data])
            for col, label in ((1, "sigma"), (2, "sigma_xc")):
                y = np.array([r[col] for r in data]) * erg
                ax.plot(v, np.maximum(np.abs(y - y[-1]), 1e-3), marker="o", label=label)
            w = np.array([r[3] for r in data]) * HARTREE_EV * 1e3
            ax.plot(v, np.maximum(np.abs(w - w[-1]), 1e-3), marker="^", ls=":",
                    label="work function (meV)")
            ax.set_yscale("log")
            ax.set_xlabel(self._UNITS.get(key, key))
        axes[0].set_ylabel("|change from last| (erg/cm^2; meV)")
        axes[0].legend(fontsize=7.5)
        fig.suptitle(f"Jellium surface convergence, r_s = {self.convergence.rs:g}, "
                     f"{self.convergence.base.functional}", fontsize=10)
        return fig, axes
