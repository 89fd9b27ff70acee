"""Special points of the band-structure paths against the atomistic library's.

Source: W. Setyawan and S. Curtarolo, Comput. Mater. Sci. 49, 299 (2010), Tables 2-6,
which pwsolid.bandpath implements by hand and which the Atomic Simulation Environment
implements independently (``Cell.bandpath``). Both place each special point in
Cartesian coordinates of the same cell, so they must agree to rounding (1e-10 / bohr;
the coordinates are simple fractions of reciprocal vectors). Part of the survey of
hand-written code (DEVELOPERS.md, "Hand-written or library"): the path module is kept,
and this check ties it to the well-kept implementation.
"""

import numpy as np
import pytest

pytest.importorskip("ase")

from pwsolid import crystal as cr  # noqa: E402
from pwsolid.bandpath import standard_path  # noqa: E402
from pwsolid.interop.structure_files import atoms_from_crystal  # noqa: E402
from pwsolid.units import BOHR_ANGSTROM  # noqa: E402

CRYSTALS = {
    "fcc": lambda: cr.face_centred_cubic(7.6, "Al"),
    "bcc": lambda: cr.body_centred_cubic(8.0, "Na"),
    "simple cubic": lambda: cr.simple_cubic(5.0, "Li"),
    "hcp": lambda: cr.hexagonal_close_packed(6.0, "Mg", 1.62),
    "diamond": lambda: cr.diamond(10.26, "Si"),
}


@pytest.mark.parametrize("name", CRYSTALS)
def test_special_points_agree_with_the_atomistic_library(name):
    crystal = CRYSTALS[name]()
    spec = standard_path(crystal)
    atoms = atoms_from_crystal(crystal)
    theirs = atoms.cell.bandpath(npoints=0).special_points
    # 1/angstrom -> 1/bohr
    reciprocal = 2.0 * np.pi * np.asarray(atoms.cell.reciprocal()) * BOHR_ANGSTROM
    assert len(spec.points) >= 4
    for label in spec.points:
        key = "G" if label == "Γ" else label
        np.testing.assert_allclose(spec.cartesian(label), theirs[key] @ reciprocal,
                                   atol=1e-10, err_msg=f"{name}: point {label}")
