"""Validated settings of a ground-state calculation and the one table that declares them
(layer 4).

:data:`SETTINGS_TABLE` declares every numerical setting once: its input-file key, the
:class:`GroundStateSettings` field it fills, how it is written, its unit, its range
or choices and what it means. The validation of :class:`GroundStateSettings`, the
input reader (:mod:`pwsolid.config`), ``pwsolid input-keys``, the README table and the
error messages are all made from these rows, so that they cannot drift apart.
Choices that a registry owns (smearing schemes, functionals) are read from that
registry, never listed again here.

:class:`GroundStateSettings` is what the Python API and the command line both build:
frozen, in atomic units, checked once on construction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields, replace
from typing import Any, Callable, Mapping

import numpy as np

from .errors import InputError
from .occupations import SMEARING_SCHEMES

__all__ = ["GroundStateSettings", "Setting", "SETTINGS_TABLE", "SETTING_KEYS", "UNIT_TEXT",
           "NO_SMEARING", "check_electron_count", "setting_row"]

#: The occupation choice for insulators (Aufbau filling); every other name is a
#: smearing scheme of :data:`pwsolid.occupations.SMEARING_SCHEMES`.
NO_SMEARING = "none"

#: Unit written after each unit kind in messages and defaults.
UNIT_TEXT = {"energy": "Ha", "length": "bohr", "inverse_length": "bohr^-1"}


def _smearing_names() -> tuple[str, ...]:
    return (NO_SMEARING, *SMEARING_SCHEMES)


def _normal_name(value: Any) -> str:
    return str(value).strip().lower().replace("_", "-").replace(" ", "-")


@dataclass(frozen=True)
class Setting:
    """One declared setting: the single description its reader, check and docs share.

    Attributes
    ----------
    key : str
        Dotted input-file key (``"basis.cutoff"``); ``""`` for a setting of the
        Python API only, which messages then name by its field.
    field : str or None
        The :class:`GroundStateSettings` field it fills (``None`` for keys of the
        crystal or the output, which are not ground-state settings).
    kind : str
        How it is written: ``quantity`` (a number with its unit), ``integer``,
        ``number``, ``boolean``, ``name``, ``file``, ``integers3``, ``numbers3``,
        ``species``, ``vectors``, ``atoms``, ``anything``.
    meaning : str
        One line saying what it does (help screens and the README).
    unit : str
        Unit kind of a quantity: ``energy``, ``length`` or ``inverse_length``.
    low, high : float or None
        Accepted range (in atomic units); ``low_open``/``high_open`` exclude the end.
    choices : callable or None
        Returns the accepted names (read from the registry that owns them).
    each : tuple or None
        Accepted values of each entry of a list (``kpoint_shift``: 0 or 0.5).
    automatic : bool
        ``None`` is accepted and means an automatic choice.
    rule : str
        Message for a value out of range, when the range alone says too little.
    default_text : str
        Documented default of a key that is not a settings field.
    """

    key: str
    field: str | None
    kind: str
    meaning: str
    unit: str = ""
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    choices: Callable[[], tuple[str, ...]] | None = None
    each: tuple | None = None
    automatic: bool = False
    rule: str = ""
    default_text: str = ""

    @property
    def name(self) -> str:
        """What messages call it: the input key, or the field for API-only settings."""
        return self.key or str(self.field)

    @property
    def section(self) -> str:
        return self.key.split(".")[0] if "." in self.key else ""

    @property
    def short_key(self) -> str:
        return self.key.split(".", 1)[1] if "." in self.key else self.key

    def accepted(self) -> str:
        """What is accepted, as a sentence fragment (used in messages and help)."""
        if self.rule:
            return self.rule
        if self.choices is not None:
            return "accepted: " + ", ".join(self.choices())
        if self.low is None and self.high is None:
            return ""
        unit = f" {UNIT_TEXT[self.unit]}" if self.unit else ""
        lead = {"integers3": "must be three integers", "integer": "must be an integer"}.get(
            self.kind, "must lie")
        if self.low_open or self.high_open:
            return (f"{lead} in {'(' if self.low_open else '['}{_num(self.low)}, "
                    f"{_num(self.high)}{')' if self.high_open else ']'}{unit}")
        if self.high is None:
            return f"{lead} at least {_num(self.low)}{unit}"
        return f"{lead} between {_num(self.low)}{unit} and {_num(self.high)}{unit}"

    def in_range(self, x: float) -> bool:
        if not math.isfinite(x):
            return False
        if self.low is not None and (x < self.low or (self.low_open and x == self.low)):
            return False
        if self.high is not None and (x > self.high or (self.high_open and x == self.high)):
            return False
        return True

    def fail(self, why: str, value: Any):
        raise InputError(why, key=self.name, value=value)

    def check(self, value: Any) -> Any:
        """The value checked against this row and normalised (tuples, lower-case names).

        Raises
        ------
        InputError
            Naming :attr:`name`, the value and what is accepted.
        """
        if value is None and self.automatic:
            return None
        kind = self.kind
        if kind == "boolean":
            if not isinstance(value, (bool, np.bool_)):
                self.fail("must be true or false", value)
            return bool(value)
        if kind == "name":
            if not isinstance(value, str) or not value.strip():
                self.fail(f"must be a name; {self.accepted()}", value)
            name = _normal_name(value)
            if self.choices is not None and name not in self.choices():
                self.fail(f"unknown {self.short_key.replace('_', ' ')}; {self.accepted()}", value)
            return name
        if kind in ("integer", "number", "quantity"):
            x = _as_number(value, integer=kind == "integer")
            if x is None or not self.in_range(x):
                self.fail(self.accepted() or "must be a finite number", value)
            return x
        if kind in ("integers3", "numbers3"):
            items = _as_triple(value, integer=kind == "integers3")
            if items is None or (self.each is not None and any(v not in self.each for v in items)) \
                    or not all(self.in_range(v) for v in items):
                self.fail(self.accepted(), value)
            return items
        return value


def _num(x) -> str:
    return f"{x:g}"


def _as_number(value, integer: bool):
    """A finite int/float (``None`` when it is not one); bools are not numbers."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, float, np.number)):
        return None
    try:
        x = float(value)
    except (OverflowError, ValueError, TypeError):
        return None
    if not math.isfinite(x):
        return None
    if integer:
        return int(x) if x == int(x) else None
    return x


