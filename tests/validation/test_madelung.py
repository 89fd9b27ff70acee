"""Ewald sums against tabulated Madelung constants of point-charge crystals."""

import numpy as np
import pytest

from pwsolid.crystal import cesium_chloride, rocksalt
from pwsolid.electrostatics import ewald_energy

# Madelung constants referred to the nearest-neighbour distance d: E per ion pair = -alpha/d.
# Handbook values (e.g. C. Kittel, Introduction to Solid State Physics, ch. 3, table of
# Madelung constants: NaCl 1.747565, CsCl 1.762675); more digits in shared/REFERENCES.md
# section 2b (own Ewald sums) and OEIS A181152 for CsCl.


@pytest.mark.parametrize("builder, nn_over_a, alpha", [
    (rocksalt, 0.5, 1.747564595),
    (cesium_chloride, np.sqrt(3) / 2, 1.762674773),
])
def test_madelung_constant(builder, nn_over_a, alpha):
    a = 7.3
    crystal = builder(a, ["Na", "Cl"])
    energy = ewald_energy(crystal.lattice, crystal.cartesian_positions, [1.0, -1.0])
    # converged to 1e-10 Ha by construction: compare to all tabulated digits
    assert abs(-energy * nn_over_a * a - alpha) < 2e-9
