"""Free electrons on the standard fcc band path: the exact limit of a zero potential.

Source: for V = 0 the bands are the sorted kinetic energies |k+G|^2/2 over the
reciprocal lattice (closed form). The fcc reciprocal lattice is G = (2 pi/a)(h, k, l) with
h, k, l all even or all odd, enumerated here independently of pwsolid.basis; the k-points
come from the Setyawan-Curtarolo path (REFERENCES 8b) in the crystal's fractional units.
"""

import numpy as np
import pytest

from pwsolid.bandpath import sample_path, standard_path
from pwsolid.basis import fft_grid_for_cutoff, make_basis
from pwsolid.crystal import diamond, face_centred_cubic
from pwsolid.pseudo.empirical import EmpiricalFormFactors, empirical_bands
from pwsolid.units import BOHR_ANGSTROM

A = 7.65                                  # aluminium-like cube edge in bohr (any value)
UNIT = (2 * np.pi / A) ** 2 / 2           # (2 pi/a)^2 / 2 in Ha
CUTOFF = 6.0 * UNIT                       # basis |k+G|^2 <= 12 (2 pi/a)^2
N_BANDS = 10                              # all complete below the cutoff on the whole path


def analytic_levels(k_cart_units: np.ndarray, limit: float) -> np.ndarray:
    """Sorted |k+G|^2/2 (Ha) <= limit; k in units of 2 pi/a, G over all-even/all-odd hkl."""
    hkl = np.array(np.meshgrid(*(np.arange(-6, 7),) * 3, indexing="ij")).reshape(3, -1).T
    hkl = hkl[np.all(hkl % 2 == hkl[:, :1] % 2, axis=1)]
    e = UNIT * np.sum((k_cart_units + hkl) ** 2, axis=1)
    return np.sort(e[e <= limit * (1 + 1e-12)])


@pytest.fixture(scope="module")
def path():
    return sample_path(standard_path(face_centred_cubic(A, "Al")), 61)


def test_kinetic_energies_of_the_basis_are_the_free_bands(path):
    # Exact limit: the basis holds exactly the analytic set below the cutoff (1e-12 relative).
    crystal = face_centred_cubic(A, "Al")
    grid = fft_grid_for_cutoff(crystal.lattice, CUTOFF)
    for k_frac, k_cart in zip(path.kpoints, path.cartesian):
        basis = make_basis(crystal.lattice, k_frac, CUTOFF, grid)
        ref = analytic_levels(k_cart / (2 * np.pi / A), CUTOFF)
        assert basis.size == len(ref)
        np.testing.assert_allclose(basis.kinetic, ref, rtol=1e-12)
        assert len(ref) >= N_BANDS


def test_zero_potential_hamiltonian_gives_the_free_bands(path):
    # The dense plane-wave Hamiltonian with every form factor zero, diagonalised: its
    # lowest bands are the analytic levels (1e-10 Ha: eigensolver round-off).
    zero = EmpiricalFormFactors(("Si", "Si"), A * BOHR_ANGSTROM, {3: 0.0}, {3: 0.0},
                                "none (free electrons)", "[C] exact limit")
    crystal = diamond(A, "Si")
    bands = empirical_bands(zero, path.kpoints, N_BANDS, cutoff=CUTOFF, crystal=crystal)
    for e, k_cart in zip(bands, path.cartesian):
        np.testing.assert_allclose(e, analytic_levels(k_cart / (2 * np.pi / A), CUTOFF)[:N_BANDS],
                                   atol=1e-10)


@pytest.mark.parametrize("label, energy, degeneracy", [
    ("Γ", 0.0, 1), ("X", 1.0, 2), ("L", 0.75, 2), ("W", 1.25, 4), ("K", 1.125, 3), ("U", 1.125, 3)])
def test_lowest_free_level_at_special_points(path, label, energy, degeneracy):
    # Closed form [C]: the lowest level at X = (0,1,0) is |X|^2 = 1 (2 pi/a)^2, shared with
    # X - (0,2,0); L: 3/4, twofold; W = (1/2,1,0): 5/4 with four images; K = (3/4,3/4,0) and
    # U = (1/4,1,1/4): 9/8, threefold. Energies in units of (2 pi/a)^2 / 2 (exact, 1e-12).
    index = [i for i, lab in path.labels if lab == label][0]
    crystal = face_centred_cubic(A, "Al")
    basis = make_basis(crystal.lattice, path.kpoints[index], CUTOFF,
                       fft_grid_for_cutoff(crystal.lattice, CUTOFF))
    assert basis.kinetic[0] == pytest.approx(energy * UNIT, abs=1e-12)
    assert np.sum(np.isclose(basis.kinetic, basis.kinetic[0], rtol=1e-10, atol=1e-14)) == degeneracy
