"""Unit tests of pwsolid.symmetry: operations and the density symmetriser."""

import itertools

import numpy as np
import pytest

from pwsolid import crystal as cr
from pwsolid.errors import InputError
from pwsolid.symmetry import (
    SymmetryOperations,
    find_symmetry,
    identity_only,
    make_density_symmetrizer,
)


def sphere_miller(reciprocal, grid_shape):
    """All Miller indices with |G| below the largest sphere that fits the grid."""
    half = (np.array(grid_shape) - 1) // 2
    # m_i = G . a_i / 2 pi: the plane m_i = h lies 2 pi h / |a_i| from the origin
    lattice = 2 * np.pi * np.linalg.inv(reciprocal).T
    face = np.min(2 * np.pi * half / np.linalg.norm(lattice, axis=1))
    # a box big enough to contain the whole sphere (|m_i| <= |G| |a_i| / 2 pi)
    box = np.ceil(face * np.linalg.norm(lattice, axis=1) / (2 * np.pi)).astype(int)
    m = np.stack(np.meshgrid(*(np.arange(-b, b + 1) for b in box), indexing="ij"),
                 -1).reshape(-1, 3)
    g = np.linalg.norm(m @ reciprocal, axis=1)
    m = m[g <= 0.999 * face]
    assert np.all(np.abs(m) <= half)         # fits the grid: no aliasing
    return m


def grid_fractional(shape):
    j = np.stack(np.meshgrid(*(np.arange(n) for n in shape), indexing="ij"), -1)
    return j.reshape(-1, 3)


def fourier_eval(field, x):
    """Trigonometric interpolation of a band-limited grid field at fractional points x."""
    shape = field.shape
    c = np.fft.fftn(field) / field.size
    m = np.stack(np.meshgrid(*(np.fft.fftfreq(n, 1.0 / n) for n in shape), indexing="ij"),
                 -1).reshape(-1, 3)
    return (np.exp(2j * np.pi * x @ m.T) @ c.ravel()).real


@pytest.fixture(scope="module")
def silicon():
    return cr.diamond(10.26, "Si")


# -- operations ----------------------------------------------------------------------


def test_identity_only_is_p1():
    ops = identity_only()
    assert ops.n_ops == 1 and ops.space_group_number == 1
    assert np.array_equal(ops.rotations[0], np.eye(3))
    assert ops.is_group()


def test_diamond_operations_form_a_nonsymmorphic_group(silicon):
    ops = find_symmetry(silicon)
    assert ops.n_ops == 48
    assert ops.is_group()
    assert np.all((ops.translations >= 0) & (ops.translations < 1))
    assert np.any(ops.translations != 0)          # glide/screw parts present
    assert np.all(np.abs(np.rint(np.linalg.det(ops.rotations))) == 1)
    # each operation maps the set of atoms onto itself
    for w, t in zip(ops.rotations, ops.translations):
        moved = silicon.positions @ w.T + t
        d = moved[:, None, :] - silicon.positions[None]
        assert np.all(np.any(np.all(np.abs(d - np.rint(d)) < 1e-8, axis=2), axis=1))


def test_arrays_are_read_only(silicon):
    ops = find_symmetry(silicon)
    with pytest.raises(ValueError):
        ops.rotations[0, 0, 0] = 2


def test_subgroup(silicon):
    ops = find_symmetry(silicon)
    assert ops.subgroup(np.ones(ops.n_ops, bool)) is ops
    mask = np.all(ops.translations == 0, axis=1)   # the symmorphic half: T_d
    sub = ops.subgroup(mask)
    assert sub.n_ops == 24 and sub.is_group()
    assert sub.space_group_number == 0 and sub.international_symbol == "subgroup of Fd-3m"
    with pytest.raises(ValueError):
        ops.subgroup(np.ones(3, bool))
    not_closed = ops.subgroup(np.flatnonzero(~mask)[:2].tolist() + [0])
    assert not not_closed.is_group()


def test_bad_tolerance(silicon):
    with pytest.raises(InputError) as err:
        find_symmetry(silicon, tolerance=-1.0)
    assert err.value.key == "symmetry.tolerance"


# -- density symmetriser ------------------------------------------------------------


def _check_grid_invariance(field, ops):
    shape = np.array(field.shape)
    j = grid_fractional(field.shape)
    for w, t in zip(ops.rotations, ops.translations):
        tj = t * shape
        assert np.allclose(tj, np.rint(tj)), "operation does not map the grid onto itself"
        jp = (j @ w.T + np.rint(tj).astype(int)) % shape        # grid index of W x + t
        np.testing.assert_allclose(field[tuple(jp.T)], field[tuple(j.T)], atol=1e-12)


@pytest.mark.parametrize("make", [
    lambda: cr.diamond(10.26, "Si"),
    lambda: cr.cesium_chloride(7.8, ["Cs", "Cl"]),
    lambda: cr.zincblende(10.68, ["Ga", "As"]),
])
def test_symmetrised_random_field_is_invariant_on_the_grid(make):
    crystal = make()
    ops = find_symmetry(crystal)
    shape = (16, 16, 16)          # divisible by 4: every W x + t is a grid point
    sym = make_density_symmetrizer(ops, shape, sphere_miller(crystal.reciprocal, shape))
    assert sym.n_dropped == 0
    field = np.random.default_rng(1).random(shape)
    out = sym(field)
    assert out.dtype == np.float64 and out.shape == shape
    _check_grid_invariance(out, ops)


