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


# --- atomic-density superposition and the moved-atoms start (exact properties) ---

from pwsolid.crystal import Crystal  # noqa: E402
from pwsolid.hamiltonian import superposed_density  # noqa: E402
from pwsolid.pseudo.core import PartialCore  # noqa: E402
from pwsolid.warm_start import atomic_density_forms, moved_atoms_density  # noqa: E402

#: A normalised Gaussian of 4 electrons, 1.2 bohr wide, whose Fourier transform is known
#: in closed form (PartialCore.form_factor); the test cell is small and the grid fine, so
#: the Gaussian's Fourier components beyond the grid are below 1e-20 of its charge.
GAUSS = {"Si": PartialCore(4.0, 1.2)}
LATTICE = np.array([[7.0, 0.3, 0.0], [0.0, 6.5, 0.4], [0.2, 0.0, 7.5]])
POSITIONS = np.array([[0.1, 0.2, 0.3], [0.6, 0.55, 0.8]])
GRID = (36, 36, 40)


def _on_grid(lattice, shape):
    frac = np.stack(np.meshgrid(*[np.arange(n) / n for n in shape], indexing="ij"), axis=-1)
    return frac @ lattice


def test_superposition_is_the_periodic_sum_of_the_atomic_densities():
    # against the real-space formula: n(r) = sum_atoms sum_images Q (2 pi rc^2)^-3/2
    # exp(-|r - tau - T|^2 / (2 rc^2)); images to +-2 cells cover the Gaussian to 1e-30
    n = superposed_density(LATTICE, POSITIONS, ["Si", "Si"], GAUSS, GRID)
    r = _on_grid(LATTICE, GRID)
    exact = np.zeros(GRID)
    shifts = np.array(np.meshgrid(*[np.arange(-2, 3)] * 3, indexing="ij")).reshape(3, -1).T
    for tau in POSITIONS:
        for t in shifts:
            d = r - (tau + t) @ LATTICE
            exact += GAUSS["Si"].density(np.linalg.norm(d, axis=-1))
    # both are exact up to the grid's band limit (components below 1e-20): round-off
    assert np.abs(n - exact).max() < 1e-10 * exact.max()
    volume = abs(np.linalg.det(LATTICE))
    assert n.mean() * volume == pytest.approx(8.0, rel=1e-12)  # two atoms of charge 4


def test_superposition_is_periodic_and_translates_by_the_shift_theorem():
    species = ["Si", "Si"]
    n = superposed_density(LATTICE, POSITIONS, species, GAUSS, GRID)
    # moving one atom by a lattice vector changes nothing (periodicity, exact)
    jumped = superposed_density(LATTICE, POSITIONS + [[1, 0, -2], [0, 0, 0]], species,
                                GAUSS, GRID)
    assert np.allclose(jumped, n, rtol=0, atol=1e-13 * n.max())
    # a translation by whole grid steps rolls the grid values (exact)
    rolled = superposed_density(LATTICE, POSITIONS + np.array([3, 5, 7]) / GRID, species,
                                GAUSS, GRID)
    assert np.allclose(rolled, np.roll(n, (3, 5, 7), axis=(0, 1, 2)), atol=1e-13 * n.max())
    # any uniform translation t multiplies n(G) by exp(-i G.t) (Fourier shift theorem)
    t = np.array([0.013, -0.21, 0.37])
    moved = superposed_density(LATTICE, POSITIONS + t, species, GAUSS, GRID)
    m = np.stack(np.meshgrid(*[np.fft.fftfreq(k, 1 / k) for k in GRID], indexing="ij"), -1)
    expected = np.fft.ifftn(np.fft.fftn(n) * np.exp(-2j * np.pi * m @ t)).real
    assert np.allclose(moved, expected, atol=1e-12 * n.max())


def test_moved_atoms_start_is_exact_for_a_superposition():
    # a density that is itself a superposition of the atomic densities is carried to
    # exactly the superposition at the new positions (the scheme's first-order exactness),
    # and atoms that did not move leave any density unchanged
    species = ["Si", "Si"]
    new = POSITIONS + [[0.02, -0.01, 0.0], [0.0, 0.03, 0.01]]
    old_n = superposed_density(LATTICE, POSITIONS, species, GAUSS, GRID)
    new_n = superposed_density(LATTICE, new, species, GAUSS, GRID)
    out = moved_atoms_density(old_n, LATTICE, POSITIONS, new, species, GAUSS)
    assert np.allclose(out, new_n, rtol=0, atol=1e-12 * new_n.max())
    other = old_n * (1 + 0.3 * np.cos(2 * np.pi * np.arange(GRID[0]) / GRID[0]))[:, None, None]
    same = moved_atoms_density(other, LATTICE, POSITIONS, POSITIONS, species, GAUSS)
    assert np.allclose(same, other, rtol=0, atol=1e-14)
    # spin channels take half the change each and keep their own charges
    spin = np.stack([0.6 * old_n, 0.4 * old_n])
    out2 = moved_atoms_density(spin, LATTICE, POSITIONS, new, species, GAUSS)
    assert out2[0].mean() == pytest.approx(spin[0].mean(), rel=1e-12)
    assert np.allclose(out2.sum(axis=0), new_n, atol=1e-12 * new_n.max())


