"""pwsolid: plane-wave Kohn-Sham density-functional calculations for simple solids.

A ground state in a few lines::

    import pwsolid
    si = pwsolid.diamond(pwsolid.angstrom(5.43), "Si")
    result = pwsolid.ground_state(si, pwsolid.GroundStateSettings(cutoff=12.0))
    print(result.total_energy, result.band_edges.gap)

Everything is in Hartree atomic units (Ha, bohr) inside; ``pwsolid.angstrom``
and ``pwsolid.electronvolt`` convert at the edges.
"""

from ._version import __version__
from .config import RunInput, load_input, parse_input, schema_table
from .crystal import (PROTOTYPES, Crystal, body_centred_cubic, cesium_chloride, diamond,
                      face_centred_cubic, hexagonal_close_packed, rocksalt, simple_cubic,
                      zincblende)
from .errors import ConvergenceError, ConvergenceWarning, InputError, PwsolidError
from .kpoints import KPointSet, irreducible_kpoints, monkhorst_pack
from .pseudo import Pseudopotential, load_pseudopotential
from .results import ground_state_document, load_density, save_density, write_json
from .scf import GroundState, ground_state, prepare
from .settings import GroundStateSettings
from .symmetry import SymmetryOperations, find_symmetry
from .units import BOHR_ANGSTROM, HARTREE_EV, parse_quantity
from .xc import FUNCTIONALS, get_functional


def angstrom(value: float) -> float:
    """A length in angstrom, returned in bohr."""
    return float(value) / BOHR_ANGSTROM


def electronvolt(value: float) -> float:
    """An energy in eV, returned in hartree."""
    return float(value) / HARTREE_EV


__all__ = [
    "__version__", "Crystal", "PROTOTYPES", "simple_cubic", "body_centred_cubic",
    "face_centred_cubic", "diamond", "zincblende", "rocksalt", "cesium_chloride",
    "hexagonal_close_packed", "GroundStateSettings", "GroundState", "ground_state", "prepare",
    "RunInput", "load_input", "parse_input", "schema_table", "KPointSet", "irreducible_kpoints",
    "monkhorst_pack", "SymmetryOperations", "find_symmetry", "Pseudopotential",
    "load_pseudopotential", "ground_state_document", "write_json", "save_density",
    "load_density", "FUNCTIONALS", "get_functional", "InputError", "ConvergenceWarning",
    "ConvergenceError", "PwsolidError", "parse_quantity", "angstrom", "electronvolt",
    "HARTREE_EV", "BOHR_ANGSTROM",
]
