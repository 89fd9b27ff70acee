"""``pwsolid compare-structures INPUT1 INPUT2 ...``: which structure is lowest (layer 6).

Each input file describes one candidate structure (its stem names it). Every
candidate is relaxed in volume with a scan of its own, and a table ranks them by
equilibrium energy per atom. Writes ``structure-comparison.json`` (schema
``pwsolid.structure-comparison/1``; ``--result-file`` renames it) into the
output directory, and keeps each candidate's points in ``<stem>.eos-points.json``
there, the same restart file ``pwsolid equation-of-state`` uses, so scans
already made with the same options are reused.

Exit codes: 0, or 4 when a candidate's scan did not converge.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from .common import (EXIT_INTERRUPTED, add_scan_options, check_output_file, output_directory,
                     parse_count, parse_fraction, plan_run, scan_failed, write_or_keep)

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "compare-structures", help="rank candidate structures by energy per atom",
        description="Relax the volume of each candidate structure (one ground-state input "
                    "file each) and rank them by their equilibrium energy per atom. The "
                    "inputs must share the cutoff, functional and pseudopotentials.",
        epilog="Writes structure-comparison.json and <stem>.eos-points.json per candidate. "
               "Exit code 4 when a scan did not converge.")
    p.add_argument("inputs", nargs="+", metavar="INPUT", help="ground-state input files, "
                   "one per candidate structure (at least two)")
    add_scan_options(p)
    p.add_argument("--result-file", default="structure-comparison.json", metavar="FILE",
                   help="name of the comparison document (default structure-comparison.json, "
                        "in the output directory)")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..config import load_input
    from ..progress import ProgressBar
    from ..results import write_json
    from ..workflows.structures import compare_structures

    volume_range = parse_fraction(args.volume_range, "--volume-range")
    n_points = parse_count(args.points, "--points")
    if len(args.inputs) < 2:
        raise InputError("give at least two input files, one per candidate structure",
                         key="INPUT", value=args.inputs)
    runs = {}
    for path in args.inputs:
        name = Path(path).stem
        if name in runs:
            raise InputError("two inputs have the same file stem; candidates are named by "
                             "their stems, so rename one", key="INPUT", value=path)
        runs[name] = load_input(path)
    first = next(iter(runs.values()))
    out_dir = output_directory(args, first)
    stores = {name: out_dir / f"{name}.eos-points.json" for name in runs}
    path = Path(args.result_file)
    path = path if path.is_absolute() else out_dir / path
    check_output_file(path, "--result-file")
    for store in stores.values():
        check_output_file(store, "--output-dir")
    for r in runs.values():
        plan_run(r, times=n_points)
    bar = None if args.quiet else ProgressBar("structures")
    try:
        result = compare_structures({n: r.crystal for n, r in runs.items()},
                                    {n: r.settings for n, r in runs.items()},
                                    progress=bar, stores=stores, volume_range=volume_range,
                                    n_points=n_points)
    except KeyboardInterrupt:
        print(f"\npwsolid: interrupted; finished volumes are kept in {out_dir}/*.eos-points.json:"
              " run the same command again to resume", file=sys.stderr)
        return EXIT_INTERRUPTED
    doc = result.as_document()
    doc["inputs"] = {n: r.echo for n, r in runs.items()}
    if getattr(args, "writes_files", True):      # MPI: only process 0 writes
        path = write_or_keep(path, lambda p: write_json(p, doc), "comparison")
    print(f"\n  {'rank':<5}{'candidate':<24}{'E - E_lowest':>14}{'V0/atom':>11}{'B0':>9}"
          f"{'B0prime':>9}")
    print(f"  {'':<5}{'':<24}{'(meV/atom)':>14}{'(A^3)':>11}{'(GPa)':>9}{'':>9}")
    for row in result.table():
        flag = "" if row["scan_converged"] else "  (see notes)"
        print(f"  {row['rank']:<5}{row['name']:<24}"
              f"{row['energy_above_lowest_per_atom_eV'] * 1e3:>14.2f}"
              f"{row['equilibrium_volume_per_atom_angstrom3']:>11.4f}"
              f"{row['bulk_modulus_GPa']:>9.1f}{row['bulk_modulus_pressure_derivative']:>9.3f}"
              f"{flag}")
    print(f"  lowest: {result.most_stable} (energies from the {_forms(result)} fits)")
    for m in result.messages:
        print(f"  note: {m}")
    for name, scan in result.scans.items():
        for m in scan.messages:
            print(f"  note ({name}): {m}")
    print(f"Result written to {path}")
    failed = {n: scan_failed(s) for n, s in result.scans.items()}
    failed = {n: w for n, w in failed.items() if w}
    if failed:
        print("pwsolid: " + "; ".join(f"{n}: {', '.join(w)}" for n, w in failed.items()),
              file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK


def _forms(result) -> str:
    forms = {s.preferred_form for s in result.scans.values()}
    return ", ".join(sorted(forms))
