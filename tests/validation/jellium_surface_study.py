"""Converged jellium surface energies and their convergence (not collected by pytest).

    PYTHONPATH=. python tests/validation/jellium_surface_study.py [--output-dir DIR]

1. Convergence at r_s 2 and 6: the slab thickness, the vacuum and the cutoff varied one
   at a time around the defaults (table and figure per r_s).
2. The table at the defaults for r_s 2, 2.5, 3, 4, 5, 6 with LDA (PW92) self-consistent
   and PBE (and SCAN, r2SCAN when registered) evaluated on its density, against
   shared/REFERENCES.md 11e.
3. Self-consistent SCAN and r2SCAN slabs when registered.
4. Work functions with Wigner's correlation against Lang and Kohn, PRB 3, 1215 (1971)
   (from memory).

The figures are recorded in the README ("Jellium surfaces") with the date.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from pwsolid.plots.jellium_surface import (SurfaceConvergencePlot, SurfaceEnergyPlot,
                                           SurfaceProfilePlot)
from pwsolid.units import HA_PER_BOHR2_ERG_PER_CM2 as ERG
from pwsolid.units import HARTREE_EV
from pwsolid.workflows.jellium_surface import (SurfaceSettings, jellium_surface,
                                               jellium_surface_convergence)
from pwsolid.xc import available_functionals

REFERENCE_XC = {2.0: (3354, 3264, 3413), 3.0: (764, 720, 781), 4.0: (261, 240, 268),
                6.0: (53, 48, 54)}       # LSDA, PBE, best estimate (REFERENCES.md 11e)
LANG_KOHN_WORK_FUNCTION = {2.0: 3.89, 2.5: 3.72, 3.0: 3.50, 4.0: 3.06, 5.0: 2.73,
                           6.0: 2.52}    # eV, Wigner correlation (from memory)


def convergence(out: Path) -> None:
    for rs in (2.0, 6.0):
        conv = jellium_surface_convergence(rs)
        print(f"\n### Convergence at r_s = {rs:g} (others at their defaults)\n")
        print("| setting | value | sigma (erg/cm^2) | sigma_xc (erg/cm^2) | work function (eV) |")
        print("|---|---|---|---|---|")
        for key, rows in conv.rows.items():
            for v, s, x, w in rows:
                print(f"| {key} | {v:g} | {s * ERG:.2f} | {x * ERG:.2f} | {w * HARTREE_EV:.4f} |")
        SurfaceConvergencePlot(conv).save(out / f"jellium-surface-convergence-rs{rs:g}")


def table(out: Path) -> None:
    extras = ("pbe",) + tuple(n for n in ("scan", "r2scan") if n in available_functionals())
    start = time.perf_counter()
    study = jellium_surface((2.0, 2.5, 3.0, 4.0, 5.0, 6.0),
                            SurfaceSettings(extra_functionals=extras))
    print(f"\n### Surface energies, LDA (PW92) slabs, defaults "
          f"({time.perf_counter() - start:.0f} s)\n")
    head = "| r_s | sigma | +- | kinetic | electrostatic | xc LDA | " + \
        " | ".join(f"xc {x}" for x in extras) + " | W (eV) | BV step / bulk (mHa) |"
    print(head)
    print("|" + "---|" * (head.count("|") - 1))
    for p in study.points:
        cells = [f"{p.rs:g}", f"{p.mean() * ERG:.1f}", f"{p.spread() * ERG:.1f}",
                 f"{p.mean('kinetic') * ERG:.1f}", f"{p.mean('electrostatic') * ERG:.1f}",
                 f"{p.mean('exchange_correlation') * ERG:.1f}",
                 *[f"{p.mean_extra(x) * ERG:.1f}" for x in extras],
                 f"{np.mean(p.work_function) * HARTREE_EV:.3f}",
                 f"{1e3 * np.mean(p.edge_potential_step):.3f} / {1e3 * p.budd_vannimenus:.3f}"]
        print("| " + " | ".join(cells) + " |")
    print("\nAgainst REFERENCES.md 11e (LSDA, PBE, best estimate):")
    for p in study.points:
        if p.rs in REFERENCE_XC:
            lsda, pbe, best = REFERENCE_XC[p.rs]
            print(f"  r_s {p.rs:g}: LDA {p.mean('exchange_correlation') * ERG:.1f} vs {lsda}; "
                  f"PBE {p.mean_extra('pbe') * ERG:.1f} vs {pbe}; best estimate {best}"
                  + "".join(f"; {x} {p.mean_extra(x) * ERG:.1f}" for x in extras[1:]))
    SurfaceProfilePlot.from_study(study).save(out / "jellium-surface.profile")
    SurfaceEnergyPlot.from_study(study).save(out / "jellium-surface.energy")


def self_consistent_meta(out: Path) -> None:
    for name in ("scan", "r2scan"):
        if name not in available_functionals():
            continue
        study = jellium_surface((2.0, 3.0, 4.0, 6.0), SurfaceSettings(functional=name))
        print(f"\n### Self-consistent {name} slabs\n")
        print("| r_s | sigma | xc | W (eV) | BV step / bulk (mHa) |")
        print("|---|---|---|---|---|")
        for p in study.points:
            print(f"| {p.rs:g} | {p.mean() * ERG:.1f} | {p.mean('exchange_correlation') * ERG:.1f}"
                  f" | {np.mean(p.work_function) * HARTREE_EV:.3f} | "
                  f"{1e3 * np.mean(p.edge_potential_step):.3f} / {1e3 * p.budd_vannimenus:.3f} |")


def work_functions() -> None:
    study = jellium_surface(tuple(LANG_KOHN_WORK_FUNCTION),
                            SurfaceSettings(functional="lda-wigner"))
    print("\n### Work functions with Wigner correlation against Lang and Kohn (from memory)\n")
    print("| r_s | W (eV) | Lang-Kohn | sigma (erg/cm^2) |")
    print("|---|---|---|---|")
    for p in study.points:
        print(f"| {p.rs:g} | {np.mean(p.work_function) * HARTREE_EV:.3f} | "
              f"{LANG_KOHN_WORK_FUNCTION[p.rs]:.2f} | {p.mean() * ERG:.1f} |")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--output-dir", default="jellium-surface-study")
    out = Path(parser.parse_args().output_dir)
    out.mkdir(parents=True, exist_ok=True)
    convergence(out)
    table(out)
    work_functions()
    self_consistent_meta(out)


if __name__ == "__main__":
    main()
