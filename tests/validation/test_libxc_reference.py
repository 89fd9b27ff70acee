"""pwsolid's functionals against Libxc, the reference library of functionals.

Source of every reference value: Libxc (S. Lehtola, C. Steigemann, M. J. T. Oliveira
and M. A. L. Marques, SoftwareX 7, 1 (2018)), version named in the table
tests/data/libxc/libxc_reference.npz, written by make_libxc_reference.py beside it.
The table tests run everywhere; the live ones when the Libxc C library is installed
(CI installs Debian's libxc9 where it can).

Tolerance 1e-10 relative (the issue's target): the formulas are the same, so what is
left is rounding, 1e-15 to 1e-13 on this grid (measured, see the README). At full
polarisation (|zeta| = 1) Libxc regularises the empty spin channel: it raises its
density to the functional's density threshold and floors 1 - |zeta| at its zeta
threshold (2.2e-16). That moves the energy by (threshold / n), up to 4e-9 relative at
r_s = 100, and the empty channel's potential by about 1e-5 (a cube root of the zeta
threshold; for PBE correlation the spin factor's derivative even diverges there), so
at |zeta| = 1 only the local functionals' energy is compared, to 1e-8. PBE correlation
is not compared at |zeta| = 1 at all: its spin factor phi has an infinite slope there,
so the threshold density moves the energy by (threshold / n)^(2/3), measured 1.6e-7 at
r_s < 1 and 4e-4 at r_s = 100.

Where the gradient terms of PBE exchange and correlation cancel (de/dsigma at zero
gradient and high density, the design of mu = beta pi^2 / 3) the sum is rounding
noise; it is compared relative to the size of its two parts.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from pwsolid.errors import InputError
from pwsolid.xc import get_functional

DATA = Path(__file__).parents[1] / "data" / "libxc"
sys.path.insert(0, str(DATA))
from make_libxc_reference import TABLE, evaluate, grid_inputs  # noqa: E402

TOLERANCE = 1e-10
FULL_POLARISATION_TOLERANCE = 1e-8     # Libxc's density threshold, see above

#: (pwsolid functional, Libxc specification, family, compare the spin-polarised form);
#: a sum of gradient functionals is compared relative to its parts (see above).
COMPARISONS = (
    ("slater-exchange", "lda_x", "lda", True),
    ("lda-pz81", "lda_x+lda_c_pz", "lda", True),
    ("lda-pw92", "lda_x+lda_c_pw", "lda", False),          # f''(0): see below
    ("lda-pw92-precise", "lda_x+lda_c_pw_mod", "lda", True),
    ("lda-vwn", "lda_x+lda_c_vwn", "lda", True),
    ("lda-von-barth-hedin", "lda_x+lda_c_vbh", "lda", True),
    # spin-polarised forms of these two are pwsolid's own constructions
    ("lda-hedin-lundqvist", "lda_x+lda_c_hl", "lda", False),
    ("lda-wigner", "lda_x+lda_c_wigner", "lda", False),
    ("pbe-exchange", "gga_x_pbe", "gga", True),
    ("pbe-correlation", "gga_c_pbe", "gga", True),
    ("pbe", "gga_x_pbe+gga_c_pbe", "gga", True),
)


def ours(name: str):
    return get_functional("pbe").correlation if name == "pbe-correlation" else \
        get_functional(name)


def relative_differences(values: np.ndarray, reference: np.ndarray, kind: str,
                         inputs: dict, full_polarisation: bool = False,
                         scale: np.ndarray | None = None) -> float:
    """Largest |ours - Libxc| / |Libxc| (0 where both are 0) at |zeta| < 1, or, with
    ``full_polarisation``, of a local functional's energy alone at |zeta| = 1.
    ``scale`` replaces |Libxc| as the denominator (the size of a sum's parts)."""
    values, reference = np.asarray(values), np.asarray(reference)
    difference = np.abs(values - reference)
    size = np.abs(reference) if scale is None else np.asarray(scale)
    relative = np.full_like(difference, np.inf)
    np.divide(difference, size, out=relative, where=size > 0)
    relative[difference == 0] = 0.0
    if not kind.endswith("_polarized"):
        return 0.0 if full_polarisation else float(relative.max())
    full = np.abs(inputs[f"{kind}/zeta"]) == 1.0
    if not full_polarisation:
        return float(relative[:, ~full].max())
    return float(relative[0, full].max()) if kind.startswith("lda") else 0.0


def part_scale(table, spec: str, kind: str) -> np.ndarray | None:
    """|x| + |c| of a gradient sum's parts from the table (None for one functional)."""
    parts = spec.split("+")
    if len(parts) == 1 or not kind.startswith("gga"):
        return None
    return sum(np.abs(table[f"{part}|{kind}"]) for part in parts)


@pytest.fixture(scope="module")
def table():
    with np.load(TABLE) as data:
        return {key: data[key] for key in data.files}


@pytest.fixture(scope="module")
def inputs():
    return grid_inputs()


def test_table_names_its_libxc_version_and_matches_the_script_grid(table, inputs):
    assert str(table["libxc_version"]).count(".") == 2
    for key, value in inputs.items():
        np.testing.assert_array_equal(table[key], value)


@pytest.mark.parametrize("mine, spec, family, polarised", COMPARISONS,
                         ids=[c[0] for c in COMPARISONS])
def test_builtin_agrees_with_libxc_table(table, inputs, mine, spec, family, polarised):
    computed = evaluate(ours(mine), family, inputs)
    for kind, values in computed.items():
        if kind.endswith("_polarized") and not polarised:
            continue
        reference = table[f"{spec}|{kind}"]
        worst = relative_differences(values, reference, kind, inputs,
                                     scale=part_scale(table, spec, kind))
        assert worst < TOLERANCE, f"{mine} vs Libxc {spec}, {kind}: {worst:.1e}"
        full = relative_differences(values, reference, kind, inputs, True)
        assert full < FULL_POLARISATION_TOLERANCE, f"{mine}, |zeta| = 1: {full:.1e}"


def test_polarised_pw92_differs_from_libxc_only_by_the_rounded_curvature(table, inputs):
    # Perdew & Wang, PRB 45, 13244 (1992) print f''(0) = 1.709921; pwsolid keeps the
    # exact 4/(9(2^(1/3)-1)) = 1.70992093416 (reason in pwsolid.xc.lda), Libxc's
    # lda_c_pw the printed digits. The two differ by 6.6e-8 relative in 1/f''(0),
    # times the spin-stiffness share of eps_c: at most a few 1e-8, zero at zeta = 0, 1.
    computed = evaluate(get_functional("lda-pw92"), "lda", inputs)["lda_polarized"]
    reference = table["lda_x+lda_c_pw|lda_polarized"]
    zeta = inputs["lda_polarized/zeta"]
    worst = relative_differences(computed, reference, "lda_polarized", inputs)
    assert 1e-9 < worst < 1e-7
    energy = np.abs(computed[0] - reference[0]) / np.abs(reference[0])
    assert energy[zeta == 0.0].max() < TOLERANCE
    assert energy[np.abs(zeta) == 1.0].max() < FULL_POLARISATION_TOLERANCE
    # with the exact curvature both sides (Libxc's lda_c_pw_mod) they agree to rounding
    precise = evaluate(get_functional("lda-pw92-precise"), "lda", inputs)["lda_polarized"]
    assert relative_differences(precise, table["lda_x+lda_c_pw_mod|lda_polarized"],
                                "lda_polarized", inputs) < TOLERANCE


def test_pbe_on_the_printed_pw92_constants_would_miss_libxc(table, inputs):
    # The issue measured 7.6e-5 relative with Table I's A = 0.031091...: the precise
    # constants are what closes the gap (a check that the fix is the cause).
    from pwsolid.xc.gga import pbe_gradient_correction, correlation_gradient_squared
    from pwsolid.xc.lda import pw92_correlation

    n, sigma = inputs["gga_unpolarized/n"], inputs["gga_unpolarized/sigma"]
    eps_c, _ = pw92_correlation(n)
    h, *_ = pbe_gradient_correction(eps_c, np.ones_like(n),
                                    correlation_gradient_squared(n, 0.0 * n, sigma))
    reference = table["gga_c_pbe|gga_unpolarized"][0]
    assert np.max(np.abs(n * (eps_c + h) - reference) / np.abs(reference)) > 1e-5


def test_own_spin_constructions_are_labelled():
    for name in ("lda-wigner", "lda-hedin-lundqvist"):
        assert "pwsolid's own construction" in get_functional(name).correlation.description


# ------------------------------------------------------------------------------------
# live: the installed Libxc
# ------------------------------------------------------------------------------------

def _live():
    from pwsolid.xc.libxc_bridge import libxc_available
    if not libxc_available():
        pytest.skip("the Libxc C library is not installed (apt-get install libxc9)")


@pytest.mark.parametrize("mine, spec, family, polarised", COMPARISONS,
                         ids=[c[0] for c in COMPARISONS])
def test_builtin_agrees_with_live_libxc(table, inputs, mine, spec, family, polarised):
    _live()
    computed = evaluate(ours(mine), family, inputs)
    reference = evaluate(get_functional(f"libxc:{spec}"), family, inputs)
    for kind, values in computed.items():
        if kind.endswith("_polarized") and not polarised:
            continue
        worst = relative_differences(values, reference[kind], kind, inputs,
                                     scale=part_scale(table, spec, kind))
        assert worst < TOLERANCE, f"{mine} vs live Libxc {spec}, {kind}: {worst:.1e}"


def test_live_libxc_reproduces_the_table(table, inputs):
    _live()
    from pwsolid.xc.libxc_bridge import libxc_version
    if libxc_version() != str(table["libxc_version"]):
        pytest.skip(f"table from Libxc {table['libxc_version']}, installed {libxc_version()}")
    for spec, family in (("lda_x+lda_c_pw_mod", "lda"), ("gga_x_pbe+gga_c_pbe", "gga")):
        for kind, values in evaluate(get_functional(f"libxc:{spec}"), family,
                                     inputs).items():
            np.testing.assert_array_equal(values, table[f"{spec}|{kind}"])


@pytest.mark.parametrize("name, words", [
    ("mgga_x_scan", "meta-GGA"),
    ("hyb_gga_xc_b3lyp", "exact (Fock) exchange"),
    ("gga_x_hjs_pbe", "range-separated"),
    ("lda_x_erf", "range-separated"),
    ("gga_xc_vv10", "VV10"),
    ("lda_k_tf", "kinetic-energy functional"),
    ("lda_x_1d_soft", "one- or two-dimensional"),
    ("gga_c_pbee", "did you mean"),
    ("no_such_functional", "has no functional named"),
])
def test_refused_libxc_names_give_one_clear_message(name, words):
    _live()
    with pytest.raises(InputError, match="exchange_correlation.functional") as info:
        get_functional(f"libxc:{name}")
    assert words in str(info.value)


@pytest.mark.parametrize("spec", ["libxc:", "libxc:lda_x+", "libxc:lda_x+lda_x"])
def test_malformed_libxc_specifications_are_refused(spec):
    _live()
    with pytest.raises(InputError):
        get_functional(spec)


def test_libxc_functional_parts_and_origin():
    _live()
    from pwsolid.xc import check_exact_conditions
    from pwsolid.xc.libxc_bridge import libxc_version

    pbe = get_functional("LIBXC: gga_x_pbe + gga_c_pbe")
    assert pbe.name == "libxc:gga_x_pbe+gga_c_pbe" and pbe.needs_gradients
    assert pbe.origin == f"libxc {libxc_version()}"
    assert pbe.exchange.name == "libxc:gga_x_pbe" and pbe.correlation.name == "libxc:gga_c_pbe"
    assert get_functional("libxc:lda_x").exchange is not None
    assert get_functional("libxc:lda_xc_teter93").has_parts is False
    # the exact-condition checks run on a Libxc functional as on a built-in one; they
    # see Libxc's density threshold: zero below it (r_s = 1e6, the low-density probe)
    # and the empty spin channel raised to it (4e-9 in exchange spin scaling at r_s 100)
    results = {r.name: r for r in check_exact_conditions(get_functional(
        "libxc:lda_x+lda_c_pw_mod"))}
    for name in ("correlation-negative", "polarisation-weakens-correlation",
                 "high-density-logarithm", "lieb-oxford-bound",
                 "potential-is-energy-derivative"):
        assert results[name].passed, results[name].detail
    assert results["low-density-inverse-rs"].passed is False
    assert results["exchange-spin-scaling"].worst_value < 1e-8


def test_missing_libxc_says_how_to_install_it(monkeypatch):
    from pwsolid.xc import libxc_bridge

    monkeypatch.setenv(libxc_bridge.LIBXC_PATH_VARIABLE, "/nonexistent/libxc.so")
    libxc_bridge._load.cache_clear()
    try:
        with pytest.raises(InputError, match="apt-get install libxc9"):
            get_functional("libxc:lda_x")
        assert libxc_bridge.libxc_version() is None
    finally:
        monkeypatch.undo()
        libxc_bridge._load.cache_clear()
