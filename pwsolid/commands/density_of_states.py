"""``pwsolid density-of-states INPUT``: the density of states of a ground state (layer 6).

Computes the bands of a ground-state input on a uniform Gamma-centred mesh for its
self-consistent density (from ``--density-file``, the input's
``output.density_file``, or a ground state run first, as for ``band-structure``),
integrates them with the tetrahedron method or Gaussian broadening, prints a
summary and writes, into the output directory (default: where the input's result
file would go):

* ``<stem>.dos.json``: the document (schema ``pwsolid.density-of-states/1``);
* ``<stem>.dos.csv``: energy (eV, relative to the valence-band top or Fermi level),
  DOS (states/eV/cell) and integrated DOS (states/cell);
* ``<stem>.dos.<format>``: the figure, with the integrated DOS on a second axis.

Exit codes: 0, 3 for invalid options or input, 4 when the ground state that had to
be run did not converge (the files are still written).
"""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from ..units import HARTREE_EV, parse_quantity
from .band_structure import load_or_compute_density
from .common import (check_output_dir, check_output_file, parse_formats, parse_int, parse_window,
                     plan_run, progress_for, save_figures, write_or_keep)

__all__ = ["register", "run"]

_METHODS = ("tetrahedron", "gaussian")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "density-of-states", help="density of states on a uniform k-point mesh",
        description="Compute the bands of a ground-state input on a uniform Gamma-centred "
                    "mesh (irreducible points only) for its self-consistent density and "
                    "integrate the density of states. The density comes from --density-file "
                    "or the input's output.density_file; if neither exists the ground state "
                    "is computed first.",
        epilog="Writes <stem>.dos.json, <stem>.dos.csv and <stem>.dos.<format>. Energies are "
               "in eV relative to the valence-band top (insulators) or the Fermi level "
               "(metals).")
    p.add_argument("input", help="ground-state input file (TOML)")
    p.add_argument("--density-file", metavar="FILE",
                   help="density checkpoint to use (default: the input's output.density_file)")
    p.add_argument("--mesh", default="12", metavar="N",
                   help="uniform mesh N x N x N, or N1,N2,N3 (default 12)")
    p.add_argument("--method", default="tetrahedron", metavar="NAME",
                   help="tetrahedron (linear tetrahedra, default) or gaussian")
    p.add_argument("--width", metavar="ENERGY",
                   help="Gaussian width with its unit, e.g. \"0.1 eV\" (gaussian only; "
                        "default 0.1 eV)")
    p.add_argument("--bands", metavar="N",
                   help="bands per k-point (default: occupied plus the input's empty bands)")
    p.add_argument("--window", metavar="LOW,HIGH",
                   help="energy range of the figure in eV relative to the reference; write "
                        "--window=-13,8")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: where the input's result "
                        "file would go)")
    p.add_argument("--formats", default="png,svg,pdf", metavar="LIST",
                   help="figure formats, comma-separated, from png, svg, pdf (default all three)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(handler=run)


def _parse_mesh(text) -> tuple[int, int, int]:
    parts = [t for t in str(text).replace("x", ",").split(",") if t.strip()]
    if len(parts) == 1:
        parts = parts * 3
    if len(parts) != 3:
        raise InputError("must be one whole number or three, N1,N2,N3", key="--mesh", value=text)
    return tuple(parse_int(t, "--mesh", maximum=100) for t in parts)


def run(args) -> int:
    from ..config import load_input
    from ..plots.bands import DensityOfStatesPlot
    from ..results import write_json
    from ..workflows.density_of_states import density_of_states

    mesh = _parse_mesh(args.mesh)
    method = str(args.method).strip().lower()
    if method not in _METHODS:
        raise InputError(f"unknown method; choose one of {', '.join(_METHODS)}", key="--method",
                         value=args.method)
    width = None
    if args.width is not None:
        if method != "gaussian":
            raise InputError("a width is only used with --method gaussian", key="--width",
                             value=args.width)
        width = parse_quantity(args.width, "energy", key="--width")
        if not width > 0:
            raise InputError("the width must be positive", key="--width", value=args.width)
    n_bands = None if args.bands is None else parse_int(args.bands, "--bands", maximum=10_000)
    formats = parse_formats(args.formats)
    window = parse_window(args.window)
    run_input = load_input(args.input)
    out = check_output_dir(Path(args.output_dir) if args.output_dir
                           else Path(run_input.result_file).parent)
    stem = out / f"{Path(args.input).stem}.dos"
    check_output_file(stem.with_name(stem.name + ".json"), "--output-dir")
    if not args.density_file and not Path(run_input.density_file).exists():
        check_output_file(run_input.density_file, "output.density_file")
    plan_run(run_input)

    print(run_input.title or Path(args.input).name)
    setup, density, gs, problem = load_or_compute_density(run_input, args.density_file, print)
    source = gs if gs is not None else setup
    result = density_of_states(source, None if gs is not None else density, mesh=mesh,
                               method=method, width=width, n_bands=n_bands,
                               progress=progress_for(args, "DOS mesh"),
                               title=run_input.title)
    try:
        plot = DensityOfStatesPlot.from_result(result, window=window)
    except ValueError as exc:
        raise InputError(str(exc), key="--window", value=args.window) from None
    written = [write_or_keep(stem.with_name(stem.name + ".json"),
                             lambda p: write_json(p, result.as_document()), "density of states"),
               write_or_keep(stem.with_name(stem.name + ".csv"), result.to_csv,
                             "density-of-states table")]
    written += save_figures(plot, stem, formats)

    ev = HARTREE_EV
    print(f"\nDensity of states ({result.method}"
          + (f", width {result.width * ev:.3f} eV" if result.width else "")
          + f"), mesh {'x'.join(map(str, mesh))} with {result.n_irreducible} irreducible "
          f"k-points, {result.eigenvalues.shape[-1]} bands")
    print("-" * 64)
    print(f"  {result.reference_kind:<22} {result.reference * ev:9.4f} eV (absolute)")
    if result.gap is not None:
        print(f"  gap on the mesh        {result.gap * ev:9.4f} eV")
    print(f"  states below it        {result.integrated_at(result.reference):9.4f} "
          f"(electrons per cell: {result.n_electrons:g})")
    print(f"  every band computed up to {(result.complete_below - result.reference) * ev:.3f} eV")
    print("Written: " + ", ".join(str(p) for p in written))
    if problem:
        print("pwsolid: " + problem, file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK
