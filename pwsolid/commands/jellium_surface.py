"""``pwsolid jellium-surface``: surface energy, its parts and the work function of jellium."""

from __future__ import annotations

from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from .common import (check_output_dir, check_output_file, parse_formats, parse_int,
                     parse_numbers, save_figures, write_or_keep)

__all__ = ["register", "run"]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "jellium-surface", help="surface energy and work function of jellium from slabs",
        description="Self-consistent jellium slabs (1-D Kohn-Sham, in-plane free electrons "
                    "integrated exactly) for each r_s: surface energy and its kinetic, "
                    "electrostatic and exchange-correlation parts averaged over slab "
                    "thicknesses, work function, Budd-Vannimenus check, density profile.")
    p.add_argument("--radii", default="2,3,4,5,6", help="r_s values in bohr, comma separated")
    p.add_argument("--functional", default="lda-pw92",
                   help="self-consistent functional (local, gradient or meta-GGA), name or "
                        "file:PATH")
    p.add_argument("--also", default="",
                   help="functionals evaluated on the self-consistent density, comma "
                        "separated (e.g. pbe,scan,r2scan); meta-GGAs get the orbitals' tau")
    p.add_argument("--thickness", type=float, default=8.0,
                   help="thinnest slab in Fermi wavelengths (2 pi / k_F)")
    p.add_argument("--thickness-samples", default="4",
                   help="slabs per r_s spread over half a Fermi wavelength (averaged)")
    p.add_argument("--vacuum", type=float, default=3.0, help="vacuum in Fermi wavelengths")
    p.add_argument("--cutoff", type=float, default=20.0,
                   help="plane-wave cutoff in units of the Fermi energy")
    p.add_argument("--convergence-at", type=float, default=None, metavar="RS",
                   help="instead: scan thickness, vacuum and cutoff one at a time at this r_s")
    p.add_argument("--points-file", default=None,
                   help="restart file of finished r_s points (reused on a re-run)")
    p.add_argument("--accept-mismatch", action="store_true",
                   help="reuse a points file written with other settings")
    p.add_argument("--output-dir", default=".", help="where to write JSON, CSV and plots")
    p.add_argument("--formats", default="png,svg", help="figure formats")
    p.set_defaults(handler=run)


def _settings(args):
    from ..workflows.jellium_surface import SurfaceSettings

    extras = tuple(x.strip() for x in str(args.also).split(",") if x.strip())
    samples = parse_int(args.thickness_samples, "--thickness-samples", maximum=32)
    try:
        return SurfaceSettings(functional=args.functional, extra_functionals=extras,
                               thickness=args.thickness, thickness_samples=samples,
                               vacuum=args.vacuum, cutoff=args.cutoff)
    except InputError as exc:
        # name the option the user wrote, not the settings field
        option = {"thickness": "--thickness", "vacuum": "--vacuum", "cutoff": "--cutoff",
                  "functional": "--functional",
                  "extra_functionals": "--also"}.get(exc.key)
        if option is None:
            raise
        raise InputError(exc.reason, key=option, value=exc.value) from None


def _convergence(args, settings, out, formats) -> int:
    from ..plots.jellium_surface import SurfaceConvergencePlot
    from ..progress import ProgressBar
    from ..results import write_json
    from ..units import HA_PER_BOHR2_ERG_PER_CM2, HARTREE_EV
    from ..workflows.jellium_surface import jellium_surface_convergence

    rs = args.convergence_at
    if not (1.0 <= rs <= 10.0):
        raise InputError("r_s must lie between 1 and 10 bohr", key="--convergence-at",
                         value=rs)
    conv = jellium_surface_convergence(rs, settings, progress=ProgressBar("convergence"))
    erg = HA_PER_BOHR2_ERG_PER_CM2
    print(f"Jellium surface convergence, r_s = {rs:g} bohr, {settings.functional}")
    for key, rows in conv.rows.items():
        print(f"  {key:>10} {'sigma (erg/cm2)':>16} {'sigma_xc':>12} {'work fn (eV)':>13}")
        for v, s, x, w in rows:
            print(f"  {v:>10g} {s * erg:>16.2f} {x * erg:>12.2f} {w * HARTREE_EV:>13.4f}")
    if getattr(args, "writes_files", True):
        stem = out / f"jellium-surface-convergence-rs{rs:g}"
        path = write_or_keep(stem.with_name(stem.name + ".json"),
                             lambda p: write_json(p, conv.as_document()), "convergence")
        save_figures(SurfaceConvergencePlot.from_convergence(conv), stem, formats)
        print(f"Written: {path} and plots")
    return EXIT_OK


def run(args) -> int:
    from ..plots.jellium_surface import SurfaceEnergyPlot, SurfaceProfilePlot
    from ..progress import ProgressBar
    from ..results import write_json
    from ..units import HA_PER_BOHR2_ERG_PER_CM2, HARTREE_EV
    from ..workflows.jellium_surface import jellium_surface

    formats = parse_formats(args.formats)
    radii = parse_numbers(args.radii, "--radii")
    if any(not (1.0 <= r <= 10.0) for r in radii):
        raise InputError("each r_s must lie between 1 and 10 bohr", key="--radii",
                         value=args.radii)
    settings = _settings(args)
    out = check_output_dir(Path(args.output_dir))
    if args.points_file:
        check_output_file(Path(args.points_file), "--points-file")
    if args.convergence_at is not None:
        return _convergence(args, settings, out, formats)
    study = jellium_surface(radii, settings, points_file=args.points_file,
                            accept_mismatch=args.accept_mismatch,
                            progress=ProgressBar("jellium surfaces"))
    erg = HA_PER_BOHR2_ERG_PER_CM2
    extras = settings.extra_functionals
    print(f"Jellium surface, {settings.functional}: energies in erg/cm^2, mean over "
          f"{settings.thickness_samples} slab thicknesses (+- half range)")
    head = f"  {'r_s':>5} {'sigma':>10} {'+-':>6} {'kinetic':>10} {'electrost.':>10} {'xc':>9}"
    print(head + "".join(f" {'xc ' + x:>12}" for x in extras) + f" {'W (eV)':>8}")
    for p in study.points:
        line = (f"  {p.rs:>5g} {p.mean() * erg:>10.1f} {p.spread() * erg:>6.1f} "
                f"{p.mean('kinetic') * erg:>10.1f} {p.mean('electrostatic') * erg:>10.1f} "
                f"{p.mean('exchange_correlation') * erg:>9.1f}")
        line += "".join(f" {p.mean_extra(x) * erg:>12.1f}" for x in extras)
        w = sum(p.work_function) / len(p.work_function) * HARTREE_EV
        print(line + f" {w:>8.3f}" + ("  (from the points file)" if p.resumed else ""))
    for text in study.mismatches:
        print(f"  accepted: {text}")
    if getattr(args, "writes_files", True):
        stem = out / "jellium-surface"
        path = write_or_keep(stem.with_name(stem.name + ".json"),
                             lambda p: write_json(p, study.as_document()), "jellium surface")
        write_or_keep(stem.with_name(stem.name + ".csv"),
                      lambda p: p.write_text(study.to_csv()), "jellium surface table")
        save_figures(SurfaceProfilePlot.from_study(study), stem.with_name(stem.name + ".profile"),
                     formats)
        save_figures(SurfaceEnergyPlot.from_study(study), stem.with_name(stem.name + ".energy"),
                     formats)
        print(f"Written: {path}, the CSV table and plots")
    return EXIT_OK if study.converged else EXIT_NOT_CONVERGED
