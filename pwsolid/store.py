"""The one store: every file pwsolid writes in order to read it back (layer 4).

A saved file (a *record*) belongs to one calculation. What defines a calculation
is declared once, in :data:`IDENTITY_FIELDS`: the cell, the atoms, the cutoff,
the FFT grid, the k-point mesh, the functional, the pseudopotential files'
contents, the occupations, the spin, the partial cores, background electrons
and the result schema of this program. :func:`fingerprint` evaluates that table
for a crystal and its settings; every record carries the values, and reading a
record compares them field by field. A record of another calculation is refused
with an :class:`~pwsolid.errors.InputError` that names each differing field
("functional differs: file lda-pz81, input pbe"), unless the caller asks for the
mismatch explicitly (``accept_mismatch=True``); the differences are then
returned, for the result documents to report.

Settings that change the way to the answer but not the answer (iteration caps,
tolerances, mixing, band counts) are listed in :data:`PATH_ONLY_SETTINGS`; a test
checks that every field of ``GroundStateSettings`` is in exactly one of the two.
Output file names and the log level are not settings and never enter.

Two containers, both written atomically (:mod:`pwsolid.safe_files`) with the
mode an ordinary new file gets:

* an **archive** (``.npz``, :func:`save_record` / :func:`load_record`): arrays
  and a JSON header (kind, schema version, fingerprint, metadata) sealed by one
  SHA-256 checksum over the arrays and the header; read with
  ``allow_pickle=False``. SCF checkpoints, densities, relaxation steps and
  phonon displacement sets are archives.
* a **log** (JSON, :class:`RecordLog`): a header and a list of small entries,
  each sealed by its own checksum, so that a file cut back to its first entries
  (an interrupted writer, a user trimming it) still reads. Volume-scan points
  and relaxation trajectories are logs.

Every refusal (missing, truncated, bit-flipped, foreign, of another kind, of a
newer schema, of another calculation) is an ``InputError`` naming the file, and
nothing is written over a file that was refused.

The record kinds are declared in :data:`RECORD_KINDS`; :func:`register_kind`
adds one (a workflow with a file of its own).
"""

from __future__ import annotations

import hashlib
import io
import json
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np

from .errors import InputError
from .safe_files import array_checksum, atomic_write_bytes

__all__ = ["RESULT_SCHEMA", "plain_value", "RecordKind", "RECORD_KINDS", "register_kind", "IdentityField",
           "IDENTITY_FIELDS", "PATH_ONLY_SETTINGS", "Fingerprint", "fingerprint",
           "setup_fingerprint", "StoredRecord", "save_record", "load_record", "RecordLog",
           "save_checkpoint", "load_checkpoint", "save_density", "load_density"]

#: Schema of the ground-state result documents; part of every fingerprint, so that
#: records of an older program version whose results mean something else are refused.
RESULT_SCHEMA = "pwsolid.ground-state/1"

_ARCHIVE_FORMAT = "pwsolid.record"
_LOG_FORMAT = "pwsolid.record-log"


# --- kinds ----------------------------------------------------------------------------

@dataclass(frozen=True)
class RecordKind:
    """A kind of saved file.

    Attributes
    ----------
    name : str
        Stored in the file, e.g. ``"scf-checkpoint"``.
    label : str
        How messages call it, e.g. ``"SCF checkpoint"``.
    version : int
        Schema version of the content; a file of a higher version is refused
        (written by a newer program), as is one of a lower version.
    container : str
        ``"archive"`` (arrays, ``.npz``) or ``"log"`` (JSON list of entries).
    entries_key : str
        Name of the list of entries in a log file.
    remedy : str
        What the user can do when a file of another calculation is refused.
    """

    name: str
    label: str
    version: int
    container: str
    entries_key: str = "entries"
    remedy: str = "delete it or give the right file"


RECORD_KINDS: dict[str, RecordKind] = {}


def register_kind(kind: RecordKind) -> RecordKind:
    """Declare a kind of saved file (once; a second declaration must be equal)."""
    if kind.container not in ("archive", "log"):
        raise ValueError(f"unknown container {kind.container!r}")
    old = RECORD_KINDS.setdefault(kind.name, kind)
    if old != kind:
        raise ValueError(f"record kind {kind.name!r} is already declared differently")
    return kind


