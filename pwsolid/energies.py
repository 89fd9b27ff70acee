"""Terms of the Kohn-Sham total energy (layer 3).

E = T_s + E_loc + E_H + E_xc + E_ion-ion + E_G0, with

* T_s = sum_k w_k sum_n f_nk sum_G |c_nk(G)|^2 |k+G|^2 / 2
* E_loc = Omega sum_{G != 0} V_loc(G)* n(G)
* E_H = (Omega/2) sum_{G != 0} 4 pi |n(G)|^2 / G^2
* E_nl = sum_k w_k sum_n f_nk <psi_nk| V_nl |psi_nk> for separable pseudopotentials
* E_xc = int n(r) eps_xc(n(r)) d^3r on the FFT grid
* E_ion-ion: Ewald sum of the ionic point charges in a neutralising background
* E_G0 = (N_electrons / Omega) sum_atoms int [v_atom(r) + Z/r] d^3r, the finite
  remainder of the three G = 0 Coulomb divergences, which cancel in a neutral cell.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from .units import HARTREE_EV

__all__ = ["EnergyTerms", "kinetic_energy", "local_energy", "nonlocal_energy"]


@dataclass(frozen=True)
class EnergyTerms:
    """The terms of the total energy, in hartree per cell."""

    kinetic: float
    local_pseudopotential: float
    hartree: float
    exchange_correlation: float
    ewald: float
    pseudopotential_g0: float
    nonlocal_pseudopotential: float = 0.0

    @property
    def total(self) -> float:
        return float(sum(getattr(self, f.name) for f in fields(self)))

    def as_dict(self) -> dict:
        """Terms and total in Ha and eV."""
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        return {
            "total_Ha": self.total,
            "total_eV": self.total * HARTREE_EV,
            "terms_Ha": out,
            "terms_eV": {k: v * HARTREE_EV for k, v in out.items()},
        }


def kinetic_energy(coefficients: list[np.ndarray], kinetic: list[np.ndarray],
                   occupations: np.ndarray, weights: np.ndarray) -> float:
    """T_s from plane-wave coefficients (one (nb, n_pw) block per k-point)."""
    total = 0.0
    for c, t, f, w in zip(coefficients, kinetic, occupations, weights):
        total += w * float(np.einsum("b,bg,g->", f, np.abs(c) ** 2, t))
    return total


def local_energy(v_loc_g: np.ndarray, density_g: np.ndarray, volume: float) -> tuple[float, float]:
    """(G != 0 part, G = 0 part) of int V_loc n, from Fourier coefficients on one grid."""
    prod = np.real(np.conj(v_loc_g) * density_g)
    g0 = float(prod.flat[0]) * volume
    return float(prod.sum()) * volume - g0, g0


def nonlocal_energy(coefficients: list[np.ndarray], operators: list, occupations: np.ndarray,
                    weights: np.ndarray) -> float:
    """E_nl from coefficient blocks and per-k (P, D) projector operators."""
    total = 0.0
    for c, (proj, coupling), f, w in zip(coefficients, operators, occupations, weights):
        if proj is None or not len(proj):
            continue
        b = c @ proj.conj().T
        total += w * float(np.einsum("n,na,ab,nb->", f, b.conj(), coupling, b).real)
    return total
