"""Densities of states from bands on a uniform k-point mesh (layer 5).

:func:`density_of_states` computes non-self-consistent eigenvalues for a fixed
density on a Gamma-centred uniform mesh, unfolds them to the full mesh and
integrates with the linear tetrahedron method (Bloechl, Jepsen & Andersen) or
with Gaussian broadening (:mod:`pwsolid.dos`).

Symmetry
--------
Only the irreducible points are computed. :func:`pwsolid.kpoints.irreducible_kpoints`
gives one representative per orbit (the orbit member first in mesh order) and the
operations that map the mesh onto itself; :func:`mesh_orbit_map` applies those
operations (``k' = W^T k``) and time reversal (``k' = -k``) to every point of the
full mesh in exact integer arithmetic and takes the smallest image index as the
orbit's name, so that each full-mesh point finds its representative. The bands at
``W^T k`` equal those at ``k`` (and at ``-k`` without magnetism). With the
settings' ``use_symmetry`` off every mesh point is computed.

Zero of energy
--------------
By default the valence-band top of the mesh for an insulator (an even electron
count and a gap between the ``N/2``-th band and the next on the whole mesh), or
the tetrahedron Fermi level of the mesh bands for a metal (the energy where the
integrated DOS reaches the electron count), for either integration method.

References
----------
P. E. Bloechl, O. Jepsen and O. K. Andersen, Phys. Rev. B 49, 16223 (1994).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import numpy as np

from ..dos import DensityOfStates, gaussian_dos, tetrahedron_dos, tetrahedron_fermi_level
from ..errors import InputError
from ..kpoints import irreducible_kpoints, monkhorst_pack
from ..scf import bands_at_kpoints
from ..units import HARTREE_EV
from .band_structure import _PATH_TOLERANCE, _resolve_source, _write_text, kinetic_density_of

__all__ = ["DOS_SCHEMA", "DOS_METHODS", "DOSResult", "density_of_states", "mesh_orbit_map",
           "read_dos_csv"]

#: Schema of :meth:`DOSResult.as_document`.
DOS_SCHEMA = "pwsolid.density-of-states/1"
#: Integration methods by name.
DOS_METHODS = ("tetrahedron", "gaussian")

# Default Gaussian width, 0.1 eV: resolves silicon's main peaks on a 12^3 mesh
# without breaking the bands into one spike per k-point (common practice).
_DEFAULT_WIDTH = 0.1 / HARTREE_EV
# Default energy spacing, 0.01 eV, well below the features a 12^3 mesh resolves.
_DEFAULT_STEP = 0.01 / HARTREE_EV
_LEVEL_TOL = 1e-7


@dataclass(frozen=True, eq=False)
class DOSResult:
    """A density of states on an energy grid, with the bands it came from.

    Attributes
    ----------
    dos : DensityOfStates
        ``energies`` (Ha, absolute), ``dos`` (states / Ha / cell, both spins),
        ``integrated`` (states / cell).
    reference : float, Ha
        Zero of the relative energies (valence-band top or Fermi level).
    reference_kind : str
        ``"valence-band top"`` or ``"Fermi level"``.
    metallic : bool
    gap : float or None, Ha
        Gap between the valence and conduction bands on the mesh (insulators).
    mesh : tuple of 3 int
        Gamma-centred uniform mesh.
    n_irreducible : int
        k-points computed.
    eigenvalues : ndarray (n1, n2, n3, n_bands), Ha
        Bands on the full mesh.
    n_electrons : float
    width : float or None, Ha
        Gaussian width (None for tetrahedra).
    title : str
    """

    dos: DensityOfStates
    reference: float
    reference_kind: str
    metallic: bool
    gap: float | None
    mesh: tuple
    n_irreducible: int
    eigenvalues: np.ndarray
    n_electrons: float
    width: float | None = None
    title: str = ""

    @property
    def method(self) -> str:
        return self.dos.method

    @property
    def energies_ev(self) -> np.ndarray:
        """Energies (eV) relative to the reference."""
        return (self.dos.energies - self.reference) * HARTREE_EV

    @property
    def dos_per_ev(self) -> np.ndarray:
        """DOS in states / eV / cell."""
        return self.dos.dos / HARTREE_EV

    @property
    def integrated(self) -> np.ndarray:
        """States per cell below each energy."""
        return self.dos.integrated

    @property
    def complete_below(self) -> float:
        """Energy (Ha) below which every band of the mesh was computed (the DOS is whole)."""
        return float(self.eigenvalues[..., -1].min())

    def integrated_at(self, energy: float) -> float:
        """States per cell below an absolute energy (Ha), interpolated on the grid."""
        return float(np.interp(energy, self.dos.energies, self.dos.integrated))

    def as_document(self) -> dict:
        """JSON-ready content (schema :data:`DOS_SCHEMA`; energies in eV)."""
        return {
            "schema": DOS_SCHEMA,
            "title": self.title,
            "method": self.method,
            "gaussian_width_eV": None if self.width is None else self.width * HARTREE_EV,
            "mesh": [int(m) for m in self.mesh],
            "mesh_shift": [0.0, 0.0, 0.0],
            "irreducible_kpoints": int(self.n_irreducible),
            "n_electrons": float(self.n_electrons),
            "n_bands": int(self.eigenvalues.shape[-1]),
            "units": {"energy": "eV", "dos": "states / eV / cell (both spins)",
                      "integrated": "states / cell"},
            "reference": {"kind": self.reference_kind,
                          "absolute_energy_eV": self.reference * HARTREE_EV},
            "metallic": bool(self.metallic),
            "gap_eV": None if self.gap is None else self.gap * HARTREE_EV,
            "complete_below_eV": (self.complete_below - self.reference) * HARTREE_EV,
            "energies_eV": self.energies_ev.tolist(),
            "dos_per_eV": self.dos_per_ev.tolist(),
            "integrated_states": self.integrated.tolist(),
        }

    def to_csv(self, path) -> Path:
        """Plain table: energy (eV, relative), DOS (states/eV/cell), integrated DOS."""
        lines = [f"# pwsolid density of states ({self.method}): {self.title}".rstrip(": "),
                 f"# energies in eV relative to the {self.reference_kind} at "
                 f"{self.reference * HARTREE_EV:.6f} eV (absolute)",
                 f"# mesh {'x'.join(map(str, self.mesh))} (Gamma-centred), "
                 f"{self.n_irreducible} irreducible k-points; complete below "
                 f"{(self.complete_below - self.reference) * HARTREE_EV:.4f} eV",
                 "energy,dos,integrated"]
        for e, g, n in zip(self.energies_ev, self.dos_per_ev, self.integrated):
            lines.append(f"{e:.6f},{g:.8f},{n:.8f}")
        return _write_text(path, "\n".join(lines) + "\n")


def read_dos_csv(path) -> dict:
    """Read a table of :meth:`DOSResult.to_csv`: ``energies_eV``, ``dos_per_eV``,
    ``integrated`` and ``reference_eV``."""
    rows, reference = [], None
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            if line.startswith("#"):
                if "relative to the" in line and " at " in line:
                    reference = float(line.rsplit(" at ", 1)[1].split()[0])
                continue
            if line.startswith("energy") or not line.strip():
                continue
            rows.append([float(x) for x in line.split(",")])
    t = np.array(rows, float)
    return {"energies_eV": t[:, 0], "dos_per_eV": t[:, 1], "integrated": t[:, 2],
            "reference_eV": reference}


def _check_mesh(mesh) -> tuple[int, int, int]:
    if isinstance(mesh, (int, np.integer)) and not isinstance(mesh, bool):
        mesh = (int(mesh),) * 3
    try:
        m = tuple(int(x) for x in mesh)
        ok = len(m) == 3 and all(float(x) == int(x) for x in mesh) and all(1 <= x <= 100 for x in m)
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise InputError("the DOS mesh must be three integers between 1 and 100 (or one)",
                         key="dos.mesh", value=mesh)
    return m


def mesh_orbit_map(mesh, operations=None, time_reversal: bool = True):
    """Irreducible points of a Gamma-centred mesh and the map from the full mesh to them.

    Parameters
    ----------
    mesh : 3 ints
    operations : SymmetryOperations, optional
        The crystal's operations (only those mapping the mesh onto itself are used).
    time_reversal : bool
        Identify ``k`` and ``-k``.

    Returns
    -------
    representatives : ndarray (n_irr,), int
        Flat C-order indices of the irreducible points in the full mesh (as
        :func:`pwsolid.kpoints.irreducible_kpoints` lists them).
    orbit_of : ndarray (n1 n2 n3,), int
        For every full-mesh point, the position of its representative in
        ``representatives``.
    kpoint_set : KPointSet
        The irreducible set (fractional points, weights, kept operations).
    """
    n = np.array(mesh, dtype=np.int64)
    kset = irreducible_kpoints(tuple(int(x) for x in n), (0.0, 0.0, 0.0), operations,
                               time_reversal=time_reversal)
    rot = np.asarray(kset.operations.rotations, dtype=np.int64)
    j = np.stack(np.meshgrid(*(np.arange(x) for x in n), indexing="ij"), -1).reshape(-1, 3)
    # k_a = j_a / n_a. With L = lcm(n), q_a = k_a L is an integer, and the image
    # (W^T k)_b L = sum_a W_ab q_a; on the mesh its index is that times n_b / L.
    lcm = int(np.lcm.reduce(n))
    q = j * (lcm // n)
    qr = np.einsum("rab,ka->rkb", rot, q)
    scaled = qr * n
    if np.any(scaled % lcm):
        raise RuntimeError("a kept operation does not map the mesh onto itself")
    images = (scaled // lcm) % n
    if time_reversal:
        images = np.concatenate([images, (-images) % n])
    flat = (images[..., 0] * n[1] + images[..., 1]) * n[2] + images[..., 2]
    label = flat.min(axis=0)
    reps, orbit_of = np.unique(label, return_inverse=True)
    expected = monkhorst_pack(tuple(int(x) for x in n), 0.0)[reps]
    if len(reps) != kset.n_kpoints or not np.allclose(expected, kset.fractional):
        raise RuntimeError("the orbit map disagrees with the irreducible k-point set")
    return reps, orbit_of.reshape(-1), kset


def density_of_states(setup_or_ground_state, density=None, *, mesh=(12, 12, 12),
                      method: str = "tetrahedron", width: float | None = None,
                      energies=None, n_bands: int | None = None,
                      use_symmetry: bool | None = None, tolerance: float = _PATH_TOLERANCE,
                      progress: Callable[[int, int], None] | None = None,
                      title: str = "") -> DOSResult:
    """Density of states of the Kohn-Sham bands of a fixed density.

    Parameters
    ----------
    setup_or_ground_state : GroundState or SystemSetup
        A ground state, or a set-up from :func:`pwsolid.scf.prepare` with ``density``.
    density : ndarray (n1, n2, n3), bohr^-3, optional
        Default: the ground state's.
    mesh : int or 3 ints
        Gamma-centred uniform mesh (one integer: the same along every axis).
    method : str
        ``"tetrahedron"`` (linear tetrahedra) or ``"gaussian"``.
    width : float, Ha, optional
        Gaussian standard deviation (default 0.1 eV); only for ``"gaussian"``.
    energies : array (n_e,), Ha, optional
        Energies *relative to the reference* at which to evaluate the DOS. Default:
        from 0.5 eV (plus five widths) below the lowest band to the highest energy at
        which all bands are computed (:attr:`DOSResult.complete_below`), every 0.01 eV.
    n_bands : int, optional
        Bands per k-point (default: the set-up's).
    use_symmetry : bool, optional
        Compute only irreducible points (default: the settings' ``use_symmetry``).
    tolerance : float
        Residual tolerance of the eigensolver.
    progress : callable, optional
        ``progress(done, total)`` after each k-point.
    title : str

    Returns
    -------
    DOSResult
    """
    setup, dens, _gs = _resolve_source(setup_or_ground_state, density)
    m = _check_mesh(mesh)
    if method not in DOS_METHODS:
        raise InputError(f"unknown DOS method '{method}'; choose one of {', '.join(DOS_METHODS)}",
                         key="dos.method", value=method)
    if method == "gaussian":
        width = _DEFAULT_WIDTH if width is None else float(width)
        if not (np.isfinite(width) and width > 0):
            raise InputError("the Gaussian width must be positive", key="dos.width", value=width)
    elif width is not None:
        raise InputError("a width is only used by the Gaussian method", key="dos.width",
                         value=width)
    nb = int(setup.n_bands if n_bands is None else n_bands)
    n_el = float(setup.n_electrons)
    if 2 * nb < n_el:
        raise InputError(f"{nb} bands cannot hold {n_el:g} electrons", key="bands", value=nb)
    symmetric = setup.settings.use_symmetry if use_symmetry is None else bool(use_symmetry)
    ops = setup.symmetry if symmetric else None
    reps, orbit_of, _kset = mesh_orbit_map(m, ops, time_reversal=symmetric)
    full = monkhorst_pack(m, 0.0)
    eig_irr = bands_at_kpoints(setup, dens, full[reps], nb, tolerance=tolerance, progress=progress,
                               kinetic_density=kinetic_density_of(setup_or_ground_state, density))
    eig = eig_irr[orbit_of].reshape(*m, nb)

    half = n_el / 2
    even = abs(half - round(half)) < 1e-8
    n_val = int(round(half))
    metallic = not (even and nb > n_val and
                    eig[..., n_val - 1].max() < eig[..., n_val].min() - _LEVEL_TOL)
    recip = setup.crystal.reciprocal
    if metallic:
        reference, kind, gap = tetrahedron_fermi_level(eig, recip, n_el), "Fermi level", None
    else:
        reference, kind = float(eig[..., n_val - 1].max()), "valence-band top"
        gap = float(eig[..., n_val].min()) - reference

    if energies is None:
        low = float(eig.min()) - 0.5 / HARTREE_EV - (5 * width if width else 0.0)
        high = float(eig[..., -1].min())
        grid = low + _DEFAULT_STEP * np.arange(int(np.floor((high - low) / _DEFAULT_STEP)) + 1)
        if not metallic:
            # Put the valence top itself on the grid, so the count there is exact.
            grid = np.union1d(grid, [reference])
    else:
        rel = np.atleast_1d(np.asarray(energies, float))
        if rel.ndim != 1 or rel.size == 0 or not np.all(np.isfinite(rel)):
            raise InputError("the DOS energies must be a non-empty list of finite numbers",
                             key="dos.energies", value=energies)
        grid = rel + reference
    if method == "tetrahedron":
        result = tetrahedron_dos(eig, recip, grid)
    else:
        weights = np.full(eig_irr.shape[0], 0.0)
        np.add.at(weights, orbit_of, 1.0)
        weights /= weights.sum()
        result = gaussian_dos(eig_irr, weights, grid, width)
    eig.setflags(write=False)
    return DOSResult(result, float(reference), kind, bool(metallic), gap, m, len(reps), eig,
                     n_el, width, title)
