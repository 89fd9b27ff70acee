"""Warm starts (pwsolid.warm_start): identities of carrying a finished cell to a new one.

Round-trip identities (common practice): a cell started from itself gets back its own
density and orbitals exactly; the physics of starts from neighbours is checked in
test_eos_workflow.py (same energy as a cold start, fewer iterations).
"""

import numpy as np

from conftest import LOCAL_SILICON
from pwsolid.crystal import diamond
from pwsolid.scf import ground_state, prepare
from pwsolid.settings import GroundStateSettings
from pwsolid.warm_start import WarmStart, start_wavefunctions, starting_point

SETTINGS = GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0),
                               pseudopotentials=LOCAL_SILICON)


def test_a_cell_started_from_itself_gets_its_own_density_and_orbitals():
    si = diamond(10.26, "Si")
    gs = ground_state(si, SETTINGS)
    warm = WarmStart.of(gs)
    assert warm.volume == si.volume and warm.partner is None
    density, waves, expected = starting_point(warm, gs.setup.grid_shape, si.volume)
    # same grid and volume: the transfer is the identity, and one neighbour gives no
    # extrapolation estimate
    assert np.array_equal(density, gs.density) and expected is None
    carried = start_wavefunctions(prepare(si, SETTINGS), waves)
    for mine, back in zip(gs.wavefunctions, carried):
        assert np.array_equal(mine, back)
    assert starting_point(None, gs.setup.grid_shape, si.volume) == (None, None, None)
