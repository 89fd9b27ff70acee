"""Fits of equations of state (pwsolid.eos): uncertainties, input checks, flags,
callable forms, the polynomial form and units.

Synthetic data use parameters typical of silicon (own choice): V0 = 270 bohr^3,
B0 = 0.0033 Ha/bohr^3, B0' = 4.2, E0 = -7.9 Ha. Noise is seeded.
"""

import dataclasses
import math

import numpy as np
import pytest

from pwsolid import eos
from pwsolid.errors import ConvergenceWarning, InputError

E0, V0, B0, B0P = -7.9, 270.0, 0.0033, 4.2
PARAMS = dict(e0=E0, v0=V0, b0=B0, b0p=B0P)
NOISE = 1e-5   # Ha, about 0.3 meV: the scale of a well-converged plane-wave energy


def _volumes(n, lo=0.94, hi=1.06):
    return V0 * np.linspace(lo, hi, n)


def _bm(v):
    return eos.birch_murnaghan_energy(v, **PARAMS)


def _noisy(n, seed):
    v = _volumes(n)
    rng = np.random.default_rng(seed)
    return v, _bm(v) + NOISE * rng.standard_normal(n)


# --- uncertainties --------------------------------------------------------------------

def _estimated_sigma(fit):
    return float(np.sqrt(np.sum(fit.residuals ** 2) / (fit.n_points - 4)))


@pytest.mark.parametrize("form", ["birch-murnaghan", "vinet", "polynomial"])
def test_standard_errors_shrink_as_one_over_sqrt_n(form):
    # Least squares with independent noise: errors ~ sigma / sqrt(N) at a fixed design
    # (statistics, common practice). The large set repeats each of the 12 volumes 16
    # times (shifted by 1e-7 relative so that they stay distinct), so J^T J grows by 16
    # and the errors must fall by 4 once the scatter of the estimated sigma is divided
    # out: to 3%, because J is evaluated at the fitted parameters, which the noise moves
    # by about their standard error (B0' by ~1% at 12 points; observed up to 1.3%).
    # The raw ratio also carries sigma_small / sigma_large, which scatters by
    # ~1/sqrt(2 dof) ~ 0.25 at dof = 8; averaged over 8 seeds, ~9%: checked to 30%.
    small_v = _volumes(12)
    large_v = (small_v[:, None] * (1 + 1e-7 * np.arange(16))).ravel()
    raw = {k: [] for k in ("v0", "b0", "b0_prime")}
    for seed in range(8):
        rng = np.random.default_rng(seed)
        small = eos.fit_equation_of_state(
            small_v, _bm(small_v) + NOISE * rng.standard_normal(small_v.size), form)
        large = eos.fit_equation_of_state(
            large_v, _bm(large_v) + NOISE * rng.standard_normal(large_v.size), form)
        sigma_ratio = _estimated_sigma(small) / _estimated_sigma(large)
        for k in raw:
            ratio = small.standard_errors[k] / large.standard_errors[k]
            assert ratio / sigma_ratio == pytest.approx(4.0, rel=0.03), k
            raw[k].append(ratio)
    for k, r in raw.items():
        assert np.mean(r) == pytest.approx(4.0, rel=0.3), k


def test_standard_errors_match_scatter_of_repeated_fits():
    # The reported error is the spread one would see on repeating the measurement
    # (statistics, common practice): 100 seeded noisy data sets of 9 points. The sample
    # standard deviation of 100 values is good to ~7%, the mean reported error (dof = 5)
    # to a few %, and the linearisation adds little at this noise: 20% tolerance.
    fits = [eos.fit_equation_of_state(*_noisy(9, seed)) for seed in range(100)]
    for k, attr in (("v0", "v0"), ("b0", "b0"), ("b0_prime", "b0_prime"), ("e0", "e0")):
        scatter = np.std([getattr(f, attr) for f in fits], ddof=1)
        reported = np.mean([f.standard_errors[k] for f in fits])
        assert reported == pytest.approx(scatter, rel=0.2), k


