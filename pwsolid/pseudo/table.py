"""pwsolid's own table of fitted separable pseudopotentials: targets, fit, checks (layer 3).

Each entry of the table is regenerated from a recorded target specification
(:class:`FitTargets`: element, frozen core, fitted and test-only valence
configurations, functional, charge radii, starting parameters and bounds) by
:func:`fit_entry`, which fits the separable dual-space Gaussian form
(:mod:`pwsolid.pseudo.fitting`) to pwsolid's own scalar-relativistic all-electron atom
and then measures, without fitting them,

* transferability: every valence eigenvalue and outside charge against the
  all-electron atom in every configuration, fitted and test-only (goal 1 mHa and
  0.01 e; common practice for norm-conserving sets);
* ghost states: the levels of each l of the neutral atom in a hard-walled sphere
  (:data:`GHOST_SPHERE` bohr), which turns the continuum into levels, up to
  :data:`GHOST_CEILING` Ha, pseudo against all-electron (less the core levels of that
  l), paired in order: an extra (ghost) or missing level shifts the pairing, so a pseudo
  level nearer a neighbouring all-electron level than halfway is reported as a ghost;
  the largest level difference is recorded as a figure of the scattering.

The target specifications live in ``pseudos/fitted-table/targets.toml`` (one table per
element); the written files sit in ``pseudos/fitted-table/<set>/`` with the whole record
in their ``[fit_record]`` table (see :func:`entry_record`).
"""

from __future__ import annotations

import hashlib
import json
import math
import tomllib
import warnings
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Callable, Mapping

import numpy as np

from ..errors import ConvergenceWarning, InputError
from ..resources import pseudopotential_dir
from .atom import RadialBasis, radial_basis, solve_radial_atom
from .fitting import all_electron_targets, fit_separable_form, outside_charge, separable_form

__all__ = ["TABLE_DIRECTORY", "TABLE_SETS", "FitTargets", "TableFit", "load_targets",
           "table_file", "fit_entry", "evaluate_entry", "ghost_levels", "targets_fingerprint",
           "table_elements", "entry_record", "entry_file_text", "read_record",
           "clamp_to_bounds"]

#: directory (under the bundled pseudopotential directory) of the fitted table
TABLE_DIRECTORY = "fitted-table"
#: set name -> functional of the fit
TABLE_SETS = {"lda": "lda-pz81", "pbe": "pbe"}
GHOST_SPHERE = 10.0         # bohr
GHOST_CEILING = 2.0         # Ha
#: Ha of sphere-level error that weigh as 1 mHa of valence eigenvalue error in the fit
SPHERE_SCALE = 0.05
EIGENVALUE_GOAL = 1e-3      # Ha
CHARGE_GOAL = 1e-2          # electrons
_LETTERS = "spd"


