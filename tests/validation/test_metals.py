"""Simple metals: smearing in the SCF, the free-electron limit and Kerker mixing."""

import numpy as np
import pytest

import pwsolid
from pwsolid.crystal import Crystal
from pwsolid.settings import GroundStateSettings

FCC = 0.5 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]])
A_AL = pwsolid.angstrom(4.05)   # aluminium at room temperature, 4.0495 A (REFERENCES 6a, from memory)


def _no_xc(n):
    return np.zeros_like(n), np.zeros_like(n)


@pytest.mark.slow
def test_free_electron_fermi_level_and_band_energy():
    # Jellium-like cell: no ions, a uniform background, no exchange-correlation, so the
    # electrons are free. Exact limit (Sommerfeld; REFERENCES 1a): E_F = (3 pi^2 n)^(2/3)/2
    # and the band energy per electron is 3/5 E_F. The k-mesh error must fall as the
    # mesh grows.
    jellium = Crystal(A_AL * FCC, (), np.zeros((0, 3)))
    n_el = 3.0
    e_fermi = 0.5 * (3 * np.pi ** 2 * n_el / jellium.volume) ** (2 / 3)
    errors = []
    for mesh in (6, 10, 16):
        gs = pwsolid.ground_state(jellium, GroundStateSettings(
            cutoff=4.0, kpoint_mesh=(mesh,) * 3, smearing="fermi-dirac", smearing_width=0.002,
            background_electrons=n_el, functional=_no_xc))
        band = float(np.sum(gs.kpoints.weights[:, None] * gs.occupations * gs.eigenvalues))
        errors.append((abs(gs.fermi_level / e_fermi - 1), abs(band / n_el / (0.6 * e_fermi) - 1)))
    errors = np.array(errors)
    assert errors[-1, 0] < 3e-3 and errors[-1, 1] < 3e-4    # 16^3: mesh accuracy
    assert errors[-1, 0] < errors[0, 0] and errors[-1, 1] < errors[0, 1]


@pytest.mark.parametrize("scheme", ["fermi-dirac", "gaussian", "methfessel-paxton", "cold"])
def test_electron_count_is_conserved_in_the_scf(scheme):
    al = pwsolid.face_centred_cubic(A_AL, "Al")
    gs = pwsolid.ground_state(al, GroundStateSettings(cutoff=5.0, kpoint_mesh=(4, 4, 4),
                                                      smearing=scheme, smearing_width=0.02))
    assert gs.converged
    count = float(gs.kpoints.weights @ gs.occupations.sum(axis=1))
    assert abs(count - 3.0) < 1e-10
    assert abs(gs.density.mean() * al.volume - 3.0) < 1e-10
    assert gs.free_energy <= gs.total_energy + 1e-12 or scheme != "fermi-dirac"


@pytest.mark.slow
def test_zero_width_estimates_agree_on_aluminium():
    # Common practice: Methfessel-Paxton (order 1) and cold smearing at a moderate width
    # give zero-width energies that agree with each other and with a much narrower
    # Fermi-Dirac run within 1 meV/atom, once the k-mesh resolves the narrow width.
    al = pwsolid.face_centred_cubic(A_AL, "Al")
    energies = {}
    for scheme, width in (("methfessel-paxton", 0.01), ("cold", 0.01), ("fermi-dirac", 0.002)):
        gs = pwsolid.ground_state(al, GroundStateSettings(cutoff=6.0, kpoint_mesh=(12, 12, 12),
                                                          smearing=scheme, smearing_width=width))
        energies[scheme] = gs.zero_width_energy
    spread = max(energies.values()) - min(energies.values())
    assert spread * pwsolid.HARTREE_EV < 1e-3, energies


@pytest.mark.slow
def test_aluminium_occupied_bandwidth_is_nearly_free_electron():
    # Fact of the trade: aluminium's occupied bandwidth is close to the free-electron
    # value of its valence density, (3 pi^2 n)^(2/3)/2 = 11.66 eV at r_s = 2.07
    # (REFERENCES 7 [C]); about 11 eV in LDA. Within 10%.
    al = pwsolid.face_centred_cubic(A_AL, "Al")
    gs = pwsolid.ground_state(al, GroundStateSettings(cutoff=8.0, kpoint_mesh=(10, 10, 10),
                                                      kpoint_shift=(0, 0, 0), smearing="cold"))
    width = (gs.fermi_level - gs.eigenvalues.min()) * pwsolid.HARTREE_EV
    free = 0.5 * (3 * np.pi ** 2 * 3 / al.volume) ** (2 / 3) * pwsolid.HARTREE_EV
    assert abs(free - 11.66) < 0.05
    assert abs(width / free - 1) < 0.10


def test_kerker_mixing_stops_charge_sloshing_in_a_long_cell():
    # A 12-atom aluminium cell three cubes long: long-wavelength charge sloshing makes
    # plain Pulay mixing slow; the Kerker preconditioner (Kerker, Phys. Rev. B 23, 3082
    # (1981)) damps it. Same answer, far fewer iterations.
    conv = Crystal(A_AL * np.eye(3), ("Al",) * 4,
                   [[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0]]).supercell((1, 1, 3))
    runs = {}
    for pre in ("none", "kerker"):
        runs[pre] = pwsolid.ground_state(conv, GroundStateSettings(
            cutoff=5.0, kpoint_mesh=(4, 4, 1), smearing="cold", smearing_width=0.01,
            mixing_preconditioner=pre, max_iterations=60, energy_tolerance=1e-7,
            density_tolerance=1e-5))
    assert runs["kerker"].converged and runs["none"].converged
    assert runs["kerker"].iterations < 0.6 * runs["none"].iterations
    assert abs(runs["kerker"].zero_width_energy - runs["none"].zero_width_energy) < 1e-6


def test_highest_band_holding_charge_is_reported():
    al = pwsolid.face_centred_cubic(A_AL, "Al")
    with pytest.warns(pwsolid.ConvergenceWarning, match="empty_bands"):
        gs = pwsolid.ground_state(al, GroundStateSettings(
            cutoff=5.0, kpoint_mesh=(4, 4, 4), smearing="fermi-dirac", smearing_width=0.3,
            empty_bands=0))
    assert any("empty_bands" in m for m in gs.messages)


def test_odd_electron_count_without_smearing_is_refused():
    na = pwsolid.body_centred_cubic(pwsolid.angstrom(4.23), "Na")
    with pytest.raises(pwsolid.InputError, match="even electron count"):
        pwsolid.ground_state(na, GroundStateSettings(cutoff=4.0, kpoint_mesh=(2, 2, 2)))


@pytest.mark.slow
def test_long_aluminium_supercell_converges_without_tuning():
    # Issue target: a 1x1x8 aluminium supercell (8 atoms in a row along a3) converges to
    # 1e-8 Ha with the default mixing (Kerker chosen automatically) in at most 25 SCF
    # iterations; charge sloshing would need many more.
    al = pwsolid.face_centred_cubic(A_AL, "Al").supercell((1, 1, 8))
    gs = pwsolid.ground_state(al, GroundStateSettings(cutoff=6.0, kpoint_mesh=(8, 8, 1),
                                                      smearing="cold"))
    assert gs.converged and gs.iterations <= 25
