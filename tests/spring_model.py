"""A harmonic spring model with analytic forces, standing in for the SCF in phonon tests.

Every pair of atoms closer than ``cutoff`` in the reference crystal is joined by a
spring of stiffness ``k_along`` along the bond and ``k_across`` across it, attached
at the reference bond direction: the energy is exactly quadratic in the
displacements, so finite displacements must return its force constants to rounding
error (a check of the method that cannot be met by luck).
"""

import itertools

import numpy as np

from pwsolid.workflows.phonons import DisplacedForces


def spring_solver(reference, cutoff, k_along=0.1, k_across=0.02, calls=None):
    """``solver(crystal, settings, start) -> DisplacedForces`` of the model of ``reference``."""
    shifts = np.array(list(itertools.product(range(-1, 2), repeat=3))) @ reference.lattice
    ref = reference.cartesian_positions

    def solve(crystal, settings, start):
        if calls is not None:
            calls.append(crystal)
        du = crystal.positions - reference.positions
        u = (du - np.rint(du)) @ crystal.lattice
        f = np.zeros_like(u)
        for i, j in itertools.product(range(len(u)), repeat=2):
            for t in shifts:
                r = ref[j] + t - ref[i]
                d = np.linalg.norm(r)
                if 1e-8 < d < cutoff:
                    e = r / d
                    k = k_along * np.outer(e, e) + k_across * (np.eye(3) - np.outer(e, e))
                    f[i] += k @ (u[j] - u[i])
        return DisplacedForces(f, True, 7, 0.0)
    return solve
