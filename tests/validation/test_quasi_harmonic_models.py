"""The quasi-harmonic driver on model crystals whose answer is known exactly.

Model: a static Birch-Murnaghan E(V) (F. Birch, Phys. Rev. 71, 809 (1947)) and
Einstein branches whose frequencies scale as omega_i(V) = omega_i (V/V_ref)^(-gamma_i)
with constant mode Grueneisen parameters (the Grueneisen model: E. Grueneisen, Ann.
Phys. 39, 257 (1912); N. W. Ashcroft and N. D. Mermin, Solid State Physics (1976),
ch. 25). Then dF_vib/dV = -sum_i gamma_i U_i / V exactly, so the minimum of
E + F_vib solves P_static(V) = -sum_i gamma_i U_i(V, T) / V, and the exact
quasi-harmonic identity alpha_V B_T = sum_i gamma_i C_i / V holds at every T.
"""

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from pwsolid.eos import birch_murnaghan_energy, birch_murnaghan_pressure
from pwsolid.thermodynamics import VibrationalSpectrum, harmonic_thermodynamics
from pwsolid.units import HARTREE_THZ, KELVIN_HA
from pwsolid.workflows.thermal_expansion import quasi_harmonic_from_spectra

V0, B0, BP = 270.0, 0.0033, 4.2           # a silicon-like cell: bohr^3, Ha/bohr^3 (97 GPa)


def _model(branches):
    """branches: list of (THz at V0, count, gamma)."""
    def spectrum(v):
        e = np.concatenate([np.full(n, nu / HARTREE_THZ * (v / V0) ** (-g))
                            for nu, n, g in branches])
        return VibrationalSpectrum(e[None, :], np.ones(1))

    def thermal_pressure(v, t):
        # sum_i gamma_i U_i / V with U_i the oscillator's energy (zero point included)
        total = 0.0
        for nu, n, g in branches:
            th = harmonic_thermodynamics(VibrationalSpectrum(
                np.full((1, n), nu / HARTREE_THZ * (v / V0) ** (-g)), np.ones(1)), [t])
            total += g * th.internal_energy[0]
        return total / v

    def exact_volume(t):
        return brentq(lambda v: birch_murnaghan_pressure(v, V0, B0, BP) + thermal_pressure(v, t),
                      0.9 * V0, 1.1 * V0, xtol=1e-13, rtol=1e-15)

    return spectrum, exact_volume


def _run(branches, temperatures, spread=0.04, n=11):
    spectrum, exact_volume = _model(branches)
    volumes = V0 * np.linspace(1 - spread, 1 + spread, n)
    energies = birch_murnaghan_energy(volumes, -7.9, V0, B0, BP)
    qha = quasi_harmonic_from_spectra(volumes, energies, [spectrum(v) for v in volumes],
                                      temperatures, n_atoms=2, reference_volume=V0,
                                      reference_lengths={"a": 10.26})
    return qha, exact_volume


def test_einstein_gruneisen_solid_volume_and_expansion():
    branches = [(10.0, 6, 1.2)]
    t = np.arange(0.0, 1001.0, 10.0)
    qha, exact_volume = _run(branches, t)
    exact = np.array([exact_volume(x) for x in t])
    # the Birch form fitted to a non-Birch F(V) over +-4 %: V(T) to 1e-6 relative (the
    # form's model error, measured 4e-8 on 2026-12-05; zero-point and thermal shifts ~1e-3)
    np.testing.assert_allclose(qha.volume, exact, rtol=1e-6)
    # zero-point correction: exact minimum of E + E_zp
    assert qha.zero_point_fit.v0 == pytest.approx(exact[0], rel=1e-6)
    assert qha.static_fit.v0 == pytest.approx(V0, rel=1e-9)     # exact Birch data
    assert qha.zero_point_volume_change > 0
    # expansion coefficient against derivatives of the exact V(T)
    h = 0.01
    hot = t >= 100
    exact_alpha = np.array([(exact_volume(x + h) - exact_volume(x - h)) / (2 * h) / exact_volume(x)
                            for x in t[hot]])
    # second-order differences over a 10 K grid and the fit error: 1 % (measured 0.15 %)
    np.testing.assert_allclose(qha.volume_expansion[hot], exact_alpha, rtol=1e-2)
    # alpha_V B_T V = gamma C_V (constant gamma: the Grueneisen relation, exact in the model)
    cv = qha.heat_capacity_volume[hot] * KELVIN_HA
    np.testing.assert_allclose(qha.volume_expansion[hot] * qha.bulk_modulus[hot] * qha.volume[hot],
                               1.2 * cv, rtol=1e-2)
    np.testing.assert_allclose(qha.gruneisen[hot], 1.2, rtol=1e-2)
    # the mode Grueneisen parameters are the model's, from ln omega against ln V
    np.testing.assert_allclose(qha.mode_gruneisen, 1.2, rtol=1e-10)
    # C_P > C_V and the third law
    assert np.all(qha.heat_capacity_pressure[hot] > qha.heat_capacity_volume[hot])
    assert qha.volume_expansion[0] == 0.0 and qha.heat_capacity_volume[0] == pytest.approx(0, abs=1e-12)
    assert qha.converged and qha.trusted_up_to == 1000.0
    doc = qha.as_document()
    assert doc["lattice_angstrom"]["a"][0] > doc["zero_point"]["static_lattice_angstrom"]["a"]


