"""Silicon phonons against neutron and Raman data: convergence with cutoff and supercell.

Not collected by pytest (tens of minutes on a shared machine). Run as

    python tests/validation/silicon_phonons_study.py [--cutoffs 8 12 16] [--supercells 2]
           [--mesh 4] [--lattice 5.386] [--pseudopotential FILE] [--json out.json]

and record the printed table (with the date and the settings) in the README.
Reference frequencies: inelastic neutron scattering (G. Nilsson and G. Nelin, Phys. Rev.
B 6, 3777 (1972); G. Dolling (1963)) and the Raman line at Gamma (common practice), as
tabulated in shared/REFERENCES.md section 11a (recalled values, from memory). The
lattice constant defaults to the LDA equilibrium of the bundled Goedecker-Teter-Hutter
file (5.386 angstrom, README table), where a frozen-phonon calculation belongs.
"""

from __future__ import annotations

import argparse
import json
import resource
import time

import numpy as np

import pwsolid
from pwsolid.workflows.phonons import PhononSettings, phonons

#: (label, branch index in ascending order at that point, THz) from REFERENCES.md 11a
REFERENCE = (("Γ", 3, "LTO", 15.53), ("X", 0, "TA", 4.49), ("X", 2, "LA=LO", 12.32),
             ("X", 4, "TO", 13.90), ("L", 0, "TA", 3.43), ("L", 2, "LA", 11.35),
             ("L", 3, "LO", 12.60), ("L", 4, "TO", 14.68))


def compare(result) -> list[tuple]:
    rows = []
    for label, branch, name, measured in REFERENCE:
        got = result.special_points[label][branch]
        rows.append((label, name, got, measured, 100 * (got - measured) / measured))
    return rows


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--cutoffs", type=float, nargs="+", default=[8.0, 12.0, 16.0])
    p.add_argument("--supercells", type=int, nargs="+", default=[2])
    p.add_argument("--mesh", type=int, default=4, help="primitive-cell k-mesh (Gamma-centred)")
    p.add_argument("--lattice", type=float, default=5.386, help="angstrom")
    p.add_argument("--pseudopotential", default=None,
                   help="Si file (default: the bundled default, Goedecker-Teter-Hutter)")
    p.add_argument("--json")
    args = p.parse_args(argv)
    si = pwsolid.diamond(pwsolid.angstrom(args.lattice), "Si")
    table = []
    for n in args.supercells:
        for cutoff in args.cutoffs:
            settings = pwsolid.GroundStateSettings(
                pseudopotentials={"Si": args.pseudopotential} if args.pseudopotential else {},
                cutoff=cutoff, kpoint_mesh=(args.mesh,) * 3, kpoint_shift=(0, 0, 0),
                energy_tolerance=1e-10, density_tolerance=1e-8)
            t0, c0 = time.perf_counter(), time.process_time()
            result = phonons(si, settings, PhononSettings(supercell=(n, n, n), dos_mesh=(8, 8, 8)))
            wall, cpu = time.perf_counter() - t0, time.process_time() - c0
            rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
            rows = compare(result)
            entry = {"supercell_atoms": 2 * n ** 3, "cutoff_Ha": cutoff,
                     "supercell_kpoint_mesh": list(result.supercell_kpoint_mesh),
                     "displacements": len(result.displacements), "wall_s": wall, "cpu_s": cpu,
                     "peak_memory_MiB": rss, "checks": result.checks,
                     "rows": [list(r) for r in rows]}
            table.append(entry)
            print(f"\n{2 * n ** 3} atoms, cutoff {cutoff:g} Ha, supercell k-mesh "
                  f"{result.supercell_kpoint_mesh}, {len(result.displacements)} displacement(s), "
                  f"{wall:.0f} s wall, {cpu:.0f} s CPU, peak {rss:.0f} MiB; ASR violation "
                  f"{result.checks['acoustic_sum_violation_before']:.1e}, "
                  f"largest net force {result.checks['largest_net_force_Ha_per_bohr']:.1e} Ha/bohr")
            for label, name, got, measured, dev in rows:
                print(f"  {label:<2} {name:<6} {got:7.2f} THz   measured {measured:6.2f}   "
                      f"{dev:+5.1f} %")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(table, fh, indent=1)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
