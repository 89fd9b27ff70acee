"""Warm starts (pwsolid.warm_start): identities of carrying a finished cell to a new one.

Round-trip identities (common practice): a cell started from itself gets back its own
density and orbitals exactly; the physics of starts from neighbours is checked in
test_eos_workflow.py (same energy as a cold start, fewer iterations).
"""

import numpy as np
import pytest

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


def test_spin_densities_are_carried_channel_by_channel():
    # a (2, n1, n2, n3) start is carried as two densities: each channel keeps its own
    # electron count (the moment survives a step), identical to carrying it alone
    from pwsolid.warm_start import transfer_density

    rng = np.random.default_rng(5)
    up, down = 0.02 + 0.01 * rng.random((2, 8, 9, 10))
    spin = np.stack([up, 0.5 * down])
    out = transfer_density(spin, 250.0, (10, 10, 12), 262.0)
    assert out.shape == (2, 10, 10, 12)
    for carried, alone in zip(out, spin):
        assert np.array_equal(carried, transfer_density(alone, 250.0, (10, 10, 12), 262.0))
        # charge conserved: mean * volume before and after (1e-12: round-off of FFTs)
        assert carried.mean() * 262.0 == pytest.approx(alone.mean() * 250.0, rel=1e-12)
    density, _, _ = starting_point(WarmStart(spin, 250.0), (10, 10, 12), 262.0)
    assert np.array_equal(density, out)
