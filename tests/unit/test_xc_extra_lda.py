"""Unit tests of the further LDA correlation kernels (pwsolid.xc.extra_lda), of the
numerical derivatives (pwsolid.xc.derivatives) and of the extended registry.

Identities and derivatives only; published numbers are checked in
tests/validation/test_xc_exact_conditions.py.
"""

import math

import numpy as np
import pytest

from pwsolid import xc
from pwsolid.xc import extra_lda

RS_GRID = np.geomspace(0.01, 1e4, 41)
ZETAS = np.array([-0.95, -0.5, -0.1, 0.0, 0.2, 0.6, 0.95])
# Relative step of the second-order central differences below: truncation ~ step^2
# ~ 1e-10, round-off ~ 1e-16 / step ~ 1e-11; tolerance 1e-7 (the brief's accuracy).
STEP = 1e-5
RTOL = 1e-7

UNPOLARIZED = {
    "vwn": xc.vwn_correlation,
    "wigner": xc.wigner_correlation,
    "hedin-lundqvist": xc.hedin_lundqvist_correlation,
    "von-barth-hedin": xc.von_barth_hedin_correlation,
}
POLARIZED = {
    "vwn": xc.vwn_correlation_polarized,
    "wigner": xc.wigner_correlation_polarized,
    "hedin-lundqvist": xc.hedin_lundqvist_correlation_polarized,
    "von-barth-hedin": xc.von_barth_hedin_correlation_polarized,
}


def _spins(rs, zeta):
    n = xc.density_from_radius(rs)
    return 0.5 * n * (1 + zeta), 0.5 * n * (1 - zeta)


@pytest.mark.parametrize("name", sorted(UNPOLARIZED))
def test_unpolarized_potential_is_derivative(name):
    kernel = UNPOLARIZED[name]
    n = xc.density_from_radius(RS_GRID)
    h = STEP * n
    numerical = ((n + h) * kernel(n + h)[0] - (n - h) * kernel(n - h)[0]) / (2 * h)
    np.testing.assert_allclose(kernel(n)[1], numerical, rtol=RTOL, atol=0)


@pytest.mark.parametrize("name", sorted(POLARIZED))
def test_polarized_potentials_are_derivatives(name):
    kernel = POLARIZED[name]
    rs, zeta = np.meshgrid(RS_GRID, ZETAS, indexing="ij")
    up, down = _spins(rs, zeta)
    h_up, h_down = STEP * up, STEP * down

    def e(a, b):
        return (a + b) * kernel(a, b)[0]

    d_up = (e(up + h_up, down) - e(up - h_up, down)) / (2 * h_up)
    d_down = (e(up, down + h_down) - e(up, down - h_down)) / (2 * h_down)
    _, v_up, v_down = kernel(up, down)
    np.testing.assert_allclose(v_up, d_up, rtol=RTOL, atol=0)
    np.testing.assert_allclose(v_down, d_down, rtol=RTOL, atol=0)


@pytest.mark.parametrize("name", sorted(POLARIZED))
def test_polarized_reduces_to_unpolarized_and_is_spin_symmetric(name):
    n = xc.density_from_radius(RS_GRID)
    eps, v = UNPOLARIZED[name](n)
    eps_p, v_up, v_down = POLARIZED[name](n / 2, n / 2)
    # same formulas along different paths: round-off only
    np.testing.assert_allclose(eps_p, eps, rtol=1e-13)
    np.testing.assert_allclose(v_up, v, rtol=1e-13)
    np.testing.assert_allclose(v_down, v, rtol=1e-13)
    rs, zeta = np.meshgrid(RS_GRID, ZETAS, indexing="ij")
    up, down = _spins(rs, zeta)
    a = POLARIZED[name](up, down)
    b = POLARIZED[name](down, up)
    np.testing.assert_allclose(b[0], a[0], rtol=1e-12)
    np.testing.assert_allclose(b[1], a[2], rtol=1e-12)
    np.testing.assert_allclose(b[2], a[1], rtol=1e-12)


