"""Unit conversion and strict parsing of "number unit" strings (pwsolid.units)."""

import math

import numpy as np
import pytest
from scipy import constants

from pwsolid.errors import InputError
from pwsolid.units import (BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV, KELVIN_HA,
                           parse_quantity, to_angstrom, to_ev)

# Reference numbers: CODATA 2018 as printed in REFERENCES.md section 0 ("Units"):
# 1 Ha = 27.211386 eV, 1 bohr = 0.529177210903 angstrom, 1 Ha/bohr^3 = 29421.02 GPa.
# Tolerances are half a unit in the last printed digit, except for the bohr radius:
# scipy may ship a later CODATA release (2022 moved the bohr radius by 7e-10
# relative, to 0.529177210544 angstrom), so lengths are compared to 1e-9 relative.


def test_hartree_in_ev_matches_codata():
    assert HARTREE_EV == pytest.approx(27.211386, abs=5e-7)
    assert HARTREE_EV == constants.physical_constants["Hartree energy in eV"][0]


def test_bohr_in_angstrom_matches_codata():
    assert BOHR_ANGSTROM == pytest.approx(0.529177210903, rel=1e-9)
    assert BOHR_ANGSTROM == pytest.approx(constants.physical_constants["Bohr radius"][0] * 1e10,
                                          rel=1e-15)


def test_pressure_unit_matches_codata():
    assert HA_PER_BOHR3_GPA == pytest.approx(29421.02, abs=5e-3)
    # 1 Ry/bohr^3 = half of that (REFERENCES.md section 0: 14710.51 GPa).
    assert HA_PER_BOHR3_GPA / 2 == pytest.approx(14710.51, abs=5e-3)


def test_kelvin_is_boltzmann_over_hartree():
    expected = constants.k / constants.physical_constants["Hartree energy"][0]
    assert KELVIN_HA == pytest.approx(expected, rel=1e-15)
    assert parse_quantity("300 K", "temperature") == pytest.approx(300 * expected, rel=1e-14)


@pytest.mark.parametrize("text, hartree", [
    ("1 Ha", 1.0),
    ("1 hartree", 1.0),
    ("2 Ry", 1.0),            # Ry = Ha / 2
    ("1 rydberg", 0.5),
    ("27.211386245988 eV", 1.0),
    ("1000 mHa", 1.0),
    ("-3.5e-2 Ha", -0.035),
])
def test_energy_conversions(text, hartree):
    assert parse_quantity(text, "energy") == pytest.approx(hartree, rel=1e-12)


def test_electronvolt_and_millielectronvolt():
    assert parse_quantity("1 eV", "energy") == pytest.approx(1 / HARTREE_EV, rel=1e-15)
    assert parse_quantity("1000 meV", "energy") == pytest.approx(1 / HARTREE_EV, rel=1e-14)


@pytest.mark.parametrize("text, bohr", [
    ("1 bohr", 1.0),
    ("0.529177210903 angstrom", 1.0),
    ("0.0529177210903 nm", 1.0),
    ("52.9177210903 pm", 1.0),
    ("0.529177210903 ang", 1.0),
])
def test_length_conversions(text, bohr):
    assert parse_quantity(text, "length") == pytest.approx(bohr, rel=1e-9)


@pytest.mark.parametrize("text, angstrom", [("1 angstrom", 1.0), ("1 nm", 10.0), ("100 pm", 1.0)])
def test_length_conversions_are_consistent_with_the_bohr_constant(text, angstrom):
    assert parse_quantity(text, "length") * BOHR_ANGSTROM == pytest.approx(angstrom, rel=1e-14)


def test_silicon_lattice_constant_in_bohr():
    # 5.43 angstrom / 0.529177210903 angstrom per bohr = 10.2612129 bohr.
    assert parse_quantity("5.43 angstrom", "length") == pytest.approx(10.2612129, abs=5e-7)


@pytest.mark.parametrize("text", ["15 HA", "15 ha", "15 Ha", "15 hArTrEe", " 15   Ha "])
def test_units_are_case_insensitive_and_whitespace_tolerant(text):
    assert parse_quantity(text, "energy") == 15.0


def test_number_without_space_before_unit_is_read():
    assert parse_quantity("15Ha", "energy") == 15.0


@pytest.mark.parametrize("value", [15, 15.0, "15", "  15  ", True, None, [15, "Ha"]])
def test_bare_numbers_and_non_strings_are_refused(value):
    with pytest.raises(InputError) as err:
        parse_quantity(value, "energy", key="basis.cutoff", source="run.toml")
    message = str(err.value)
    assert "run.toml" in message and "basis.cutoff" in message
    assert "15 Ha" in message          # the message shows how to write it


@pytest.mark.parametrize("text, fragment", [
    ("15 furlong", "unknown energy unit 'furlong'"),
    ("15 angstrom", "unknown energy unit"),      # a length where an energy is required
    ("Ha 15", "cannot read"),
    ("15 Ha Ha", "cannot read"),
    ("1,5 Ha", "cannot read"),
    ("inf Ha", "cannot read"),
    ("nan Ha", "cannot read"),
    ("", "cannot read"),
    ("15 eV/atom", "cannot read"),
])
def test_bad_energy_strings(text, fragment):
    with pytest.raises(InputError, match=fragment):
        parse_quantity(text, "energy")


def test_energy_unit_refused_for_a_length():
    with pytest.raises(InputError, match="unknown length unit 'Ha'"):
        parse_quantity("5 Ha", "length")


def test_overflowing_exponent_is_refused():
    with pytest.raises(InputError, match="not finite"):
        parse_quantity("1e999 Ha", "energy")


def test_error_carries_key_value_and_source():
    with pytest.raises(InputError) as err:
        parse_quantity("15 Hz", "energy", key="basis.cutoff", source="film.toml")
    assert err.value.key == "basis.cutoff"
    assert err.value.value == "15 Hz"
    assert err.value.source == "film.toml"
    assert "Ha, Ry, eV" in str(err.value)


def test_array_helpers():
    e = np.array([0.0, 1.0, -0.5])
    assert np.allclose(to_ev(e), e * HARTREE_EV)
    assert math.isclose(to_angstrom(1.0), BOHR_ANGSTROM)
