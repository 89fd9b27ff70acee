"""Validation of space groups, irreducible k-point counts and weights against the world."""

import warnings

import numpy as np
import pytest
import spglib

from pwsolid import crystal as cr
from pwsolid.crystal import ELEMENTS
from pwsolid.kpoints import irreducible_kpoints, monkhorst_pack
from pwsolid.symmetry import find_symmetry


def mp_shift(q):
    """Shift that reproduces the original Monkhorst-Pack points u_r = (2r - q - 1)/(2q)."""
    return 0.5 if q % 2 == 0 else 0.0


# -- space groups (International Tables for Crystallography, Vol. A -- common practice)


@pytest.mark.parametrize("crystal, symbol, number, n_ops", [
    (cr.diamond(10.26, "Si"), "Fd-3m", 227, 48),
    (cr.hexagonal_close_packed(6.06, "Mg", c_over_a=1.624), "P6_3/mmc", 194, 24),
    (cr.rocksalt(10.6, ["Na", "Cl"]), "Fm-3m", 225, 48),
    (cr.zincblende(10.68, ["Ga", "As"]), "F-43m", 216, 24),
    (cr.cesium_chloride(7.8, ["Cs", "Cl"]), "Pm-3m", 221, 48),
])
def test_space_groups(crystal, symbol, number, n_ops):
    ops = find_symmetry(crystal)
    assert ops.international_symbol == symbol
    assert ops.space_group_number == number
    assert ops.n_ops == n_ops          # primitive cells: the order of the point group


# -- Monkhorst & Pack, Phys. Rev. B 13, 5188 (1976) ---------------------------------


def test_fcc_four_by_four_by_four_has_ten_points():
    # Monkhorst & Pack, Phys. Rev. B 13, 5188 (1976): q = 4 fcc set of 10 points
    ops = find_symmetry(cr.face_centred_cubic(7.6, "Al"))
    assert irreducible_kpoints((4, 4, 4), 0.5, ops).n_kpoints == 10


# REFERENCES 8a: counts under O_h computed independently [C]; the fcc 2/10/28/60 and
# sc 1/4/10/20 for q = 2/4/6/8 also from memory of the Monkhorst-Pack paper.
TABLE_8A = {
    "simple cubic": (lambda: cr.simple_cubic(5.0, "Po"), [1, 1, 4, 4, 10, 10, 20]),
    "bcc": (lambda: cr.body_centred_cubic(6.0, "Na"), [1, 2, 4, 6, 10, 14, 26]),
    "fcc": (lambda: cr.face_centred_cubic(7.6, "Al"), [1, 2, 4, 10, 10, 28, 60]),
}


@pytest.mark.parametrize("lattice", list(TABLE_8A))
def test_monkhorst_pack_counts_table(lattice):
    make, counts = TABLE_8A[lattice]
    ops = find_symmetry(make())
    ours = [irreducible_kpoints((q,) * 3, mp_shift(q), ops).n_kpoints for q in (1, 2, 3, 4, 5, 6, 8)]
    assert ours == counts


def test_chadi_cohen_two_point_set():
    # Chadi & Cohen, Phys. Rev. B 8, 5747 (1973): fcc points (2 pi/a)(1/4,1/4,1/4) and
    # (2 pi/a)(1/4,1/4,3/4) with weights 1/4 and 3/4 (REFERENCES 8a, recomputed [C])
    a = 7.6
    crystal = cr.face_centred_cubic(a, "Al")
    kset = irreducible_kpoints((2, 2, 2), 0.5, find_symmetry(crystal))
    assert kset.n_kpoints == 2
    cart = np.sort(np.abs(kset.cartesian(crystal.reciprocal)) / (2 * np.pi / a), axis=1)
    order = np.argsort(kset.weights)
    np.testing.assert_allclose(kset.weights[order], [0.25, 0.75], rtol=1e-14)
    np.testing.assert_allclose(cart[order], [[0.25, 0.25, 0.25], [0.25, 0.25, 0.75]],
                               atol=1e-14)


# -- agreement with spglib's own reduction (Togo & Tanaka, spglib) ------------------


def _spglib_labels(crystal, mesh, shift):
    """spglib orbit label of each point of our mesh (C order of monkhorst_pack)."""
    cell = (crystal.lattice, crystal.positions, [ELEMENTS.index(s) + 1 for s in crystal.species])
    is_shift = np.rint(2 * np.broadcast_to(shift, 3)).astype(int)
    with warnings.catch_warnings():
        # spglib >= 2.5 warns about its old error-handling mode on every call
        warnings.simplefilter("ignore", DeprecationWarning)
        mapping, address = spglib.get_ir_reciprocal_mesh(mesh, cell, is_shift=is_shift)
    n = np.array(mesh)
    j = address % n                               # k = (address + shift/2) / mesh
    labels = np.empty(len(mapping), int)
    labels[(j[:, 0] * n[1] + j[:, 1]) * n[2] + j[:, 2]] = mapping
    return labels


def _our_labels(kset):
    """Our orbit label of each mesh point, by unfolding the irreducible set."""
    n = np.array(kset.mesh)
    labels = np.full(kset.full_mesh_size, -1)
    signs = (1, -1) if kset.time_reversal else (1,)
    for i, k in enumerate(kset.fractional):
        imgs = np.array([s * (k @ w) for w in kset.operations.rotations for s in signs])
        j = np.rint(imgs * n - np.array(kset.shift)).astype(int) % n
        labels[(j[:, 0] * n[1] + j[:, 1]) * n[2] + j[:, 2]] = i
    assert np.all(labels >= 0)
    return labels


def _same_partition(a, b):
    pairs = np.unique(np.stack([a, b]), axis=1)
    return len(pairs[0]) == len(np.unique(a)) == len(np.unique(b))


CELLS = {
    "diamond": lambda: cr.diamond(10.26, "Si"),
    "zincblende": lambda: cr.zincblende(10.68, ["Ga", "As"]),
    "bcc": lambda: cr.body_centred_cubic(6.0, "Na"),
    "hcp": lambda: cr.hexagonal_close_packed(6.06, "Mg", c_over_a=1.624),
    "triclinic": lambda: cr.Crystal([[6.0, 0, 0], [0.7, 7.0, 0], [0.4, 0.9, 8.0]],
                                    ("Si", "O", "O"),
                                    [[0, 0, 0], [0.2, 0.3, 0.1], [-0.2, -0.3, -0.1]]),
    "monoclinic": lambda: cr.Crystal([[6.0, 0, 0], [0, 7.0, 0], [1.5, 0, 8.0]], ("Ga", "As"),
                                     [[0, 0, 0], [0.3, 0.5, 0.2]]),
}
MESHES = [((2, 2, 2), 0.0), ((3, 3, 3), 0.0), ((4, 4, 4), 0.0), ((4, 4, 4), 0.5),
          ((5, 5, 5), 0.5), ((6, 6, 6), 0.5), ((3, 3, 3), (0, 0, 0.5))]


@pytest.mark.parametrize("name", list(CELLS))
@pytest.mark.parametrize("mesh, shift", MESHES)
def test_agrees_with_spglib(name, mesh, shift):
    crystal = CELLS[name]()
    kset = irreducible_kpoints(mesh, shift, find_symmetry(crystal))
    ref = _spglib_labels(crystal, mesh, shift)
    ours = _our_labels(kset)
    assert kset.n_kpoints == len(np.unique(ref))
    assert _same_partition(ours, ref)            # same orbits, hence the same weights
    ref_w = np.bincount(ref)[np.unique(ref)] / len(ref)
    np.testing.assert_allclose(np.sort(kset.weights), np.sort(ref_w), rtol=1e-14)


@pytest.mark.parametrize("mesh, shift", [((4, 4, 2), 0.0), ((6, 6, 4), 0.5), ((3, 3, 2), 0.0)])
@pytest.mark.parametrize("name", ["hcp", "monoclinic"])
def test_agrees_with_spglib_on_non_uniform_meshes(name, mesh, shift):
    # meshes that keep the point group of these cells
    crystal = CELLS[name]()
    kset = irreducible_kpoints(mesh, shift, find_symmetry(crystal))
    assert _same_partition(_our_labels(kset), _spglib_labels(crystal, mesh, shift))


@pytest.mark.parametrize("mesh, shift", [((4, 4, 2), 0.0), ((6, 6, 4), 0.5), ((3, 3, 2), 0.0)])
def test_symmetry_breaking_mesh_refines_spglib(mesh, shift):
    # A non-cubic mesh of a cubic cell: spglib also joins single points that some
    # operation happens to map onto the mesh; we keep only the operations that map
    # the whole mesh onto itself (what symmetrising the density needs), so every
    # one of our orbits lies inside one of spglib's.
    crystal = CELLS["diamond"]()
    kset = irreducible_kpoints(mesh, shift, find_symmetry(crystal))
    ours, ref = _our_labels(kset), _spglib_labels(crystal, mesh, shift)
    assert kset.n_kpoints >= len(np.unique(ref))
    pairs = np.unique(np.stack([ours, ref]), axis=1)
    assert len(pairs[0]) == len(np.unique(ours))   # each of our orbits maps to one of theirs


def test_mesh_points_match_spglib_addresses():
    crystal = CELLS["hcp"]()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)
        _, address = spglib.get_ir_reciprocal_mesh((4, 3, 2), (crystal.lattice,
                                                   crystal.positions, [12, 12]),
                                                   is_shift=[1, 0, 1])
    theirs = (address + np.array([0.5, 0, 0.5])) / np.array([4, 3, 2])
    theirs = theirs - np.ceil(theirs - 0.5)                   # to (-1/2, 1/2]
    ours = monkhorst_pack((4, 3, 2), (0.5, 0, 0.5))
    assert set(map(tuple, np.round(ours, 12))) == set(map(tuple, np.round(theirs, 12)))
