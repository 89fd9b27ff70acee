"""SCAN and r2SCAN kernels against Libxc, finite differences and their uniform-gas limit.

Sources:

* Libxc 5.2.3 (the system C library, loaded by ``libxc_meta_reference``): MGGA_X_SCAN,
  MGGA_C_SCAN, MGGA_X_R2SCAN, MGGA_C_R2SCAN, energies and all first derivatives to
  1e-8 relative over grids of r_s, zeta, s and alpha (skipped without the library);
* finite differences of the energy itself for every derivative (the dual numbers);
* the uniform-gas limit (s = 0, alpha = 1) equals Slater exchange plus Perdew-Wang 1992
  correlation (SCAN paper, PRL 115, 036402 (2015); r2SCAN, JPCL 11, 8208 (2020)),
  computed here by the independent LDA code of ``pwsolid.xc.lda``.
"""

import math

import numpy as np
import pytest
from libxc_meta_reference import load

from pwsolid.xc import get_functional
from pwsolid.xc import lda
from pwsolid.xc.meta_gga import (R2SCAN, SCAN, meta_correlation, meta_correlation_polarized,
                                 meta_exchange, meta_exchange_polarized,
                                 uniform_kinetic_density)

LIBXC = load()
needs_libxc = pytest.mark.skipif(LIBXC is None, reason="the Libxc C library is not installed")

RS = np.array([0.1, 0.5, 1.0, 2.0, 5.0, 10.0, 30.0])
S = np.array([0.0, 0.1, 0.5, 1.0, 2.0, 4.0])
ALPHA = np.array([0.0, 0.3, 0.9, 1.0, 1.2, 2.0, 2.7, 5.0])
ZETA = np.array([-0.9, -0.4, 0.0, 0.3, 0.8])
PARAMETERS = {"scan": SCAN, "r2scan": R2SCAN}


def _grid(eta):
    """Unpolarised (n, sigma, tau) on the r_s x s x alpha grid."""
    rs, s, alpha = (a.ravel() for a in np.meshgrid(RS, S, ALPHA, indexing="ij"))
    n = lda.density_from_radius(rs)
    sigma = s ** 2 * 4.0 * (3.0 * math.pi ** 2) ** (2.0 / 3.0) * n ** (8.0 / 3.0)
    tau_w = sigma / (8.0 * n)
    return n, sigma, tau_w + alpha * (uniform_kinetic_density(n) + eta * tau_w)


def _polarized_grid(eta):
    """Spin-resolved values on r_s x zeta x s x alpha, each spin at the given s, alpha."""
    rs, zeta, s, alpha = (a.ravel() for a in np.meshgrid(RS[::2], ZETA, S[::2], ALPHA,
                                                         indexing="ij"))
    n = lda.density_from_radius(rs)
    spins = [0.5 * n * (1 + zeta), 0.5 * n * (1 - zeta)]
    sig, tau = [], []
    for m in spins:
        # the spin channel's own s and alpha (spin scaling: values of the gas of 2 m)
        sg = s ** 2 * 4.0 * (3.0 * math.pi ** 2) ** (2.0 / 3.0) * (2 * m) ** (8.0 / 3.0) / 4.0
        tw = sg / (8.0 * m)
        tu = 0.5 * uniform_kinetic_density(2 * m)
        sig.append(sg)
        tau.append(tw + alpha * (tu + eta * tw))
    cross = 0.6 * np.sqrt(sig[0] * sig[1])
    return spins[0], spins[1], sig[0], cross, sig[1], tau[0], tau[1]


def _close(mine, reference, scale, tolerance=1e-8):
    """Relative agreement, with an absolute floor 1e-4 of the natural scale (where the
    reference derivative vanishes, e.g. de/dtau at s = 0 and alpha = 1)."""
    error = np.abs(mine - reference) / (np.abs(reference) + 1e-4 * np.abs(scale))
    return float(np.max(error))


@needs_libxc
def test_libxc_ids_are_the_ones_named():
    for name, number in (("mgga_x_scan", 263), ("mgga_c_scan", 267), ("mgga_x_r2scan", 497),
                         ("mgga_c_r2scan", 498)):
        assert LIBXC.number(name) == number


@needs_libxc
@pytest.mark.parametrize("name", ["scan", "r2scan"])
@pytest.mark.parametrize("part", ["x", "c"])
def test_unpolarised_energy_and_derivatives_agree_with_libxc(name, part):
    par = PARAMETERS[name]
    n, sigma, tau = _grid(par.eta)
    kernel = meta_exchange if part == "x" else meta_correlation
    e, dn, ds, dt = kernel(n, sigma, tau, par)
    zk, vrho, vsigma, vtau = LIBXC.evaluate(f"mgga_{part}_{name}", n, sigma, tau, False)
    unit_sigma = 4.0 * (3.0 * math.pi ** 2) ** (2.0 / 3.0) * n ** (8.0 / 3.0)
    assert _close(e / n, zk, zk) < 1e-8
    assert _close(dn, vrho.ravel(), e / n) < 1e-8
    assert _close(ds, vsigma.ravel(), e / unit_sigma) < 1e-8
    assert _close(dt, vtau.ravel(), e / uniform_kinetic_density(n)) < 1e-8


@needs_libxc
@pytest.mark.parametrize("name", ["scan", "r2scan"])
@pytest.mark.parametrize("part", ["x", "c"])
def test_polarised_energy_and_derivatives_agree_with_libxc(name, part):
    par = PARAMETERS[name]
    up, down, s_uu, s_ud, s_dd, t_up, t_dn = _polarized_grid(par.eta)
    kernel = meta_exchange_polarized if part == "x" else meta_correlation_polarized
    e, d_up, d_dn, d_uu, d_ud, d_dd, v_up, v_dn = kernel(up, down, s_uu, s_ud, s_dd, t_up,
                                                         t_dn, par)
    zk, vrho, vsigma, vtau = LIBXC.evaluate(
        f"mgga_{part}_{name}", np.stack([up, down], 1), np.stack([s_uu, s_ud, s_dd], 1),
        np.stack([t_up, t_dn], 1), True)
    n = up + down
    scale_n = e / n
    scale_s = e / (4.0 * (3.0 * math.pi ** 2) ** (2.0 / 3.0) * n ** (8.0 / 3.0))
    scale_t = e / uniform_kinetic_density(n)
    assert _close(e / n, zk, zk) < 1e-8
    for mine, ref, scale in ((d_up, vrho[:, 0], scale_n), (d_dn, vrho[:, 1], scale_n),
                             (d_uu, vsigma[:, 0], scale_s), (d_ud, vsigma[:, 1], scale_s),
                             (d_dd, vsigma[:, 2], scale_s), (v_up, vtau[:, 0], scale_t),
                             (v_dn, vtau[:, 1], scale_t)):
        assert _close(mine, ref, scale) < 1e-8


@pytest.mark.parametrize("name", ["scan", "r2scan"])
def test_derivatives_equal_central_differences_of_the_energy(name):
    """The dual-number derivatives against fourth-order differences of e itself."""
    par = PARAMETERS[name]
    args = _polarized_grid(par.eta)
    # gradients > 0: g_x(p) = 1 - exp(-a1 p^(-1/4)) is not analytic at p = 0
    keep = (args[2] > 0) & (args[4] > 0)
    args = [a[keep][::5] for a in args]
    for kernel in (meta_exchange_polarized, meta_correlation_polarized):
        values = kernel(*args, par)
        for k in range(7):
            h = 1e-4 * np.abs(args[k])
            diffs = []
            for step in (2, 1, -1, -2):
                shifted = list(args)
                shifted[k] = args[k] + step * h
                diffs.append(kernel(*shifted, par)[0])
            numeric = (-diffs[0] + 8 * diffs[1] - 8 * diffs[2] + diffs[3]) / (12 * h)
            scale = np.abs(values[0]) / np.maximum(np.abs(args[k]), 1e-300)
            err = np.abs(numeric - values[k + 1]) / (np.abs(values[k + 1]) + 1e-3 * scale)
            assert np.max(err) < 1e-6, (kernel.__name__, k, np.max(err))


