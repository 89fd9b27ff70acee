"""Benchmark: does warm-starting an equation-of-state scan pay?

Run:  python benchmarks/eos_warm_start.py [--cutoff 15] [--mesh 8]

A 7-point silicon scan (default nonlocal pseudopotential) with warm starts from the
neighbouring points (density extrapolated in volume from up to three, orbitals from
two), against the same 7 ground states started cold, both to the same tolerances.
Target (issue "Lattice constants and bulk moduli"): warm / cold wall time at most
0.6. Also reports the SCF iteration and Hamiltonian-application totals (counts are
steadier than seconds on a shared machine) and the largest energy difference.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import pwsolid
from pwsolid.workflows.equation_of_state import _scf_solver, scan_volumes


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cutoff", type=float, default=15.0)
    ap.add_argument("--mesh", type=int, default=8)
    args = ap.parse_args(argv)
    si = pwsolid.diamond(pwsolid.angstrom(5.40), "Si")
    settings = pwsolid.GroundStateSettings(cutoff=args.cutoff, kpoint_mesh=(args.mesh,) * 3)
    warm_applications = []

    def counting_solver(crystal, settings, warm_start):
        outcome = _scf_solver(crystal, settings, warm_start)
        warm_applications.append(outcome.hamiltonian_applications)
        return outcome

    t0 = time.perf_counter()
    scan = scan_volumes(si, settings, volume_range=0.06, n_points=7, solver=counting_solver)
    warm = time.perf_counter() - t0
    warm_iterations = sum(p.iterations for p in scan.points)
    t0 = time.perf_counter()
    cold_iterations = cold_applications = 0
    energy_difference = 0.0
    for p in scan.points:
        crystal = si.scaled((p.volume / si.volume) ** (1 / 3))
        cold_run = pwsolid.ground_state(crystal, settings)
        cold_iterations += cold_run.iterations
        cold_applications += cold_run.hamiltonian_applications
        energy_difference = max(energy_difference, abs(cold_run.total_energy - p.energy))
    cold = time.perf_counter() - t0
    report = {"points": len(scan.points), "warm_seconds": warm, "cold_seconds": cold,
              "ratio": warm / cold, "warm_iterations": warm_iterations,
              "cold_iterations": cold_iterations,
              "iteration_ratio": warm_iterations / cold_iterations,
              # H applications: the bulk of the work, and steadier than seconds on a
              # shared machine (the ratio of these is what to compare between runs)
              "warm_h_applications": sum(warm_applications),
              "cold_h_applications": cold_applications,
              "h_application_ratio": sum(warm_applications) / cold_applications,
              # both runs stop at the same tolerances (1e-8 Ha in energy change)
              "max_energy_difference_Ha": energy_difference,
              "a0_angstrom": scan.lattice_constants["a"] * pwsolid.BOHR_ANGSTROM,
              "b0_GPa": scan.b0_gpa}
    for k, v in report.items():
        print(f"{k:<18} {v:.4g}" if isinstance(v, float) else f"{k:<18} {v}")
    print(f"target warm/cold <= 0.6: {'met' if report['ratio'] <= 0.6 else 'MISSED'}")
    return report


if __name__ == "__main__":
    main()
