"""``pwsolid equation-of-state INPUT``: lattice constant and bulk modulus (layer 6).

Scans the volume of the crystal of an ordinary ground-state input file, fits
every equation of state, prints a table and writes, into the output directory
(default: where the input's result file would go):

* ``<stem>.eos.json``: the scan document (schema ``pwsolid.equation-of-state/1``);
* ``<stem>.eos.png`` and ``<stem>.eos.svg``: energy against volume with residuals;
* ``<stem>.eos-points.json``: the finished points, so that an interrupted scan
  resumes by re-running the same command (``--restart-file`` chooses another).

Exit codes: 0, or 4 when a point did not converge, a fit did not converge or the
minimum stayed outside the scanned volumes (the files are still written).
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from ..units import BOHR_ANGSTROM, HARTREE_EV

__all__ = ["register", "run", "parse_fraction", "parse_count", "parse_numbers",
           "output_directory", "scan_table"]

_LABELS = {"birch-murnaghan": "Birch-Murnaghan", "vinet": "Vinet", "murnaghan": "Murnaghan",
           "polynomial": "polynomial"}


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "equation-of-state", help="lattice constant and bulk modulus from a volume scan",
        description="Compute the crystal of a ground-state input at several volumes around "
                    "its own, fit the Birch-Murnaghan, Vinet, Murnaghan and polynomial "
                    "equations of state, and report the equilibrium volume, lattice constant, "
                    "bulk modulus and its pressure derivative. The range is extended "
                    "automatically when the minimum lies outside it. Re-running the same "
                    "command resumes an interrupted scan.",
        epilog="Writes <stem>.eos.json, <stem>.eos.png, <stem>.eos.svg and the restart file "
               "<stem>.eos-points.json. Exit code 4 when a point or a fit did not converge.")
    p.add_argument("input", help="ground-state input file (TOML)")
    add_scan_options(p)
    p.add_argument("--c-over-a", metavar="Q1,Q2,...",
                   help="hexagonal cells: c/a ratios tried at every volume (at least three), "
                        "e.g. 1.55,1.60,1.65")
    p.add_argument("--restart-file", metavar="FILE",
                   help="where finished points are kept (default <stem>.eos-points.json in "
                        "the output directory)")
    p.add_argument("--accept-mismatch", action="store_true",
                   help="reuse the points of a restart file made for another calculation "
                        "instead of refusing it; the differences are recorded in the result")
    p.set_defaults(handler=run)


def add_scan_options(p) -> None:
    """The options every volume-scanning command shares."""
    p.add_argument("--volume-range", default="0.06", metavar="FRACTION",
                   help="relative half-width of the scan: 0.06 (or 6%%) scans 0.94 V to "
                        "1.06 V (default 0.06)")
    p.add_argument("--points", default="7", metavar="N",
                   help="number of volumes, at least 5 (default 7)")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: where the input's "
                        "result file would go)")
    p.add_argument("--quiet", action="store_true", help="no progress bar, only the table")


# -- option parsing (bad values are InputErrors: exit code 3) ---------------------------

def parse_fraction(text, option: str) -> float:
    """'0.06' or '6%' -> 0.06."""
    s = str(text).strip()
    try:
        value = float(s[:-1]) / 100.0 if s.endswith("%") else float(s)
    except ValueError:
        raise InputError("must be a number such as 0.06 or 6%", key=option, value=text) from None
    return value


def parse_count(text, option: str) -> int:
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


def output_directory(args, run_input) -> Path:
    if args.output_dir:
        return Path(args.output_dir)
    return Path(run_input.result_file).parent


# -- the table -------------------------------------------------------------------------

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


# -- the command -----------------------------------------------------------------------

def run(args) -> int:
    from ..config import load_input
    from ..plots.eos import EquationOfStatePlot
    from ..progress import ProgressBar
    from ..results import write_json
    from ..workflows.equation_of_state import scan_volumes

    volume_range = parse_fraction(args.volume_range, "--volume-range")
    n_points = parse_count(args.points, "--points")
    qs = parse_numbers(args.c_over_a, "--c-over-a") if args.c_over_a else None
    run_input = load_input(args.input)
    stem = Path(args.input).stem
    out_dir = output_directory(args, run_input)
    restart = Path(args.restart_file) if args.restart_file else out_dir / f"{stem}.eos-points.json"
    bar = None if args.quiet else ProgressBar("volume scan")
    c = run_input.crystal
    if not args.quiet:
        print(f"{run_input.title or stem}: {c.n_atoms} atoms, volume "
              f"{c.volume * BOHR_ANGSTROM ** 3:.4f} A^3, cutoff {run_input.settings.cutoff:g} Ha, "
              f"k-mesh {'x'.join(map(str, run_input.settings.kpoint_mesh))}; "
              f"restart file {restart}", flush=True)
    scan = scan_volumes(c, run_input.settings, volume_range=volume_range, n_points=n_points,
                        c_over_a_values=qs, progress=bar, store=restart,
                        accept_mismatch=args.accept_mismatch)
    doc = scan.as_document()
    doc["title"] = run_input.title
    doc["input"] = run_input.echo
    json_path = out_dir / f"{stem}.eos.json"
    figures = []
    if getattr(args, "writes_files", True):      # MPI: only process 0 writes
        write_json(json_path, doc)
        plot = EquationOfStatePlot.from_scan(scan, title=run_input.title)
        figures = plot.save(out_dir / f"{stem}.eos")
    print(f"\nEquation of state: {len(scan.points)} points"
          + (f" ({sum(p.resumed for p in scan.points)} from the restart file)"
             if any(p.resumed for p in scan.points) else ""))
    print("\n".join(scan_table(scan)))
    for m in scan.messages:
        print(f"  note: {m}")
    print(f"Result written to {json_path}\nFigure written to "
          + ", ".join(str(f) for f in figures))
    why = scan_failed(scan)
    if why:
        print("pwsolid: " + "; ".join(why), file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK
