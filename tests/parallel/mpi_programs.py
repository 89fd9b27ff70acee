"""Programs the MPI tests launch as ``[mpiexec -n N] python mpi_programs.py WHAT OUT.json``.

Not a test module: ``test_mpi_consistency.py`` runs these serially and under
``mpiexec`` and compares what process 0 writes. Every program also checks that
all processes hold the same numbers (the reductions broadcast one result).
"""

from __future__ import annotations

import json
import sys
import warnings

import numpy as np

import pwsolid
from pwsolid.parallel import world

#: Small silicon: 6 Ha, 2x2x2 mesh through Gamma (3 irreducible k-points).
SILICON = dict(cutoff=6.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0),
               energy_tolerance=1e-10, density_tolerance=1e-7)


def ground_state(pseudopotential: str) -> dict:
    comm = world()
    si = pwsolid.diamond(pwsolid.angstrom(5.431), "Si")
    settings = pwsolid.GroundStateSettings(pseudopotentials={"Si": pseudopotential}, **SILICON)
    gs = pwsolid.ground_state(si, settings)
    owned = comm.allgather(list(gs.setup.owned))
    energies = comm.allgather(gs.total_energy)
    return {"processes": comm.size, "total_energy_Ha": gs.total_energy,
            "free_energy_Ha": gs.free_energy, "iterations": gs.iterations,
            "eigenvalues_Ha": np.asarray(gs.eigenvalues).tolist(),
            "density_integral": float(gs.density.mean() * si.volume),
            "density_checksum": float(np.sum(gs.density * np.arange(gs.density.size).reshape(
                gs.density.shape) / gs.density.size)),
            "owned_kpoints": owned, "kpoints": len(gs.kpoints.weights),
            "energies_on_every_process": energies}


def forces() -> dict:
    """Forces on displaced silicon, spin-polarised without symmetry: 16 channels to share."""
    from pwsolid.forces import atomic_forces

    comm = world()
    si = pwsolid.diamond(pwsolid.angstrom(5.431), "Si")
    moved = pwsolid.Crystal(si.lattice, si.species, si.positions + [[0.01, -0.02, 0.015], [0, 0, 0]])
    settings = pwsolid.GroundStateSettings(
        pseudopotentials={"Si": "Si-goedecker-teter-hutter.toml"}, use_symmetry=False,
        spin_polarized=True, **SILICON)
    result = atomic_forces(pwsolid.ground_state(moved, settings))
    return {"processes": comm.size, "forces_Ha_per_bohr": result.cartesian.tolist(),
            "nonlocal_Ha_per_bohr": result.parts["nonlocal"].tolist(),
            "forces_on_every_process": comm.allgather(result.cartesian.tolist())}


def gamma_supercell() -> dict:
    """The cubic 8-atom silicon cell at Gamma: one k-point, so a second process
    shares the bands of the first (pwsolid.parallel.band_group)."""
    comm = world()
    a = pwsolid.angstrom(5.431)
    cell = pwsolid.Crystal(a * np.eye(3), ("Si",) * 8,
                           [[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0],
                            [.25, .25, .25], [.25, .75, .75], [.75, .25, .75], [.75, .75, .25]])
    # 8 Ha: the first Davidson call needs 5 steps, more than the later calls'
    # limit of 4, which only the owner's fresh start allows (the group must follow it)
    settings = pwsolid.GroundStateSettings(
        pseudopotentials={"Si": "Si-goedecker-teter-hutter.toml"}, cutoff=8.0,
        kpoint_mesh=(1, 1, 1), kpoint_shift=(0, 0, 0), energy_tolerance=1e-10,
        density_tolerance=1e-7)
    gs = pwsolid.ground_state(cell, settings)
    return {"processes": comm.size, "total_energy_Ha": gs.total_energy,
            "iterations": gs.iterations, "eigenvalues_Ha": np.asarray(gs.eigenvalues).tolist(),
            "owned_kpoints": comm.allgather(list(gs.setup.owned)),
            "transforms_per_process": comm.allgather(gs.setup.fft.n_transforms),
            "energies_on_every_process": comm.allgather(gs.total_energy)}


