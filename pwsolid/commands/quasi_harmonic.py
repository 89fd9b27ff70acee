"""``pwsolid quasi-harmonic INPUT``: lattice constant, bulk modulus and thermal
expansion against temperature (layer 6).

Takes an ordinary ground-state input with, optionally, a ``[thermal]`` table
(temperatures, volumes, q-mesh, equation of state; see :mod:`pwsolid.thermal_keys`)
and the phonon settings of the phonon workflow. Computes the static energy and
the phonons (finite displacements in a supercell) at every volume, fits F(V, T)
at every temperature and writes, into the output directory (default: where the
input's result file would go):

* ``<stem>.quasi-harmonic.json``: V(T), a(T), B_T(T), expansion coefficients,
  heat capacities, Grueneisen parameters, the zero-point correction
  (schema ``pwsolid.quasi-harmonic/1``);
* ``<stem>.quasi-harmonic.png`` and ``.svg``;
* ``<stem>.quasi-harmonic-records/``: the finished volumes and displacements, so
  that an interrupted run resumes by re-running the same command.

Exit codes: 0, or 4 when a fit did not converge, a ground state did not converge
or the free-energy minimum left the sampled volumes at some temperature.
"""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK
from ..units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA
from .common import (EXIT_INTERRUPTED, check_output_dir, check_output_file, output_directory,
                     plan_run, progress_for, save_figures, write_or_keep)

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "quasi-harmonic",
        help="lattice constant, bulk modulus and thermal expansion against temperature",
        description="Compute the static energy and the phonons of the crystal of a "
                    "ground-state input at several volumes, add the harmonic vibrational "
                    "free energy and fit an equation of state at every temperature: the "
                    "lattice constant, the isothermal bulk modulus and the expansion "
                    "coefficient against temperature, and the zero-point correction to the "
                    "lattice constant. Temperatures, volumes and the q-mesh come from the "
                    "input's [thermal] table. Re-running the same command resumes.",
        epilog="Writes <stem>.quasi-harmonic.json, .png, .svg and the resume directory "
               "<stem>.quasi-harmonic-records. Exit code 4 when a fit or a ground state "
               "did not converge or V(T) left the sampled volumes.")
    p.add_argument("input", help="ground-state input file (TOML) with an optional [thermal] table")
    p.add_argument("--output-dir", metavar="DIR", default=None,
                   help="where to write (default: beside the input's result file)")
    p.add_argument("--accept-mismatch", action="store_true",
                   help="reuse resume records made for another calculation instead of "
                        "refusing them")
    p.add_argument("--quiet", action="store_true", help="no progress lines")
    p.set_defaults(handler=run)


def _phonon_settings(run_input):
    """The input's phonon settings (its [phonons] table), else the workflow's defaults."""
    given = getattr(run_input, "phonons", None)
    if given is not None:
        return given
    from ..workflows.phonons import PhononSettings

    return PhononSettings()


def summary_lines(qha) -> list[str]:
    """The zero-point correction and a short table every 100 K."""
    name = next(iter(qha.reference_lengths))
    st = qha.lattice(qha.static_fit.v0)[name] * BOHR_ANGSTROM
    zp = qha.lattice(qha.zero_point_fit.v0)[name] * BOHR_ANGSTROM
    lines = [f"static minimum   {name} = {st:.5f} A, B0 = {qha.static_fit.b0_gpa:.2f} GPa",
             f"zero-point       {name} = {zp:.5f} A ({100 * qha.zero_point_lattice_change:+.3f} %)",
             f"{'T (K)':>8} {name + ' (A)':>11} {'alpha (1e-6/K)':>15} {'B_T (GPa)':>10}"]
    a = qha.lattice(qha.volume)[name] * BOHR_ANGSTROM
    for i, t in enumerate(qha.temperatures):
        if abs(t / 100 - round(t / 100)) < 1e-9:
            flag = "" if qha.inside_range[i] else "  (extrapolated)"
            lines.append(f"{t:8.0f} {a[i]:11.5f} {qha.linear_expansion[i] * 1e6:15.3f} "
                         f"{qha.bulk_modulus[i] * HA_PER_BOHR3_GPA:10.2f}{flag}")
    neg = qha.negative_expansion()
    if neg:
        lines.append(f"negative expansion from {neg['from_K']:g} K to {neg['to_K']:g} K, "
                     f"lowest {neg['minimum_linear_per_K'] * 1e6:.3f}e-6/K at "
                     f"{neg['minimum_at_K']:g} K")
    return lines + [f"note: {m}" for m in qha.messages]


def run(args) -> int:
    from ..config import load_input
    from ..plots.thermal import QuasiHarmonicPlot
    from ..results import write_json
    from ..workflows.thermal_expansion import quasi_harmonic

    run_input = load_input(args.input)
    thermal = run_input.thermal
    stem = Path(args.input).stem
    out = output_directory(args, run_input)
    json_path = check_output_file(out / f"{stem}.quasi-harmonic.json", "--output-dir")
    records = check_output_dir(out / f"{stem}.quasi-harmonic-records", "--output-dir")
    phonon_settings = _phonon_settings(run_input)
    plan_run(run_input, times=thermal.volume_points)
    log = None if args.quiet else (lambda line: print(line, flush=True))
    try:
        qha = quasi_harmonic(run_input.crystal, run_input.settings, phonon_settings,
                             temperatures=thermal.temperatures,
                             volume_range=thermal.volume_range, n_points=thermal.volume_points,
                             q_mesh=thermal.q_mesh, form=thermal.equation_of_state,
                             record_dir=records, accept_mismatch=args.accept_mismatch,
                             log=log, progress=progress_for(args, "volumes with phonons"))
    except KeyboardInterrupt:
        print(f"\npwsolid: interrupted; finished volumes and displacements are kept in {records}: "
              "run the same command again to resume", file=sys.stderr)
        return EXIT_INTERRUPTED
    print("\n".join(summary_lines(qha)))
    if getattr(args, "writes_files", True):
        doc = {**qha.as_document(), "title": run_input.title, "input": run_input.echo,
               "history": list(qha.history)}
        json_path = write_or_keep(json_path, lambda p: write_json(p, doc), "quasi-harmonic result")
        figures = save_figures(QuasiHarmonicPlot.from_result(qha, run_input.title),
                               out / f"{stem}.quasi-harmonic")
        print(f"Written: {json_path}" + "".join(f", {f}" for f in figures))
    if not qha.converged:
        print("pwsolid: a fit or a ground state did not converge, or V(T) left the sampled "
              "volumes (see the notes)", file=sys.stderr)
        return EXIT_NOT_CONVERGED
    return EXIT_OK