def test_residuals_and_rms_are_consistent():
    v, e = _noisy(11, 7)
    fit = eos.fit_equation_of_state(v, e)
    assert np.allclose(fit.residuals, fit.energy(v) - e, rtol=0, atol=1e-14)
    assert fit.rms_residual == pytest.approx(float(np.sqrt(np.mean(fit.residuals ** 2))))
    # The residuals of a good fit are of the size of the noise (~sigma sqrt(dof/N)).
    assert 0.3 * NOISE < fit.rms_residual < 2 * NOISE


# --- bad input ------------------------------------------------------------------------

def test_too_few_points():
    v = _volumes(4)
    with pytest.raises(InputError, match="at least 5 points"):
        eos.fit_equation_of_state(v, _bm(v))


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_non_finite_input(bad):
    v = _volumes(7)
    e = _bm(v)
    e[3] = bad
    with pytest.raises(InputError, match="energies must be finite"):
        eos.fit_equation_of_state(v, e)
    v2 = v.copy()
    v2[2] = bad
    with pytest.raises(InputError, match="volumes must be finite"):
        eos.fit_equation_of_state(v2, _bm(v))


def test_duplicate_and_non_positive_volumes():
    v = _volumes(7)
    v[4] = v[3]
    with pytest.raises(InputError, match="distinct"):
        eos.fit_equation_of_state(v, _bm(_volumes(7)))
    v = _volumes(7)
    v[0] = -1.0
    with pytest.raises(InputError, match="positive"):
        eos.fit_equation_of_state(v, np.zeros(7))


def test_shapes_and_lengths():
    v = _volumes(7)
    with pytest.raises(InputError, match="7 volumes but 6 energies"):
        eos.fit_equation_of_state(v, _bm(v)[:6])
    with pytest.raises(InputError, match="1-D"):
        eos.fit_equation_of_state(v.reshape(7, 1), _bm(v).reshape(7, 1))
    with pytest.raises(InputError, match="numbers"):
        eos.fit_equation_of_state(["a"] * 7, _bm(v))


def test_unknown_form_lists_valid_names():
    v = _volumes(7)
    with pytest.raises(InputError) as info:
        eos.fit_equation_of_state(v, _bm(v), "quartic-spline")
    for name in eos.EOS_FORMS:
        assert name in str(info.value)
    assert "quartic-spline" in str(info.value)
    with pytest.raises(InputError, match="registered name"):
        eos.fit_equation_of_state(v, _bm(v), 42)


def test_energies_without_a_minimum_are_rejected():
    v = _volumes(7)
    for energies in (-_bm(v), np.full(7, -7.9)):       # curving down; flat
        for form in eos.EOS_FORMS:
            with pytest.raises(InputError, match="curve upward"):
                eos.fit_equation_of_state(v, energies, form)


def test_unsorted_volumes_are_sorted():
    v = _volumes(9)
    e = _bm(v)
    perm = np.random.default_rng(3).permutation(9)
    a = eos.fit_equation_of_state(v, e)
    b = eos.fit_equation_of_state(v[perm], e[perm])
    assert np.array_equal(b.volumes, v) and np.array_equal(b.energies, e)
    # Same data in another order: the same optimum to optimiser tolerance.
    assert b.v0 == pytest.approx(a.v0, rel=1e-10)
    assert b.b0 == pytest.approx(a.b0, rel=1e-8)


# --- flags ----------------------------------------------------------------------------

@pytest.mark.parametrize("form", list(eos.EOS_FORMS))
def test_minimum_outside_sampled_range_is_flagged(form):
    # Only compressed cells: the minimum lies beyond the largest volume. Exact BM3 data
    # let every form extrapolate V0 to within 2% (loose: it is an extrapolation).
    v = _volumes(8, 0.80, 0.95)
    fit = eos.fit_equation_of_state(v, _bm(v), form)
    assert not fit.minimum_inside_range
    assert "outside the sampled volumes" in fit.message
    assert fit.v0 > v[-1]
    assert fit.v0 == pytest.approx(V0, rel=0.02)