def band_path() -> dict:
    """Eigenvalues along a few k-points for a fixed density (spread over the processes)."""
    from pwsolid.scf import bands_at_kpoints, prepare

    comm = world()
    si = pwsolid.diamond(pwsolid.angstrom(5.431), "Si")
    settings = pwsolid.GroundStateSettings(pseudopotentials={"Si": "Si-appelbaum-hamann.toml"},
                                           **SILICON)
    gs = pwsolid.ground_state(si, settings)
    ks = [[0, 0, 0], [0.1, 0, 0.1], [0.25, 0, 0.25], [0.5, 0, 0.5], [0.5, 0.25, 0.75]]
    calls = []
    bands = bands_at_kpoints(prepare(si, settings), gs.density, ks, 8,
                             progress=lambda done, total: calls.append((done, total)))
    return {"processes": comm.size, "bands_Ha": bands.tolist(),
            "bands_on_every_process": comm.allgather(bands.tolist()), "progress": calls}


def volume_scan() -> dict:
    from pwsolid.workflows.equation_of_state import scan_volumes

    comm = world()
    # 5.11 angstrom: near the minimum of this small basis, so no range extension
    si = pwsolid.diamond(pwsolid.angstrom(5.11), "Si")
    settings = pwsolid.GroundStateSettings(
        pseudopotentials={"Si": "Si-appelbaum-hamann.toml"}, cutoff=4.0, kpoint_mesh=(2, 2, 2),
        kpoint_shift=(0, 0, 0), energy_tolerance=1e-9)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")    # a coarse scan; the test compares, not judges
        scan = scan_volumes(si, settings, volume_range=0.06, n_points=5, max_extensions=0)
    mine = [(p.volume, p.energy) for p in scan.points]
    return {"processes": comm.size, "points": mine,
            "points_on_every_process": comm.allgather(mine), "v0": scan.v0,
            "b0_gpa": scan.b0_gpa}


def phonons() -> dict:
    import os
    from pathlib import Path

    from pwsolid.force_constants import make_supercell
    from pwsolid.workflows.phonons import PhononSettings, phonons as run_phonons

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from spring_model import spring_solver

    comm = world()
    # zincblende: two inequivalent atoms, so two displacements to share; a spring
    # model stands in for the SCF (the sharing does not depend on the solver)
    gaas = pwsolid.zincblende(pwsolid.angstrom(5.65), ("Ga", "As"))
    ps = PhononSettings(supercell=(2, 2, 2), dos_mesh=(4, 4, 4), path_points=20)
    sup = make_supercell(gaas, ps.supercell).supercell
    settings = pwsolid.GroundStateSettings(      # the records' fingerprint reads the files
        pseudopotentials={"Ga": "Ga-hartwigsen-goedecker-hutter.toml",
                          "As": "As-hartwigsen-goedecker-hutter.toml"})
    result = run_phonons(gaas, settings, ps, record_dir="records",
                         solver=spring_solver(sup, 5.0))      # nearest neighbours: 4.62 bohr
    freqs = result.frequencies([[0, 0, 0], [0.5, 0, 0.5]]).tolist()
    return {"processes": comm.size, "frequencies": freqs,
            "frequencies_on_every_process": comm.allgather(freqs),
            "computed_by": [h["process"] for h in result.history],
            "records": sorted(os.listdir("records"))}


if __name__ == "__main__":
    what, out = sys.argv[1], sys.argv[2]
    programs = {"volume-scan": volume_scan, "gamma-supercell": gamma_supercell,
                "band-path": band_path, "forces": forces, "phonons": phonons}
    result = programs[what]() if what in programs else ground_state(what)
    if world().rank == 0:
        with open(out, "w") as fh:
            json.dump(result, fh)