def test_symmetrised_field_is_invariant_at_arbitrary_points():
    # hcp: non-orthogonal cell, screw axes, a grid not matched to the operations
    crystal = cr.hexagonal_close_packed(6.06, "Mg", c_over_a=1.624)
    ops = find_symmetry(crystal)
    assert ops.space_group_number == 194
    shape = (11, 11, 15)
    sym = make_density_symmetrizer(ops, shape, sphere_miller(crystal.reciprocal, shape))
    out = sym(np.random.default_rng(2).random(shape))
    x = np.random.default_rng(3).random((20, 3))
    ref = fourier_eval(out, x)
    for w, t in zip(ops.rotations, ops.translations):
        np.testing.assert_allclose(fourier_eval(out, x @ w.T + t), ref, atol=1e-12)


def test_idempotent_conserves_charge_and_stays_real(silicon):
    ops = find_symmetry(silicon)
    shape = (15, 15, 15)
    miller = sphere_miller(silicon.reciprocal, shape)
    sym = make_density_symmetrizer(ops, shape, miller)
    field = np.random.default_rng(4).random(shape)
    once = sym(field)
    np.testing.assert_allclose(sym(once), once, atol=1e-13)
    np.testing.assert_allclose(once.sum(), field.sum(), rtol=1e-13)      # G = 0 component
    # the G-space average itself is real: c_s(-m) = conj(c_s(m))
    flat = np.fft.fftn(field).ravel()[sym.grid_index]
    cs = sym.symmetrise_coefficients(flat)
    key = {tuple(v): i for i, v in enumerate(miller)}
    neg = np.array([key[tuple(-v)] for v in miller])
    np.testing.assert_allclose(cs[neg], np.conj(cs), atol=1e-10)


def test_symmetric_field_is_unchanged(silicon):
    # periodised Gaussians on the atoms: symmetric on a grid the operations map to itself
    shape = (16, 16, 16)
    x = grid_fractional(shape) / np.array(shape)
    images = np.array(list(itertools.product(range(-2, 3), repeat=3)))
    field = np.zeros(len(x))
    for tau in silicon.positions:
        d = (x[:, None, :] - tau - images[None]) @ silicon.lattice       # (n, images, 3)
        field += np.exp(-np.sum(d**2, axis=2) / 1.5**2).sum(axis=1)
    field = field.reshape(shape)
    ops = find_symmetry(silicon)
    miller = sphere_miller(silicon.reciprocal, shape)
    sym = make_density_symmetrizer(ops, shape, miller)
    # compare with the same field merely cut to the sphere (no averaging)
    cut = make_density_symmetrizer(identity_only(), shape, miller)
    np.testing.assert_allclose(sym(field), cut(field), atol=1e-12 * field.max())


def test_supercell_translations_enforce_the_primitive_period():
    crystal = cr.simple_cubic(5.0, "Po").supercell((2, 1, 1))
    ops = find_symmetry(crystal)
    assert ops.n_ops == 32          # 16 operations of the tetragonal cell, times 2 translations
    pure = np.all(ops.rotations == np.eye(3, dtype=int), axis=(1, 2))
    np.testing.assert_allclose(np.sort(ops.translations[pure, 0]), [0.0, 0.5])
    shape = (16, 8, 8)
    sym = make_density_symmetrizer(ops, shape, sphere_miller(crystal.reciprocal, shape))
    out = sym(np.random.default_rng(5).random(shape))
    np.testing.assert_allclose(out[:8], out[8:], atol=1e-13)


def test_orbit_cut_by_the_sphere_edge_is_dropped_whole(silicon):
    ops = find_symmetry(silicon)
    shape = (16, 16, 16)
    miller = sphere_miller(silicon.reciprocal, shape)
    # remove one member of the outermost shell, as rounding at G_max might
    g = np.linalg.norm(miller @ silicon.reciprocal, axis=1)
    outer = np.flatnonzero(np.isclose(g, g.max()))
    sphere = np.delete(miller, outer[0], axis=0)
    sym = make_density_symmetrizer(ops, shape, sphere)
    assert sym.n_dropped == len(outer) - 1    # the rest of that shell (one orbit or more)
    assert not np.any(sym.kept[np.isclose(np.delete(g, outer[0]), g.max())])
    out = sym(np.random.default_rng(6).random(shape))
    _check_grid_invariance(out, ops)
    np.testing.assert_allclose(sym(out), out, atol=1e-13)


def test_symmetriser_rejects_bad_set_up(silicon):
    ops = find_symmetry(silicon)
    miller = sphere_miller(silicon.reciprocal, (16, 16, 16))
    with pytest.raises(ValueError, match="alias"):
        make_density_symmetrizer(ops, (8, 8, 8), miller)
    with pytest.raises(ValueError, match="G = 0"):
        make_density_symmetrizer(ops, (16, 16, 16), miller[np.any(miller != 0, axis=1)])
    with pytest.raises(ValueError):
        make_density_symmetrizer(ops, (16, 16, 16), miller.astype(float))
    sym = make_density_symmetrizer(ops, (16, 16, 16), miller)
    with pytest.raises(ValueError):
        sym(np.zeros((8, 8, 8)))


def test_identity_symmetriser_is_a_low_pass_filter(silicon):
    shape = (12, 12, 12)
    sym = make_density_symmetrizer(identity_only(), shape,
                                   sphere_miller(silicon.reciprocal, shape))
    rng = np.random.default_rng(7)
    smooth = sym(rng.random(shape))
    np.testing.assert_allclose(sym(smooth), smooth, atol=1e-13)
    assert not np.allclose(smooth, rng.random(shape))


def test_operations_constructor_wraps_translations():
    ops = SymmetryOperations(np.eye(3, dtype=int)[None], [[1.0 - 1e-12, -0.25, 1.5]], "P1", 1)
    np.testing.assert_allclose(ops.translations, [[0.0, 0.75, 0.5]])
