"""Input files: read, check and turn into a crystal and settings (layer 6).

An input file is TOML with the unit written beside every dimensioned value
(``cutoff = "15 Ha"``). :func:`load_input` reads a file and :func:`parse_input`
checks an already-parsed document; both return a :class:`RunInput` holding a
:class:`~pwsolid.crystal.Crystal`, validated
:class:`~pwsolid.settings.GroundStateSettings` (atomic units from here on) and an
echo of the whole input with every default filled in.

Every user mistake raises one :class:`~pwsolid.errors.InputError` naming the file,
the dotted key, the value and what is accepted. The accepted keys are declared
once, as rows of :class:`~pwsolid.settings.Setting`: the ground-state settings in
:data:`pwsolid.settings.SETTINGS_TABLE`, the crystal and output keys here, all listed by
table in :data:`INPUT_TABLES`. The reader, :func:`schema_table` (``pwsolid input-keys``
and the README table) and the range messages are made from those rows. Checks that need
the pseudopotentials or the basis (electron count, FFT grid, memory) live in
:mod:`pwsolid.preflight`.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from collections.abc import Mapping
from dataclasses import MISSING, dataclass, fields, replace
from pathlib import Path
from typing import Any

import numpy as np

from .crystal import ELEMENTS, PROTOTYPES, Crystal
from .errors import InputError
from .relaxation_keys import RELAXATION_KEYS, read_relaxation
from .elastic_keys import ELASTIC_KEYS, read_elastic
from .phonon_keys import PHONON_KEYS, read_phonons
from .thermal_keys import THERMAL_KEYS, read_thermal
from .resources import inputs_dir, pseudopotential_dir
from .settings import SETTINGS_TABLE, UNIT_TEXT, GroundStateSettings, Setting
from .preflight import check_cell_shape
from .units import BOHR_ANGSTROM, parse_quantity

__all__ = ["RunInput", "KeyInfo", "load_input", "parse_input", "schema_table", "schema_text",
           "INPUT_TABLES", "CRYSTAL_KEYS", "OUTPUT_KEYS"]

#: Prototypes built from two species (all others take one).
_TWO_SPECIES = frozenset({"zincblende", "rocksalt", "cesium-chloride"})
_EXPLICIT = "explicit"
_IDEAL_C_OVER_A = math.sqrt(8.0 / 3.0)
# Sanity bounds that keep typing mistakes (a lattice constant in pm written as
# bohr, a supercell of 100^3) from reaching numerics that would overflow or hang.
_LATTICE_RANGE_BOHR = (0.5, 1000.0)
_C_OVER_A_MAX = 50.0
_VECTOR_ENTRY_MAX = 100.0
_SUPERCELL_MAX = 20
_MAX_ATOMS = 500
# keys of [crystal] that only a structure file uses
_FILE_ONLY_KEYS = ("symmetry_tolerance", "primitive_cell")


@dataclass(frozen=True)
class KeyInfo:
    """One accepted input key, for documentation and help screens.

    Attributes
    ----------
    key : str
        Dotted key, e.g. ``"basis.cutoff"``.
    type : str
        What to write: ``"energy"``, ``"integer"``, ``"3 integers"``, ...
    unit : str
        Unit kind for dimensioned values (``"energy"``, ``"length"``), else ``""``.
    default : str
        Default as it would be written, ``"required"``, or a note.
    description : str
        One line saying what the key does.
    accepted : str
        The accepted range or names (as the error messages say it), or ``""``.
    """

    key: str
    type: str
    unit: str
    default: str
    description: str
    accepted: str = ""


_KIND_TEXT = {
    "name": "string", "file": "file name", "quantity": "",
    "number": "number", "integer": "integer", "boolean": "true or false",
    "integers3": "3 integers", "numbers3": "3 numbers",
    "species": "string or list of strings", "vectors": "3 x 3 numbers",
    "atoms": "list of {species, position}",
    "anything": "",
}

#: Keys of [crystal]: read by the reader's own code (they build a Crystal), declared here.
CRYSTAL_KEYS: tuple[Setting, ...] = (
    Setting("crystal.prototype", None, "name", "structure",
            choices=lambda: (*PROTOTYPES, _EXPLICIT),
            default_text="required (unless structure_file)"),
    Setting("crystal.lattice_constant", None, "quantity",
            "cube edge / hexagonal a; scales lattice_vectors for 'explicit'", unit="length",
            low=_LATTICE_RANGE_BOHR[0], high=_LATTICE_RANGE_BOHR[1], default_text="required",
            rule=f"must be a positive length between {_LATTICE_RANGE_BOHR[0]} and "
                 f"{_LATTICE_RANGE_BOHR[1]} bohr ({_LATTICE_RANGE_BOHR[0] * BOHR_ANGSTROM:.3g} "
                 f"to {_LATTICE_RANGE_BOHR[1] * BOHR_ANGSTROM:.4g} angstrom)"),
    Setting("crystal.species", None, "species",
            "element symbol(s): two for zincblende, rocksalt, cesium-chloride, one otherwise",
            default_text="required (prototypes)"),
    Setting("crystal.c_over_a", None, "number", "c/a ratio of hcp", low=0.0,
            high=_C_OVER_A_MAX, low_open=True,
            rule=f"must be a positive number (the ratio c/a) of at most {_C_OVER_A_MAX:g}",
            default_text=f"{_IDEAL_C_OVER_A:.6g} (ideal)"),
    Setting("crystal.lattice_vectors", None, "vectors",
            "rows a1, a2, a3 in units of lattice_constant", default_text="required (explicit)"),
    Setting("crystal.atoms", None, "atoms", "atoms with species and fractional position",
            default_text="required (explicit)"),
    Setting("crystal.structure_file", None, "file",
            "read the cell and atoms from a structure file (CIF, or any format the atomistic library reads; "
            "needs the atomistic extra) instead of a prototype", default_text="none"),
    Setting("crystal.symmetry_tolerance", None, "quantity",
            "atoms of a structure file this close to symmetric positions count as symmetric; "
            "the structure is made exactly symmetric at it", unit="length", low=1e-6,
            high=1.0, rule="must lie between 1e-06 and 1 bohr", default_text='"0.001 bohr"'),
    Setting("crystal.primitive_cell", None, "boolean",
            "reduce a structure file's cell to a primitive one (a CIF usually gives the "
            "conventional cell)", default_text="false"),
    Setting("crystal.supercell", None, "integers3",
            f"repeats along a1, a2, a3 (1 to {_SUPERCELL_MAX})", low=1, high=_SUPERCELL_MAX,
            rule=f"each repeat must be an integer from 1 to {_SUPERCELL_MAX}",
            default_text="[1, 1, 1]"),
)

#: Keys of [output]: where the run writes (relative names are taken from the input's folder).
OUTPUT_KEYS: tuple[Setting, ...] = (
    Setting("output.result_file", None, "file", "JSON result document",
            default_text="<input stem>.result.json"),
    Setting("output.density_file", None, "file", "density checkpoint",
            default_text="<input stem>.density.npz"),
    Setting("output.checkpoint_file", None, "file",
            "SCF checkpoint for resuming an interrupted run",
            default_text="<input stem>.checkpoint.npz"),
    Setting("output.checkpoint_interval", None, "integer",
            "write the SCF checkpoint every this many iterations", low=1, high=10000,
            rule="must be between 1 and 10000", default_text="1"),
)


def _settings_tables() -> dict[str, tuple[Setting, ...]]:
    tables: dict[str, list[Setting]] = {}
    for row in SETTINGS_TABLE:
        if row.key:
            tables.setdefault(row.section, []).append(row)
    return {name: tuple(rows) for name, rows in tables.items()}


#: Every table of an input file and its declared keys, in file order. To add a table
#: (e.g. [relaxation]): declare its rows (``Setting`` with key, kind, unit, range,
#: meaning, default) and add them here; the reader checks types, ranges and unknown
#: keys, and ``input-keys`` and the README table list them. Read the checked values
#: with ``_Reader.table_values`` in :meth:`_Reader.run` and carry them on RunInput.
#: Keys of [relaxation] (the relax-structure command): declared here for the unknown-key
#: checks and the documentation; their values (forces and pressures with units) are
#: read and checked by :func:`pwsolid.relaxation_keys.read_relaxation`.
RELAXATION_TABLE: tuple[Setting, ...] = tuple(
    Setting(f"relaxation.{key}", None,
            kind if kind in ("name", "integer", "boolean") else "anything", meaning,
            unit=unit, default_text=default)
    for key, kind, unit, default, meaning in RELAXATION_KEYS)
#: Keys of [elastic_constants] (the elastic-constants command), read and checked by
#: :func:`pwsolid.elastic_keys.read_elastic`.
ELASTIC_TABLE: tuple[Setting, ...] = tuple(
    Setting(f"elastic_constants.{key}", None,
            kind if kind in ("number", "integer", "boolean") else "anything", meaning,
            unit=unit, default_text=default)
    for key, kind, unit, default, meaning in ELASTIC_KEYS)

#: Keys of [phonons] (the phonons command), read by :func:`pwsolid.phonon_keys.read_phonons`.
PHONON_TABLE: tuple[Setting, ...] = tuple(
    Setting(f"phonons.{key}", None,
            kind if kind in ("name", "integer", "boolean") else "anything", meaning,
            unit=unit, default_text=default)
    for key, kind, unit, default, meaning in PHONON_KEYS)

#: key of [pseudopotentials] naming a set of pwsolid's fitted table (pwsolid.pseudo.table)
_FITTED_TABLE_KEY = "fitted_table"

INPUT_TABLES: dict[str, tuple[Setting, ...]] = {
    "crystal": CRYSTAL_KEYS,
    "pseudopotentials": (),
    **_settings_tables(),
    "output": OUTPUT_KEYS,
    "relaxation": RELAXATION_TABLE,
    "elastic_constants": ELASTIC_TABLE,
    "phonons": PHONON_TABLE,
    "thermal": tuple(   # [thermal] (quasi-harmonic command): read by thermal_keys.read_thermal
        Setting(f"thermal.{key}", None, kind if kind in ("integer", "integers3") else "anything",
                meaning, unit=unit, default_text=default)
        for key, kind, unit, default, meaning in THERMAL_KEYS),
}
_SETTINGS_SECTIONS = tuple(_settings_tables())
_SCHEMA: dict[str, dict[str, Setting]] = {
    name: {row.short_key: row for row in rows} for name, rows in INPUT_TABLES.items()}
_TOP_LEVEL = ("title", *_SCHEMA)
_SETTINGS_DEFAULTS = {f.name: f.default for f in fields(GroundStateSettings)
                      if f.default is not MISSING}


def _format_default(spec: Setting) -> Any:
    """Default of a settings key as it would be written in an input file."""
    value = _SETTINGS_DEFAULTS[spec.field]
    if value is None:
        return None
    if spec.kind == "quantity":
        return f"{value:g} {UNIT_TEXT[spec.unit]}"
    return list(value) if isinstance(value, tuple) else value


def _default_text(value: Any) -> str:
    if value is None:
        return "automatic"
    if isinstance(value, bool):
        return str(value).lower()
    return f'"{value}"' if isinstance(value, str) else str(value)


def schema_table() -> tuple[KeyInfo, ...]:
    """Every accepted input key with its type, unit kind, default, range and meaning.

    Returns
    -------
    tuple of KeyInfo
        In file order; the README table and the help screen are made from it.
    """
    rows = [KeyInfo("title", "string", "", '""', "free text copied into the results")]
    for section, keys in _SCHEMA.items():
        if section == "pseudopotentials":
            rows.append(KeyInfo("pseudopotentials.<species>", "file name", "", "bundled default",
                                "pseudopotential file; a bare name is looked up beside the "
                                "input, then among the bundled files"))
            rows.append(KeyInfo(f"pseudopotentials.{_FITTED_TABLE_KEY}", "name", "", "none",
                                "lda or pbe: every species without its own entry takes "
                                "pwsolid's fitted table file of that set"))
        for key, spec in keys.items():
            default = _default_text(_format_default(spec)) if spec.field else spec.default_text
            rows.append(KeyInfo(spec.key, _KIND_TEXT[spec.kind] or spec.unit,
                                spec.unit, default, spec.meaning, spec.accepted()))
    return tuple(rows)


def schema_text(markdown: bool = False) -> str:
    """The schema as a plain-text (or Markdown) table for help screens and the README."""
    rows = [(r.key, r.type, r.default, r.accepted.removeprefix("accepted: "), r.description)
            for r in schema_table()]
    head = ("key", "type", "default", "accepted", "meaning")
    if markdown:
        lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
        lines += ["| " + " | ".join(f"`{c}`" if i == 0 else c.replace("|", "\\|")
                                    for i, c in enumerate(r)) + " |" for r in rows]
        return "\n".join(lines)
    lines = []
    widths = [max(len(r[i]) for r in [head, *rows]) for i in range(3)]
    fmt = "  ".join(f"{{:<{w}}}" for w in widths) + "  {}"
    for r in [head, *rows]:
        lines.append(fmt.format(*r[:3], r[4]).rstrip())
        if r[3] and r is not head:
            lines.append(" " * (sum(widths) + 6) + f"[{r[3]}]")
    return "\n".join(lines)


@dataclass(frozen=True)
class RunInput:
    """A checked input: what to compute and where to write it.

    Attributes
    ----------
    crystal : Crystal
        The cell in bohr (supercell already applied).
    settings : GroundStateSettings
        Numerical settings in atomic units; ``pseudopotentials`` maps species to
        resolved file paths (species without an entry use the bundled default).
    title : str
        Free text from the input.
    result_file, density_file : Path
        Where the result document and the density checkpoint go.
    checkpoint_file : Path
        The SCF checkpoint (resume file) of this run.
    checkpoint_interval : int
        Iterations between checkpoint writes.
    source : Path or None
        The input file, if the input came from one.
    echo : dict
        The full input with every default filled in, in the user's units
        (``"15 Ha"``), JSON-friendly; ``basis.fft_grid`` is ``None`` when automatic.
    """

    crystal: Crystal
    settings: GroundStateSettings
    title: str
    result_file: Path
    density_file: Path
    source: Path | None
    echo: dict
    checkpoint_file: Path | None = None
    checkpoint_interval: int = 1
    relaxation: Any = None     # RelaxationSettings of the [relaxation] table (or defaults)
    elastic: Any = None        # ElasticSettings of the [elastic_constants] table (or defaults)
    phonons: Any = None        # PhononSettings of the [phonons] table (or defaults)
    thermal: Any = None        # ThermalSettings of the [thermal] table (or defaults)


# -- reading -------------------------------------------------------------


def load_input(path) -> RunInput:
    """Read and check an input file.

    Parameters
    ----------
    path : str or Path
        The TOML input file. Relative file names inside it are taken relative
        to its directory.

    Returns
    -------
    RunInput

    Raises
    ------
    InputError
        If the file is missing, unreadable, not UTF-8, not valid TOML (with the
        line and column) or describes an invalid calculation.
    """
    path = Path(path)
    name = str(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError("input file not found", source=name) from None
    except IsADirectoryError:
        raise InputError("is a directory, not an input file", source=name) from None
    except OSError as exc:
        raise InputError(f"cannot read the input file ({exc.strerror or exc})", source=name) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"the input file is not UTF-8 text (byte {exc.start})", source=name) from None
    try:
        document = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"invalid TOML: {exc}", source=name) from None
    return parse_input(document, source=name, base_dir=path.absolute().parent)


def parse_input(document: Mapping, *, source: str | None = None,
                base_dir: Path | None = None) -> RunInput:
    """Check a parsed input document and build the crystal and settings.

    Parameters
    ----------
    document : mapping
        The TOML document as nested dicts (as :func:`tomllib.loads` returns).
    source : str, optional
        File name used in error messages and for default output names.
    base_dir : Path, optional
        Directory relative file names are resolved against; defaults to the
        directory of ``source``, else the working directory.

    Returns
    -------
    RunInput

    Raises
    ------
    InputError
        For the first problem found.
    """
    if base_dir is None:
        base_dir = Path(source).absolute().parent if source else Path.cwd()
    reader = _Reader(source, Path(base_dir).absolute())
    run = reader.run(document, stem=Path(source).stem if source else "pwsolid")
    _check_cell_shape(run, source)
    table = document.get("relaxation")          # [relaxation]: see relaxation_keys.py
    echo = run.echo if table is None else {**run.echo, "relaxation": dict(table)}
    elastic = document.get("elastic_constants")  # [elastic_constants]: see elastic_keys.py
    if elastic is not None:
        echo = {**echo, "elastic_constants": dict(elastic)}
    phonon_table = document.get("phonons")      # [phonons]: see phonon_keys.py
    if phonon_table is not None:
        echo = {**echo, "phonons": dict(phonon_table)}
    run = replace(run, relaxation=read_relaxation(table, source), echo=echo,
                  elastic=read_elastic(elastic, source),
                  phonons=read_phonons(phonon_table, source))
    table = document.get("thermal")             # [thermal]: see thermal_keys.py
    echo = run.echo if table is None else {**run.echo, "thermal": dict(table)}
    return replace(run, thermal=read_thermal(table, source), echo=echo)


def _check_cell_shape(run: RunInput, source: str | None) -> None:
    """Refuse a cell so skewed that its FFT grid is far larger than an equivalent cell's
    (the check lives with the other pre-run checks, in :mod:`pwsolid.preflight`)."""
    try:
        check_cell_shape(run.crystal.lattice, run.settings)
    except InputError as exc:
        raise exc.with_source(source) if source else exc from None


def _suggest(word: str, candidates) -> str | None:
    lowered = {c.lower(): c for c in candidates}
    match = difflib.get_close_matches(word.lower(), list(lowered), n=1, cutoff=0.6)
    return lowered[match[0]] if match else None


class _Reader:
    """Walks one document; holds the file name every error is attributed to."""

    def __init__(self, source: str | None, base_dir: Path):
        self.source = source
        self.base_dir = base_dir

    def fail(self, message: str, key: str | None = None, value: Any = None,
             *, show_value: bool = True):
        raise InputError(message, key=key, value=value, source=self.source,
                         has_value=show_value and value is not None)

    # -- structure ---------------------------------------------------------
    def run(self, document: Any, stem: str) -> RunInput:
        if not isinstance(document, Mapping):
            self.fail("the input must be a TOML document (a table of sections)", value=document)
        for name in document:
            if name not in _TOP_LEVEL:
                self._unknown_top(str(name))
        for name, keys in _SCHEMA.items():
            if name in document:
                table = document[name]
                if not isinstance(table, Mapping):
                    self.fail(f"must be a table: write a [{name}] section", key=name, value=table)
                if name != "pseudopotentials":
                    for key in table:
                        if key not in keys:
                            self._unknown_key(name, str(key))
        if "crystal" not in document:
            self.fail("missing required section [crystal]", key="crystal")
        title = document.get("title", "")
        if not isinstance(title, str):
            self.fail("must be a string of free text", key="title", value=title)

        crystal, crystal_echo = self._crystal(document["crystal"])
        kwargs, echo = self._settings(document)
        pseudos, pseudo_echo = self._pseudopotentials(document.get("pseudopotentials", {}), crystal)
        kwargs["pseudopotentials"] = pseudos
        try:
            settings = GroundStateSettings(**kwargs)
        except InputError as exc:
            raise exc.with_source(self.source) from None
        output = document.get("output", {})
        result_file = self._output_path(output, "result_file", f"{stem}.result.json")
        density_file = self._output_path(output, "density_file", f"{stem}.density.npz")
        checkpoint_file = self._output_path(output, "checkpoint_file", f"{stem}.checkpoint.npz")
        interval = 1
        if "checkpoint_interval" in output:
            interval = self._checked(output["checkpoint_interval"],
                                     _SCHEMA["output"]["checkpoint_interval"])
        full_echo = {"title": title, "crystal": crystal_echo, "pseudopotentials": pseudo_echo,
                     **echo, "output": {"result_file": str(result_file),
                                        "density_file": str(density_file),
                                        "checkpoint_file": str(checkpoint_file),
                                        "checkpoint_interval": interval}}
        return RunInput(crystal=crystal, settings=settings, title=title,
                        result_file=result_file, density_file=density_file,
                        source=Path(self.source) if self.source else None, echo=full_echo,
                        checkpoint_file=checkpoint_file, checkpoint_interval=interval)

    def _unknown_top(self, name: str):
        home = [f"{s}.{name}" for s, keys in _SCHEMA.items() if name in keys]
        if home:
            self.fail(f"unknown key '{name}' at the top level; did you mean '{home[0]}'? "
                      f"(put it under [{home[0].split('.')[0]}])", key=name)
        near = _suggest(name, _TOP_LEVEL)
        if near:
            self.fail(f"unknown section '{name}'; did you mean '{near}'?", key=name)
        self.fail(f"unknown section '{name}'; valid sections: {', '.join(_TOP_LEVEL)}", key=name)

    def _unknown_key(self, section: str, key: str):
        dotted = f"{section}.{key}"
        if key in _SCHEMA:
            self.fail(f"unknown key '{dotted}'; '{key}' is a section: write it as [{key}] "
                      f"(a plain key after a [{section}] header belongs to [{section}])", key=dotted)
        home = [f"{s}.{key}" for s, keys in _SCHEMA.items() if key in keys]
        if home:
            self.fail(f"unknown key '{dotted}'; did you mean '{home[0]}'? "
                      f"(it belongs to [{home[0].split('.')[0]}])", key=dotted)
        near = _suggest(key, _SCHEMA[section])
        if near:
            self.fail(f"unknown key '{dotted}'; did you mean '{section}.{near}'?", key=dotted)
        self.fail(f"unknown key '{dotted}'; valid keys of [{section}]: "
                  f"{', '.join(_SCHEMA[section])}", key=dotted)

    # -- values -------------------------------------------------------------
    def _integer(self, value, key, what="an integer") -> int:
        if isinstance(value, bool) or not isinstance(value, int):
            hint = f"; write {int(value)}" if isinstance(value, float) and value.is_integer() else ""
            self.fail(f"must be {what} (a TOML integer, no decimal point){hint}", key, value)
        return value

    def _number(self, value, key, what="a number") -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            hint = "; write the number without quotes" if isinstance(value, str) else ""
            self.fail(f"must be {what}{hint}", key, value)
        try:
            number = float(value)
        except OverflowError:
            number = math.inf
        if not math.isfinite(number):
            self.fail(f"must be {what} and finite", key, value)
        return number

    def _list(self, value, key, length: int | None, what: str) -> list:
        if not isinstance(value, (list, tuple)) or (length is not None and len(value) != length):
            self.fail(f"must be {what}", key, value)
        return list(value)

    def _triple(self, value, key, integers: bool) -> tuple:
        what = "a list of 3 integers, e.g. [4, 4, 4]" if integers else \
            "a list of 3 numbers, e.g. [0.5, 0.5, 0.5]"
        items = self._list(value, key, 3, what)
        read = self._integer if integers else self._number
        return tuple(read(v, key, what) for v in items)

    def _quantity(self, value, key, unit) -> float:
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            self.fail(f"must be a string with its unit, e.g. "
                      f"\"{value:g} {UNIT_TEXT[unit]}\"", key, value)
        return parse_quantity(value, unit, key=key, source=self.source)

    def _text(self, value, key, what="a string") -> str:
        if not isinstance(value, str) or not value.strip():
            self.fail(f"must be {what}", key, value)
        return value

    def _file_text(self, value, key) -> str:
        text = self._text(value, key, "a file name string")
        if any(ord(ch) < 32 for ch in text):
            self.fail("file names cannot contain control characters", key, value)
        return text

    def _typed(self, value, spec: Setting):
        """A value of the TOML type its row declares (ranges are checked by the row)."""
        dotted = spec.key
        if value is None and spec.automatic:
            return None
        if spec.kind == "quantity":
            return self._quantity(value, dotted, spec.unit)
        if spec.kind == "integer":
            return self._integer(value, dotted)
        if spec.kind == "number":
            return self._number(value, dotted)
        if spec.kind == "boolean":
            if not isinstance(value, bool):
                self.fail("must be a TOML boolean: true or false (no quotes)", dotted, value)
            return value
        if spec.kind == "name":
            return self._text(value, dotted, "a name string, e.g. \"lda-pz81\"")
        if spec.kind == "file":
            return self._file_text(value, dotted)
        return self._triple(value, dotted, integers=spec.kind != "numbers3")

    def _checked(self, value, spec: Setting):
        """Read ``value`` as ``spec`` declares and check it against the row's range."""
        parsed = self._typed(value, spec)
        try:
            return spec.check(parsed)
        except InputError as exc:     # echo the value as the user wrote it (with its unit)
            self.fail(exc.reason, spec.key, value)

    def table_values(self, table: Mapping, section: str) -> dict[str, Any]:
        """Checked values of the keys present in ``table`` (for tables of plain values)."""
        return {key: self._checked(table[key], spec) for key, spec in _SCHEMA[section].items()
                if key in table}

    # -- sections ------------------------------------------------------------
    def _crystal_from_file(self, table: Mapping) -> tuple[Crystal, dict]:
        """[crystal] with ``structure_file``: the cell and atoms come from the file."""
        from .interop import MissingExtraError
        from .interop.structure_files import DEFAULT_SYMMETRY_TOLERANCE, read_structure

        for key in table:
            if key not in (*_FILE_ONLY_KEYS, "structure_file", "supercell"):
                self.fail(f"'crystal.{key}' is not used with crystal.structure_file: the file "
                          "gives the cell and the atoms", f"crystal.{key}", table[key])
        text = self._file_text(table["structure_file"], "crystal.structure_file")
        path = (self.base_dir / Path(text).expanduser())
        spec = _SCHEMA["crystal"]
        tolerance = (self._checked(table["symmetry_tolerance"], spec["symmetry_tolerance"])
                     if "symmetry_tolerance" in table else DEFAULT_SYMMETRY_TOLERANCE)
        primitive = (self._checked(table["primitive_cell"], spec["primitive_cell"])
                     if "primitive_cell" in table else False)
        try:
            found = read_structure(path, symmetry_tolerance=tolerance, primitive=primitive)
        except MissingExtraError as exc:
            self.fail(str(exc), "crystal.structure_file", text)
        supercell = (1, 1, 1)
        if "supercell" in table:
            supercell = self._checked(table["supercell"], spec["supercell"])
        crystal = found.crystal
        if crystal.n_atoms * int(np.prod(supercell)) > _MAX_ATOMS:
            self.fail(f"the cell would hold {crystal.n_atoms * int(np.prod(supercell))} atoms; "
                      f"at most {_MAX_ATOMS} are accepted", "crystal.supercell", list(supercell))
        if supercell != (1, 1, 1):
            crystal = crystal.supercell(supercell)
        echo = {"structure_file": str(path), "symmetry_tolerance": f"{tolerance:g} bohr",
                "primitive_cell": primitive, "supercell": list(supercell),
                "space_group_found": found.space_group,
                "space_group_number_found": found.space_group_number,
                "import_notes": list(found.messages)}
        return crystal, echo

    def _crystal(self, table: Mapping) -> tuple[Crystal, dict]:
        if "structure_file" in table:
            return self._crystal_from_file(table)
        for key in _FILE_ONLY_KEYS:
            if key in table:
                self.fail(f"'crystal.{key}' is only used with crystal.structure_file",
                          f"crystal.{key}", table[key])

        def need(key):
            if key not in table:
                self.fail(f"missing required key 'crystal.{key}'", key=f"crystal.{key}")
            return table[key]

        proto = need("prototype")
        valid = [*PROTOTYPES, _EXPLICIT]
        if not isinstance(proto, str) or proto not in valid:
            near = _suggest(proto, valid) if isinstance(proto, str) else None
            hint = f"did you mean '{near}'? " if near else ""
            self.fail(f"unknown prototype; {hint}valid prototypes: {', '.join(valid)}",
                      "crystal.prototype", proto)
        a_text = need("lattice_constant")
        a = self._checked(a_text, _SCHEMA["crystal"]["lattice_constant"])
        echo: dict[str, Any] = {"prototype": proto, "lattice_constant": a_text}

        only_explicit = ("lattice_vectors", "atoms")
        only_proto = ("species", "c_over_a")
        for key in only_proto if proto == _EXPLICIT else only_explicit:
            if key in table:
                why = ("give each atom's species in crystal.atoms" if key == "species" else
                       "write the hexagonal cell in crystal.lattice_vectors") \
                    if proto == _EXPLICIT else "use prototype = \"explicit\" for a cell of your own"
                self.fail(f"'crystal.{key}' is not used with prototype '{proto}'; {why}",
                          f"crystal.{key}", table[key])
        if "c_over_a" in table and proto != "hcp":
            self.fail(f"'crystal.c_over_a' is only used with prototype 'hcp', not '{proto}'",
                      "crystal.c_over_a", table["c_over_a"])

        supercell = (1, 1, 1)
        if "supercell" in table:
            supercell = self._checked(table["supercell"], _SCHEMA["crystal"]["supercell"])
        try:
            with np.errstate(all="ignore"):     # overflow shows up as a range error instead
                if proto == _EXPLICIT:
                    vectors, species, positions, extra = self._explicit(table, need)
                    crystal = Crystal(a * vectors, species, positions)
                else:
                    species, extra = self._prototype_species(proto, need("species"), table)
                    args = (species if len(species) == 2 else species[0],)
                    crystal = PROTOTYPES[proto](a, *args, *([extra] if proto == "hcp" else []))
                total = crystal.n_atoms * int(np.prod(supercell))
                if total > _MAX_ATOMS:
                    self.fail(f"the cell would hold {total} atoms; at most {_MAX_ATOMS} are "
                              "accepted", "crystal.supercell", list(supercell))
                if supercell != (1, 1, 1):
                    crystal = crystal.supercell(supercell)
        except InputError as exc:
            raise (exc if exc.source == self.source else exc.with_source(self.source)) from None
        if proto == _EXPLICIT:
            echo["lattice_vectors"] = vectors.tolist()
            echo["atoms"] = extra
        else:
            echo["species"] = list(species)
            if proto == "hcp":
                echo["c_over_a"] = extra
        echo["supercell"] = list(supercell)
        return crystal, echo

    def _prototype_species(self, proto, value, table):
        count = 2 if proto in _TWO_SPECIES else 1
        example = "[\"Ga\", \"As\"]" if count == 2 else "\"Si\" or [\"Si\"]"
        items = [value] if isinstance(value, str) and count == 1 else value
        if not isinstance(items, (list, tuple)) or len(items) != count:
            got = len(items) if isinstance(items, (list, tuple)) else "not a list"
            self.fail(f"prototype '{proto}' takes {count} species ({got} given); write {example}",
                      "crystal.species", value)
        for s in items:
            self._text(s, "crystal.species", f"element symbols as strings, e.g. {example}")
        c_over_a = None
        if proto == "hcp":
            c_over_a = _IDEAL_C_OVER_A
            if "c_over_a" in table:
                c_over_a = self._checked(table["c_over_a"], _SCHEMA["crystal"]["c_over_a"])
        return tuple(items), c_over_a

    def _explicit(self, table, need):
        key = "crystal.lattice_vectors"
        what = "three rows of three numbers, e.g. [[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]"
        rows = self._list(need("lattice_vectors"), key, 3, what)
        vectors = np.array([[self._number(v, key, what) for v in
                             self._list(row, key, 3, what)] for row in rows])
        if np.abs(vectors).max() > _VECTOR_ENTRY_MAX:
            self.fail(f"entries must be at most {_VECTOR_ENTRY_MAX} in magnitude (they are in "
                      "units of lattice_constant)", key, rows)
        key = "crystal.atoms"
        what = ("a list of tables like { species = \"Si\", position = [0.0, 0.0, 0.0] } "
                "(fractional coordinates)")
        atoms = self._list(need("atoms"), key, None, what)
        if not atoms:
            self.fail(f"needs at least one atom: {what}", key, atoms)
        if len(atoms) > _MAX_ATOMS:
            self.fail(f"at most {_MAX_ATOMS} atoms are accepted", key, f"{len(atoms)} atoms",)
        species, positions, echo = [], [], []
        for i, atom in enumerate(atoms, start=1):
            where = f"{key}[{i}]"
            if not isinstance(atom, Mapping):
                self.fail(f"atom {i} must be {what}", where, atom)
            for k in atom:
                if k not in ("species", "position"):
                    near = _suggest(str(k), ("species", "position"))
                    hint = f"did you mean '{near}'? " if near else ""
                    self.fail(f"unknown key '{where}.{k}'; {hint}an atom has 'species' and "
                              "'position'", f"{where}.{k}")
            for k in ("species", "position"):
                if k not in atom:
                    self.fail(f"atom {i} is missing '{k}': {what}", f"{where}.{k}")
            symbol = self._text(atom["species"], f"{where}.species", "an element symbol such as 'Si'")
            if symbol not in ELEMENTS:
                near = [e for e in ELEMENTS if e.lower() == symbol.lower()]
                hint = f"did you mean '{near[0]}'?" if near else "use an element symbol such as 'Si'"
                self.fail(f"unknown element; {hint}", f"{where}.species", symbol)
            pos = self._triple(atom["position"], f"{where}.position", integers=False)
            species.append(symbol)
            positions.append(pos)
            echo.append({"species": symbol, "position": list(pos)})
        return vectors, species, positions, echo

    def _settings(self, document: Mapping) -> tuple[dict, dict]:
        kwargs: dict[str, Any] = {}
        echo: dict[str, dict] = {}
        for section in _SETTINGS_SECTIONS:
            table = document.get(section, {})
            echo[section] = {}
            for key, spec in _SCHEMA[section].items():
                dotted = f"{section}.{key}"
                if key not in table:
                    echo[section][key] = _format_default(spec)
                    continue
                value = table[key]
                if value is None and _SETTINGS_DEFAULTS.get(spec.field, 0) is None:
                    kwargs[spec.field] = None     # an echo of an automatic choice
                    echo[section][key] = None
                    continue
                if spec.field == "functional":
                    parsed = self._functional(self._typed(value, spec), dotted)
                else:
                    parsed = self._checked(value, spec)
                kwargs[spec.field] = parsed
                echo[section][key] = list(value) if isinstance(value, tuple) else value
        return kwargs, echo

    def _functional(self, name: str, key: str) -> str:
        """Check a functional name now; resolve ``file:`` paths against the input's folder."""
        from .xc import get_functional

        if name.startswith("file:"):
            path = Path(name[5:]).expanduser()
            if not path.is_absolute():
                path = (self.base_dir / path).resolve()
            name = f"file:{path}"
        try:
            get_functional(name)
        except InputError as exc:
            raise InputError(exc.reason, key=key, source=self.source,
                             value=exc.value if exc.value is not None else name) from None
        return name

    def _pseudopotentials(self, table: Mapping, crystal: Crystal) -> tuple[dict, dict]:
        present = crystal.unique_species
        resolved: dict[str, Path] = {}
        table = dict(table)
        if _FITTED_TABLE_KEY in table:
            set_name = table.pop(_FITTED_TABLE_KEY)
            for species, path in self._fitted_table(set_name, present, table).items():
                resolved[species] = path
        for species, value in table.items():
            key = f"pseudopotentials.{species}"
            if species not in present:
                near = _suggest(str(species), present)
                hint = f"did you mean '{near}'? " if near and near != species else ""
                self.fail(f"species '{species}' is not in the crystal; {hint}the crystal holds "
                          f"{', '.join(present)}; remove the entry", key, value)
            text = self._file_text(value, key)
            resolved[species] = self._find_pseudo(species, text, key)
        return resolved, {s: str(p) for s, p in resolved.items()}

    def _fitted_table(self, set_name, present, own: Mapping) -> dict:
        """Files of pwsolid's fitted table (set ``lda`` or ``pbe``) for every species
        without an entry of its own."""
        from .pseudo.table import TABLE_SETS, table_file
        key = f"pseudopotentials.{_FITTED_TABLE_KEY}"
        if not isinstance(set_name, str) or set_name.lower() not in TABLE_SETS:
            self.fail(f"must name a set of the fitted table: {', '.join(TABLE_SETS)}", key,
                      set_name)
        set_name = set_name.lower()
        out = {}
        for species in present:
            if species in own:
                continue
            path = table_file(species, set_name)
            if not path.is_file():
                have = sorted(p.stem for p in path.parent.glob("*.toml"))
                self.fail(f"the fitted table '{set_name}' has no file for {species} (it has "
                          f"{', '.join(have) or 'none yet'}); name a file under "
                          f"pseudopotentials.{species}", key, set_name)
            out[species] = path.resolve()
        return out

    def _find_pseudo(self, species: str, text: str, key: str) -> Path:
        path = Path(text).expanduser()
        if path.is_absolute():
            candidates = [path]
        elif len(path.parts) == 1:
            candidates = [self.base_dir / path, pseudopotential_dir() / path]
        else:
            candidates = [self.base_dir / path]
        for candidate in candidates:
            try:
                if candidate.is_file():
                    return candidate.resolve()
            except (OSError, ValueError):   # e.g. a name too long for the file system
                pass
        try:
            bundled = sorted(p.name for p in pseudopotential_dir().glob(f"{species}-*.toml"))
        except OSError:
            bundled = []
        self.fail(f"pseudopotential file not found; searched {', '.join(map(str, candidates))}; "
                  f"bundled files for {species}: {', '.join(bundled) or 'none'} "
                  f"(or leave the entry out to use the bundled default)", key, text)

    def _output_path(self, table: Mapping, key: str, default: str) -> Path:
        text = self._file_text(table[key], f"output.{key}") if key in table else default
        return self._output_base() / Path(text).expanduser()

    def _output_base(self) -> Path:
        """Relative output names are taken from the input's folder, except for the bundled
        example inputs: their results go to the working directory, never among the examples."""
        try:
            examples = inputs_dir().resolve()
            folder = self.base_dir.resolve()
        except OSError:
            return self.base_dir
        if folder == examples or examples in folder.parents or self._is_bundled_example():
            return Path.cwd()
        return self.base_dir

    def _is_bundled_example(self) -> bool:
        """An input identical to a bundled example of the same name (e.g. the repository's
        own inputs/ folder beside an installed copy of the package)."""
        if not self.source:
            return False
        source = Path(self.source)
        twin = inputs_dir() / source.name
        try:
            return twin.is_file() and twin.read_bytes() == source.read_bytes()
        except OSError:
            return False
