"""Collinear spin-polarised (LSDA) self-consistency."""

import numpy as np
import pytest

import pwsolid
from pwsolid.workflows.jellium import jellium_cell
from pwsolid.xc import get_functional


def test_non_magnetic_silicon_is_unchanged_by_spin_polarisation():
    # Invariance: with zero moment the LSDA equations reduce to the LDA ones exactly.
    si = pwsolid.diamond(pwsolid.angstrom(5.431), "Si")
    s = pwsolid.GroundStateSettings(cutoff=8.0, kpoint_mesh=(2, 2, 2))
    plain = pwsolid.ground_state(si, s)
    spin = pwsolid.ground_state(si, s.replace(spin_polarized=True))
    assert abs(spin.total_energy - plain.total_energy) < 1e-8
    assert abs(spin.magnetization) < 1e-8 and abs(spin.absolute_magnetization) < 1e-8


def test_aluminium_loses_a_starting_moment():
    # Aluminium is a Pauli paramagnet (common practice): a starting moment relaxes to zero
    # and the free energy equals the unpolarised one.
    al = pwsolid.face_centred_cubic(pwsolid.angstrom(4.05), "Al")
    s = pwsolid.GroundStateSettings(cutoff=6.0, kpoint_mesh=(6, 6, 6), smearing="cold")
    plain = pwsolid.ground_state(al, s)
    spin = pwsolid.ground_state(al, s.replace(spin_polarized=True, initial_moment=1.0))
    assert abs(spin.magnetization) < 1e-5
    assert abs(spin.free_energy - plain.free_energy) < 1e-8
    doc = pwsolid.ground_state_document(spin)
    assert doc["spin"]["polarized"] and len(doc["spin"]["eigenvalues_down_eV"]) == len(doc["eigenvalues_eV"])


@pytest.mark.slow
def test_fully_polarised_jellium_reaches_the_analytic_energy():
    # Exact limit (REFERENCES 1a): at zeta = 1 the kinetic energy per electron is 2^(2/3)
    # times 1.104951/rs^2, and exchange-correlation is the functional's zeta = 1 value.
    rs, n_el = 4.0, 2.0
    cell = jellium_cell(rs, n_el)
    e_f = 0.5 * (9 * np.pi / 4) ** (2 / 3) / rs ** 2 * 2 ** (2 / 3)
    errors = []
    for mesh in (8, 16):
        gs = pwsolid.ground_state(cell, pwsolid.GroundStateSettings(
            cutoff=8 * e_f + 1, kpoint_mesh=(mesh,) * 3, smearing="fermi-dirac",
            smearing_width=0.02 * e_f, background_electrons=n_el, functional="lda-pw92",
            spin_polarized=True, fixed_moment=n_el))
        n = n_el / cell.volume
        eps, _, _ = get_functional("lda-pw92").evaluate_polarized(np.array([n]), np.array([0.0]))
        exact = 1.104951 / rs ** 2 * 2 ** (2 / 3) + eps[0]
        errors.append(abs(gs.zero_width_energy / n_el - exact))
        assert abs(gs.magnetization - n_el) < 1e-9
    assert errors[-1] < 3e-6 and errors[-1] < errors[0]
