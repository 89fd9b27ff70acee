"""The further LDA fits against published data, and the exact-condition checks.

Part 1 checks the Vosko-Wilk-Nusair, Wigner, Hedin-Lundqvist and von Barth-Hedin
kernels against the uniform-gas data; part 2 checks that
:func:`pwsolid.xc.check_exact_conditions` passes and fails what it should.

Sources (tags as in the project's reference notes, section 1):
* Vosko, Wilk & Nusair, Can. J. Phys. 58, 1200 (1980): paramagnetic and ferromagnetic
  parameters from memory, cross-checked ([X], section 1e); spin-stiffness row from
  memory, unverified ([M]);
* the VWN5 regression table (section 1f): an independent numpy computation [C] from
  those parameters, not numbers printed in the paper;
* Ceperley & Alder, Phys. Rev. Lett. 45, 566 (1980): total energies from a secondary
  transcription of their table [V2];
* E. Wigner, Phys. Rev. 46, 1002 (1934): eps_c = -0.44/(rs + 7.8) Ha, from memory;
* L. Hedin & B. I. Lundqvist, J. Phys. C 4, 2064 (1971): C = 0.045 Ry, A = 21, from
  memory, cross-checked against the B = 0.7734 of their potential (also from memory);
* U. von Barth & L. Hedin, J. Phys. C 5, 1629 (1972): parameters from memory, unverified;
* Gell-Mann & Brueckner, Phys. Rev. 106, 364 (1957): c0 = (1 - ln 2)/pi^2 [C];
* Lieb & Oxford, Int. J. Quantum Chem. 19, 427 (1981): lambda = 1.679, from memory.
"""

import math
import textwrap

import numpy as np
import pytest

from pwsolid import xc

GMB_C0 = (1 - math.log(2)) / math.pi ** 2


def _correlation(name, rs, zeta):
    functional = xc.get_functional(name).correlation
    n = xc.density_from_radius(np.asarray(rs, dtype=float))
    return functional.evaluate_polarized(n * (1 + zeta) / 2, n * (1 - zeta) / 2)


def _ceperley_alder(zeta):
    return [(p.rs, p.correlation) for p in xc.CEPERLEY_ALDER_1980 if p.zeta == zeta]


# --- part 1: the fits -------------------------------------------------------------------

RS_TABLE = [0.5, 1, 2, 3, 4, 5, 6, 10, 20]
# eps_c in mHa, REFERENCES 1f, [C] from the VWN5 parameters (themselves [X]).
VWN_TABLE_MHA = {
    0: [-77.0633, -60.0187, -44.7828, -36.8830, -31.7842, -28.1338, -25.3535, -18.5445,
        -11.5477],
    1: [-40.1183, -31.5281, -23.8572, -19.8721, -17.2906, -15.4344, -14.0142, -10.5000,
        -6.7951],
}


@pytest.mark.parametrize("zeta", [0, 1])
def test_vwn_regression_table(zeta):
    eps, _, _ = _correlation("lda-vwn", RS_TABLE, zeta)
    # printed to 1e-7 Ha; 1e-6 Ha is the reproduction the reference notes ask for
    np.testing.assert_allclose(eps, np.array(VWN_TABLE_MHA[zeta]) * 1e-3, atol=1e-6)


@pytest.mark.parametrize("rs, v_ref", [(1.0, -0.067816), (2.0, -0.051604), (4.0, -0.037439)])
def test_vwn_potential_regression_table(rs, v_ref):
    # v_c at zeta = 0, REFERENCES 1f [C] by numerical differentiation, printed to 1e-6 Ha:
    # 2e-6 covers the rounding and the differencing of the table.
    _, v = xc.vwn_correlation(xc.density_from_radius(rs))
    assert v == pytest.approx(v_ref, abs=2e-6)


def test_vwn_high_density_coefficients():
    # A (Ry) = 2 c0 (paramagnetic), c0 (ferromagnetic), -1/(3 pi^2) (stiffness, whose
    # c0 is 1/(6 pi^2) Ha, REFERENCES 1b [C]). Stored in Ha: half of each. The printed
    # 0.0621814 / 0.0310907 carry 6 digits: tolerance 1e-7 Ha.
    assert xc.VWN_PARAMAGNETIC.a == pytest.approx(GMB_C0, abs=1e-7)
    assert xc.VWN_FERROMAGNETIC.a == pytest.approx(GMB_C0 / 2, abs=1e-7)
    assert xc.VWN_SPIN_STIFFNESS.a == pytest.approx(-1 / (6 * math.pi ** 2), rel=1e-12)


