"""The LDA kernels against the uniform electron gas: closed forms, published fits
and quantum Monte Carlo data.

Sources (tags as in the project's reference notes, section 1):
* closed forms of exchange and of the kinetic energy: [C], computed from the formulas;
* Perdew & Zunger, Phys. Rev. B 23, 5048 (1981), Appendix C: parameters from memory,
  cross-checked (continuity at rs = 1 and agreement with the Ceperley-Alder data);
* Perdew & Wang, Phys. Rev. B 45, 13244 (1992), Table I: parameters from memory,
  cross-checked (Eqs. 12-13 reproduce beta1, beta2 from the high-density coefficients);
  the form of G(rs), Eqs. 12-13 and f''(0) = 1.709921 were seen in a copy of the paper;
* Ceperley & Alder, Phys. Rev. Lett. 45, 566 (1980): total energies per electron from a
  secondary transcription of their table;
* regression tables of eps_c and v_c: an independent numpy computation [C] from the
  cited parameters, not numbers printed in either paper.
"""

import math

import numpy as np
import pytest

from pwsolid import xc

# --- closed forms (Hartree atomic units) ------------------------------------------

KF_RS = (9 * math.pi / 4) ** (1 / 3)          # k_F r_s
KINETIC_RS2 = 0.3 * KF_RS ** 2                # t_s r_s^2, zeta = 0
EXCHANGE_RS = -3 / (4 * math.pi) * KF_RS      # e_x r_s, zeta = 0


def _phi(zeta, power):
    return ((1 + zeta) ** power + (1 - zeta) ** power) / 2


def _density(rs):
    return xc.density_from_radius(np.asarray(rs, dtype=float))


def _pz81(rs, zeta):
    n = _density(rs)
    if zeta == 0:
        return xc.pz81_correlation(n)
    return xc.pz81_correlation_polarized(n * (1 + zeta) / 2, n * (1 - zeta) / 2)[:2]


def _pw92(rs, zeta):
    n = _density(rs)
    if zeta == 0:
        return xc.pw92_correlation(n)
    return xc.pw92_correlation_polarized(n * (1 + zeta) / 2, n * (1 - zeta) / 2)[:2]


# --- exchange -----------------------------------------------------------------------

def test_slater_coefficient():
    # C_x = (3/4)(3/pi)^(1/3) = 0.7385588 Ha bohr (REFERENCES 1a, [C]); the printed
    # value has 7 digits, hence the tolerance.
    assert xc.SLATER_EXCHANGE_COEFFICIENT == pytest.approx(0.75 * (3 / math.pi) ** (1 / 3),
                                                           rel=1e-15)
    assert xc.SLATER_EXCHANGE_COEFFICIENT == pytest.approx(0.7385588, abs=1e-7)


def test_exchange_per_electron_and_potential():
    # e_x = -(3/4pi)(9pi/4)^(1/3)/rs = -0.4581653/rs Ha and v_x = -0.6108871/rs Ha
    # (REFERENCES 1a, [C]; printed to 7 digits, hence abs 1e-7 on eps * rs).
    rs = np.array([0.3, 1.0, 2.0, 5.0, 40.0])
    eps, v = xc.slater_exchange(_density(rs))
    np.testing.assert_allclose(eps * rs, -0.4581653, atol=1e-7)
    np.testing.assert_allclose(eps * rs, EXCHANGE_RS, rtol=1e-13)  # same formula
    np.testing.assert_allclose(v * rs, -0.6108871, atol=1e-7)
    np.testing.assert_allclose(v, -np.cbrt(3 * _density(rs) / math.pi), rtol=1e-13)


