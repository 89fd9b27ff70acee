"""``pwsolid xc-testbench``: exchange-correlation functionals on the uniform gas (layer 6).

For each functional named (registry names, ``file:path.py``, or ``--user-file``),
prints its energies per electron at a few densities, its correlation against the
reference parametrisations and the Ceperley-Alder quantum Monte Carlo data, and
the pass/fail list of exact conditions (for a meta-GGA also its tables and plots
against the reduced gradient s and the iso-orbital indicator alpha); writes the
report as JSON and the plots as PNG and SVG. A failed condition is a finding: the exit code is 0 whenever the
report was made, 3 for bad input (an unknown name, a file that does not load).
"""

from __future__ import annotations

import re
import textwrap
from pathlib import Path

from ..errors import EXIT_OK, InputError
from .common import check_output_dir, save_figures, write_or_keep
from ..units import HARTREE_EV

__all__ = ["register", "run"]

_DEFAULT_FUNCTIONAL = "lda-pz81"
_DEFAULT_COMPARE = "lda-pw92,lda-vwn"
_DEFAULT_RS = "1,2,5,10,20"
_WIDTH = 96


def register(subparsers) -> None:
    """Add the ``xc-testbench`` sub-command."""
    parser = subparsers.add_parser(
        "xc-testbench",
        help="test exchange-correlation functionals on the uniform electron gas",
        description="Evaluate exchange-correlation functionals for the uniform electron "
                    "gas: energies per electron, differences to other parametrisations "
                    "and to the Ceperley-Alder quantum Monte Carlo data, and exact "
                    "conditions. Writes a JSON report and plots per functional. Exit "
                    "code 0 even when a condition fails; 3 for bad input.")
    parser.add_argument("functionals", nargs="*", metavar="FUNCTIONAL",
                        help="registry name, file:path/to/functional.py or "
                             "libxc:NAME[+NAME] (Libxc's LDA and GGA functionals) "
                             f"(default {_DEFAULT_FUNCTIONAL} when no --user-file is given)")
    parser.add_argument("--user-file", action="append", default=[], metavar="FILE",
                        help="Python functional file to test (repeatable); it is executed")
    parser.add_argument("--compare", default=_DEFAULT_COMPARE, metavar="NAMES",
                        help="comma-separated reference functionals "
                             f"(default {_DEFAULT_COMPARE}; empty for none)")
    parser.add_argument("--output-dir", default="xc-testbench", metavar="DIR",
                        help="where the JSON reports and plots go (default ./xc-testbench)")
    parser.add_argument("--rs", default=_DEFAULT_RS, metavar="VALUES",
                        help=f"comma-separated rs values (bohr) of the printed table "
                             f"(default {_DEFAULT_RS})")
    parser.add_argument("--no-plots", action="store_true", help="write the JSON reports only")
    parser.set_defaults(handler=run)


def _numbers(text: str, option: str) -> list[float]:
    try:
        values = [float(item) for item in text.split(",") if item.strip()]
    except ValueError:
        values = []
    if not values or any(not v > 0 for v in values):
        raise InputError("expected comma-separated positive numbers, e.g. 1,2,5",
                         key=option, value=text)
    return values


def _functional(load, spec, option: str):
    """A functional loaded by ``load``; a bad name or file is reported under ``option``."""
    try:
        return load(spec)
    except InputError as exc:
        raise InputError(exc.reason, key=option, value=spec) from None


def _slug(name: str) -> str:
    # No dots: the stem gets .json/.png/.svg suffixes.
    return re.sub(r"[^A-Za-z0-9_-]+", "-", name).strip("-") or "functional"


def _signed(value: float | None, digits: int = 3) -> str:
    return "n/a" if value is None or value != value else f"{value:+.{digits}f}"


def _table_lines(report, rs_printed: list[float]) -> list[str]:
    table = report.table
    refs = report.references
    head = (f"  {'rs/bohr':>8} {'zeta':>5} {'exchange':>11} {'correlation':>12} "
            f"{'total':>11} {'total/eV':>10}" + "".join(f" {'vs ' + r:>18}" for r in refs))
    lines = ["  Energies per electron in Ha (total also in eV); correlation minus each "
             "reference in mHa", head]
    if report.functional.needs_gradients:
        lines.insert(1, f"  (gradient functional: its uniform-gas limit at zero gradient, "
                        f"parent {report.functional.lda_parent})")
    for rs in rs_printed:
        i = int(abs(table.rs - rs).argmin())
        for j, zeta in enumerate(table.zeta):
            if zeta not in (0.0, 1.0):
                continue
            total = table.total[0, i, j]
            if total != total:       # no spin-polarised form
                continue
            row = (f"  {table.rs[i]:>8.2f} {zeta:>5.0f} {table.exchange[0, i, j]:>11.7f} "
                   f"{table.correlation[0, i, j]:>12.7f} {total:>11.7f} "
                   f"{total * HARTREE_EV:>10.4f}")
            row += "".join(f" {_signed(1e3 * report.differences[r][i, j]):>18}" for r in refs)
            lines.append(row)
    return lines


