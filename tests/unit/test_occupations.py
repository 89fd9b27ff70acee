"""Unit tests of pwsolid.occupations: Aufbau filling, band edges, smearing identities, errors.

Checks against physics (free electrons, conservation over many widths) live in
tests/validation/test_smearing.py.
"""

import math

import numpy as np
import pytest
from scipy.special import erfc

from pwsolid import occupations as occ
from pwsolid.errors import InputError

SCHEMES = [occ.FermiDirac(), occ.Gaussian(), occ.MethfesselPaxton(0), occ.MethfesselPaxton(1),
           occ.MethfesselPaxton(2), occ.MethfesselPaxton(5), occ.ColdSmearing()]
IDS = ["fd", "gauss", "mp0", "mp1", "mp2", "mp5", "cold"]
# A fine grid on [-12, 12]: every scheme's delta approximant is below 1e-30
# beyond |x| = 9 except Fermi-Dirac (e^-12 ~ 6e-6), handled where it matters.
X = np.linspace(-12.0, 12.0, 24001)
H = X[1] - X[0]


def _derivative(values):
    """Five-point central difference on X (interior points): error ~ H^4 f^(5) / 30 ~ 1e-12."""
    v = values
    return (v[:-4] - 8 * v[1:-3] + 8 * v[3:-1] - v[4:]) / (12 * H)


# ------------------------------------------------------------------ Aufbau, band edges

def test_aufbau_fills_the_lowest_half_of_the_electrons_at_every_k():
    f = occ.aufbau_occupations(3, 6, 8)
    assert f.shape == (3, 6)
    np.testing.assert_array_equal(f[:, :4], 2.0)
    np.testing.assert_array_equal(f[:, 4:], 0.0)


def test_aufbau_rejects_odd_electron_counts_with_input_error():
    with pytest.raises(InputError) as err:
        occ.aufbau_occupations(2, 6, 7)
    assert err.value.key == "crystal"


def test_aufbau_rejects_too_few_bands():
    with pytest.raises(ValueError):
        occ.aufbau_occupations(1, 3, 8)


def test_band_edges_of_an_indirect_gap():
    eig = np.array([[-1.0, 0.2, 0.9], [-0.8, 0.1, 0.5]])
    f = occ.aufbau_occupations(2, 3, 4)
    edges = occ.band_edges(eig, f)
    assert edges.highest_occupied == 0.2 and edges.highest_occupied_k == 0
    assert edges.lowest_unoccupied == 0.5 and edges.lowest_unoccupied_k == 1
    assert edges.gap == pytest.approx(0.3)
    assert edges.is_direct is False


def test_band_edges_when_every_band_is_full():
    eig = np.array([[-1.0, 0.2]])
    edges = occ.band_edges(eig, np.full((1, 2), 2.0))
    assert edges.lowest_unoccupied is None and edges.gap is None and edges.is_direct is None


# ------------------------------------------------------------------ scheme identities

@pytest.mark.parametrize("scheme", SCHEMES, ids=IDS)
def test_delta_is_minus_the_derivative_of_the_occupation(scheme):
    # Five-point differences (error ~1e-12 even for the oscillating order-5 polynomial)
    # plus round-off ~ 1e-16 / H ~ 1e-13: 1e-9 leaves a wide margin.
    numerical = _derivative(scheme.occupation(X))
    np.testing.assert_allclose(-numerical, scheme.delta(X)[2:-2], atol=1e-9)


@pytest.mark.parametrize("scheme", SCHEMES, ids=IDS)
def test_entropy_derivative_is_minus_x_delta(scheme):
    # ds/dx = -x d(x) is what makes F = E - sigma S stationary (module docstring).
    numerical = _derivative(scheme.entropy(X))
    np.testing.assert_allclose(numerical, -(X * scheme.delta(X))[2:-2], atol=1e-9)


@pytest.mark.parametrize("scheme", SCHEMES, ids=IDS)
def test_entropy_vanishes_far_from_the_fermi_level(scheme):
    far = np.array([-60.0, -40.0, 40.0, 60.0])
    np.testing.assert_allclose(scheme.entropy(far), 0.0, atol=1e-15)


def test_fermi_dirac_entropy_at_half_filling_is_ln2():
    # s(0) = -2 (1/2) ln(1/2) = ln 2 (statistical mechanics, common practice).
    assert occ.FermiDirac().entropy(np.array(0.0)) == pytest.approx(math.log(2.0), rel=1e-15)


