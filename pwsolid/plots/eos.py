"""Energy against volume with the fitted equations of state (layer 6).

:class:`EquationOfStatePlot` holds the numbers of a
:class:`~pwsolid.workflows.equation_of_state.VolumeScan` ready to draw: the
computed energies per atom relative to the preferred fit's minimum (meV/atom)
against the volume per cell (angstrom^3), a curve per fitted form, and beneath,
on the same volume axis, each form's residuals. When the points carry their
analytic pressure, a panel P(V) (GPa) sets them against -dE/dV of the preferred
fit. A c/a scan gets a panel with the optimal c/a. Points added by range
extensions are drawn hollow.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from . import PALETTE, new_axes, save_figure

__all__ = ["EquationOfStatePlot"]


_MEV = HARTREE_EV * 1e3
_A3 = BOHR_ANGSTROM ** 3
_LABELS = {"birch-murnaghan": "Birch-Murnaghan", "vinet": "Vinet", "murnaghan": "Murnaghan",
           "polynomial": "polynomial in V^(-2/3)"}


def _formula(crystal) -> str:
    counts = [(s, crystal.species.count(s)) for s in crystal.unique_species]
    return "".join(f"{s}{n if n > 1 else ''}" for s, n in counts)


@dataclass(frozen=True)
class EquationOfStatePlot:
    """Data of an E(V) figure (angstrom^3 and meV/atom), drawn by :meth:`plot`."""

    volumes: np.ndarray                 # angstrom^3 per cell, the E(V) data
    energies: np.ndarray                # meV/atom relative to the preferred E0
    extended: np.ndarray                # bool: added by a range extension
    curves: dict                        # form -> (volumes, energies) dense, same units
    residuals: dict                     # form -> residuals, meV/atom, at ``volumes``
    preferred: str
    v0: float                           # angstrom^3, preferred form
    summary: str                        # one line: V0, lattice, B0, B0'
    title: str = ""
    c_over_a: np.ndarray | None = None  # optimal c/a per volume (c/a scans)
    extras: dict = field(default_factory=dict)
    # analytic pressure of each point that has one: (volumes angstrom^3, GPa); and the
    # preferred fit's -dE/dV on the dense volumes (angstrom^3, GPa); None without pressures
    pressures: tuple | None = None
    fit_pressure: tuple | None = None

    @classmethod
    def from_scan(cls, scan, title: str = "") -> "EquationOfStatePlot":
        """Take what the figure needs from a VolumeScan."""
        n = scan.crystal.n_atoms
        e_ref = scan.e0
        v = np.asarray(scan.volumes, float)
        stage_of = {}
        for p in scan.points:
            stage_of.setdefault(round(p.volume, 8), p.stage)
        extended = np.array([stage_of.get(round(x, 8), 0) > 0 for x in v])
        lo, hi = v.min(), v.max()
        pad = 0.04 * (hi - lo)
        dense = np.linspace(lo - pad, hi + pad, 240)
        curves, residuals = {}, {}
        for name, fit in scan.fits.items():
            curves[name] = (dense * _A3, (np.asarray(fit.energy(dense)) - e_ref) * _MEV / n)
            # EOSFit residuals are fitted minus computed, at its (sorted) volumes
            residuals[name] = np.interp(v, fit.volumes, fit.residuals) * _MEV / n
        lat = scan.lattice_constants
        lat_text = ", ".join(f"{k} = {x * BOHR_ANGSTROM:.4f} Å" for k, x in lat.items())
        summary = (f"{_LABELS.get(scan.preferred_form, scan.preferred_form)}: "
                   f"V0 = {scan.v0 * _A3:.3f} Å³, {lat_text}, B0 = {scan.b0_gpa:.1f} GPa, "
                   f"B0' = {scan.b0_prime:.2f}")
        if not title:
            title = f"{_formula(scan.crystal)}: energy against volume"
        pressures = fit_pressure = None
        cmp = scan.pressure_comparison()
        have = np.isfinite(cmp["pressures"])
        if have.any():
            pressures = (cmp["volumes"][have] * _A3, cmp["pressures"][have] * HA_PER_BOHR3_GPA)
            fit_pressure = (dense * _A3,
                            np.asarray(scan.fit.pressure(dense), float) * HA_PER_BOHR3_GPA)
        return cls(volumes=v * _A3, energies=(np.asarray(scan.energies) - e_ref) * _MEV / n,
                   extended=extended, curves=curves, residuals=residuals,
                   preferred=scan.preferred_form, v0=scan.v0 * _A3, summary=summary,
                   title=title,
                   c_over_a=None if scan.optimal_c_over_a is None
                   else np.asarray(scan.optimal_c_over_a, float),
                   pressures=pressures, fit_pressure=fit_pressure)

    @property
    def panels(self) -> tuple[str, ...]:
        """The panels drawn, top to bottom: energy, [pressure], residuals, [c/a]."""
        return (("energy",) + (("pressure",) if self.pressures is not None else ())
                + ("residuals",) + (("c_over_a",) if self.c_over_a is not None else ()))

    def plot(self, axes=None):
        """Draw into ``axes`` (one per entry of :attr:`panels`) or a new figure; returns it."""
        panels = self.panels
        rows = len(panels)
        if axes is None:
            ratios = [3.0] + [1.3 if p != "pressure" else 2.0 for p in panels[1:]]
            fig, axes = new_axes(rows, 1, sharex=True,
                                 figsize=(6.4, 4.2 + 1.3 * (rows - 1)
                                          + (0.7 if "pressure" in panels else 0.0)),
                                 gridspec_kw={"height_ratios": ratios, "hspace": 0.08})
        else:
            fig = axes[0].figure
        axis = dict(zip(panels, axes))
        main, resid = axis["energy"], axis["residuals"]
        colours = {name: PALETTE[i % len(PALETTE)] for i, name in enumerate(self.curves)}
        for name, (vx, ey) in self.curves.items():
            main.plot(vx, ey, color=colours[name], lw=2.2 if name == self.preferred else 1.2,
                      ls="-" if name == self.preferred else (0, (4, 2)),
                      label=_LABELS.get(name, name), zorder=2)
        ink = "#2b2f36"
        planned = ~self.extended
        main.scatter(self.volumes[planned], self.energies[planned], s=30, color=ink, zorder=3,
                     label="computed")
        if np.any(self.extended):
            main.scatter(self.volumes[self.extended], self.energies[self.extended], s=30,
                         facecolor="none", edgecolor=ink, zorder=3, label="computed (extension)")
        for ax in axes:
            ax.axvline(self.v0, color="#8a8477", lw=0.9, ls=":", zorder=1)
        main.set_ylabel("E - E0 (meV/atom)")
        main.set_title(self.title, loc="left", pad=22)
        main.text(0.0, 1.03, self.summary, transform=main.transAxes, ha="left", va="bottom",
                  fontsize=8.2, color=ink,
                  bbox={"boxstyle": "round,pad=0.3", "facecolor": "#f1eee4",
                        "edgecolor": "#d8d2c2"})
        main.legend(loc="best", fontsize=8)
        offsets = np.linspace(-1, 1, max(len(self.residuals), 1)) * 0.004 * np.ptp(self.volumes)
        for off, (name, r) in zip(offsets, self.residuals.items()):
            resid.plot(self.volumes + off, r, marker="o", ms=3.2, lw=0.8, color=colours[name])
        resid.axhline(0.0, color=ink, lw=0.8)
        resid.set_ylabel("fit - computed\n(meV/atom)")
        if "pressure" in axis:
            self._plot_pressure(axis["pressure"], colours.get(self.preferred, PALETTE[0]), ink)
        if self.c_over_a is not None:
            ax = axis["c_over_a"]
            ax.plot(self.volumes, self.c_over_a, marker="s", ms=3.5, color=PALETTE[4])
            ax.set_ylabel("optimal c/a")
        axes[-1].set_xlabel("volume per cell (Å³)")
        return fig

    def _plot_pressure(self, ax, colour, ink) -> None:
        """P(V): the fit's -dE/dV as a line, the analytic pressures as diamonds."""
        vx, py = self.fit_pressure
        ax.plot(vx, py, color=colour, lw=1.8, zorder=2,
                label=f"-dE/dV ({_LABELS.get(self.preferred, self.preferred)})")
        ax.scatter(*self.pressures, s=26, marker="D", facecolor="#f1eee4", edgecolor=ink,
                   linewidths=1.1, zorder=3, label="analytic stress")
        ax.axhline(0.0, color="#8a8477", lw=0.8)
        ax.set_ylabel("pressure (GPa)")
        ax.legend(loc="best", fontsize=8)

    def save(self, stem, formats=("png", "svg")):
        """Draw a new figure and write ``stem.<format>`` for each format; returns the paths."""
        fig = self.plot()
        try:
            return save_figure(fig, stem, formats)
        finally:
            import matplotlib.pyplot as plt

            plt.close(fig)