@dataclass(frozen=True)
class FitTargets:
    """The recorded specification one table file is regenerated from.

    Attributes
    ----------
    element : str
    atomic_number : int
    frozen_core : str
        Shells of the all-electron atom left out of the pseudo-atom, e.g. ``"1s2 2s2 2p6"``.
    configurations : tuple of str
        Fitted valence configurations; the first is the neutral reference.
    tests : tuple of str
        Excited or ionised configurations checked but not fitted.
    radii : dict {"s": [R, ...], "p": ..., "d": ...}, bohr
        Where each valence orbital's charge outside R is a target.
    start : dict
        Starting parameters (names of :func:`pwsolid.pseudo.fitting.separable_form`);
        their set fixes the form (which c_i and channels exist).
    bounds : dict {name: [low, high]}
    charge_scale : float
        Electrons of charge error that weigh as 1 mHa of eigenvalue error.
    softness_cutoff, softness_scale : float, Ha
        Penalty on the kinetic energy above this cutoff (0 for none).
    iterations : int
        Trust-region steps of the fit.
    sphere_weight : bool
        Fit the levels of the neutral atom in the ghost-check sphere up to 0.5 Ha above
        its ceiling too (keeps ghosts out; each :data:`SPHERE_SCALE` Ha counts as 1 mHa).
    solid : dict
        Reference solid of the cutoff measurement: ``structure`` (a builder name of
        :mod:`pwsolid.crystal`), ``lattice`` (angstrom), ``mesh``, ``smearing``.
    cutoffs : list of float, Ha
        Cutoffs of that measurement; the last is the reference.
    """

    element: str
    atomic_number: int
    frozen_core: str
    configurations: tuple
    tests: tuple
    radii: dict
    start: dict
    bounds: dict = field(default_factory=dict)
    charge_scale: float = 1e-2
    softness_cutoff: float = 0.0
    softness_scale: float = 0.5
    iterations: int = 40
    sphere_weight: bool = True
    solid: dict = field(default_factory=dict)
    cutoffs: tuple = ()

    @property
    def valence(self) -> float:
        from .atom import parse_configuration
        return float(sum(parse_configuration(self.configurations[0]).values()))

    def as_dict(self) -> dict:
        d = asdict(self)
        d["configurations"], d["tests"] = list(self.configurations), list(self.tests)
        d["cutoffs"] = list(self.cutoffs)
        return d

    @classmethod
    def from_mapping(cls, data: Mapping, source: str = "") -> "FitTargets":
        known = set(cls.__dataclass_fields__)
        unknown = set(data) - known
        if unknown:
            raise InputError(f"unknown target keys {sorted(unknown)}; accepted: "
                             f"{', '.join(sorted(known))}", source=source)
        missing = {"element", "atomic_number", "frozen_core", "configurations", "radii",
                   "start"} - set(data)
        if missing:
            raise InputError(f"missing target keys {sorted(missing)}", source=source)
        d = dict(data)
        d["configurations"] = tuple(d["configurations"])
        d["tests"] = tuple(d.get("tests", ()))
        d["cutoffs"] = tuple(float(c) for c in d.get("cutoffs", ()))
        d["start"] = {k: float(v) for k, v in d["start"].items()}
        d["bounds"] = {k: [float(x) for x in v] for k, v in d.get("bounds", {}).items()}
        d["radii"] = {k: [float(x) for x in v] for k, v in d["radii"].items()}
        bad = set(d["radii"]) - set(_LETTERS)
        if bad:
            raise InputError("radii are given per channel letter s, p or d", key="radii",
                             value=sorted(bad), source=source)
        targets = cls(**d)
        try:
            separable_form(targets.valence, targets.start)
        except (KeyError, InputError) as exc:
            raise InputError(f"the start parameters do not make a separable form ({exc})",
                             key=f"{targets.element}.start", source=source) from None
        return targets


def targets_fingerprint(targets: FitTargets, functional: str) -> str:
    """SHA-256 of the specification and functional: a written file is current when its
    recorded fingerprint equals this (resume skips it)."""
    text = json.dumps({"targets": targets.as_dict(), "functional": functional,
                       "sphere_scale": SPHERE_SCALE, "ghost_sphere": GHOST_SPHERE},
                      sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _targets_file() -> Path:
    return pseudopotential_dir() / TABLE_DIRECTORY / "targets.toml"


def table_elements(path: Path | None = None) -> list[str]:
    """Elements with a recorded target specification."""
    path = path or _targets_file()
    return sorted(tomllib.loads(path.read_text()))


def load_targets(element: str, path: Path | None = None) -> FitTargets:
    """The target specification of ``element`` from the targets file."""
    path = Path(path) if path else _targets_file()
    try:
        doc = tomllib.loads(path.read_text())
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"cannot read the target specifications: {exc}", source=str(path)) from None
    if element not in doc:
        raise InputError(f"no target specification for this element; specified: "
                         f"{', '.join(sorted(doc))}", key="element", value=element, source=str(path))
    return FitTargets.from_mapping(doc[element], source=str(path))


def table_file(element: str, set_name: str) -> Path:
    """Where the table file of ``element`` in set ``set_name`` (``lda``, ``pbe``) lives."""
    if set_name not in TABLE_SETS:
        raise InputError(f"unknown table set; accepted: {', '.join(TABLE_SETS)}",
                         key="set", value=set_name)
    return pseudopotential_dir() / TABLE_DIRECTORY / set_name / f"{element}.toml"


def _radii_by_l(targets: FitTargets) -> dict:
    return {_LETTERS.index(k): v for k, v in targets.radii.items()}


def pseudo_basis() -> RadialBasis:
    return radial_basis(r_max=50.0, intervals=110, first_step=1e-3)


def all_electron_basis(r_max: float = 50.0) -> RadialBasis:
    # the all-electron grid of the validation tests: valence eigenvalues to 1e-6 Ha
    return radial_basis(r_max=r_max, intervals=120, first_step=2e-4)


@dataclass
class TableFit:
    """Result of :func:`fit_entry` / :func:`evaluate_entry`.

    Attributes
    ----------
    parameters : dict
    rows : list of dict
        Per configuration and valence shell: ``configuration``, ``shell``, ``fitted``,
        ``all_electron`` (Ha), ``eigenvalue_error`` (Ha), ``charge_errors``
        ({R: electrons}).
    ghost : dict
        ``levels`` per l (pairs all-electron, pseudo, Ha), ``worst`` (Ha), ``ghost_free``.
    converged : bool
        The fit's least squares ended inside its step budget and every atom converged.
    messages : list of str
    """

    parameters: dict
    rows: list
    ghost: dict
    converged: bool = True
    messages: list = field(default_factory=list)
    cost: float = 0.0

    def worst(self, fitted: bool | None = None) -> tuple[float, float]:
        """Largest |eigenvalue error| (Ha) and |charge error| (e) over the rows."""
        rows = [r for r in self.rows if fitted is None or r["fitted"] == fitted]
        de = max((abs(r["eigenvalue_error"]) for r in rows), default=0.0)
        dq = max((abs(v) for r in rows for v in r["charge_errors"].values()), default=0.0)
        return de, dq

    @property
    def meets_goals(self) -> bool:
        de, dq = self.worst()
        return de <= EIGENVALUE_GOAL and dq <= CHARGE_GOAL and self.ghost["ghost_free"]

    def table(self) -> str:
        lines = [f"{'configuration':<22} {'shell':<5} {'AE (Ha)':>10} {'d eps (mHa)':>12}"
                 f"   d q_out (me) at R (bohr)"]
        for r in self.rows:
            cells = "  ".join(f"{v * 1e3:+.2f}@{R:g}" for R, v in r["charge_errors"].items())
            lines.append(f"{r['configuration']:<22} {r['shell']:<5} {r['all_electron']:>10.5f} "
                         f"{r['eigenvalue_error'] * 1e3:>+12.3f}   {cells}"
                         + ("" if r["fitted"] else "   (test only)"))
        return "\n".join(lines)


def _rows(targets: FitTargets, functional: str, parameters: Mapping, ae_fitted, ae_tests):
    local, channels = separable_form(targets.valence, parameters)
    basis = pseudo_basis()
    rows, ok = [], True
    for fitted, group in ((True, ae_fitted), (False, ae_tests)):
        for t in group:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", ConvergenceWarning)
                atom = solve_radial_atom(local.real_space, channels, t.configuration,
                                         functional=functional, basis=basis, max_iterations=200)
            ok &= atom.converged
            for k, e in t.eigenvalues.items():
                dq = {R: outside_charge(basis, atom.orbitals[k], R) - q
                      for (kk, R), q in t.outside_charge.items() if kk == k}
                rows.append({"configuration": t.configuration, "shell": k, "fitted": fitted,
                             "all_electron": e, "eigenvalue_error": atom.eigenvalues[k] - e,
                             "charge_errors": dq})
    return rows, ok


def _sphere_configuration(configuration: str, lowest: dict, extra: int) -> str:
    """``configuration`` with ``extra`` empty shells added above the highest of each l."""
    from .atom import parse_configuration
    shells = parse_configuration(configuration)
    top = {}
    for (n, l) in shells:
        top[l] = max(top.get(l, 0), n)
    for l in range(3):
        top.setdefault(l, lowest[l] - 1)
    words = [f"{n}{_LETTERS[l]}{f:g}" for (n, l), f in sorted(shells.items())]
    for l, n_top in top.items():
        words += [f"{n}{_LETTERS[l]}0" for n in range(n_top + 1, n_top + 1 + extra)]
    return " ".join(words)


def _sphere_setup(targets: FitTargets):
    """Configurations of the neutral atom with empty shells, pseudo and all-electron."""
    from .atom import parse_configuration
    core = parse_configuration(targets.frozen_core) if targets.frozen_core else {}
    valence = parse_configuration(targets.configurations[0])
    # the pseudo-atom's lowest n of each l: that of its valence shells, else the first
    # n above the core shells of that l (hydrogen-like numbering)
    lowest = {}
    for l in range(3):
        ns = [n for (n, ll) in valence if ll == l]
        lowest[l] = min(ns) if ns else max([n for (n, ll) in core if ll == l] + [l]) + 1
    pseudo_conf = _sphere_configuration(targets.configurations[0], lowest, 9)
    core_labels = {f"{n}{_LETTERS[l]}" for (n, l) in core}
    return pseudo_conf, f"{targets.frozen_core} {pseudo_conf}".strip(), core_labels


