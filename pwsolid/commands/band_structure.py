"""``pwsolid band-structure INPUT`` and ``pwsolid empirical-bands MATERIAL`` (layer 6).

``band-structure`` computes Kohn-Sham bands along a path for the self-consistent
density of a ground-state input: the density file named by ``--density-file`` or by
the input (``output.density_file``, written by ``pwsolid ground-state``); when that
file does not exist yet the ground state is run first and its density saved there.
A density computed for another lattice, cutoff or FFT grid is refused.

``empirical-bands`` computes the bands of Si, Ge or GaAs with the fixed empirical
potential of Cohen & Bergstresser (no self-consistency).

Both print the gap analysis and write, into the output directory:

* ``<stem>.bands.json``: the band-structure document (schema ``pwsolid.band-structure/1``);
* ``<stem>.bands.csv``: a plain table, distance, k1, k2, k3 and one column per band (eV);
* ``<stem>.bands.<format>``: the figure (PNG, SVG and PDF by default);
* with ``--with-dos``: ``<stem>.dos.json`` and ``<stem>.dos.csv`` too, and the figure
  gets a DOS panel.

Exit codes: 0, 3 for invalid options or input, 4 when the ground state that had to
be run did not converge (the files are still written).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from .common import (check_output_dir, check_output_file, parse_formats, parse_int, parse_window,
                     plan_run, progress_for, save_figures, write_or_keep)
from ..units import HARTREE_EV, parse_quantity

__all__ = ["register", "run", "run_empirical", "matching_density", "load_or_compute_density"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "band-structure", help="Kohn-Sham bands along a path through the Brillouin zone",
        description="Compute the bands of a ground-state input along the standard path of "
                    "its lattice (or your own) for its self-consistent density, analyse the "
                    "gap and draw the band structure. The density comes from --density-file "
                    "or the input's output.density_file; if neither exists the ground state "
                    "is computed first.",
        epilog="Writes <stem>.bands.json, <stem>.bands.csv and <stem>.bands.<format>; with "
               "--with-dos also <stem>.dos.json and <stem>.dos.csv. Energies are in eV "
               "relative to the valence-band top (insulators) or the Fermi level (metals).")
    p.add_argument("input", help="ground-state input file (TOML)")
    p.add_argument("--density-file", metavar="FILE",
                   help="density checkpoint to use (default: the input's output.density_file)")
    _path_options(p)
    p.add_argument("--with-dos", action="store_true",
                   help="add a density-of-states panel (tetrahedron method)")
    p.add_argument("--dos-mesh", default="12", metavar="N",
                   help="uniform Gamma-centred mesh N x N x N for --with-dos (default 12)")
    _output_options(p, "where the input's result file would go")
    p.set_defaults(handler=run)

    e = subparsers.add_parser(
        "empirical-bands", help="bands of Si, Ge or GaAs from empirical form factors",
        description="Compute the bands of Si, Ge or GaAs with the fixed empirical "
                    "pseudopotential of Cohen & Bergstresser (Phys. Rev. 141, 789 (1966)); "
                    "no self-consistency.",
        epilog="Writes <stem>.bands.json, <stem>.bands.csv and <stem>.bands.<format> with "
               "<stem> = <material>-empirical.")
    e.add_argument("material", help="Si, Ge or GaAs")
    _path_options(e, bands_default="8")
    e.add_argument("--cutoff", metavar="ENERGY",
                   help="plane-wave cutoff with its unit, e.g. \"8 Ry\" (default: |k+G|^2 <= "
                        "40 (2 pi/a)^2, about 15 Ry for Si)")
    _output_options(e, "the current directory")
    e.set_defaults(handler=run_empirical)


def _path_options(p, bands_default=None) -> None:
    p.add_argument("--path", metavar="POINTS",
                   help="path through special points, e.g. \"G-X-W-K-G-L\"; '|' starts a new "
                        "piece (default: the standard path of the lattice)")
    p.add_argument("--points", default="150", metavar="N",
                   help="number of k-points along the path (default 150)")
    p.add_argument("--bands", default=bands_default, metavar="N",
                   help="bands per k-point (default: " +
                        ("8" if bands_default else "occupied plus the input's empty bands") + ")")
    p.add_argument("--window", metavar="LOW,HIGH",
                   help="energy range of the figure in eV relative to the reference; write "
                        "--window=-13,8 (default about -13 to 8)")


def _output_options(p, where: str) -> None:
    p.add_argument("--output-dir", metavar="DIR",
                   help=f"directory for the files written (default: {where})")
    p.add_argument("--formats", default="png,svg,pdf", metavar="LIST",
                   help="figure formats, comma-separated, from png, svg, pdf (default all three)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


def _output_dir(args, default: Path) -> Path:
    return check_output_dir(Path(args.output_dir) if args.output_dir else default)


# -- density ---------------------------------------------------------------------------

def matching_density(stored: dict, setup, source: str) -> np.ndarray:
    """The density array of a loaded checkpoint, if it belongs to ``setup``'s calculation.

    Raises InputError naming what differs (lattice, atoms, cutoff, FFT grid).
    """
    crystal = setup.crystal
    problems = []
    lattice = np.asarray(stored["lattice_bohr"], float)
    if lattice.shape != (3, 3) or not np.allclose(lattice, crystal.lattice, rtol=0, atol=1e-8):
        problems.append("its lattice vectors differ from the input's")
    positions = np.asarray(stored["fractional_positions"], float)
    if (list(stored.get("species", [])) != list(crystal.species)
            or positions.shape != np.shape(crystal.positions)
            or not np.allclose(positions, crystal.positions, rtol=0, atol=1e-8)):
        problems.append("its atoms differ from the input's")
    cutoff = float(np.asarray(stored["cutoff_Ha"]))
    if abs(cutoff - setup.settings.cutoff) > 1e-10 * max(1.0, cutoff):
        problems.append(f"it was computed with a {cutoff:g} Ha cutoff, the input has "
                        f"{setup.settings.cutoff:g} Ha")
    grid = tuple(int(g) for g in np.asarray(stored["fft_grid"]).ravel())
    if grid != tuple(setup.grid_shape):
        problems.append(f"its FFT grid {'x'.join(map(str, grid))} is not the input's "
                        f"{'x'.join(map(str, setup.grid_shape))}")
    density = np.asarray(stored["density"], float)
    if not problems and density.shape != tuple(setup.grid_shape):
        problems.append("its density array does not fit the FFT grid")
    if problems:
        raise InputError("this density belongs to a different calculation: " + "; ".join(problems)
                         + ". Run 'pwsolid ground-state' on the input again or pass the right "
                         "--density-file", source=source)
    return density


def load_or_compute_density(run, density_option, say):
    """(setup, density, ground state or None, not-converged message or None).

    Uses ``density_option`` or the input's density file; if the input's file does not
    exist, runs the ground state, saves its density there and says so.
    """
    from ..results import load_density, save_density
    from ..scf import ground_state, prepare

    if density_option:
        path = Path(density_option)
        stored = load_density(path)          # a missing file given explicitly is an error
        setup = prepare(run.crystal, run.settings)
        return setup, matching_density(stored, setup, str(path)), None, None
    path = Path(run.density_file)
    if path.exists():
        stored = load_density(path)
        setup = prepare(run.crystal, run.settings)
        say(f"Using the density in {path}")
        return setup, matching_density(stored, setup, str(path)), None, None
    say(f"No density file at {path}: running the ground state first")
    gs = ground_state(run.crystal, run.settings)
    save_density(path, gs)
    say(f"  ground state {'converged' if gs.converged else 'NOT converged'} in "
        f"{gs.iterations} iterations; density written to {path}")
    problem = None if gs.converged else (gs.messages[0] if gs.messages else "SCF not converged")
    return gs.setup, gs.density, gs, problem


# -- commands --------------------------------------------------------------------------

def run(args) -> int:
    from ..bandpath import user_path
    from ..config import load_input
    from ..workflows.band_structure import band_structure
    from ..workflows.density_of_states import density_of_states

    n_points = parse_int(args.points, "--points", minimum=2, maximum=100_000)
    n_bands = None if args.bands is None else parse_int(args.bands, "--bands", maximum=10_000)
    dos_mesh = parse_int(args.dos_mesh, "--dos-mesh", maximum=100)
    formats = parse_formats(args.formats)
    window = parse_window(args.window)
    run_input = load_input(args.input)
    # Check the path and every output location before any ground state runs.
    path_text = _checked_path_text(args.path)
    path = user_path(run_input.crystal, path_text) if path_text else None
    out = _output_dir(args, Path(run_input.result_file).parent)
    stem = out / Path(args.input).stem
    check_output_file(stem.with_name(stem.name + ".bands.json"), "--output-dir")
    if not args.density_file and not Path(run_input.density_file).exists():
        check_output_file(run_input.density_file, "output.density_file")
    plan_run(run_input)

    say = print
    say(run_input.title or Path(args.input).name)
    setup, density, gs, problem = load_or_compute_density(run_input, args.density_file, say)
    source = gs if gs is not None else setup
    bs = band_structure(source, None if gs is not None else density, path,
                        n_points=n_points, n_bands=n_bands,
                        progress=progress_for(args, "bands"), title=run_input.title)
    dos = None
    if args.with_dos:
        dos = density_of_states(source, None if gs is not None else density,
                                mesh=(dos_mesh,) * 3, n_bands=n_bands,
                                progress=progress_for(args, "DOS mesh"), title=run_input.title)
    written = _write_outputs(bs, dos, stem, formats, window)
    print(_report(bs, dos))
    print("Written: " + ", ".join(str(p) for p in written))
    if problem:
        print("pwsolid: " + problem, file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK


def run_empirical(args) -> int:
    from ..pseudo.empirical import EMPIRICAL_MATERIALS
    from ..workflows.band_structure import empirical_band_structure

    n_points = parse_int(args.points, "--points", minimum=2, maximum=100_000)
    n_bands = parse_int(args.bands, "--bands", minimum=5, maximum=200)
    formats = parse_formats(args.formats)
    window = parse_window(args.window)
    cutoff = None if args.cutoff is None else parse_quantity(args.cutoff, "energy", key="--cutoff")
    if cutoff is not None and not cutoff > 0:
        raise InputError("the cutoff must be positive", key="--cutoff", value=args.cutoff)
    name = next((m for m in EMPIRICAL_MATERIALS if m.lower() == args.material.lower()), None)
    if name is None:
        raise InputError(f"no empirical form factors for this material; choose one of "
                         f"{', '.join(EMPIRICAL_MATERIALS)}", key="material", value=args.material)
    path_text = _checked_path_text(args.path)
    out = _output_dir(args, Path.cwd())
    check_output_file(out / f"{name.lower()}-empirical.bands.json", "--output-dir")
    bs = empirical_band_structure(name, path_text, cutoff=cutoff, n_points=n_points,
                                  n_bands=n_bands, progress=progress_for(args, "bands"))
    written = _write_outputs(bs, None, out / f"{name.lower()}-empirical", formats, window)
    print(bs.title)
    print(_report(bs, None))
    print("Written: " + ", ".join(str(p) for p in written))
    return EXIT_OK


def _write_outputs(bs, dos, stem: Path, formats, window) -> list[Path]:
    from ..plots.bands import BandStructurePlot
    from ..results import write_json

    def named(suffix):
        return stem.with_name(stem.name + suffix)

    try:
        plot = BandStructurePlot.from_result(bs, dos, window=window)
    except ValueError as exc:
        raise InputError(str(exc), key="--window", value=window) from None
    written = [write_or_keep(named(".bands.json"), lambda p: write_json(p, bs.as_document()),
                             "band structure"),
               write_or_keep(named(".bands.csv"), bs.to_csv, "band table")]
    if dos is not None:
        written += [write_or_keep(named(".dos.json"), lambda p: write_json(p, dos.as_document()),
                                  "density of states"),
                    write_or_keep(named(".dos.csv"), dos.to_csv, "density-of-states table")]
    written += save_figures(plot, named(".bands"), formats)
    return written


def _checked_path_text(text):
    """``--path`` as given; an empty one is a mistake, not a request for the default."""
    if text is not None and not str(text).strip():
        raise InputError("is empty; give special points such as \"G-X-W-K-G-L\", or leave the "
                         "option out for the standard path of the lattice", key="--path",
                         value=text)
    return text


def _report(bs, dos) -> str:
    g = bs.gaps
    lines = ["", f"Band structure along {_describe_path(bs.path)} "
                 f"({bs.path.n_points} k-points, {bs.n_bands} bands)",
             "-" * 64, g.summary()]
    if dos is not None:
        at_ref = dos.integrated_at(dos.reference)
        lines.append(f"  DOS ({dos.method}, mesh {'x'.join(map(str, dos.mesh))}, "
                     f"{dos.n_irreducible} irreducible points): {at_ref:.4f} states below the "
                     f"{dos.reference_kind}")
        if dos.gap is not None:
            lines.append(f"  gap on the DOS mesh    {dos.gap * HARTREE_EV:9.4f} eV")
    return "\n".join(lines)


def _describe_path(path) -> str:
    parts, current = [], []
    breaks = set(path.breaks)
    for index, name in path.labels:
        if index in breaks and current:
            parts.append("-".join(current))
            current = []
        current.append(name)
    parts.append("-".join(current))
    return " | ".join(parts)
