"""Benchmark: cost of the analytic stress tensor against the SCF it follows.

Run:  python benchmarks/stress_cost.py [--atoms 2 64] [--cutoff 12] [--json out.json]

Silicon at 12 Ha: the 2-atom primitive cell on a 4x4x4 mesh, and cubic supercells
(8 atoms per conventional cube: 8, 64, ...) at Gamma only. Reports the SCF wall time,
the stress wall time (every part, symmetrised; no Pulay estimate, which costs two
more SCFs) and their ratio from one run (machines here are shared and noisy: read the
ratio). Target (issue 16): forces and stress together at most 15 % of the SCF.
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

import pwsolid
from pwsolid.stress import stress_tensor


def silicon(n_atoms: int) -> tuple[pwsolid.Crystal, tuple[int, int, int]]:
    a = 10.26
    if n_atoms == 2:
        return pwsolid.diamond(a, "Si"), (4, 4, 4)
    repeats = round((n_atoms / 8) ** (1 / 3))
    if 8 * repeats ** 3 != n_atoms:
        raise SystemExit(f"{n_atoms} atoms: use 2 or 8 n^3")
    cube = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])
    frac = np.vstack([cube, cube + 0.25])
    conventional = pwsolid.Crystal(a * np.eye(3), ("Si",) * 8, frac)
    return conventional.supercell((repeats,) * 3), (1, 1, 1)


def measure(n_atoms: int, cutoff: float) -> dict:
    crystal, mesh = silicon(n_atoms)
    settings = pwsolid.GroundStateSettings(cutoff=cutoff, kpoint_mesh=mesh,
                                           kpoint_shift=(0.0, 0.0, 0.0))
    t0 = time.perf_counter()
    gs = pwsolid.ground_state(crystal, settings)
    t_scf = time.perf_counter() - t0
    t0 = time.perf_counter()
    st = stress_tensor(gs)
    t_stress = time.perf_counter() - t0
    return {"atoms": n_atoms, "cutoff_Ha": cutoff, "kpoints": len(gs.setup.bases),
            "scf_iterations": gs.iterations, "scf_seconds": t_scf,
            "stress_seconds": t_stress, "stress_over_scf": t_stress / t_scf,
            "pressure_GPa": st.as_document()["pressure_GPa"]}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--atoms", type=int, nargs="+", default=[2, 64])
    parser.add_argument("--cutoff", type=float, default=12.0)
    parser.add_argument("--json")
    args = parser.parse_args()
    rows = []
    for n in args.atoms:
        row = measure(n, args.cutoff)
        rows.append(row)
        print(f"Si {row['atoms']:3d} atoms, {row['kpoints']} k: SCF {row['scf_seconds']:.1f} s "
              f"({row['scf_iterations']} iterations), stress {row['stress_seconds']:.2f} s, "
              f"ratio {row['stress_over_scf']:.3f}", flush=True)
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(rows, fh, indent=2)


if __name__ == "__main__":
    main()
