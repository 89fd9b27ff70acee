"""``pwsolid converge-settings INPUT``: enough cutoff, enough k-points (layer 6).

Runs the crystal of a ground-state input over a series of cutoffs (at the
input's mesh) and of k-point meshes (at the input's cutoff), by default with a
small volume scan at each setting for the lattice constant, and recommends the
cheapest cutoff and mesh within the requested precision. Writes
``<stem>.convergence.json`` (schema ``pwsolid.settings-convergence/1``) and
``<stem>.convergence.png`` / ``.svg`` into the output directory.

Exit codes: 0, or 4 when an SCF did not converge (the files are still written).
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from ..units import BOHR_ANGSTROM, HARTREE_EV, parse_quantity
from .common import check_output_file, output_directory, plan_run, save_figures, write_or_keep

__all__ = ["register", "run", "parse_cutoffs", "parse_meshes"]

_LIST_WITH_UNIT = re.compile(r"^\s*([-+0-9.eE,\s]+?)\s*([A-Za-z]+)?\s*$")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "converge-settings", help="find the cutoff and k-point mesh a precision needs",
        description="Compute the crystal of a ground-state input over rising cutoffs (at "
                    "the input's k-point mesh) and denser meshes (at the input's cutoff), "
                    "with a 5-point volume scan per setting unless --no-lattice, and "
                    "recommend the cheapest cutoff and mesh whose energy per atom (and "
                    "lattice constant) stays within the requested precision of the most "
                    "expensive setting.",
        epilog="Writes <stem>.convergence.json, .png and .svg. Exit code 4 when an SCF did "
               "not converge.")
    p.add_argument("input", help="ground-state input file (TOML)")
    p.add_argument("--cutoffs", metavar="LIST",
                   help="cutoffs, e.g. '6,8,10,12' (Ha unless a unit follows: '160,220 eV'); "
                        "default 0.6 to 1.4 times the input's")
    p.add_argument("--meshes", metavar="LIST",
                   help="k-point meshes, e.g. '2,4,6' (n along the longest reciprocal vector) "
                        "or '4x4x2,6x6x4'; default 2,4,6,8")
    p.add_argument("--energy-precision", default="1 meV", metavar="ENERGY",
                   help="energy per atom to reach, with its unit (default '1 meV')")
    p.add_argument("--lattice-precision", default="0.001 angstrom", metavar="LENGTH",
                   help="lattice constant to reach, with its unit (default '0.001 angstrom')")
    p.add_argument("--no-lattice", action="store_true",
                   help="energies only: no volume scan per setting (much faster)")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: where the input's "
                        "result file would go)")
    p.add_argument("--quiet", action="store_true", help="no progress bar, only the tables")
    p.set_defaults(handler=run)


def parse_cutoffs(text) -> list[float]:
    """'6,8,10' (Ha) or '160,220 eV' -> cutoffs in Ha."""
    m = _LIST_WITH_UNIT.match(str(text))
    parts = [x for x in re.split(r"[,\s]+", m.group(1).strip())] if m else []
    if not m or not parts or any(not x for x in parts):
        raise InputError("must be numbers separated by commas, optionally followed by one "
                         "energy unit, e.g. '6,8,10,12' or '160,220 eV'", key="--cutoffs",
                         value=text)
    unit = m.group(2) or "Ha"
    return [parse_quantity(f"{x} {unit}", "energy", key="--cutoffs") for x in parts]


def parse_meshes(text) -> list:
    """'2,4,6' -> [2, 4, 6]; '4x4x2,6x6x4' -> [(4, 4, 2), (6, 6, 4)]."""
    out = []
    for part in (x for x in re.split(r"[,\s]+", str(text).strip()) if x):
        try:
            if "x" in part.lower():
                dims = tuple(int(d) for d in part.lower().split("x"))
                if len(dims) != 3:
                    raise ValueError
                out.append(dims)
            else:
                out.append(int(part))
        except ValueError:
            raise InputError("meshes are integers n or n1xn2xn3, separated by commas, e.g. "
                             "'2,4,6' or '4x4x2,6x6x4'", key="--meshes", value=text) from None
    if not out:
        raise InputError("give at least two meshes", key="--meshes", value=text)
    return out


def _table(series, label, with_lattice) -> list[str]:
    head = f"  {label:<14}{'E/atom (eV)':>16}{'dE (meV/atom)':>15}"
    if with_lattice:
        head += f"{'a (A)':>11}{'da (mA)':>10}{'B0 (GPa)':>10}"
    lines = [head]
    for p in series:
        name = f"{p.cutoff:g} Ha" if label == "cutoff" else "x".join(map(str, p.mesh))
        row = (f"  {name:<14}{p.energy_per_atom * HARTREE_EV:>16.6f}"
               f"{p.energy_change * HARTREE_EV * 1e3:>15.3f}")
        if with_lattice:
            if p.lattice_constant is None:
                row += f"{'-':>11}{'-':>10}{'-':>10}"
            else:
                row += (f"{p.lattice_constant * BOHR_ANGSTROM:>11.5f}"
                        f"{p.lattice_change * BOHR_ANGSTROM * 1e3:>10.2f}"
                        f"{p.bulk_modulus_gpa:>10.1f}")
        lines.append(row + ("" if p.converged else "  (SCF not converged)"))
    return lines


def run(args) -> int:
    from ..config import load_input
    from ..plots.convergence import ConvergencePlot
    from ..progress import ProgressBar
    from ..results import write_json
    from ..workflows.convergence import converge_settings

    cutoffs = parse_cutoffs(args.cutoffs) if args.cutoffs else None
    meshes = parse_meshes(args.meshes) if args.meshes else None
    e_prec = parse_quantity(args.energy_precision, "energy", key="--energy-precision")
    a_prec = parse_quantity(args.lattice_precision, "length", key="--lattice-precision")
    for key, value in (("--energy-precision", e_prec), ("--lattice-precision", a_prec)):
        if value <= 0:
            raise InputError("must be positive", key=key, value=value)
    run_input = load_input(args.input)
    stem = Path(args.input).stem
    out_dir = output_directory(args, run_input)
    json_path = check_output_file(out_dir / f"{stem}.convergence.json", "--output-dir")
    plan_run(run_input)
    bar = None if args.quiet else ProgressBar("settings")
    study = converge_settings(run_input.crystal, run_input.settings, cutoffs=cutoffs,
                              meshes=meshes, energy_precision=e_prec, lattice_precision=a_prec,
                              with_lattice=not args.no_lattice, progress=bar)
    doc = study.as_document()
    doc["title"] = run_input.title
    doc["input"] = run_input.echo
    figures = []
    if getattr(args, "writes_files", True):      # MPI: only process 0 writes
        json_path = write_or_keep(json_path, lambda p: write_json(p, doc), "convergence study")
        figures = save_figures(ConvergencePlot.from_study(study, title=run_input.title),
                               out_dir / f"{stem}.convergence")
    prec = f"{e_prec * HARTREE_EV * 1e3:g} meV/atom"
    if study.with_lattice:
        prec += f" and {a_prec * BOHR_ANGSTROM:g} angstrom"
    print(f"\nCutoff series (mesh {'x'.join(map(str, study.cutoff_series[0].mesh))}), "
          "changes against the largest cutoff")
    print("\n".join(_table(study.cutoff_series, "cutoff", study.with_lattice)))
    print(f"\nMesh series (cutoff {study.mesh_series[0].cutoff:g} Ha), changes against the "
          "densest mesh")
    print("\n".join(_table(study.mesh_series, "mesh", study.with_lattice)))
    print(f"\nRecommended for {prec}: cutoff {study.recommended_cutoff:g} Ha, "
          f"k-point mesh {'x'.join(map(str, study.recommended_mesh))}")
    for m in study.messages:
        print(f"  note: {m}")
    print(f"Result written to {json_path}\nFigure written to "
          + ", ".join(str(f) for f in figures))
    if not all(p.converged for p in (*study.cutoff_series, *study.mesh_series)):
        print("pwsolid: some SCF calculations did not converge", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK
