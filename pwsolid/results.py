"""Result documents (JSON) (layer 6).

The JSON schema is versioned by ``RESULT_SCHEMA`` and documented in the README.
Files are written atomically (temporary file in the same directory, fsync,
rename) so that a crash never leaves half a document. Density files belong to
the one store (:mod:`pwsolid.store`); ``save_density`` and ``load_density`` are
re-exported here.
"""

from __future__ import annotations

import json
import platform
from pathlib import Path

import numpy as np

from ._version import __version__
from .safe_files import atomic_write_bytes
from .scf import GroundState
from .store import RESULT_SCHEMA, load_density, plain_value, save_density
from .units import BOHR_ANGSTROM, HARTREE_EV

__all__ = ["RESULT_SCHEMA", "ground_state_document", "write_json",
           "save_density", "load_density", "atomic_write_bytes"]


def _file_sha256(path) -> str | None:
    """SHA-256 of a pseudopotential file's bytes: which file exactly a result used."""
    import hashlib
    try:
        return hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except (OSError, TypeError):
        return None


def _ev(x):
    return None if x is None else float(x) * HARTREE_EV


def ground_state_document(gs: GroundState, *, input_echo: dict | None = None,
                          title: str = "", forces=None, stress=None) -> dict:
    """The JSON-ready result document of a ground state (schema ``RESULT_SCHEMA``).

    ``forces`` (:class:`pwsolid.forces.AtomicForces`) and ``stress``
    (:class:`pwsolid.stress.StressTensor`), when given, become the ``forces`` and
    ``stress`` blocks; otherwise those blocks are ``None``.
    """
    setup = gs.setup
    kf = setup.kpoints.fractional
    nk = len(kf)
    energies = gs.energy.as_dict()
    doc = {
        "schema": RESULT_SCHEMA,
        "title": title,
        "program": {"name": "pwsolid", "version": __version__,
                    "python": platform.python_version()},
        "converged": bool(gs.converged),
        "messages": list(gs.messages),
        "energy": {
            "total_Ha": energies["total_Ha"],
            "total_eV": energies["total_eV"],
            "per_atom_eV": energies["total_eV"] / max(gs.crystal.n_atoms, 1),
            "free_energy_Ha": gs.free_energy,
            "free_energy_eV": gs.free_energy * HARTREE_EV,
            "zero_width_estimate_Ha": gs.zero_width_energy,
            "zero_width_estimate_eV": gs.zero_width_energy * HARTREE_EV,
            "terms_Ha": energies["terms_Ha"],
            "terms_eV": energies["terms_eV"],
        },
        "band_edges": _band_edges(gs, kf),
        "occupation_scheme": _occupation_block(gs),
        "scf": {
            "iterations": gs.iterations,
            "hamiltonian_applications_per_band": gs.applications_per_band,
            "history": gs.history,
        },
        "kpoints": {
            "mesh": list(setup.kpoints.mesh),
            "shift": list(setup.kpoints.shift),
            "fractional": kf.tolist(),
            "weights": setup.kpoints.weights.tolist(),
            "full_mesh_size": int(setup.kpoints.full_mesh_size),
        },
        "eigenvalues_eV": (gs.eigenvalues[:nk] * HARTREE_EV).tolist(),
        "occupations": _occupations(gs)[:nk].tolist(),
        "spin": _spin_block(gs, nk),
        "basis": {
            "cutoff_Ha": setup.settings.cutoff,
            "plane_waves_per_kpoint": [b.size for b in setup.bases],
            "fft_grid": list(setup.grid_shape),
        },
        "crystal": {
            **gs.crystal.as_dict(),
            "lattice_vectors_angstrom": (gs.crystal.lattice * BOHR_ANGSTROM).tolist(),
            "volume_angstrom3": gs.crystal.volume * BOHR_ANGSTROM ** 3,
            "space_group": setup.symmetry.international_symbol,
            "space_group_number": int(setup.symmetry.space_group_number),
            "symmetry_operations_used": int(setup.kpoints.operations.n_ops
                                            if setup.kpoints.operations is not None else 1),
        },
        "electrons_per_cell": setup.n_electrons,
        "bands": setup.n_bands,
        "pseudopotentials": {
            s: {"file": str(pp.source_file), "file_sha256": _file_sha256(pp.source_file),
                "form": pp.form, "valence": pp.valence,
                "reference": pp.reference, "status": pp.status,
                "partial_core": (None if pp.partial_core is None else
                                 {"charge": pp.partial_core.charge,
                                  "radius_bohr": pp.partial_core.radius})}
            for s, pp in setup.pseudopotentials.items()},
        "settings": setup.settings.as_dict(),
        "exchange_correlation": _functional_block(setup.functional),
        "forces": None if forces is None else forces.as_document(),
        "stress": None if stress is None else stress.as_document(),
        "input": input_echo,
        "timing": {"wall_seconds": gs.wall_seconds, "fft_seconds": gs.fft_seconds,
                   "subspace_blas_seconds": gs.blas_seconds},
        "units": {"energy": "Ha and eV as suffixed", "length": "bohr unless suffixed",
                  "kpoints": "fractional coordinates of the reciprocal lattice vectors"},
    }
    return doc