def test_exchange_spin_scaling():
    # e_x(zeta) = e_x(0) [(1+zeta)^(4/3) + (1-zeta)^(4/3)]/2 (REFERENCES 1a, [C]):
    # the factor is 2^(1/3) = 1.259921 at full polarisation, e_x = -0.5772521/rs Ha.
    rs = np.array([0.5, 2.0, 10.0])
    n = _density(rs)
    eps0 = xc.slater_exchange(n)[0]
    eps1, v_up, v_down = xc.slater_exchange_polarized(n, np.zeros_like(n))
    np.testing.assert_allclose(eps1 / eps0, 2 ** (1 / 3), rtol=1e-13)
    np.testing.assert_allclose(eps1 / eps0, 1.259921, atol=1e-6)
    np.testing.assert_allclose(eps1 * rs, -0.5772521, atol=1e-7)
    np.testing.assert_allclose(v_up, -np.cbrt(6 * n / math.pi), rtol=1e-13)
    for zeta in (-0.7, 0.25, 0.5):
        eps_z = xc.slater_exchange_polarized(n * (1 + zeta) / 2, n * (1 - zeta) / 2)[0]
        np.testing.assert_allclose(eps_z / eps0, _phi(zeta, 4 / 3), rtol=1e-13)


def test_spin_interpolation_curvature():
    # f''(0) = 4/[9(2^(1/3)-1)] = 1.709921, printed in Perdew & Wang (1992) below
    # their Eq. (9) (REFERENCES 1a, [V1]); 7 digits printed.
    assert xc.SPIN_INTERPOLATION_CURVATURE == pytest.approx(1.709921, abs=1e-6)


# --- regression tables (REFERENCES 1f, independent computation [C]) ---------------

RS_TABLE = [0.5, 1, 2, 3, 4, 5, 6, 10, 20]
# eps_c in mHa; [C] from the parameters of PZ81 (Appendix C) and PW92 (Table I),
# which are themselves from memory, cross-checked.
EPS_C_TABLE_MHA = {
    ("pz81", 0): [-76.0500, -59.6321, -45.0912, -37.2135, -32.0539, -28.3390, -25.5042,
                  -18.5684, -11.4974],
    ("pw92", 0): [-76.6190, -59.7739, -44.7596, -36.9413, -31.8664, -28.2163, -25.4271,
                  -18.5723, -11.5300],
    ("pz81", 1): [-40.3210, -31.7013, -24.0898, -20.0481, -17.4152, -15.5199, -14.0706,
                  -10.4953, -6.7578],
    ("pw92", 1): [-40.1890, -31.5925, -23.9094, -19.9096, -17.3145, -15.4469, -14.0176,
                  -10.4840, -6.7747],
}
CORRELATION = {"pz81": _pz81, "pw92": _pw92}


@pytest.mark.parametrize("key", sorted(EPS_C_TABLE_MHA))
def test_correlation_energy_regression_table(key):
    name, zeta = key
    eps, _ = CORRELATION[name](np.array(RS_TABLE, dtype=float), zeta)
    # The table is printed to 1e-7 Ha; 1e-6 Ha is the reproduction the reference notes
    # ask of a coded parametrisation and is far below any physical difference.
    np.testing.assert_allclose(eps, np.array(EPS_C_TABLE_MHA[key]) * 1e-3, atol=1e-6)


@pytest.mark.parametrize("name, rs, v_ref", [
    ("pz81", 0.5, -0.084586), ("pz81", 2.0, -0.051813), ("pz81", 4.0, -0.037798),
    ("pw92", 1.0, -0.067459), ("pw92", 2.0, -0.051493), ("pw92", 4.0, -0.037509),
])
def test_correlation_potential_regression_table(name, rs, v_ref):
    # v_c at zeta = 0 (REFERENCES 1f, [C] by numerical differentiation), printed to
    # 1e-6 Ha: 2e-6 Ha covers that rounding plus the differencing error of the table.
    _, v = CORRELATION[name](np.array([rs]), 0)
    assert v[0] == pytest.approx(v_ref, abs=2e-6)


