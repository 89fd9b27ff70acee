"""Physical constants and unit conversion (layer 0).

Everything inside the package is in Hartree atomic units (energy in hartree,
length in bohr). Conversions at the edges use one CODATA release through
:mod:`scipy.constants`.

Values carry their unit in input files: ``"15 Ha"``, ``"5.43 angstrom"``.
:func:`parse_quantity` reads such strings strictly.
"""

from __future__ import annotations

import math
import re

from scipy import constants as _c

from .errors import InputError

__all__ = [
    "HARTREE_EV",
    "BOHR_ANGSTROM",
    "HA_PER_BOHR3_GPA",
    "HA_PER_BOHR2_ERG_PER_CM2",
    "KELVIN_HA",
    "SPEED_OF_LIGHT",
    "ENERGY_UNITS",
    "INVERSE_LENGTH_UNITS",
    "LENGTH_UNITS",
    "TEMPERATURE_UNITS",
    "parse_quantity",
    "to_ev",
    "to_angstrom",
]

#: 1 hartree in electronvolt (CODATA via scipy.constants).
HARTREE_EV: float = _c.physical_constants["Hartree energy in eV"][0]
#: 1 bohr in angstrom.
BOHR_ANGSTROM: float = _c.physical_constants["Bohr radius"][0] * 1e10
#: 1 Ha/bohr^3 in GPa.
HA_PER_BOHR3_GPA: float = (_c.physical_constants["Hartree energy"][0]
                           / _c.physical_constants["Bohr radius"][0] ** 3 / 1e9)
#: 1 Ha/bohr^2 (a surface energy) in erg/cm^2 (about 1.5569e6).
HA_PER_BOHR2_ERG_PER_CM2: float = (_c.physical_constants["Hartree energy"][0] * 1e7
                                   / (_c.physical_constants["Bohr radius"][0] * 100) ** 2)
#: Boltzmann constant times 1 K, in hartree.
KELVIN_HA: float = _c.k / _c.physical_constants["Hartree energy"][0]
#: Molar gas constant N_A k_B in J/(mol K) (heat capacities and entropies per mole).
GAS_CONSTANT_J_PER_MOL_K: float = _c.R
#: Speed of light in atomic units, 1/alpha (about 137.036).
SPEED_OF_LIGHT: float = 1.0 / _c.fine_structure

#: Accepted energy unit names and their size in hartree.
ENERGY_UNITS: dict[str, float] = {
    "ha": 1.0,
    "hartree": 1.0,
    "ry": 0.5,
    "rydberg": 0.5,
    "ev": 1.0 / HARTREE_EV,
    "mev": 1e-3 / HARTREE_EV,
    "mha": 1e-3,
}
#: Accepted length unit names and their size in bohr.
LENGTH_UNITS: dict[str, float] = {
    "bohr": 1.0,
    "angstrom": 1.0 / BOHR_ANGSTROM,
    "ang": 1.0 / BOHR_ANGSTROM,
    "a": 1.0 / BOHR_ANGSTROM,
    "nm": 10.0 / BOHR_ANGSTROM,
    "pm": 0.01 / BOHR_ANGSTROM,
}
#: Accepted inverse-length units (wave vectors) and their size in 1/bohr.
INVERSE_LENGTH_UNITS: dict[str, float] = {
    "bohr^-1": 1.0,
    "1/bohr": 1.0,
    "angstrom^-1": BOHR_ANGSTROM,
    "1/angstrom": BOHR_ANGSTROM,
}
#: Accepted temperature-like units (as an energy k_B T) and their size in hartree.
TEMPERATURE_UNITS: dict[str, float] = {"k": KELVIN_HA, "kelvin": KELVIN_HA}

_KINDS = {
    "energy": ENERGY_UNITS,
    "length": LENGTH_UNITS,
    "temperature": {**TEMPERATURE_UNITS, **ENERGY_UNITS},
    "inverse_length": INVERSE_LENGTH_UNITS,
}
_PRETTY = {
    "energy": "Ha, Ry, eV, meV, mHa",
    "length": "bohr, angstrom, nm, pm",
    "temperature": "K, Ha, Ry, eV, meV",
    "inverse_length": "bohr^-1, 1/bohr, angstrom^-1, 1/angstrom",
}
_NOUN = {"energy": "an energy", "length": "a length", "temperature": "a temperature",
         "inverse_length": "a wave vector"}
_NUMBER_UNIT = re.compile(
    r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([A-Za-z]+(?:\^-1)?|1/[A-Za-z]+)\s*$")


def parse_quantity(text, kind: str, *, key: str | None = None,
                   source: str | None = None) -> float:
    """Read a value with its unit and return it in atomic units.

    Parameters
    ----------
    text
        A string such as ``"15 Ha"`` or ``"5.43 angstrom"``. Bare numbers are
        refused: a unit must always be written.
    kind
        ``"energy"``, ``"length"``, ``"temperature"`` (returned as k_B T in Ha)
        or ``"inverse_length"`` (returned in 1/bohr).

    Returns
    -------
    float
        The value in hartree (energy, temperature) or bohr (length).

    Raises
    ------
    InputError
        For a missing, unknown or mismatched unit, or a non-finite number.
    """
    units = _KINDS[kind]
    if isinstance(text, bool) or not isinstance(text, str):
        raise InputError(
            f"expected {_NOUN[kind]} written with its unit as a string, e.g. "
            f"{_example(kind)!r}; accepted units: {_PRETTY[kind]}",
            key=key, value=text, source=source, has_value=True)
    m = _NUMBER_UNIT.match(text)
    if not m:
        raise InputError(
            f"cannot read a number followed by a unit; write e.g. {_example(kind)!r} "
            f"(accepted units: {_PRETTY[kind]})", key=key, value=text, source=source)
    number, unit = float(m.group(1)), m.group(2).lower()
    if unit not in units:
        raise InputError(f"unknown {kind} unit '{m.group(2)}'; accepted: {_PRETTY[kind]}",
                         key=key, value=text, source=source)
    value = number * units[unit]
    if not (math.isfinite(number) and math.isfinite(value)):
        raise InputError("the number is not finite", key=key, value=text, source=source)
    return value


def _example(kind: str) -> str:
    return {"energy": "15 Ha", "length": "5.43 angstrom", "temperature": "300 K",
            "inverse_length": "0.9 bohr^-1"}[kind]


def to_ev(energy_ha):
    """Convert hartree to electronvolt (works on arrays)."""
    return energy_ha * HARTREE_EV


def to_angstrom(length_bohr):
    """Convert bohr to angstrom (works on arrays)."""
    return length_bohr * BOHR_ANGSTROM


# --- lattice vibrations (appended for the phonon workflow) --------------------------
#: One dalton (unified atomic mass unit) in electron masses.
AMU_ELECTRON_MASSES: float = _c.physical_constants["atomic mass constant"][0] / _c.m_e
#: An angular frequency of 1 Ha/hbar as an ordinary frequency in THz (E_h / h / 1e12).
HARTREE_THZ: float = _c.physical_constants["hartree-hertz relationship"][0] * 1e-12
#: One THz in wavenumbers, cm^-1 (1e12 / c / 100).
THZ_INVERSE_CM: float = 1e12 / _c.c / 100.0
#: One THz as an energy in meV (h * 1e12 / e * 1e3).
THZ_MEV: float = _c.h * 1e12 / _c.e * 1e3
