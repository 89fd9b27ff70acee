"""Input files: read, check and turn into a crystal and settings (layer 6).

An input file is TOML with the unit written beside every dimensioned value
(``cutoff = "15 Ha"``). :func:`load_input` reads a file and :func:`parse_input`
checks an already-parsed document; both return a :class:`RunInput` holding a
:class:`~pwsolid.crystal.Crystal`, validated
:class:`~pwsolid.settings.GroundStateSettings` (atomic units from here on) and an
echo of the whole input with every default filled in.

Every user mistake raises one :class:`~pwsolid.errors.InputError` naming the file,
the dotted key, the value and what is accepted. The accepted keys are declared
once, in the table behind :func:`schema_table`, which also feeds the help text.
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

from .basis import fft_grid_for_cutoff
from .crystal import ELEMENTS, PROTOTYPES, Crystal
from .errors import InputError
from .relaxation_keys import RELAXATION_KEYS, read_relaxation
from .resources import pseudopotential_dir
from .settings import SETTING_KEYS, GroundStateSettings
from .symmetry import reduced_lattice
from .units import BOHR_ANGSTROM, parse_quantity

__all__ = ["RunInput", "KeyInfo", "load_input", "parse_input", "schema_table", "schema_text"]

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
_DEFAULT_UNIT = {"energy": "Ha", "length": "bohr", "inverse_length": "bohr^-1"}


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
    """

    key: str
    type: str
    unit: str
    default: str
    description: str


@dataclass(frozen=True)
class _Key:
    kind: str
    description: str
    unit: str = ""
    default: str = ""          # text for crystal/output keys; settings keys use the dataclass
    field: str | None = None   # GroundStateSettings field fed by this key


_KIND_TEXT = {
    "name": "string", "file": "file name", "quantity": "",
    "number": "number", "integer": "integer", "boolean": "true or false",
    "integers3": "3 integers", "numbers3": "3 numbers", "grid": "3 integers",
    "species": "string or list of strings", "vectors": "3 x 3 numbers",
    "atoms": "list of {species, position}",
}

_SETTINGS_SECTIONS = ("basis", "brillouin_zone", "exchange_correlation", "occupations",
                      "spin", "self_consistency")
_SETTINGS_DESCRIPTIONS = {
    "cutoff": ("quantity", "energy", "plane-wave kinetic-energy cutoff |k+G|^2/2"),
    "fft_grid": ("grid", "", "force this FFT grid instead of the automatic choice"),
    "kpoint_mesh": ("integers3", "", "Monkhorst-Pack divisions along the reciprocal vectors"),
    "kpoint_shift": ("numbers3", "", "mesh shift in mesh steps, each 0 (through Gamma) or 0.5"),
    "use_symmetry": ("boolean", "", "reduce k-points to the irreducible wedge, symmetrise n(r)"),
    "functional": ("name", "", "exchange-correlation functional by registry name"),
    "max_iterations": ("integer", "", "largest number of self-consistency iterations"),
    "energy_tolerance": ("quantity", "energy", "stop when the total-energy change is below this"),
    "density_tolerance": ("number", "", "...and integral |n_out - n_in| / N_electrons is below this"),
    "mixing_weight": ("number", "", "fraction of the residual added per Pulay step, in (0, 1]"),
    "mixing_history": ("integer", "", "previous densities kept by the Pulay mixer"),
    "empty_bands": ("integer", "", "bands beyond the occupied ones (automatic: 4, more with "
                    "smearing)"),
    "smearing": ("name", "", "none (Aufbau filling) or fermi-dirac, gaussian, methfessel-paxton, "
                 "cold (for metals)"),
    "smearing_width": ("quantity", "energy", "smearing width sigma"),
    "smearing_order": ("integer", "", "order of the Methfessel-Paxton scheme"),
    "mixing_preconditioner": ("name", "", "auto (Kerker with smearing), kerker or none"),
    "spin_polarized": ("boolean", "", "collinear spin-polarised (LSDA) calculation"),
    "initial_moment": ("number", "", "N_up - N_down of the starting density "
                               "(electrons per cell)"),
    "fixed_moment": ("number", "", "hold N_up - N_down at this value (automatic: the "
                            "moment relaxes)"),
    "screening_wavevector": ("quantity", "inverse_length", "Kerker screening wave vector q0 "
                             "(automatic: Thomas-Fermi of the mean density)"),
}
_SETTINGS_DEFAULTS = {f.name: f.default for f in fields(GroundStateSettings)
                      if f.default is not MISSING}


