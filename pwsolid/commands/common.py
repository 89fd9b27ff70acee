"""Plumbing shared by every command: option parsing, output locations, result writing and
exit codes (layer 6).

Commands import what they share from here, never from each other. Every output location
is checked with :func:`check_output_file` or :func:`check_output_dir` *before* the work
starts (a user mistake: InputError, exit code 3); :func:`write_or_keep` writes a result at
the end and, should the disk still refuse it, keeps it in a fallback file and says where.
"""

from __future__ import annotations

import os
import re
import sys
import tempfile
from pathlib import Path
from typing import Callable

import numpy as np

from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA, HARTREE_EV
from ..errors import (EXIT_INTERNAL, EXIT_INVALID_INPUT, EXIT_NOT_CONVERGED, EXIT_OK,
                      EXIT_USAGE, InputError)

__all__ = ["EXIT_OK", "EXIT_USAGE", "EXIT_INVALID_INPUT", "EXIT_NOT_CONVERGED", "EXIT_INTERNAL",
           "EXIT_INTERRUPTED", "FIGURE_FORMATS", "parse_int", "parse_formats", "parse_window",
           "parse_fraction", "parse_count", "parse_numbers", "parse_positive",
           "check_output_file", "check_output_dir", "default_output_dir", "write_or_keep",
           "add_output_dir_option", "progress_for", "announce_estimate",
           "accept_mismatch_option", "load_or_compute_density"]

#: Exit code after Ctrl-C or SIGTERM (128 + SIGINT, the shell's convention).
EXIT_INTERRUPTED = 130
FIGURE_FORMATS = ("png", "svg", "pdf")


# -- option parsing (bad values are InputErrors: exit code 3) ---------------------------

def parse_int(text, option: str, *, minimum: int = 1, maximum: int | None = None) -> int:
    """A whole number within bounds, from the command line."""
    try:
        value = int(str(text).strip())
    except ValueError:
        raise InputError("must be a whole number", key=option, value=text) from None
    if value < minimum or (maximum is not None and value > maximum):
        bound = f"between {minimum} and {maximum}" if maximum is not None else f"at least {minimum}"
        raise InputError(f"must be {bound}", key=option, value=text)
    return value


def parse_fraction(text, option: str) -> float:
    """'0.06' or '6%' -> 0.06 (the range is checked by the workflow)."""
    s = str(text).strip()
    try:
        value = float(s[:-1]) / 100.0 if s.endswith("%") else float(s)
    except ValueError:
        raise InputError("must be a number such as 0.06 or 6%", key=option, value=text) from None
    return value


def parse_count(text, option: str) -> int:
    """A whole number (the range is checked by the workflow)."""
    try:
        value = int(str(text).strip())
    except ValueError:
        raise InputError("must be a whole number", key=option, value=text) from None
    return value


def parse_numbers(text, option: str) -> list[float]:
    """'1.55,1.60,1.65' -> [1.55, 1.6, 1.65]."""
    parts = [x for x in re.split(r"[,\s]+", str(text).strip()) if x]
    try:
        values = [float(x) for x in parts]
    except ValueError:
        raise InputError("must be numbers separated by commas, e.g. 1.55,1.60,1.65",
                         key=option, value=text) from None
    if not values:
        raise InputError("give at least one number", key=option, value=text)
    return values


def parse_positive(value: float, option: str, unit: str = "") -> float:
    """A finite positive number (e.g. a Wigner-Seitz radius) or an InputError naming it."""
    if not (np.isfinite(value) and value > 0):
        raise InputError(f"must be a positive number{' in ' + unit if unit else ''}",
                         key=option, value=value)
    return float(value)


def parse_formats(text, option: str = "--formats") -> tuple[str, ...]:
    """'png,svg' -> ('png', 'svg'); only png, svg and pdf are accepted."""
    items = tuple(dict.fromkeys(t.strip().lower().lstrip(".") for t in str(text).split(",")
                                if t.strip()))
    bad = [t for t in items if t not in FIGURE_FORMATS]
    if not items or bad:
        raise InputError(f"figure formats are a comma-separated list from "
                         f"{', '.join(FIGURE_FORMATS)}", key=option, value=text)
    return items


