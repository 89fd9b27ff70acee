"""Perdew-Burke-Ernzerhof kernels, their registry entries and gradients on the grid.

Kernels against their own numerical derivatives, the unpolarised form against the
polarised one at zeta = 0, the zero-gradient limit against the local parents, vacuum
guards; the grid gradient against an analytic one.
"""

import math

import numpy as np
import pytest

from pwsolid.basis import grid_g_vectors
from pwsolid.fft import make_fft_grid
from pwsolid.xc import FUNCTIONALS, get_functional
from pwsolid.xc.gga import (PBE_MU, pbe_correlation, pbe_correlation_polarized,
                            pbe_exchange, pbe_exchange_enhancement, pbe_exchange_polarized)
from pwsolid.xc_grid import exchange_correlation_on_grid

POLARIZED = (pbe_exchange_polarized, pbe_correlation_polarized)
UNPOLARIZED = (pbe_exchange, pbe_correlation)


def _sample(rng, m=300):
    """Spin densities over rs ~ 0.05..20 and invariants with s ~ 0.01..0.5 per channel.

    sigma stays well above the finite-difference steps, which must not cross zero.
    """
    up = 10.0 ** rng.uniform(-4.0, 1.0, m)
    down = up * rng.uniform(0.01, 1.0, m)
    s_uu = (up ** (4 / 3) * rng.uniform(0.05, 3.0, m)) ** 2
    s_dd = (down ** (4 / 3) * rng.uniform(0.05, 3.0, m)) ** 2
    s_ud = np.sqrt(s_uu * s_dd) * rng.uniform(-1.0, 1.0, m)
    return [up, down, s_uu, s_ud, s_dd]


def _fourth_order(kernel, arrays, index, step):
    total = 0.0
    for offset, weight in ((-2, 1), (-1, -8), (1, 8), (2, -1)):
        shifted = list(arrays)
        shifted[index] = arrays[index] + offset * step
        total = total + weight * kernel(*shifted)[0]
    return total / (12.0 * step)


@pytest.mark.parametrize("kernel", POLARIZED, ids=lambda k: k.__name__)
def test_polarized_derivatives_are_those_of_the_energy(kernel, rng):
    arrays = _sample(rng)
    up, down = arrays[:2]
    scales = [up, down, up ** (8 / 3), up ** (8 / 3), down ** (8 / 3)]
    analytic = kernel(*arrays)
    for index, scale in enumerate(scales):
        numerical = _fourth_order(kernel, arrays, index, 1e-5 * scale)
        # fourth-order differences: truncation ~1e-20, rounding ~1e-16/1e-5 of e
        error = np.abs(analytic[index + 1] - numerical) * scale / np.abs(analytic[0])
        assert np.max(error) < 1e-8, (index, np.max(error))


@pytest.mark.parametrize("kernel", UNPOLARIZED, ids=lambda k: k.__name__)
def test_unpolarized_derivatives_are_those_of_the_energy(kernel, rng):
    up, _, s_uu, _, _ = _sample(rng)
    n, sigma = 2.0 * up, 4.0 * s_uu
    analytic = kernel(n, sigma)
    for index, scale in enumerate((n, n ** (8 / 3))):
        numerical = _fourth_order(kernel, [n, sigma], index, 1e-5 * scale)
        error = np.abs(analytic[index + 1] - numerical) * scale / np.abs(analytic[0])
        assert np.max(error) < 1e-8


@pytest.mark.parametrize("pair", list(zip(UNPOLARIZED, POLARIZED)), ids=("exchange", "correlation"))
def test_unpolarized_form_is_the_polarized_one_at_zeta_zero(pair, rng):
    unpolarized, polarized = pair
    up, _, s_uu, _, _ = _sample(rng)
    n, sigma = 2.0 * up, 4.0 * s_uu
    # equal spins with equal gradients: every invariant is sigma / 4
    e, d_up, d_down, d_uu, d_ud, d_dd = polarized(up, up, s_uu, s_uu, s_uu)
    e0, d_n, d_sigma = unpolarized(n, sigma)
    np.testing.assert_allclose(e, e0, rtol=1e-13)
    np.testing.assert_allclose(d_up, d_n, rtol=1e-12)
    np.testing.assert_allclose(d_down, d_n, rtol=1e-12)
    # d/d sigma_ss + d/d sigma_ud + d/d sigma_ss' = d/d sigma, chain rule of sigma/4 each
    np.testing.assert_allclose(d_uu + d_ud + d_dd, 4.0 * d_sigma, rtol=1e-12)


def test_pbe_is_perdew_wang_with_slater_exchange_at_zero_gradient(rng):
    n = 10.0 ** rng.uniform(-5.0, 2.0, 200)
    zeta = rng.uniform(-1.0, 1.0, 200)
    up, down = 0.5 * n * (1 + zeta), 0.5 * n * (1 - zeta)
    pbe, parent = get_functional("pbe"), get_functional("lda-pw92-precise")
    for mine, theirs in ((pbe.evaluate(n), parent.evaluate(n)),
                         (pbe.evaluate_polarized(up, down),
                          parent.evaluate_polarized(up, down))):
        for a, b in zip(mine, theirs):
            np.testing.assert_allclose(a, b, rtol=1e-13, atol=1e-300)


def test_gradient_coefficient_of_exchange_is_the_published_mu():
    # mu = 0.21951 printed in Perdew, Burke & Ernzerhof, PRL 77, 3865 (1996), below Eq. 12
    assert abs(PBE_MU - 0.21951) < 5e-6
    s2 = np.array([1e-8])
    f, df = pbe_exchange_enhancement(s2)
    assert abs((f[0] - 1.0) / s2[0] - 0.21951) < 1e-5 and abs(df[0] - PBE_MU) < 1e-8


def test_vacuum_and_negative_densities_give_finite_zeros():
    n = np.array([0.0, -1e-8, 1e-31, 1e-25, 1e-12, 1.0])
    sigma = np.array([0.0, 1e-10, 1e-20, 1e-16, 1e-3, 1e6])
    with np.errstate(all="raise"):
        for kernel in UNPOLARIZED:
            out = kernel(n, sigma)
            assert all(np.all(np.isfinite(a)) for a in out)
            assert all(a[0] == 0.0 and a[1] == 0.0 and a[2] == 0.0 for a in out)
        for kernel in POLARIZED:
            out = kernel(n, np.zeros_like(n), sigma, np.zeros_like(n), np.zeros_like(n))
            assert all(np.all(np.isfinite(a)) for a in out)


def test_registry_entries():
    pbe = get_functional(" PBE ")
    assert "pbe" in FUNCTIONALS and "pbe-exchange" in FUNCTIONALS
    assert pbe.needs_gradients and pbe.lda_parent == "lda-pw92-precise"
    assert pbe.exchange.needs_gradients and pbe.correlation.needs_gradients
    assert get_functional("pbe-exchange").correlation is None
    assert not get_functional("lda-pz81").needs_gradients
    # a local functional's gradient form: e = n eps, no gradient derivative
    n = np.array([0.1, 1.0])
    e, v, d_sigma = get_functional("lda-pz81").evaluate_gradient(n, np.ones(2))
    eps, v_ref = get_functional("lda-pz81").evaluate(n)
    np.testing.assert_array_equal(e, n * eps)
    np.testing.assert_array_equal(v, v_ref)
    assert not d_sigma.any()


def _cosine_cell():
    lattice = np.diag([7.0, 8.0, 9.0])
    shape = (12, 14, 16)
    fft = make_fft_grid(shape)
    g = grid_g_vectors(lattice, shape)
    x = np.arange(shape[0]) / shape[0]
    n0, amplitude = 0.05, 0.03
    phase = 2 * math.pi * x
    density = np.broadcast_to((n0 + amplitude * np.cos(phase))[:, None, None], shape).copy()
    gradient = -amplitude * np.sin(phase) * 2 * math.pi / 7.0
    return lattice, fft, g, density, gradient


