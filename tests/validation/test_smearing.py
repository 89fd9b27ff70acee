"""Smearing schemes and Fermi levels against exact results and published properties.

Free-electron bands |k+G|^2 / 2 on fcc k-point meshes are generated here with
numpy; their zero-width limit is the uniform electron gas, whose Fermi energy
(3 pi^2 n)^(2/3) / 2 and band energy (3/5) E_F per electron are exact
(REFERENCES.md section 1a, [C]).
"""

import math

import numpy as np
import pytest
from scipy.integrate import quad

from pwsolid import occupations as occ

SCHEMES = {
    "fermi-dirac": occ.FermiDirac(),
    "gaussian": occ.Gaussian(),
    "mp1": occ.MethfesselPaxton(1),
    "mp2": occ.MethfesselPaxton(2),
    "cold": occ.ColdSmearing(),
}
WIDTHS = [1e-4, 1e-3, 1e-2, 0.1]  # Ha, the range the brief asks for
COUNT_TOL = 1e-10                 # electrons per cell; fermi_level aims at 1e-12
MEV = 1e-3 / 27.211386            # 1 meV in Ha (REFERENCES.md section 0)

FCC_A = 7.6      # bohr; with 2 electrons per cell r_s = 2.34 (a free-electron metal)
FCC_N = 2.0


def free_electron_bands(a, n, n_bands=8):
    """Lowest |k+G|^2/2 (Ha) on an n^3 shifted mesh of the fcc cell of cube edge a.

    Returns eigenvalues (n^3, n_bands), uniform weights and the cell volume. The
    Miller indices -2..2 contain the 15 shortest reciprocal vectors (shells 000,
    111, 200), more than enough for the lowest 8 bands anywhere in the zone.
    """
    lattice = 0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0.0]])
    recip = 2 * np.pi * np.linalg.inv(lattice).T
    frac = (2 * np.arange(n) - n + 1) / (2 * n)
    kf = np.stack(np.meshgrid(frac, frac, frac, indexing="ij"), -1).reshape(-1, 3)
    m = np.arange(-2, 3)
    g = np.stack(np.meshgrid(m, m, m, indexing="ij"), -1).reshape(-1, 3) @ recip
    kg = (kf @ recip)[:, None, :] + g[None]
    eig = np.sort(0.5 * np.einsum("kgi,kgi->kg", kg, kg), axis=1)[:, :n_bands]
    return np.ascontiguousarray(eig), np.full(len(kf), 1.0 / len(kf)), abs(np.linalg.det(lattice))


def exact_fermi_energy(n_electrons, volume):
    """(3 pi^2 n)^(2/3) / 2: uniform electron gas (REFERENCES.md 1a, exact)."""
    return 0.5 * (3 * math.pi**2 * n_electrons / volume) ** (2 / 3)


@pytest.fixture(scope="module")
def mesh8():
    return free_electron_bands(FCC_A, 8)


@pytest.fixture(scope="module")
def mesh20():
    return free_electron_bands(FCC_A, 20)


@pytest.fixture(scope="module")
def random_bands():
    rng = np.random.default_rng(42)
    eig = np.sort(rng.uniform(-1.0, 1.0, (7, 10)), axis=1)
    w = rng.uniform(0.2, 1.0, 7)
    return eig, w / w.sum()


def _band_energy(res, eig, w):
    return float(w @ (res.occupations * eig).sum(axis=1))


# ------------------------------------------------------------------ electron count

@pytest.mark.parametrize("name", sorted(SCHEMES))
@pytest.mark.parametrize("n_electrons", [1.0, 7.3, 12.0, 19.5])
def test_count_is_conserved_on_random_bands(random_bands, name, n_electrons):
    eig, w = random_bands
    for width in WIDTHS:
        res = occ.smeared_occupations(eig, w, n_electrons, SCHEMES[name], width)
        count = float(np.sum(w[:, None] * res.occupations))   # recomputed independently
        assert abs(count - n_electrons) < COUNT_TOL, (width, count)


@pytest.mark.parametrize("name", sorted(SCHEMES))
def test_count_is_conserved_on_free_electron_bands(mesh8, name):
    eig, w, _ = mesh8
    for n_electrons in (FCC_N, 3.0):
        for width in WIDTHS:
            res = occ.smeared_occupations(eig, w, n_electrons, SCHEMES[name], width)
            count = float(np.sum(w[:, None] * res.occupations))
            assert abs(count - n_electrons) < COUNT_TOL, (n_electrons, width, count)


@pytest.mark.parametrize("name", sorted(SCHEMES))
def test_fermi_level_rises_with_the_electron_count(mesh8, name):
    # dN/dmu > 0 on a dense free-electron spectrum, so mu(N) must increase; for the
    # non-monotone schemes this checks that the chosen root follows the Gaussian one.
    eig, w, _ = mesh8
    for width in (1e-3, 1e-2, 0.1):
        counts = np.linspace(0.5, 6.0, 12)
        levels = [occ.fermi_level(eig, w, n, SCHEMES[name], width) for n in counts]
        assert np.all(np.diff(levels) > 0), width


@pytest.mark.parametrize("name", ["fermi-dirac", "gaussian"])
def test_fermi_level_is_monotonic_on_sparse_random_bands(random_bands, name):
    # With monotone occupation functions N(mu) is monotone whatever the spectrum.
    eig, w = random_bands
    for width in WIDTHS:
        levels = [occ.fermi_level(eig, w, n, name, width) for n in np.linspace(0.2, 19.8, 50)]
        assert np.all(np.diff(levels) > 0), width


# ------------------------------------------------------------------ free-electron Fermi level

@pytest.mark.parametrize("name, width", [("mp1", 0.02), ("cold", 0.02)])
def test_fermi_level_approaches_the_uniform_gas_value(name, width):
    # Smearing errors of these schemes are O(width^3) or smaller (see the moment tests
    # below), so the remaining error is the k-mesh's. Measured for MP1:
    # 4.5e-3, 1.9e-4, 9e-6 Ha on 6^3, 12^3, 20^3 (cold: 3.7e-3, 7.9e-5, 2.2e-5).
    errors = []
    for n in (6, 12, 20):
        eig, w, volume = free_electron_bands(FCC_A, n)
        mu = occ.fermi_level(eig, w, FCC_N, SCHEMES[name], width)
        errors.append(abs(mu - exact_fermi_energy(FCC_N, volume)))
    assert errors[0] > errors[1] > errors[2]
    # 5e-5 Ha is 1.5e-4 of E_F = 0.331 Ha, about twice the largest measured error.
    assert errors[2] < 5e-5


def test_fermi_dirac_level_follows_the_sommerfeld_shift(mesh20):
    # mu = E_F [1 - (pi^2/12) (kT/E_F)^2] for g ~ sqrt(e) (Sommerfeld expansion:
    # N. W. Ashcroft & N. D. Mermin, Solid State Physics (1976), Eq. (2.77), from memory).
    # With kT = 0.03 Ha the shift is -2.2e-3 Ha, 40x the 20^3 mesh error found above.
    eig, w, volume = mesh20
    ef = exact_fermi_energy(FCC_N, volume)
    kt = 0.03
    mu = occ.fermi_level(eig, w, FCC_N, "fermi-dirac", kt)
    expected = ef * (1 - math.pi**2 / 12 * (kt / ef) ** 2)
    assert mu == pytest.approx(expected, abs=1e-4)   # next term ~ (kT/E_F)^4 E_F ~ 2e-5 Ha


# ------------------------------------------------------------------ scheme properties

def test_methfessel_paxton_order_zero_is_gaussian(random_bands):
    x = np.linspace(-30, 30, 6001)
    mp0, gauss = occ.MethfesselPaxton(0), occ.Gaussian()
    for func in ("occupation", "delta", "entropy"):
        np.testing.assert_allclose(getattr(mp0, func)(x), getattr(gauss, func)(x),
                                   rtol=1e-14, atol=1e-300)
    eig, w = random_bands
    a = occ.smeared_occupations(eig, w, 7.3, mp0, 0.01)
    b = occ.smeared_occupations(eig, w, 7.3, "gaussian", 0.01)
    assert a.fermi_level == b.fermi_level
    np.testing.assert_array_equal(a.occupations, b.occupations)


@pytest.mark.parametrize("name", sorted(SCHEMES))
def test_delta_integrates_to_one_and_occupation_goes_from_one_to_zero(name):
    scheme = SCHEMES[name]
    # quad on the infinite line: absolute error estimates ~1e-10 for these smooth tails.
    total, _ = quad(lambda t: float(scheme.delta(np.array(t))), -np.inf, np.inf,
                    epsabs=1e-13, limit=200)
    assert total == pytest.approx(1.0, abs=1e-9)
    assert scheme.occupation(np.array(-60.0)) == pytest.approx(1.0, abs=1e-15)
    assert scheme.occupation(np.array(60.0)) == pytest.approx(0.0, abs=1e-15)


def _moment(scheme, k):
    value, _ = quad(lambda t: t**k * float(scheme.delta(np.array(t))), -np.inf, np.inf,
                    epsabs=1e-13, limit=200)
    return value


@pytest.mark.parametrize("order", [1, 2, 3])
def test_methfessel_paxton_moments_vanish_up_to_2n(order):
    # The defining property of order N: the delta approximant's moments 1 .. 2N vanish
    # (Methfessel & Paxton, Phys. Rev. B 40, 3616 (1989)); the 2N+2 moment does not.
    scheme = occ.MethfesselPaxton(order)
    for k in range(1, 2 * order + 1):
        assert abs(_moment(scheme, k)) < 1e-9, k
    assert abs(_moment(scheme, 2 * order + 2)) > 1e-3


def test_cold_smearing_moments():
    # First and second moments vanish, the third is 1/sqrt(2) (derived from the
    # delta of Marzari, Vanderbilt, De Vita & Payne, Phys. Rev. Lett. 82, 3296 (1999)).
    scheme = occ.ColdSmearing()
    assert abs(_moment(scheme, 1)) < 1e-9
    assert abs(_moment(scheme, 2)) < 1e-9
    assert _moment(scheme, 3) == pytest.approx(1 / math.sqrt(2), rel=1e-9)


