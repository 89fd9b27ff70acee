"""Unit tests of pwsolid.xc: identities, derivatives, safety and the registry.

Checks against published numbers live in tests/validation/test_xc_uniform_gas.py.
"""

import numpy as np
import pytest

from pwsolid import xc
from pwsolid.errors import InputError

# rs in [0.05, 50] on a log grid (bohr); rs = 1, where the Perdew-Zunger fit switches
# form and has a tiny kink, is not on the grid and is kept clear of by the step.
RS_GRID = np.geomspace(0.05, 50.0, 37)
ZETAS = np.array([-0.9, -0.5, -0.1, 0.0, 0.2, 0.6, 0.9])
# Relative step of the central differences: truncation error ~ step^2 ~ 1e-10 and
# round-off ~ 1e-16 / step ~ 1e-11, both far below the 1e-7 tolerance below.
STEP = 1e-5
DERIVATIVE_RTOL = 1e-7  # brief: potentials = d(n eps)/dn to ~1e-7 relative

UNPOLARIZED = {
    "slater": xc.slater_exchange,
    "pz81": xc.pz81_correlation,
    "pw92": xc.pw92_correlation,
}
POLARIZED = {
    "slater": xc.slater_exchange_polarized,
    "pz81": xc.pz81_correlation_polarized,
    "pw92": xc.pw92_correlation_polarized,
}


def test_rs_grid_avoids_the_pz81_switch():
    assert np.min(np.abs(RS_GRID - 1.0)) > 100 * STEP


@pytest.mark.parametrize("name", sorted(UNPOLARIZED))
def test_unpolarized_potential_is_derivative_of_energy_density(name):
    kernel = UNPOLARIZED[name]
    n = xc.density_from_radius(RS_GRID)
    h = STEP * n

    def energy_density(m):
        return m * kernel(m)[0]

    numerical = (energy_density(n + h) - energy_density(n - h)) / (2 * h)
    _, v = kernel(n)
    np.testing.assert_allclose(v, numerical, rtol=DERIVATIVE_RTOL, atol=0)


@pytest.mark.parametrize("name", sorted(POLARIZED))
def test_polarized_potentials_are_derivatives_of_energy_density(name):
    kernel = POLARIZED[name]
    rs, zeta = np.meshgrid(RS_GRID, ZETAS, indexing="ij")
    n = xc.density_from_radius(rs)
    up = 0.5 * n * (1 + zeta)
    down = 0.5 * n * (1 - zeta)
    # The step is relative to each spin density so that it never crosses zero.
    h_up = STEP * up
    h_down = STEP * down

    def energy_density(a, b):
        return (a + b) * kernel(a, b)[0]

    d_up = (energy_density(up + h_up, down) - energy_density(up - h_up, down)) / (2 * h_up)
    d_down = (energy_density(up, down + h_down)
              - energy_density(up, down - h_down)) / (2 * h_down)
    _, v_up, v_down = kernel(up, down)
    np.testing.assert_allclose(v_up, d_up, rtol=DERIVATIVE_RTOL, atol=0)
    np.testing.assert_allclose(v_down, d_down, rtol=DERIVATIVE_RTOL, atol=0)


@pytest.mark.parametrize("name", sorted(POLARIZED))
def test_polarized_forms_reduce_to_unpolarized_at_zero_zeta(name):
    n = xc.density_from_radius(RS_GRID)
    eps, v = UNPOLARIZED[name](n)
    eps_p, v_up, v_down = POLARIZED[name](n / 2, n / 2)
    # Same formulas evaluated along different paths: only round-off may differ.
    np.testing.assert_allclose(eps_p, eps, rtol=1e-13)
    np.testing.assert_allclose(v_up, v, rtol=1e-13)
    np.testing.assert_allclose(v_down, v, rtol=1e-13)


@pytest.mark.parametrize("name", sorted(POLARIZED))
def test_polarized_forms_are_symmetric_under_spin_flip(name):
    rs, zeta = np.meshgrid(RS_GRID, ZETAS, indexing="ij")
    n = xc.density_from_radius(rs)
    up, down = 0.5 * n * (1 + zeta), 0.5 * n * (1 - zeta)
    eps, v_up, v_down = POLARIZED[name](up, down)
    eps_f, v_up_f, v_down_f = POLARIZED[name](down, up)
    np.testing.assert_allclose(eps_f, eps, rtol=1e-12)  # round-off only
    np.testing.assert_allclose(v_up_f, v_down, rtol=1e-12)
    np.testing.assert_allclose(v_down_f, v_up, rtol=1e-12)


def test_pz81_is_continuous_at_rs_one():
    # The two pieces of Perdew & Zunger, Phys. Rev. B 23, 5048 (1981), join at
    # rs = 1 only to the rounding of the printed parameters: REFERENCES 1c [C] gives
    # eps_c(1-) = -0.059600 and eps_c(1+) = -0.059632 (zeta = 0), -0.031700 and
    # -0.031701 (zeta = 1). Tolerances: a little above those gaps.
    below = xc.density_from_radius(1.0 - 1e-9)
    above = xc.density_from_radius(1.0 + 1e-9)
    eps_below, v_below = xc.pz81_correlation(below)
    eps_above, v_above = xc.pz81_correlation(above)
    assert eps_below == pytest.approx(-0.059600, abs=1e-6)
    assert eps_above == pytest.approx(-0.059632, abs=1e-6)
    assert abs(eps_below - eps_above) < 4e-5
    # v_c contains the slope, 0.021500 vs 0.021487 (REFERENCES 1c): the jump in v_c is
    # the energy gap plus a third of the slope gap, about 3.6e-5.
    assert abs(v_below - v_above) < 5e-5
    eps1_below = xc.pz81_correlation_polarized(below, 0.0)[0]
    eps1_above = xc.pz81_correlation_polarized(above, 0.0)[0]
    assert abs(eps1_below - eps1_above) < 5e-6


def test_spin_interpolation_endpoints_and_curvature():
    f, df = xc.spin_interpolation(np.array([-1.0, 0.0, 1.0]))
    np.testing.assert_allclose(f, [1.0, 0.0, 1.0], atol=1e-15)
    np.testing.assert_allclose(df[1], 0.0, atol=1e-15)
    h = 1e-4  # central second difference; error ~ h^2 f''''/12 ~ 1e-9
    f2 = (xc.spin_interpolation(h)[0] - 2 * xc.spin_interpolation(0.0)[0]
          + xc.spin_interpolation(-h)[0]) / h ** 2
    assert f2 == pytest.approx(xc.SPIN_INTERPOLATION_CURVATURE, rel=1e-6)


def test_radius_and_density_are_inverse():
    rs = np.geomspace(1e-3, 1e3, 11)
    np.testing.assert_allclose(xc.wigner_seitz_radius(xc.density_from_radius(rs)), rs,
                               rtol=1e-14)


@pytest.mark.parametrize("shape", [(), (7,), (3, 4), (4, 5, 6), (2, 3, 4, 5)])
def test_shapes_are_preserved(shape):
    rng = np.random.default_rng(1)
    n = rng.uniform(1e-4, 1.0, size=shape)
    for kernel in UNPOLARIZED.values():
        for out in kernel(n):
            assert isinstance(out, np.ndarray)
            assert out.shape == shape and out.dtype == np.float64
    for kernel in POLARIZED.values():
        for out in kernel(0.7 * n, 0.3 * n):
            assert isinstance(out, np.ndarray)
            assert out.shape == shape and out.dtype == np.float64
    for name in xc.FUNCTIONALS:
        functional = xc.get_functional(name)
        assert all(a.shape == shape for a in functional.evaluate(n))
        assert all(a.shape == shape for a in functional.evaluate_polarized(n / 2, n / 2))


def test_grid_input_matches_pointwise_input():
    rng = np.random.default_rng(2)
    grid = rng.uniform(1e-3, 0.5, size=(6, 5, 4))
    for kernel in UNPOLARIZED.values():
        eps_grid, v_grid = kernel(grid)
        eps_flat, v_flat = kernel(grid.ravel())
        np.testing.assert_array_equal(eps_grid.ravel(), eps_flat)
        np.testing.assert_array_equal(v_grid.ravel(), v_flat)


def test_zero_tiny_and_negative_densities_are_safe():
    # pytest runs with filterwarnings=error: any RuntimeWarning fails this test.
    n = np.array([0.0, -1e-3, -1.0, 1e-31, xc.DENSITY_FLOOR, 1e-29, 1e-12, 0.1])
    empty = n <= xc.DENSITY_FLOOR
    for kernel in UNPOLARIZED.values():
        for out in kernel(n):
            assert np.all(out[empty] == 0.0)
            assert np.all(np.isfinite(out)) and np.all(out[~empty] < 0)
    up = np.array([0.0, -1e-3, 1e-31, 0.0, 0.2, 0.0, 1e-40, 0.05])
    down = np.array([0.0, 0.0, 1e-31, 0.3, -0.1, 1e-29, 0.2, 0.05])
    empty = np.array([True, True, True, False, False, False, False, False])
    for kernel in POLARIZED.values():
        eps, v_up, v_down = kernel(up, down)
        for out in (eps, v_up, v_down):
            assert np.all(out[empty] == 0.0) and np.all(np.isfinite(out))
        assert np.all(eps[~empty] < 0)
    for name in xc.FUNCTIONALS:
        f = xc.get_functional(name)
        assert np.all(np.isfinite(f.evaluate(np.zeros((3, 3, 3)))))
        assert np.all(np.isfinite(f.evaluate_polarized(np.zeros(4), -np.ones(4))))