def test_negative_expansion_from_a_soft_branch_with_negative_gamma():
    # a low branch with gamma < 0 (like silicon's transverse acoustic modes) and a high one
    # with gamma > 0: alpha_V ~ sum gamma_i C_i(T) changes sign where that sum vanishes
    branches = [(3.0, 2, -1.5), (12.0, 4, 1.0)]
    t = np.arange(0.0, 401.0, 2.0)
    qha, exact_volume = _run(branches, t)

    def weighted(temp):
        total = 0.0
        for nu, n, g in branches:
            x = nu / HARTREE_THZ / (temp * KELVIN_HA)
            total += g * n * x * x * math.exp(-x) / (-math.expm1(-x)) ** 2
        return total

    # frequencies at V(T) differ from those at V_ref by ~1e-3: the root moves by < 1 K
    t_sign = brentq(weighted, 5.0, 300.0)
    neg = qha.negative_expansion()
    assert neg is not None and neg["minimum_linear_per_K"] < 0
    assert neg["to_K"] == pytest.approx(t_sign, abs=3.0)      # grid step 2 K plus the shift
    exact = np.array([exact_volume(x) for x in (0.0, 50.0, 100.0)])
    np.testing.assert_allclose(qha.volume[[0, 25, 50]], exact, rtol=1e-6)


def test_minimum_leaving_the_volumes_is_flagged():
    branches = [(4.0, 6, 3.0)]                 # a huge thermal pressure
    qha, _ = _run(branches, [0.0, 200.0, 400.0, 800.0, 1600.0], spread=0.01, n=7)
    assert not qha.converged
    assert qha.trusted_up_to is not None and qha.trusted_up_to < 1600.0
    assert any("outside the sampled volumes" in m for m in qha.messages)


def test_full_driver_with_model_solvers(tmp_path):
    # the scan and the phonons replaced by the model: the driver must hand the volumes,
    # energies and spectra over unchanged and scale the lattice as V^(1/3)
    from types import SimpleNamespace

    from pwsolid.crystal import diamond
    from pwsolid.workflows.thermal_expansion import quasi_harmonic

    crystal = diamond(10.26, "Si")
    branches = [(10.0, 6, 1.2)]
    spectrum, exact_volume = _model(branches)
    scale = V0 / crystal.volume          # model volumes are the crystal's times this

    def scan_solver(cell, settings, warm):
        e = birch_murnaghan_energy(cell.volume * scale, -7.9, V0, B0, BP)
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=1, density=None)

    def phonon_solver(cell, settings, phonon_settings, **kwargs):
        s = spectrum(cell.volume * scale)
        mesh = SimpleNamespace(frequencies_THz=s.energies * HARTREE_THZ, weights=s.weights,
                               mesh=(1, 1, 1))
        return SimpleNamespace(mesh_frequencies=lambda q: mesh, converged=True, messages=())

    qha = quasi_harmonic(crystal, temperatures=[0.0, 100.0, 200.0, 300.0], volume_range=0.04,
                         n_points=9, q_mesh=(1, 1, 1), scan_solver=scan_solver,
                         phonon_solver=phonon_solver, record_dir=tmp_path)
    # the model in the crystal's volume units: V_exact / scale, to the fit's 1e-6
    np.testing.assert_allclose(qha.volume * scale, [exact_volume(x) for x in qha.temperatures],
                               rtol=1e-6)
    a = qha.lattice(qha.volume)["a"]
    np.testing.assert_allclose(a, 10.26 * (qha.volume / crystal.volume) ** (1 / 3), rtol=1e-12)
    assert len(qha.history) == 9 and qha.converged


