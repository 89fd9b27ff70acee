"""``pwsolid jellium``: the uniform gas in a periodic cell, against the analytic limit."""

from __future__ import annotations

from pathlib import Path

from ..errors import EXIT_OK, InputError
from .common import check_output_dir, parse_positive, save_figures, write_or_keep

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "jellium", help="uniform electron gas in a periodic cell against the analytic energy",
        description="Self-consistent jellium (no ions, uniform background) on rising k-meshes; "
                    "the energy per electron converges to 1.104950/rs^2 - 0.458165/rs + e_c.")
    p.add_argument("--rs", type=float, default=4.0, help="Wigner-Seitz radius in bohr")
    p.add_argument("--meshes", default="4,8,12,16", help="k-mesh divisions, comma separated")
    p.add_argument("--functional", default="lda-pw92", help="functional by name or file:PATH")
    p.add_argument("--electrons", type=float, default=2.0, help="electrons per cell")
    p.add_argument("--cell", default="fcc", help="cell shape: fcc, bcc or simple-cubic")
    p.add_argument("--output-dir", default=".", help="where to write JSON and plots")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..plots.jellium import JelliumPlot
    from ..progress import ProgressBar
    from ..results import write_json
    from ..workflows.jellium import jellium_convergence

    parse_positive(args.rs, "--rs", "bohr")
    parse_positive(args.electrons, "--electrons")
    out = check_output_dir(Path(args.output_dir))
    try:
        meshes = tuple(int(x) for x in args.meshes.split(","))
    except ValueError:
        raise InputError("must be integers separated by commas, e.g. 4,8,12", key="--meshes",
                         value=args.meshes) from None
    if not meshes or any(m < 1 or m > 64 for m in meshes):
        raise InputError("each mesh must be between 1 and 64", key="--meshes", value=args.meshes)
    study = jellium_convergence(args.rs, meshes, functional=args.functional,
                                electrons=args.electrons, lattice=args.cell,
                                progress=ProgressBar("jellium meshes"))
    a = study.analytic
    print(f"Jellium r_s = {study.rs:g} bohr, {study.functional}: analytic energy per electron "
          f"{a['total']:.8f} Ha (kinetic {a['kinetic']:.8f}, xc {a['exchange_correlation']:.8f})")
    print(f"  {'mesh':>6} {'E/N (Ha)':>14} {'error (mHa)':>12}")
    for m, e, d in zip(study.meshes, study.energies, study.errors):
        print(f"  {m:>6} {e:>14.8f} {1e3 * d:>12.5f}")
    if getattr(args, "writes_files", True):
        stem = out / f"jellium-rs{study.rs:g}"
        json_path = write_or_keep(stem.with_name(stem.name + ".json"),
                                  lambda p: write_json(p, study.as_document()), "jellium study")
        save_figures(JelliumPlot.from_study(study), stem.with_name(stem.name + ".jellium"))
        print(f"Written: {json_path} and plots")
    return EXIT_OK
