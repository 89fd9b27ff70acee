"""The gradient-corrected potential is the functional derivative of the grid energy.

For E[n] = (Omega/N) sum_r e(n, |grad n|^2) with spectral gradients,
dE/d epsilon of E[n + epsilon dn] at epsilon = 0 must equal (Omega/N) sum_r v dn
(definition of the functional derivative, [C]). Checked on a realistic periodic
density, a sum of Gaussians on a face-centred cell with an odd and an even grid
dimension (so the Nyquist planes are included), unpolarised and spin-polarised, and on
self-consistent silicon with the Perdew-Burke-Ernzerhof functional (J. P. Perdew,
K. Burke and M. Ernzerhof, Phys. Rev. Lett. 77, 3865 (1996)).
"""

import numpy as np
import pytest

from pwsolid.basis import grid_g_vectors
from pwsolid.crystal import diamond
from pwsolid.fft import make_fft_grid
from pwsolid.scf import ground_state
from pwsolid.settings import GroundStateSettings
from pwsolid.xc import get_functional
from pwsolid.xc_grid import exchange_correlation_on_grid

from conftest import SILICON_A

# The issue asks for 1e-6 relative; central differences with a relative step of 1e-4
# have truncation ~1e-8 and rounding ~1e-12, and in practice agree to ~1e-10.
TOLERANCE = 1e-6
STEP = 1e-4


def _cell():
    a = 6.0
    lattice = 0.5 * a * np.array([[0.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 0.0]])
    shape = (17, 18, 20)
    return lattice, make_fft_grid(shape), grid_g_vectors(lattice, shape)


def _gaussians(lattice, g, fft, centres, width, charge):
    """Periodic Gaussians of the given charge, built from their Fourier series."""
    volume = abs(np.linalg.det(lattice))
    g2 = np.einsum("...a,...a->...", g, g)
    coefficients = np.zeros(g.shape[:-1], complex)
    for centre in centres:
        position = np.asarray(centre) @ lattice
        coefficients += charge / volume * np.exp(-g2 * width ** 2 / 4 - 1j * (g @ position))
    return fft.field_to_real(coefficients).real


def _directional_check(functional, density, change, fft, g, volume):
    def energy(x):
        return exchange_correlation_on_grid(functional, x, fft, g).energy(volume)

    potential = exchange_correlation_on_grid(functional, density, fft, g).potential
    predicted = float(np.sum(potential * change)) * volume / fft.size
    numerical = (energy(density + STEP * change) - energy(density - STEP * change)) / (2 * STEP)
    return numerical, predicted


def _densities():
    lattice, fft, g = _cell()
    bonds = _gaussians(lattice, g, fft, [[0, 0, 0], [0.25, 0.25, 0.25]], 1.2, 4.0) + 2e-3
    moment = 0.8 * _gaussians(lattice, g, fft, [[0, 0, 0]], 1.0, 1.0)
    change = (_gaussians(lattice, g, fft, [[0.1, 0.3, 0.2]], 1.0, 1.0)
              - _gaussians(lattice, g, fft, [[0.6, 0.1, 0.4]], 1.5, 1.0))
    other = _gaussians(lattice, g, fft, [[0.3, 0.3, 0.1]], 1.3, 1.0)
    return lattice, fft, g, bonds, moment, change, other


@pytest.mark.parametrize("name", ["pbe", "pbe-exchange"])
def test_potential_is_the_derivative_of_the_grid_energy(name):
    lattice, fft, g, bonds, moment, change, other = _densities()
    volume = abs(np.linalg.det(lattice))
    assert bonds.min() > 0.0
    functional = get_functional(name)
    numerical, predicted = _directional_check(functional, bonds, change, fft, g, volume)
    assert abs(numerical / predicted - 1.0) < TOLERANCE, (numerical, predicted)

    spins = np.stack([0.5 * (bonds + moment), 0.5 * (bonds - moment)])
    assert spins.min() > 0.0
    numerical, predicted = _directional_check(functional, spins, np.stack([change, other]),
                                              fft, g, volume)
    assert abs(numerical / predicted - 1.0) < TOLERANCE, (numerical, predicted)


def test_the_check_detects_a_potential_without_the_divergence_term():
    # The local part de/dn alone is not the derivative: the test can fail.
    lattice, fft, g, bonds, _, change, _ = _densities()
    volume = abs(np.linalg.det(lattice))
    functional = get_functional("pbe")
    full = exchange_correlation_on_grid(functional, bonds, fft, g)
    sigma = np.zeros_like(bonds)
    coefficients = fft.field_to_reciprocal(bonds)
    for axis in range(3):
        sigma += fft.field_to_real(1j * g[..., axis] * coefficients).real ** 2
    local_only = functional.evaluate_gradient(bonds, sigma)[1]
    np.testing.assert_allclose(full.energy_density,
                               functional.evaluate_gradient(bonds, sigma)[0], rtol=1e-12)
    numerical, _ = _directional_check(functional, bonds, change, fft, g, volume)
    wrong = float(np.sum(local_only * change)) * volume / fft.size
    assert abs(wrong / numerical - 1.0) > 100 * TOLERANCE


def test_vacuum_regions_stay_finite():
    # A Gaussian in a large cell: the density falls to ~1e-30 and below, and the
    # Fourier series rings slightly negative there; energy and potential stay finite.
    lattice = np.diag([14.0, 14.0, 14.0])
    shape = (24, 24, 24)
    fft, g = make_fft_grid(shape), grid_g_vectors(lattice, shape)
    density = _gaussians(lattice, g, fft, [[0.5, 0.5, 0.5]], 1.0, 2.0)
    assert density.min() < 1e-12
    with np.errstate(all="raise"):
        for field in (density, np.stack([0.7 * density, 0.3 * density])):
            result = exchange_correlation_on_grid(get_functional("pbe"), field, fft, g)
            assert np.all(np.isfinite(result.potential))
            assert np.isfinite(result.energy(14.0 ** 3)) and result.energy(14.0 ** 3) < 0


@pytest.fixture(scope="module")
def silicon_pair():
    silicon = diamond(SILICON_A, "Si")
    settings = GroundStateSettings(cutoff=10.0, kpoint_mesh=(2, 2, 2), energy_tolerance=1e-9,
                                   density_tolerance=1e-7)
    return {name: ground_state(silicon, settings.replace(functional=name))
            for name in ("lda-pw92", "pbe")}


def test_silicon_ground_state_with_pbe(silicon_pair):
    pbe, lda = silicon_pair["pbe"], silicon_pair["lda-pw92"]
    assert pbe.converged and lda.converged
    setup = pbe.setup
    grid = exchange_correlation_on_grid(setup.functional, pbe.density, setup.fft,
                                        setup.g_vectors)
    # the reported XC energy is the grid energy of the self-consistent density
    assert abs(grid.energy(setup.volume) - pbe.energy.exchange_correlation) < 1e-10
    # F_x >= 1: PBE exchange of a density is below its Slater exchange, exactly
    exchange = exchange_correlation_on_grid(get_functional("pbe-exchange"), pbe.density,
                                            setup.fft, setup.g_vectors)
    slater = exchange_correlation_on_grid(get_functional("slater-exchange"), pbe.density)
    assert exchange.energy(setup.volume) < slater.energy(setup.volume)
    # sensible size of the gradient correction to the total energy: tens of mHa per
    # atom at most for a valence-only solid (common practice); found -8 mHa per atom
    difference = (pbe.total_energy - lda.total_energy) / 2
    assert 1e-3 < abs(difference) < 5e-2, difference


def test_silicon_potential_is_the_derivative_of_its_energy(silicon_pair):
    pbe = silicon_pair["pbe"]
    setup = pbe.setup
    density = pbe.density
    # a smooth change of the density that keeps the symmetry-free grid busy
    change = np.roll(density, 3, axis=0) - density.mean()
    numerical, predicted = _directional_check(setup.functional, density, change, setup.fft,
                                              setup.g_vectors, setup.volume)
    assert abs(numerical / predicted - 1.0) < TOLERANCE, (numerical, predicted)


@pytest.mark.slow
def test_pbe_expands_the_silicon_lattice():
    # Gradient corrections expand lattice constants (common practice; from memory Si
    # 5.40 angstrom in LDA, about 5.47 in PBE with consistent pseudopotentials). The
    # bundled Goedecker-Teter-Hutter pseudopotential was fitted within LDA and the basis
    # is small, so only the sign is asserted (found: +0.009 angstrom at 10 Ha, 2x2x2).
    from pwsolid.basis import fft_grid_for_cutoff

    scales = np.array([0.97, 0.985, 1.0, 1.015, 1.03])
    grid = fft_grid_for_cutoff(diamond(1.03 * SILICON_A, "Si").lattice, 10.0)
    minima = {}
    for name in ("lda-pw92", "pbe"):
        settings = GroundStateSettings(cutoff=10.0, kpoint_mesh=(2, 2, 2), fft_grid=grid,
                                       functional=name, energy_tolerance=1e-9,
                                       density_tolerance=1e-7)
        energies = [ground_state(diamond(x * SILICON_A, "Si"), settings).total_energy
                    for x in scales]
        fit = np.polynomial.Polynomial.fit(scales * SILICON_A, energies, 3)
        roots = fit.deriv().roots()
        roots = roots[np.isreal(roots)].real
        minima[name] = float(roots[fit.deriv(2)(roots) > 0][0])
    assert scales[0] * SILICON_A < minima["lda-pw92"] < minima["pbe"] < scales[-1] * SILICON_A
