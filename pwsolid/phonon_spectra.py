"""Phonon frequencies on uniform q-meshes and the phonon density of states (layer 2).

The functions a thermodynamics calculation needs take a
:class:`pwsolid.force_constants.ForceConstants` (or anything with a
``frequencies(q_fractional)`` method returning THz):

* :func:`mesh_frequencies`: the frequencies of every mode on a Gamma-centred
  uniform mesh of wave vectors with their weights (summing to 1), so that a
  Brillouin-zone average of f(nu) is ``sum(weights[:, None] * f(frequencies))``;
* :func:`phonon_dos`: the density of states in states per THz per primitive cell
  (it integrates to 3 n_atoms), by the linear tetrahedron method (default; P. E.
  Bloechl, O. Jepsen and O. K. Andersen, Phys. Rev. B 49, 16223 (1994)) or by
  Gaussian broadening.

The mesh is not reduced by symmetry: each q-point is evaluated, so the weights
are all 1/N; the tetrahedron method needs the full mesh anyway.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .dos import gaussian_dos, tetrahedron_dos
from .errors import InputError

__all__ = ["MeshFrequencies", "mesh_frequencies", "PhononDOS", "phonon_dos", "DOS_METHODS",
           "check_mesh"]

#: Ways to make the phonon DOS.
DOS_METHODS = ("tetrahedron", "gaussian")


@dataclass(frozen=True, eq=False)
class MeshFrequencies:
    """Frequencies on a uniform mesh.

    Attributes
    ----------
    mesh : tuple of 3 int
    q_fractional : ndarray (n_q, 3)
        In units of the primitive reciprocal vectors; q = (i/n1, j/n2, l/n3) in C order.
    weights : ndarray (n_q,)
        Sum to 1.
    frequencies_THz : ndarray (n_q, n_modes)
        Ascending at each q; negative numbers stand for imaginary frequencies.
    reciprocal : ndarray (3, 3), 1/bohr
        Primitive reciprocal vectors (rows).
    """

    mesh: tuple
    q_fractional: np.ndarray
    weights: np.ndarray
    frequencies_THz: np.ndarray
    reciprocal: np.ndarray

    @property
    def n_modes(self) -> int:
        return int(self.frequencies_THz.shape[1])

    @property
    def imaginary_fraction(self) -> float:
        """Weight of modes below -0.01 THz (unstable), per mode."""
        return float(np.sum(self.weights[:, None] * (self.frequencies_THz < -0.01))
                     / self.n_modes)


def check_mesh(mesh, key: str = "phonons.dos_mesh") -> tuple[int, int, int]:
    """Three integers from 1 to 200, or an InputError naming ``key``."""
    try:
        m = tuple(int(x) for x in mesh)
        ok = len(m) == 3 and all(float(x) == int(x) for x in mesh) and all(1 <= x <= 200 for x in m)
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise InputError("a q-mesh must be three integers from 1 to 200", key=key,
                         value=mesh if not isinstance(mesh, np.ndarray) else mesh.tolist())
    return m


def mesh_frequencies(force_constants, mesh, *, chunk: int = 2048) -> MeshFrequencies:
    """Frequencies (THz) of ``force_constants`` on the Gamma-centred ``mesh``."""
    m = check_mesh(mesh)
    grid = np.stack(np.meshgrid(*(np.arange(n) / n for n in m), indexing="ij"), -1).reshape(-1, 3)
    freqs = np.concatenate([force_constants.frequencies(grid[s:s + chunk])
                            for s in range(0, len(grid), chunk)])
    w = np.full(len(grid), 1.0 / len(grid))
    for a in (grid, w, freqs):
        a.setflags(write=False)
    return MeshFrequencies(m, grid, w, freqs, np.asarray(force_constants.primitive.reciprocal))


@dataclass(frozen=True, eq=False)
class PhononDOS:
    """Phonon density of states per primitive cell.

    Attributes
    ----------
    frequencies_THz : ndarray (n_f,)
    dos_per_THz : ndarray (n_f,)
        States per THz per primitive cell; integrates to 3 n_atoms.
    integrated : ndarray (n_f,)
        Modes below each frequency.
    method : str
        ``"tetrahedron"`` or ``"gaussian"``.
    width_THz : float or None
        The Gaussian standard deviation (Gaussian method only).
    mesh : tuple of 3 int
    """

    frequencies_THz: np.ndarray
    dos_per_THz: np.ndarray
    integrated: np.ndarray
    method: str
    width_THz: float | None
    mesh: tuple

    def as_document(self) -> dict:
        return {"method": self.method, "gaussian_width_THz": self.width_THz,
                "q_mesh": list(self.mesh), "frequencies_THz": self.frequencies_THz.tolist(),
                "states_per_THz_per_cell": self.dos_per_THz.tolist(),
                "integrated_states": self.integrated.tolist()}


def phonon_dos(frequencies: MeshFrequencies, *, method: str = "tetrahedron",
               width_THz: float = 0.1, n_points: int = 400) -> PhononDOS:
    """The phonon DOS of mesh frequencies on ``n_points`` frequencies (THz)."""
    if method not in DOS_METHODS:
        raise InputError(f"unknown DOS method; accepted: {', '.join(DOS_METHODS)}",
                         key="phonons.dos_method", value=method)
    f = frequencies.frequencies_THz
    pad = 6 * width_THz if method == "gaussian" else 0.02 * max(f.max(), 1e-3)
    grid = np.linspace(min(f.min(), 0.0) - pad, f.max() + pad, int(n_points))
    if method == "tetrahedron":
        dos = tetrahedron_dos(f.reshape(*frequencies.mesh, -1), frequencies.reciprocal, grid,
                              spin_degeneracy=1.0)
        width = None
    else:
        dos = gaussian_dos(f, frequencies.weights, grid, width_THz, spin_degeneracy=1.0)
        width = float(width_THz)
    return PhononDOS(grid, dos.dos, dos.integrated, method, width, frequencies.mesh)