def _build_schema() -> dict[str, dict[str, _Key]]:
    protos = ", ".join([*PROTOTYPES, _EXPLICIT])
    schema: dict[str, dict[str, _Key]] = {
        "crystal": {
            "prototype": _Key("name", f"structure: one of {protos}", default="required"),
            "lattice_constant": _Key("quantity", "cube edge / hexagonal a; scales lattice_vectors "
                                     "for 'explicit'", unit="length", default="required"),
            "species": _Key("species", "element symbol(s): two for zincblende, rocksalt, "
                            "cesium-chloride, one otherwise", default="required (prototypes)"),
            "c_over_a": _Key("number", "c/a ratio of hcp", default=f"{_IDEAL_C_OVER_A:.6g} (ideal)"),
            "lattice_vectors": _Key("vectors", "rows a1, a2, a3 in units of lattice_constant",
                                    default="required (explicit)"),
            "atoms": _Key("atoms", "atoms with species and fractional position",
                          default="required (explicit)"),
            "supercell": _Key("integers3", f"repeats along a1, a2, a3 (1 to {_SUPERCELL_MAX})",
                              default="[1, 1, 1]"),
        },
        "pseudopotentials": {},
        **{name: {} for name in _SETTINGS_SECTIONS},
        "output": {
            "result_file": _Key("file", "JSON result document", default="<input stem>.result.json"),
            "density_file": _Key("file", "density checkpoint", default="<input stem>.density.npz"),
            "checkpoint_file": _Key("file", "SCF checkpoint for resuming an interrupted run",
                                    default="<input stem>.checkpoint.npz"),
            "checkpoint_interval": _Key("integer", "write the SCF checkpoint every this many "
                                        "iterations", default="1"),
        },
    }
    for fname, (kind, unit, text) in _SETTINGS_DESCRIPTIONS.items():
        section, key = SETTING_KEYS[fname].split(".")
        schema[section][key] = _Key(kind, text, unit=unit, field=fname)
    return schema


_SCHEMA = _build_schema()
# -- [relaxation] of the relax-structure command: keys and reading in relaxation_keys.py
_SCHEMA["relaxation"] = {key: _Key(kind, meaning, unit=unit, default=default)
                         for key, kind, unit, default, meaning in RELAXATION_KEYS}
_TOP_LEVEL = ("title", *_SCHEMA)


def _format_default(spec: _Key) -> Any:
    """Default of a settings key as it would be written in an input file."""
    value = _SETTINGS_DEFAULTS[spec.field]
    if value is None:
        return None
    if spec.kind == "quantity":
        return f"{value:g} {_DEFAULT_UNIT[spec.unit]}"
    return list(value) if isinstance(value, tuple) else value


def _default_text(value: Any) -> str:
    if value is None:
        return "automatic"
    if isinstance(value, bool):
        return str(value).lower()
    return f'"{value}"' if isinstance(value, str) else str(value)