for _kind in (
        RecordKind("scf-checkpoint", "SCF checkpoint", 2, "archive",
                   remedy="delete it or pass --fresh to start over"),
        RecordKind("density", "density file", 2, "archive",
                   remedy="run 'pwsolid ground-state' on the input again or pass the right "
                          "--density-file"),
        RecordKind("volume-points", "restart file of a volume scan", 2, "log", "points",
                   remedy="delete it, or give another restart file (--restart-file)"),
        RecordKind("relaxation-step", "relaxation checkpoint", 1, "archive",
                   remedy="delete it or pass --fresh to start over"),
        RecordKind("relaxation-trajectory", "relaxation trajectory", 1, "log", "steps"),
        RecordKind("phonon-displacements", "phonon displacement record", 1, "archive")):
    register_kind(_kind)


def _kind(name) -> RecordKind:
    if isinstance(name, RecordKind):
        return name
    try:
        return RECORD_KINDS[name]
    except KeyError:
        raise ValueError(f"unknown record kind {name!r}; declared: "
                         f"{', '.join(RECORD_KINDS)}") from None


# --- what defines a calculation -----------------------------------------------------

@dataclass(frozen=True)
class _Calculation:
    crystal: Any
    settings: Any
    pseudopotentials: Mapping[str, Any]
    grid: tuple | None


@dataclass(frozen=True)
class IdentityField:
    """One entry of the description of a calculation.

    ``value(calc)`` gives the JSON value stored in records; ``settings`` names the
    ``GroundStateSettings`` fields it reads (for the completeness check).
    """

    name: str
    meaning: str
    value: Callable[[_Calculation], Any]
    settings: tuple[str, ...] = ()


def _rounded(array) -> list:
    # 1e-10 bohr: far below any physical change, above the round-off of rebuilding a cell
    return np.round(np.asarray(array, float), 10).tolist()


def _file_hash(pp) -> str:
    """SHA-256 (16 hex digits) of a pseudopotential's file; of its values if it has none."""
    path = getattr(pp, "source_file", None)
    if path is not None and Path(path).is_file():
        data = Path(path).read_bytes()
    else:
        data = repr(pp).encode()
    return hashlib.sha256(data).hexdigest()[:16]


def _partial_cores(calc: _Calculation) -> dict:
    out = {}
    for s, pp in sorted(calc.pseudopotentials.items()):
        core = getattr(pp, "partial_core", None)
        out[s] = None if core is None else [float(core.charge), float(core.radius)]
    return out


def _smeared(calc: _Calculation) -> bool:
    return calc.settings.smearing != "none"