def _bond_springs(reference, stiffness):
    """Forces of nearest-neighbour springs (along and across each bond, Ha/bohr^2 times
    ``stiffness``) of a diamond supercell ``reference``: a harmonic model whose every
    frequency scales as sqrt(stiffness)."""
    import itertools

    from pwsolid.workflows.phonons import DisplacedForces

    shifts = np.array(list(itertools.product(range(-1, 2), repeat=3))) @ reference.lattice
    ref = reference.cartesian_positions
    bond = math.sqrt(3) / 4 * (4 * reference.volume / reference.n_atoms * 2) ** (1 / 3)

    def solve(crystal, settings, start):
        du = crystal.positions - reference.positions
        u = (du - np.rint(du)) @ crystal.lattice
        f = np.zeros_like(u)
        for i, j in itertools.product(range(len(u)), repeat=2):
            for t in shifts:
                r = ref[j] + t - ref[i]
                d = np.linalg.norm(r)
                if 1e-8 < d < 1.2 * bond:
                    e = r / d
                    k = stiffness * (0.1 * np.outer(e, e) + 0.02 * (np.eye(3) - np.outer(e, e)))
                    f[i] += k @ (u[j] - u[i])
        return DisplacedForces(f, True, 1, 0.0)
    return solve


def test_driver_through_the_phonon_workflow():
    # springs stiffening as V^(-2 gamma) make every frequency scale as V^(-gamma): the
    # real phonon workflow (supercell, displacements, force constants, q-mesh) must give
    # mode Grueneisen parameters gamma and the V(T) of the Grueneisen relation
    from types import SimpleNamespace

    from pwsolid.crystal import diamond
    from pwsolid.force_constants import make_supercell
    from pwsolid.settings import GroundStateSettings
    from pwsolid.workflows.phonons import PhononSettings, phonons
    from pwsolid.workflows.thermal_expansion import quasi_harmonic

    crystal = diamond(10.26, "Si")
    gamma, mesh = 1.3, (4, 4, 4)
    ps = PhononSettings(supercell=(2, 2, 2), dos_mesh=(4, 4, 4), path_points=20)
    settings = GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2))

    def phonon_solver(cell, s, p, **kw):
        stiffness = (cell.volume / crystal.volume) ** (-2 * gamma)
        sup = make_supercell(cell, (2, 2, 2)).supercell
        return phonons(cell, settings, ps, solver=_bond_springs(sup, stiffness))

    def scan_solver(cell, s, warm):
        e = birch_murnaghan_energy(cell.volume, -7.9, crystal.volume, B0, BP)
        return SimpleNamespace(total_energy=float(e), converged=True, iterations=1, density=None)

    t = np.array([0.0, 150.0, 300.0, 450.0])
    qha = quasi_harmonic(crystal, settings, ps, temperatures=t, volume_range=0.03, n_points=7,
                         q_mesh=mesh, scan_solver=scan_solver, phonon_solver=phonon_solver)
    # 1e-6: the modes come from diagonalised dynamical matrices, the springs are exact
    np.testing.assert_allclose(qha.mode_gruneisen[np.isfinite(qha.mode_gruneisen)], gamma,
                               rtol=1e-6)
    # the exact V(T): P_static(V) = -gamma U(V, T) / V with the mesh spectrum at V
    ref = phonons(crystal, settings, ps, solver=_bond_springs(
        make_supercell(crystal, (2, 2, 2)).supercell, 1.0)).mesh_frequencies(mesh)

    def u_of(v, temp):
        spec = VibrationalSpectrum.from_thz(ref.frequencies_THz * (v / crystal.volume) ** -gamma,
                                            ref.weights)
        return harmonic_thermodynamics(spec, [temp]).internal_energy[0]

    exact = [brentq(lambda v: birch_murnaghan_pressure(v, crystal.volume, B0, BP)
                    + gamma * u_of(v, temp) / v, 0.95 * crystal.volume, 1.05 * crystal.volume,
                    xtol=1e-12) for temp in t]
    np.testing.assert_allclose(qha.volume, exact, rtol=1e-6)
