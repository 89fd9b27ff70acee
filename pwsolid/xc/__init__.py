"""Exchange and correlation of the uniform electron gas (layer 1).

Kernels (:mod:`pwsolid.xc.lda`, :mod:`pwsolid.xc.extra_lda`) take densities in
bohr^-3 of any shape and return energies per electron and potentials in hartree of
the same shape. Functionals are chosen by name through :func:`get_functional`
(:mod:`pwsolid.xc.registry`), loaded from users' Python files
(:mod:`pwsolid.xc.user`) and judged against exact conditions of the uniform gas
(:mod:`pwsolid.xc.conditions`) and its quantum Monte Carlo energies
(:mod:`pwsolid.xc.monte_carlo_data`).
"""

from .lda import (DENSITY_FLOOR, PW92_FERROMAGNETIC, PW92_PARAMAGNETIC,
                  PW92_SPIN_STIFFNESS, PZ81_FERROMAGNETIC, PZ81_PARAMAGNETIC,
                  SLATER_EXCHANGE_COEFFICIENT, SPIN_INTERPOLATION_CURVATURE,
                  PerdewWangParameters, PerdewZungerParameters, density_from_radius,
                  pw92_correlation, pw92_correlation_polarized, pz81_correlation,
                  pz81_correlation_polarized, slater_exchange, slater_exchange_polarized,
                  spin_interpolation, wigner_seitz_radius)
from .extra_lda import (HL_FERROMAGNETIC, HL_PARAMAGNETIC, VBH_FERROMAGNETIC,
                        VBH_PARAMAGNETIC, VWN_FERROMAGNETIC, VWN_PARAMAGNETIC,
                        VWN_SPIN_STIFFNESS, WIGNER_NUMERATOR, WIGNER_OFFSET,
                        HedinLundqvistParameters, VoskoWilkNusairParameters,
                        hedin_lundqvist_correlation, hedin_lundqvist_correlation_polarized,
                        von_barth_hedin_correlation, von_barth_hedin_correlation_polarized,
                        vwn_correlation, vwn_correlation_polarized, wigner_correlation,
                        wigner_correlation_polarized)
from .registry import (FILE_PREFIX, FUNCTIONALS, SLATER_EXCHANGE, Functional,
                       PolarizedKernel, UnpolarizedKernel, available_functionals,
                       combine_exchange_correlation, get_functional, register_functional,
                       unregister_functional)
from .derivatives import DEFAULT_RELATIVE_STEP, density_derivative, spin_derivatives
from .user import ENERGY_TERMS, load_user_functional
from .conditions import (GELL_MANN_BRUECKNER_C0, LIEB_OXFORD_LAMBDA, ConditionResult,
                         FunctionalParts, check_exact_conditions, functional_parts)
from .monte_carlo_data import (CEPERLEY_ALDER_1980, MonteCarloPoint,
                               free_gas_exchange_energy, free_gas_kinetic_energy)

__all__ = [
    "DENSITY_FLOOR",
    "SLATER_EXCHANGE_COEFFICIENT",
    "SPIN_INTERPOLATION_CURVATURE",
    "PerdewZungerParameters",
    "PerdewWangParameters",
    "PZ81_PARAMAGNETIC",
    "PZ81_FERROMAGNETIC",
    "PW92_PARAMAGNETIC",
    "PW92_FERROMAGNETIC",
    "PW92_SPIN_STIFFNESS",
    "wigner_seitz_radius",
    "density_from_radius",
    "spin_interpolation",
    "slater_exchange",
    "slater_exchange_polarized",
    "pz81_correlation",
    "pz81_correlation_polarized",
    "pw92_correlation",
    "pw92_correlation_polarized",
    "VoskoWilkNusairParameters",
    "HedinLundqvistParameters",
    "VWN_PARAMAGNETIC",
    "VWN_FERROMAGNETIC",
    "VWN_SPIN_STIFFNESS",
    "WIGNER_NUMERATOR",
    "WIGNER_OFFSET",
    "HL_PARAMAGNETIC",
    "HL_FERROMAGNETIC",
    "VBH_PARAMAGNETIC",
    "VBH_FERROMAGNETIC",
    "vwn_correlation",
    "vwn_correlation_polarized",
    "wigner_correlation",
    "wigner_correlation_polarized",
    "hedin_lundqvist_correlation",
    "hedin_lundqvist_correlation_polarized",
    "von_barth_hedin_correlation",
    "von_barth_hedin_correlation_polarized",
    "UnpolarizedKernel",
    "PolarizedKernel",
    "Functional",
    "FUNCTIONALS",
    "FILE_PREFIX",
    "SLATER_EXCHANGE",
    "combine_exchange_correlation",
    "get_functional",
    "register_functional",
    "unregister_functional",
    "available_functionals",
    "DEFAULT_RELATIVE_STEP",
    "density_derivative",
    "spin_derivatives",
    "ENERGY_TERMS",
    "load_user_functional",
    "GELL_MANN_BRUECKNER_C0",
    "LIEB_OXFORD_LAMBDA",
    "ConditionResult",
    "FunctionalParts",
    "functional_parts",
    "check_exact_conditions",
    "CEPERLEY_ALDER_1980",
    "MonteCarloPoint",
    "free_gas_kinetic_energy",
    "free_gas_exchange_energy",
]