def test_ferromagnetic_ends_of_the_interpolations():
    # At zeta = 1 the interpolations reduce to the ferromagnetic branch alone.
    rs = np.array([0.5, 2.0, 10.0])
    up, down = _spins(rs, np.ones(3))
    eps, _, _ = xc.vwn_correlation_polarized(up, down)
    g_ferro, _ = extra_lda._vwn_g(np.sqrt(rs), xc.VWN_FERROMAGNETIC)
    np.testing.assert_allclose(eps, g_ferro, rtol=1e-13)
    eps, _, _ = xc.von_barth_hedin_correlation_polarized(up, down)
    ferro, _, _ = extra_lda._hl_branch(rs, xc.VBH_FERROMAGNETIC)
    np.testing.assert_allclose(eps, ferro, rtol=1e-13)


def test_hedin_lundqvist_potential_closed_form():
    # v_c = -C ln(1 + A/rs) (the Hedin-Lundqvist potential) follows from eps_c and
    # v = eps - (rs/3) d eps/d rs: an identity of the form, to round-off.
    rs = np.geomspace(0.05, 500.0, 30)
    _, v = xc.hedin_lundqvist_correlation(xc.density_from_radius(rs))
    p = xc.HL_PARAMAGNETIC
    np.testing.assert_allclose(v, -p.c * np.log1p(p.r / rs), rtol=1e-12)


def test_hedin_lundqvist_series_joins_closed_form():
    # The large-x series replaces the closed form beyond x = 4; both must agree there
    # (the closed form loses only ~x^3 * 1e-16 ~ 1e-14 relative at x = 4).
    x = np.array([4.0 * (1 - 1e-12), 4.0 * (1 + 1e-12)])
    f = extra_lda._hedin_lundqvist_f(x)
    assert f[0] == pytest.approx(f[1], rel=1e-10)
    closed = (1 + x[1] ** 3) * math.log1p(1 / x[1]) + x[1] / 2 - x[1] ** 2 - 1 / 3
    assert f[1] == pytest.approx(closed, rel=1e-10)
    # and the series keeps the asymptote 3/(4x) exactly where the closed form fails
    x = np.array([1e6])
    assert extra_lda._hedin_lundqvist_f(x)[0] == pytest.approx(0.75e-6, rel=1e-6)


def test_wigner_ignores_polarisation():
    rs = np.array([1.0, 4.0])
    n = xc.density_from_radius(rs)
    eps0, v0 = xc.wigner_correlation(n)
    eps1, v_up, v_down = xc.wigner_correlation_polarized(n, np.zeros(2))
    np.testing.assert_array_equal(eps1, eps0)
    np.testing.assert_array_equal(v_up, v0)
    np.testing.assert_array_equal(v_down, v0)


def test_new_kernels_are_safe_at_zero_and_negative_densities():
    # filterwarnings = error: any RuntimeWarning fails this test.
    n = np.array([0.0, -1e-3, 1e-31, xc.DENSITY_FLOOR, 1e-29, 1e-12, 0.1, 1e3])
    empty = n <= xc.DENSITY_FLOOR
    for kernel in UNPOLARIZED.values():
        for out in kernel(n):
            assert np.all(out[empty] == 0.0)
            assert np.all(np.isfinite(out)) and np.all(out[~empty] < 0)
    up = np.array([0.0, -1e-3, 0.0, 0.2, 1e-40, 0.05])
    down = np.array([0.0, 0.0, 0.3, -0.1, 0.2, 0.05])
    for kernel in POLARIZED.values():
        eps, v_up, v_down = kernel(up, down)
        for out in (eps, v_up, v_down):
            assert np.all(out[:2] == 0.0) and np.all(np.isfinite(out))
        assert np.all(eps[2:] < 0)


@pytest.mark.parametrize("shape", [(), (5,), (2, 3, 4)])
def test_shapes_preserved(shape):
    n = np.full(shape, 0.03)
    for kernel in UNPOLARIZED.values():
        assert all(out.shape == shape for out in kernel(n))
    for kernel in POLARIZED.values():
        assert all(out.shape == shape for out in kernel(0.6 * n, 0.4 * n))


# --- numerical derivatives ------------------------------------------------------------

