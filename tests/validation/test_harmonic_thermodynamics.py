"""Harmonic thermodynamics (pwsolid.thermodynamics) against exact models.

Sources: the Einstein solid (A. Einstein, Ann. Phys. 22, 180 (1907)); the Debye
model (P. Debye, Ann. Phys. 39, 789 (1912)): its T^3 law C_V = (12 pi^4 / 5) N k_B
(T / Theta)^3, its zero-point energy (9/8) N k_B Theta and its heat-capacity
integral; Dulong-Petit 3 k_B per atom (exact high-temperature limit of the harmonic
model); the single oscillator's F = k_B T ln(2 sinh(x/2)) and its classical limit
(N. W. Ashcroft and N. D. Mermin, Solid State Physics (1976), ch. 23; common practice);
thermodynamic identities S = -dF/dT, C_V = T dS/dT = dU/dT, F = U - T S (exact).
"""

import math

import numpy as np
import pytest
from scipy.integrate import quad

from pwsolid.errors import InputError
from pwsolid.thermodynamics import (VibrationalSpectrum, harmonic_thermodynamics,
                                    spectrum_from_dos)
from pwsolid.units import HARTREE_THZ, KELVIN_HA


def _einstein(theta, n_atoms=2):
    """3 n_atoms oscillators at k_B Theta, as one 'wave vector' of weight 1."""
    return VibrationalSpectrum(np.full((1, 3 * n_atoms), theta * KELVIN_HA), np.ones(1))


def test_einstein_solid_closed_forms():
    # Einstein (1907): C = 3 N k (Theta/T)^2 e^(Theta/T) / (e^(Theta/T) - 1)^2,
    # F = 3 N [k Theta / 2 + k T ln(1 - e^(-Theta/T))], U = 3 N k Theta [1/2 + 1/(e^(Theta/T) - 1)]
    theta, n = 500.0, 2
    t = np.array([0.0, 5.0, 50.0, 200.0, 500.0, 1000.0, 5000.0])
    th = harmonic_thermodynamics(_einstein(theta, n), t)
    y = theta / t[1:]
    k = KELVIN_HA
    c_exact = 3 * n * y ** 2 * np.exp(y) / np.expm1(y) ** 2
    f_exact = 3 * n * (k * theta / 2 + k * t[1:] * np.log(-np.expm1(-y)))
    u_exact = 3 * n * k * theta * (0.5 + 1.0 / np.expm1(y))
    s_exact = 3 * n * (y / np.expm1(y) - np.log(-np.expm1(-y)))
    # rounding only: the closed forms are the same functions written differently
    np.testing.assert_allclose(th.heat_capacity[1:], c_exact, rtol=1e-12, atol=1e-300)
    np.testing.assert_allclose(th.free_energy[1:], f_exact, rtol=1e-12)
    np.testing.assert_allclose(th.internal_energy[1:], u_exact, rtol=1e-12)
    np.testing.assert_allclose(th.entropy[1:], s_exact, rtol=1e-10, atol=1e-250)
    # T = 0: the ground state (exact)
    assert th.zero_point_energy == pytest.approx(3 * n * k * theta / 2, rel=1e-14)
    assert th.free_energy[0] == th.internal_energy[0] == th.zero_point_energy
    assert th.entropy[0] == 0.0 and th.heat_capacity[0] == 0.0
    # Dulong-Petit: C -> 3 k per atom with the leading correction 1 - (Theta/T)^2/12
    assert th.heat_capacity[-1] / (3 * n) == pytest.approx(1 - (theta / 5000) ** 2 / 12, rel=1e-6)


def test_single_oscillator_free_energy_and_classical_limit():
    # F = k T ln(2 sinh(x/2)) exactly; as x -> 0, F -> k T ln x + k T x^2/24 (classical
    # oscillator plus the first quantum correction), S -> k (1 + ln(1/x)), C -> k (1 - x^2/12)
    e = 0.001                       # Ha (6.6 THz)
    t = np.array([30.0, 300.0, 3e4, 3e5])
    th = harmonic_thermodynamics(VibrationalSpectrum([[e]], [1.0]), t)
    kt = t * KELVIN_HA
    x = e / kt
    np.testing.assert_allclose(th.free_energy, kt * np.log(2 * np.sinh(x / 2)), rtol=1e-11)
    hot = x < 0.01
    np.testing.assert_allclose(th.free_energy[hot], kt[hot] * (np.log(x[hot]) + x[hot] ** 2 / 24),
                               rtol=1e-8)   # next term is x^4/2880: 1e-11 relative here
    np.testing.assert_allclose(th.entropy[hot], 1 + np.log(1 / x[hot]), rtol=1e-5)
    np.testing.assert_allclose(th.heat_capacity[hot], 1 - x[hot] ** 2 / 12, rtol=1e-8)


def _debye_spectrum(theta, n_atoms, points=40001):
    # Debye DOS g(e) = 9 N e^2 / e_D^3 for e < e_D (Debye 1912), integrating to 3 N
    ed = theta * KELVIN_HA
    grid = np.linspace(0.0, ed, points)
    return spectrum_from_dos(grid, 9 * n_atoms * grid ** 2 / ed ** 3, n_modes=3 * n_atoms)


def test_debye_model_limits_and_integral():
    theta, n = 645.0, 2                 # silicon's Debye temperature (handbook, 11c; from memory)
    spec = _debye_spectrum(theta, n)
    t = np.array([theta / 200, theta / 100, theta / 50, theta / 3, theta, 30 * theta])
    th = harmonic_thermodynamics(spec, t)
    # the T^3 law with the 12 pi^4/5 prefactor, exact as T/Theta -> 0; at T = Theta/50
    # the neglected tail of the Debye integral is below 1e-15 of it; the grid
    # (step Theta/40000 = kT/800 at the lowest T) gives the trapezoid error ~1e-6
    low = t < theta / 40
    law = 12 * math.pi ** 4 / 5 * n * (t[low] / theta) ** 3
    np.testing.assert_allclose(th.heat_capacity[low], law, rtol=1e-4)
    # the Debye heat-capacity integral at every temperature
    for temp, c in zip(t, th.heat_capacity):
        y = theta / temp
        integral = quad(lambda x: x ** 4 * math.exp(-x) / (-math.expm1(-x)) ** 2, 0, y,
                        epsabs=0, epsrel=1e-12)[0]
        assert c == pytest.approx(9 * n * integral / y ** 3, rel=1e-5)
    # Dulong-Petit with the Debye correction 1 - (Theta/T)^2/20
    assert th.heat_capacity[-1] / (3 * n) == pytest.approx(1 - (1 / 30) ** 2 / 20, rel=1e-6)
    # zero-point energy (9/8) N k Theta (exact for the Debye DOS; trapezoid error ~1e-9)
    assert th.zero_point_energy == pytest.approx(9 / 8 * n * KELVIN_HA * theta, rel=1e-7)


def test_thermodynamic_identities_by_finite_differences():
    # a silicon-like spread of frequencies (THz) over a few wave vectors with weights
    rng = np.random.default_rng(7)
    freqs = np.sort(rng.uniform(1.0, 16.0, size=(5, 6)), axis=1)
    freqs[0, :3] = 0.0                          # acoustic modes at Gamma
    spec = VibrationalSpectrum.from_thz(freqs, np.array([1, 6, 8, 12, 5]) / 32)
    t = np.linspace(20.0, 1200.0, 12)
    h = 1e-3                                    # K; central differences err by ~h^2 f'''
    th = harmonic_thermodynamics(spec, np.concatenate([t, t + h, t - h]))
    f0, fp, fm = np.split(th.free_energy, 3)
    s0, sp, sm = np.split(th.entropy, 3)
    u0, up, um = np.split(th.internal_energy, 3)
    c0 = th.heat_capacity[:t.size]
    k = KELVIN_HA
    np.testing.assert_allclose(-(fp - fm) / (2 * h) / k, s0, rtol=1e-6)
    np.testing.assert_allclose(t * (sp - sm) / (2 * h), c0, rtol=1e-6)
    np.testing.assert_allclose((up - um) / (2 * h) / k, c0, rtol=1e-6)
    np.testing.assert_allclose(f0, u0 - k * t * s0, rtol=1e-12, atol=1e-14)
    # Gamma's acoustic modes are left out and counted; 6 modes of weight 1 in all
    assert th.zero_modes == pytest.approx(3 / 32)
    assert th.modes_counted + th.zero_modes == pytest.approx(6.0)
    # high temperature: 3 k per atom less the zero modes' share
    hot = harmonic_thermodynamics(spec, [1e6])
    assert hot.heat_capacity[0] == pytest.approx(6.0 - 3 / 32, rel=1e-6)


def test_extensive_and_weight_normalised():
    # two copies of a mesh with halved weights are the same mesh (per-cell quantities)
    freqs = np.array([[2.0, 4.0, 9.0], [3.0, 5.0, 11.0]])
    one = VibrationalSpectrum.from_thz(freqs, [0.5, 0.5])
    two = VibrationalSpectrum.from_thz(np.vstack([freqs, freqs]), [0.25] * 4)
    t = [0.0, 100.0, 700.0]
    a, b = harmonic_thermodynamics(one, t), harmonic_thermodynamics(two, t)
    np.testing.assert_allclose(a.free_energy, b.free_energy, rtol=1e-14)
    np.testing.assert_allclose(a.heat_capacity, b.heat_capacity, rtol=1e-14)
    # THz to Ha: h nu (CODATA through scipy.constants)
    assert one.energies[0, 0] == pytest.approx(2.0 / HARTREE_THZ)


def test_imaginary_modes_left_out_and_reported():
    spec = VibrationalSpectrum.from_thz([[-1.5, 0.0, 0.0, 5.0, 6.0, 7.0]], [1.0])
    th = harmonic_thermodynamics(spec, [300.0])
    assert th.imaginary_modes == 1.0 and th.zero_modes == 2.0 and th.modes_counted == 3.0
    assert any("imaginary" in m for m in th.messages)


@pytest.mark.parametrize("bad", [[-1.0, 10.0], [float("nan")], [], "warm"])
def test_bad_temperatures_are_input_errors(bad):
    with pytest.raises(InputError):
        harmonic_thermodynamics(_einstein(300.0), bad)
