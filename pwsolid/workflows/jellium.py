"""Jellium: the uniform electron gas as a periodic Kohn-Sham calculation (layer 5).

A cell without ions holds N electrons and a uniform positive background of the same
charge. The density stays uniform, so the Hartree energy vanishes, the
exchange-correlation energy per electron is the functional's uniform-gas value, and the
kinetic energy per electron converges with the k-mesh to the Fermi-gas value
(3/10)(9 pi/4)^(2/3)/r_s^2 = 1.104950/r_s^2 Ha. The study runs rising meshes and
reports the error of the self-consistent energy per electron against the analytic
total 1.104950/r_s^2 - 0.458165/r_s + eps_c(r_s).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..crystal import Crystal
from ..scf import ground_state
from ..settings import GroundStateSettings
from ..units import HARTREE_EV
from ..xc import get_functional

__all__ = ["JELLIUM_SCHEMA", "jellium_cell", "uniform_gas_energy", "JelliumStudy",
           "jellium_convergence"]

JELLIUM_SCHEMA = "pwsolid.jellium-convergence/1"
_CELLS = {
    "simple-cubic": np.eye(3),
    "fcc": 0.5 * np.array([[0.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 0.0]]),
    "bcc": 0.5 * np.array([[-1.0, 1.0, 1.0], [1.0, -1.0, 1.0], [1.0, 1.0, -1.0]]),
}
#: (3/10)(9 pi/4)^(2/3): kinetic energy per electron times r_s^2 (Ha bohr^2).
KINETIC_COEFFICIENT = 0.3 * (9 * math.pi / 4) ** (2 / 3)


def jellium_cell(rs: float, electrons: float = 2.0, lattice: str = "fcc") -> Crystal:
    """An empty cell of the given Bravais lattice holding ``electrons`` at density r_s (bohr)."""
    from ..errors import InputError

    if lattice not in _CELLS:
        raise InputError(f"unknown cell; accepted: {', '.join(_CELLS)}", key="cell", value=lattice)
    if not (math.isfinite(rs) and 0.1 <= rs <= 100):
        raise InputError("r_s must lie between 0.1 and 100 bohr", key="rs", value=rs)
    shape = _CELLS[lattice]
    volume = electrons * 4 * math.pi / 3 * rs ** 3
    a = (volume / abs(np.linalg.det(shape))) ** (1 / 3)
    return Crystal(a * shape, (), np.zeros((0, 3)))


def uniform_gas_energy(rs: float, functional="lda-pw92") -> dict:
    """Analytic energy per electron of the spin-unpolarised uniform gas (Ha)."""
    n = 3 / (4 * math.pi * rs ** 3)
    eps_xc, _ = get_functional(functional).evaluate(np.array([n]))
    kinetic = KINETIC_COEFFICIENT / rs ** 2
    return {"kinetic": kinetic, "exchange_correlation": float(eps_xc[0]),
            "total": kinetic + float(eps_xc[0])}


@dataclass(frozen=True)
class JelliumStudy:
    """Energy per electron against the k-mesh, and the analytic limit."""

    rs: float
    functional: str
    electrons: float
    lattice: str
    meshes: tuple[int, ...]
    energies: tuple[float, ...]          # self-consistent energy per electron (Ha)
    kinetic: tuple[float, ...]           # kinetic energy per electron (Ha)
    analytic: dict

    @property
    def errors(self) -> np.ndarray:
        """Energy per electron minus the analytic value (Ha)."""
        return np.array(self.energies) - self.analytic["total"]

    def as_document(self) -> dict:
        return {
            "schema": JELLIUM_SCHEMA,
            "wigner_seitz_radius_bohr": self.rs,
            "functional": self.functional,
            "electrons_per_cell": self.electrons,
            "cell": self.lattice,
            "analytic_energy_per_electron_Ha": self.analytic,
            "rows": [{"mesh": m, "energy_per_electron_Ha": e, "kinetic_per_electron_Ha": t,
                      "error_mHa": 1e3 * d, "error_meV": d * HARTREE_EV * 1e3}
                     for m, e, t, d in zip(self.meshes, self.energies, self.kinetic, self.errors)],
        }


def jellium_convergence(rs: float, meshes=(4, 8, 12, 16), *, functional="lda-pw92",
                        electrons: float = 2.0, lattice: str = "fcc", progress=None,
                        log=None) -> JelliumStudy:
    """Self-consistent jellium on rising Monkhorst-Pack meshes (half-step shifted).

    The gas is a metal: Fermi-Dirac smearing of 2% of the Fermi energy, compared at its
    zero-width estimate; the cutoff (6 E_F, at least 1 Ha) holds every occupied plane
    wave and the smearing tail.
    """
    cell = jellium_cell(rs, electrons, lattice)
    e_fermi = 0.5 * (9 * math.pi / 4) ** (2 / 3) / rs ** 2
    energies, kinetic = [], []
    for i, m in enumerate(meshes):
        settings = GroundStateSettings(
            cutoff=max(1.0, 6 * e_fermi), kpoint_mesh=(int(m),) * 3, smearing="fermi-dirac",
            smearing_width=0.02 * e_fermi, background_electrons=electrons, functional=functional)
        gs = ground_state(cell, settings, log=log)
        energies.append(gs.zero_width_energy / electrons)
        kinetic.append(gs.energy.kinetic / electrons)
        if progress is not None:
            progress(i + 1, len(meshes))
    name = functional if isinstance(functional, str) else get_functional(functional).name
    return JelliumStudy(float(rs), name, float(electrons), lattice, tuple(int(m) for m in meshes),
                        tuple(energies), tuple(kinetic), uniform_gas_energy(rs, functional))
