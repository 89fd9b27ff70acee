"""Efficiency guards: counts, not seconds. Fail when the work for a reference system grows.

Reference: silicon (Appelbaum-Hamann pseudopotential), 8 Ha, 2x2x2 half-offset mesh,
default SCF tolerances (1e-8 Ha, 1e-6). Measured when the guard was set: 10 SCF
iterations and 36.0 Hamiltonian applications per band. The limits leave a small margin
for harmless changes in rounding; a real regression (a lost warm start, a weaker
preconditioner, worse mixing) costs far more than that.
"""

from pwsolid.scf import ground_state
from pwsolid.settings import GroundStateSettings

from conftest import LOCAL_SILICON


def test_scf_iterations_and_hamiltonian_applications_stay_low(silicon):
    gs = ground_state(silicon, GroundStateSettings(cutoff=8.0, kpoint_mesh=(2, 2, 2),
                                                   pseudopotentials=LOCAL_SILICON))
    assert gs.converged
    assert gs.iterations <= 11
    assert gs.applications_per_band <= 40
