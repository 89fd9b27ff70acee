"""Workflows: sequences of ground states (layer 5).

Equation-of-state scans, relaxations, convergence studies, structure comparisons, band
structures, densities of states and the uniform-gas testbench.
"""

from .band_structure import BandStructure, band_structure, empirical_band_structure
from .convergence import ConvergenceStudy, converge_settings
from .density_of_states import DOSResult, density_of_states
from .elastic_constants import ElasticResult, ElasticSettings, elastic_constants
from .equation_of_state import VolumeScan, scan_volumes
from .pseudo_table import TableEntryResult, fit_pseudopotential
from .lattice_test_set import LatticeTestSet, lattice_test_set
from .relaxation import RelaxationResult, RelaxationSettings, relax_lattice, relax_structure
from .structures import StructureComparison, compare_structures
from .jellium_surface import JelliumSurfaceStudy, SurfaceSettings, jellium_surface
from .uniform_gas import UniformGasReport, testbench_report, uniform_gas_table
from .phonons import PhononResult, PhononSettings, phonons

__all__ = [
    "BandStructure", "band_structure", "empirical_band_structure", "ConvergenceStudy",
    "converge_settings", "DOSResult", "density_of_states", "VolumeScan", "scan_volumes",
    "StructureComparison", "compare_structures", "UniformGasReport", "testbench_report",
    "uniform_gas_table", "RelaxationResult", "RelaxationSettings", "relax_lattice",
    "relax_structure", "ElasticResult", "ElasticSettings", "elastic_constants",
    "TableEntryResult", "fit_pseudopotential",
    "LatticeTestSet", "lattice_test_set",
    "PhononResult", "PhononSettings", "phonons",
    "JelliumSurfaceStudy", "SurfaceSettings", "jellium_surface",
]

# vibrational thermodynamics and the quasi-harmonic approximation
from .thermal_expansion import QuasiHarmonicResult, quasi_harmonic, quasi_harmonic_from_spectra
from .phonon_thermodynamics import VibrationalThermodynamics, vibrational_thermodynamics

__all__ += ["QuasiHarmonicResult", "quasi_harmonic", "quasi_harmonic_from_spectra",
            "VibrationalThermodynamics", "vibrational_thermodynamics"]
