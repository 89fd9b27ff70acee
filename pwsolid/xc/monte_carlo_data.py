"""Quantum Monte Carlo energies of the uniform electron gas and its closed forms (layer 1).

The Ceperley-Alder 1980 total energies per electron, with the kinetic and exchange
energies of the non-interacting gas needed to turn them into correlation energies.

Provenance: D. M. Ceperley and B. J. Alder, Phys. Rev. Lett. 45, 566 (1980), total
energies in rydberg with their statistical errors in the last digits, taken from a
secondary transcription of the paper's table (status [V2] in the project's reference
notes). The transcription is corroborated by the Perdew-Zunger, Perdew-Wang and
Vosko-Wilk-Nusair fits, which all reproduce it within its error bars.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "MonteCarloPoint",
    "CEPERLEY_ALDER_1980",
    "free_gas_kinetic_energy",
    "free_gas_exchange_energy",
]

Array = NDArray[np.float64]

_KF_RS = (9.0 * math.pi / 4.0) ** (1.0 / 3.0)       # k_F rs = 1.919158
_KINETIC_RS2 = 0.3 * _KF_RS ** 2                       # t_s rs^2 = 1.104951 Ha bohr^2
_EXCHANGE_RS = -3.0 / (4.0 * math.pi) * _KF_RS         # e_x rs = -0.4581653 Ha bohr


def _spin_factor(zeta: Array, power: float) -> Array:
    return 0.5 * ((1.0 + zeta) ** power + (1.0 - zeta) ** power)


def free_gas_kinetic_energy(rs: ArrayLike, zeta: ArrayLike = 0.0) -> Array:
    """Kinetic energy per electron of the non-interacting uniform gas (hartree).

    ``t_s = (3/10) (9 pi/4)^(2/3) / rs^2 * [(1+zeta)^(5/3) + (1-zeta)^(5/3)] / 2``.
    """
    rs = np.asarray(rs, dtype=np.float64)
    zeta = np.asarray(zeta, dtype=np.float64)
    return _KINETIC_RS2 / rs ** 2 * _spin_factor(zeta, 5.0 / 3.0)


def free_gas_exchange_energy(rs: ArrayLike, zeta: ArrayLike = 0.0) -> Array:
    """Exchange energy per electron of the uniform gas (hartree).

    ``e_x = -(3/(4 pi)) (9 pi/4)^(1/3) / rs * [(1+zeta)^(4/3) + (1-zeta)^(4/3)] / 2``.
    """
    rs = np.asarray(rs, dtype=np.float64)
    zeta = np.asarray(zeta, dtype=np.float64)
    return _EXCHANGE_RS / rs * _spin_factor(zeta, 4.0 / 3.0)


@dataclass(frozen=True)
class MonteCarloPoint:
    """One quantum Monte Carlo energy of the uniform gas.

    Attributes
    ----------
    rs : float, bohr
    zeta : float
        0 (paramagnetic) or 1 (ferromagnetic).
    total_ry, total_error_ry : float, rydberg
        Total energy per electron and its statistical error as published.
    """

    rs: float
    zeta: float
    total_ry: float
    total_error_ry: float

    @property
    def correlation(self) -> float:
        """Correlation energy per electron (Ha): total minus kinetic and exchange."""
        total = 0.5 * self.total_ry
        return float(total - free_gas_kinetic_energy(self.rs, self.zeta)
                     - free_gas_exchange_energy(self.rs, self.zeta))

    @property
    def correlation_error(self) -> float:
        """Statistical error of :attr:`correlation` (Ha)."""
        return 0.5 * self.total_error_ry


#: Ceperley & Alder (1980): (rs, zeta, E_tot in Ry, error in Ry); see the module notes.
CEPERLEY_ALDER_1980: tuple[MonteCarloPoint, ...] = tuple(
    MonteCarloPoint(rs, zeta, total, error) for rs, zeta, total, error in (
        (1.0, 0.0, 1.174, 0.001),
        (2.0, 0.0, 0.0041, 0.0004),
        (5.0, 0.0, -0.1512, 0.0001),
        (10.0, 0.0, -0.10675, 0.00005),
        (20.0, 0.0, -0.06329, 0.00003),
        (50.0, 0.0, -0.02884, 0.00001),
        (100.0, 0.0, -0.015321, 0.000005),
        (2.0, 1.0, 0.2517, 0.0006),
        (5.0, 1.0, -0.1214, 0.0002),
        (10.0, 1.0, -0.1013, 0.0001),
        (20.0, 1.0, -0.06251, 0.00003),
        (50.0, 1.0, -0.02878, 0.00002),
        (100.0, 1.0, -0.015340, 0.000005),
    ))