def _as_triple(value, integer: bool):
    if isinstance(value, (str, bytes)) or not hasattr(value, "__len__"):
        return None
    items = list(value)
    if len(items) != 3:
        return None
    out = tuple(_as_number(v, integer) for v in items)
    return None if any(v is None for v in out) else out


#: Every ground-state setting, in the order of the input file and the README table.
SETTINGS_TABLE: tuple[Setting, ...] = (
    Setting("basis.cutoff", "cutoff", "quantity", "plane-wave kinetic-energy cutoff |k+G|^2/2",
            unit="energy", low=0.5, high=5000.0),
    Setting("basis.fft_grid", "fft_grid", "integers3",
            "force this FFT grid instead of the automatic choice", low=2, high=1024,
            automatic=True),
    Setting("brillouin_zone.mesh", "kpoint_mesh", "integers3",
            "Monkhorst-Pack divisions along the reciprocal vectors", low=1, high=200),
    Setting("brillouin_zone.shift", "kpoint_shift", "numbers3",
            "mesh shift in mesh steps, each 0 (through Gamma) or 0.5", each=(0.0, 0.5),
            rule="must be three numbers, each 0 (through Gamma) or 0.5 (half a step)"),
    Setting("brillouin_zone.use_symmetry", "use_symmetry", "boolean",
            "reduce k-points to the irreducible wedge, symmetrise n(r)"),
    Setting("exchange_correlation.functional", "functional", "name",
            "exchange-correlation functional by registry name (pwsolid.xc), file:PATH, "
            "or libxc:NAME[+NAME] (needs the Libxc C library)"),
    Setting("occupations.smearing", "smearing", "name",
            "none (Aufbau filling, insulators) or a smearing scheme (for metals)",
            choices=_smearing_names),
    Setting("occupations.width", "smearing_width", "quantity", "smearing width sigma",
            unit="energy", low=1e-6, high=1.0),
    Setting("occupations.methfessel_paxton_order", "smearing_order", "integer",
            "order of the Methfessel-Paxton scheme", low=0, high=30),
    Setting("spin.polarized", "spin_polarized", "boolean",
            "collinear spin-polarised (LSDA) calculation"),
    Setting("spin.initial_moment", "initial_moment", "number",
            "N_up - N_down of the starting density (electrons per cell); at most the "
            "electron count in size", low=-1e4, high=1e4),
    Setting("spin.fixed_moment", "fixed_moment", "number",
            "hold N_up - N_down at this value (automatic: the moment relaxes); at most the "
            "electron count in size", low=-1e4, high=1e4, automatic=True),
    Setting("self_consistency.max_iterations", "max_iterations", "integer",
            "largest number of self-consistency iterations", low=1, high=100000),
    Setting("self_consistency.energy_tolerance", "energy_tolerance", "quantity",
            "stop when the total-energy change is below this", unit="energy", low=0.0, high=1.0,
            low_open=True, high_open=True),
    Setting("self_consistency.density_tolerance", "density_tolerance", "number",
            "...and integral |n_out - n_in| / N_electrons is below this", low=0.0, high=1.0,
            low_open=True, high_open=True),
    Setting("self_consistency.mixing_weight", "mixing_weight", "number",
            "fraction of the residual added per Pulay step (automatic: 1 with the "
            "model-dielectric mixing, 0.6 otherwise)", low=0.0, high=1.0, low_open=True,
            automatic=True),
    Setting("self_consistency.mixing_history", "mixing_history", "integer",
            "previous densities kept by the Pulay mixer", low=1, high=100),
    Setting("self_consistency.empty_bands", "empty_bands", "integer",
            "bands beyond the occupied ones (automatic: 4, more with smearing)", low=0,
            high=10000, automatic=True),
    Setting("self_consistency.mixing_preconditioner", "mixing_preconditioner", "name",
            "auto (Kerker with smearing, model-dielectric for insulators without spin), "
            "kerker, model-dielectric or none",
            choices=lambda: ("auto", "kerker", "model-dielectric", "none")),
    Setting("self_consistency.screening_wavevector", "screening_wavevector", "quantity",
            "screening wave vector q0 of the Kerker and model-dielectric mixing (automatic: "
            "Thomas-Fermi of the mean density)",
            unit="inverse_length", low=0.0, high=50.0, low_open=True, high_open=True,
            automatic=True),
    Setting("self_consistency.dielectric_constant", "dielectric_constant", "number",
            "static dielectric constant of the model-dielectric mixing (Resta's model)",
            low=1.0, high=1000.0, low_open=True),
    # Python API only: the jellium and surface workflows set it, input files do not.
    Setting("", "background_electrons", "number",
            "electrons added with a uniform positive background of the same charge",
            low=0.0, high=1e4),
    Setting("", "pseudopotentials", "anything",
            "pseudopotential per species (the [pseudopotentials] table of an input)"),
)