def test_negative_spin_density_counts_as_zero():
    n = np.array([0.01, 0.3])
    for kernel in POLARIZED.values():
        clipped = kernel(n, -0.5 * n)
        reference = kernel(n, np.zeros_like(n))
        for a, b in zip(clipped, reference):
            np.testing.assert_array_equal(a, b)


def test_nan_density_is_not_hidden():
    eps, v = xc.pz81_correlation(np.array([np.nan, 0.1]))
    assert np.isnan(eps[0]) and np.isfinite(eps[1])


def test_exchange_of_empty_spin_channel_has_zero_potential():
    _, v_up, v_down = xc.slater_exchange_polarized(np.array([0.2]), np.array([0.0]))
    assert v_down[0] == 0.0 and v_up[0] < 0


def test_mismatched_spin_shapes_are_rejected():
    with pytest.raises(ValueError, match="shape"):
        xc.pw92_correlation_polarized(np.ones(3), np.ones(4))


# --- registry --------------------------------------------------------------------

def test_registry_names():
    assert xc.FUNCTIONALS == ("lda-pz81", "lda-pw92", "lda-pw92-precise", "lda-vwn", "lda-wigner",
                              "lda-hedin-lundqvist", "lda-von-barth-hedin",
                              "slater-exchange", "pbe", "pbe-exchange", "scan",
                              "scan-exchange", "r2scan", "r2scan-exchange")
    for name in xc.FUNCTIONALS:
        functional = xc.get_functional(name)
        assert isinstance(functional, xc.Functional)
        assert functional.name == name and functional.description
        assert functional.has_spin_polarized_form
    assert xc.get_functional("  LDA-PZ81 ") is xc.get_functional("lda-pz81")


def test_registry_combinations_add_exchange_and_correlation():
    n = xc.density_from_radius(np.array([0.7, 2.0, 8.0]))
    for name, correlation in [("lda-pz81", xc.pz81_correlation),
                              ("lda-pw92", xc.pw92_correlation)]:
        eps, v = xc.get_functional(name).evaluate(n)
        ex, vx = xc.slater_exchange(n)
        ec, vc = correlation(n)
        np.testing.assert_allclose(eps, ex + ec, rtol=1e-15)
        np.testing.assert_allclose(v, vx + vc, rtol=1e-15)
    eps, v = xc.get_functional("slater-exchange").evaluate(n)
    np.testing.assert_array_equal(eps, xc.slater_exchange(n)[0])


def test_unknown_name_lists_valid_names():
    with pytest.raises(InputError) as info:
        xc.get_functional("lda-unknown")
    error = info.value
    assert error.key == "exchange_correlation.functional"
    assert error.value == "lda-unknown"
    for name in xc.FUNCTIONALS:
        assert name in str(error)


def test_non_callable_non_string_is_rejected():
    with pytest.raises(InputError, match="callable"):
        xc.get_functional(42)


def test_functional_instance_passes_through():
    functional = xc.get_functional("lda-pw92")
    assert xc.get_functional(functional) is functional


def test_user_callable_is_wrapped():
    def half_exchange(n):
        eps, v = xc.slater_exchange(n)
        return 0.5 * eps, 0.5 * v

    functional = xc.get_functional(half_exchange)
    assert isinstance(functional, xc.Functional)
    assert functional.name == "half_exchange"
    n = np.full((2, 3, 4), 0.05)
    eps, v = functional.evaluate(n)
    np.testing.assert_allclose(eps, 0.5 * xc.slater_exchange(n)[0])
    assert v.shape == n.shape
    assert not functional.has_spin_polarized_form
    with pytest.raises(InputError, match="spin-polarised"):
        functional.evaluate_polarized(n / 2, n / 2)


def test_user_callable_of_wrong_shape_is_reported():
    functional = xc.get_functional(lambda n: (np.zeros(3), np.zeros(3)))
    with pytest.raises(InputError, match="shape"):
        functional.evaluate(np.ones((2, 2)))
    functional = xc.get_functional(lambda n: 1.0)
    with pytest.raises(InputError):
        functional.evaluate(np.ones(2))


def test_functional_is_frozen():
    functional = xc.get_functional("lda-pz81")
    with pytest.raises(AttributeError):
        functional.name = "other"
