"""``pwsolid elastic-constants INPUT``: elastic constants from stress-strain lines.

Reads an ordinary ground-state input with an optional ``[elastic_constants]`` table
(``pwsolid input-keys`` lists its keys), calls
:func:`pwsolid.workflows.elastic_constants.elastic_constants` and writes, into the
output directory (default: where the input's result file would go):

* ``<stem>.elastic.json``: the result document (schema ``pwsolid.elastic-constants/1``):
  the independent constants and the full 6x6 matrix (relaxed and clamped ions), the
  internal-strain parameter, Voigt-Reuss-Hill moduli, Born stability, every strain point;
* ``<stem>.elastic.png`` and ``.svg``: stress against strain with the fitted lines;
* ``<stem>.elastic-points.json``: the finished strain points (an ``elastic-strain-points``
  record of :mod:`pwsolid.store`), so that re-running the same command after an
  interruption continues where it stopped (``--fresh`` starts over).

Exit codes: 0; 4 when a strain point's SCF or internal relaxation did not converge (the
files are still written, with ``converged: false``); 3 for invalid input; 130 when
interrupted.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from .common import (EXIT_INTERRUPTED, accept_mismatch_option, check_output_file,
                     output_directory, plan_run, save_figures, write_or_keep)
from ..units import BOHR_ANGSTROM

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "elastic-constants", help="elastic constants, moduli and stability from stress-strain",
        description="Strain the cell of a ground-state input by small amounts of both signs "
                    "(the fewest strains that fix every constant allowed by the crystal's "
                    "symmetry), relax the atoms inside each strained cell, fit stress against "
                    "strain and report the independent elastic constants (relaxed and "
                    "clamped ions), the internal-strain parameter of diamond and zincblende, "
                    "Voigt-Reuss-Hill bulk, shear and Young's moduli, Poisson's ratio and "
                    "the Born stability. Start from the equilibrium lattice of the same "
                    "settings. Re-running the same command resumes an interrupted run.",
        epilog="Writes <stem>.elastic.json, <stem>.elastic.png/.svg and the restart file "
               "<stem>.elastic-points.json. Exit code 4 when a strain point did not converge.")
    p.add_argument("input", help="ground-state input file (TOML) with an optional "
                                 "[elastic_constants] table")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: where the input's result "
                        "file would go)")
    p.add_argument("--restart-file", metavar="FILE",
                   help="where finished strain points are kept (default "
                        "<stem>.elastic-points.json in the output directory)")
    p.add_argument("--fresh", action="store_true", help="ignore an existing restart file")
    accept_mismatch_option(p)
    p.add_argument("--show-scf", action="store_true", help="also print every SCF iteration")
    p.add_argument("--quiet", action="store_true", help="print only the summary")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..config import load_input
    from ..plots.elastic import StressStrainPlot
    from ..results import write_json
    from ..workflows.elastic_constants import check_mesh_symmetry, elastic_constants

    run_input = load_input(args.input)
    stem = Path(args.input).stem
    out_dir = output_directory(args, run_input)
    restart = check_output_file(Path(args.restart_file) if args.restart_file
                                else out_dir / f"{stem}.elastic-points.json", "--restart-file")
    json_path = check_output_file(out_dir / f"{stem}.elastic.json", "--output-dir")
    try:                  # before any work: a mesh that strain would sample unevenly
        check_mesh_symmetry(run_input.crystal, run_input.settings)
    except InputError as exc:
        raise (exc.with_source(str(run_input.source)) if run_input.source and not exc.source
               else exc) from None
    elastic = run_input.elastic
    plan_run(run_input, times=1 + 2 * elastic.strains_per_sign * 2)
    say = (lambda line: None) if args.quiet else (lambda line: print(line, flush=True))
    c = run_input.crystal
    say(f"{run_input.title or stem}: {c.n_atoms} atoms, volume "
        f"{c.volume * BOHR_ANGSTROM ** 3:.4f} A^3; strains up to {elastic.largest_strain:g} "
        f"({elastic.strains_per_sign} per sign), atoms "
        f"{'relaxed' if elastic.relax_internal else 'clamped'}; restart file {restart}")
    try:
        result = elastic_constants(c, run_input.settings, elastic, restart_file=restart,
                                   log=say, scf_log=say if args.show_scf else None,
                                   fresh=args.fresh, accept_mismatch=args.accept_mismatch)
    except KeyboardInterrupt:
        print(f"\npwsolid: interrupted; the finished strain points are kept in {restart}: run "
              "the same command again to continue", file=sys.stderr)
        return EXIT_INTERRUPTED
    doc = result.as_document()
    doc["title"] = run_input.title
    doc["input"] = run_input.echo
    figures = []
    if getattr(args, "writes_files", True):      # MPI: only process 0 writes
        json_path = write_or_keep(json_path, lambda p: write_json(p, doc), "elastic constants")
        figures = save_figures(StressStrainPlot.from_result(result, title=run_input.title),
                               out_dir / f"{stem}.elastic")
    print("\n".join(result.summary_lines()))
    for m in result.messages:
        print(f"  note: {m}")
    print(f"Result written to {json_path}")
    if figures:
        print("Figure written to " + ", ".join(str(f) for f in figures))
    if not result.converged:
        print("pwsolid: a strain point did not converge; its stress is approximate",
              file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK
