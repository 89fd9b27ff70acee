"""Forces and pressures with their units in the [relaxation] table."""

import pytest

from pwsolid.errors import InputError
from pwsolid.relaxation_keys import parse_force, parse_pressure, read_relaxation
from pwsolid.units import BOHR_ANGSTROM, HARTREE_EV


def test_force_units():
    assert parse_force("1e-4 Ha/bohr") == pytest.approx(1e-4)
    # 1 eV/angstrom = 0.0194469 Ha/bohr (CODATA through scipy.constants)
    assert parse_force("1 eV/angstrom") == pytest.approx(BOHR_ANGSTROM / HARTREE_EV)
    assert parse_force("1 eV/angstrom") == pytest.approx(0.0194469, rel=1e-5)   # from memory
    assert parse_force("2 Ry/bohr") == pytest.approx(1.0)


def test_pressure_units():
    # 1 Ha/bohr^3 = 29421.02648 GPa (the contract of issue 16, CODATA 2018); scipy's
    # newer CODATA release differs in the 7th digit, hence 1e-6
    assert parse_pressure("29421.02648 GPa") == pytest.approx(1.0, rel=1e-6)
    assert parse_pressure("10 kbar") == pytest.approx(parse_pressure("1 GPa"))
    assert parse_pressure("1000 MPa") == pytest.approx(parse_pressure("1 GPa"))
    assert parse_pressure("1 Ha/bohr^3") == pytest.approx(1.0)
    assert parse_pressure("-2 GPa") < 0


@pytest.mark.parametrize("text", [1e-4, "1e-4", "1e-4 Ha", "1e-4 GPa", "x Ha/bohr",
                                  "1e-4 Ha/parsec"])
def test_bad_forces_are_refused(text):
    with pytest.raises(InputError, match="Ha/bohr"):
        parse_force(text, "relaxation.force_threshold")


def test_table_gives_settings():
    s = read_relaxation({"moves": "Both", "force_threshold": "0.003 eV/angstrom",
                         "stress_threshold": "0.5 kbar", "max_steps": 12,
                         "keep_symmetry": False, "largest_step": "0.2 angstrom"})
    assert s.moves == "both" and s.max_steps == 12 and not s.keep_symmetry
    assert s.largest_step == pytest.approx(0.2 / BOHR_ANGSTROM)
    assert s.stress_threshold == pytest.approx(parse_pressure("0.05 GPa"))