def parse_window(text, option: str = "--window"):
    """'-13,8' -> (-13.0, 8.0) (eV); None stays None."""
    if text is None:
        return None
    parts = [t.strip().removesuffix("eV").strip() for t in str(text).split(",")]
    try:
        low, high = (float(t) for t in parts)
    except ValueError:
        raise InputError("must be two energies in eV, LOW,HIGH, e.g. --window=-13,8",
                         key=option, value=text) from None
    if not (np.isfinite(low) and np.isfinite(high) and low < high):
        raise InputError("needs LOW < HIGH (eV)", key=option, value=text)
    return low, high


def add_output_dir_option(parser, default: str | None, where: str) -> None:
    """The ``--output-dir`` option of every command that writes several files."""
    parser.add_argument("--output-dir", default=default, metavar="DIR",
                        help=f"where to write the results (default: {where})")


def progress_for(args, label: str):
    """A progress bar (None with --quiet); off a terminal it reports about twenty times."""
    if getattr(args, "quiet", False):
        return None
    from ..progress import ProgressBar

    bar = ProgressBar(label)
    if getattr(bar, "_tty", False):
        return bar

    def report(done, total):
        step = max(1, total // 20)
        if done == total or done % step == 0:
            bar(done, total)

    return report


# -- output locations --------------------------------------------------------------------

def _first_existing(path: Path) -> Path:
    p = path.absolute()
    while not p.exists() and p != p.parent:
        p = p.parent
    return p


def _writable_dir_problem(directory: Path) -> str | None:
    """Why files cannot be made under ``directory`` (created if missing), or None."""
    base = _first_existing(directory)
    if not base.is_dir():
        return f"{base} is a file, not a directory"
    if not os.access(base, os.W_OK | os.X_OK):
        return f"the directory {base} is not writable"
    return None


def check_output_file(path, option: str) -> Path:
    """Refuse, before any work, a file location that cannot be written.

    Raises
    ------
    InputError
        Naming ``option`` (e.g. ``--result-file`` or ``output.result_file``) when the
        path is a directory, lies under a file, or its directory cannot be written.
    """
    path = Path(path)
    if path.is_dir():
        raise InputError("is a directory; give a file name", key=option, value=str(path))
    if path.exists() and not os.access(path, os.W_OK):
        raise InputError("the file exists and is not writable", key=option, value=str(path))
    problem = _writable_dir_problem(path.parent)
    if problem:
        raise InputError(f"cannot write here: {problem}", key=option, value=str(path))
    return path


def check_output_dir(path, option: str = "--output-dir") -> Path:
    """Refuse, before any work, an output directory that cannot be made or written."""
    path = Path(path)
    if path.exists() and not path.is_dir():
        raise InputError("is a file, not a directory", key=option, value=str(path))
    problem = _writable_dir_problem(path)
    if problem:
        raise InputError(f"cannot write here: {problem}", key=option, value=str(path))
    return path


def default_output_dir(run_input) -> Path:
    """Where a workflow writes when no --output-dir is given: beside the input's result
    file (which :mod:`pwsolid.config` places in the working directory for the bundled
    example inputs, never among them)."""
    return Path(run_input.result_file).parent


def write_or_keep(path, write: Callable[[Path], object], what: str = "result") -> Path:
    """Write with ``write(path)``; if the disk refuses, keep it in a fallback file and say where.

    Returns the path actually written. The fallback is the same file name in the
    working directory, else in the temporary directory.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write(path)
        return path
    except OSError as exc:
        reason = exc.strerror or str(exc)
    for folder in (Path.cwd(), Path(tempfile.gettempdir())):
        rescue = folder / f"pwsolid-kept-{path.name}"
        try:
            write(rescue)
        except OSError:
            continue
        print(f"pwsolid: could not write the {what} to {path} ({reason}); it is kept in "
              f"{rescue}", file=sys.stderr)
        return rescue
    raise InputError(f"could not write the {what} ({reason}), nor a fallback copy in the "
                     "working or temporary directory", key="output", value=str(path))


def announce_estimate(estimate, *, always: bool = False) -> None:
    """Print the memory and time estimate of a run (always, or only for long runs)."""
    from ..preflight import LONG_RUN_SECONDS

    if always or estimate.seconds > LONG_RUN_SECONDS:
        text = estimate.describe()
        print(text[:1].upper() + text[1:], flush=True)


def plan_run(run_input, *, times: int = 1, always: bool = False):
    """Every pre-run check of the input's ground state (see :mod:`pwsolid.preflight`);
    prints the memory and time estimate for long runs (``times`` ground states)."""
    import dataclasses

    from ..preflight import plan_ground_state

    try:
        plan = plan_ground_state(run_input.crystal, run_input.settings)
    except InputError as exc:
        source = str(run_input.source) if run_input.source else None
        raise (exc.with_source(source) if source and not exc.source else exc) from None
    estimate = plan.estimate
    if times > 1:
        estimate = dataclasses.replace(estimate, seconds=estimate.seconds * times)
    announce_estimate(estimate, always=always)
    return plan


def save_figures(plot, stem: Path, *args, **kwargs) -> list:
    """``plot.save(stem, ...)``; a figure the disk refuses is reported, not fatal (the
    JSON result holds the numbers)."""
    try:
        return plot.save(stem, *args, **kwargs)
    except OSError as exc:
        print(f"pwsolid: could not write the figure {stem}.* ({exc.strerror or exc}); the "
              "numbers are in the JSON result", file=sys.stderr)
        return []


# -- volume scans (equation-of-state, compare-structures) ---------------------------

_LABELS = {"birch-murnaghan": "Birch-Murnaghan", "vinet": "Vinet", "murnaghan": "Murnaghan",
           "polynomial": "polynomial"}



def add_scan_options(p) -> None:
    """The options every volume-scanning command shares."""
    p.add_argument("--volume-range", default="0.06", metavar="FRACTION",
                   help="relative half-width of the scan: 0.06 (or 6%%) scans 0.94 V to "
                        "1.06 V (default 0.06)")
    p.add_argument("--points", default="7", metavar="N",
                   help="number of volumes, at least 5 (default 7)")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: the working directory, "
                        "or beside the result file the input names)")
    p.add_argument("--quiet", action="store_true", help="no progress bar, only the table")


def output_directory(args, run_input) -> Path:
    """--output-dir, else the default of every workflow (checked before any work)."""
    out = Path(args.output_dir) if args.output_dir else default_output_dir(run_input)
    return check_output_dir(out)


def scan_table(scan) -> list[str]:
    """Readable lines: one row per form (V0, lattice, B0, B0', E0, rms) and the spread."""
    a3 = BOHR_ANGSTROM ** 3
    lat_keys = list(scan.lattice_at(scan.v0))
    head = (f"  {'form':<17}{'V0 (A^3)':>11}"
            + "".join(f"{k + ' (A)':>10}" for k in lat_keys)
            + f"{'B0 (GPa)':>10}{'B0prime':>9}{'E0 (eV)':>16}{'rms (meV)':>11}")
    lines = [head, "  " + "-" * (len(head) - 2)]
    for name, f in scan.fits.items():
        lat = scan.lattice_at(f.v0)
        mark = " *" if name == scan.preferred_form else ""
        flag = "" if f.converged and f.minimum_inside_range else "  (see notes)"
        lines.append(f"  {_LABELS.get(name, name) + mark:<17}{f.v0 * a3:>11.4f}"
                     + "".join(f"{lat[k] * BOHR_ANGSTROM:>10.5f}" for k in lat_keys)
                     + f"{f.b0_gpa:>10.2f}{f.b0_prime:>9.3f}{f.e0 * HARTREE_EV:>16.6f}"
                     + f"{f.rms_residual * HARTREE_EV * 1e3:>11.3f}{flag}")
    if scan.spread is not None and len(scan.fits) > 1:
        s = scan.spread
        lines.append(f"  spread between forms: V0 {100 * s['v0']['relative_spread']:.3f} %, "
                     f"B0 {s['b0_gpa']['spread']:.2f} GPa "
                     f"({100 * s['b0_gpa']['relative_spread']:.2f} %), "
                     f"B0' {s['b0_prime']['spread']:.3f}")
    lines.append("  * preferred form")
    if scan.c_over_a_values:
        lines.append(f"  optimal c/a at V0: {scan.c_over_a_at(scan.v0):.4f}")
    return lines + pressure_lines(scan)


def pressure_lines(scan) -> list[str]:
    """Per point: V, the analytic pressure and -dE/dV of the preferred fit (GPa);
    empty when no point has a pressure."""
    cmp = scan.pressure_comparison()
    if cmp["largest"] is None:
        return []
    gpa = HA_PER_BOHR3_GPA
    q_col = scan.c_over_a_values is not None
    head = (f"  {'V (A^3)':>11}" + (f"{'c/a':>8}" if q_col else "")
            + f"{'P (GPa)':>11}{'-dE/dV fit':>12}{'difference':>12}")
    lines = ["", "  pressure at each point (analytic stress) and from the "
             f"{_LABELS.get(scan.preferred_form, scan.preferred_form)} fit:", head]
    for p, pa, pf, d in zip(scan.points, cmp["pressures"], cmp["fit_pressures"],
                            cmp["differences"]):
        q = f"{p.c_over_a:>8.4f}" if q_col else ""
        shown = (f"{pa * gpa:>11.3f}" if np.isfinite(pa) else f"{'-':>11}")
        diff = (f"{d * gpa:>12.3f}" if np.isfinite(d) else f"{'-':>12}")
        lines.append(f"  {p.volume * BOHR_ANGSTROM ** 3:>11.4f}{q}{shown}{pf * gpa:>12.3f}{diff}")
    lines.append(f"  largest |difference| {cmp['largest'] * gpa:.3f} GPa, mean "
                 f"{cmp['mean'] * gpa:+.3f} GPa (at a fixed cutoff the mean is minus the "
                 "basis-set (Pulay) pressure)")
    return lines


def scan_failed(scan) -> list[str]:
    """Reasons to exit with code 4 (empty when all is well)."""
    why = []
    if not scan.all_points_converged:
        why.append("some volumes did not reach SCF convergence")
    if not scan.fit.converged:
        why.append(f"the {scan.preferred_form} fit did not converge")
    if not scan.fit.minimum_inside_range:
        why.append("the minimum lies outside the scanned volumes")
    return why


# -- saved densities (band-structure, density-of-states) ------------------------------

def accept_mismatch_option(p) -> None:
    """``--accept-mismatch``: use a saved file made for another calculation, on purpose."""
    p.add_argument("--accept-mismatch", action="store_true",
                   help="use a saved file made for another calculation (other functional, "
                        "pseudopotential, ...) instead of refusing it; the differences are "
                        "printed and recorded in the result documents")


def load_or_compute_density(run, density_option, say, accept_mismatch: bool = False):
    """(setup, density, ground state or None, not-converged message or None, accepted
    differences).

    Uses ``density_option`` or the input's density file, refused (InputError naming
    each differing field) when it belongs to another calculation unless
    ``accept_mismatch``; if the input's file does not exist, runs the ground state,
    saves its density there and says so.
    """
    from ..scf import ground_state, prepare
    from ..store import load_density, save_density

    path = Path(density_option) if density_option else Path(run.density_file)
    if density_option or path.exists():    # a missing file given explicitly is an error
        setup = prepare(run.crystal, run.settings)
        stored = load_density(path, setup, accept_mismatch=accept_mismatch)
        say(f"Using the density in {path}")
        for line in stored["mismatches"]:
            say(f"  accepted on request: {line}")
        # a meta-GGA's file also holds tau: the workflows take the whole mapping then
        density = stored if "kinetic_density" in stored else stored["density"]
        return setup, density, None, None, stored["mismatches"]
    say(f"No density file at {path}: running the ground state first")
    gs = ground_state(run.crystal, run.settings)
    save_density(path, gs)
    say(f"  ground state {'converged' if gs.converged else 'NOT converged'} in "
        f"{gs.iterations} iterations; density written to {path}")
    problem = None if gs.converged else (gs.messages[0] if gs.messages else "SCF not converged")
    return gs.setup, gs.density, gs, problem, ()