def test_gaussian_closed_forms():
    g = occ.Gaussian()
    assert g.occupation(np.array(0.0)) == 0.5
    assert g.delta(np.array(0.0)) == pytest.approx(1 / math.sqrt(math.pi), rel=1e-15)
    assert g.entropy(np.array(0.0)) == pytest.approx(0.5 / math.sqrt(math.pi), rel=1e-15)


def test_methfessel_paxton_order_one_closed_form():
    # f_1 = erfc(x)/2 - x exp(-x^2) / (2 sqrt(pi)) (Methfessel & Paxton 1989, Eq. for N = 1
    # written out with H_1 = 2x and A_1 = -1/(4 sqrt(pi))).
    x = np.linspace(-4, 4, 81)
    expected = 0.5 * erfc(x) - x * np.exp(-x * x) / (2 * math.sqrt(math.pi))
    np.testing.assert_allclose(occ.MethfesselPaxton(1).occupation(x), expected, atol=1e-15)


def test_cold_smearing_occupation_is_never_negative_and_peaks_at_1_083():
    f = occ.ColdSmearing().occupation(X)
    assert f.min() >= 0.0
    # Maximum at y = x + 1/sqrt(2) = -1/sqrt(2): (1 + erf(1/sqrt 2))/2 + e^{-1/2}/sqrt(2 pi).
    peak = 0.5 * (1 + math.erf(1 / math.sqrt(2))) + math.exp(-0.5) / math.sqrt(2 * math.pi)
    assert f.max() == pytest.approx(peak, abs=1e-7)   # grid step 1e-3 near a maximum: 1e-7
    assert peak == pytest.approx(1.0833, abs=1e-4)


@pytest.mark.parametrize("scheme", SCHEMES, ids=IDS)
def test_no_warnings_or_nans_at_huge_arguments(scheme):
    # pytest turns numpy RuntimeWarnings into errors, so overflow would fail here.
    x = np.array([-1e300, -1e6, -800.0, -40.0, 40.0, 800.0, 1e6, 1e300])
    for func in (scheme.occupation, scheme.delta, scheme.entropy):
        assert np.all(np.isfinite(func(x)))
    np.testing.assert_allclose(scheme.occupation(x[[0, 1, 2]]), 1.0, atol=0)
    np.testing.assert_allclose(scheme.occupation(x[[5, 6, 7]]), 0.0, atol=0)


def test_zero_width_estimate_formula_per_scheme():
    # E0 = F + (E - F)/m with m = 2, 2, 2N+2, 3 (derivation in _SchemeBase).
    e, f = 1.0, 0.9
    assert occ.FermiDirac().zero_width_energy(e, f) == pytest.approx(0.95)
    assert occ.Gaussian().zero_width_energy(e, f) == pytest.approx(0.95)
    assert occ.MethfesselPaxton(1).zero_width_energy(e, f) == pytest.approx(0.925)
    assert occ.MethfesselPaxton(2).zero_width_energy(e, f) == pytest.approx(0.9 + 0.1 / 6)
    assert occ.ColdSmearing().zero_width_energy(e, f) == pytest.approx(0.9 + 0.1 / 3)


# ------------------------------------------------------------------ registry and errors

def test_registry_names_and_lookup():
    assert set(occ.SMEARING_SCHEMES) == {"fermi-dirac", "gaussian", "methfessel-paxton", "cold"}
    assert isinstance(occ.smearing_scheme("Fermi_Dirac"), occ.FermiDirac)
    assert occ.smearing_scheme("methfessel-paxton").order == 1
    assert occ.smearing_scheme("methfessel-paxton", order=3) == occ.MethfesselPaxton(3)
    for scheme in occ.SMEARING_SCHEMES.values():
        assert isinstance(scheme, occ.SmearingScheme)


def test_unknown_scheme_name_lists_the_valid_ones():
    with pytest.raises(InputError) as err:
        occ.smearing_scheme("lukewarm")
    assert err.value.key == "occupations.smearing"
    assert err.value.value == "lukewarm"
    for name in occ.SMEARING_SCHEMES:
        assert name in str(err.value)


def test_order_errors():
    with pytest.raises(InputError) as err:
        occ.smearing_scheme("cold", order=2)
    assert err.value.key == "occupations.order"
    with pytest.raises(InputError):
        occ.MethfesselPaxton(-1)
    with pytest.raises(InputError):
        occ.MethfesselPaxton(1.5)