#: The one description of what defines a calculation (see the module notes).
IDENTITY_FIELDS: tuple[IdentityField, ...] = (
    IdentityField("lattice_bohr", "lattice vectors (rows), bohr",
                  lambda c: _rounded(c.crystal.lattice)),
    IdentityField("species", "chemical species of the atoms", lambda c: list(c.crystal.species)),
    IdentityField("fractional_positions", "atomic positions, fractional",
                  lambda c: _rounded(c.crystal.positions)),
    IdentityField("cutoff_Ha", "plane-wave cutoff, Ha", lambda c: float(c.settings.cutoff),
                  ("cutoff",)),
    IdentityField("fft_grid", "FFT grid (the automatic choice when not known yet)",
                  lambda c: (list(c.grid) if c.grid is not None else
                             list(c.settings.fft_grid) if c.settings.fft_grid else "automatic"),
                  ("fft_grid",)),
    IdentityField("kpoint_mesh", "k-point mesh divisions", lambda c: list(c.settings.kpoint_mesh),
                  ("kpoint_mesh",)),
    IdentityField("kpoint_shift", "k-point mesh shift", lambda c: list(c.settings.kpoint_shift),
                  ("kpoint_shift",)),
    IdentityField("use_symmetry", "k-points reduced and density symmetrised",
                  lambda c: bool(c.settings.use_symmetry), ("use_symmetry",)),
    IdentityField("functional", "exchange-correlation functional",
                  lambda c: _functional_identity(c), ("functional",)),
    IdentityField("pseudopotentials", "SHA-256 of each species' pseudopotential file",
                  lambda c: {s: _file_hash(pp) for s, pp in sorted(c.pseudopotentials.items())},
                  ("pseudopotentials",)),
    IdentityField("partial_core", "model core charge and radius per species",
                  _partial_cores),
    IdentityField("smearing", "occupation scheme", lambda c: c.settings.smearing, ("smearing",)),
    IdentityField("smearing_width_Ha", "smearing width, Ha (none without smearing)",
                  lambda c: float(c.settings.smearing_width) if _smeared(c) else None,
                  ("smearing_width",)),
    IdentityField("smearing_order", "Methfessel-Paxton order (that scheme only)",
                  lambda c: (int(c.settings.smearing_order)
                             if c.settings.smearing == "methfessel-paxton" else None),
                  ("smearing_order",)),
    IdentityField("spin_polarized", "collinear spin polarisation",
                  lambda c: bool(c.settings.spin_polarized), ("spin_polarized",)),
    IdentityField("initial_moment", "starting moment, electrons per cell",
                  lambda c: float(c.settings.initial_moment), ("initial_moment",)),
    IdentityField("fixed_moment", "fixed moment, electrons per cell (none: free)",
                  lambda c: (None if c.settings.fixed_moment is None
                             else float(c.settings.fixed_moment)), ("fixed_moment",)),
    IdentityField("background_electrons", "electrons with a uniform positive background",
                  lambda c: float(c.settings.background_electrons), ("background_electrons",)),
    IdentityField("result_schema", "schema of this program's results", lambda c: RESULT_SCHEMA),
)

#: Settings that change how the SCF gets to the answer, not the answer; left out so
#: that a resumed run may, say, raise the iteration cap or tighten a tolerance.
PATH_ONLY_SETTINGS: dict[str, str] = {
    "max_iterations": "a cap on the iterations",
    "energy_tolerance": "when to stop (records that depend on it keep it themselves)",
    "density_tolerance": "when to stop (records that depend on it keep it themselves)",
    "mixing_weight": "the path of the iterations",
    "mixing_history": "the path of the iterations",
    "mixing_preconditioner": "the path of the iterations",
    "screening_wavevector": "the path of the iterations",
    "dielectric_constant": "the path of the iterations",
    "empty_bands": "bands computed beyond the occupied ones (a run may add some)",
}


@dataclass(frozen=True)
class Fingerprint:
    """The identity of a calculation: ``values`` maps each identity field to JSON."""

    values: Mapping[str, Any]

    @property
    def digest(self) -> str:
        """SHA-256 of the canonical JSON of the values (16 hex digits)."""
        return hashlib.sha256(_canonical(self.values)).hexdigest()[:16]

    def differences(self, stored: Mapping[str, Any]) -> tuple[str, ...]:
        """One line per field whose stored value differs: 'X differs: file a, input b'."""
        if not isinstance(stored, Mapping):
            stored = {}
        out = []
        for name, mine in self.values.items():
            theirs = stored.get(name, _ABSENT)
            if theirs != mine:
                out.append(f"{name} differs: file {_show(theirs)}, input {_show(mine)}")
        return tuple(out)


_ABSENT = object()


def _show(value) -> str:
    if value is _ABSENT:
        return "(not recorded)"
    if isinstance(value, str):
        return value
    text = json.dumps(value, separators=(",", ":"))
    return text if len(text) <= 80 else text[:77] + "..."


def fingerprint(crystal, settings, pseudopotentials: Mapping[str, Any],
                grid: tuple | None = None) -> Fingerprint:
    """The fingerprint of a crystal with its settings and loaded pseudopotentials.

    ``grid`` is the FFT grid when known (a prepared set-up); a record made for a
    family of cells (a volume scan) leaves it to the settings.
    """
    calc = _Calculation(crystal, settings, dict(pseudopotentials),
                        None if grid is None else tuple(int(n) for n in grid))
    values = {f.name: f.value(calc) for f in IDENTITY_FIELDS}
    return Fingerprint(json.loads(json.dumps(values)))


