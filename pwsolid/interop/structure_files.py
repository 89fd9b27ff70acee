"""Crystal structures through the Atomic Simulation Environment (the "atomistic library"
below): its atoms objects and every file format it reads (layer 6).

:func:`crystal_from_atoms` and :func:`atoms_from_crystal` convert between
:class:`pwsolid.crystal.Crystal` (bohr, fractional positions) and ``ase.Atoms``
(angstrom); :func:`read_structure` reads CIF and any other format the atomistic library knows, finds the
space group with a tolerance the caller chooses and reports it;
:func:`write_structure` writes a crystal as CIF (or any format of the atomistic library), atomically.

pwsolid computes bulk crystals: a structure that is not periodic along all three
cell vectors (a molecule, a slab, a wire) is refused with a clear message.
"""

from __future__ import annotations

import io
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..crystal import Crystal
from ..errors import InputError
from ..safe_files import atomic_write_bytes
from ..symmetry import find_symmetry
from ..units import BOHR_ANGSTROM
from . import require

__all__ = ["StructureImport", "crystal_from_atoms", "atoms_from_crystal", "read_structure",
           "write_structure", "DEFAULT_SYMMETRY_TOLERANCE"]

#: Distance tolerance (bohr) for finding the space group of an imported structure;
#: coordinates in published tables carry four or five digits, so a few 1e-4 of a
#: lattice constant must still count as equal (common practice).
DEFAULT_SYMMETRY_TOLERANCE = 1e-3


@dataclass(frozen=True, eq=False)
class StructureImport:
    """A crystal read from a structure file, with what was found on import.

    Attributes
    ----------
    crystal : Crystal
        The cell (bohr, fractional positions).
    space_group : str
        Hermann-Mauguin symbol found with ``symmetry_tolerance``.
    space_group_number : int
        International Tables number (1..230).
    symmetry_tolerance : float
        Distance tolerance used, bohr.
    source : str
        The file read.
    messages : tuple of str
        Notes on the conversion (e.g. a left-handed cell made right-handed).
    """

    crystal: Crystal
    space_group: str
    space_group_number: int
    symmetry_tolerance: float
    source: str
    messages: tuple[str, ...] = ()

    def summary(self) -> str:
        c = self.crystal
        return (f"{self.source}: {c.n_atoms} atoms ({' '.join(c.unique_species)}), space group "
                f"{self.space_group} (No. {self.space_group_number}) at tolerance "
                f"{self.symmetry_tolerance:g} bohr, volume "
                f"{c.volume * BOHR_ANGSTROM ** 3:.4f} angstrom^3")


def _ase():
    return require("ase", "atomistic", "reading and writing structures through the atomistic library")


def crystal_from_atoms(atoms, *, source: str = "ase.Atoms") -> Crystal:
    """The pwsolid crystal of a periodic ``ase.Atoms`` (lengths converted to bohr).

    Raises
    ------
    InputError
        If the structure is not periodic along all three cell vectors, has no cell,
        or holds no atoms.
    """
    crystal, _ = _convert(atoms, source)
    return crystal


def _convert(atoms, source: str) -> tuple[Crystal, tuple[str, ...]]:
    pbc = np.asarray(atoms.get_pbc(), bool)
    if not pbc.all():
        axes = ", ".join("abc"[i] for i in range(3) if not pbc[i])
        raise InputError(f"the structure is not periodic along {axes}: pwsolid computes bulk "
                         "crystals (periodic in all three directions), not molecules, slabs "
                         "or wires", key="crystal.structure_file", source=source)
    lattice = np.array(atoms.cell[:], float) / BOHR_ANGSTROM
    if not len(atoms):
        raise InputError("the structure holds no atoms", key="crystal.structure_file",
                         source=source)
    if abs(np.linalg.det(lattice)) < 1e-8 * max(np.prod(np.linalg.norm(lattice, axis=1)), 1e-300):
        raise InputError("the structure has no three-dimensional cell (its cell vectors are "
                         "missing or linearly dependent)", key="crystal.structure_file",
                         source=source)
    _refuse_partial_occupancy(atoms, source)
    positions = np.array(atoms.get_scaled_positions(wrap=True), float)
    notes = []
    if np.linalg.det(lattice) < 0:
        # the same crystal described by a right-handed cell: swap the first two vectors
        lattice = lattice[[1, 0, 2]]
        positions = positions[:, [1, 0, 2]]
        notes.append("the file's cell vectors were left-handed; a and b were swapped")
    return Crystal(lattice, tuple(atoms.get_chemical_symbols()), positions), tuple(notes)