def test_pseudo_atom_form_factor_holds_the_valence_charge():
    # n(q = 0) = int n(r) d^3r: the neutral pseudo-atom holds the pseudopotential's
    # valence charge (4 for silicon); its form factor falls off with q (a smooth density)
    from pwsolid.preflight import load_pseudopotentials

    forms = atomic_density_forms(load_pseudopotentials(["Si"], LOCAL_SILICON))
    ff = forms["Si"].form_factor(np.array([0.0, 2.0, 30.0]))
    # the radial quadrature integrates the density to about 1e-9 (the solver tolerance)
    assert ff[0] == pytest.approx(4.0, rel=1e-7)
    assert abs(ff[1]) < 4.0 and ff[2] < 1e-6 * ff[0]
    # the Gaussian model holds the valence charge too (exactly, in closed form)
    gauss = atomic_density_forms(load_pseudopotentials(["Si"], LOCAL_SILICON), "gaussian")
    assert gauss["Si"].form_factor(np.array([0.0]))[0] == pytest.approx(4.0, rel=1e-14)
    # an element without a default valence configuration has no pseudo-atom: no forms
    # (the relaxation then starts from the carried density alone), not an error
    import dataclasses

    odd = dataclasses.replace(load_pseudopotentials(["Si"], LOCAL_SILICON)["Si"], element="Xq")
    assert atomic_density_forms({"Si": odd}) is None


def test_bonding_density_is_extrapolated_along_the_atoms_path():
    # atoms moving in equal steps R_k = R_0 + k d with a density N[R_k] + k D (a bonding
    # part changing linearly along the path): the continuation coefficient is exactly 1
    # and the start from the last two points is exact at the third (Lagrange, linear);
    # a step half as long gets alpha = 1/2, again exact for this linear model
    species = ["Si", "Si"]
    d = np.array([[0.01, -0.02, 0.005], [-0.015, 0.01, 0.02]])
    x = np.arange(GRID[0]) / GRID[0]
    # zero mean (the charge is fixed), and small enough that no density goes negative
    bond = (1e-4 * np.sin(2 * np.pi * x))[:, None, None] * np.ones(GRID)

    def density(k, step=1.0):
        return superposed_density(LATTICE, POSITIONS + k * step * d, species, GAUSS, GRID) + k * bond

    for step in (1.0, 0.5):
        new = POSITIONS + (1 + step) * d
        out = moved_atoms_density(density(1), LATTICE, POSITIONS + d, new, species, GAUSS,
                                  earlier=(density(0), POSITIONS))
        exact = superposed_density(LATTICE, new, species, GAUSS, GRID) + (1 + step) * bond
        assert np.allclose(out, exact, rtol=0, atol=1e-12 * exact.max())


def test_bonding_density_is_fitted_over_several_earlier_structures():
    # atoms on a plane of paths R(s, t) = R0 + s d1 + t d2 with a bonding part s B1 + t B2
    # linear in the positions: from (0, 0), (1, 0), (1, 1) the start at (2, 1.5) is exact
    # (new move (1, 0.5) = -0.5 (old - R(1, 0)) + 1 (old - R(0, 0))), which no
    # continuation of the last move alone can be (it is not along (0, 1))
    species = ["Si", "Si"]
    d1 = np.array([[0.01, -0.02, 0.005], [-0.015, 0.01, 0.02]])
    d2 = np.array([[-0.01, 0.0, 0.02], [0.02, 0.015, -0.005]])
    x = np.arange(GRID[0]) / GRID[0]
    y = np.arange(GRID[1]) / GRID[1]
    b1 = (1e-4 * np.sin(2 * np.pi * x))[:, None, None] * np.ones(GRID)
    b2 = (1e-4 * np.cos(2 * np.pi * y))[None, :, None] * np.ones(GRID)

    def at(s, t):
        pos = POSITIONS + s * d1 + t * d2
        return superposed_density(LATTICE, pos, species, GAUSS, GRID) + s * b1 + t * b2, pos

    (n_old, old), (n_1, p_1), (n_0, p_0) = at(1, 1), at(1, 0), at(0, 0)
    exact, new = at(2, 1.5)
    out = moved_atoms_density(n_old, LATTICE, old, new, species, GAUSS,
                              earlier=[(n_1, p_1), (n_0, p_0)])
    assert np.allclose(out, exact, rtol=0, atol=1e-12 * exact.max())
    one = moved_atoms_density(n_old, LATTICE, old, new, species, GAUSS, earlier=(n_1, p_1))
    assert np.abs(one - exact).max() > 1e-6           # the last move alone misses it


def test_an_scf_carried_on_to_tighter_tolerances_ends_at_the_straight_ground_state():
    # Invariance (common practice): the self-consistent solution does not depend on how
    # the SCF got there. A loosely converged SCF carried on (same densities, orbitals
    # and Pulay history) reaches the ground state of a straight SCF to the tight
    # tolerances, in fewer further iterations than the straight one takes in all.
    from pwsolid.scf import next_input_density

    si = diamond(10.26, "Si")
    tight = SETTINGS.replace(energy_tolerance=1e-9, density_tolerance=1e-7)
    loose = ground_state(si, tight.replace(energy_tolerance=1e-4, density_tolerance=1e-2),
                         resumable=True)
    before = [dict(h) for h in loose.history]
    carried = ground_state(si, tight, setup=prepare(si, tight), continue_from=loose)
    straight = ground_state(si, tight)
    assert loose.converged and carried.converged and straight.converged
    assert carried.free_energy == pytest.approx(straight.free_energy, abs=1e-8)
    assert np.abs(carried.density - straight.density).max() < 1e-5
    assert carried.history[:loose.iterations] == before        # the history goes on
    assert loose.history == before                              # the loose result is kept
    assert carried.iterations - loose.iterations < straight.iterations
    # the Pulay-mixed next density is nearer self-consistency than the output density
    mixed = next_input_density(loose)
    assert np.abs(mixed - straight.density).sum() < np.abs(loose.density - straight.density).sum()
    assert next_input_density(straight) is None                 # not kept unless asked
    with pytest.raises(ValueError):
        ground_state(si, tight, continue_from=straight)
