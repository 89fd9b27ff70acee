"""``pwsolid density-response``: jellium's static response against Lindhard plus f_xc."""

from __future__ import annotations

import sys
from pathlib import Path

from ..errors import EXIT_OK, InputError
from .common import check_output_dir, parse_positive, write_or_keep

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "density-response", help="static density response of jellium against Lindhard + f_xc",
        description="Apply weak cosine potentials to a jellium cell and compare the "
                    "self-consistent response with the Lindhard function screened by the "
                    "Hartree term and the functional's local-field kernel.")
    p.add_argument("--rs", type=float, default=3.0, help="Wigner-Seitz radius in bohr")
    p.add_argument("--harmonics", default="2,3,4,5",
                   help="wave vectors q = 2 pi j / L_z, comma-separated j (cell of 6 cubes)")
    p.add_argument("--mesh", default="16,16,3", help="k-mesh n1,n2,n3")
    p.add_argument("--functional", default="lda-pw92", help="functional by name or file:PATH")
    p.add_argument("--output-dir", default=".", help="where to write JSON and plots")
    p.set_defaults(handler=run)


def _ints(text: str, key: str, count: int | None = None) -> tuple[int, ...]:
    try:
        values = tuple(int(x) for x in text.split(","))
    except ValueError:
        raise InputError("must be integers separated by commas", key=key, value=text) from None
    if (count and len(values) != count) or any(v < 1 or v > 64 for v in values):
        raise InputError(f"{count or 'one or more'} integers between 1 and 64", key=key, value=text)
    return values


def run(args) -> int:
    from ..plots import new_axes, save_figure
    from ..progress import ProgressBar
    from ..results import write_json
    from ..workflows.density_response import static_response

    parse_positive(args.rs, "--rs", "bohr")
    out = check_output_dir(Path(args.output_dir))
    harmonics = _ints(args.harmonics, "--harmonics")
    mesh = _ints(args.mesh, "--mesh", 3)
    if max(harmonics) >= 6 * 10:
        raise InputError("harmonic too large for the grid", key="--harmonics", value=args.harmonics)
    result = static_response(args.rs, harmonics, mesh=mesh, functional=args.functional,
                             progress=ProgressBar("response runs"))
    print(f"Jellium r_s = {result.rs:g} bohr, {result.functional}: chi(q) in bohr^-3/Ha")
    print(f"  {'q/kF':>6} {'measured':>12} {'Lindhard+fxc':>13} {'RPA':>12} {'error':>8}")
    for p in result.points:
        print(f"  {p.q / result.k_fermi:>6.3f} {p.measured:>12.6f} {p.theory:>13.6f} "
              f"{p.random_phase:>12.6f} {100 * p.relative_error:>7.2f}%")
    if getattr(args, "writes_files", True):
        stem = out / f"density-response-rs{result.rs:g}"
        json_path = write_or_keep(Path(f"{stem}.json"),
                                  lambda p: write_json(p, result.as_document()), "response")
        fig, ax = new_axes(figsize=(5.4, 3.6))
        x = [p.q / result.k_fermi for p in result.points]
        ax.plot(x, [-p.theory for p in result.points], label="Lindhard + Hartree + f_xc")
        ax.plot(x, [-p.random_phase for p in result.points], linestyle="--", label="random phase")
        ax.plot(x, [-p.measured for p in result.points], "o", label="self-consistent jellium")
        ax.set_xlabel("q / k_F")
        ax.set_ylabel("-chi(q) (bohr^-3 / Ha)")
        ax.legend()
        try:
            save_figure(fig, stem)
        except OSError as exc:
            print(f"pwsolid: could not write the figure {stem}.* ({exc.strerror or exc})",
                  file=sys.stderr)
        print(f"Written: {json_path}, {stem}.png, .svg")
    return EXIT_OK