def _refuse_partial_occupancy(atoms, source: str) -> None:
    """A site shared by species or partly empty (a CIF with occupancies below 1) has no
    periodic one-cell description: refuse it rather than pick one species."""
    for site, shares in (atoms.info.get("occupancy") or {}).items():
        total = sum(float(x) for x in shares.values())
        if len(shares) > 1 or abs(total - 1.0) > 1e-6:
            described = ", ".join(f"{el} {float(x):g}" for el, x in shares.items())
            raise InputError(f"site {site} is disordered or partly occupied ({described}): "
                             "pwsolid needs an ordered crystal with every site fully occupied; "
                             "build an ordered supercell (e.g. a special quasirandom structure) "
                             "instead", key="crystal.structure_file", source=source)


def atoms_from_crystal(crystal: Crystal):
    """An ``ase.Atoms`` (angstrom, periodic in all directions) of a pwsolid crystal."""
    ase = _ase()
    return ase.Atoms(symbols=list(crystal.species), cell=crystal.lattice * BOHR_ANGSTROM,
                     scaled_positions=crystal.positions, pbc=True)


def read_structure(path, *, symmetry_tolerance: float = DEFAULT_SYMMETRY_TOLERANCE,
                   index: int = -1, file_format: str | None = None,
                   primitive: bool = False, symmetrize: bool = True) -> StructureImport:
    """Read a crystal from any structure file the atomistic library can read (CIF first of all).

    Parameters
    ----------
    path
        The file; its format is guessed from the name unless ``file_format`` is given.
    symmetry_tolerance
        Distance tolerance in bohr for the space group found on import.
    index
        Which structure of a multi-structure file (default: the last).
    primitive
        Reduce the cell to a primitive one (spglib, same tolerance, orientation and
        positions kept where possible): a CIF usually gives the conventional cell,
        which for diamond or fcc crystals holds four times the atoms.
    symmetrize
        Make the cell and positions exactly symmetric under the space group found at
        ``symmetry_tolerance`` (the atomistic library's ``refine_symmetry``; orientation kept). A file's
        rounded coordinates (0.333333 for 1/3) otherwise lose symmetry at the much
        tighter tolerance the calculation uses. The largest atom move is reported.

    Raises
    ------
    InputError
        Missing or unreadable file, a format the atomistic library does not know, a non-periodic
        structure, or a space group that cannot be determined.
    """
    ase_io = require("ase.io", "atomistic", "reading structure files")
    path = Path(path)
    name = str(path)
    if not path.is_file():
        raise InputError("structure file not found" if not path.exists() else
                         "is not a regular file", key="crystal.structure_file", source=name)
    try:
        atoms = ase_io.read(str(path), index=index, format=file_format)
    except Exception as exc:        # the atomistic library raises many types for unreadable files
        raise InputError(_read_failure(exc), key="crystal.structure_file",
                         source=name) from None
    if symmetrize:
        atoms, moved = _refined(atoms, symmetry_tolerance, name)
    crystal, notes = _convert(atoms, name)
    if symmetrize:
        notes += (f"cell and positions made exactly symmetric (largest atom move "
                  f"{moved:.2e} bohr)",)
    if primitive:
        crystal, notes = _primitive(crystal, symmetry_tolerance, name), notes + (
            "reduced to a primitive cell",)
    sym = find_symmetry(crystal, symmetry_tolerance)
    return StructureImport(crystal, sym.international_symbol, int(sym.space_group_number),
                           float(symmetry_tolerance), name, notes)


