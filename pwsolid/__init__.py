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
from .scf import GroundState, WavefunctionStart, ground_state, prepare
from .forces import AtomicForces, atomic_forces
from .stress import StressTensor, stress_tensor
from .settings import GroundStateSettings
from .symmetry import SymmetryOperations, find_symmetry
from .units import BOHR_ANGSTROM, HARTREE_EV, parse_quantity
from .eos import EOSFit, fit_all_forms, fit_equation_of_state
from .workflows import (BandStructure, ConvergenceStudy, DOSResult, StructureComparison,
                        UniformGasReport, VolumeScan, band_structure, compare_structures,
                        converge_settings, density_of_states, empirical_band_structure,
                        scan_volumes, testbench_report, uniform_gas_table)
from .workflows.relaxation import (RelaxationResult, RelaxationSettings, relax_lattice,
                                   relax_structure)
from .workflows.elastic_constants import ElasticResult, ElasticSettings, elastic_constants
from .workflows.phonons import PhononResult, PhononSettings, phonons
from .workflows.jellium_surface import JelliumSurfaceStudy, SurfaceSettings, jellium_surface
from .xc import FUNCTIONALS, get_functional, load_user_functional
from .xc.conditions import check_exact_conditions


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
    "HARTREE_EV", "BOHR_ANGSTROM", "EOSFit", "fit_equation_of_state", "fit_all_forms",
    "scan_volumes", "VolumeScan", "converge_settings", "ConvergenceStudy", "compare_structures",
    "StructureComparison", "band_structure", "empirical_band_structure", "BandStructure",
    "density_of_states", "DOSResult", "testbench_report", "uniform_gas_table", "UniformGasReport",
    "load_user_functional", "check_exact_conditions", "WavefunctionStart",
    "AtomicForces", "atomic_forces", "StressTensor", "stress_tensor",
    "relax_structure", "relax_lattice", "RelaxationSettings", "RelaxationResult",
    "elastic_constants", "ElasticSettings", "ElasticResult",
    "PhononResult", "PhononSettings", "phonons",
    "jellium_surface", "SurfaceSettings", "JelliumSurfaceStudy",
]

# vibrational thermodynamics and the quasi-harmonic approximation
from .thermodynamics import VibrationalSpectrum, harmonic_thermodynamics  # noqa: E402
from .workflows.thermal_expansion import (QuasiHarmonicResult, quasi_harmonic,  # noqa: E402
                                       quasi_harmonic_from_spectra)
from .workflows.phonon_thermodynamics import (VibrationalThermodynamics,  # noqa: E402
                                                   vibrational_thermodynamics)

__all__ += ["VibrationalSpectrum", "harmonic_thermodynamics", "QuasiHarmonicResult",
            "quasi_harmonic", "quasi_harmonic_from_spectra", "VibrationalThermodynamics",
            "vibrational_thermodynamics"]
