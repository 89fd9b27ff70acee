"""``pwsolid lattice-test-set``: a0 and B0 of cubic solids with the fitted table (layer 6).

Computes the equilibrium lattice constant and bulk modulus of every test solid whose
elements the chosen set of the fitted table holds, against published all-electron
values of the same functional (named in the JSON document; from memory), and writes a
JSON document and a plot of the relative errors. Restart files in the output directory
let an interrupted run resume. Exit code 0, 4 if a scan did not converge, 3 bad input.
"""

from __future__ import annotations

from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK
from .common import check_output_dir, parse_count, save_figures, write_or_keep

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "lattice-test-set",
        help="lattice constants and bulk moduli of cubic test solids with the fitted table",
        description="Equilibrium a0 and B0 of cubic test solids with one set of pwsolid's "
                    "fitted pseudopotential table, against published all-electron values "
                    "of the same functional; writes a JSON table and a plot of the errors.")
    p.add_argument("--set", default="lda", dest="set_name", help="lda or pbe (default lda)")
    p.add_argument("--solids", default="", metavar="NAMES",
                   help="comma-separated test solids (default every one the set can make)")
    p.add_argument("--cutoff", type=float, default=None, metavar="HA",
                   help="plane-wave cutoff in Ha (default 1.2 x the largest recorded 1 meV cutoff)")
    p.add_argument("--points", default="5", metavar="N", help="volumes per scan (default 5)")
    p.add_argument("--output-dir", default="lattice-test-set", metavar="DIR",
                   help="where the JSON, plots and restart files go")
    p.add_argument("--no-plots", action="store_true", help="write the JSON document only")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..progress import ProgressBar
    from ..results import write_json
    from ..workflows.lattice_test_set import lattice_test_set

    out = check_output_dir(Path(args.output_dir))
    solids = [s.strip() for s in args.solids.split(",") if s.strip()] or None
    result = lattice_test_set(args.set_name.lower(), solids, cutoff=args.cutoff,
                              n_points=parse_count(args.points, "--points"),
                              restart_dir=out / "restart",
                              progress=ProgressBar("lattice test set"))
    print(result.table())
    for name, why in result.skipped.items():
        print(f"  skipped {name}: {why}")
    stem = out / f"lattice-test-{result.set_name}"
    path = write_or_keep(stem.with_suffix(".json"), lambda p: write_json(p, result.as_document()),
                         "lattice test set")
    if not args.no_plots and result.results:
        from ..plots.lattice_test import LatticeTestPlot
        save_figures(LatticeTestPlot.from_result(result), stem)
    print(f"Written: {path}")
    return EXIT_OK if result.converged else EXIT_NOT_CONVERGED