def test_fits_to_ceperley_alder_agree_with_each_other():
    # PZ81, PW92 and VWN all parametrise the Ceperley-Alder data (zeta = 0 and 1), so
    # for 1 <= rs <= 20 they agree to the quality of the fits: within 1 mHa (largest
    # gap 0.39 mHa, PZ81-VWN at rs = 1, zeta = 0). In between, at zeta = 0.5, the spin
    # interpolations differ (PZ81 has no spin stiffness) and the gap reaches 1.35 mHa
    # (PZ81-VWN, rs = 1): tolerance 1.5 mHa there.
    rs = np.geomspace(1.0, 20.0, 120)
    for zeta, tolerance in ((0.0, 1e-3), (1.0, 1e-3), (0.5, 1.5e-3)):
        values = [_correlation(name, rs, zeta)[0] for name in ("lda-pz81", "lda-pw92",
                                                                "lda-vwn")]
        for a in values:
            for b in values:
                assert np.max(np.abs(a - b)) < tolerance


@pytest.mark.parametrize("zeta", [0, 1])
def test_vwn_agrees_with_ceperley_alder(zeta):
    # Tolerance 0.5 mHa: the fit is not exact (VWN misses CA by 0.33 mHa at rs = 2) and
    # the QMC totals carry error bars up to 1e-3 Ry = 0.5 mHa (at rs = 1).
    for rs, e_c in _ceperley_alder(zeta):
        eps, _, _ = _correlation("lda-vwn", [rs], zeta)
        assert abs(eps[0] - e_c) < 5e-4, (rs, zeta)


def test_vwn_spin_stiffness_close_to_pw92():
    # The VWN stiffness row is from memory, unverified [M]; both it and PW92's third row
    # describe alpha_c(rs), and they differ by up to 4.6 % (near rs = 4-6), within 6 %.
    rs = np.geomspace(0.1, 20.0, 40)
    x = np.sqrt(rs)
    alpha_vwn, _ = xc.extra_lda._vwn_g(x, xc.VWN_SPIN_STIFFNESS)
    p = xc.PW92_SPIN_STIFFNESS
    alpha_pw = 2 * p.a * (1 + p.alpha1 * rs) * np.log1p(
        1 / (2 * p.a * (p.beta1 * x + p.beta2 * rs + p.beta3 * x ** 3 + p.beta4 * rs ** 2)))
    np.testing.assert_allclose(alpha_vwn, alpha_pw, rtol=0.06)


@pytest.mark.parametrize("name, tolerance", [
    # Older, cruder fits, honest tolerances at metallic densities (rs 2-5, zeta = 0):
    # Wigner's interpolation misses CA by up to 6.2 mHa (rs = 5): 7 mHa;
    # Hedin-Lundqvist is 3.3 mHa too deep at rs = 2 and 5 (3.6 mHa against PW92 at
    # rs = 3): 4 mHa.
    ("lda-wigner", 7e-3),
    ("lda-hedin-lundqvist", 4e-3),
])
def test_older_fits_near_ceperley_alder_at_metallic_densities(name, tolerance):
    for rs, e_c in _ceperley_alder(0):
        if 2 <= rs <= 5:
            eps, _, _ = _correlation(name, [rs], 0)
            assert abs(eps[0] - e_c) < tolerance, (name, rs)
    rs = np.linspace(2.0, 5.0, 31)
    difference = _correlation(name, rs, 0)[0] - _correlation("lda-pw92", rs, 0)[0]
    assert np.max(np.abs(difference)) < tolerance


def test_hedin_lundqvist_parameters_cross_check():
    # Their potential v_xc = v_x [1 + B x ln(1 + 1/x)], x = rs/A, with
    # |v_x| rs = 2/(pi alpha) Ry bohr, alpha = (4/(9 pi))^(1/3), gives B = C A rs/|v_x rs|
    # = 0.7734 (remembered independently). 4 printed digits: tolerance 1e-4.
    alpha = (4 / (9 * math.pi)) ** (1 / 3)
    c_ry = 2 * xc.HL_PARAMAGNETIC.c
    b = c_ry * xc.HL_PARAMAGNETIC.r / (2 / (math.pi * alpha))
    assert b == pytest.approx(0.7734, abs=1e-4)
    rs = np.array([1.0, 3.0, 6.0])
    n = xc.density_from_radius(rs)
    x = rs / xc.HL_PARAMAGNETIC.r
    v_x = xc.slater_exchange(n)[1]
    _, v_c = xc.hedin_lundqvist_correlation(n)
    np.testing.assert_allclose(v_x + v_c, v_x * (1 + b * x * np.log1p(1 / x)), rtol=1e-12)


def test_von_barth_hedin_is_random_phase_like():
    # From memory, unverified: fitted to a random-phase-like calculation, so deeper than
    # the QMC data at metallic densities (by 17 mHa at rs = 2 and 14 mHa at rs = 5; we
    # check only "more than 10 mHa"), and its parameters follow the RPA spin scaling
    # c_F = c_P/2, r_F = 2^(4/3) r_P to 1 %.
    for rs, e_c in _ceperley_alder(0):
        if 2 <= rs <= 5:
            assert _correlation("lda-von-barth-hedin", [rs], 0)[0][0] < e_c - 1e-2
    assert xc.VBH_FERROMAGNETIC.c / xc.VBH_PARAMAGNETIC.c == pytest.approx(0.5, rel=0.01)
    assert xc.VBH_FERROMAGNETIC.r / xc.VBH_PARAMAGNETIC.r == pytest.approx(2 ** (4 / 3),
                                                                           rel=0.01)


def test_wigner_limits():
    # eps_c = -0.44/(rs + 7.8): -0.44/7.8 Ha at rs -> 0 and -0.44/rs at rs -> infinity.
    eps, _ = xc.wigner_correlation(xc.density_from_radius(np.array([1e-8, 1e8])))
    assert eps[0] == pytest.approx(-0.44 / 7.8, rel=1e-8)
    assert eps[1] * 1e8 == pytest.approx(-0.44, rel=1e-7)


# --- part 2: exact conditions ----------------------------------------------------------

NAMES = ("exchange-uniform-scaling", "exchange-spin-scaling", "correlation-negative",
         "polarisation-weakens-correlation", "high-density-logarithm",
         "low-density-inverse-rs", "lieb-oxford-bound", "potential-is-energy-derivative")
P, F, NA = True, False, None
# What each built-in functional should give, with the reason for every failure:
EXPECTED = {
    # all three fits to Ceperley-Alder pass everything; PZ81's A = 0.0311 is 0.03 %
    # from c0, inside the 0.1 % tolerance of the high-density check
    "lda-pz81": (P, P, P, P, P, P, P, P),
    "lda-pw92": (P, P, P, P, P, P, P, P),
    "lda-vwn": (P, P, P, P, P, P, P, P),
    # Wigner: no spin dependence (polarisation does not weaken it) and a constant at
    # high density instead of the logarithm
    "lda-wigner": (P, P, P, F, F, P, P, P),
    # Hedin-Lundqvist: slope C = 0.0225 Ha instead of 0.0311; the spin-scaled ferro
    # branch has a low-density tail 2^(1/3) times the paramagnetic one, so it is
    # stronger than the paramagnetic at large rs
    "lda-hedin-lundqvist": (P, P, P, F, F, P, P, P),
    # von Barth-Hedin: slope 0.0252 Ha; ferro tail stronger than para; and its strong
    # ferromagnetic tail (-0.71/rs) with exchange breaks the Lieb-Oxford bound beyond
    # rs ~ 47 at zeta = 1
    "lda-von-barth-hedin": (P, P, P, F, F, P, F, P),
    # exchange only: the correlation checks have nothing to test
    "slater-exchange": (P, P, NA, NA, NA, NA, P, P),
}


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_built_in_functionals_pass_what_they_should(name):
    results = xc.check_exact_conditions(xc.get_functional(name))
    assert tuple(r.name for r in results) == NAMES
    got = tuple(r.passed for r in results)
    assert got == EXPECTED[name], [(r.name, r.passed, r.detail) for r in results]
    for r in results:
        assert r.detail and isinstance(r.as_dict(), dict)
        assert r.status in ("pass", "fail", "not applicable")


def test_high_density_coefficient_recovered():
    # The slope found is reported (worst_value: the zeta = 0 or 1 slope that is further
    # from its exact value, c0 or c0/2). PW92 and VWN give it to 3e-5 relative at
    # rs = 1e-6 (PW92: the 5-digit A of Table I; VWN: a sqrt(rs) remainder that nearly
    # cancels); PZ81 gives its own A, 0.0311 or 0.01555, to 1e-6 (its C rs ln rs and
    # D rs terms add -9e-9 Ha to the slope at rs = 1e-6).
    for name, expected, rel in (("lda-pw92", (GMB_C0, GMB_C0 / 2), 3e-5),
                                ("lda-vwn", (GMB_C0, GMB_C0 / 2), 3e-5),
                                ("lda-pz81", (0.0311, 0.01555), 1e-6)):
        result = xc.check_exact_conditions(xc.get_functional(name))[4]
        assert result.name == "high-density-logarithm"
        assert any(result.worst_value == pytest.approx(e, rel=rel) for e in expected)
        assert "exact 0.0310907" in result.detail and "exact 0.0155453" in result.detail