def _functional_block(functional) -> dict:
    """Which functional, and from where (a Libxc one names the Libxc version)."""
    return {"name": getattr(functional, "name", str(functional)),
            "description": getattr(functional, "description", ""),
            "origin": getattr(functional, "origin", "")}


def _band_edges(gs: GroundState, kf: np.ndarray) -> dict | None:
    edges = gs.band_edges
    if edges is None:
        return None
    return {
        "highest_occupied_eV": _ev(edges.highest_occupied),
        "lowest_unoccupied_eV": _ev(edges.lowest_unoccupied),
        "gap_eV": _ev(edges.gap),
        "gap_kind": None if edges.gap is None else ("direct" if edges.is_direct else "indirect"),
        "highest_occupied_kpoint": kf[edges.highest_occupied_k % len(kf)].tolist(),
        "lowest_unoccupied_kpoint": (None if edges.lowest_unoccupied_k is None
                                     else kf[edges.lowest_unoccupied_k % len(kf)].tolist()),
        "note": "extrema over the k-points of the mesh only",
    }


def _occupations(gs: GroundState) -> np.ndarray:
    """Electrons per state as the documents report them: 0..2 per spatial orbital without
    spin polarisation, 0..1 per spin-orbital with it (the SCF keeps 0..2 in every channel
    and carries the 1/2 in the channel weights), so that sum_k w_k sum_n f_nk over the
    channels is the electron count in both cases."""
    occ = np.asarray(gs.occupations, float)
    return occ if gs.spin_densities is None else 0.5 * occ


def _spin_block(gs: GroundState, nk: int) -> dict:
    """Spin-polarised runs: the moments and the down-spin eigenvalues (eigenvalues_eV and
    occupations above are then the up-spin channel; occupations per spin-orbital, 0..1)."""
    if gs.spin_densities is None:
        return {"polarized": False}
    return {
        "polarized": True,
        "occupation_convention": "electrons per spin-orbital (0 to 1) in each spin channel",
        "magnetization": gs.magnetization,
        "absolute_magnetization": gs.absolute_magnetization,
        "fixed_moment": gs.settings.fixed_moment,
        "eigenvalues_down_eV": (gs.eigenvalues[nk:] * HARTREE_EV).tolist(),
        "occupations_down": _occupations(gs)[nk:].tolist(),
    }


def _occupation_block(gs: GroundState) -> dict:
    s = gs.settings
    if gs.smearing is None:
        return {"scheme": "fixed (Aufbau)", "fermi_level_eV": None}
    return {
        "scheme": s.smearing,
        "methfessel_paxton_order": s.smearing_order if s.smearing == "methfessel-paxton" else None,
        "width_Ha": s.smearing_width,
        "width_eV": s.smearing_width * HARTREE_EV,
        "fermi_level_Ha": gs.smearing.fermi_level,
        "fermi_level_eV": gs.smearing.fermi_level * HARTREE_EV,
        "entropy_term_Ha": gs.smearing.entropy_term,
        "electron_count": gs.smearing.electron_count,
    }


def write_json(path, document: dict) -> None:
    """Write a JSON document atomically (NaN and infinities refused)."""
    text = json.dumps(document, indent=2, allow_nan=False, default=plain_value)
    atomic_write_bytes(path, (text + "\n").encode())
