"""SCF checkpoints: everything needed to continue an interrupted run (layer 4).

A checkpoint holds the next input density, the wave functions of every k-point
(serial runs), the Pulay history, the SCF history and a fingerprint of the
calculation (cell, atoms, cutoff, grid, k-mesh, functional, occupations and the
content of every pseudopotential file). It is written atomically with a format
version and a checksum (:mod:`pwsolid.safe_files`); a corrupted checkpoint, or one
made for a different calculation, is refused with a message naming what differs,
never silently used.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import numpy as np

from .errors import InputError
from .safe_files import read_archive, write_archive

__all__ = ["CHECKPOINT_FORMAT", "fingerprint", "save_checkpoint", "load_checkpoint"]

CHECKPOINT_FORMAT = "pwsolid.scf-checkpoint/1"


def fingerprint(setup) -> dict:
    """What identifies a calculation: two runs with equal fingerprints are the same SCF."""
    s = setup.settings
    pseudo = {}
    for species, pp in sorted(setup.pseudopotentials.items()):
        path = pp.source_file
        text = Path(path).read_bytes() if path is not None and Path(path).is_file() else b""
        pseudo[species] = hashlib.sha256(text).hexdigest()[:16]
    return {
        "lattice_bohr": np.round(setup.crystal.lattice, 10).tolist(),
        "species": list(setup.crystal.species),
        "fractional_positions": np.round(setup.crystal.positions, 10).tolist(),
        "cutoff_Ha": s.cutoff,
        "fft_grid": list(setup.grid_shape),
        "kpoint_mesh": list(s.kpoint_mesh),
        "kpoint_shift": list(s.kpoint_shift),
        "use_symmetry": bool(s.use_symmetry),
        "functional": str(s.as_dict()["functional"]),
        "smearing": [s.smearing, s.smearing_width, s.smearing_order],
        "bands": setup.n_bands,
        "background_electrons": s.background_electrons,
        "spin": [bool(s.spin_polarized), s.fixed_moment],
        "pseudopotentials": pseudo,
    }


def save_checkpoint(path, setup, state, mixer) -> None:
    """Write the SCF state after a completed iteration (``state.density`` is the next input)."""
    inputs, residuals = mixer.history_arrays()
    arrays = {"density": np.asarray(state.density, float), "mixer_inputs": inputs,
              "mixer_residuals": residuals}
    if setup.comm.size == 1 and state.wavefunctions is not None:
        for ik, c in enumerate(state.wavefunctions):
            arrays[f"wavefunctions_{ik}"] = c
        if state.eigenvalues is not None:
            arrays["eigenvalues"] = state.eigenvalues
    meta = {"fingerprint": fingerprint(setup), "iteration": state.iteration,
            "applications": state.applications, "history": state.history}
    write_archive(path, CHECKPOINT_FORMAT, arrays, json.loads(json.dumps(meta, default=float)))


def load_checkpoint(path, setup) -> tuple[dict, dict]:
    """Read and check a checkpoint for ``setup``; returns (arrays, metadata).

    Raises
    ------
    InputError
        For a corrupted file, or one whose fingerprint differs from this
        calculation (the message lists the differing items).
    """
    arrays, meta = read_archive(path, CHECKPOINT_FORMAT, "checkpoint")
    mine = json.loads(json.dumps(fingerprint(setup)))
    theirs = meta.get("fingerprint", {})
    differ = [k for k in mine if mine[k] != theirs.get(k)]
    if differ:
        raise InputError(
            f"the checkpoint belongs to a different calculation ({', '.join(differ)} differ); "
            "delete it or pass --fresh to start over", source=str(path))
    expected = tuple(setup.grid_shape) if setup.n_spin == 1 else (2, *setup.grid_shape)
    if arrays["density"].shape != expected:
        raise InputError("the checkpoint's density is on another grid", source=str(path))
    return arrays, meta
