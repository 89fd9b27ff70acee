"""Exchange and correlation of the uniform electron gas (layer 1).

Kernels (:mod:`pwsolid.xc.lda`) take densities in bohr^-3 of any shape and return
energies per electron and potentials in hartree of the same shape. Functionals are
chosen by name through :func:`get_functional` (:mod:`pwsolid.xc.registry`).
"""

from .lda import (DENSITY_FLOOR, PW92_FERROMAGNETIC, PW92_PARAMAGNETIC,
                  PW92_SPIN_STIFFNESS, PZ81_FERROMAGNETIC, PZ81_PARAMAGNETIC,
                  SLATER_EXCHANGE_COEFFICIENT, SPIN_INTERPOLATION_CURVATURE,
                  PerdewWangParameters, PerdewZungerParameters, density_from_radius,
                  pw92_correlation, pw92_correlation_polarized, pz81_correlation,
                  pz81_correlation_polarized, slater_exchange, slater_exchange_polarized,
                  spin_interpolation, wigner_seitz_radius)
from .registry import (FUNCTIONALS, Functional, PolarizedKernel, UnpolarizedKernel,
                       get_functional)

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
    "UnpolarizedKernel",
    "PolarizedKernel",
    "Functional",
    "FUNCTIONALS",
    "get_functional",
]
