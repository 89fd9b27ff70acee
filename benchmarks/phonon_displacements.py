"""Benchmark: a phonon run's displacements on one and on two MPI processes.

Run:  python benchmarks/phonon_displacements.py [--system gaas|si] [--supercell 2]
                                               [--cutoff 8] [--mesh 4] [--processes 1,2]
                                               [--json out.json]

Each process count runs the whole workflow (:func:`pwsolid.workflows.phonons.phonons`)
in a fresh Python process (under ``mpiexec -n P`` for P > 1) and reports its wall
time, the number of displacements and supercell atoms, the time per displacement
and the peak memory of process 0. Zincblende GaAs has two inequivalent atoms, so
two displacements of equal cost: the case for the speed-up (issue 19 asks two
processes to be at least 1.8x faster than one). Silicon needs a single
displacement (its site symmetry makes -u and the other directions), so it gives
the time and memory of one supercell, not a speed-up.

These machines are shared and noisy: read the ratio from one run, not the seconds.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

PP = {"Ga": "Ga-hartwigsen-goedecker-hutter.toml", "As": "As-hartwigsen-goedecker-hutter.toml"}


def worker(args) -> dict:
    import pwsolid
    from pwsolid.parallel import world
    from pwsolid.workflows.phonons import PhononSettings, phonons

    if args.system == "gaas":
        crystal = pwsolid.zincblende(pwsolid.angstrom(5.65), ("Ga", "As"))
        pps = PP
    else:
        crystal = pwsolid.diamond(pwsolid.angstrom(5.386), "Si")
        pps = {}
    settings = pwsolid.GroundStateSettings(pseudopotentials=pps, cutoff=args.cutoff,
                                           kpoint_mesh=(args.mesh,) * 3,
                                           kpoint_shift=(0, 0, 0), energy_tolerance=1e-9)
    n = args.supercell
    t0 = time.perf_counter()
    result = phonons(crystal, settings, PhononSettings(supercell=(n, n, n), dos_mesh=(8, 8, 8)))
    wall = time.perf_counter() - t0
    return {"processes": world().size, "wall_s": wall,
            "displacements": len(result.displacements),
            "supercell_atoms": result.force_constants.supercell.supercell.n_atoms,
            "supercell_kpoint_mesh": list(result.supercell_kpoint_mesh),
            "seconds_per_displacement": [h["seconds"] for h in result.history],
            "computed_by": [h["process"] for h in result.history],
            "peak_memory_MiB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
            "gamma_THz": result.special_points["Γ"]}


def _launcher() -> str | None:
    beside = Path(sys.executable).parent / "mpiexec"
    return str(beside) if beside.exists() else shutil.which("mpiexec")


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--system", choices=("gaas", "si"), default="gaas")
    p.add_argument("--supercell", type=int, default=2)
    p.add_argument("--cutoff", type=float, default=8.0)
    p.add_argument("--mesh", type=int, default=4)
    p.add_argument("--processes", default="1,2")
    p.add_argument("--json")
    p.add_argument("--worker-output", help=argparse.SUPPRESS)
    args = p.parse_args(argv)
    if args.worker_output:
        from pwsolid.parallel import world

        out = worker(args)
        if world().rank == 0:
            Path(args.worker_output).write_text(json.dumps(out))
        return 0
    rows = []
    common = ["--system", args.system, "--supercell", str(args.supercell), "--cutoff",
              str(args.cutoff), "--mesh", str(args.mesh)]
    with tempfile.TemporaryDirectory() as tmp:
        for count in (int(x) for x in args.processes.split(",")):
            out = Path(tmp) / f"p{count}.json"
            cmd = [sys.executable, __file__, *common, "--worker-output", str(out)]
            if count > 1:
                launcher = _launcher()
                if launcher is None:
                    print(f"{count} processes: skipped (no mpiexec; install the parallel extra)")
                    continue
                cmd = [launcher, "-n", str(count), *cmd]
            subprocess.run(cmd, check=True, env={**os.environ, "PWSOLID_THREADS": "1"})
            rows.append(json.loads(out.read_text()))
    base = rows[0]["wall_s"] if rows else None
    print(f"\nphonons of {args.system}, {args.supercell}x{args.supercell}x{args.supercell} "
          f"supercell, {args.cutoff:g} Ha, primitive mesh {args.mesh}")
    print("| processes | wall (s) | speed-up | displacements | supercell atoms | s per displacement"
          " | peak MiB (process 0) |")
    print("|---|---|---|---|---|---|---|")
    for r in rows:
        per = ", ".join(f"{s:.0f}" for s in r["seconds_per_displacement"])
        print(f"| {r['processes']} | {r['wall_s']:.0f} | {base / r['wall_s']:.2f} | "
              f"{r['displacements']} | {r['supercell_atoms']} | {per} | "
              f"{r['peak_memory_MiB']:.0f} |")
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
