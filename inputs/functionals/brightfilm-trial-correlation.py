"""Trial correlation of the Brightfilm coatings team: a pwsolid functional file.

A two-parameter form per spin branch,

    eps(rs) = -c ln(1 + b / rs)          (hartree, rs in bohr),

which has the Gell-Mann-Brueckner logarithm c ln rs at high density and a -c b / rs
tail at low density. The branches are joined by the usual spin interpolation,
eps_c = eps_para + f(zeta) (eps_ferro - eps_para). c is the exact high-density
coefficient, (1 - ln 2)/pi^2 Ha for the paramagnetic gas and half of it for the
ferromagnetic one; b was set by hand so that each branch meets the Ceperley-Alder
correlation energy at rs = 5 (-28.16 and -15.41 mHa).

Try it with

    pwsolid xc-testbench --user-file inputs/functionals/brightfilm-trial-correlation.py

or use it in an input file (the path is relative to the input file):

    [exchange_correlation]
    functional = "file:functionals/brightfilm-trial-correlation.py"

The file defines only the energy: pwsolid obtains the potentials by numerical
differentiation. A function potentials(n_up, n_down) -> (v_up, v_down) may be added
to supply them analytically.
"""

import math

import numpy as np

NAME = "brightfilm-trial"
DESCRIPTION = "Brightfilm trial correlation, -c ln(1 + b/rs) per spin branch"
ENERGY_TERM = "correlation"     # Slater exchange is added by pwsolid

C_PARA = (1.0 - math.log(2.0)) / math.pi ** 2    # Ha
B_PARA = 7.37                                    # bohr
C_FERRO = 0.5 * C_PARA
B_FERRO = 8.47


def energy_per_electron(n_up, n_down):
    """Correlation energy per electron (Ha) for spin densities in bohr^-3."""
    n = n_up + n_down
    rs = np.cbrt(3.0 / (4.0 * np.pi * n))
    zeta = np.clip((n_up - n_down) / n, -1.0, 1.0)
    f = ((1.0 + zeta) ** (4.0 / 3.0) + (1.0 - zeta) ** (4.0 / 3.0) - 2.0) / (2.0 ** (4.0 / 3.0) - 2.0)
    para = -C_PARA * np.log1p(B_PARA / rs)
    ferro = -C_FERRO * np.log1p(B_FERRO / rs)
    return para + f * (ferro - para)