def setup_fingerprint(setup) -> Fingerprint:
    """The fingerprint of a prepared set-up (:func:`pwsolid.scf.prepare`)."""
    return fingerprint(setup.crystal, setup.settings, setup.pseudopotentials, setup.grid_shape)


def _canonical(value) -> bytes:
    return json.dumps(value, sort_keys=True, separators=(",", ":")).encode()


def _json_ready(value):
    return json.loads(json.dumps(value, default=plain_value))


def plain_value(obj):
    """JSON form of the numpy scalars, arrays and paths in documents and records
    (``json.dumps(..., default=plain_value)``); anything else is refused."""
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"cannot store {type(obj).__name__} in JSON")


# --- header checks shared by both containers ------------------------------------------

def _check_kind(header, kind: RecordKind, fmt: str, src: str) -> None:
    """Refuse a header of another format, another kind or another schema version."""
    label = kind.label
    if not isinstance(header, Mapping) or header.get("format") != fmt:
        raise InputError(f"not a pwsolid {label} (no record header); give the right file",
                         source=src)
    other = header.get("kind")
    if other != kind.name:
        what = RECORD_KINDS[other].label if other in RECORD_KINDS else f"a {other!r} record"
        raise InputError(f"this is a {what}, not a {label}; give the right file", source=src)
    version = header.get("schema_version")
    if not isinstance(version, int) or isinstance(version, bool):
        raise InputError(f"the {label} has no schema version; give the right file", source=src)
    if version > kind.version:
        raise InputError(f"the {label} was written by a newer pwsolid (schema {version}; this "
                         f"version reads schema {kind.version}): update pwsolid or recompute it",
                         source=src)
    if version < kind.version:
        raise InputError(f"the {label} was written by an older pwsolid (schema {version}; this "
                         f"version reads schema {kind.version}): delete it and recompute",
                         source=src)


def _check_fingerprint(header, kind: RecordKind, fp: Fingerprint | None,
                       accept_mismatch: bool, src: str) -> tuple[str, ...]:
    """The differences from ``fp`` (refused unless ``accept_mismatch``), after those
    accepted earlier and recorded in the file."""
    if fp is None:
        return ()
    differ = fp.differences(header.get("fingerprint"))
    # differences accepted when the file was made (or adopted) stay on record
    earlier = [str(d) for d in header.get("accepted_mismatches") or ()]
    if differ and not accept_mismatch:
        raise InputError(
            f"the {kind.label} belongs to a different calculation (another crystal or with "
            f"other settings): {'; '.join(differ)}. To go on, {kind.remedy}, or accept the "
            "difference explicitly (accept_mismatch=True, --accept-mismatch)",
            source=src)
    return tuple(dict.fromkeys([*earlier, *differ]))


def _header(kind: RecordKind, fmt: str, fp: Fingerprint, metadata, accepted) -> dict:
    return {"format": fmt, "kind": kind.name, "schema_version": kind.version,
            "fingerprint": dict(fp.values), "metadata": _json_ready(dict(metadata or {})),
            "accepted_mismatches": list(accepted)}


# --- archives -------------------------------------------------------------------------

@dataclass(frozen=True)
class StoredRecord:
    """A record read back: its arrays, metadata, stored fingerprint and accepted differences."""

    kind: str
    arrays: dict
    metadata: dict
    fingerprint: dict
    mismatches: tuple[str, ...] = ()
    path: str = ""


def _seal(arrays: Mapping[str, np.ndarray], header: Mapping) -> str:
    h = hashlib.sha256(array_checksum(arrays).encode())
    h.update(_canonical(header))
    return h.hexdigest()