def test_a_user_scheme_object_is_accepted():
    class Linear:
        """A triangular delta on [-1, 1] (test-only scheme)."""

        name = "linear"
        monotone = True
        energy_error_order = 2

        def occupation(self, x):
            x = np.clip(x, -1, 1)
            return np.where(x < 0, 1 - 0.5 * (1 + x) ** 2, 0.5 * (1 - x) ** 2)

        def delta(self, x):
            return np.clip(1 - np.abs(x), 0, None)

        def entropy(self, x):
            return np.zeros_like(np.asarray(x, float))

    eig = np.array([[-0.1, 0.0, 0.3]])
    res = occ.smeared_occupations(eig, [1.0], 3.0, Linear(), 0.05)
    assert res.electron_count == pytest.approx(3.0, abs=1e-12)
    with pytest.raises(InputError):
        occ.smearing_scheme(42)


def test_bad_widths_and_band_sets():
    eig = np.array([[0.0, 1.0]])
    with pytest.raises(InputError) as err:
        occ.fermi_level(eig, [1.0], 2.0, "gaussian", -0.01)
    assert err.value.key == "occupations.width"
    with pytest.raises(ValueError):
        occ.fermi_level(eig, [1.0], 5.0, "gaussian", 0.01)    # more than 2 * bands
    with pytest.raises(ValueError):
        occ.fermi_level(eig, [0.5], 2.0, "gaussian", 0.01)    # weights do not sum to 1
    with pytest.raises(ValueError):
        occ.fermi_level(eig[0], [1.0], 2.0, "gaussian", 0.01)  # not (n_k, n_b)


# ------------------------------------------------------------------ zero width

def test_zero_width_fills_the_lowest_states_across_k():
    # Two k-points of weight 1/2; 3 electrons: both lowest states (2 * 0.5 * 2 = 2 electrons),
    # then the next-lowest state (k = 1, band 1) takes the last electron in full.
    eig = np.array([[-1.0, 0.5], [-0.9, 0.2]])
    res = occ.smeared_occupations(eig, [0.5, 0.5], 3.0, "gaussian", 0.0)
    np.testing.assert_allclose(res.occupations, [[2, 0], [2, 2]])
    assert res.entropy_term == 0.0 and res.scheme is None
    assert res.fermi_level == pytest.approx(0.35)     # filled level: mid-gap
    assert res.zero_width_energy(-1.23) == -1.23


def test_zero_width_shares_a_partly_filled_degenerate_level():
    eig = np.array([[-1.0, 0.0, 0.0, 0.0, 1.0]])
    res = occ.smeared_occupations(eig, [1.0], 5.0, "cold", 0.0)
    np.testing.assert_allclose(res.occupations, [[2, 1, 1, 1, 0]])
    assert res.fermi_level == 0.0


def test_zero_width_insulator_matches_aufbau():
    rng = np.random.default_rng(3)
    valence = rng.uniform(-1.0, -0.2, (5, 4))
    conduction = rng.uniform(0.1, 1.0, (5, 3))
    eig = np.sort(np.hstack([valence, conduction]), axis=1)
    res = occ.smeared_occupations(eig, np.full(5, 0.2), 8.0, "fermi-dirac", 0.0)
    np.testing.assert_array_equal(res.occupations, occ.aufbau_occupations(5, 7, 8))
    assert valence.max() < res.fermi_level < conduction.min()


# ------------------------------------------------------------------ results

def test_result_fields_and_free_energy():
    eig = np.array([[-0.5, -0.01, 0.02, 0.4], [-0.45, 0.0, 0.05, 0.5]])
    res = occ.smeared_occupations(eig, [0.25, 0.75], 3.0, "fermi-dirac", 0.02)
    assert res.electron_count == pytest.approx(3.0, abs=1e-12)
    assert res.entropy > 0 and res.entropy_term == pytest.approx(-0.02 * res.entropy)
    assert res.free_energy(1.0) == pytest.approx(1.0 + res.entropy_term)
    assert res.zero_width_energy(1.0) == pytest.approx(1.0 + 0.5 * res.entropy_term)
    assert np.all((res.occupations >= 0) & (res.occupations <= 2))


def test_highest_band_charge():
    f = np.array([[2.0, 1.0, 3e-4], [2.0, 1.5, -1e-4]])
    assert occ.highest_band_charge(f) == pytest.approx(3e-4)
    assert occ.highest_band_charge(f, [0.5, 0.5]) == pytest.approx(2e-4)
    eig = np.array([[-0.2, 0.0, 0.01]])
    res = occ.smeared_occupations(eig, [1.0], 3.0, "gaussian", 0.05)
    assert occ.highest_band_charge(res.occupations, [1.0]) > occ.TOP_BAND_CHARGE_LIMIT
