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

import sys
from pathlib import Path

from .common import (EXIT_INTERRUPTED, EXIT_NOT_CONVERGED, EXIT_OK, add_scan_options,
                     check_output_file, output_directory, parse_count, parse_fraction,
                     parse_numbers, plan_run, save_figures, scan_failed, scan_table,
                     write_or_keep)
from ..units import BOHR_ANGSTROM

__all__ = ["register", "run"]

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
    p.set_defaults(handler=run)


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
    check_output_file(restart, "--restart-file")
    json_path = out_dir / f"{stem}.eos.json"
    check_output_file(json_path, "--output-dir")
    plan_run(run_input, times=n_points)
    bar = None if args.quiet else ProgressBar("volume scan")
    c = run_input.crystal
    if not args.quiet:
        print(f"{run_input.title or stem}: {c.n_atoms} atom{'' if c.n_atoms == 1 else 's'}, volume "
              f"{c.volume * BOHR_ANGSTROM ** 3:.4f} A^3, cutoff {run_input.settings.cutoff:g} Ha, "
              f"k-mesh {'x'.join(map(str, run_input.settings.kpoint_mesh))}; "
              f"restart file {restart}", flush=True)
    try:
        scan = scan_volumes(c, run_input.settings, volume_range=volume_range, n_points=n_points,
                            c_over_a_values=qs, progress=bar, store=restart)
    except KeyboardInterrupt:
        print(f"\npwsolid: interrupted; the finished volumes are kept in {restart}: run the same "
              "command again to resume the scan from there", file=sys.stderr)
        return EXIT_INTERRUPTED
    doc = scan.as_document()
    doc["title"] = run_input.title
    doc["input"] = run_input.echo
    figures = []
    if getattr(args, "writes_files", True):      # MPI: only process 0 writes
        json_path = write_or_keep(json_path, lambda p: write_json(p, doc), "equation of state")
        plot = EquationOfStatePlot.from_scan(scan, title=run_input.title)
        figures = save_figures(plot, out_dir / f"{stem}.eos")
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