def _by_l(eigenvalues: Mapping, skip=()) -> dict:
    return {letter: sorted(e for k, e in eigenvalues.items() if k[1] == letter and k not in skip)
            for letter in _LETTERS}


def sphere_levels_all_electron(targets: FitTargets, functional: str,
                               sphere: float = GHOST_SPHERE) -> dict:
    """Levels per l (s, p, d) of the neutral all-electron atom in a hard-walled sphere,
    core levels left out, Ha."""
    _, ae_conf, core_labels = _sphere_setup(targets)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        ae = solve_radial_atom(lambda r: -targets.atomic_number / r, (), ae_conf,
                               functional=functional, relativistic=True,
                               basis=radial_basis(r_max=sphere, intervals=110, first_step=2e-4))
    return _by_l(ae.eigenvalues, core_labels)


def sphere_levels_pseudo(targets: FitTargets, functional: str, parameters: Mapping,
                         sphere: float = GHOST_SPHERE) -> dict:
    """The same levels of the neutral pseudo-atom, Ha."""
    local, channels = separable_form(targets.valence, parameters)
    pseudo_conf, _, _ = _sphere_setup(targets)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        ps = solve_radial_atom(local.real_space, channels, pseudo_conf, functional=functional,
                               basis=radial_basis(r_max=sphere, intervals=70, first_step=1e-3))
    return _by_l(ps.eigenvalues)


def ghost_levels(targets: FitTargets, functional: str, parameters: Mapping,
                 sphere: float = GHOST_SPHERE, ceiling: float = GHOST_CEILING,
                 all_electron: Mapping | None = None) -> dict:
    """Levels of each l (s, p, d) of the neutral atom in a hard-walled sphere, pseudo
    against all-electron, up to ``ceiling`` Ha (see the module notes)."""
    ae = all_electron or sphere_levels_all_electron(targets, functional, sphere)
    ps = sphere_levels_pseudo(targets, functional, parameters, sphere)
    levels, worst, free = {}, 0.0, True
    for letter in _LETTERS:
        a, p = ae[letter], ps[letter]
        pairs = [(x, y) for x, y in zip(a, p) if min(x, y) <= ceiling]
        # an extra (ghost) or a missing level shifts the pairing by one: the pseudo level
        # then lies nearer a neighbouring all-electron level than halfway to it
        for i, (x, y) in enumerate(pairs):
            gaps = [abs(a[j] - x) for j in (i - 1, i + 1) if 0 <= j < len(a)]
            free &= abs(x - y) < 0.5 * min(gaps, default=math.inf)
            worst = max(worst, abs(x - y))
        levels[letter] = [[x, y] for x, y in pairs]
    return {"levels": levels, "worst": worst, "ghost_free": bool(free), "sphere": sphere,
            "ceiling": ceiling}


def _ae_targets(targets: FitTargets, configurations, functional):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        return all_electron_targets(targets.atomic_number, targets.frozen_core,
                                    list(configurations), _radii_by_l(targets),
                                    functional=functional, basis=all_electron_basis())


def evaluate_entry(targets: FitTargets, functional: str, parameters: Mapping,
                   ae_sphere: Mapping | None = None) -> TableFit:
    """Transferability rows and ghost check of given parameters (no fitting)."""
    rows, ok = _rows(targets, functional, parameters,
                     _ae_targets(targets, targets.configurations, functional),
                     _ae_targets(targets, targets.tests, functional))
    ghost = ghost_levels(targets, functional, parameters, all_electron=ae_sphere)
    messages = [] if ok else ["a pseudo-atom did not converge"]
    return TableFit(dict(parameters), rows, ghost, ok, messages)


def fit_entry(targets: FitTargets, functional: str, start: Mapping | None = None, *,
              log: Callable[[str], None] | None = None) -> TableFit:
    """Fit the separable form to the all-electron targets, then evaluate it.

    ``start`` overrides the specification's starting parameters (e.g. the LDA file's
    values as the start of the PBE fit); its keys must be the same.
    """
    start = clamp_to_bounds(targets, targets.start if start is None else start)
    if set(start) != set(targets.start):
        raise InputError("the start must name the same parameters as the specification",
                         key="start", value=sorted(start))
    fitted = _ae_targets(targets, targets.configurations, functional)
    bounds = {k: tuple(v) for k, v in targets.bounds.items()}
    ae_sphere = sphere_levels_all_electron(targets, functional)
    # sphere levels up to a little above the ghost ceiling, weighed so that
    # SPHERE_SCALE Ha counts as 1 mHa of valence eigenvalue error
    top = GHOST_CEILING + 0.5
    wanted = {k: [e for e in v if e <= top] for k, v in ae_sphere.items()}

    def sphere_residuals(parameters):
        ps = sphere_levels_pseudo(targets, functional, parameters)
        return [(y - x) / SPHERE_SCALE for k in _LETTERS for x, y in zip(wanted[k], ps[k])]

    report = fit_separable_form(
        targets.valence, fitted, start, list(start), charge_scale=targets.charge_scale,
        bounds=bounds, functional=functional, basis=pseudo_basis(),
        softness_cutoff=targets.softness_cutoff or None, softness_scale=targets.softness_scale,
        max_iterations=targets.iterations, log=log,
        extra_residuals=sphere_residuals if targets.sphere_weight else None)
    result = evaluate_entry(targets, functional, report.parameters, ae_sphere)
    result.cost = report.cost
    return result


def clamp_to_bounds(targets: FitTargets, parameters: Mapping) -> dict:
    """``parameters`` moved inside the specification's bounds (a start from another set)."""
    out = {}
    for k, v in parameters.items():
        lo, hi = targets.bounds.get(k, (-math.inf, math.inf))
        out[k] = float(min(max(v, lo + 1e-9 * (abs(lo) + 1)), hi - 1e-9 * (abs(hi) + 1)))
    return out


# -- the written file -------------------------------------------------------------------

def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return repr(v) if math.isfinite(v) else '"nan"'
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, Mapping):
        return "{ " + ", ".join(f"{_toml_key(k)} = {_toml_value(v)}" for k, v in value.items()) + " }"
    return "[" + ", ".join(_toml_value(v) for v in value) + "]"


def _toml_key(key) -> str:
    key = str(key)
    return key if key.replace("_", "").isalnum() else json.dumps(key)


def _toml_table(name: str, table: Mapping) -> list[str]:
    return [f"[{name}]"] + [f"{_toml_key(k)} = {_toml_value(v)}" for k, v in table.items()] + [""]


def entry_record(targets: FitTargets, set_name: str, fit: TableFit,
                 cutoff: Mapping | None = None, *, version: str = "", date: str = "") -> dict:
    """The ``[fit_record]`` of a table file: targets, fingerprint, errors, ghost check,
    cutoff measurement (``None`` until measured)."""
    functional = TABLE_SETS[set_name]
    de_f, dq_f = fit.worst(True)
    de_t, dq_t = fit.worst(False)
    rows = [{"configuration": r["configuration"], "shell": r["shell"], "fitted": r["fitted"],
             "all_electron_Ha": round(r["all_electron"], 7),
             "eigenvalue_error_mHa": round(r["eigenvalue_error"] * 1e3, 4),
             "charge_errors_e": [[R, round(v, 5)] for R, v in r["charge_errors"].items()]}
            for r in fit.rows]
    record = {
        "summary": {"set": set_name, "functional": functional,
                    "fingerprint": targets_fingerprint(targets, functional),
                    "generated_by": f"pwsolid {version} fit-pseudopotential".replace("  ", " "),
                    "date": date, "fit_converged": bool(fit.converged),
                    "meets_goals": bool(fit.meets_goals),
                    "worst_fitted_eigenvalue_error_mHa": round(de_f * 1e3, 4),
                    "worst_fitted_charge_error_e": round(dq_f, 5),
                    "worst_test_eigenvalue_error_mHa": round(de_t * 1e3, 4),
                    "worst_test_charge_error_e": round(dq_t, 5),
                    "goals": f"{EIGENVALUE_GOAL * 1e3:g} mHa, {CHARGE_GOAL:g} e, no ghost "
                             f"up to {GHOST_CEILING:g} Ha"},
        "targets": targets.as_dict(),
        "ghost_check": {"ghost_free": bool(fit.ghost["ghost_free"]),
                        "sphere_bohr": fit.ghost["sphere"], "ceiling_Ha": fit.ghost["ceiling"],
                        "worst_level_difference_Ha": round(fit.ghost["worst"], 5),
                        "levels_all_electron_pseudo_Ha": {
                            k: [[round(a, 5), round(p, 5)] for a, p in v]
                            for k, v in fit.ghost["levels"].items()}},
        "rows": rows,
    }
    if cutoff is not None:
        record["cutoff"] = dict(cutoff)
    return record


def entry_file_text(targets: FitTargets, set_name: str, parameters: Mapping, record: Mapping,
                    suggested_cutoff: float | None) -> str:
    """A table file in pwsolid's pseudopotential format, with its ``[fit_record]``."""
    local, channels = separable_form(targets.valence, parameters)
    functional = TABLE_SETS[set_name]
    s = record["summary"]
    lines = [
        f"# {targets.element}: pwsolid fitted table, set '{set_name}' ({functional}); "
        f"{targets.valence:g} valence electrons ({targets.configurations[0]}), core "
        f"{targets.frozen_core or 'none'} frozen.",
        "# Separable dual-space Gaussian form of Hartwigsen, Goedecker & Hutter (1998), FITTED "
        "BY PWSOLID to its own",
        "# scalar-relativistic all-electron atom; regenerate with "
        f"`pwsolid fit-pseudopotential {targets.element} --set {set_name}`.",
        f"# worst errors: fitted {s['worst_fitted_eigenvalue_error_mHa']:.3f} mHa / "
        f"{s['worst_fitted_charge_error_e']:.4f} e; test configurations "
        f"{s['worst_test_eigenvalue_error_mHa']:.3f} mHa / {s['worst_test_charge_error_e']:.4f} e; "
        f"ghost-free: {record['ghost_check']['ghost_free']}",
        f'element = "{targets.element}"',
        f"valence_charge = {targets.valence:g}",
        'form = "goedecker-teter-hutter"',
    ]
    if suggested_cutoff:
        lines.append(f'suggested_cutoff = "{suggested_cutoff:g} Ha"')
    lines += ["", "[parameters]", f'r_loc = {{ value = {local.r_loc:.8f}, unit = "bohr" }}']
    for c in ("c1", "c2", "c3", "c4"):
        if c in parameters:
            lines.append(f'{c} = {{ value = {float(parameters[c]):.8f}, unit = "Ha" }}')
    for ch in channels:
        i, diag = 1, []
        while f"h{ch.l}_{i}" in parameters:
            diag.append(f"{float(parameters[f'h{ch.l}_{i}']):.8f}")
            i += 1
        lines += ["", "[[projectors]]", f"l = {ch.l}",
                  f'radius = {{ value = {ch.radius:.8f}, unit = "bohr" }}',
                  f"h_diagonal = [{', '.join(diag)}]", 'off_diagonal = "hartwigsen-goedecker-hutter"']
    lines += ["", "[source]",
              'reference = "analytic form: C. Hartwigsen, S. Goedecker and J. Hutter, Phys. Rev. '
              'B 58, 3641 (1998); parameters fitted by pwsolid (pwsolid.pseudo.table), not taken '
              'from any published table"',
              f'status = "fitted by pwsolid to its own scalar-relativistic all-electron {functional} '
              'atom; targets, errors, ghost check and cutoff measurement in [fit_record]"', ""]
    for name in ("summary", "targets", "ghost_check", "cutoff"):
        if name in record:
            lines += _toml_table(f"fit_record.{name}", record[name])
    for row in record["rows"]:
        lines += ["[[fit_record.rows]]"] + [f"{k} = {_toml_value(v)}" for k, v in row.items()] + [""]
    return "\n".join(lines)


def read_record(path) -> dict | None:
    """The ``[fit_record]`` of a written table file and its parameters, or None."""
    try:
        doc = tomllib.loads(Path(path).read_text())
    except (OSError, tomllib.TOMLDecodeError):
        return None
    record = doc.get("fit_record")
    if not isinstance(record, dict):
        return None
    params = {k: float(v["value"]) for k, v in doc.get("parameters", {}).items()}
    for ch in doc.get("projectors", []):
        l = ch["l"]
        params[f"r{l}"] = float(ch["radius"]["value"])
        for i, h in enumerate(ch["h_diagonal"], start=1):
            params[f"h{l}_{i}"] = float(h)
    return {"record": record, "parameters": params}