def save_record(path, kind, fp: Fingerprint, arrays: Mapping[str, Any] | None = None,
                metadata: Mapping[str, Any] | None = None, *,
                accepted_mismatches=()) -> None:
    """Write an archive record atomically.

    Parameters
    ----------
    path
        Target file (``.npz`` by convention).
    kind
        A declared kind name (see :data:`RECORD_KINDS`) of container ``"archive"``.
    fp
        The fingerprint of the calculation the record belongs to.
    arrays
        Name -> numeric array (no object arrays: nothing is pickled).
    metadata
        JSON-ready values (numpy scalars and arrays are converted).
    accepted_mismatches
        Differences the user accepted when the inputs were read; kept in the file.
    """
    kind = _kind(kind)
    if kind.container != "archive":
        raise ValueError(f"{kind.name} records are logs; use RecordLog")
    arrays = {k: np.asarray(v) for k, v in (arrays or {}).items()}
    bad = [k for k, v in arrays.items() if v.dtype.hasobject or k == "header"]
    if bad:
        raise ValueError(f"arrays {bad} cannot be stored (object dtype or reserved name)")
    header = _header(kind, _ARCHIVE_FORMAT, fp, metadata, accepted_mismatches)
    header["checksum"] = _seal(arrays, header)
    buf = io.BytesIO()
    np.savez_compressed(buf, header=np.array(json.dumps(header)), **arrays)
    atomic_write_bytes(path, buf.getvalue())


def load_record(path, kind, fp: Fingerprint | None, *,
                accept_mismatch: bool = False) -> StoredRecord:
    """Read an archive record, checking integrity, kind, schema and fingerprint.

    ``fp`` None checks everything but the fingerprint. With ``accept_mismatch``
    a record of another calculation is returned with its differences in
    ``mismatches`` instead of refused.

    Raises
    ------
    InputError
        Missing, unreadable, truncated, corrupted, foreign, another kind, another
        schema, or (unless accepted) another calculation; the message names the file.
    """
    kind = _kind(kind)
    src = str(path)
    arrays = _read_npz(path, kind.label, src)
    try:
        header = json.loads(str(arrays.pop("header")))
    except (KeyError, ValueError):
        _refuse_first_layout(arrays.get("metadata"), kind, src)
        raise InputError(f"not a pwsolid {kind.label} (no record header); give the right file",
                         source=src) from None
    _check_kind(header, kind, _ARCHIVE_FORMAT, src)
    if header.pop("checksum", None) != _seal(arrays, header):
        raise InputError(f"the {kind.label} is corrupted (checksum mismatch); delete it "
                         "and recompute", source=src)
    differ = _check_fingerprint(header, kind, fp, accept_mismatch, src)
    return StoredRecord(kind.name, arrays, dict(header.get("metadata") or {}),
                        dict(header.get("fingerprint") or {}), differ, src)


def _read_npz(path, label: str, src: str) -> dict:
    try:
        with open(path, "rb") as fh:
            data = np.load(fh, allow_pickle=False)
            if not isinstance(data, np.lib.npyio.NpzFile):
                raise InputError(f"not a pwsolid {label} (a single numpy array, not a record)",
                                 source=src)
            with data:
                return {k: data[k] for k in data.files}
    except InputError:
        raise
    except FileNotFoundError:
        raise InputError(f"{label} not found", source=src) from None
    except IsADirectoryError:
        raise InputError(f"is a directory, not a {label}", source=src) from None
    except (zipfile.BadZipFile, EOFError):
        raise InputError(f"the {label} is truncated or corrupted (not a complete archive); "
                         "delete it and recompute", source=src) from None
    except OSError as exc:
        raise InputError(f"the {label} cannot be read ({exc.strerror or exc})",
                         source=src) from None
    except Exception:  # noqa: BLE001 - numpy and zlib raise many types for foreign bytes
        # numpy's own message suggests unpickling, which is never safe here: not repeated
        raise InputError(f"not a pwsolid {label} (unreadable or corrupted bytes); give the "
                         "right file", source=src) from None


def _refuse_first_layout(marker, kind: RecordKind, src: str) -> None:
    """Files of the first layout (before the one store) named their own format,
    'pwsolid.<something>/1': say so rather than calling them foreign."""
    text = "" if marker is None else str(marker)
    if '"format": "pwsolid.' in text or text.startswith("pwsolid."):
        raise InputError(f"the {kind.label} was written by an older pwsolid (before fingerprints "
                         "of the whole calculation): delete it and recompute", source=src)


# --- logs -----------------------------------------------------------------------------