def test_low_density_constant_reported():
    # rs eps_c -> alpha1/beta4 of PW92's paramagnetic row, -0.2137/0.49294 = -0.4335,
    # approached as 1/sqrt(rs): at rs = 1e6 within 0.5 %. Wigner's is -0.44 exactly.
    result = xc.check_exact_conditions(xc.get_functional("lda-pw92"))[5]
    assert result.worst_value == pytest.approx(-0.21370 / 0.49294, rel=5e-3)
    result = xc.check_exact_conditions(xc.get_functional("lda-wigner"))[5]
    assert result.worst_value == pytest.approx(-0.44, rel=1e-4)


BAD_CORRELATION = """
    import numpy as np
    NAME = "positive-correlation"
    ENERGY_TERM = "correlation"

    def energy_per_electron(n_up, n_down):
        rs = np.cbrt(3 / (4 * np.pi * (n_up + n_down)))
        return 0.01 / (1 + rs)         # positive, no spin dependence, no logarithm
"""


def test_bad_user_functional_fails_the_right_conditions(tmp_path):
    path = tmp_path / "bad.py"
    path.write_text(textwrap.dedent(BAD_CORRELATION))
    # Loads: Slater exchange + this is still negative everywhere on the grid.
    results = xc.check_exact_conditions(xc.load_user_functional(path))
    got = dict((r.name, r.passed) for r in results)
    assert got == {
        "exchange-uniform-scaling": True, "exchange-spin-scaling": True,
        "correlation-negative": False,            # the deliberate fault
        "polarisation-weakens-correlation": False,  # no spin dependence
        "high-density-logarithm": False,            # tends to a constant
        "low-density-inverse-rs": False,            # rs eps_c -> +0.01 rs, not a constant
        "lieb-oxford-bound": True,
        "potential-is-energy-derivative": True,     # numerical potentials: consistent
    }
    worst = results[2]
    assert worst.worst_value == pytest.approx(0.01 / 1.01, rel=0.01)   # at rs = 0.01


def test_combined_user_functional_uses_subtracted_exchange(tmp_path):
    # No ENERGY_TERM: the file gives eps_xc of PW92 as one function. The exchange checks
    # do not apply; the correlation (eps_xc - Slater) passes like lda-pw92.
    path = tmp_path / "combined.py"
    path.write_text(textwrap.dedent("""
        from pwsolid import xc

        def energy_per_electron(n_up, n_down):
            return xc.get_functional("lda-pw92").evaluate_polarized(n_up, n_down)[0]
    """))
    results = xc.check_exact_conditions(xc.load_user_functional(path))
    assert [r.passed for r in results] == [None, None, True, True, True, True, True, True]
    assert "Slater" in results[0].detail


def test_unpolarized_callable_skips_spin_conditions():
    def pw92_only(n):
        eps_x, v_x = xc.slater_exchange(n)
        eps_c, v_c = xc.pw92_correlation(n)
        return eps_x + eps_c, v_x + v_c

    results = xc.check_exact_conditions(xc.get_functional(pw92_only))
    got = dict((r.name, r.passed) for r in results)
    assert got["exchange-spin-scaling"] is None
    assert got["polarisation-weakens-correlation"] is None
    assert got["correlation-negative"] and got["high-density-logarithm"]
    assert got["lieb-oxford-bound"] and got["potential-is-energy-derivative"]


def test_lieb_oxford_violation_and_wrong_potential_are_caught():
    def too_deep(n):               # eps_xc = -2 n^(1/3): beyond lambda = 1.679
        eps = -2.0 * np.cbrt(n)
        return eps, (4 / 3) * eps

    def wrong_potential(n):        # v = eps is not d(n eps)/dn
        eps, _ = xc.get_functional("lda-pw92").evaluate(n)
        return eps, eps

    results = {r.name: r for r in xc.check_exact_conditions(xc.get_functional(too_deep))}
    assert results["lieb-oxford-bound"].passed is False
    assert results["lieb-oxford-bound"].worst_value == pytest.approx(2 / 1.679, rel=1e-12)
    assert results["potential-is-energy-derivative"].passed is True
    results = {r.name: r for r in
               xc.check_exact_conditions(xc.get_functional(wrong_potential))}
    assert results["potential-is-energy-derivative"].passed is False
    assert results["lieb-oxford-bound"].passed is True
