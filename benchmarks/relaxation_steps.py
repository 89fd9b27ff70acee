"""Benchmark: steps and SCF iterations of a relaxation, warm-started against cold.

Run:  python benchmarks/relaxation_steps.py [--cutoff 8] [--mesh 1] [--shift 0.5] [--seed 7 | --seeds 1-5]
                                           [--fixed-tolerance] [--json FILE]

The conventional cubic silicon cell (8 atoms, 5.43 angstrom) with every atom moved
by 0.1 bohr in a random direction is relaxed (positions, symmetry not imposed)
to a largest force of 1e-4 Ha/bohr, once with every SCF started from the previous
step's density and orbitals and once with every SCF started from scratch.
Targets (issue 16): at most 10 moves; the warm-started steps need at most 40 % of
the SCF iterations of a cold start on average. Reports moves, SCF iterations per
step (the mean excludes the first, which is cold in both runs) and the ratio, with
wall seconds for orientation only (shared machine). Both runs use the same SCF
tolerances per step: loosened while the forces are far above the threshold (the
default), or the settings' own throughout with --fixed-tolerance.

Measured (2 shared cores, one run each; the defaults: 8 Ha, one k-point at the
half-offset corner, which avoids the 8-atom cell's degenerate levels at Gamma), on
2026-12-05. Warm starts carry the density along with the moved atoms (superposed
pseudo-atom densities, bonding density fitted over up to five earlier structures;
pwsolid.warm_start); the SCF of this insulator mixes with Resta's model dielectric
function at full weight (the default since then), and the loosened tolerances are an
energy change of 0.03 bohr x F and a density residual of 0.1 F for the last largest
force F (pwsolid.workflows.relaxation_evaluation):

====================================  =====  ===============================  =====
run                                   moves  SCF iterations, steps 0..8       mean*
====================================  =====  ===============================  =====
warm, loosened early tolerances         8    12 3 2 2 2 3 3 2 5               2.75
cold, loosened early tolerances         8    12 7 6 6 7 7 7 7 10              7.125
warm, --fixed-tolerance                 8    12 9 8 7 7 7 7 5 4               6.75
cold, --fixed-tolerance                 8    12 12 12 11 11 11 10 10 10       10.875
====================================  =====  ===============================  =====

(*) steps 1..8. Warm / cold: 0.39 (loosened, the default: issue 16's 40 % target is
met, and its 10-move target), 0.62 (fixed tolerances). Before: 0.54 and 0.57 with 5.5
and 7.0 warm iterations per step (benchmarks/README.md, "Warm-started relaxation steps").

Since then (2026-12-05): confirmations carry the SCF on, early density tolerance 0.15 F
capped at 2e-3; seed 7 ratio 0.375, mean over --seeds 1-5 0.373 (was 0.422); per-seed
figures in benchmarks/README.md ("Over several displacements").
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

import pwsolid
from pwsolid.crystal import Crystal
from pwsolid.workflows.relaxation import RelaxationSettings, relax_structure

#: Fractional positions of the 8 atoms of the conventional diamond cell.
DIAMOND_CUBIC = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0],
                          [0.25, 0.25, 0.25], [0.25, 0.75, 0.75], [0.75, 0.25, 0.75],
                          [0.75, 0.75, 0.25]])


def displaced_silicon_cell(amount: float = 0.1, seed: int = 7) -> Crystal:
    """Cubic 8-atom silicon cell with each atom moved by ``amount`` bohr at random."""
    a = pwsolid.angstrom(5.43)
    rng = np.random.default_rng(seed)
    shift = rng.normal(size=(8, 3))
    shift *= amount / np.linalg.norm(shift, axis=1)[:, None]
    cart = DIAMOND_CUBIC * a + shift
    return Crystal(a * np.eye(3), ["Si"] * 8, cart / a)


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cutoff", type=float, default=8.0)
    ap.add_argument("--mesh", type=int, default=1)
    ap.add_argument("--shift", type=float, default=0.5, help="k-mesh shift, 0 or 0.5")
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--seeds", help="run several displacements, e.g. 1-5 or 1,3,7, and "
                                    "report each and the mean warm/cold ratio")
    ap.add_argument("--fixed-tolerance", action="store_true",
                    help="every SCF at the settings' tolerances (no loosening of early steps)")
    ap.add_argument("--json", help="also write the figures to this file")
    args = ap.parse_args(argv)
    if args.seeds:
        return _over_seeds(args)
    settings = pwsolid.GroundStateSettings(cutoff=args.cutoff, kpoint_mesh=(args.mesh,) * 3,
                                           kpoint_shift=(args.shift,) * 3)
    start = displaced_silicon_cell(seed=args.seed)
    report = {"command": f"python benchmarks/relaxation_steps.py --cutoff {args.cutoff:g} "
                         f"--mesh {args.mesh} --shift {args.shift:g} --seed {args.seed}"
                         + (" --fixed-tolerance" if args.fixed_tolerance else "")}
    finals = {}
    for label, warm in (("warm", True), ("cold", False)):
        relax = RelaxationSettings(moves="positions", force_threshold=1e-4, max_steps=30,
                                   keep_symmetry=False, warm_start=warm,
                                   adaptive_scf_tolerance=not args.fixed_tolerance)
        t0 = time.perf_counter()
        res = relax_structure(start, settings, relax, log=print)
        iterations = [s["scf_iterations"] for s in res.steps]
        finals[label] = res.crystal
        report[label] = {"converged": res.converged, "moves": res.n_moves,
                         "final_force_Ha_per_bohr": res.final["largest_force_Ha_per_bohr"],
                         "scf_iterations": iterations,
                         "mean_iterations_after_first": float(np.mean(iterations[1:]))
                         if len(iterations) > 1 else None,
                         "seconds": time.perf_counter() - t0}
    d = finals["warm"].cartesian_positions - finals["cold"].cartesian_positions
    report["warm_minus_cold_largest_position_bohr"] = float(np.abs(d).max())
    w, c = report["warm"], report["cold"]
    if w["mean_iterations_after_first"] and c["mean_iterations_after_first"]:
        report["warm_over_cold_iterations"] = (w["mean_iterations_after_first"]
                                               / c["mean_iterations_after_first"])
    print(json.dumps(report, indent=1))
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(report, fh, indent=1)
    return report


def _seed_list(text: str) -> list[int]:
    """``"1-5"`` or ``"1,3,7"`` as a list of seeds."""
    if "-" in text:
        lo, hi = (int(t) for t in text.split("-"))
        return list(range(lo, hi + 1))
    return [int(t) for t in text.split(",")]


def _over_seeds(args) -> dict:
    """One relaxation pair per seed; each seed's figures and the mean ratio."""
    runs = {}
    for seed in _seed_list(args.seeds):
        runs[seed] = main(_base_argv(args) + ["--seed", str(seed)])
    ratios = [r.get("warm_over_cold_iterations") for r in runs.values()]
    rows = [(seed, r["warm"]["moves"], r["cold"]["moves"], r["warm"]["scf_iterations"],
             r["cold"]["scf_iterations"], r.get("warm_over_cold_iterations"))
            for seed, r in runs.items()]
    report = {"seeds": {str(k): v for k, v in runs.items()},
              "mean_warm_over_cold": float(np.mean(ratios)) if None not in ratios else None}
    print("seed  moves warm/cold  ratio  |R_warm-R_cold| bohr  SCF iterations warm | cold")
    for seed, mw, mc, iw, ic, q in rows:
        dr = runs[seed]["warm_minus_cold_largest_position_bohr"]
        print(f"{seed:>4}  {mw:>5}/{mc:<5}  {q:.3f}  {dr:.1e}  {' '.join(map(str, iw))} | "
              f"{' '.join(map(str, ic))}")
    print(f"mean warm/cold over seeds: {report['mean_warm_over_cold']:.3f}")
    if args.json:
        with open(args.json, "w") as fh:
            json.dump(report, fh, indent=1)
    return report


def _base_argv(args) -> list[str]:
    out = ["--cutoff", str(args.cutoff), "--mesh", str(args.mesh), "--shift", str(args.shift)]
    return out + (["--fixed-tolerance"] if args.fixed_tolerance else [])


if __name__ == "__main__":
    main()
