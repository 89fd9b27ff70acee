"""The ``[thermal]`` table of an input file: temperatures and volumes of the
quasi-harmonic command (layer 6).

Kept apart from :mod:`pwsolid.config`, which only registers :data:`THERMAL_KEYS`
(unknown-key checks, ``pwsolid input-keys``, the README table) and calls
:func:`read_thermal`. Temperatures carry their unit: ``"1000 K"`` (an energy such as
``"0.05 eV"`` is read as k_B T).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from .eos import EOS_FORMS
from .errors import InputError
from .thermodynamics import (DEFAULT_HIGHEST_TEMPERATURE, DEFAULT_TEMPERATURE_STEP,
                             temperature_grid)
from .units import KELVIN_HA, parse_quantity

__all__ = ["THERMAL_KEYS", "ThermalSettings", "read_thermal"]

#: (key, kind, unit kind, default as written, meaning) of every key of [thermal].
THERMAL_KEYS: tuple[tuple[str, str, str, str, str], ...] = (
    ("highest_temperature", "quantity", "temperature", f'"{DEFAULT_HIGHEST_TEMPERATURE:g} K"',
     "temperatures run from 0 K to this"),
    ("temperature_step", "quantity", "temperature", f'"{DEFAULT_TEMPERATURE_STEP:g} K"',
     "step of the temperatures (the expansion coefficient is a difference over it)"),
    ("volume_range", "number", "", "0.03",
     "relative half-width of the volumes with phonons (0.03: 0.97 V to 1.03 V)"),
    ("volume_points", "integer", "", "7", "volumes with a static energy and phonons (5 to 25)"),
    ("q_mesh", "integers3", "", "[12, 12, 12]",
     "Gamma-centred q-mesh of the Brillouin-zone sums at each volume"),
    ("equation_of_state", "name", "", '"birch-murnaghan"',
     "form fitted to F(V) at each temperature: " + ", ".join(EOS_FORMS)),
)


@dataclass(frozen=True)
class ThermalSettings:
    """Checked values of [thermal] (kelvin, relative volume, counts)."""

    highest_temperature: float = DEFAULT_HIGHEST_TEMPERATURE
    temperature_step: float = DEFAULT_TEMPERATURE_STEP
    volume_range: float = 0.03
    volume_points: int = 7
    q_mesh: tuple = (12, 12, 12)
    equation_of_state: str = "birch-murnaghan"

    def __post_init__(self):
        temperature_grid(self.highest_temperature, self.temperature_step,
                         key="thermal.highest_temperature")
        r = self.volume_range
        if isinstance(r, bool) or not isinstance(r, (int, float)) or not 0.005 <= r <= 0.2:
            raise InputError("must be a number from 0.005 to 0.2 (0.03 samples 0.97 V to 1.03 V)",
                             key="thermal.volume_range", value=r)
        n = self.volume_points
        if isinstance(n, bool) or not isinstance(n, int) or not 5 <= n <= 25:
            raise InputError("must be an integer from 5 (an equation of state has four "
                             "parameters) to 25", key="thermal.volume_points", value=n)
        q = self.q_mesh
        if (not isinstance(q, (tuple, list)) or len(q) != 3 or any(
                isinstance(x, bool) or not isinstance(x, int) or not 1 <= x <= 64 for x in q)):
            raise InputError("must be three integers from 1 to 64", key="thermal.q_mesh",
                             value=list(q) if isinstance(q, (tuple, list)) else q)
        object.__setattr__(self, "q_mesh", tuple(q))
        if self.equation_of_state not in EOS_FORMS:
            raise InputError(f"accepted: {', '.join(EOS_FORMS)}",
                             key="thermal.equation_of_state", value=self.equation_of_state)

    @property
    def temperatures(self):
        """0 K to the highest temperature by the step (K)."""
        return temperature_grid(self.highest_temperature, self.temperature_step)


def read_thermal(table: Mapping | None, source=None) -> ThermalSettings:
    """:class:`ThermalSettings` of a [thermal] table (the defaults for ``None``)."""
    if table is None:
        return ThermalSettings()
    kinds = {key: kind for key, kind, _, _, _ in THERMAL_KEYS}
    kwargs = {}
    for key, value in table.items():
        dotted = f"thermal.{key}"
        kind = kinds[key]              # unknown keys were refused by the reader before
        if kind == "quantity":
            if isinstance(value, bool) or not isinstance(value, str):
                raise InputError('needs its unit, written as a string, e.g. "1000 K"',
                                 key=dotted, value=value, source=source, has_value=True)
            kwargs[key] = parse_quantity(value, "temperature", key=dotted,
                                         source=source) / KELVIN_HA
        elif kind == "name":
            kwargs[key] = str(value).strip().lower() if isinstance(value, str) else value
        elif kind == "number" and isinstance(value, int) and not isinstance(value, bool):
            kwargs[key] = float(value)
        else:
            kwargs[key] = value
    try:
        return ThermalSettings(**kwargs)
    except InputError as exc:
        raise (exc.with_source(source) if source else exc) from None