def test_non_convergence_warns_and_flags():
    v = _volumes(9)
    with pytest.warns(ConvergenceWarning, match="did not converge"):
        fit = eos.fit_equation_of_state(v, _bm(v) + 1e-4 * np.sin(v), max_evaluations=2)
    assert not fit.converged
    assert "did not converge" in fit.message


def test_result_is_frozen_and_evaluates_scalars_and_arrays():
    v = _volumes(7)
    fit = eos.fit_equation_of_state(v, _bm(v))
    with pytest.raises(dataclasses.FrozenInstanceError):
        fit.v0 = 1.0
    assert isinstance(fit.energy(V0), float) and isinstance(fit.pressure(V0), float)
    assert fit.energy(v).shape == (7,) and fit.pressure(v).shape == (7,)
    assert fit.n_points == 7


# --- callable forms -------------------------------------------------------------------

def _my_birch(volume, e0, v0, b0, b0p):
    eta = (v0 / volume) ** (2 / 3)
    return e0 + 9 * v0 * b0 / 16 * ((eta - 1) ** 3 * b0p + (eta - 1) ** 2 * (6 - 4 * eta))


def test_callable_form_matches_registered_form():
    v = _volumes(9)
    e = _bm(v) + 1e-6 * np.cos(v)
    named = eos.fit_equation_of_state(v, e, "birch-murnaghan")
    custom = eos.fit_equation_of_state(v, e, _my_birch)
    assert custom.form == "_my_birch"
    # Same formula, same optimum: to the optimiser tolerances.
    for k in ("e0", "v0", "b0", "b0_prime"):
        assert getattr(custom, k) == pytest.approx(getattr(named, k), rel=1e-8)
    # A callable has no pressure formula: P is -dE/dV by central differences
    # (step 1e-5 V: ~1e-9 relative to the analytic pressure, checked to 1e-6 B0).
    w = V0 * np.linspace(0.95, 1.05, 5)
    assert np.allclose(custom.pressure(w), named.pressure(w), rtol=0, atol=1e-6 * B0)


def test_eos_form_object_with_pressure_is_accepted():
    spec = eos.EOSForm("my-vinet", eos.vinet_energy, eos.vinet_pressure, b0_prime_min=1.0)
    v = _volumes(7)
    fit = eos.fit_equation_of_state(v, eos.vinet_energy(v, **PARAMS), spec)
    assert fit.form == "my-vinet"
    assert fit.b0_prime == pytest.approx(B0P, rel=1e-6)   # exact data, see validation


def test_callable_that_does_not_add_e0_is_rejected():
    def scaled(volume, e0, v0, b0, b0p):
        return e0 * _my_birch(volume, 1.0, v0, b0, b0p)

    v = _volumes(7)
    with pytest.raises(InputError, match="additively"):
        eos.fit_equation_of_state(v, _bm(v), scaled)
    with pytest.raises(InputError, match="callable failed"):
        eos.fit_equation_of_state(v, _bm(v), lambda volume, e0: e0)


# --- polynomial order -----------------------------------------------------------------

def test_polynomial_order_two_is_second_order_birch():
    # In V^(-2/3) an order-2 polynomial is the second-order Birch form, whose B0' is 4
    # exactly (Birch 1947); our B0' = 4 + (2/3) t0 E'''/E'' with E''' = 0.
    v = _volumes(9)
    fit = eos.fit_equation_of_state(v, _bm(v), "polynomial", order=2)
    assert fit.polynomial_order == 2
    assert fit.b0_prime == pytest.approx(4.0, abs=1e-12)
    # B0' = 4.2 vs 4 in the data changes V0 and B0 little over +-6% (observed 9e-5 and
    # 0.04%); 1e-3 and 2% are the agreement bounds of the validation tests.
    assert fit.v0 == pytest.approx(V0, rel=1e-3)
    assert fit.b0 == pytest.approx(B0, rel=0.02)


def test_polynomial_default_order_and_interpolating_order():
    v = _volumes(7)
    e = _bm(v) + 1e-6 * np.sin(v)
    assert eos.fit_equation_of_state(v, e, "polynomial").polynomial_order == 3
    full = eos.fit_equation_of_state(v, e, "polynomial", order=6)
    # Seven coefficients through seven points: no degrees of freedom, no errors, and
    # residuals at rounding level (Vandermonde on [-1, 1], condition ~1e3).
    assert full.standard_errors is None and full.b0_gpa_error is None
    assert full.rms_residual < 1e-12
    assert full.converged


@pytest.mark.parametrize("order", [1, 7, 2.5, True, "3"])
def test_polynomial_bad_orders(order):
    v = _volumes(7)
    with pytest.raises(InputError, match="order"):
        eos.fit_equation_of_state(v, _bm(v), "polynomial", order=order)


def test_order_only_for_polynomial():
    v = _volumes(7)
    with pytest.raises(InputError, match="only to the polynomial"):
        eos.fit_equation_of_state(v, _bm(v), "vinet", order=3)


def test_polynomial_errors_propagate_from_coefficients():
    # The polynomial's errors come through the coefficient covariance; on noisy BM3
    # data they must equal the nonlinear BM3 fit's: order 3 in V^(-2/3) is the same
    # model in other parameters, so only the finite-difference Jacobians differ
    # (observed 4e-7): 1e-3 relative.
    v, e = _noisy(15, 11)
    poly = eos.fit_equation_of_state(v, e, "polynomial", order=3)
    bm = eos.fit_equation_of_state(v, e, "birch-murnaghan")
    for k in ("e0", "v0", "b0", "b0_prime"):
        assert poly.standard_errors[k] == pytest.approx(bm.standard_errors[k], rel=1e-3), k
        assert getattr(poly, k) == pytest.approx(getattr(bm, k), rel=1e-6), k


# --- units and summaries --------------------------------------------------------------

def test_bulk_modulus_in_gpa():
    # 1 Ha/bohr^3 = 29421.02 GPa (REFERENCES section 0, CODATA 2018, 7 digits); scipy
    # may ship CODATA 2022 (-1.4e-7 relative), so 1e-6 relative.
    v, e = _noisy(9, 1)
    fit = eos.fit_equation_of_state(v, e)
    assert fit.b0_gpa == pytest.approx(fit.b0 * 29421.02, rel=1e-6)
    assert fit.b0_gpa_error == pytest.approx(fit.standard_errors["b0"] * 29421.02, rel=1e-6)
    assert eos.fit_equation_of_state(_volumes(7), _bm(_volumes(7))).b0_gpa == pytest.approx(
        97.09, rel=1e-3)   # 0.0033 Ha/bohr^3 = 97.09 GPa, own arithmetic


def test_compare_fits_reports_spread():
    v, e = _noisy(9, 5)
    fits = eos.fit_all_forms(v, e)
    summary = eos.compare_fits(fits)
    assert summary["forms"] == tuple(eos.EOS_FORMS)
    for k in ("e0", "v0", "b0", "b0_prime", "b0_gpa"):
        values = [getattr(f, k) for f in fits.values()]
        assert summary[k]["spread"] == pytest.approx(max(values) - min(values), abs=0)
        assert summary[k]["min"] <= summary[k]["mean"] <= summary[k]["max"]
    assert summary["b0_gpa"]["spread"] == pytest.approx(
        summary["b0"]["spread"] * 29421.02, rel=1e-6)   # unit factor as above
    with pytest.raises(InputError):
        eos.compare_fits({})


def test_fit_all_forms_passes_polynomial_order():
    v = _volumes(9)
    fits = eos.fit_all_forms(v, _bm(v), polynomial_order=4)
    assert fits["polynomial"].polynomial_order == 4
    assert all(f.polynomial_order is None for n, f in fits.items() if n != "polynomial")
