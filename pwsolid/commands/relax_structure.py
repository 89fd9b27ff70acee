"""``pwsolid relax-structure INPUT``: move atoms and cell to their forces' and stress's rest.

Reads an ordinary ground-state input with an optional ``[relaxation]`` table
(``pwsolid input-keys`` lists its keys), calls
:func:`pwsolid.workflows.relaxation.relax_structure` and writes, into the output
directory (default: where the input's result file would go):

* ``<stem>.relaxation.json``: the trajectory document (schema ``pwsolid.relaxation/1``);
* ``<stem>.relaxation.png`` and ``.svg``: energy, largest force and stress per step;
* ``<stem>.relaxed.toml``: the final structure as an input file that runs as it is;
* ``<stem>.relaxed.cif``: the final structure as a CIF file, when the optional atomistic library
  library is installed (otherwise a one-line note says it was skipped);
* ``<stem>.relaxation-checkpoint.npz`` while running (a ``relaxation-step`` record
  of :mod:`pwsolid.store`): re-running the same command after an interruption
  continues from the last finished step (``--fresh`` starts over); a checkpoint of
  another crystal, other settings or another relaxation is refused naming what differs.

Exit codes: 0 converged; 4 when the thresholds were not reached in the allowed
steps or the cell collapsed (the documents are still written, with
``converged: false``); 3 for invalid input; 130 when interrupted.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK
from .common import (accept_mismatch_option, check_output_dir, check_output_file,
                     default_output_dir)
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA

__all__ = ["register", "run", "relaxed_input_text", "write_cif"]

_SETTINGS_SECTIONS = ("basis", "brillouin_zone", "exchange_correlation", "occupations", "spin",
                      "self_consistency")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "relax-structure", help="relax atomic positions and/or the cell (BFGS)",
        description="Move the atoms, the cell or both of a ground-state input until every "
                    "force and the stress (at a target pressure) are below the thresholds of "
                    "the input's [relaxation] table, keeping the space group. Re-running the "
                    "same command resumes an interrupted relaxation.",
        epilog="Writes <stem>.relaxation.json, <stem>.relaxation.png/.svg, "
               "<stem>.relaxed.toml and (with the atomistic library installed) <stem>.relaxed.cif. Exit code 4 "
               "when the thresholds were not reached.")
    p.add_argument("input", help="ground-state input file (TOML) with an optional [relaxation]")
    p.add_argument("--output-dir", metavar="DIR",
                   help="directory for the files written (default: where the input's result "
                        "file would go)")
    p.add_argument("--checkpoint-file", metavar="FILE",
                   help="where the per-step checkpoint goes (default "
                        "<stem>.relaxation-checkpoint.npz in the output directory)")
    p.add_argument("--fresh", action="store_true", help="ignore an existing checkpoint")
    accept_mismatch_option(p)
    p.add_argument("--show-scf", action="store_true", help="also print every SCF iteration")
    p.add_argument("--quiet", action="store_true", help="print only the summary")
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..config import load_input
    from ..plots.relaxation import RelaxationPlot
    from ..results import write_json
    from ..safe_files import atomic_write_bytes
    from ..workflows.relaxation import relax_structure

    run_input = load_input(args.input)
    relax = run_input.relaxation
    stem = Path(args.input).stem
    out_dir = check_output_dir(Path(args.output_dir) if args.output_dir
                               else default_output_dir(run_input))
    checkpoint = check_output_file(Path(args.checkpoint_file) if args.checkpoint_file
                                   else out_dir / f"{stem}.relaxation-checkpoint.npz",
                                   "--checkpoint-file")
    writes = getattr(args, "writes_files", True)
    say = (lambda line: None) if args.quiet else (lambda line: print(line, flush=True))
    c = run_input.crystal
    say(f"{run_input.title or stem}: {c.n_atoms} atoms, moving {relax.moves}; forces below "
        f"{relax.force_threshold:.2e} Ha/bohr, stress within "
        f"{relax.stress_threshold * HA_PER_BOHR3_GPA:g} GPa of "
        f"{relax.target_pressure * HA_PER_BOHR3_GPA:g} GPa; at most {relax.max_steps} moves")
    try:
        # every MPI process reads the checkpoint (they must all resume alike); the
        # workflow lets only process 0 write it
        result = relax_structure(c, run_input.settings, relax, checkpoint=checkpoint, log=say,
                                 scf_log=say if args.show_scf else None, fresh=args.fresh,
                                 accept_mismatch=args.accept_mismatch)
    except KeyboardInterrupt:
        hint = (f"the finished steps are saved in {checkpoint}; run the same command to "
                "continue" if checkpoint.exists() else "no step was finished")
        print(f"pwsolid: interrupted; {hint}", file=sys.stderr)
        return 130
    doc = result.as_document()
    doc["title"] = run_input.title
    doc["input"] = run_input.echo
    paths = {"trajectory": out_dir / f"{stem}.relaxation.json",
             "relaxed input": out_dir / f"{stem}.relaxed.toml"}
    figures, notes = [], []
    if writes:
        write_json(paths["trajectory"], doc)
        text = relaxed_input_text(run_input, result.crystal, result.converged, args.input)
        atomic_write_bytes(paths["relaxed input"], text.encode())
        cif = out_dir / f"{stem}.relaxed.cif"
        skipped = write_cif(cif, result.crystal)
        if skipped:
            notes.append(skipped)
        else:
            paths["relaxed structure (CIF)"] = cif
        figures = RelaxationPlot.from_result(result, title=run_input.title).save(
            out_dir / f"{stem}.relaxation")
    print("\n".join(result.summary_lines()))
    for name, path in paths.items():
        print(f"{name[0].upper() + name[1:]} written to {path}")
    for note in notes:
        print(note)
    if figures:
        print("Figure written to " + ", ".join(str(f) for f in figures))
    if not result.converged:
        print("pwsolid: " + (result.messages[-1] if result.messages else "not converged"),
              file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK


# -- the relaxed structure as an input file ----------------------------------------------

def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)           # a TOML basic string uses JSON's escapes
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + " }"
    raise TypeError(f"cannot write {type(value).__name__} to TOML")


def _table(name: str, entries: dict) -> list[str]:
    rows = [f"{k} = {_toml_value(v)}" for k, v in entries.items() if v is not None]
    return [f"[{name}]", *rows, ""] if rows else []


def relaxed_input_text(run_input, crystal, converged: bool, source="") -> str:
    """An input file for ``crystal`` with every other setting of ``run_input``.

    The cell is written explicitly (lattice vectors in angstrom, fractional
    positions at full precision); the settings, pseudopotentials and relaxation
    keys come from the input's echo, with automatic choices left out so that
    they stay automatic. Output names default to the new file's stem.
    """
    echo = run_input.echo
    lines = [f"# Structure relaxed by pwsolid relax-structure from {source or 'an input'}"
             f" ({'converged' if converged else 'NOT converged: the lowest-enthalpy step'}).",
             f"title = {_toml_value('relaxed: ' + (run_input.title or Path(str(source)).stem))}",
             ""]
    atoms = [{"species": s, "position": [float(x) for x in p]}
             for s, p in zip(crystal.species, crystal.positions)]
    lines += ["[crystal]", 'prototype = "explicit"', 'lattice_constant = "1 angstrom"',
              "lattice_vectors = [",
              *[f"  {_toml_value([float(x) for x in row])}," for row in
                crystal.lattice * BOHR_ANGSTROM], "]",
              "atoms = [", *[f"  {_toml_value(a)}," for a in atoms], "]", ""]
    lines += _table("pseudopotentials", echo.get("pseudopotentials", {}))
    for section in _SETTINGS_SECTIONS:
        lines += _table(section, echo.get(section, {}))
    if "relaxation" in echo:
        lines += _table("relaxation", echo["relaxation"])
    return "\n".join(lines)


# -- the relaxed structure as a CIF file (optional: needs the atomistic library) ---------------------------

def write_cif(path, crystal) -> str | None:
    """Write ``crystal`` as a CIF file (atomically) with
    :func:`pwsolid.interop.structure_files.write_structure`, when the atomistic library is installed.

    The cell goes in angstrom, the positions fractional, in space group P 1 (the
    relaxed structure as it is; no symmetry is searched for).

    Returns
    -------
    str or None
        None when written; otherwise a one-line note saying why it was skipped.
    """
    from ..interop import MissingExtraError
    from ..interop.structure_files import write_structure

    try:
        write_structure(path, crystal, file_format="cif")
    except MissingExtraError:
        return ('Note: no CIF file written (the optional atomistic library, the Atomic Simulation Environment, is not installed: '
                'pip install "pwsolid[atomistic]")')
    return None