def test_pz81_and_pw92_agree():
    # Both parametrise the Ceperley-Alder data (Phys. Rev. Lett. 45, 566 (1980)), so they
    # must agree to about the quality of the fits: within 1 mHa for 0.5 <= rs <= 20
    # (largest gap 0.57 mHa, at rs = 0.5, zeta = 0).
    rs = np.geomspace(0.5, 20.0, 200)
    for zeta in (0, 1):
        eps_pz, _ = _pz81(rs, zeta)
        eps_pw, _ = _pw92(rs, zeta)
        assert np.max(np.abs(eps_pz - eps_pw)) < 1e-3


# --- Ceperley-Alder QMC --------------------------------------------------------------

# r_s: (E_tot zeta=0, E_tot zeta=1) per electron in Ry, Ceperley & Alder, Phys. Rev.
# Lett. 45, 566 (1980), via a secondary transcription (REFERENCES 1f, [V2]).
CEPERLEY_ALDER_RY = {
    1: (1.174, None),
    2: (0.0041, 0.2517),
    5: (-0.1512, -0.1214),
    10: (-0.10675, -0.1013),
    20: (-0.06329, -0.06251),
    50: (-0.02884, -0.02878),
    100: (-0.015321, -0.015340),
}


def _ceperley_alder_correlation():
    """(rs, zeta, e_c in Ha) with e_c = E_tot/2 - t_s - e_x from the closed forms."""
    rows = []
    for rs, totals in CEPERLEY_ALDER_RY.items():
        for zeta, total in zip((0, 1), totals):
            if total is None:
                continue
            kinetic = KINETIC_RS2 / rs ** 2 * _phi(zeta, 5 / 3)
            exchange = EXCHANGE_RS / rs * _phi(zeta, 4 / 3)
            rows.append((rs, zeta, total / 2 - kinetic - exchange))
    return rows


def test_ceperley_alder_correlation_energies_from_totals():
    # e_c(CA) in mHa as listed in REFERENCES 1f ([C] from the transcribed totals):
    # checks the closed forms used to extract correlation from the QMC totals.
    listed = {(1, 0): -59.79, (2, 0): -45.11, (5, 0): -28.17, (10, 0): -18.61,
              (20, 0): -11.50, (50, 0): -5.70, (100, 0): -3.19, (2, 1): -24.02,
              (5, 1): -15.41, (10, 1): -10.47, (20, 1): -6.78, (50, 1): -3.55,
              (100, 1): -2.07}
    for rs, zeta, e_c in _ceperley_alder_correlation():
        assert e_c * 1e3 == pytest.approx(listed[(rs, zeta)], abs=0.006)  # 2-decimal print


@pytest.mark.parametrize("name", ["pz81", "pw92"])
def test_agreement_with_ceperley_alder(name):
    # Tolerance 0.5 mHa: the fits are not exact (PW92 misses CA by 0.35 mHa at rs = 2)
    # and the QMC totals carry error bars up to 1e-3 Ry = 0.5 mHa (at rs = 1).
    for rs, zeta, e_c in _ceperley_alder_correlation():
        eps, _ = CORRELATION[name](np.array([float(rs)]), zeta)
        assert abs(eps[0] - e_c) < 5e-4, (name, rs, zeta)


# --- limits and internal consistency of the published fits ------------------------

GMB_C0 = (1 - math.log(2)) / math.pi ** 2  # 0.0310907 Ha, Gell-Mann & Brueckner (1957)


def test_gell_mann_brueckner_coefficient_from_pw92():
    # e_c -> c0 ln rs - c1 with c0 = (1 - ln 2)/pi^2 = 0.0310907 Ha for zeta = 0
    # (Gell-Mann & Brueckner, Phys. Rev. 106, 364 (1957); REFERENCES 1b, [C]) and
    # c0/2 = 0.0155453 Ha for zeta = 1. Eq. (13) removes the sqrt(rs) term of the slope
    # d e_c / d ln rs; at rs = 1e-4 it still differs from c0 by the rounding of A in
    # Table I (3e-7 Ha) and by the next term, -2 A alpha1 rs ln[1/(2 A beta1 rs^1/2)],
    # about -7e-6 Ha (zeta = 0) and -3.4e-6 Ha (zeta = 1). Tolerance 1e-5 Ha covers
    # both and is still 3e-4 of c0.
    assert GMB_C0 == pytest.approx(0.0310907, abs=1e-7)
    h = 1e-3  # central difference in ln rs; error ~ h^2 * slope'' ~ 1e-9 Ha
    rs = 1e-4
    for zeta, c0 in ((0, GMB_C0), (1, GMB_C0 / 2)):
        upper, _ = _pw92(np.array([rs * math.exp(h)]), zeta)
        lower, _ = _pw92(np.array([rs * math.exp(-h)]), zeta)
        slope = (upper[0] - lower[0]) / (2 * h)
        assert slope == pytest.approx(c0, abs=1e-5)


