"""Benchmark: cost of the forces (and the stress, once it exists) against the SCF they follow.

Run:  python benchmarks/forces_stress_cost.py [--atoms 2|8|64] [--cutoff 12] [--mesh 4]
                                              [--json out.json]

Silicon with the separable default pseudopotential (Goedecker-Teter-Hutter), every
atom displaced at random by 0.05 bohr so that the forces are not zero by symmetry
(the symmetry search then finds none, as in a relaxation step). ``--atoms 2`` is
the primitive cell on a ``--mesh`` half-offset mesh; 8 and 64 are the cubic cell
and its 2x2x2 supercell at Gamma. Reports, from one run (these machines are shared
and noisy: read the ratio, not the seconds): SCF wall time, time of
``atomic_forces`` (and of ``stress_tensor`` when ``pwsolid.stress`` exists), and
their ratio to the SCF.

Target (issue 16): forces and stress together at most 15 % of the SCF.
"""

from __future__ import annotations

import argparse
import json
import time

import numpy as np

import pwsolid
from pwsolid.forces import atomic_forces
from pwsolid.safe_files import atomic_write_bytes


def _silicon(atoms: int) -> pwsolid.Crystal:
    a = pwsolid.angstrom(5.431)
    if atoms == 2:
        crystal = pwsolid.diamond(a, "Si")
    else:
        cubic = pwsolid.Crystal(a * np.eye(3), ("Si",) * 8,
                                [[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0],
                                 [.25, .25, .25], [.25, .75, .75], [.75, .25, .75],
                                 [.75, .75, .25]])
        crystal = cubic if atoms == 8 else cubic.supercell((2, 2, 2))
    rng = np.random.default_rng(16)
    cart = crystal.cartesian_positions + 0.05 * rng.standard_normal((crystal.n_atoms, 3))
    return pwsolid.Crystal(crystal.lattice, crystal.species,
                           cart @ np.linalg.inv(crystal.lattice))


def _timed(function, *args):
    t0 = time.perf_counter()
    out = function(*args)
    return out, time.perf_counter() - t0


def main(argv=None) -> dict:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--atoms", type=int, choices=(2, 8, 64), default=2)
    ap.add_argument("--cutoff", type=float, default=12.0, help="cutoff in Ha")
    ap.add_argument("--mesh", type=int, default=4, help="k-mesh divisions (2 atoms only)")
    ap.add_argument("--json", help="also write the figures to this JSON file")
    args = ap.parse_args(argv)

    crystal = _silicon(args.atoms)
    mesh = (args.mesh,) * 3 if args.atoms == 2 else (1, 1, 1)
    shift = (0.5, 0.5, 0.5) if args.atoms == 2 else (0.0, 0.0, 0.0)
    settings = pwsolid.GroundStateSettings(cutoff=args.cutoff, kpoint_mesh=mesh,
                                           kpoint_shift=shift)
    gs = pwsolid.ground_state(crystal, settings)
    forces, t_forces = _timed(atomic_forces, gs)
    figures = {"atoms": crystal.n_atoms, "cutoff_Ha": args.cutoff, "kpoints": len(gs.kpoints.weights),
               "scf_converged": gs.converged, "scf_iterations": gs.iterations,
               "scf_seconds": gs.wall_seconds,
               "forces_seconds": t_forces, "forces_share_of_scf": t_forces / gs.wall_seconds,
               "largest_force_Ha_per_bohr": forces.largest,
               "net_force_Ha_per_bohr": float(np.linalg.norm(forces.net))}
    try:
        from pwsolid.stress import stress_tensor
    except ImportError:
        stress_tensor = None
    if stress_tensor is not None:
        _, t_stress = _timed(stress_tensor, gs)
        figures["stress_seconds"] = t_stress
        figures["stress_share_of_scf"] = t_stress / gs.wall_seconds
    total = figures["forces_seconds"] + figures.get("stress_seconds", 0.0)
    figures["forces_and_stress_share_of_scf"] = total / gs.wall_seconds
    print(f"Si, {crystal.n_atoms} atoms, {args.cutoff:g} Ha, {figures['kpoints']} k-points, "
          f"{gs.iterations} SCF iterations{'' if gs.converged else ' (not converged)'}")
    print(f"  SCF           {gs.wall_seconds:9.3f} s")
    print(f"  forces        {t_forces:9.3f} s  ({100 * figures['forces_share_of_scf']:.2f} % of the SCF)")
    if "stress_seconds" in figures:
        print(f"  stress        {figures['stress_seconds']:9.3f} s  "
              f"({100 * figures['stress_share_of_scf']:.2f} % of the SCF)")
    print(f"  together      {100 * figures['forces_and_stress_share_of_scf']:.2f} % of the SCF "
          "(target: at most 15 %)")
    if args.json:
        atomic_write_bytes(args.json, json.dumps(figures, indent=2).encode())
    return figures


if __name__ == "__main__":
    main()
