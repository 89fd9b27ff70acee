"""Empirical pseudopotential bands of diamond and zincblende semiconductors (layer 3).

The local potential is fixed by a few Fourier coefficients fitted to measured
optical features (Cohen & Bergstresser 1966), so bands need no self-consistency:
one dense diagonalisation per k-point.

Conventions
-----------
CB write the potential of the two-atom fcc cell with the origin at the bond
centre, atoms at ``+-tau``, ``tau = (a/8)(1, 1, 1)``:

    V(G) = V_S(|G|^2) cos(G . tau) + i V_A(|G|^2) sin(G . tau),

with form factors at ``|G|^2 = 3, 4, 8, 11`` in units of ``(2 pi / a)^2`` (zero
elsewhere, and ``V(G = 0) = 0``, a constant shift). Here the same potential is
written atom by atom, ``V(G) = sum_atoms w_atom(|G|^2) exp(-i G . r_atom)`` with

    w_cation = (V_S + V_A) / 2,   w_anion = (V_S - V_A) / 2,

which equals CB's form when the anion sits at ``+tau`` and the cation at
``-tau``, and holds for any origin: moving the origin multiplies ``V(G)`` by a
phase, a unitary change of basis that leaves eigenvalues unchanged. The
crystal built by :func:`empirical_crystal` has CB's origin (cation at ``-tau``,
anion at ``+tau``); crystals from :func:`pwsolid.crystal.diamond` or
:func:`pwsolid.crystal.zincblende` (atoms at 0 and a/4 (1,1,1)) work as well.

Energies: form factors are tabulated in rydberg and converted to hartree; the
kinetic term is ``|k + G|^2 / 2`` Ha (bohr units). The lattice constant enters
only through ``(2 pi / a)^2``, taken from the cell volume (``a^3 / 4``).

References
----------
M. L. Cohen and T. K. Bergstresser, Phys. Rev. 141, 789 (1966), Table I.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..basis import fft_grid_for_cutoff, make_basis
from ..crystal import Crystal, diamond, zincblende
from ..eigensolver import dense_lowest_eigenpairs
from ..errors import InputError
from ..units import BOHR_ANGSTROM

__all__ = [
    "EmpiricalFormFactors",
    "EMPIRICAL_MATERIALS",
    "empirical_crystal",
    "empirical_potential_coefficients",
    "empirical_hamiltonian",
    "empirical_bands",
    "reduced_cutoff_to_hartree",
]

_RY = 0.5   # hartree per rydberg


@dataclass(frozen=True)
class EmpiricalFormFactors:
    """Form factors of one material (rydberg; ``|G|^2`` in units of ``(2 pi / a)^2``).

    Attributes
    ----------
    species : (str, str)
        Cation and anion (the same element twice for a diamond-structure solid).
    lattice_constant_angstrom : float
    symmetric : dict int -> float, Ry
        ``V_S`` at ``|G|^2 = 3, 8, 11``.
    antisymmetric : dict int -> float, Ry
        ``V_A`` at ``|G|^2 = 3, 4, 11``.
    source : str
    status : str
    """

    species: tuple[str, str]
    lattice_constant_angstrom: float
    symmetric: dict
    antisymmetric: dict
    source: str
    status: str

    @property
    def lattice_constant(self) -> float:
        """Lattice constant in bohr."""
        return self.lattice_constant_angstrom / BOHR_ANGSTROM


_SOURCE = "M. L. Cohen and T. K. Bergstresser, Phys. Rev. 141, 789 (1966), Table I"
_STATUS = ("[V2] secondary transcription of Table I (the original table was not seen); "
           "agrees with the values recalled from the paper")

#: Cohen-Bergstresser form factors by material name.
EMPIRICAL_MATERIALS: dict[str, EmpiricalFormFactors] = {
    "Si": EmpiricalFormFactors(("Si", "Si"), 5.43, {3: -0.21, 8: 0.04, 11: 0.08},
                               {3: 0.0, 4: 0.0, 11: 0.0}, _SOURCE, _STATUS),
    "Ge": EmpiricalFormFactors(("Ge", "Ge"), 5.66, {3: -0.23, 8: 0.01, 11: 0.06},
                               {3: 0.0, 4: 0.0, 11: 0.0}, _SOURCE, _STATUS),
    "GaAs": EmpiricalFormFactors(("Ga", "As"), 5.64, {3: -0.23, 8: 0.01, 11: 0.06},
                                 {3: 0.07, 4: 0.05, 11: 0.01}, _SOURCE, _STATUS),
}


def _material(material) -> EmpiricalFormFactors:
    if isinstance(material, EmpiricalFormFactors):
        return material
    for name, data in EMPIRICAL_MATERIALS.items():
        if str(material).lower() == name.lower():
            return data
    raise InputError(f"no empirical form factors for '{material}'; known materials: "
                     f"{', '.join(EMPIRICAL_MATERIALS)}", key="empirical.material", value=material)


def empirical_crystal(material, lattice_constant: float | None = None) -> Crystal:
    """Two-atom fcc cell of ``material`` with CB's origin at the bond centre.

    Parameters
    ----------
    material : str or EmpiricalFormFactors
    lattice_constant : float, optional
        Cube edge in bohr (default: the table's value).

    Returns
    -------
    Crystal
        Cation at ``-tau``, anion at ``+tau``, ``tau = (a/8)(1,1,1)``; fcc vectors
        ``a/2 (0,1,1), (1,0,1), (1,1,0)``.
    """
    data = _material(material)
    a = data.lattice_constant if lattice_constant is None else float(lattice_constant)
    if data.species[0] == data.species[1]:
        base = diamond(a, data.species[0])
    else:
        base = zincblende(a, data.species)
    return base.translated(-np.full(3, a / 8))


def _cube_edge(crystal: Crystal) -> float:
    a = (4.0 * crystal.volume) ** (1.0 / 3.0)
    # The reciprocal metric of an fcc cell is an integer matrix in units of (2 pi / a)^2.
    metric = crystal.reciprocal @ crystal.reciprocal.T / (2 * np.pi / a) ** 2
    fcc = np.allclose(metric, np.rint(metric), atol=1e-6) and abs(np.linalg.det(metric) - 16) < 1e-6
    if not fcc or crystal.n_atoms != 2:
        raise InputError("empirical form factors need a two-atom face-centred cubic cell "
                         "(diamond or zincblende)", key="empirical.crystal",
                         value=crystal.lattice.tolist())
    return a


def _atom_weights(crystal: Crystal, data: EmpiricalFormFactors) -> list[tuple[np.ndarray, int]]:
    """(Cartesian position, +1 cation / -1 anion) of each atom, checked against the material."""
    cation, anion = data.species
    if sorted(crystal.species) != sorted((cation, anion)):
        raise InputError(f"the crystal holds {list(crystal.species)}, the form factors are for "
                         f"{cation}{'' if cation == anion else anion}",
                         key="empirical.crystal", value=list(crystal.species))
    if cation == anion:
        signs = [0, 0]
    else:
        signs = [1 if s == cation else -1 for s in crystal.species]
    return list(zip(crystal.cartesian_positions, signs))


def empirical_potential_coefficients(crystal: Crystal, material, miller) -> np.ndarray:
    """Fourier coefficients ``V(G)`` (Ha) of the empirical potential.

    Parameters
    ----------
    crystal : Crystal
        Two-atom fcc cell whose species match ``material``.
    material : str or EmpiricalFormFactors
    miller : array (..., 3) int
        Integer coordinates of ``G`` in the crystal's reciprocal vectors
        (e.g. differences ``m - m'`` of two basis functions).

    Returns
    -------
    ndarray (...), complex128, Ha
        ``V(G) = sum_atoms w_atom(|G|^2) exp(-i G . r_atom)``; zero at ``G = 0`` and
        wherever ``|G|^2 (a / 2 pi)^2`` is not 3, 4, 8 or 11.
    """
    data = _material(material)
    a = _cube_edge(crystal)
    m = np.asarray(miller)
    g = m @ crystal.reciprocal
    g2 = np.einsum("...i,...i->...", g, g) / (2 * np.pi / a) ** 2
    shell = np.rint(g2).astype(int)
    on_shell = np.abs(g2 - shell) < 1e-6
    v_s = np.zeros(g2.shape)
    v_a = np.zeros(g2.shape)
    for s, value in data.symmetric.items():
        v_s[on_shell & (shell == s)] = value * _RY
    for s, value in data.antisymmetric.items():
        v_a[on_shell & (shell == s)] = value * _RY
    out = np.zeros(g2.shape, complex)
    for position, sign in _atom_weights(crystal, data):
        weight = 0.5 * (v_s + sign * v_a)
        out += weight * np.exp(-1j * (g @ position))
    return out


def reduced_cutoff_to_hartree(reduced: float, lattice_constant: float) -> float:
    """Kinetic cutoff (Ha) of the basis ``|k+G|^2 <= reduced (2 pi / a)^2``; ``a`` in bohr."""
    return 0.5 * float(reduced) * (2 * np.pi / float(lattice_constant)) ** 2


def _resolve_crystal(crystal_or_a, data) -> Crystal:
    if isinstance(crystal_or_a, Crystal):
        return crystal_or_a
    return empirical_crystal(data, crystal_or_a)


def _resolve_cutoff(cutoff, reduced_cutoff, a) -> float:
    if (cutoff is None) == (reduced_cutoff is None):
        raise InputError("give exactly one of cutoff (Ha) and reduced_cutoff ((2 pi/a)^2 units)",
                         key="empirical.cutoff", value=(cutoff, reduced_cutoff))
    value = cutoff if cutoff is not None else reduced_cutoff
    if not np.isfinite(value) or value <= 0:
        raise InputError("the basis cutoff must be positive", key="empirical.cutoff", value=value)
    return float(cutoff) if cutoff is not None else reduced_cutoff_to_hartree(reduced_cutoff, a)


def empirical_hamiltonian(crystal_or_a, material, k_frac, cutoff: float | None = None, *,
                          reduced_cutoff: float | None = None) -> np.ndarray:
    """Dense plane-wave Hamiltonian of the empirical potential at one k-point.

    Parameters
    ----------
    crystal_or_a : Crystal, float or None
        The cell, or its cube edge in bohr (None: the table's value) for
        :func:`empirical_crystal`.
    material : str or EmpiricalFormFactors
    k_frac : array (3,)
        k in units of the crystal's reciprocal vectors.
    cutoff : float, Ha
        Basis ``|k+G|^2 / 2 <= cutoff``; or give ``reduced_cutoff`` instead, the
        bound on ``|k+G|^2`` in units of ``(2 pi / a)^2``.

    Returns
    -------
    ndarray (n_pw, n_pw), complex128, Ha
        ``H_GG' = |k+G|^2 / 2 delta_GG' + V(G - G')``, Hermitian; plane waves in the
        order of :func:`pwsolid.basis.make_basis`.
    """
    data = _material(material)
    crystal = _resolve_crystal(crystal_or_a, data)
    a = _cube_edge(crystal)
    cutoff_ha = _resolve_cutoff(cutoff, reduced_cutoff, a)
    basis = make_basis(crystal.lattice, k_frac, cutoff_ha, fft_grid_for_cutoff(crystal.lattice, cutoff_ha))
    dm = basis.miller[:, None, :] - basis.miller[None, :, :]
    h = empirical_potential_coefficients(crystal, data, dm)
    h[np.diag_indices_from(h)] += basis.kinetic
    return h


def empirical_bands(material, kpoints_frac, n_bands: int, cutoff: float | None = None, *,
                    reduced_cutoff: float | None = None, crystal: Crystal | None = None,
                    lattice_constant: float | None = None) -> np.ndarray:
    """Lowest band energies of the empirical potential.

    Parameters
    ----------
    material : str or EmpiricalFormFactors
        ``"Si"``, ``"Ge"`` or ``"GaAs"``.
    kpoints_frac : array (n_k, 3)
        k-points in units of the crystal's reciprocal vectors (for the default
        crystal, fcc vectors ``a/2 (0,1,1), (1,0,1), (1,1,0)``: X = (1/2, 0, 1/2),
        L = (1/2, 1/2, 1/2)).
    n_bands : int
    cutoff : float, Ha, optional
        Kinetic cutoff; or ``reduced_cutoff``, the bound on ``|k+G|^2`` in units of
        ``(2 pi / a)^2`` (REFERENCES-style basis sizes 11, 21, 40). Exactly one.
    crystal : Crystal, optional
        The cell (default :func:`empirical_crystal`).
    lattice_constant : float, optional
        Cube edge in bohr for the default crystal.

    Returns
    -------
    ndarray (n_k, n_bands), float64, Ha
        Absolute eigenvalues (the zero is set by ``V(G = 0) = 0``).
    """
    data = _material(material)
    if crystal is None:
        crystal = empirical_crystal(data, lattice_constant)
    k = np.asarray(kpoints_frac, float).reshape(-1, 3)
    n_bands = int(n_bands)
    if n_bands < 1:
        raise InputError("ask for at least one band", key="empirical.n_bands", value=n_bands)
    out = np.empty((len(k), n_bands))
    for i, kk in enumerate(k):
        h = empirical_hamiltonian(crystal, data, kk, cutoff, reduced_cutoff=reduced_cutoff)
        if h.shape[0] < n_bands:
            raise InputError(f"the basis holds only {h.shape[0]} plane waves for {n_bands} bands; "
                             "raise the cutoff", key="empirical.cutoff", value=cutoff or reduced_cutoff)
        if not np.any(h.imag):        # centrosymmetric cell about the origin: H is real
            h = h.real
        out[i] = dense_lowest_eigenpairs(h, n_bands)[0]
    return out
