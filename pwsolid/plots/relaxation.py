"""Energy, largest force and stress against relaxation step (layer 6).

:class:`RelaxationPlot` holds the per-step numbers of a
:class:`~pwsolid.workflows.relaxation.RelaxationResult`: three stacked panels on a
shared step axis, the energy (meV/atom above the final structure), the largest
force (eV/angstrom, logarithmic) and the largest stress deviation from the target
pressure (GPa, logarithmic), each threshold drawn as a dashed line and rejected
steps drawn hollow.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..units import BOHR_ANGSTROM, HARTREE_EV
from . import PALETTE, new_axes, save_and_close

__all__ = ["RelaxationPlot"]

_INK = "#2b2f36"


@dataclass(frozen=True)
class RelaxationPlot:
    """Data of a relaxation figure, drawn by :meth:`plot`."""

    steps: np.ndarray            # step index
    energy: np.ndarray           # meV/atom relative to the final structure
    force: np.ndarray            # eV/angstrom, largest per step
    stress: np.ndarray           # GPa, largest |sigma + P| component per step
    accepted: np.ndarray         # bool
    force_threshold: float | None    # eV/angstrom (None when the atoms do not move)
    stress_threshold: float | None   # GPa (None when the cell does not move)
    title: str = "Relaxation"

    @classmethod
    def from_result(cls, result, title: str = "") -> "RelaxationPlot":
        steps = result.steps
        n = result.crystal.n_atoms
        e = np.array([s["energy_Ha"] for s in steps])
        ev_per_a = HARTREE_EV / BOHR_ANGSTROM
        relax = result.settings
        return cls(
            steps=np.array([s["step"] for s in steps]),
            energy=(e - result.final["energy_Ha"]) * HARTREE_EV * 1e3 / n,
            force=np.array([s["largest_force_Ha_per_bohr"] for s in steps]) * ev_per_a,
            stress=np.array([s["largest_stress_deviation_GPa"] for s in steps]),
            accepted=np.array([s.get("accepted", True) for s in steps], bool),
            force_threshold=relax.force_threshold * ev_per_a if relax.moves_atoms else None,
            stress_threshold=(relax.as_dict()["stress_threshold_GPa"] if relax.moves_cell
                              else None),
            title=title or ("Relaxation " + ("converged" if result.converged
                                             else "stopped before its thresholds")))

    def plot(self, axes=None):
        """Draw into three axes (or a new figure); returns the figure."""
        if axes is None:
            fig, axes = new_axes(3, 1, sharex=True, figsize=(6.4, 6.2),
                                 gridspec_kw={"hspace": 0.12})
        fig = axes[0].figure
        panels = ((self.energy, "energy above final\n(meV/atom)", None, False, PALETTE[0]),
                  (self.force, "largest force\n(eV/Å)", self.force_threshold, True, PALETTE[1]),
                  (self.stress, "largest stress\ndeviation (GPa)", self.stress_threshold, True,
                   PALETTE[2]))
        for ax, (y, label, threshold, log, colour) in zip(axes, panels):
            shown = y if not log else np.maximum(y, 1e-12)
            ax.plot(self.steps, shown, color=colour, lw=1.2, zorder=2)
            ax.scatter(self.steps[self.accepted], shown[self.accepted], s=22, color=colour,
                       zorder=3)
            ax.scatter(self.steps[~self.accepted], shown[~self.accepted], s=22,
                       facecolors="none", edgecolors=colour, zorder=3, label="rejected step")
            if log:
                ax.set_yscale("log")
            if threshold is not None:
                ax.axhline(threshold, color=_INK, ls=(0, (5, 3)), lw=1.0)
                ax.text(0.99, threshold, "threshold", transform=ax.get_yaxis_transform(),
                        ha="right", va="bottom", fontsize=7.5, color=_INK)
            ax.set_ylabel(label)
        axes[-1].set_xlabel("step")
        axes[-1].xaxis.get_major_locator().set_params(integer=True)
        fig.suptitle(self.title, x=0.1, ha="left", fontweight="bold", fontsize=11.5)
        return fig

    def save(self, stem, formats=("png", "svg")):
        """Draw a new figure and write ``stem.<format>`` for each format; returns the paths."""
        return save_and_close(self.plot(), stem, formats)