_BY_FIELD = {s.field: s for s in SETTINGS_TABLE}

#: Name of each settings field in messages: its dotted input key, or the field itself
#: for settings of the Python API only.
SETTING_KEYS: dict[str, str] = {s.field: (s.key or s.field) for s in SETTINGS_TABLE}
SETTING_KEYS["pseudopotentials"] = "pseudopotentials"


@dataclass(frozen=True)
class GroundStateSettings:
    """Numerical settings of one self-consistent ground state (atomic units).

    Attributes
    ----------
    cutoff : float
        Plane-wave kinetic-energy cutoff in hartree: |k+G|^2/2 <= cutoff.
    kpoint_mesh : tuple of 3 int
        Monkhorst-Pack mesh divisions along the reciprocal vectors.
    kpoint_shift : tuple of 3 float
        Shift of the mesh in units of one mesh step, each 0 or 0.5.
        ``(0, 0, 0)`` contains Gamma; ``(0.5, 0.5, 0.5)`` with even divisions is
        the original Monkhorst-Pack choice.
    use_symmetry : bool
        Reduce the mesh to its irreducible wedge and symmetrise the density.
    functional : str or callable
        Exchange-correlation functional by registry name (see ``pwsolid.xc``).
    pseudopotentials : mapping species -> str, path or Pseudopotential
        Pseudopotential per species; names are looked up in the bundled
        ``pseudos/`` directory.
    fft_grid : tuple of 3 int or None
        Force this FFT grid instead of the automatic choice.
    empty_bands : int or None
        Bands computed beyond the N/2 needed for the electrons; ``None`` picks
        4 for fixed occupations and 4 + 20% of N/2 with smearing, enough for the
        tail of the occupation function at the usual widths.
    smearing : str
        ``"none"`` (Aufbau filling, insulators) or a smearing scheme of
        ``pwsolid.occupations.SMEARING_SCHEMES`` for metals.
    smearing_width : float
        Width sigma of the smearing in hartree.
    smearing_order : int
        Order of the Methfessel-Paxton scheme (ignored by the others).
    mixing_preconditioner : str
        ``"auto"`` (Kerker with smearing; with fixed occupations and no spin
        ``"model-dielectric"``, none otherwise), ``"kerker"``, ``"model-dielectric"``
        (residuals divided by Resta's model dielectric function) or ``"none"``.
    dielectric_constant : float
        eps0 of the model-dielectric mixing (12: silicon's, from memory; the
        convergence rate depends on it weakly: on benchmarks/relaxation_steps.py 6 and
        24 gave the same SCF iteration counts within 0.125 a step).
    screening_wavevector : float or None
        Kerker q0 in 1/bohr; ``None`` takes the Thomas-Fermi wave vector of the
        mean valence density.
    background_electrons : float
        Electrons added to the cell together with a uniform positive background
        of the same charge (jellium when the cell has no atoms).
    spin_polarized : bool
        Collinear spin-polarised (LSDA) calculation with separate up and down densities.
    initial_moment : float
        N_up - N_down of the uniform starting density (electrons per cell).
    fixed_moment : float or None
        Hold N_up - N_down at this value (separate Fermi levels per spin); ``None`` lets
        the moment relax (one Fermi level; needs smearing for a non-integer moment).
    max_iterations : int
        Largest number of SCF iterations.
    energy_tolerance : float
        Stop when the total-energy change between iterations is below this (Ha)...
    density_tolerance : float
        ...and the density residual, integral |n_out - n_in| / N_electrons, is below this.
    mixing_weight : float or None
        Fraction of the residual added per Pulay step (0 < w <= 1); ``None`` takes 1
        with the model-dielectric mixing (which already scales the residual by the
        inverse dielectric function), 0.6 otherwise.
    mixing_history : int
        Number of previous densities the Pulay mixer keeps.
    """

    cutoff: float = 15.0
    kpoint_mesh: tuple[int, int, int] = (4, 4, 4)
    kpoint_shift: tuple[float, float, float] = (0.5, 0.5, 0.5)
    use_symmetry: bool = True
    functional: Any = "lda-pz81"
    pseudopotentials: Mapping[str, Any] = field(default_factory=dict)
    fft_grid: tuple[int, int, int] | None = None
    empty_bands: int | None = None
    smearing: str = "none"
    smearing_width: float = 0.01
    smearing_order: int = 1
    mixing_preconditioner: str = "auto"
    screening_wavevector: float | None = None
    dielectric_constant: float = 12.0
    background_electrons: float = 0.0
    spin_polarized: bool = False
    initial_moment: float = 0.0
    fixed_moment: float | None = None
    max_iterations: int = 40
    energy_tolerance: float = 1e-8
    density_tolerance: float = 1e-6
    mixing_weight: float | None = None
    mixing_history: int = 8

    def __post_init__(self):
        # every field is checked against its row of SETTINGS_TABLE (one message format)
        for row in SETTINGS_TABLE:
            if row.kind == "anything":
                continue
            value = getattr(self, row.field)
            if row.field == "functional":
                _check_functional(row, value)
                continue
            object.__setattr__(self, row.field, row.check(value))
        if not self.spin_polarized and (self.initial_moment or self.fixed_moment is not None):
            row = _BY_FIELD["initial_moment" if self.initial_moment else "fixed_moment"]
            row.fail("needs spin.polarized = true", getattr(self, row.field))
        object.__setattr__(self, "pseudopotentials", dict(self.pseudopotentials))

    def replace(self, **changes) -> "GroundStateSettings":
        """Return a copy with some fields changed (validated again)."""
        return replace(self, **changes)

    def as_dict(self) -> dict:
        """JSON-friendly echo in atomic units (callables and objects by name)."""
        out = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "pseudopotentials":
                value = {k: str(getattr(v, "source_file", v)) for k, v in value.items()}
            elif callable(value):
                value = getattr(value, "__name__", repr(value))
            elif isinstance(value, tuple):
                value = list(value)
            out[f.name] = value
        return out