def _monte_carlo_lines(report) -> list[str]:
    lines = ["  Correlation against Ceperley & Alder, Phys. Rev. Lett. 45, 566 (1980), in mHa",
             f"  {'rs/bohr':>8} {'zeta':>5} {'QMC':>16} {'functional':>11} {'difference':>11}"]
    for p in report.monte_carlo:
        qmc = f"{1e3 * p.monte_carlo:.2f} +- {1e3 * p.monte_carlo_error:.1g}"
        value = "n/a" if p.functional is None else f"{1e3 * p.functional:.2f}"
        diff = None if p.difference is None else 1e3 * p.difference
        lines.append(f"  {p.rs:>8.0f} {p.zeta:>5.0f} {qmc:>16} {value:>11} "
                     f"{_signed(diff, 2):>11}")
    return lines


def _condition_lines(report) -> list[str]:
    counts = {s: sum(c.status == s for c in report.conditions)
              for s in ("pass", "fail", "not applicable")}
    lines = [f"  Exact conditions: {counts['pass']} pass, {counts['fail']} fail, "
             f"{counts['not applicable']} not applicable"]
    marks = {"pass": "PASS", "fail": "FAIL", "not applicable": "n/a "}
    for c in report.conditions:
        lines.append(f"    {marks[c.status]}  {c.name}")
        lines += textwrap.wrap(c.detail, width=_WIDTH, initial_indent=" " * 10,
                               subsequent_indent=" " * 10)
    return lines


def _meta_lines(report) -> list[str]:
    """F_x(s, alpha) and eps_c(s, alpha) at the first rs, zeta = 0, of a meta-GGA."""
    meta = report.meta
    head = "  " + "s / alpha".rjust(9) + "".join(f" {a:>7g}" for a in meta.alpha)
    lines = []
    if meta.exchange_enhancement is not None:
        lines += ["  Exchange enhancement F_x(s, alpha), spin-unpolarised", head]
        lines += [f"  {s:>9g}" + "".join(f" {v:>7.4f}" for v in row)
                  for s, row in zip(meta.s, meta.exchange_enhancement)]
    if meta.correlation is not None:
        lines += [f"  Correlation per electron in mHa at rs = {meta.rs[0]:g} bohr, zeta = 0",
                  head]
        lines += [f"  {s:>9g}" + "".join(f" {1e3 * v:>7.2f}" for v in row)
                  for s, row in zip(meta.s, meta.correlation[0, 0])]
    return lines


def run(args) -> int:
    """Run the testbench for the functionals in ``args``; return the exit code."""
    from ..results import write_json
    from ..workflows.uniform_gas import DEFAULT_RS, DEFAULT_ZETA, testbench_report
    from ..xc import get_functional, load_user_functional

    rs_printed = _numbers(args.rs, "--rs")
    output = check_output_dir(Path(args.output_dir))
    compare = [name.strip() for name in args.compare.split(",") if name.strip()]
    references = [_functional(get_functional, name, "--compare") for name in compare]
    subjects = [_functional(get_functional, spec, "FUNCTIONAL") for spec in args.functionals]
    subjects += [_functional(load_user_functional, path, "--user-file") for path in args.user_file]
    if not subjects:
        subjects = [get_functional(_DEFAULT_FUNCTIONAL)]
    rs_table = sorted(set(DEFAULT_RS) | set(rs_printed))

    for functional in subjects:
        report = testbench_report(functional, references, rs_values=rs_table,
                                  zeta_values=DEFAULT_ZETA)
        print(f"Uniform-gas testbench: {functional.name}")
        print(f"  {functional.description}")
        if functional.origin != "built-in":
            print(f"  from {functional.origin}")
        print()
        blocks = [_table_lines(report, rs_printed), _monte_carlo_lines(report)]
        if getattr(report, "meta", None) is not None:
            blocks.append(_meta_lines(report))
        for block in (*blocks, _condition_lines(report)):
            print("\n".join(block))
            print()
        stem = output / f"{_slug(functional.name)}-uniform-gas"
        json_path = write_or_keep(stem.with_suffix(".json"),
                                  lambda p: write_json(p, report.as_document()), "testbench report")
        written = [json_path]
        if not args.no_plots:
            from ..plots.xc import UniformGasPlot

            written += save_figures(UniformGasPlot.from_report(report), stem)
            if getattr(report, "meta", None) is not None:
                from ..plots.meta import MetaGasPlot

                written += save_figures(MetaGasPlot.from_report(report),
                                        output / f"{_slug(functional.name)}-alpha-s")
        print("  Written: " + ", ".join(str(p) for p in written))
        print()
    return EXIT_OK