def test_fermi_dirac_entropy_is_the_mixing_entropy():
    # s = -[f ln f + (1 - f) ln(1 - f)] (statistical mechanics, common practice).
    x = np.linspace(-35, 35, 7001)
    fd = occ.FermiDirac()
    f = fd.occupation(x)
    # 1 - f is taken as f(-x) (equal for Fermi-Dirac, checked to round-off) so that it
    # keeps its relative precision where f ~ 1, and each logarithm is taken by log1p
    # of the small one where its argument is near 1; otherwise rounding 1 - 6e-16 to
    # the nearest double costs 15 % of the entropy at |x| = 35.
    hole = fd.occupation(-x)
    np.testing.assert_allclose(hole, 1 - f, atol=2e-16)
    ln_f = np.where(f < 0.5, np.log(np.where(f < 0.5, f, 1.0)), np.log1p(-hole))
    ln_hole = np.where(hole < 0.5, np.log(np.where(hole < 0.5, hole, 1.0)), np.log1p(-f))
    expected = -(f * ln_f + hole * ln_hole)
    np.testing.assert_allclose(fd.entropy(x), expected, rtol=1e-12, atol=0)


def test_occupations_stay_in_the_documented_ranges(random_bands):
    eig, w = random_bands
    ranges = {  # per state, including spin; from the per-spin extrema in the docstrings
        "fermi-dirac": (0.0, 2.0), "gaussian": (0.0, 2.0),
        "mp1": (-0.0710, 2.0710), "mp2": (-0.2, 2.2), "cold": (0.0, 2.1667),
    }
    for name, (lo, hi) in ranges.items():
        res = occ.smeared_occupations(eig, w, 7.3, SCHEMES[name], 0.1)
        assert lo <= res.occupations.min() and res.occupations.max() <= hi, name


# ------------------------------------------------------------------ zero-width estimates

def _zero_width(mesh, name, width):
    eig, w, volume = mesh
    res = occ.smeared_occupations(eig, w, FCC_N, SCHEMES[name], width)
    energy = _band_energy(res, eig, w)
    exact = 0.6 * exact_fermi_energy(FCC_N, volume) * FCC_N   # (3/5) E_F per electron
    return energy, res.free_energy(energy), res.zero_width_energy(energy), exact


@pytest.mark.parametrize("name, width", [("mp1", 0.02), ("cold", 0.02), ("cold", 0.03)])
def test_zero_width_estimates_agree_with_a_narrow_fermi_dirac_band_energy(mesh20, name, width):
    # Common practice: a smeared metal's zero-width estimate should match a sharp
    # filling within 1 meV per electron. The narrow Fermi-Dirac reference (kT = 5e-4 Ha)
    # differs from the sharp limit by (pi^2/4) kT^2 / E_F ~ 2e-6 Ha per electron.
    eig, w, _ = mesh20
    narrow = occ.smeared_occupations(eig, w, FCC_N, "fermi-dirac", 5e-4)
    reference = _band_energy(narrow, eig, w)
    _, _, estimate, exact = _zero_width(mesh20, name, width)
    assert abs(estimate - reference) / FCC_N < 1 * MEV
    # Against the exact uniform-gas value the estimates do better still (measured
    # 2e-6, 3e-7, 2e-7 Ha per electron; the 20^3 mesh limits them).
    assert abs(estimate - exact) / FCC_N < 1e-5


@pytest.mark.parametrize("name, width, m", [("gaussian", 0.02, 2), ("fermi-dirac", 0.01, 2),
                                            ("mp1", 0.06, 4), ("cold", 0.03, 3)])
def test_energy_and_free_energy_errors_have_the_predicted_ratio(mesh20, name, width, m):
    # dF/dsigma = -S gives E - E0 = (1 - m)(F - E0) when F - E0 ~ sigma^m; m is set by
    # the first non-vanishing moment of the delta approximant (tests above). This is
    # what the zero-width estimate E0 = F + (E - F)/m rests on. Measured ratios:
    # -1.003, -1.03, -3.04, -2.03; 10 % of |1 - m| covers next-order terms and mesh noise.
    energy, free, estimate, exact = _zero_width(mesh20, name, width)
    ratio = (energy - exact) / (free - exact)
    assert ratio == pytest.approx(1 - m, rel=0.1)
    assert abs(estimate - exact) < 0.1 * min(abs(energy - exact), abs(free - exact))


def test_cold_free_energy_alone_is_a_poorer_zero_width_estimate(mesh20):
    # Common practice takes E0 = F for cold smearing; the 1/m correction we add
    # removes the remaining sigma^3 term (measured: F off by 2.3e-5 Ha per electron
    # at sigma = 0.03 Ha, our estimate by 2e-7).
    energy, free, estimate, exact = _zero_width(mesh20, "cold", 0.03)
    assert abs(estimate - exact) < 0.05 * abs(free - exact)
