"""Local pseudopotentials: analytic form factors against numerical transforms."""

import numpy as np
import pytest
from scipy.integrate import quad

from pwsolid.errors import InputError
from pwsolid.pseudo import (AppelbaumHamann, EmptyCore, EvanescentCore, GaussianLocal,
                            bundled_pseudopotentials, default_pseudopotential_file,
                            load_pseudopotential)

FORMS = [
    AppelbaumHamann(valence=4, alpha=0.6102, v1=3.042, v2=-1.372),
    GaussianLocal(valence=1, r_loc=0.2, c1=-4.0663326, c2=0.6778322),
    GaussianLocal(valence=3, r_loc=0.45, c1=-8.49, c2=0.3, c3=0.1, c4=-0.02),
    EvanescentCore(valence=3, alpha=3.577, decay_length=0.3345),
]


def _short_range_numeric(form, q):
    # w(q) = 4 pi int r^2 j0(qr) [v(r) + Z/r] dr  (Fourier-Bessel transform of the
    # short-range part; the Coulomb tail -Z/r has the transform -4 pi Z / q^2)
    def integrand(r):
        j0 = np.sinc(q * r / np.pi)
        return 4 * np.pi * r * r * j0 * (form.real_space(r) + form.valence / r)
    val, _ = quad(integrand, 1e-10, 40.0, limit=400, epsabs=1e-12, epsrel=1e-12)
    return val


@pytest.mark.parametrize("form", FORMS, ids=lambda f: type(f).__name__)
@pytest.mark.parametrize("q", [0.0, 0.3, 1.1, 2.7, 5.0])
def test_reciprocal_form_matches_numerical_fourier_bessel(form, q):
    assert abs(form.short_range(np.array([q]))[0] - _short_range_numeric(form, q)) < 1e-8


def test_empty_core_transform_and_limit():
    form = EmptyCore(valence=3, core_radius=1.12)
    q = np.array([0.5, 1.3, 3.0])
    # the exact transform of v = -Z/r outside r_c: -4 pi Z cos(q r_c) / q^2 (Ashcroft 1966)
    assert np.allclose(form.form_factor(q), -4 * np.pi * 3 * np.cos(q * 1.12) / q ** 2)
    assert np.isclose(form.g0_integral, 2 * np.pi * 3 * 1.12 ** 2)
    assert np.isclose(form.short_range(np.array([1e-5]))[0], form.g0_integral, rtol=1e-9)


def test_bundled_files_load_and_match_their_element():
    names = bundled_pseudopotentials()
    assert "Si-appelbaum-hamann.toml" in names
    for el in ("H", "He", "Li", "Na", "K", "Mg", "Al", "Si"):
        pp = load_pseudopotential(default_pseudopotential_file(el))
        assert pp.element == el and pp.reference and pp.status


def test_malformed_files_give_clear_errors(tmp_path):
    bad = tmp_path / "X.toml"
    cases = {
        'element = "Si"\nvalence_charge = 4\nform = "magic"\n[parameters]\n': "unknown form",
        'element = "Si"\nform = "empty-core"\n[parameters]\n': "valence_charge",
        'element = "Si"\nvalence_charge = 4\nform = "empty-core"\n[parameters]\n'
        'core_radius = 1.0\n': "value = number",
        'element = "Si"\nvalence_charge = 4\nform = "empty-core"\n[parameters]\n'
        'core_radius = { value = 1.0, unit = "furlong" }\n': "unit must be one of",
        'element = = "Si"': "not valid TOML",
    }
    for text, fragment in cases.items():
        bad.write_text(text)
        with pytest.raises(InputError, match=fragment) as info:
            load_pseudopotential(bad)
        assert "X.toml" in str(info.value)


def test_evanescent_core_is_smooth_at_the_nucleus():
    # The defining property of the form (Fiolhais et al., Phys. Rev. B 51, 14001 (1995)):
    # v(r) is analytic at r = 0 with vanishing linear and cubic terms. The odd part of
    # the analytic continuation, O(x) = [f(x) - f(-x)]/2 = c1 x + c3 x^3 + c5 x^5 + ...,
    # must then scale as x^5: halving x divides O by 32 (it would divide it by 2 or 8
    # if c1 or c3 were non-zero).
    form = EvanescentCore(valence=1, alpha=3.1, decay_length=1.0)
    a, b, amp = form.alpha, form.beta, form.amplitude

    def f(x):   # the bracket of the published formula, continued to negative x
        return (1 - (1 + b * x) * np.exp(-a * x)) / x - amp * np.exp(-x)

    odd = [(f(x) - f(-x)) / 2 for x in (0.08, 0.04)]
    assert 28 < odd[0] / odd[1] < 36
    assert np.isclose(-form.real_space(np.array([0.08]))[0], f(0.08), rtol=1e-12)
    # and it is -Z/r far outside the core
    assert np.isclose(form.real_space(np.array([30.0]))[0], -1 / 30.0, rtol=1e-9)
