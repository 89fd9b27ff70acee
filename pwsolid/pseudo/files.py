"""Pseudopotential files: our own TOML format (layer 3).

A file holds one pseudopotential::

    element = "Si"
    valence_charge = 4
    form = "appelbaum-hamann"          # a key of pwsolid.pseudo.local.LOCAL_FORMS
    suggested_cutoff = "10 Ha"         # optional
    [parameters]                       # every parameter with its unit
    alpha = { value = 0.6102, unit = "bohr^-2" }
    [source]
    reference = "authors, journal volume, page (year), table"
    status = "checked against the paper" | "from memory" | ...

``defaults.toml`` in the same directory maps each element to the file used
when an input names none.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError
from ..resources import pseudopotential_dir
from ..units import BOHR_ANGSTROM, ENERGY_UNITS, parse_quantity
import numpy as np

from .core import PartialCore
from .local import LOCAL_FORMS, LocalForm
from .separable import ProjectorChannel, SeparablePart, hgh_off_diagonal

__all__ = ["Pseudopotential", "load_pseudopotential", "default_pseudopotential_file",
           "resolve_pseudopotential", "bundled_pseudopotentials"]

_ANG = 1.0 / BOHR_ANGSTROM  # one angstrom in bohr
_PARAM_UNITS = {
    "length": {"bohr": 1.0, "angstrom": _ANG},
    "energy": {"Ha": 1.0, "Ry": ENERGY_UNITS["ry"], "eV": ENERGY_UNITS["ev"]},
    "inverse_area": {"bohr^-2": 1.0, "angstrom^-2": 1.0 / _ANG ** 2},
    "energy_per_area": {"Ha/bohr^2": 1.0, "Ry/bohr^2": 0.5},
    "number": {"1": 1.0},
}


@dataclass(frozen=True)
class Pseudopotential:
    """A pseudopotential read from a file.

    Attributes
    ----------
    element : str
    valence : float
        Ionic charge Z seen by the valence electrons.
    local : LocalForm
        The analytic local part (atomic units).
    form : str
        Name of the analytic form.
    source_file : Path or None
    reference : str
        Published source of the form and parameters.
    status : str
        How the parameter values were checked.
    suggested_cutoff : float or None
        Cutoff (Ha) the file recommends, if any.
    separable : SeparablePart or None
        Nonlocal projectors, for the dual-space Gaussian form.
    partial_core : PartialCore or None
        Model core density added to the valence density in exchange and
        correlation (nonlinear core correction), from the ``[partial_core]`` table.
    """

    element: str
    valence: float
    local: LocalForm
    form: str
    source_file: Path | None = None
    reference: str = ""
    status: str = ""
    suggested_cutoff: float | None = None
    separable: SeparablePart | None = None
    partial_core: PartialCore | None = None

    @property
    def is_nonlocal(self) -> bool:
        return self.separable is not None and self.separable.n_projectors > 0


def bundled_pseudopotentials(element: str | None = None) -> list[str]:
    """File names in the bundled directory, optionally only those of one element."""
    d = pseudopotential_dir()
    names = sorted(p.name for p in d.glob("*.toml") if p.name != "defaults.toml")
    if element:
        names = [n for n in names if n.split("-")[0] == element]
    return names


def default_pseudopotential_file(element: str) -> Path:
    """The bundled file used for ``element`` when the input names none."""
    table_file = pseudopotential_dir() / "defaults.toml"
    try:
        table = tomllib.loads(table_file.read_text())
    except (OSError, tomllib.TOMLDecodeError) as exc:  # pragma: no cover - packaging fault
        raise InputError(f"cannot read the table of default pseudopotentials: {exc}",
                         source=str(table_file)) from None
    if element not in table:
        raise InputError(
            f"no default pseudopotential for {element}; name a file under "
            f"[pseudopotentials] (bundled defaults exist for {', '.join(sorted(table))})",
            key=f"pseudopotentials.{element}")
    return pseudopotential_dir() / table[element]


def resolve_pseudopotential(element: str, name, base_dir: Path | None = None) -> Path:
    """Find a pseudopotential file given by the user (relative to ``base_dir``, then bundled)."""
    path = Path(name)
    candidates = [path] if path.is_absolute() else [
        (base_dir or Path.cwd()) / path, pseudopotential_dir() / path]
    for c in candidates:
        if c.is_file():
            return c
    others = bundled_pseudopotentials(element)
    raise InputError(
        f"pseudopotential file not found (looked in {', '.join(str(c.parent) for c in candidates)}); "
        f"bundled files for {element}: {', '.join(others) or 'none'}",
        key=f"pseudopotentials.{element}", value=str(name))


def _parameter(entry, name: str, kind: str, source: str) -> float:
    # a bare name is one of [parameters]; a dotted or indexed name is a full key
    key = name if ("." in name or "[" in name) else f"parameters.{name}"
    if not isinstance(entry, dict) or set(entry) != {"value", "unit"}:
        raise InputError("each parameter must be a table { value = number, unit = \"...\" }",
                         key=key, value=entry, source=source)
    value, unit = entry["value"], entry["unit"]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError("the value must be a number", key=key, value=value, source=source)
    units = _PARAM_UNITS[kind]
    if unit not in units:
        raise InputError(f"unit must be one of {', '.join(units)}", key=key, value=unit, source=source)
    return float(value) * units[unit]


def load_pseudopotential(path) -> Pseudopotential:
    """Read and validate one pseudopotential file.

    Raises
    ------
    InputError
        For a missing or malformed file, naming the file and the key.
    """
    path = Path(path)
    src = str(path)
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError("pseudopotential file not found", source=src) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the file: {exc}", source=src) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", source=src) from None
    allowed = {"element", "valence_charge", "form", "parameters", "source", "suggested_cutoff",
               "projectors", "partial_core", "fit_record"}
    for key in doc:
        if key not in allowed:
            raise InputError(f"unknown key; accepted keys: {', '.join(sorted(allowed))}",
                             key=key, value=doc[key], source=src)
    for key in ("element", "valence_charge", "form", "parameters"):
        if key not in doc:
            raise InputError("required key is missing", key=key, source=src)
    form_name = doc["form"]
    nonlocal_form = form_name == "goedecker-teter-hutter"
    if nonlocal_form:
        form_name = "goedecker-teter-hutter-local"
    elif "projectors" in doc:
        raise InputError("projectors belong to form = \"goedecker-teter-hutter\" only",
                         key="projectors", source=src)
    if form_name not in LOCAL_FORMS:
        raise InputError(f"unknown form; accepted: {', '.join(LOCAL_FORMS)}", key="form",
                         value=form_name, source=src)
    z = doc["valence_charge"]
    if isinstance(z, bool) or not isinstance(z, (int, float)) or not 0 < z <= 100:
        raise InputError("must be a positive number of electrons", key="valence_charge",
                         value=z, source=src)
    cls, wanted = LOCAL_FORMS[form_name]
    params = doc["parameters"]
    if not isinstance(params, dict):
        raise InputError("must be a table of parameters", key="parameters", value=params, source=src)
    for name in params:
        if name not in wanted:
            raise InputError(f"unknown parameter for form '{form_name}'; accepted: {', '.join(wanted)}",
                             key=f"parameters.{name}", value=params[name], source=src)
    values = {n: _parameter(params[n], n, kind, src) for n, kind in wanted.items() if n in params}
    required = [n for n in wanted if n not in values and n not in ("c2", "c3", "c4")]
    if required:
        raise InputError(f"missing parameters: {', '.join(required)}", key="parameters", source=src)
    cutoff = doc.get("suggested_cutoff")
    if cutoff is not None:
        cutoff = parse_quantity(cutoff, "energy", key="suggested_cutoff", source=src)
    source = doc.get("source", {})
    separable = _projectors(doc.get("projectors", []), src) if nonlocal_form else None
    core = _partial_core(doc["partial_core"], src) if "partial_core" in doc else None
    return Pseudopotential(
        element=str(doc["element"]), valence=float(z), local=cls(valence=float(z), **values),
        form=doc["form"], source_file=path, reference=str(source.get("reference", "")),
        status=str(source.get("status", "")), suggested_cutoff=cutoff, separable=separable,
        partial_core=core)


def _partial_core(entry, src: str) -> PartialCore:
    """Read ``[partial_core]``: charge (electrons, a number) and radius (a length)."""
    if not isinstance(entry, dict) or set(entry) != {"charge", "radius"}:
        raise InputError("must be a table with charge = <electrons> and "
                         "radius = { value = ..., unit = \"bohr\" }", key="partial_core",
                         value=entry, source=src)
    charge = entry["charge"]
    if isinstance(charge, bool) or not isinstance(charge, (int, float)) or not charge > 0:
        raise InputError("must be a positive number of electrons", key="partial_core.charge",
                         value=charge, source=src)
    radius = _parameter(entry["radius"], "partial_core.radius", "length", src)
    if not radius > 0:
        raise InputError("must be positive", key="partial_core.radius", value=radius, source=src)
    return PartialCore(float(charge), radius)


def _projectors(entries, src: str) -> SeparablePart:
    """Read ``[[projectors]]`` tables: l, radius, and h (full) or h_diagonal."""
    if not isinstance(entries, list):
        raise InputError("must be an array of tables [[projectors]]", key="projectors",
                         value=entries, source=src)
    channels = []
    for n, entry in enumerate(entries):
        key = f"projectors[{n}]"
        if not isinstance(entry, dict):
            raise InputError("each projector entry must be a table", key=key, source=src)
        unknown = set(entry) - {"l", "radius", "h", "h_diagonal", "off_diagonal", "h_unit"}
        if unknown:
            raise InputError(f"unknown keys {sorted(unknown)}; accepted: l, radius, h or "
                             "h_diagonal (+ off_diagonal), h_unit", key=key, source=src)
        l = entry.get("l")
        if isinstance(l, bool) or l not in (0, 1, 2):
            raise InputError("l must be 0, 1 or 2", key=f"{key}.l", value=l, source=src)
        radius = _parameter(entry.get("radius"), f"{key}.radius", "length", src)
        unit = entry.get("h_unit", "Ha")
        if unit not in _PARAM_UNITS["energy"]:
            raise InputError(f"must be one of {', '.join(_PARAM_UNITS['energy'])}",
                             key=f"{key}.h_unit", value=unit, source=src)
        scale = _PARAM_UNITS["energy"][unit]
        if ("h" in entry) == ("h_diagonal" in entry):
            raise InputError("give either h (the full matrix) or h_diagonal", key=key, source=src)
        try:
            if "h" in entry:
                h = np.array(entry["h"], dtype=float)
                if h.ndim != 2 or h.shape[0] != h.shape[1] or not np.allclose(h, h.T):
                    raise ValueError
            else:
                diag = [float(x) for x in entry["h_diagonal"]]
                rule = entry.get("off_diagonal", "none")
                if rule == "hartwigsen-goedecker-hutter":
                    h = hgh_off_diagonal(l, diag)
                elif rule == "none":
                    h = np.diag(diag)
                else:
                    raise InputError("off_diagonal must be \"none\" or "
                                     "\"hartwigsen-goedecker-hutter\"",
                                     key=f"{key}.off_diagonal", value=rule, source=src)
        except (TypeError, ValueError):
            raise InputError("h must be a symmetric square matrix of numbers (1 to 3 rows)",
                             key=f"{key}.h", value=entry.get("h", entry.get("h_diagonal")),
                             source=src) from None
        if not 1 <= h.shape[0] <= 3:
            raise InputError("1 to 3 radial projectors", key=key, source=src)
        channels.append(ProjectorChannel(l=int(l), radius=radius, h=h * scale))
    return SeparablePart(tuple(channels))
