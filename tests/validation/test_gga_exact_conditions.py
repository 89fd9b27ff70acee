"""Perdew-Burke-Ernzerhof 1996 against its published exact conditions.

Sources: J. P. Perdew, K. Burke and M. Ernzerhof, Phys. Rev. Lett. 77, 3865 (1996)
(PBE below), Eqs. 3-8, 13-14 and the constants printed there (beta = 0.066725,
mu = 0.21951, kappa = 0.804); the local Lieb-Oxford bound 2.2733 / 2^(1/3) = 1.8044
(E. H. Lieb and S. Oxford, Int. J. Quantum Chem. 19, 427 (1981), lambda = 1.679 from
memory; reference notes 1b); exchange spin scaling (G. L. Oliver and J. P. Perdew,
Phys. Rev. A 20, 397 (1979)). Each condition is also shown to fail for a functional
that breaks it, so that none of the checks is empty.
"""

import math

import numpy as np
import pytest

from pwsolid.xc import check_exact_conditions, get_functional
from pwsolid.xc.gga import (PBE_BETA, PBE_KAPPA, pbe_correlation, pbe_correlation_polarized,
                            pbe_exchange, pbe_exchange_polarized, pbe_gradient_correction)
from pwsolid.xc.registry import combine_exchange_correlation, gradient_functional


def _by_name(functional):
    return {c.name: c for c in check_exact_conditions(functional)}


@pytest.mark.parametrize("name", ["pbe", "pbe-exchange"])
def test_every_applicable_condition_passes(name):
    results = _by_name(get_functional(name))
    assert not [c.name for c in results.values() if c.passed is False]
    applicable = {n for n, c in results.items() if c.passed}
    assert {"zero-gradient-limit", "exchange-enhancement-bound",
            "exchange-scaling-with-gradient", "gradient-derivatives-consistency"} <= applicable
    if name == "pbe":
        assert {"correlation-gradient-coefficient",
                "correlation-vanishes-at-large-gradient"} <= applicable


def test_enhancement_factor_tends_to_one_plus_kappa_below_the_local_bound():
    result = _by_name(get_functional("pbe"))["exchange-enhancement-bound"]
    # the largest F_x is its s -> infinity limit 1 + kappa = 1.804 (PBE Eq. 14)
    assert abs(result.worst_value - 1.804) < 1e-6
    # 2.2733 / 2^(1/3) from the reference notes, table 1b
    assert abs(result.tolerance - 2.2733 / 2 ** (1 / 3)) < 1e-4


def test_second_order_gradient_coefficient_of_correlation():
    # H -> beta phi^3 t^2 (PBE Eqs. 7-8), beta = 0.066725 as printed in PBE
    for eps_c in (-0.1, -0.03, -0.004):
        for phi in (1.0, 0.9, 2 ** (-1 / 3)):
            t2 = 1e-8
            h = pbe_gradient_correction(np.array(eps_c), np.array(phi), np.array(t2))[0]
            assert abs(h / (phi ** 3 * t2) / 0.066725 - 1.0) < 2e-5  # 6 printed digits
    assert abs(PBE_BETA - 0.066725) < 5e-7


def test_correlation_vanishes_in_the_rapidly_varying_limit():
    # H -> -eps_c as t -> infinity (PBE, text after Eq. 7)
    eps_c = np.array([-0.15, -0.05, -0.01])
    h = pbe_gradient_correction(eps_c, np.ones(3), np.full(3, 1e8))[0]
    np.testing.assert_allclose(h, -eps_c, rtol=1e-10)


def test_exchange_spin_scaling_with_gradients(rng):
    n_up, n_down = 10 ** rng.uniform(-3, 0, 50), 10 ** rng.uniform(-3, 0, 50)
    s_uu, s_dd = (rng.uniform(0, 2, 50) * n_up ** (4 / 3)) ** 2, (n_down ** (4 / 3)) ** 2
    polarized = pbe_exchange_polarized(n_up, n_down, s_uu, np.zeros(50), s_dd)[0]
    scaled = 0.5 * (pbe_exchange(2 * n_up, 4 * s_uu)[0] + pbe_exchange(2 * n_down, 4 * s_dd)[0])
    np.testing.assert_allclose(polarized, scaled, rtol=1e-14)


def _exchange_with_kappa(kappa):
    """PBE exchange with F_x - 1 scaled by kappa / 0.804: its large-s limit is 1 + kappa."""
    def kernel(n, sigma):
        e, d_n, d_sigma = pbe_exchange(n, sigma)
        e0, d0, _ = pbe_exchange(n, np.zeros_like(n))
        factor = kappa / PBE_KAPPA
        return e0 + factor * (e - e0), d0 + factor * (d_n - d0), factor * d_sigma

    part = gradient_functional("wide-exchange", "PBE exchange, kappa scaled", kernel,
                               lda_parent="slater-exchange")
    return gradient_functional("wide-exchange", "PBE exchange, kappa scaled", kernel,
                               lda_parent="slater-exchange", exchange=part)


def test_a_larger_kappa_breaks_the_local_lieb_oxford_bound():
    wide = _exchange_with_kappa(1.0)
    result = {c.name: c for c in check_exact_conditions(wide)}["exchange-enhancement-bound"]
    assert result.passed is False and abs(result.worst_value - 2.0) < 1e-6


def test_a_wrong_gradient_coefficient_fails():
    # twice the gradient term: beta doubled at small t, and H -> -2 eps_c at large t
    def doubled(n, sigma):
        e, d_n, d_sigma = pbe_correlation(n, sigma)
        e0, d0, _ = pbe_correlation(n, np.zeros_like(n))
        return 2 * e - e0, 2 * d_n - d0, 2 * d_sigma

    def doubled_polarized(up, down, s_uu, s_ud, s_dd):
        full = pbe_correlation_polarized(up, down, s_uu, s_ud, s_dd)
        zero = np.zeros_like(up)
        local = pbe_correlation_polarized(up, down, zero, zero, zero)
        return (2 * full[0] - local[0], 2 * full[1] - local[1], 2 * full[2] - local[2],
                *(2 * d for d in full[3:]))

    correlation = gradient_functional("doubled", "PBE with 2 H", doubled, doubled_polarized,
                                      lda_parent="lda-pw92-precise")
    functional = combine_exchange_correlation("doubled-pbe", "test", get_functional(
        "pbe").exchange, correlation, lda_parent="lda-pw92-precise")
    results = _by_name(functional)
    assert results["correlation-gradient-coefficient"].passed is False
    assert results["correlation-vanishes-at-large-gradient"].passed is False
    assert results["zero-gradient-limit"].passed   # still PW92 at zero gradient
    assert results["gradient-derivatives-consistency"].passed


def test_gradient_invariant_beta_and_mu_relation():
    # mu = beta pi^2 / 3 cancels the gradient terms of exchange and correlation to
    # second order (PBE, below Eq. 12): at high density, phi = 1, the sum
    # n eps_x^unif mu s^2 + n beta t^2 vanishes for every gradient.
    n = np.array(1e6)   # rs ~ 0.006, where -eps_c/gamma is large and A t^2 is small
    sigma = 1e-6 * n ** (8 / 3)
    e_x = pbe_exchange(n, sigma)[0] - pbe_exchange(n, 0.0 * sigma)[0]
    e_c = pbe_correlation(n, sigma)[0] - pbe_correlation(n, 0.0 * sigma)[0]
    assert abs(e_x + e_c) < 2e-2 * abs(e_x)
    assert abs(e_x) > 0.0 and math.isfinite(e_c)


def test_hydrogen_atom_exchange_and_correlation():
    # Exact hydrogen density n = exp(-2r)/pi, fully polarised. PBE 1996, Table I, lists
    # E_x = -0.3059 Ha and E_c = -0.0060 Ha for H (from memory; the exact values are
    # -0.3125 and 0, LSD gives -0.268 and -0.022). Radial quadrature: step 1e-4 bohr,
    # far below the 1e-4 Ha printed resolution.
    r = np.linspace(1e-6, 40.0, 400_001)
    weight = 4 * math.pi * r ** 2 * (r[1] - r[0])
    n = np.exp(-2 * r) / math.pi
    zero = np.zeros_like(n)
    sigma = (2 * n) ** 2
    e_x = float(np.sum(pbe_exchange_polarized(n, zero, sigma, zero, zero)[0] * weight))
    e_c = float(np.sum(pbe_correlation_polarized(n, zero, sigma, zero, zero)[0] * weight))
    assert abs(e_x - (-0.3059)) < 1e-4
    assert abs(e_c - (-0.0060)) < 1e-4
