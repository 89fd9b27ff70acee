"""The ``[phonons]`` table of an input file: its keys and how they are read (layer 6).

Kept apart from :mod:`pwsolid.config`, which only registers :data:`PHONON_KEYS`
(for unknown-key checks, ``pwsolid input-keys`` and the README table) and calls
:func:`read_phonons`. Lengths carry their units (``"0.01 angstrom"``); the Gaussian
width of the density of states is a frequency (``"0.1 THz"``, ``"3 cm^-1"``,
``"0.4 meV"``).
"""

from __future__ import annotations

import math
from collections.abc import Mapping

from .errors import InputError
from .units import THZ_INVERSE_CM, THZ_MEV, parse_quantity

__all__ = ["PHONON_KEYS", "read_phonons", "parse_frequency"]

#: (key, kind, unit kind, default as written, meaning) of every key of [phonons].
PHONON_KEYS: tuple[tuple[str, str, str, str, str], ...] = (
    ("supercell", "anything", "", "[2, 2, 2]",
     "supercell of the primitive cell: three repeats, or a 3 x 3 integer matrix whose rows "
     "are the supercell vectors in primitive vectors"),
    ("displacement_length", "quantity", "length", '"0.02 bohr"',
     "how far each displaced atom moves, e.g. \"0.01 angstrom\""),
    ("both_signs", "boolean", "", "true",
     "displace by +u and -u (the minus sign made by symmetry where a site operation allows)"),
    ("path", "name", "", "standard path of the lattice",
     'special points of the dispersion, e.g. "G-X-W-K-G-L" ("|" for a jump)'),
    ("path_points", "integer", "", "150", "points along the dispersion path (10 to 5000)"),
    ("dos_mesh", "anything", "", "[16, 16, 16]",
     "Gamma-centred q-mesh of the phonon density of states"),
    ("dos_method", "name", "", '"tetrahedron"', "tetrahedron or gaussian"),
    ("dos_width", "quantity", "frequency", '"0.1 THz"',
     "Gaussian width of the density of states (THz, cm^-1 or meV)"),
    ("masses", "anything", "", "standard atomic weights",
     "masses in daltons replacing the standard atomic weights, e.g. { Si = 29.974 }"),
)

_FREQUENCY_UNITS = {"thz": 1.0, "cm^-1": 1.0 / THZ_INVERSE_CM, "cm-1": 1.0 / THZ_INVERSE_CM,
                    "mev": 1.0 / THZ_MEV}


def parse_frequency(text, key: str = "frequency", source=None) -> float:
    """'0.1 THz', '3 cm^-1' or '0.4 meV' -> THz; bare numbers are refused."""
    accepted = "accepted units: THz, cm^-1, meV"
    parts = text.split() if isinstance(text, str) else []
    try:
        number = float(parts[0]) if len(parts) == 2 else math.nan
    except ValueError:
        number = math.nan
    unit = parts[1].lower() if len(parts) == 2 else ""
    if unit not in _FREQUENCY_UNITS or not math.isfinite(number):
        raise InputError(f'needs a number and a frequency unit, e.g. "0.1 THz"; {accepted}',
                         key=key, value=text, source=source, has_value=True)
    return number * _FREQUENCY_UNITS[unit]


def _integers(value, shape, key, source):
    import numpy as np

    ok = isinstance(value, list) and all(
        isinstance(v, int) and not isinstance(v, bool) for v in np.ravel(
            np.array(value, dtype=object)).tolist()) if isinstance(value, list) else False
    try:
        arr = np.array(value, dtype=object)
    except ValueError:
        ok = False
    if not ok or arr.shape not in shape:
        want = "a list of 3 TOML integers" + (" or 3 lists of 3" if (3, 3) in shape else "")
        raise InputError(f"must be {want}", key=key, value=value, source=source,
                         has_value=True)
    return arr.astype(int).tolist()


def read_phonons(table: Mapping | None, source=None):
    """The :class:`~pwsolid.workflows.phonons.PhononSettings` of a [phonons] table (the
    defaults for ``None``); every mistake is one InputError naming the key."""
    from .workflows.phonons import PhononSettings

    if table is None:
        return PhononSettings()
    kwargs = {}
    for key, value in table.items():
        dotted = f"phonons.{key}"

        def bad(why):
            raise InputError(why, key=dotted, value=value, source=source, has_value=True)

        if key == "supercell":
            kwargs[key] = _integers(value, ((3,), (3, 3)), dotted, source)
        elif key == "dos_mesh":
            kwargs[key] = tuple(_integers(value, ((3,),), dotted, source))
        elif key == "displacement_length":
            kwargs["amplitude"] = parse_quantity(value, "length", key=dotted, source=source)
        elif key == "dos_width":
            kwargs[key] = parse_frequency(value, dotted, source)
        elif key in ("both_signs",):
            if not isinstance(value, bool):
                bad("must be a TOML boolean: true or false (no quotes)")
            kwargs[key] = value
        elif key == "path_points":
            if isinstance(value, bool) or not isinstance(value, int):
                bad("must be an integer (a TOML integer, no decimal point)")
            kwargs[key] = value
        elif key in ("path", "dos_method"):
            if not isinstance(value, str):
                bad("must be a string")
            kwargs[key] = value.strip() if key == "path" else value.strip().lower()
        elif key == "masses":
            if not isinstance(value, Mapping):
                bad("must be a table of species and daltons, e.g. { Si = 29.974 }")
            kwargs[key] = dict(value)
    try:
        return PhononSettings(**kwargs)
    except InputError as exc:
        raise exc.with_source(source) if source else exc from None
