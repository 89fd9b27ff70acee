"""Trial meta-GGA exchange of the Brightfilm coatings team: a pwsolid meta-GGA file.

The enhancement factor of the spin-unpolarised gas,

    F_x(s, alpha) = 1 + kappa - kappa / (1 + mu s^2 / kappa) + c (1 - alpha) exp(-alpha),

with kappa = 0.804 and mu = 10/81 (the second-order gradient coefficient of
exchange), and a hand-set iso-orbital term c = 0.17 that raises F_x to 1.17 where one
orbital dominates (alpha = 0) and lowers it where shells overlap (alpha > 1). At
s = 0 and alpha = 1 it is exactly 1: Slater exchange. Spin-polarised densities follow
the exact spin-scaling relation, written out below.

A demo of the file format only (invented, not fitted to anything); the testbench
finds that it breaks the two-electron bound F_x <= 1.174 at alpha = 0 and the local
Lieb-Oxford bound at large s. Try it with

    pwsolid xc-testbench --user-file inputs/functionals/brightfilm-meta-exchange.py

The file gives only the energy per electron: pwsolid takes the derivatives in the
densities, the gradient invariants and the kinetic-energy densities numerically.
"""

import math

import numpy as np

NAME = "brightfilm-meta-exchange"
DESCRIPTION = "Brightfilm trial meta-GGA exchange, PBE-like s term plus (1 - alpha) e^-alpha"
ENERGY_TERM = "exchange"

KAPPA = 0.804
MU = 10.0 / 81.0
C_ALPHA = 0.17
_KF2 = (3.0 * math.pi ** 2) ** (2.0 / 3.0)


def _exchange_per_volume(n, sigma, tau):
    """e_x of a spin-unpolarised density n with |grad n|^2 = sigma and kinetic density tau."""
    p = sigma / (4.0 * _KF2 * n ** (8.0 / 3.0))
    alpha = (tau - sigma / (8.0 * n)) / (0.3 * _KF2 * n ** (5.0 / 3.0))
    fx = 1.0 + KAPPA - KAPPA / (1.0 + MU * p / KAPPA) + C_ALPHA * (1.0 - alpha) * np.exp(-alpha)
    return -0.75 * (3.0 / math.pi) ** (1.0 / 3.0) * n ** (4.0 / 3.0) * fx


def meta_energy_per_electron(n_up, n_down, sigma_uu, sigma_ud, sigma_dd, tau_up, tau_down):
    # E_x[n_up, n_down] = (E_x[2 n_up] + E_x[2 n_down]) / 2, each spin channel alone
    total = np.zeros_like(n_up)
    for n_s, sigma_s, tau_s in ((n_up, sigma_uu, tau_up), (n_down, sigma_dd, tau_down)):
        occupied = n_s > 0
        part = np.zeros_like(n_s)
        part[occupied] = 0.5 * _exchange_per_volume(2.0 * n_s[occupied], 4.0 * sigma_s[occupied],
                                                    2.0 * tau_s[occupied])
        total += part
    return total / (n_up + n_down)
