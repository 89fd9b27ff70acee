"""Silicon in the quasi-harmonic approximation: zero-point correction and the
negative thermal expansion at low temperature (a study, not collected by pytest).

Runs the static volume scan and the finite-displacement phonons at every volume
(:func:`pwsolid.quasi_harmonic`) at cheap settings, prints the lattice constant,
the linear expansion coefficient and the mode Grueneisen parameters of the
transverse acoustic branches at X and L, and compares with measurement:

* linear expansion of silicon negative between about 20 K and 120 K, its minimum
  near 80 K of about -0.5e-6/K, about 2.6e-6/K at room temperature (handbook
  values; shared/REFERENCES.md 11c, from memory);
* zero-point expansion of a0 roughly 0.1-0.2 % for silicon (11d: 5.431 at room
  temperature against 5.422 zero-point-corrected, which also holds thermal expansion).

Usage (resumes from --out when interrupted):

    nice python tests/validation/silicon_thermal_expansion_study.py \
        [--cutoff 12] [--supercell 2] [--points 7] [--volume-range 0.03] [--out DIR]

Measured figures go to the README (section "Vibrations and temperature").
"""

from __future__ import annotations

import argparse
import json
import time
from pathlib import Path

import numpy as np

import pwsolid
from pwsolid.units import BOHR_ANGSTROM, HA_PER_BOHR3_GPA
from pwsolid.workflows.phonons import PhononSettings
from pwsolid.workflows.thermal_expansion import _default_phonon_solver, quasi_harmonic


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cutoff", type=float, default=12.0, help="Ha")
    ap.add_argument("--kmesh", type=int, default=4, help="primitive-cell k-mesh (Gamma-centred)")
    ap.add_argument("--supercell", type=int, default=2, help="repeats of the fcc primitive cell")
    ap.add_argument("--points", type=int, default=7)
    ap.add_argument("--volume-range", type=float, default=0.03)
    ap.add_argument("--lattice", type=float, default=5.39, help="angstrom, centre of the scan")
    ap.add_argument("--qmesh", type=int, default=16)
    ap.add_argument("--highest", type=float, default=600.0)
    ap.add_argument("--out", default="si-thermal-study")
    ap.add_argument("--gruneisen-only", type=float, default=None, metavar="STEP",
                    help="only the phonons at V (1 - STEP) and V (1 + STEP) and the mode "
                         "Grueneisen parameters at the special points (a cheap convergence check)")
    args = ap.parse_args()
    if args.gruneisen_only:
        return gruneisen_only(args)

    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    crystal = pwsolid.diamond(pwsolid.angstrom(args.lattice), "Si")
    settings = pwsolid.GroundStateSettings(
        cutoff=args.cutoff, kpoint_mesh=(args.kmesh,) * 3, kpoint_shift=(0.0, 0.0, 0.0),
        energy_tolerance=1e-9, density_tolerance=1e-7)
    ps = PhononSettings(supercell=(args.supercell,) * 3, dos_mesh=(8, 8, 8))
    special = {}

    def solver(cell, s, p, **kw):
        r = _default_phonon_solver(cell, s, p, **kw)
        special[round(cell.volume, 6)] = r.special_points
        return r

    t0 = time.perf_counter()
    qha = quasi_harmonic(crystal, settings, ps, temperatures=np.arange(0.0, args.highest + 1, 2.0),
                         volume_range=args.volume_range, n_points=args.points,
                         q_mesh=(args.qmesh,) * 3, record_dir=out / "records",
                         phonon_solver=solver, log=print)
    seconds = time.perf_counter() - t0
    doc = qha.as_document()
    doc["history"] = list(qha.history)
    doc["settings"] = vars(args)
    doc["seconds"] = seconds

    # mode Grueneisen parameters at the special points: ln nu against ln V
    vols = sorted(special)
    lnv = np.log(vols)
    gam = {}
    for label in special[vols[0]]:
        nu = np.array([special[v][label] for v in vols])
        if np.all(nu > 1e-3):
            slope = np.polyfit(lnv, np.log(nu), 1)[0]
            gam[label] = (-slope).tolist()
    doc["mode_gruneisen_special_points"] = gam
    # the same from the three middle volumes only (a check on the volume step)
    inner = vols[len(vols) // 2 - 1: len(vols) // 2 + 2]
    doc["mode_gruneisen_special_points_middle_three"] = {
        label: (-np.polyfit(np.log(inner), np.log([special[v][label] for v in inner]), 1)[0]
                ).tolist() for label in gam}
    doc["special_points_THz_by_volume"] = {f"{v:.4f}": special[v] for v in vols}
    mid = vols[len(vols) // 2]
    doc["special_points_THz_middle_volume"] = special[mid]
    (out / "silicon-qha.json").write_text(json.dumps(doc, indent=1))

    t = qha.temperatures
    a = qha.lattice(qha.volume)["a"] * BOHR_ANGSTROM
    print(f"\nwall time {seconds:.0f} s; supercell {args.supercell}^3 x 2 atoms, cutoff "
          f"{args.cutoff} Ha, {args.points} volumes +-{100 * args.volume_range:g} %")
    print(f"static a0 {qha.lattice(qha.static_fit.v0)['a'] * BOHR_ANGSTROM:.5f} A, "
          f"B0 {qha.static_fit.b0_gpa:.1f} GPa; with zero point "
          f"{qha.lattice(qha.zero_point_fit.v0)['a'] * BOHR_ANGSTROM:.5f} A "
          f"({100 * qha.zero_point_lattice_change:+.3f} %)")
    for temp in (0, 20, 40, 60, 80, 100, 120, 150, 200, 300, 400, 600):
        i = np.flatnonzero(np.isclose(t, temp))
        if i.size:
            i = i[0]
            print(f"  {temp:4d} K  a = {a[i]:.6f} A  alpha = {qha.linear_expansion[i] * 1e6:7.3f}e-6/K"
                  f"  B_T = {qha.bulk_modulus[i] * HA_PER_BOHR3_GPA:.1f} GPa")
    print("negative expansion:", qha.negative_expansion())
    print("Grueneisen at special points:", json.dumps(gam))
    print("  from the middle three volumes:",
          json.dumps(doc["mode_gruneisen_special_points_middle_three"]))
    print("frequencies at the middle volume (THz):", json.dumps(special[mid]))
    print("messages:", *qha.messages, sep="\n  ")


def gruneisen_only(args) -> None:
    """-d ln nu / d ln V at the special points from two volumes around --lattice."""
    base = pwsolid.diamond(pwsolid.angstrom(args.lattice), "Si")
    settings = pwsolid.GroundStateSettings(
        cutoff=args.cutoff, kpoint_mesh=(args.kmesh,) * 3, kpoint_shift=(0.0, 0.0, 0.0),
        energy_tolerance=1e-9, density_tolerance=1e-7)
    ps = PhononSettings(supercell=(args.supercell,) * 3, dos_mesh=(4, 4, 4), path_points=40)
    step = args.gruneisen_only
    t0 = time.perf_counter()
    points = {}
    for f in (1 - step, 1 + step):
        cell = base.scaled(f ** (1 / 3))
        points[f] = pwsolid.phonons(cell, settings, ps, log=print).special_points
    dlnv = np.log((1 + step) / (1 - step))
    lo, hi = points[1 - step], points[1 + step]
    gam = {k: [-(np.log(b) - np.log(a)) / dlnv for a, b in zip(lo[k], hi[k]) if a > 1e-3]
           for k in lo}
    print(f"cutoff {args.cutoff} Ha, mesh {args.kmesh}, supercell {args.supercell}, "
          f"volumes {1 - step:g} and {1 + step:g}: {time.perf_counter() - t0:.0f} s")
    for k in ("X", "L"):
        print(f"  {k}: frequencies {np.round(lo[k], 3).tolist()} -> {np.round(hi[k], 3).tolist()} THz;"
              f" Grueneisen {np.round(gam[k], 2).tolist()}")


if __name__ == "__main__":
    main()
