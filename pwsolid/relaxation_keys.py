"""The ``[relaxation]`` table of an input file: its keys and how they are read (layer 6).

Kept apart from :mod:`pwsolid.config`, which only registers :data:`RELAXATION_KEYS`
(for unknown-key checks, ``pwsolid input-keys`` and the README table) and calls
:func:`read_relaxation`. Forces and pressures are written with their units:
``"1e-4 Ha/bohr"``, ``"0.003 eV/angstrom"`` (any energy unit over any length unit),
``"0.05 GPa"``, ``"0.5 kbar"``, ``"1e-6 Ha/bohr^3"``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from .errors import InputError
from .units import ENERGY_UNITS, HA_PER_BOHR3_GPA, LENGTH_UNITS, parse_quantity

__all__ = ["RELAXATION_KEYS", "read_relaxation", "parse_force", "parse_pressure", "plain_value"]

#: (key, kind, unit kind, default as written, meaning) of every key of [relaxation].
RELAXATION_KEYS: tuple[tuple[str, str, str, str, str], ...] = (
    ("moves", "name", "", '"positions"', "what moves: positions, cell or both"),
    ("force_threshold", "quantity", "force", '"1e-4 Ha/bohr"',
     'stop when every force is below this, e.g. "1e-4 Ha/bohr" or "0.003 eV/angstrom"'),
    ("stress_threshold", "quantity", "pressure", '"0.05 GPa"',
     '...and every component of stress + target pressure is below this, e.g. "0.05 GPa"'),
    ("target_pressure", "quantity", "pressure", '"0 GPa"',
     "external pressure of the enthalpy F + P V"),
    ("max_steps", "integer", "", "40", "largest number of moves (0: evaluate only)"),
    ("keep_symmetry", "boolean", "", "true", "keep the space group of the starting crystal"),
    ("largest_step", "quantity", "length", '"0.4 bohr"',
     "largest step of the optimiser (atoms, and strain times V^(1/3))"),
    ("basis_correction", "boolean", "", "true",
     "add the estimated basis-set (Pulay) stress, so the cell relaxes as a scan at this "
     "cutoff would"),
)

_PRESSURE_UNITS = {"gpa": 1.0, "mpa": 1e-3, "kbar": 0.1, "bar": 1e-4}
_UNIT_TEXT = {"force": "Ha/bohr, eV/angstrom (any energy unit / length unit)",
              "pressure": "GPa, MPa, kbar, bar, Ha/bohr^3, eV/angstrom^3"}
_EXAMPLE = {"force": '"1e-4 Ha/bohr"', "pressure": '"0.05 GPa"'}


def _per_length(text, kind: str, key: str, source) -> float:
    accepted = f"accepted units: {_UNIT_TEXT[kind]}"
    if isinstance(text, bool) or not isinstance(text, str):
        raise InputError(f"needs its unit, written as a string, e.g. {_EXAMPLE[kind]}; "
                         f"{accepted}", key=key, value=text, source=source, has_value=True)
    parts = text.split()
    try:
        number = float(parts[0]) if len(parts) == 2 else math.nan
    except ValueError:
        number = math.nan
    unit = parts[1].lower() if len(parts) == 2 else ""
    scale = None
    if kind == "pressure" and unit in _PRESSURE_UNITS:
        scale = _PRESSURE_UNITS[unit] / HA_PER_BOHR3_GPA
    elif unit.count("/") == 1:
        energy, length = unit.split("/")
        power = 3 if kind == "pressure" else 1
        if power == 3:
            length = length[:-2] if length.endswith("^3") else ""
        if energy in ENERGY_UNITS and length in LENGTH_UNITS:
            scale = ENERGY_UNITS[energy] / LENGTH_UNITS[length] ** power
    if scale is None or not math.isfinite(number):
        raise InputError(f"cannot read a number and a {kind} unit; {accepted}", key=key,
                         value=text, source=source)
    return number * scale


def parse_force(text, key: str = "force", source=None) -> float:
    """'1e-4 Ha/bohr' or '0.003 eV/angstrom' -> Ha/bohr; bare numbers are refused."""
    return _per_length(text, "force", key, source)


def parse_pressure(text, key: str = "pressure", source=None) -> float:
    """'0.05 GPa', '0.5 kbar' or '1e-6 Ha/bohr^3' -> Ha/bohr^3; bare numbers are refused."""
    return _per_length(text, "pressure", key, source)


def plain_value(value, kind: str, key: str, source=None):
    """A TOML integer or boolean of a table read by hand, checked: InputError otherwise
    (shared by the [relaxation] and [elastic_constants] readers)."""
    if kind == "integer" and (isinstance(value, bool) or not isinstance(value, int)):
        raise InputError("must be an integer (a TOML integer, no decimal point)", key=key,
                         value=value, source=source, has_value=True)
    if kind == "boolean" and not isinstance(value, bool):
        raise InputError("must be a TOML boolean: true or false (no quotes)", key=key,
                         value=value, source=source, has_value=True)
    return value


def read_relaxation(table: Mapping | None, source=None):
    """The :class:`~pwsolid.workflows.relaxation.RelaxationSettings` of a [relaxation]
    table (the defaults for ``None``); every mistake is one InputError naming the key."""
    from .workflows.relaxation import RelaxationSettings

    if table is None:
        return RelaxationSettings()
    kinds = {key: (kind, unit) for key, kind, unit, _, _ in RELAXATION_KEYS}
    kwargs = {}
    for key, value in table.items():
        dotted = f"relaxation.{key}"
        kind, unit = kinds[key]          # unknown keys were refused by the reader before

        def bad(why):
            raise InputError(why, key=dotted, value=value, source=source, has_value=True)

        if unit in ("force", "pressure"):
            kwargs[key] = _per_length(value, unit, dotted, source)
        elif unit == "length":
            kwargs[key] = parse_quantity(value, "length", key=dotted, source=source)
        elif kind in ("integer", "boolean"):
            kwargs[key] = plain_value(value, kind, dotted, source)
        else:
            if not isinstance(value, str):
                bad("must be one of positions, cell, both (a string)")
            kwargs[key] = value.strip().lower()
    try:
        return RelaxationSettings(**kwargs)
    except InputError as exc:
        raise exc.with_source(source) if source else exc from None