class RecordLog:
    """A JSON log of small entries (scan points, trajectory steps) of one calculation.

    Opening an existing file checks it (refusals as :func:`load_record`); a new
    file is written at the first :meth:`add`. Every entry carries its own
    checksum, so that the file stays valid when entries are dropped from its end.

    Attributes
    ----------
    entries : list of dict
        The entries read or added (without their checksums).
    mismatches : tuple of str
        Differences accepted with ``accept_mismatch=True`` (empty otherwise).
    """

    def __init__(self, path, kind, fp: Fingerprint, *, accept_mismatch: bool = False):
        self.path = Path(path)
        self.kind = _kind(kind)
        if self.kind.container != "log":
            raise ValueError(f"{self.kind.name} records are archives; use save_record")
        self.fingerprint = fp
        self.entries: list[dict] = []
        self.mismatches: tuple[str, ...] = ()
        self.metadata: dict = {}
        if self.path.exists():
            self._read(accept_mismatch)

    def _read(self, accept_mismatch: bool) -> None:
        src, label = str(self.path), self.kind.label
        try:
            doc = json.loads(self.path.read_text(encoding="utf-8"))
        except IsADirectoryError:
            raise InputError(f"is a directory, not a {label}", source=src) from None
        except (OSError, UnicodeDecodeError, ValueError) as exc:
            raise InputError(f"the {label} is truncated or corrupted, it cannot be read "
                             f"({type(exc).__name__}: {exc}); delete it to start afresh",
                             source=src) from None
        if not isinstance(doc, dict) or doc.get("format") != _LOG_FORMAT:
            _refuse_first_layout(doc.get("format") if isinstance(doc, dict) else None,
                                 self.kind, src)
            raise InputError(f"not a {label} (expected a pwsolid record log); choose another "
                             "file name", source=src)
        _check_kind(doc, self.kind, _LOG_FORMAT, src)
        entries = doc.pop(self.kind.entries_key, None)
        if doc.pop("checksum", None) != hashlib.sha256(_canonical(doc)).hexdigest():
            raise InputError(f"the {label} is corrupted (header checksum mismatch); delete it "
                             "to start afresh", source=src)
        self.mismatches = _check_fingerprint(doc, self.kind, self.fingerprint,
                                             accept_mismatch, src)
        if not isinstance(entries, list):
            raise InputError(f"the {label} has no list of {self.kind.entries_key}", source=src)
        for i, entry in enumerate(entries):
            check = entry.pop("checksum", None) if isinstance(entry, dict) else None
            if not isinstance(entry, dict) or check != _entry_checksum(entry):
                raise InputError(f"the {label} is corrupted (entry {i + 1} fails its "
                                 "checksum); delete it to start afresh", source=src)
        self.metadata = dict(doc.get("metadata") or {})
        self.entries = entries

    def find(self, match: Callable[[dict], bool]) -> dict | None:
        """The first entry for which ``match(entry)`` is true, or None."""
        return next((e for e in self.entries if match(e)), None)

    def add(self, entry: Mapping, *, replaces: Callable[[dict], bool] | None = None) -> None:
        """Append ``entry`` (dropping entries ``replaces`` matches) and rewrite the file."""
        if replaces is not None:
            self.entries = [e for e in self.entries if not replaces(e)]
        self.entries.append(_json_ready(dict(entry)))
        self._write()

    def _write(self) -> None:
        header = _header(self.kind, _LOG_FORMAT, self.fingerprint, self.metadata,
                         self.mismatches)
        header["checksum"] = hashlib.sha256(_canonical(header)).hexdigest()
        header[self.kind.entries_key] = [{**e, "checksum": _entry_checksum(e)}
                                         for e in self.entries]
        text = json.dumps(header, indent=1, allow_nan=False) + "\n"
        atomic_write_bytes(self.path, text.encode("utf-8"))


def _entry_checksum(entry: Mapping) -> str:
    return hashlib.sha256(_canonical(entry)).hexdigest()[:32]


# --- SCF checkpoints ------------------------------------------------------------------

