"""``pwsolid phonons INPUT``: phonon dispersion and density of states by finite displacements.

Reads an ordinary ground-state input of the primitive cell with an optional
``[phonons]`` table (``pwsolid input-keys`` lists its keys), calls
:func:`pwsolid.workflows.phonons.phonons` and writes, into the output directory
(default: where the input's result file would go):

* ``<stem>.phonons.json``: the result document (schema ``pwsolid.phonons/1``):
  frequencies at the special points (THz, cm^-1, meV), the dispersion, the density
  of states, the checks (acoustic sum rule before it was imposed, site symmetry,
  fit residual), the displacements and their history, the force constants;
* ``<stem>.phonons.png`` and ``.svg``: dispersion with the DOS panel;
* ``<stem>.phonon-displacements/``: one record per finished displacement (kind
  ``phonon-displacements`` of :mod:`pwsolid.store`); re-running the same command
  after an interruption skips the finished ones (``--fresh`` starts over).

Under ``mpiexec -n N`` the displacements are shared among the processes.

Exit codes: 0; 4 when a displaced ground state did not converge (the documents are
still written, with ``converged: false``); 3 for invalid input; 130 when interrupted.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK
from .common import (accept_mismatch_option, check_output_dir, default_output_dir,
                     progress_for)

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "phonons", help="phonon dispersion and density of states (finite displacements)",
        description="Displace atoms of a supercell of the input's (primitive) cell, compute "
                    "the forces, build the force constants with the crystal's symmetry and "
                    "the acoustic sum rule, and give the phonon dispersion along the path of "
                    "the band structures and the phonon density of states. Settings come "
                    "from the input's [phonons] table. Re-running resumes an interrupted run.",
        epilog="Writes <stem>.phonons.json, <stem>.phonons.png/.svg and keeps the finished "
               "displacements in <stem>.phonon-displacements/. Polar crystals: the LO-TO "
               "splitting at Gamma is absent (no Born charges).")
    p.add_argument("input", help="ground-state input file (TOML) with an optional [phonons]")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: where the input's result "
                        "file would go)")
    p.add_argument("--fresh", action="store_true",
                   help="delete the finished displacements of an earlier run first")
    accept_mismatch_option(p)
    p.add_argument("--quiet", action="store_true", help="print only the summary")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..config import load_input
    from ..plots.phonons import PhononPlot
    from ..results import write_json
    from ..workflows.phonons import phonons

    run_input = load_input(args.input)
    stem = Path(args.input).stem
    out_dir = check_output_dir(Path(args.output_dir) if args.output_dir
                               else default_output_dir(run_input))
    records = out_dir / f"{stem}.phonon-displacements"
    writes = getattr(args, "writes_files", True)
    if args.fresh and records.is_dir() and writes:
        shutil.rmtree(records)
    say = (lambda line: None) if args.quiet else (lambda line: print(line, flush=True))
    c = run_input.crystal
    say(f"{run_input.title or stem}: {c.n_atoms} atoms in the primitive cell")
    try:
        result = phonons(c, run_input.settings, run_input.phonons, record_dir=records,
                         accept_mismatch=args.accept_mismatch, log=say,
                         progress=progress_for(args, "displacements"))
    except KeyboardInterrupt:
        print(f"pwsolid: interrupted; the finished displacements are kept in {records}; run "
              "the same command to continue", file=sys.stderr)
        return 130
    doc = result.as_document()
    doc["title"] = run_input.title
    doc["input"] = run_input.echo
    document = out_dir / f"{stem}.phonons.json"
    figures = []
    if writes:
        write_json(document, doc)
        figures = PhononPlot.from_result(result, title=run_input.title).save(
            out_dir / f"{stem}.phonons")
    print("\n".join(result.summary_lines()))
    if writes:
        print(f"Result written to {document}")
        print("Figure written to " + ", ".join(str(f) for f in figures))
    if not result.converged:
        print("pwsolid: some displaced ground states did not converge", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK
