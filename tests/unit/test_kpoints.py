"""Unit tests of pwsolid.kpoints: meshes, reduction, weights and input errors."""

import numpy as np
import pytest

from pwsolid import crystal as cr
from pwsolid.errors import InputError
from pwsolid.kpoints import KPointSet, irreducible_kpoints, monkhorst_pack
from pwsolid.symmetry import find_symmetry


def mesh_index(k, mesh, shift):
    """Flat C-order index of fractional points k on the mesh (asserts they are on it)."""
    n = np.asarray(mesh)
    j = np.asarray(k) * n - np.asarray(shift)
    assert np.allclose(j, np.rint(j), atol=1e-9), "point not on the mesh"
    j = np.rint(j).astype(int) % n
    return (j[..., 0] * n[1] + j[..., 1]) * n[2] + j[..., 2]


def orbit(kset: KPointSet, k):
    """Mesh indices of the images W^T k (and -W^T k with time reversal) of one point."""
    signs = (1, -1) if kset.time_reversal else (1,)
    imgs = [s * (w.T @ k) for w in kset.operations.rotations for s in signs]
    return set(mesh_index(np.array(imgs), kset.mesh, kset.shift).tolist())


CRYSTALS = {
    "diamond": lambda: cr.diamond(10.26, "Si"),
    "hcp": lambda: cr.hexagonal_close_packed(6.06, "Mg", c_over_a=1.624),
    "bcc": lambda: cr.body_centred_cubic(6.0, "Na"),
    "monoclinic": lambda: cr.Crystal([[6.0, 0, 0], [0, 7.0, 0], [1.5, 0, 8.0]], ("Ga", "As"),
                                     [[0, 0, 0], [0.3, 0.5, 0.2]]),
}


# -- the mesh ------------------------------------------------------------------------


def test_mesh_points_and_range():
    k = monkhorst_pack((4, 3, 2), (0, 0.5, 0.5))
    assert k.shape == (24, 3)
    assert np.all((k > -0.5) & (k <= 0.5))
    assert len(np.unique(np.round(k, 12), axis=0)) == 24
    assert np.allclose(np.unique(k[:, 0]), [-0.25, 0, 0.25, 0.5])
    assert np.allclose(np.unique(k[:, 1]), [-1 / 6, 1 / 6, 0.5])


def test_gamma_on_unshifted_mesh_only():
    assert np.any(np.all(monkhorst_pack((4, 4, 4)) == 0, axis=1))
    assert not np.any(np.all(monkhorst_pack((4, 4, 4), 0.5) == 0, axis=1))


@pytest.mark.parametrize("q", [1, 2, 3, 4, 5, 6])
def test_original_monkhorst_pack_points(q):
    # u_r = (2r - q - 1) / (2q), r = 1..q (Monkhorst & Pack, Phys. Rev. B 13, 5188 (1976))
    u = (2 * np.arange(1, q + 1) - q - 1) / (2 * q)
    u = np.where(u > 0.5, u - 1, np.where(u <= -0.5, u + 1, u))
    shift = 0.5 if q % 2 == 0 else 0.0
    ours = np.unique(monkhorst_pack((q, 1, 1), (shift, 0, 0))[:, 0])
    np.testing.assert_allclose(ours, np.sort(u), atol=1e-15)


# -- reduction -----------------------------------------------------------------------


@pytest.mark.parametrize("name", list(CRYSTALS))
@pytest.mark.parametrize("mesh, shift", [((4, 4, 4), 0.0), ((4, 4, 4), 0.5), ((3, 3, 3), 0.0),
                                         ((3, 3, 2), (0, 0, 0.5)), ((5, 4, 3), 0.0)])
def test_weights_and_orbit_completeness(name, mesh, shift):
    ops = find_symmetry(CRYSTALS[name]())
    kset = irreducible_kpoints(mesh, shift, ops)
    assert kset.full_mesh_size == np.prod(mesh)
    np.testing.assert_allclose(kset.weights.sum(), 1.0, rtol=1e-14)
    seen = np.zeros(kset.full_mesh_size, int)
    for k, w in zip(kset.fractional, kset.weights):
        members = orbit(kset, k)
        assert len(members) == round(w * kset.full_mesh_size)
        seen[list(members)] += 1
    assert np.all(seen == 1)            # every mesh point exactly once