def save_checkpoint(path, setup, state, mixer) -> None:
    """Write the SCF state after a completed iteration (``state.density`` is the next input).

    Holds the density, the Pulay history, the wave functions and eigenvalues of
    every channel (serial runs) and the SCF history, under the set-up's fingerprint.
    """
    inputs, residuals = mixer.history_arrays()
    arrays = {"density": np.asarray(state.density, float), "mixer_inputs": inputs,
              "mixer_residuals": residuals}
    if getattr(state, "kinetic_density", None) is not None:      # meta-GGAs
        arrays["kinetic_density"] = np.asarray(state.kinetic_density, float)
    if setup.comm.size == 1 and state.wavefunctions is not None:
        for ik, c in enumerate(state.wavefunctions):
            arrays[f"wavefunctions_{ik}"] = c
        if state.eigenvalues is not None:
            arrays["eigenvalues"] = state.eigenvalues
    meta = {"iteration": state.iteration, "applications": state.applications,
            "history": state.history}
    save_record(path, "scf-checkpoint", setup_fingerprint(setup), arrays,
                json.loads(json.dumps(meta, default=float)))


def load_checkpoint(path, setup, *, accept_mismatch: bool = False) -> StoredRecord:
    """Read and check an SCF checkpoint for ``setup`` (see :func:`load_record`).

    A density on another grid is refused even when a mismatch is accepted: it
    cannot start this calculation.
    """
    record = load_record(path, "scf-checkpoint", setup_fingerprint(setup),
                         accept_mismatch=accept_mismatch)
    expected = tuple(setup.grid_shape) if setup.n_spin == 1 else (2, *setup.grid_shape)
    if "density" not in record.arrays or record.arrays["density"].shape != expected:
        raise InputError("the SCF checkpoint's density is on another grid or spin layout; "
                         "delete it to start afresh", source=str(path))
    return record


# --- densities ------------------------------------------------------------------------

def save_density(path, gs, *, accepted_mismatches=()) -> None:
    """Save a ground state's self-consistent density under its fingerprint (atomically)."""
    arrays = {"density": np.asarray(gs.density, float)}
    if getattr(gs, "spin_densities", None) is not None:
        arrays["spin_densities"] = np.asarray(gs.spin_densities, float)
    if getattr(gs, "kinetic_density", None) is not None:         # meta-GGAs: tau too
        arrays["kinetic_density"] = np.asarray(gs.kinetic_density, float)
    save_record(path, "density", setup_fingerprint(gs.setup), arrays,
                {"n_electrons": float(gs.setup.n_electrons)},
                accepted_mismatches=accepted_mismatches)


def load_density(path, setup=None, *, accept_mismatch: bool = False) -> dict:
    """Read a density file; with ``setup``, check that it belongs to that calculation.

    Returns a dict with ``density`` (and ``spin_densities`` and, for a meta-GGA,
    ``kinetic_density`` when saved),
    ``species``, ``functional``, ``fingerprint`` (the stored values) and
    ``mismatches`` (accepted differences; empty unless ``accept_mismatch``).
    A density on another grid is refused even when a mismatch is accepted.

    Raises
    ------
    InputError
        Missing, corrupted, foreign or future-schema files, and (unless
        accepted) densities of another calculation.
    """
    fp = None if setup is None else setup_fingerprint(setup)
    record = load_record(path, "density", fp, accept_mismatch=accept_mismatch)
    density = record.arrays.get("density")
    if density is None or density.ndim != 3:
        raise InputError("the density file holds no density on a grid", source=str(path))
    if setup is not None and density.shape != tuple(setup.grid_shape):
        raise InputError(f"the density is on a {'x'.join(map(str, density.shape))} grid, the "
                         f"input's is {'x'.join(map(str, setup.grid_shape))}: it cannot be used",
                         source=str(path))
    return {**record.arrays, "species": record.fingerprint.get("species", []),
            "functional": record.fingerprint.get("functional"),
            "fingerprint": record.fingerprint, "mismatches": record.mismatches}


def _functional_identity(c) -> str:
    """The functional's name; a Libxc functional by its canonical name (however it was
    spelt) and the Libxc version, since another version may give other values."""
    from .xc.libxc_bridge import is_libxc_spec, libxc_functional, libxc_version

    text = str(c.settings.as_dict()["functional"])
    if not is_libxc_spec(text):
        return text
    return f"{libxc_functional(text).name} (Libxc {libxc_version()})"