def test_high_density_coefficients_of_the_fits():
    # A = c0 in both fits: PW92 Table I to its 5 printed digits (REFERENCES 1d, [X]),
    # PZ81's A = 0.0311 and 0.01555 to their 3-4 printed digits (REFERENCES 1c, [X]);
    # -alpha_c has c0 = 1/(6 pi^2) = 0.0168869 Ha (REFERENCES 1b, [C]).
    assert xc.PW92_PARAMAGNETIC.a == pytest.approx(GMB_C0, abs=1e-6)
    assert xc.PW92_FERROMAGNETIC.a == pytest.approx(GMB_C0 / 2, abs=1e-6)
    assert xc.PW92_SPIN_STIFFNESS.a == pytest.approx(1 / (6 * math.pi ** 2), abs=1e-6)
    assert xc.PZ81_PARAMAGNETIC.a == pytest.approx(GMB_C0, abs=1e-4)
    assert xc.PZ81_FERROMAGNETIC.a == pytest.approx(GMB_C0 / 2, abs=1e-5)


@pytest.mark.parametrize("params, c1", [
    (xc.PW92_PARAMAGNETIC, 0.046644),
    (xc.PW92_FERROMAGNETIC, 0.025599),
    (xc.PW92_SPIN_STIFFNESS, 0.035475),
])
def test_pw92_beta1_beta2_from_high_density_expansion(params, c1):
    # Perdew & Wang (1992) Eq. (12): beta1 = exp(-c1/2c0)/(2c0), Eq. (13):
    # beta2 = 2 A beta1^2 (structure seen in the paper, [V1]); the c1 values are from
    # memory, cross-checked (REFERENCES 1b). Tolerance 1e-4 relative: the table's
    # 5-digit rounding and the 5-digit c1.
    c0 = params.a
    beta1 = math.exp(-c1 / (2 * c0)) / (2 * c0)
    assert params.beta1 == pytest.approx(beta1, rel=1e-4)
    assert params.beta2 == pytest.approx(2 * params.a * params.beta1 ** 2, rel=1e-4)


def test_pw92_spin_stiffness_at_small_polarisation():
    # Eq. (8) of Perdew & Wang (1992) is built so that e_c(rs, zeta) = e_c(rs, 0)
    # + alpha_c(rs) zeta^2 / 2 + O(zeta^4). At zeta = 1e-3 the O(zeta^4) remainder is
    # ~1e-6 of the zeta^2 term (tolerance 1e-5 relative).
    rs = np.array([0.5, 2.0, 10.0])
    zeta = 1e-3
    eps0, _ = _pw92(rs, 0)
    eps_z, _ = _pw92(rs, zeta)
    # alpha_c = -G(rs) with the third row of Table I, written out independently here.
    x = np.sqrt(rs)
    p = xc.PW92_SPIN_STIFFNESS
    g = -2 * p.a * (1 + p.alpha1 * rs) * np.log1p(
        1 / (2 * p.a * (p.beta1 * x + p.beta2 * rs + p.beta3 * x ** 3 + p.beta4 * rs ** 2)))
    alpha_c = -g
    np.testing.assert_allclose((eps_z - eps0) / (zeta ** 2 / 2), alpha_c, rtol=1e-5)