def _check_functional(row: Setting, value) -> None:
    """A functional must be known to the xc registry: a registered name, a Functional or a
    callable (``file:`` functionals are loaded, and checked, when the run starts)."""
    from .xc import get_functional
    from .xc.registry import FILE_PREFIX

    if isinstance(value, str) and value.strip().lower().startswith(FILE_PREFIX):
        return
    try:
        get_functional(value)
    except InputError as exc:
        raise InputError(exc.reason, key=row.name, value=value) from None


def setting_row(field_name: str) -> Setting:
    """The declared row of a :class:`GroundStateSettings` field."""
    return _BY_FIELD[field_name]


def check_electron_count(settings: "GroundStateSettings", n_electrons: float) -> None:
    """Checks that need the electron count N (valence of the atoms plus background).

    Run by :func:`pwsolid.scf.prepare` and by ``check-input`` before any work: no
    electrons at all, spin moments larger than N, or an odd count with fixed
    occupations in an unpolarised cell.

    Raises
    ------
    InputError
        Naming the key to change.
    """
    if not n_electrons > 0:
        raise InputError("the cell holds no electrons: add atoms or background electrons",
                         key="crystal", value=n_electrons)
    for name in ("fixed_moment", "initial_moment"):
        moment = getattr(settings, name)
        if moment is not None and abs(moment) > n_electrons + 1e-8:
            row = _BY_FIELD[name]
            row.fail(f"N_up - N_down cannot exceed the {n_electrons:g} valence electrons per "
                     f"cell in size; accepted: -{n_electrons:g} to {n_electrons:g}", moment)
    if settings.smearing != NO_SMEARING:
        return
    moment = (settings.fixed_moment or 0.0) if settings.spin_polarized else 0.0
    # fixed (Aufbau) filling fills whole orbitals: N/2 of them, or (N +- M)/2 per spin
    counts = [0.5 * (n_electrons + moment), 0.5 * (n_electrons - moment)]
    if any(abs(c - round(c)) > 1e-8 for c in counts):
        if settings.spin_polarized and settings.fixed_moment:
            _BY_FIELD["fixed_moment"].fail(
                f"with fixed occupations each spin holds a whole number of electrons, "
                f"(N +- M)/2 with N = {n_electrons:g}: give a moment of the same parity as N, "
                "or set occupations.smearing", settings.fixed_moment)
        raise InputError(f"{n_electrons:g} valence electrons per cell cannot fill bands "
                         "completely; an insulating (Aufbau) filling needs an even electron "
                         "count per cell; for a metal set occupations.smearing (e.g. \"cold\")",
                         key="occupations.smearing", value=settings.smearing)