@pytest.mark.parametrize("name", list(CRYSTALS))
def test_free_electron_levels_agree_over_an_orbit(name):
    # k ~ W^T k: the lowest free-electron levels |k + G|^2 must coincide on every image
    crystal = CRYSTALS[name]()
    b = crystal.reciprocal
    g = np.stack(np.meshgrid(*(np.arange(-3, 4),) * 3, indexing="ij"), -1).reshape(-1, 3) @ b
    ops = find_symmetry(crystal)
    kset = irreducible_kpoints((4, 4, 4), 0.0, ops)

    def levels(k):
        return np.sort(np.sum((k @ b + g) ** 2, axis=1))[:12]

    full = monkhorst_pack((4, 4, 4))
    for k in kset.fractional[:6]:
        ref = levels(k)
        for i in orbit(kset, k):
            np.testing.assert_allclose(levels(full[i]), ref, rtol=1e-12, atol=1e-12)


def test_rotation_convention_preserves_cartesian_length():
    # hcp has a non-orthogonal cell, where W^T (ours) and W (wrong) differ
    crystal = cr.hexagonal_close_packed(6.06, "Mg")
    ops = find_symmetry(crystal)
    k = np.random.default_rng(0).normal(size=(5, 3))
    b = crystal.reciprocal
    length = np.linalg.norm(k @ b, axis=1)
    wrong = False
    for w in ops.rotations:
        np.testing.assert_allclose(np.linalg.norm((k @ w) @ b, axis=1), length, rtol=1e-12)
        wrong |= not np.allclose(np.linalg.norm((k @ w.T) @ b, axis=1), length)
    assert wrong


def test_representatives_come_first_in_mesh_order():
    ops = find_symmetry(cr.diamond(10.26, "Si"))
    kset = irreducible_kpoints((6, 6, 6), 0.0, ops)
    rep = mesh_index(kset.fractional, kset.mesh, kset.shift)
    assert np.all(np.diff(rep) > 0)
    for k, r in zip(kset.fractional, rep):
        assert min(orbit(kset, k)) == r
    again = irreducible_kpoints((6, 6, 6), 0.0, ops)
    assert np.array_equal(again.fractional, kset.fractional)


