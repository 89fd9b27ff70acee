"""The ``[elastic_constants]`` table of an input file: its keys and how they are read
(layer 6).

Kept apart from :mod:`pwsolid.config`, which only registers :data:`ELASTIC_KEYS` (for
unknown-key checks, ``pwsolid input-keys`` and the README table) and calls
:func:`read_elastic`. Strains are plain numbers (0.01 is a strain of 1 %); the force
threshold is written with its unit, as in ``[relaxation]``.
"""

from __future__ import annotations

from collections.abc import Mapping

from .errors import InputError
from .relaxation_keys import parse_force, plain_value

__all__ = ["ELASTIC_KEYS", "read_elastic"]

#: (key, kind, unit kind, default as written, meaning) of every key of [elastic_constants].
ELASTIC_KEYS: tuple[tuple[str, str, str, str, str], ...] = (
    ("largest_strain", "number", "", "0.01",
     "largest strain applied (a fraction: 0.01 is 1 %; shears as engineering strain)"),
    ("strains_per_sign", "integer", "", "2",
     "strain amplitudes on each side of zero, evenly spaced up to largest_strain"),
    ("relax_internal", "boolean", "", "true",
     "relax the atoms inside every strained cell (clamped-ion constants are reported too)"),
    ("force_threshold", "quantity", "force", '"5e-5 Ha/bohr"',
     "largest force left after each internal relaxation"),
)


def read_elastic(table: Mapping | None, source=None):
    """The :class:`~pwsolid.workflows.elastic_constants.ElasticSettings` of an
    [elastic_constants] table (the defaults for ``None``); every mistake is one
    InputError naming the key."""
    from .workflows.elastic_constants import ElasticSettings

    if table is None:
        return ElasticSettings()
    kinds = {key: kind for key, kind, _, _, _ in ELASTIC_KEYS}
    kwargs = {}
    for key, value in table.items():
        dotted = f"elastic_constants.{key}"
        kind = kinds[key]                   # unknown keys were refused by the reader before

        if kind == "quantity":
            kwargs[key] = parse_force(value, dotted, source)
        elif kind in ("integer", "boolean"):
            kwargs[key] = plain_value(value, kind, dotted, source)
        else:
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise InputError("must be a plain number, e.g. 0.01 for a strain of 1 %",
                                 key=dotted, value=value, source=source, has_value=True)
            kwargs[key] = float(value)
    try:
        return ElasticSettings(**kwargs)
    except InputError as exc:
        raise exc.with_source(source) if source else exc from None