def _read_failure(exc: Exception) -> str:
    """What went wrong reading a file; the library's KeyError of a symbol is a species."""
    what = exc.args[0] if exc.args else None
    if isinstance(exc, KeyError) and isinstance(what, str) and what.isalpha():
        return (f"unknown species {what!r} in the structure file: sites must carry "
                "element symbols of the periodic table (e.g. 'Si', 'Ga')")
    return (f"the atomistic library could not read this structure file "
            f"({type(exc).__name__}: {exc}); give a CIF or another format the atomistic "
            "library reads")


def _refined(atoms, tolerance: float, source: str):
    """(symmetrised copy of ``atoms``, largest position change in bohr)."""
    from ase.spacegroup.symmetrize import refine_symmetry
    _refuse_partial_occupancy(atoms, source)
    if not np.asarray(atoms.get_pbc(), bool).all():
        return atoms, 0.0                  # refused with its own message by _convert
    refined = atoms.copy()
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DeprecationWarning)
            refine_symmetry(refined, symprec=tolerance * BOHR_ANGSTROM)
    except Exception as exc:          # spglib's failure types differ between releases
        raise InputError(f"the structure's symmetry could not be refined ({exc}); try another "
                         "tolerance or symmetrize=False", key="crystal.symmetry_tolerance",
                         value=tolerance, source=source) from None
    delta = refined.positions - atoms.positions
    return refined, float(np.linalg.norm(delta, axis=1).max()) / BOHR_ANGSTROM


def _primitive(crystal: Crystal, tolerance: float, source: str) -> Crystal:
    import spglib

    from ..crystal import ELEMENTS
    numbers = [ELEMENTS.index(s) + 1 for s in crystal.species]
    args = ((crystal.lattice, crystal.positions, numbers),)
    options = dict(to_primitive=True, no_idealize=True, symprec=tolerance)
    try:
        with warnings.catch_warnings():
            # spglib 2.x warns about its old error handling (None on failure), which
            # this call still relies on for the releases without the new one
            warnings.simplefilter("ignore", DeprecationWarning)
            cell = spglib.standardize_cell(*args, **options)
    except Exception:              # spglib's own error type differs between releases
        cell = None
    if cell is None:
        raise InputError("spglib could not find a primitive cell; try another tolerance",
                         key="crystal.symmetry_tolerance", value=tolerance, source=source)
    lattice, positions, numbers = cell
    return Crystal(lattice, tuple(ELEMENTS[n - 1] for n in numbers), positions)


def write_structure(path, crystal: Crystal, *, file_format: str | None = None) -> None:
    """Write ``crystal`` to ``path`` (CIF when the name ends in .cif), atomically."""
    ase_io = require("ase.io", "atomistic", "writing structure files")
    path = Path(path)
    fmt = file_format or ("cif" if path.suffix.lower() == ".cif" else None)
    if fmt is None:
        from ase.io.formats import filetype
        try:
            fmt = filetype(str(path), read=False)
        except Exception:
            raise InputError("cannot tell the structure format from the file name; use a "
                             "name ending in .cif or give file_format", value=str(path)) from None
    atoms = atoms_from_crystal(crystal)
    # the atomistic library's writers differ in whether they want a text or a binary file object
    try:
        buffer = io.BytesIO()
        ase_io.write(buffer, atoms, format=fmt)
    except TypeError:
        buffer = io.StringIO()
        ase_io.write(buffer, atoms, format=fmt)
    data = buffer.getvalue()
    atomic_write_bytes(path, data if isinstance(data, bytes) else data.encode())
