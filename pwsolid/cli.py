"""Command line: ``pwsolid <command> ...`` (layer 6).

A thin layer over the Python API: arguments are parsed into the same validated
objects, the public functions do the work, and this module only prints and
writes. ``main(argv) -> int`` returns the exit code (see ``pwsolid.errors``).
"""

from __future__ import annotations

import argparse
import sys
import traceback
import warnings
from pathlib import Path

from ._version import __version__
from .errors import (EXIT_INTERNAL, EXIT_INVALID_INPUT, EXIT_NOT_CONVERGED, EXIT_OK, EXIT_USAGE,
                     ConvergenceError, ConvergenceWarning, InputError)
from .commands.common import check_output_file, plan_run, write_or_keep
from .units import HARTREE_EV

__all__ = ["main", "main_entry", "build_parser"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="pwsolid",
        description="Plane-wave Kohn-Sham density-functional calculations (LDA and GGA) for "
                    "simple solids.",
        epilog="Exit codes: 0 success, 2 usage error, 3 invalid input, 4 not converged, "
               "70 internal error.")
    parser.add_argument("--version", action="version", version=f"pwsolid {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="command")

    run = sub.add_parser("ground-state", help="self-consistent ground state from an input file",
                         description="Run a self-consistent ground-state calculation. With no "
                                     "input file the bundled silicon demo runs.")
    run.add_argument("input", nargs="?", help="TOML input file (default: the bundled demo)")
    run.add_argument("--result-file", help="where to write the JSON result (overrides the input)")
    run.add_argument("--density-file", help="where to write the density (overrides the input)")
    run.add_argument("--checkpoint-file", help="SCF checkpoint for resuming (overrides the input)")
    run.add_argument("--fresh", action="store_true",
                     help="ignore an existing checkpoint and start from scratch")
    run.add_argument("--accept-mismatch", action="store_true",
                     help="continue from a checkpoint made for another calculation instead of "
                          "refusing it; the differences are recorded in the result")
    run.add_argument("--overwrite", action="store_true",
                     help="replace a finished result document")
    run.add_argument("--quiet", action="store_true", help="print only the summary")
    run.add_argument("--energy-only", action="store_true",
                     help="skip the forces on the atoms and the stress tensor (computed by "
                          "default after the SCF, at a few per cent of its cost)")
    run.add_argument("--basis-stress-estimate", action="store_true",
                     help="also estimate the basis-set (Pulay) stress of the fixed cutoff "
                          "(two more SCFs at lower cutoffs)")

    check = sub.add_parser("check-input", help="run every check the run makes before its first "
                           "iteration (outputs, electrons, bands, memory) and print the estimate")
    check.add_argument("input")

    keys = sub.add_parser("input-keys", help="list every input key with its type, unit and default")
    keys.add_argument("--markdown", action="store_true", help="as a Markdown table")
    sub.add_parser("list-pseudopotentials", help="list the bundled pseudopotential files")
    for module in _command_modules():
        module.register(sub)
    return parser


def _command_modules():
    """Modules of ``pwsolid.commands`` that add sub-commands (each has ``register``)."""
    import importlib
    import pkgutil

    from . import commands

    found = []
    for info in sorted(pkgutil.iter_modules(commands.__path__), key=lambda m: m.name):
        module = importlib.import_module(f"{commands.__name__}.{info.name}")
        if hasattr(module, "register"):
            found.append(module)
    return found


def main(argv: list[str] | None = None) -> int:
    """Run the command line with ``argv`` (default ``sys.argv[1:]``); return the exit code.

    Under an MPI launcher every process runs the same command; only rank 0 prints and
    writes files (the others send their output to the null device).
    """
    from .parallel import world

    if world().rank != 0:
        import contextlib
        import os

        with open(os.devnull, "w") as null, contextlib.redirect_stdout(null), \
                contextlib.redirect_stderr(null):
            return _main(argv, writes=False)
    return _main(argv, writes=True)


def _main(argv, writes: bool) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:      # argparse's own usage errors and --help
        return EXIT_OK if exc.code in (0, None) else EXIT_USAGE
    if args.command is None:
        parser.print_help()
        return EXIT_USAGE
    args.writes_files = writes
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            handler = getattr(args, "handler", None) or _COMMANDS[args.command]
            return handler(args)
    except InputError as exc:
        print(f"pwsolid: invalid input: {exc}", file=sys.stderr)
        return EXIT_INVALID_INPUT
    except ConvergenceError as exc:
        print(f"pwsolid: not converged: {exc}", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    except KeyboardInterrupt:
        print("pwsolid: interrupted", file=sys.stderr)
        return 130
    except Exception:  # noqa: BLE001 - the last line of defence
        print("pwsolid: internal error (please report it with the input file):", file=sys.stderr)
        traceback.print_exc()
        return EXIT_INTERNAL


def main_entry() -> None:
    """Console-script entry point; SIGTERM is handled like Ctrl-C (checkpoint kept)."""
    import signal

    def _terminate(signum, frame):
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, _terminate)
    sys.exit(main())


def _ground_state(args) -> int:
    import json

    from .config import load_input
    from .resources import demo_input
    from .results import ground_state_document, save_density, write_json
    from .scf import ground_state

    path = Path(args.input) if args.input else demo_input()
    if not args.input:
        print(f"No input file given: running the bundled demo {path.name}")
    run = load_input(path)
    files = {"result": run.result_file, "density": run.density_file,
             "checkpoint": run.checkpoint_file}
    if not args.input:   # never write into the installed package: use the working directory
        files = {k: Path(v.name) for k, v in files.items()}
    for key, option in (("result", args.result_file), ("density", args.density_file),
                        ("checkpoint", args.checkpoint_file)):
        if option:
            files[key] = Path(option)
    if files["result"].exists() and not (args.overwrite or not args.input):
        try:
            finished = json.loads(files["result"].read_text()).get("converged") is True
        except (OSError, ValueError):
            finished = False
        if finished:
            raise InputError(f"{files['result']} holds a finished result; pass --overwrite to "
                             "replace it or --result-file to write elsewhere",
                             key="output.result_file", value=str(files["result"]))
    for key, option in (("result", "--result-file"), ("density", "--density-file"),
                        ("checkpoint", "--checkpoint-file")):
        given = getattr(args, f"{key}_file")
        check_output_file(files[key], option if given else f"output.{key}_file")
    say = (lambda line: None) if args.quiet else (lambda line: print(line, flush=True))
    c = run.crystal
    say(f"{run.title or path.name}")
    say(f"  {_atoms(c.n_atoms)} ({', '.join(c.species)}), volume {c.volume:.4f} bohr^3, "
        f"cutoff {run.settings.cutoff:g} Ha, k-mesh {'x'.join(map(str, run.settings.kpoint_mesh))}")
    plan_run(run, always=not args.quiet)
    _note_low_cutoff(run)
    if args.fresh and files["checkpoint"].exists() and args.writes_files:
        files["checkpoint"].unlink()
    try:
        gs = ground_state(c, run.settings, log=say,
                          checkpoint=files["checkpoint"] if args.writes_files else None,
                          checkpoint_every=run.checkpoint_interval,
                          accept_mismatch=args.accept_mismatch)
    except KeyboardInterrupt:
        where = files["checkpoint"]
        hint = (f"the last completed iteration is saved in {where}; run the same command to "
                "continue" if where.exists() else "no iteration was completed")
        print(f"pwsolid: interrupted; {hint}", file=sys.stderr)
        return 130
    forces, stress = _derivatives(gs, args)
    doc = ground_state_document(gs, input_echo=run.echo, title=run.title, forces=forces,
                                stress=stress)
    if args.writes_files:
        files["result"] = write_or_keep(files["result"], lambda p: write_json(p, doc), "result")
        files["density"] = write_or_keep(files["density"], lambda p: save_density(p, gs),
                                         "density")
        if gs.converged and files["checkpoint"].exists():
            files["checkpoint"].unlink()     # the result and the density are final
    print(_summary(doc))
    for block in (forces, stress):
        if block is not None:
            print("\n" + "\n".join("  " + line for line in block.summary_lines()))
    print(f"Result written to {files['result']}\nDensity written to {files['density']}")
    if not gs.converged:
        print("pwsolid: " + gs.messages[-1], file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK


def _derivatives(gs, args):
    """(forces, stress) of a ground state unless ``--energy-only``; (None, None) then.

    They are derivatives of the converged energy: of an unconverged SCF they are
    computed all the same (the document says ``converged: false``)."""
    if args.energy_only:
        return None, None
    from .forces import atomic_forces
    from .stress import stress_tensor
    return atomic_forces(gs), stress_tensor(gs, pulay=args.basis_stress_estimate)


def _note_low_cutoff(run) -> None:
    """Say when the cutoff is below what a pseudopotential file recommends."""
    from .preflight import load_pseudopotentials

    for species, pp in load_pseudopotentials(run.crystal.species,
                                             run.settings.pseudopotentials).items():
        if pp.suggested_cutoff and run.settings.cutoff < pp.suggested_cutoff:
            print(f"note: basis.cutoff = {run.settings.cutoff:g} Ha is below the "
                  f"{pp.suggested_cutoff:g} Ha that {Path(str(pp.source_file)).name} recommends "
                  f"for {species}; converge the cutoff before trusting absolute numbers "
                  "(pwsolid converge-settings)", file=sys.stderr)


def _summary(doc: dict) -> str:
    e = doc["energy"]
    # widths hold the longest term name and energies of -9999 Ha (-272,000 eV) with a gap
    lines = ["", "Total energy and its terms", "-" * 58,
             f"  {'term':<25}{'Ha':>15}{'eV':>16}"]
    for name, value in e["terms_Ha"].items():
        lines.append(f"  {name.replace('_', ' '):<25}{value:>15.8f}{value * HARTREE_EV:>16.6f}")
    lines.append(f"  {'total':<25}{e['total_Ha']:>15.8f}{e['total_eV']:>16.6f}")
    b = doc["band_edges"]
    occ = doc["occupation_scheme"]
    lines.append("")
    if b is None:
        lines.append(f"  {'free energy F = E - sigma S':<29}{e['free_energy_Ha']:.8f} Ha")
        lines.append(f"  {'zero-width estimate':<29}{e['zero_width_estimate_Ha']:.8f} Ha")
        lines.append(f"  {'Fermi level':<29}{occ['fermi_level_eV']:.4f} eV "
                     f"({occ['scheme']} smearing, width {occ['width_eV']:.3f} eV)")
    else:
        lines.append(f"  highest occupied level   {b['highest_occupied_eV']:.4f} eV "
                     f"at k = {_k(b['highest_occupied_kpoint'])}")
    if b is not None and b["lowest_unoccupied_eV"] is not None:
        lines.append(f"  lowest unoccupied level  {b['lowest_unoccupied_eV']:.4f} eV "
                     f"at k = {_k(b['lowest_unoccupied_kpoint'])}")
        lines.append(f"  band gap on the mesh     {b['gap_eV']:.4f} eV ({b['gap_kind']})")
    s = doc["scf"]
    lines.append(f"  SCF {'converged' if doc['converged'] else 'NOT converged'} in "
                 f"{s['iterations']} iterations, {s['hamiltonian_applications_per_band']:.1f} "
                 f"Hamiltonian applications per band, {doc['timing']['wall_seconds']:.1f} s")
    return "\n".join(lines)


def _atoms(n: int) -> str:
    return f"{n} atom" if n == 1 else f"{n} atoms"


def _k(k) -> str:
    return "(" + ", ".join(f"{x:.4f}" for x in k) + ")"


def _check_input(args) -> int:
    from .config import load_input

    run = load_input(args.input)
    for key in ("result_file", "density_file", "checkpoint_file"):
        check_output_file(getattr(run, key), f"output.{key}")
    plan = plan_run(run)
    s = run.settings
    print(f"{args.input}: valid. {_atoms(run.crystal.n_atoms)}, {plan.n_electrons:g} electrons, "
          f"cutoff {s.cutoff:g} Ha, k-mesh {'x'.join(map(str, s.kpoint_mesh))} "
          f"({len(plan.bases)} k-points), functional {s.functional}")
    print("  " + plan.estimate.describe())
    return EXIT_OK


def _input_keys(args) -> int:
    from .config import schema_text

    print(schema_text(markdown=args.markdown))
    return EXIT_OK


def _list_pseudopotentials(args) -> int:
    from .pseudo import bundled_pseudopotentials, load_pseudopotential
    from .resources import pseudopotential_dir

    rows = [(name, f"valence {pp.valence:g}", pp.form, pp.reference)
            for name in bundled_pseudopotentials()
            for pp in [load_pseudopotential(pseudopotential_dir() / name)]]
    head = ("file", "valence", "form", "source")
    widths = [max(len(r[i]) for r in [head, *rows]) for i in range(3)]
    for r in [head, *rows]:
        print("  ".join(f"{c:<{w}}" for c, w in zip(r, widths)) + "  " + r[3])
    return EXIT_OK


_COMMANDS = {
    "ground-state": _ground_state,
    "check-input": _check_input,
    "input-keys": _input_keys,
    "list-pseudopotentials": _list_pseudopotentials,
}


if __name__ == "__main__":  # pragma: no cover
    main_entry()
