"""``pwsolid fit-pseudopotential``: regenerate files of the fitted table (layer 6).

Fits each element named (or every element with recorded targets, ``--all``) in one or
both sets (``--set lda``, ``--set pbe``, ``--set lda,pbe``) from its recorded targets,
then measures the cutoff convergence of its reference solid. Files that are current
(their recorded targets fingerprint matches) are skipped, so an interrupted table
resumes where it stopped. Exit code 0 when every file met the goals, 4 when one did not
(the file is written all the same, with its errors recorded), 3 for bad input.
"""

from __future__ import annotations

import time
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "fit-pseudopotential",
        help="fit files of pwsolid's own pseudopotential table to its all-electron atom",
        description="Fit the separable dual-space Gaussian form to pwsolid's own "
                    "scalar-relativistic all-electron atom from the recorded targets "
                    "(pseudos/fitted-table/targets.toml), check transferability and ghost "
                    "states, measure the cutoff convergence of a reference solid, and write "
                    "pseudos/fitted-table/<set>/<element>.toml with the whole record. Current "
                    "files are skipped (resume). Exit code 4 if a file misses its goals.")
    p.add_argument("elements", nargs="*", metavar="ELEMENT", help="element symbols, e.g. Si C")
    p.add_argument("--all", action="store_true", help="every element with recorded targets")
    p.add_argument("--set", default="lda", dest="sets", metavar="SETS",
                   help="lda, pbe or lda,pbe (default lda)")
    p.add_argument("--targets", default=None, metavar="FILE",
                   help="target specifications (default the bundled targets.toml)")
    p.add_argument("--output", default=None, metavar="FILE",
                   help="write here instead of the table directory (one element and set only)")
    p.add_argument("--refit", action="store_true", help="fit again even if the file is current")
    p.add_argument("--no-cutoff", action="store_true",
                   help="skip the reference-solid cutoff measurement")
    p.add_argument("--quiet", action="store_true", help="no fit log")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..progress import ProgressBar
    from ..pseudo.table import TABLE_SETS, table_elements
    from ..workflows.pseudo_table import fit_pseudopotential

    sets = [s.strip().lower() for s in args.sets.split(",") if s.strip()]
    bad = [s for s in sets if s not in TABLE_SETS]
    if bad or not sets:
        raise InputError(f"accepted sets: {', '.join(TABLE_SETS)} (comma separated)",
                         key="--set", value=args.sets)
    try:
        known = table_elements(Path(args.targets) if args.targets else None)
    except OSError as exc:
        raise InputError(f"cannot read the target specifications: {exc}", key="--targets",
                         value=args.targets) from None
    elements = known if args.all else list(args.elements)
    if not elements:
        raise InputError("name elements or give --all", key="elements")
    unknown = [e for e in elements if e not in known]
    if unknown:
        raise InputError(f"no recorded targets; elements with targets: {', '.join(known)}",
                         key="elements", value=" ".join(unknown))
    if args.output and len(elements) * len(sets) != 1:
        raise InputError("--output takes one element and one set", key="--output",
                         value=args.output)
    log = None if args.quiet else print
    status = EXIT_OK
    for element in elements:
        for set_name in sets:
            start = time.perf_counter()
            result = fit_pseudopotential(
                element, set_name, targets_file=args.targets, output=args.output,
                refit=args.refit, measure_cutoff=not args.no_cutoff, log=log,
                progress=None if args.quiet else ProgressBar(f"{element} {set_name} cutoffs"))
            s = result.record["summary"]
            cut = result.record.get("cutoff", {})
            print(f"{element} {set_name}: {result.path}  fitted {s['worst_fitted_eigenvalue_error_mHa']:.3f} "
                  f"mHa / {s['worst_fitted_charge_error_e']:.4f} e, tests "
                  f"{s['worst_test_eigenvalue_error_mHa']:.3f} mHa / "
                  f"{s['worst_test_charge_error_e']:.4f} e, ghost-free "
                  f"{result.record['ghost_check']['ghost_free']}, cutoff 1 meV "
                  f"{cut.get('cutoff_1meV_Ha', '-')} Ha, 0.1 meV {cut.get('cutoff_0p1meV_Ha', '-')} Ha"
                  f" ({time.perf_counter() - start:.0f} s)")
            for message in result.messages:
                print(f"  {message}")
            if not result.converged:
                status = EXIT_NOT_CONVERGED
    return status