@pytest.mark.parametrize("mesh, shift, expected", [
    # self-conjugate points (2k on the lattice) count once, the rest pair up
    ((4, 4, 4), 0.0, (64 - 8) // 2 + 8),
    ((4, 4, 4), 0.5, 64 // 2),
    ((3, 3, 3), 0.0, (27 - 1) // 2 + 1),
    ((2, 3, 1), (0.5, 0, 0.5), 6 // 2),
])
def test_time_reversal_on_a_p1_mesh(mesh, shift, expected):
    kset = irreducible_kpoints(mesh, shift)
    assert kset.n_kpoints == expected
    assert kset.operations.n_ops == 1
    none = irreducible_kpoints(mesh, shift, time_reversal=False)
    assert none.n_kpoints == np.prod(mesh)
    np.testing.assert_allclose(none.weights, 1.0 / np.prod(mesh))
    np.testing.assert_allclose(none.fractional, monkhorst_pack(mesh, shift))


def test_operations_not_preserving_the_mesh_are_dropped():
    ops = find_symmetry(cr.diamond(10.26, "Si"))
    mesh, shift = (4, 4, 2), 0.0
    kset = irreducible_kpoints(mesh, shift, ops)
    assert 1 < kset.operations.n_ops < ops.n_ops
    assert kset.operations.is_group()
    full = set(mesh_index(monkhorst_pack(mesh, shift), mesh, shift).tolist())
    kept = {w.tobytes() for w in kset.operations.rotations}
    for w in ops.rotations:
        image = monkhorst_pack(mesh, shift) @ w
        j = image * np.array(mesh)
        maps = np.allclose(j, np.rint(j)) and set(mesh_index(image, mesh, shift)) == full
        assert maps == (w.tobytes() in kept)
    np.testing.assert_allclose(kset.weights.sum(), 1.0)


def test_cubic_groups_kept_by_uniform_meshes():
    fcc = find_symmetry(cr.face_centred_cubic(7.6, "Al"))
    sc = find_symmetry(cr.simple_cubic(5.0, "Po"))
    for ops, mesh, shift in [(fcc, (4, 4, 4), 0.0), (fcc, (5, 5, 5), 0.0), (sc, (4, 4, 4), 0.5)]:
        assert irreducible_kpoints(mesh, shift, ops).operations is ops
    # a half-step shift along the fcc primitive reciprocal vectors points along [111]:
    # only the 12 operations of the trigonal subgroup (-3m) keep that mesh
    kept = irreducible_kpoints((4, 4, 4), 0.5, fcc).operations
    assert kept.n_ops == 12 and kept.is_group()


def test_cartesian_and_read_only():
    crystal = cr.face_centred_cubic(7.6, "Al")
    kset = irreducible_kpoints((2, 2, 2), 0.5, find_symmetry(crystal))
    cart = kset.cartesian(crystal.reciprocal)
    np.testing.assert_allclose(cart, kset.fractional @ crystal.reciprocal)
    with pytest.raises(ValueError):
        kset.weights[0] = 1.0


# -- errors --------------------------------------------------------------------------


@pytest.mark.parametrize("mesh", [(0, 4, 4), (4, 4), (4, 4, 4, 4), (4, 4.5, 4), (True, 2, 2),
                                  "444", 4, (-1, 2, 2)])
def test_bad_mesh(mesh):
    with pytest.raises(InputError) as err:
        irreducible_kpoints(mesh, 0.0)
    assert err.value.key == "brillouin_zone.mesh"
    assert err.value.value == mesh


@pytest.mark.parametrize("shift", [0.3, (0, 0.5), (0, 0, 1), (0, 0, -0.5), "half", (0, 0, None)])
def test_bad_shift(shift):
    with pytest.raises(InputError) as err:
        monkhorst_pack((2, 2, 2), shift)
    assert err.value.key == "brillouin_zone.shift"
    assert err.value.value == shift


def test_accepts_integral_floats_and_numpy_ints():
    a = monkhorst_pack(np.array([2, 2, 2]), np.array([0.5, 0.5, 0.0]))
    b = monkhorst_pack((2.0, 2, 2), (0.5, 0.5, 0))
    np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("make, mesh, shift", [
    (lambda: cr.diamond(10.26, "Si"), (2, 2, 2), 0.5),
    (lambda: cr.diamond(10.26, "Si"), (4, 4, 4), 0.5),
    (lambda: cr.diamond(10.26, "Si"), (4, 4, 2), 0.0),
    (lambda: cr.hexagonal_close_packed(6.06, "Mg", c_over_a=1.624), (4, 4, 3), 0.5),
])
def test_joined_points_give_the_full_group_average_of_any_function(make, mesh, shift):
    """Over the joined set, the weighted sum of f(k) equals the mesh average of the
    group average of f: exactly what symmetrising with the full group means."""
    from pwsolid.kpoints import join_by_full_symmetry

    crystal = make()
    ops = find_symmetry(crystal)
    mesh_set = irreducible_kpoints(mesh, shift, ops)
    joined = join_by_full_symmetry(mesh_set, ops)
    assert joined.operations.n_ops == ops.n_ops
    assert joined.weights.sum() == pytest.approx(1.0, abs=1e-14)
    assert joined.n_kpoints <= mesh_set.n_kpoints

    def f(frac):                      # periodic in the zone, of no particular symmetry
        x = 2 * np.pi * np.asarray(frac)
        return np.cos(x @ [1, 0, 2]) + 0.3 * np.sin(x @ [0, 1, -1] + 0.4) + 0.2 * np.cos(x @ [3, 1, 0])

    def group_average(frac):
        imgs = [s * (np.asarray(frac) @ w) for w in ops.rotations for s in (1, -1)]
        return np.mean([f(x) for x in imgs], axis=0)

    full = monkhorst_pack(mesh, shift)
    expected = np.mean(group_average(full))
    assert np.dot(joined.weights, group_average(joined.fractional)) == pytest.approx(expected,
                                                                                     abs=1e-13)
    # a mesh the whole group keeps is returned as it is
    gamma = irreducible_kpoints((4, 4, 4), 0.0, find_symmetry(cr.diamond(10.26, "Si")))
    assert join_by_full_symmetry(gamma, find_symmetry(cr.diamond(10.26, "Si"))) is gamma
