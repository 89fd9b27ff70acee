"""Benchmark: SCF iteration counts of simple metals with the default settings.

Run:  python benchmarks/metals_scf.py

Aluminium (1 atom, 8 Ha, 12x12x12 mesh, cold smearing) and a 1x1x8 aluminium
supercell (8 atoms, 12x12x2 mesh) to 1e-8 Ha, Kerker-preconditioned Pulay mixing
chosen automatically. Targets (issue "Simple metals"): at most 15 SCF iterations for
the primitive cell and at most 25 for the long supercell.
"""

from __future__ import annotations

import time

import pwsolid


def main() -> list[dict]:
    al = pwsolid.face_centred_cubic(pwsolid.angstrom(4.05), "Al")
    cases = [("Al fcc, 12x12x12", al, (12, 12, 12), 15),
             ("Al 1x1x8 supercell, 12x12x2", al.supercell((1, 1, 8)), (12, 12, 2), 25)]
    rows = []
    for name, crystal, mesh, limit in cases:
        t0 = time.perf_counter()
        gs = pwsolid.ground_state(crystal, pwsolid.GroundStateSettings(
            cutoff=8.0, kpoint_mesh=mesh, smearing="cold", energy_tolerance=1e-8))
        rows.append({"case": name, "converged": gs.converged, "scf_iterations": gs.iterations,
                     "target": limit, "met": gs.converged and gs.iterations <= limit,
                     "hamiltonian_applications_per_band": gs.applications_per_band,
                     "wall_seconds": time.perf_counter() - t0})
    print(f"{'case':<30} {'iterations':>10} {'target':>7} {'H/band':>7} {'seconds':>8}")
    for r in rows:
        print(f"{r['case']:<30} {r['scf_iterations']:>10} {'<= ' + str(r['target']):>7} "
              f"{r['hamiltonian_applications_per_band']:>7.1f} {r['wall_seconds']:>8.1f}  "
              f"{'met' if r['met'] else 'MISSED'}")
    return rows


if __name__ == "__main__":
    main()
