"""Crystal structures: lattice, species and fractional positions (layer 2).

A :class:`Crystal` is an immutable periodic cell in bohr. Builders create the
common prototypes of simple solids with the usual primitive vectors (Setyawan &
Curtarolo, Comput. Mater. Sci. 49, 299 (2010) for the vector choices).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError

__all__ = [
    "Crystal",
    "ELEMENTS",
    "MIN_ATOM_DISTANCE",
    "simple_cubic",
    "body_centred_cubic",
    "face_centred_cubic",
    "diamond",
    "zincblende",
    "rocksalt",
    "cesium_chloride",
    "hexagonal_close_packed",
    "PROTOTYPES",
]

#: Element symbols accepted as species (Z = 1 .. 86).
ELEMENTS: tuple[str, ...] = (
    "H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu "
    "Zn Ga Ge As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs "
    "Ba La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl "
    "Pb Bi Po At Rn").split()

#: Smallest allowed distance between two atoms, in bohr. Shorter than any
#: chemical bond (H2 is 1.40 bohr), so it only catches typing mistakes.
MIN_ATOM_DISTANCE: float = 1.0


@dataclass(frozen=True, eq=False)
class Crystal:
    """A periodic crystal.

    Attributes
    ----------
    lattice : ndarray, shape (3, 3), float64, bohr
        Lattice vectors as rows ``a_1, a_2, a_3``; must be right-handed.
    species : tuple of str
        Element symbol of each atom.
    positions : ndarray, shape (n_atoms, 3), float64
        Fractional coordinates, wrapped into [0, 1).
    """

    lattice: np.ndarray
    species: tuple[str, ...]
    positions: np.ndarray
    min_distance: float = field(default=MIN_ATOM_DISTANCE, repr=False)

    def __post_init__(self):
        lat = np.array(self.lattice, dtype=float)
        if lat.shape != (3, 3) or not np.all(np.isfinite(lat)):
            raise InputError("lattice vectors must be three finite 3-vectors",
                             key="crystal.lattice_vectors", value=self.lattice)
        pos = np.array(self.positions, dtype=float).reshape(-1, 3)
        species = tuple(str(s) for s in self.species)
        if len(species) != len(pos):
            raise InputError(f"{len(species)} species for {len(pos)} positions",
                             key="crystal.atoms", value=species)
        for s in species:
            if s not in ELEMENTS:
                near = [e for e in ELEMENTS if e.lower() == s.lower()]
                hint = f"; did you mean '{near[0]}'?" if near else "; use an element symbol such as 'Si'"
                raise InputError(f"unknown species '{s}'{hint}", key="crystal.species", value=s)
        if not np.all(np.isfinite(pos)):
            raise InputError("atomic positions must be finite", key="crystal.atoms", value=pos.tolist())
        det = np.linalg.det(lat)
        scale = np.prod(np.linalg.norm(lat, axis=1))
        if scale == 0 or abs(det) < 1e-8 * scale:
            raise InputError("the lattice vectors are linearly dependent (singular cell)",
                             key="crystal.lattice_vectors", value=lat.tolist())
        if det < 0:
            raise InputError("the lattice vectors form a left-handed set; swap two of them",
                             key="crystal.lattice_vectors", value=lat.tolist())
        pos = pos - np.floor(pos)
        pos[np.isclose(pos, 1.0, atol=1e-12)] = 0.0
        object.__setattr__(self, "lattice", lat)
        object.__setattr__(self, "positions", pos)
        object.__setattr__(self, "species", species)
        lat.setflags(write=False)
        pos.setflags(write=False)
        if len(pos) > 1:
            d, i, j = self._closest_pair()
            if d < self.min_distance:
                raise InputError(
                    f"atoms {i} ({species[i]}) and {j} ({species[j]}) are {d:.3f} bohr apart; "
                    f"the minimum accepted is {self.min_distance} bohr",
                    key="crystal.atoms", value=[pos[i].tolist(), pos[j].tolist()])

    # -- geometry ---------------------------------------------------------
    @property
    def n_atoms(self) -> int:
        return len(self.species)

    @property
    def volume(self) -> float:
        """Cell volume in bohr^3."""
        return float(np.linalg.det(self.lattice))

    @property
    def reciprocal(self) -> np.ndarray:
        """Reciprocal vectors as rows ``b_i`` with ``a_i . b_j = 2 pi delta_ij`` (1/bohr)."""
        return 2.0 * np.pi * np.linalg.inv(self.lattice).T

    @property
    def cartesian_positions(self) -> np.ndarray:
        """Atomic positions in bohr, shape (n_atoms, 3)."""
        return self.positions @ self.lattice

    @property
    def unique_species(self) -> tuple[str, ...]:
        """Species in order of first appearance."""
        return tuple(dict.fromkeys(self.species))

    def _closest_pair(self):
        cart = self.cartesian_positions
        shifts = np.array(list(itertools.product(range(-2, 3), repeat=3)), float) @ self.lattice
        best = (np.inf, 0, 0)
        for i in range(self.n_atoms):
            diff = cart[None, i:, :] - cart[i, None, :]           # (1, n-i, 3)
            dist = np.linalg.norm(diff[:, :, None, :] + shifts[None, None], axis=-1)[0]
            if i < self.n_atoms:
                dist[0, np.all(shifts == 0, axis=1)] = np.inf    # the atom itself
            k = np.unravel_index(np.argmin(dist), dist.shape)
            if dist[k] < best[0]:
                best = (float(dist[k]), i, i + int(k[0]))
        return best

    # -- derived crystals -------------------------------------------------
    def supercell(self, repeats) -> "Crystal":
        """Return the crystal repeated ``repeats = (n1, n2, n3)`` times along the lattice vectors."""
        reps = np.asarray(repeats, dtype=int)
        if reps.shape != (3,) or np.any(reps < 1):
            raise InputError("supercell repeats must be three positive integers",
                             key="supercell", value=repeats)
        cells = np.array(list(itertools.product(*(range(n) for n in reps))), float)
        pos = (self.positions[None, :, :] + cells[:, None, :]).reshape(-1, 3) / reps
        species = self.species * len(cells)
        return Crystal(self.lattice * reps[:, None], species, pos, self.min_distance)

    def translated(self, shift_bohr) -> "Crystal":
        """Return the crystal with every atom moved by the Cartesian vector ``shift_bohr``."""
        frac = np.asarray(shift_bohr, float) @ np.linalg.inv(self.lattice)
        return Crystal(self.lattice, self.species, self.positions + frac, self.min_distance)

    def scaled(self, factor: float) -> "Crystal":
        """Return the crystal with all lengths multiplied by ``factor`` (fractional positions kept)."""
        return Crystal(self.lattice * float(factor), self.species, self.positions, self.min_distance)

    def as_dict(self) -> dict:
        """JSON-friendly description (bohr and fractional coordinates)."""
        return {
            "lattice_vectors_bohr": self.lattice.tolist(),
            "species": list(self.species),
            "fractional_positions": self.positions.tolist(),
            "volume_bohr3": self.volume,
        }


def _one(species) -> tuple[str]:
    return (species,) if isinstance(species, str) else tuple(species)[:1]


def _two(species) -> tuple[str, str]:
    sp = tuple(species)
    if len(sp) != 2 or isinstance(species, str):
        raise InputError("this prototype needs two species, e.g. ['Ga', 'As']",
                         key="crystal.species", value=species)
    return sp


_FCC = 0.5 * np.array([[0.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 0.0]])
_BCC = 0.5 * np.array([[-1.0, 1.0, 1.0], [1.0, -1.0, 1.0], [1.0, 1.0, -1.0]])


def _positive(value: float, key: str) -> float:
    value = float(value)
    if not np.isfinite(value) or value <= 0:
        raise InputError("must be a positive length", key=key, value=value)
    return value


def simple_cubic(a: float, species="Po") -> Crystal:
    """Simple cubic lattice with one atom; ``a`` in bohr."""
    a = _positive(a, "crystal.lattice_constant")
    return Crystal(a * np.eye(3), _one(species), [[0, 0, 0]])


def body_centred_cubic(a: float, species) -> Crystal:
    """Body-centred cubic, primitive cell with one atom; ``a`` is the cube edge in bohr."""
    a = _positive(a, "crystal.lattice_constant")
    return Crystal(a * _BCC, _one(species), [[0, 0, 0]])


def face_centred_cubic(a: float, species) -> Crystal:
    """Face-centred cubic, primitive cell with one atom; ``a`` is the cube edge in bohr."""
    a = _positive(a, "crystal.lattice_constant")
    return Crystal(a * _FCC, _one(species), [[0, 0, 0]])


def diamond(a: float, species) -> Crystal:
    """Diamond structure (fcc with a two-atom basis at 0 and (1/4,1/4,1/4) a)."""
    a = _positive(a, "crystal.lattice_constant")
    sp = _one(species)
    return Crystal(a * _FCC, sp * 2, [[0, 0, 0], [0.25, 0.25, 0.25]])


def zincblende(a: float, species) -> Crystal:
    """Zincblende structure: diamond with two different species."""
    a = _positive(a, "crystal.lattice_constant")
    return Crystal(a * _FCC, _two(species), [[0, 0, 0], [0.25, 0.25, 0.25]])


def rocksalt(a: float, species) -> Crystal:
    """Rocksalt structure (fcc, second species at (1/2, 1/2, 1/2) a)."""
    a = _positive(a, "crystal.lattice_constant")
    return Crystal(a * _FCC, _two(species), [[0, 0, 0], [0.5, 0.5, 0.5]])


def cesium_chloride(a: float, species) -> Crystal:
    """Cesium-chloride structure (simple cubic, second species at the cube centre)."""
    a = _positive(a, "crystal.lattice_constant")
    return Crystal(a * np.eye(3), _two(species), [[0, 0, 0], [0.5, 0.5, 0.5]])


def hexagonal_close_packed(a: float, species, c_over_a: float = np.sqrt(8.0 / 3.0)) -> Crystal:
    """Hexagonal close-packed structure with two atoms; ``a`` in bohr, ideal c/a by default."""
    a = _positive(a, "crystal.lattice_constant")
    c = a * _positive(c_over_a, "crystal.c_over_a")
    lat = np.array([[a / 2, -a * np.sqrt(3) / 2, 0], [a / 2, a * np.sqrt(3) / 2, 0], [0, 0, c]])
    sp = _one(species)
    return Crystal(lat, sp * 2, [[1 / 3, 2 / 3, 0.25], [2 / 3, 1 / 3, 0.75]])


#: Prototype builders by the name used in input files.
PROTOTYPES = {
    "simple-cubic": simple_cubic,
    "bcc": body_centred_cubic,
    "fcc": face_centred_cubic,
    "diamond": diamond,
    "zincblende": zincblende,
    "rocksalt": rocksalt,
    "cesium-chloride": cesium_chloride,
    "hcp": hexagonal_close_packed,
}