def test_numerical_spin_derivatives_match_analytic_potentials():
    # Fourth-order central differences with relative step 1e-3 (module notes: ~1e-11
    # in practice, 1e-8 promised). Tolerance 1e-9, between the two.
    rs, zeta = np.meshgrid(np.geomspace(0.01, 100, 25), [-0.9, -0.3, 0.0, 0.4, 0.9],
                           indexing="ij")
    up, down = _spins(rs, zeta)
    for kernel in (xc.pw92_correlation_polarized, xc.slater_exchange_polarized,
                   xc.vwn_correlation_polarized):
        d_up, d_down = xc.spin_derivatives(lambda a, b: kernel(a, b)[0], up, down)
        _, v_up, v_down = kernel(up, down)
        np.testing.assert_allclose(d_up, v_up, rtol=1e-9)
        np.testing.assert_allclose(d_down, v_down, rtol=1e-9)


def test_numerical_derivative_at_an_empty_spin_channel():
    # One-sided stencils at n_down = 0 with Richardson extrapolation of the h^(1/3)
    # error of the n_down^(4/3) terms: the module notes promise ~2e-7 relative for
    # PW92/VWN correlation (measured 1.7e-7), tolerance 1e-6 of the potential's scale.
    # For exchange v_down = 0 exactly, and the extrapolation recovers it (~1e-9).
    # For the up spin (full channel) the central stencil keeps full accuracy.
    rs = np.array([0.5, 2.0, 10.0])
    up, down = _spins(rs, np.ones(3))
    for kernel in (xc.pw92_correlation_polarized, xc.vwn_correlation_polarized,
                   xc.slater_exchange_polarized):
        d_up, d_down = xc.spin_derivatives(lambda a, b: kernel(a, b)[0], up, down)
        _, v_up, v_down = kernel(up, down)
        np.testing.assert_allclose(d_up, v_up, rtol=1e-9)
        np.testing.assert_allclose(d_down, v_down, rtol=0, atol=1e-6 * np.max(np.abs(v_up)))


def test_numerical_density_derivative():
    n = xc.density_from_radius(np.geomspace(0.01, 100, 17))
    d = xc.density_derivative(lambda m: xc.vwn_correlation(m)[0], n)
    np.testing.assert_allclose(d, xc.vwn_correlation(n)[1], rtol=1e-9)
    # zero and negative densities give zero, without warnings
    zeros = xc.density_derivative(lambda m: xc.vwn_correlation(m)[0], np.array([0.0, -1.0]))
    np.testing.assert_array_equal(zeros, 0.0)


# --- registry --------------------------------------------------------------------------

@pytest.mark.parametrize("name, correlation", [
    ("lda-vwn", xc.vwn_correlation_polarized),
    ("lda-wigner", xc.wigner_correlation_polarized),
    ("lda-hedin-lundqvist", xc.hedin_lundqvist_correlation_polarized),
    ("lda-von-barth-hedin", xc.von_barth_hedin_correlation_polarized),
    ("lda-pz81", xc.pz81_correlation_polarized),
    ("lda-pw92", xc.pw92_correlation_polarized),
])
def test_registered_functionals_are_exchange_plus_correlation(name, correlation):
    functional = xc.get_functional(name)
    assert functional.exchange is xc.SLATER_EXCHANGE
    assert functional.correlation is not None and functional.origin == "built-in"
    up = np.array([0.01, 0.2, 3.0])
    down = np.array([0.002, 0.1, 3.0])
    eps, v_up, v_down = functional.evaluate_polarized(up, down)
    ex, vx_up, vx_down = xc.slater_exchange_polarized(up, down)
    ec, vc_up, vc_down = correlation(up, down)
    np.testing.assert_allclose(eps, ex + ec, rtol=1e-15)
    np.testing.assert_allclose(v_up, vx_up + vc_up, rtol=1e-15)
    np.testing.assert_allclose(v_down, vx_down + vc_down, rtol=1e-15)
    eps0, _ = functional.evaluate(up + down)
    np.testing.assert_allclose(eps0, functional.evaluate_polarized((up + down) / 2,
                                                                   (up + down) / 2)[0],
                               rtol=1e-13)


def test_slater_exchange_has_only_an_exchange_part():
    functional = xc.get_functional("slater-exchange")
    assert functional.exchange is xc.SLATER_EXCHANGE and functional.correlation is None
    assert functional.has_parts


def test_old_positional_construction_still_works():
    functional = xc.Functional("toy", "toy", xc.slater_exchange)
    assert functional.exchange is None and functional.correlation is None
    assert not functional.has_parts and functional.origin == "built-in"