def schema_table() -> tuple[KeyInfo, ...]:
    """Every accepted input key with its type, unit kind, default and meaning.

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
        for key, spec in keys.items():
            default = _default_text(_format_default(spec)) if spec.field else spec.default
            rows.append(KeyInfo(f"{section}.{key}", _KIND_TEXT[spec.kind] or spec.unit,
                                spec.unit, default, spec.description))
    return tuple(rows)


def schema_text(markdown: bool = False) -> str:
    """The schema as a plain-text (or Markdown) table for help screens and the README."""
    rows = [(r.key, r.type, r.default, r.description) for r in schema_table()]
    head = ("key", "type", "default", "meaning")
    if markdown:
        lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
        lines += ["| " + " | ".join(f"`{c}`" if i == 0 else c.replace("|", "\\|")
                                    for i, c in enumerate(r)) + " |" for r in rows]
        return "\n".join(lines)
    widths = [max(len(r[i]) for r in [head, *rows]) for i in range(3)]
    fmt = "  ".join(f"{{:<{w}}}" for w in widths) + "  {}"
    return "\n".join(fmt.format(*r).rstrip() for r in [head, *rows])


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
    return replace(run, relaxation=read_relaxation(table, source), echo=echo)


#: A cell whose FFT grid is this many times larger than that of its reduced
#: equivalent is refused: the extra grid points cost time and memory for nothing.
SKEWED_GRID_FACTOR = 2.0


def _check_cell_shape(run: RunInput, source: str | None) -> None:
    """Refuse a cell so skewed that its FFT grid is far larger than an equivalent cell's."""
    s, lattice = run.settings, run.crystal.lattice
    if s.fft_grid is not None:
        return
    grid = fft_grid_for_cutoff(lattice, s.cutoff)
    reduced = reduced_lattice(lattice)
    better = fft_grid_for_cutoff(reduced, s.cutoff)
    if np.prod(grid) > SKEWED_GRID_FACTOR * np.prod(better):
        rows = "; ".join("[" + ", ".join(f"{x * BOHR_ANGSTROM:.6f}" for x in r) + "]"
                         for r in reduced)
        raise InputError(
            f"the cell is too skewed for the FFT grid: its vectors need a "
            f"{'x'.join(map(str, grid))} grid, an equivalent reduced cell only "
            f"{'x'.join(map(str, better))}; give the reduced lattice vectors (angstrom) "
            f"{rows} and the atoms in fractional coordinates of that cell",
            key="crystal.lattice_vectors", value=np.round(lattice * BOHR_ANGSTROM, 6).tolist(),
            source=source)


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
            interval = self._integer(output["checkpoint_interval"], "output.checkpoint_interval")
            if not 1 <= interval <= 10000:
                self.fail("must be between 1 and 10000", "output.checkpoint_interval", interval)
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
                      f"\"{value:g} {_DEFAULT_UNIT[unit]}\"", key, value)
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

    # -- sections ------------------------------------------------------------
    def _crystal(self, table: Mapping) -> tuple[Crystal, dict]:
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
        a = self._quantity(a_text, "crystal.lattice_constant", "length")
        lo, hi = _LATTICE_RANGE_BOHR
        if math.isfinite(a) and a > 0 and not lo <= a <= hi:
            self.fail(f"must lie between {lo} and {hi} bohr", "crystal.lattice_constant", a_text)
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
            supercell = self._triple(table["supercell"], "crystal.supercell", integers=True)
            if any(not 1 <= n <= _SUPERCELL_MAX for n in supercell):
                self.fail(f"each repeat must be an integer from 1 to {_SUPERCELL_MAX}",
                          "crystal.supercell", table["supercell"])
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
                c_over_a = self._number(table["c_over_a"], "crystal.c_over_a", "a positive number")
                if c_over_a > _C_OVER_A_MAX:
                    self.fail(f"must be at most {_C_OVER_A_MAX}", "crystal.c_over_a", c_over_a)
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
                if spec.kind == "quantity":
                    parsed = self._quantity(value, dotted, spec.unit)
                elif spec.kind == "integer":
                    parsed = self._integer(value, dotted)
                elif spec.kind == "number":
                    parsed = self._number(value, dotted)
                elif spec.kind == "boolean":
                    if not isinstance(value, bool):
                        self.fail("must be a TOML boolean: true or false (no quotes)", dotted, value)
                    parsed = value
                elif spec.kind == "name":
                    parsed = self._text(value, dotted, "a name string, e.g. \"lda-pz81\"")
                elif spec.kind == "grid" and value is None:
                    parsed = None     # an echo of an automatic grid
                else:
                    parsed = self._triple(value, dotted, integers=spec.kind != "numbers3")
                if spec.field == "functional":
                    parsed = self._functional(parsed, dotted)
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
        return self.base_dir / Path(text).expanduser()