@pytest.mark.parametrize("name", ["scan", "r2scan"])
def test_uniform_gas_limit_is_slater_plus_pw92(name):
    """alpha = 1, s = 0: exactly LSDA (Slater + PW92 with the functional's digits)."""
    par = PARAMETERS[name]
    rs, zeta = (a.ravel() for a in np.meshgrid(np.geomspace(0.05, 100, 40),
                                               np.linspace(-1, 1, 11), indexing="ij"))
    n = lda.density_from_radius(rs)
    up, down = 0.5 * n * (1 + zeta), 0.5 * n * (1 - zeta)
    zero = np.zeros_like(n)
    tau_up = 0.5 * uniform_kinetic_density(2 * up)
    tau_dn = 0.5 * uniform_kinetic_density(2 * down)
    ex = meta_exchange_polarized(up, down, zero, zero, zero, tau_up, tau_dn, par)[0]
    ec = meta_correlation_polarized(up, down, zero, zero, zero, tau_up, tau_dn, par)[0]
    slater = lda.slater_exchange_polarized(up, down)[0] * n
    # PW92 through the LDA module's own kernel, with the digits of this functional
    para, ferro, stiff = par.pw92
    rs_ = lda.wigner_seitz_radius(n)
    g0, _ = lda._pw92_g(rs_, np.sqrt(rs_), para)
    g1, _ = lda._pw92_g(rs_, np.sqrt(rs_), ferro)
    ma, _ = lda._pw92_g(rs_, np.sqrt(rs_), stiff)
    f, _ = lda.spin_interpolation(zeta)
    pw92 = n * (g0 - ma * f * (1 - zeta ** 4) / lda.SPIN_INTERPOLATION_CURVATURE
                + (g1 - g0) * f * zeta ** 4)
    assert np.max(np.abs(ex - slater) / np.abs(slater)) < 1e-12
    assert np.max(np.abs(ec - pw92) / np.abs(pw92)) < 1e-12
    # the registry's local (uniform-gas) kernels are this limit, potentials included
    functional = get_functional(name)
    eps, v_up, v_dn = functional.evaluate_polarized(up, down)
    assert np.max(np.abs(eps * n - slater - pw92) / np.abs(slater + pw92)) < 1e-12


def test_registry_names_and_parts():
    for name in ("scan", "r2scan"):
        f = get_functional(name)
        assert f.needs_kinetic_density and f.has_parts and f.has_spin_polarized_form
        assert f.exchange.name == f"{name}-exchange"
        assert get_functional(f"{name}-exchange").correlation is None
    # the paper digits of PW92 differ from the built-in ones by ~1e-5 relative only
    assert abs(SCAN.pw92[0].a / lda.PW92_PARAMAGNETIC.a - 1) < 2e-5


@pytest.mark.parametrize("name", ["scan", "r2scan"])
def test_energy_only_kernels_equal_the_full_ones(name):
    functional = get_functional(name)
    par = PARAMETERS[name]
    n, sigma, tau = _grid(par.eta)
    assert np.allclose(functional.evaluate_meta_energy(n, sigma, tau),
                       functional.evaluate_meta(n, sigma, tau)[0], rtol=1e-14, atol=0)
    args = _polarized_grid(par.eta)
    assert np.allclose(functional.evaluate_meta_energy(*args),
                       functional.evaluate_meta_polarized(*args)[0], rtol=1e-14, atol=0)
