"""A calculator for the Atomic Simulation Environment (the "atomistic library" below),
backed by pwsolid (layer 6).

``PwsolidCalculator`` gives the atomistic library's optimisers, equation-of-state tools and molecular
dynamics the energy, free energy, forces and stress of a pwsolid ground state::

    from ase.build import bulk
    from pwsolid.interop.atomistic_calculator import PwsolidCalculator
    si = bulk("Si", "diamond", a=5.43)
    si.calc = PwsolidCalculator.from_input_file("inputs/silicon-substrate.toml")
    print(si.get_total_energy(), si.get_stress())

Units follow the atomistic library: eV, eV/angstrom, eV/angstrom^3; the atomistic library's stress convention is
sigma = (1/V) dE/d eps (Voigt order xx, yy, zz, yz, xz, xy), the same sign as
pwsolid's. ``energy`` is the zero-smearing estimate, ``free_energy`` the free energy
F = E - sigma S that the SCF minimises and whose derivatives the forces are.

Between calls the density and the orbitals of the previous geometry start the next
SCF when the FFT grid and the k-points are unchanged (small moves of atoms or cell),
so a relaxation or a trajectory costs far fewer iterations than cold starts.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from ..errors import InputError
from ..settings import GroundStateSettings
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from . import require
from .structure_files import crystal_from_atoms

__all__ = ["PwsolidCalculator"]

_calculator = require("ase.calculators.calculator", "atomistic", "the atomistic library calculator")

_EV_PER_ANGSTROM3 = HARTREE_EV / BOHR_ANGSTROM ** 3


class PwsolidCalculator(_calculator.Calculator):
    """Calculator of the atomistic library running a pwsolid ground state for each new geometry.

    Parameters
    ----------
    settings
        Numerical settings (default ``GroundStateSettings()``); the crystal comes
        from the atomistic library atoms.
    log
        Called with each line of the SCF table (e.g. ``print``); silent by default.
    warm_start
        Start each SCF from the previous geometry's density and orbitals.
    """

    implemented_properties = ["energy", "free_energy", "forces", "stress"]
    name = "pwsolid"

    def __init__(self, settings: GroundStateSettings | None = None, *, log=None,
                 warm_start: bool = True, **kwargs):
        super().__init__(**kwargs)
        if settings is not None and not isinstance(settings, GroundStateSettings):
            raise InputError("settings must be a pwsolid GroundStateSettings",
                             key="settings", value=type(settings).__name__)
        self.settings = settings or GroundStateSettings()
        self.log = log
        self.warm_start = bool(warm_start)
        self.ground_state = None          # the last pwsolid GroundState
        self.scf_iterations: list[int] = []   # SCF iterations of every calculation so far
        # expected density residual of the previous geometry's density at the next one:
        # the first eigensolver pass is converged to about that (see scf.ground_state);
        # a geometry step is usually no larger than the one before, so the residual the
        # last warm start began with is the estimate (measured on a displaced silicon
        # cell under the atomistic library's BFGS: 13 10 10 10 15 22 iterations with the default, 7 7 at
        # the end with this)
        self._start_residual = 1e-3

    @classmethod
    def from_input_file(cls, path, **kwargs) -> "PwsolidCalculator":
        """A calculator with the settings of a pwsolid input file (its crystal is ignored)."""
        from ..config import load_input
        return cls(load_input(path).settings, **kwargs)

    def calculate(self, atoms=None, properties=("energy",),
                  system_changes=tuple(_calculator.all_changes)):
        super().calculate(atoms, properties, system_changes)
        from ..scf import ground_state
        crystal = crystal_from_atoms(self.atoms)
        density, orbitals = self._start_for(crystal)
        gs = ground_state(crystal, self.settings, log=self.log, initial_density=density,
                          initial_wavefunctions=orbitals,
                          start_residual=None if density is None else self._start_residual)
        self.ground_state = gs
        self.scf_iterations.append(gs.iterations)
        if density is not None and gs.history:
            self._start_residual = float(np.clip(gs.history[0]["density_residual"], 1e-6, 1e-2))
        self.results = {"energy": gs.zero_width_energy * HARTREE_EV,
                        "free_energy": gs.free_energy * HARTREE_EV}
        if "forces" in properties or "stress" in properties:
            self._derivatives(gs, properties)

    def _derivatives(self, gs, properties) -> None:
        from ..forces import atomic_forces
        self.results["forces"] = (atomic_forces(gs).cartesian * HARTREE_EV / BOHR_ANGSTROM)
        if "stress" in properties:
            from ..stress import stress_tensor
            sigma = stress_tensor(gs).tensor * _EV_PER_ANGSTROM3
            self.results["stress"] = np.array([sigma[0, 0], sigma[1, 1], sigma[2, 2],
                                               sigma[1, 2], sigma[0, 2], sigma[0, 1]])

    def get_property(self, name, atoms=None, allow_calculation=True):
        # forces and stress come from the same ground state: ask for them together so
        # that a second property does not cost a second SCF
        if name in ("forces", "stress") and allow_calculation:
            atoms = atoms or self.atoms
            if atoms is not None and self.check_state(atoms) == [] and name not in self.results \
                    and self.ground_state is not None:
                self._derivatives(self.ground_state, (name,))
        return super().get_property(name, atoms, allow_calculation)

    def _start_for(self, crystal):
        """(density, orbitals) of the previous geometry carried to the new cell."""
        prev = self.ground_state
        if not self.warm_start or prev is None or prev.crystal.species != crystal.species:
            return None, None
        from ..basis import fft_grid_for_cutoff
        from ..warm_start import WavefunctionStart, transfer_density
        grid = tuple(self.settings.fft_grid
                     or fft_grid_for_cutoff(crystal.lattice, self.settings.cutoff))
        old_volume = prev.crystal.volume
        if prev.spin_densities is not None and grid == prev.setup.grid_shape:
            density = prev.spin_densities * (old_volume / crystal.volume)
        else:
            density = transfer_density(prev.density, old_volume, grid, crystal.volume)
        # orbitals carry over by Miller index when the k-points are the same
        return density, WavefunctionStart.of(prev)

    def pressure_gpa(self) -> float:
        """Pressure of the last calculation in GPa (from the stress)."""
        stress = self.results.get("stress")
        if stress is None:
            raise InputError("no stress computed yet: call atoms.get_stress() first",
                             key="stress")
        return float(-np.mean(stress[:3]) / _EV_PER_ANGSTROM3 * HA_PER_BOHR3_GPA)

    def with_settings(self, **changes) -> "PwsolidCalculator":
        """A new calculator with some settings changed (``dataclasses.replace``)."""
        return PwsolidCalculator(dataclasses.replace(self.settings, **changes), log=self.log,
                                 warm_start=self.warm_start)