def test_grid_energy_uses_the_analytic_gradient_of_a_cosine():
    # A band-limited density: the spectral gradient is exact, so the grid energy
    # density is the kernel at the analytic |grad n|^2 point by point.
    lattice, fft, g, density, gradient = _cosine_cell()
    result = exchange_correlation_on_grid(get_functional("pbe"), density, fft, g)
    e, *_ = get_functional("pbe").evaluate_gradient(density[:, 0, 0], gradient ** 2)
    np.testing.assert_allclose(result.energy_density[:, 0, 0], e, rtol=1e-12)
    # and it differs from the zero-gradient energy, or the test would be empty
    local = exchange_correlation_on_grid(get_functional("lda-pw92-precise"), density)
    assert np.max(np.abs(result.energy_density - local.energy_density)) > 1e-6


def test_grid_without_fft_is_refused_and_local_path_unchanged():
    _, fft, g, density, _ = _cosine_cell()
    with pytest.raises(ValueError, match="gradient"):
        exchange_correlation_on_grid(get_functional("pbe"), density)
    lda = get_functional("lda-pw92-precise")
    eps, v = lda.evaluate(density)
    result = exchange_correlation_on_grid(lda, density, fft, g)
    np.testing.assert_array_equal(result.energy_density, density * eps)
    np.testing.assert_array_equal(result.potential, v)


def test_uniform_density_gives_the_local_potential():
    _, fft, g, density, _ = _cosine_cell()
    flat = np.full_like(density, 0.02)
    pbe = exchange_correlation_on_grid(get_functional("pbe"), flat, fft, g)
    lda = exchange_correlation_on_grid(get_functional("lda-pw92-precise"), flat, fft, g)
    np.testing.assert_allclose(pbe.potential, lda.potential, rtol=1e-13)
    spins = np.stack([0.7 * flat, 0.3 * flat])
    pbe = exchange_correlation_on_grid(get_functional("pbe"), spins, fft, g)
    lda = exchange_correlation_on_grid(get_functional("lda-pw92-precise"), spins, fft, g)
    np.testing.assert_allclose(pbe.potential, lda.potential, rtol=1e-13)


def test_testbench_report_of_a_gradient_functional():
    from pwsolid.workflows.uniform_gas import testbench_report

    report = testbench_report("pbe", rs_values=(1.0, 5.0), zeta_values=(0.0, 1.0))
    doc = report.as_document()
    assert doc["functional"]["needs_gradients"] and doc["functional"]["lda_parent"] == "lda-pw92-precise"
    assert doc["table"]["gradient"].startswith("zero")
    gradient = report.gradient
    # F_x(0) = 1 and F_x grows with s towards 1 + kappa (PBE 1996, Eq. 14)
    assert gradient.exchange_enhancement[0] == 1.0
    assert np.all(np.diff(gradient.exchange_enhancement) > 0)
    assert gradient.exchange_enhancement[-1] < 1.804
    # -H/eps_c climbs from 0 towards 1 (correlation cancelled) with t
    fraction = -gradient.correlation_gradient_term / gradient.local_correlation[:, None]
    assert np.all(fraction > 0) and np.all(fraction < 1) and fraction[:, -1].min() > 0.99
    assert "gradient_dependence" in doc
    assert testbench_report("lda-pw92-precise", rs_values=(1.0,)).gradient is None


def test_testbench_plot_has_a_gradient_panel():
    import matplotlib.pyplot as plt

    from pwsolid.plots import new_axes
    from pwsolid.plots.xc import UniformGasPlot
    from pwsolid.workflows.uniform_gas import testbench_report

    plot = UniformGasPlot.from_report(testbench_report("pbe", ["lda-pw92-precise"]))
    assert plot.n_panels == 4
    fig, axes = new_axes(1, 4)
    try:
        assert plot.plot(axes) is fig
        assert axes[3].get_lines()   # F_x(s) drawn
        with pytest.raises(ValueError):
            plot.plot(axes[:3])
    finally:
        plt.close(fig)
