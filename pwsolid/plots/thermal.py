"""Figures of vibrational thermodynamics and of the quasi-harmonic approximation (layer 6).

:class:`VibrationalThermodynamicsPlot`: heat capacity (with the 3 k_B per atom line),
entropy, and the vibrational free energy against temperature.
:class:`QuasiHarmonicPlot`: four panels sharing the temperature axis where they can:
the lattice length a(T) with the static and zero-point values marked, the linear
expansion coefficient (1e-6/K, zero line drawn, the untrusted range shaded), the
isothermal bulk modulus, and F(V) at a few temperatures with the V(T) path.
"""

from __future__ import annotations

import numpy as np

from ..units import BOHR_ANGSTROM, GAS_CONSTANT_J_PER_MOL_K, HA_PER_BOHR3_GPA, HARTREE_EV
from . import PALETTE, new_axes, save_and_close

__all__ = ["VibrationalThermodynamicsPlot", "QuasiHarmonicPlot"]


class VibrationalThermodynamicsPlot:
    """C_V and S (J/(mol K)) and F_vib (meV/atom) against T of one spectrum."""

    def __init__(self, result, title: str = ""):
        self.result, self.title = result, title

    @classmethod
    def from_result(cls, result, title: str = "") -> "VibrationalThermodynamicsPlot":
        return cls(result, title)

    def plot(self):
        r = self.result
        h, n = r.harmonic, r.n_atoms
        t = h.temperatures
        fig, (ax1, ax2) = new_axes(1, 2, figsize=(9.0, 3.6))
        ax1.plot(t, h.heat_capacity * GAS_CONSTANT_J_PER_MOL_K / n, color=PALETTE[0],
                 label="C_V")
        ax1.plot(t, h.entropy * GAS_CONSTANT_J_PER_MOL_K / n, color=PALETTE[1], label="S")
        ax1.axhline(3 * GAS_CONSTANT_J_PER_MOL_K, color=PALETTE[3], ls="--", lw=1,
                    label="3 k_B per atom")
        ax1.set_xlabel("temperature (K)")
        ax1.set_ylabel("J / (mol atoms K)")
        ax1.legend(loc="upper left")
        ax2.plot(t, h.free_energy * HARTREE_EV * 1e3 / n, color=PALETTE[2], label="F_vib")
        ax2.plot(t, h.internal_energy * HARTREE_EV * 1e3 / n, color=PALETTE[4], label="U_vib")
        ax2.set_xlabel("temperature (K)")
        ax2.set_ylabel("meV / atom (zero-point included)")
        ax2.legend(loc="lower left")
        fig.suptitle(self.title or f"Harmonic vibrations ({r.spectrum_from})", fontsize=11)
        return fig

    def save(self, stem, formats=("png", "svg")):
        return save_and_close(self.plot(), stem, formats)


class QuasiHarmonicPlot:
    """Lattice, expansion coefficient, bulk modulus and F(V) of a quasi-harmonic result."""

    def __init__(self, result, title: str = ""):
        self.result, self.title = result, title

    @classmethod
    def from_result(cls, result, title: str = "") -> "QuasiHarmonicPlot":
        return cls(result, title)

    def _shade(self, ax):
        r = self.result
        bad = ~r.inside_range
        if np.any(bad):
            t = r.temperatures
            ax.axvspan(t[np.flatnonzero(bad)[0]], t[-1], color="#d8d2c4", alpha=0.5, lw=0)

    def plot(self):
        r = self.result
        t = r.temperatures
        name = next(iter(r.reference_lengths))
        a = r.lattice(r.volume)[name] * BOHR_ANGSTROM
        fig, axes = new_axes(2, 2, figsize=(9.5, 7.0))
        ax = axes[0, 0]
        ax.plot(t, a, color=PALETTE[0])
        ax.axhline(float(r.lattice(r.static_fit.v0)[name]) * BOHR_ANGSTROM, color=PALETTE[3],
                   ls="--", lw=1, label="static minimum")
        ax.legend(loc="upper left")
        ax.set_ylabel(f"lattice length {name} (angstrom)")
        ax.set_xlabel("temperature (K)")
        self._shade(ax)
        ax = axes[0, 1]
        ax.plot(t, r.linear_expansion * 1e6, color=PALETTE[1])
        ax.axhline(0.0, color="#6d6a63", lw=0.8)
        ax.set_ylabel("linear expansion (1e-6 / K)")
        ax.set_xlabel("temperature (K)")
        self._shade(ax)
        ax = axes[1, 0]
        ax.plot(t, r.bulk_modulus * HA_PER_BOHR3_GPA, color=PALETTE[2])
        ax.set_ylabel("isothermal bulk modulus (GPa)")
        ax.set_xlabel("temperature (K)")
        self._shade(ax)
        ax = axes[1, 1]
        a3 = BOHR_ANGSTROM ** 3
        dense = np.linspace(r.volumes[0], r.volumes[-1], 200)
        picks = np.unique(np.linspace(0, t.size - 1, 5).round().astype(int))
        e_ref = r.fits[0].e0
        for k, j in enumerate(picks):
            f = r.fits[j]
            color = PALETTE[k % len(PALETTE)]
            ax.plot(dense * a3, (f.energy(dense) - e_ref) * HARTREE_EV * 1e3 / r.n_atoms,
                    color=color, lw=1.2, label=f"{t[j]:g} K")
            ax.plot(r.volumes * a3, (r.free_energies[j] - e_ref) * HARTREE_EV * 1e3 / r.n_atoms,
                    "o", ms=3, color=color)
        path_e = np.array([f.e0 for f in r.fits])
        ax.plot(r.volume * a3, (path_e - e_ref) * HARTREE_EV * 1e3 / r.n_atoms, color=_INK_SOFT,
                lw=1, ls=":", label="minimum V(T)")
        ax.set_xlabel("volume per cell (angstrom^3)")
        ax.set_ylabel("F(V, T) - F(0 K) (meV / atom)")
        ax.legend(loc="upper right", fontsize=8)
        fig.suptitle(self.title or "Quasi-harmonic approximation", fontsize=11)
        fig.tight_layout()
        return fig

    def save(self, stem, formats=("png", "svg")):
        return save_and_close(self.plot(), stem, formats)


_INK_SOFT = "#55524c"
