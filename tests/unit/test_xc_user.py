"""Unit tests of user functional files (pwsolid.xc.user) and of registering them."""

import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

from pwsolid import xc
from pwsolid.errors import InputError

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "inputs" / "functionals" / "brightfilm-trial-correlation.py"


def _write(tmp_path, body, name="trial.py"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(body))
    return path


def _spins(rs, zeta):
    n = xc.density_from_radius(rs)
    return 0.5 * n * (1 + zeta), 0.5 * n * (1 - zeta)


PW92_TOTAL = """
    import numpy as np
    from pwsolid import xc

    def energy_per_electron(n_up, n_down):
        return (xc.slater_exchange_polarized(n_up, n_down)[0]
                + xc.pw92_correlation_polarized(n_up, n_down)[0])
"""


# --- the example file ---------------------------------------------------------------

def test_example_functional_loads_and_runs():
    functional = xc.load_user_functional(EXAMPLE)
    assert functional.name == "brightfilm-trial"
    assert functional.origin == f"file:{EXAMPLE.resolve()}"
    assert functional.exchange is xc.SLATER_EXCHANGE       # ENERGY_TERM = "correlation"
    assert functional.correlation is not None
    assert "numerical potentials" in functional.description
    n = np.full((4, 5, 6), 0.02)
    eps, v = functional.evaluate(n)
    assert eps.shape == v.shape == n.shape and np.all(eps < 0) and np.all(v < eps)
    eps_p, v_up, v_down = functional.evaluate_polarized(0.7 * n, 0.3 * n)
    assert np.all(np.isfinite(eps_p)) and np.all(v_up < v_down)   # majority spin deeper


def test_example_through_get_functional_with_file_prefix():
    functional = xc.get_functional(f"file:{EXAMPLE}")
    assert functional.name == "brightfilm-trial"
    again = xc.get_functional(f"  FILE: {EXAMPLE}  ")
    n = np.array([1e-3, 0.1])
    np.testing.assert_array_equal(again.evaluate(n)[0], functional.evaluate(n)[0])


def test_loading_leaves_no_module_behind():
    before = set(sys.modules)
    xc.load_user_functional(EXAMPLE)
    assert not [m for m in set(sys.modules) - before if "user_functional" in m]


# --- potentials -----------------------------------------------------------------------

def test_numerical_potentials_match_analytic_ones(tmp_path):
    # The file gives only eps = Slater + PW92; its numerical potentials must match the
    # analytic ones of lda-pw92 to 1e-7 relative (the brief; the derivatives module
    # gives ~1e-11 away from an empty channel).
    functional = xc.load_user_functional(_write(tmp_path, PW92_TOTAL))
    reference = xc.get_functional("lda-pw92")
    rs, zeta = np.meshgrid(np.geomspace(0.05, 50, 30), [-0.9, -0.4, 0.0, 0.3, 0.8],
                           indexing="ij")
    up, down = _spins(rs, zeta)
    for mine, theirs in zip(functional.evaluate_polarized(up, down),
                            reference.evaluate_polarized(up, down)):
        np.testing.assert_allclose(mine, theirs, rtol=1e-7)
    n = xc.density_from_radius(rs[:, 0])
    for mine, theirs in zip(functional.evaluate(n), reference.evaluate(n)):
        np.testing.assert_allclose(mine, theirs, rtol=1e-7)
    # Fully polarised: the empty channel uses the extrapolated one-sided stencil
    # (~2e-7 relative for correlation, exact zero for exchange): 1e-6 of the scale.
    up, down = _spins(rs[:, 0], np.ones(30))
    mine = functional.evaluate_polarized(up, down)
    theirs = reference.evaluate_polarized(up, down)
    np.testing.assert_allclose(mine[1], theirs[1], rtol=1e-7)
    np.testing.assert_allclose(mine[2], theirs[2], rtol=0,
                               atol=1e-6 * np.max(np.abs(theirs[1])))


def test_supplied_potentials_are_used(tmp_path):
    path = _write(tmp_path, PW92_TOTAL + """
    CALLS = []

    def potentials(n_up, n_down):
        CALLS.append(1)
        _, vx_up, vx_down = xc.slater_exchange_polarized(n_up, n_down)
        _, vc_up, vc_down = xc.pw92_correlation_polarized(n_up, n_down)
        return vx_up + vc_up, 0 * vx_down - 1.0     # deliberately odd down potential
    """)
    functional = xc.load_user_functional(path)
    assert "analytic potentials" in functional.description
    _, v_up, v_down = functional.evaluate_polarized(np.array([0.1]), np.array([0.05]))
    np.testing.assert_array_equal(v_down, [-1.0])
    reference = xc.get_functional("lda-pw92").evaluate_polarized(np.array([0.1]),
                                                                 np.array([0.05]))
    np.testing.assert_allclose(v_up, reference[1], rtol=1e-14)


def test_density_floor_points_never_reach_user_code(tmp_path):
    path = _write(tmp_path, """
    import numpy as np

    def energy_per_electron(n_up, n_down):
        n = n_up + n_down
        assert np.all(n > 1e-30) and np.all(n_up >= 0) and np.all(n_down >= 0)
        return -0.5 * np.cbrt(n)
    """)
    functional = xc.load_user_functional(path)
    eps, v = functional.evaluate(np.array([0.0, -1.0, 0.2]))
    assert eps[0] == eps[1] == 0.0 and v[0] == v[1] == 0.0 and eps[2] < 0
    eps, v_up, v_down = functional.evaluate_polarized(np.array([0.0, -0.1, 0.1]),
                                                      np.array([0.0, 0.2, -0.3]))
    assert eps[0] == 0.0 and np.all(np.isfinite(eps)) and np.all(eps[1:] < 0)


def test_name_and_exchange_term(tmp_path):
    path = _write(tmp_path, """
    import numpy as np
    NAME = "half-exchange"
    DESCRIPTION = "half of Slater exchange"
    ENERGY_TERM = "exchange"

    def energy_per_electron(n_up, n_down):
        c = 0.5 * 0.75 * (6 / np.pi) ** (1 / 3)
        return -c * (n_up ** (4 / 3) + n_down ** (4 / 3)) / (n_up + n_down)
    """)
    functional = xc.load_user_functional(path)
    assert functional.name == "half-exchange" and functional.correlation is None
    assert functional.exchange is not None
    n = np.array([0.01, 1.0])
    np.testing.assert_allclose(functional.evaluate(n)[0], 0.5 * xc.slater_exchange(n)[0],
                               rtol=1e-13)
    assert xc.load_user_functional(path, name="other").name == "other"


# --- registering ------------------------------------------------------------------------

def test_register_and_use_by_name():
    functional = xc.load_user_functional(EXAMPLE)
    try:
        assert xc.register_functional(functional) is functional
        assert xc.get_functional("Brightfilm-Trial") is functional
        assert "brightfilm-trial" in xc.available_functionals()
        assert "brightfilm-trial" not in xc.FUNCTIONALS
        with pytest.raises(InputError, match="already registered"):
            xc.register_functional(xc.load_user_functional(EXAMPLE))
        replacement = xc.load_user_functional(EXAMPLE)
        xc.register_functional(replacement, replace=True)
        assert xc.get_functional("brightfilm-trial") is replacement
        with pytest.raises(InputError) as info:
            xc.get_functional("no-such-functional")
        assert "brightfilm-trial" in str(info.value) and "file:" in str(info.value)
    finally:
        xc.unregister_functional("brightfilm-trial")
    with pytest.raises(InputError):
        xc.get_functional("brightfilm-trial")


def test_register_refuses_built_in_and_bad_names():
    with pytest.raises(InputError, match="built-in"):
        xc.register_functional(xc.Functional("LDA-PW92", "clash", xc.slater_exchange))
    for bad in ("", "two words", "file:x"):
        with pytest.raises(InputError):
            xc.register_functional(xc.Functional(bad, "bad", xc.slater_exchange))
    with pytest.raises(InputError):
        xc.register_functional("lda-pw92")


# --- load errors: each names the file -------------------------------------------------

@pytest.mark.parametrize("body, fragment", [
    ("x = 1\n", "defines no function energy_per_electron"),
    ("energy_per_electron = 3\n", "defines no function energy_per_electron"),
    ("def energy_per_electron(a, b:\n    pass\n", "SyntaxError"),
    ("raise RuntimeError('boom')\n", "RuntimeError: boom"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return -1.0\n",
     "shape"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return -np.ones(3)\n",
     "shape"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return (-a, -b)\n",
     "shape"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n"
     "    return -np.cbrt(a + b) + 0.01 * np.log(b)\n", "not finite"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return 0.1 + 0 * a\n",
     "positive"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n"
     "    return -np.cbrt(a + b) + 1.0 / np.cbrt(a + b)\n", "positive"),
    ("import numpy as np\nENERGY_TERM = 'correlation'\ndef energy_per_electron(a, b):\n"
     "    return 0.5 + 0 * a\n", "Slater exchange \\+ this correlation"),
    ("import numpy as np\nENERGY_TERM = 'kinetic'\ndef energy_per_electron(a, b):\n"
     "    return -a\n", "ENERGY_TERM"),
    ("import numpy as np\nNAME = 'lda-pw92'\ndef energy_per_electron(a, b):\n"
     "    return -np.cbrt(a + b)\n", "built-in"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return -np.cbrt(a + b)\n"
     "potentials = 5\n", "potentials must be a function"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return -np.cbrt(a + b)\n"
     "def potentials(a, b):\n    return -a\n", "potentials must return 2 arrays"),
    ("import numpy as np\ndef energy_per_electron(a, b):\n    return -np.cbrt(a + b)\n"
     "def potentials(a, b):\n    return -a, np.nan * b\n", "not finite"),
])
def test_load_errors_name_the_file(tmp_path, body, fragment):
    path = _write(tmp_path, body)
    with pytest.raises(InputError, match=fragment) as info:
        xc.load_user_functional(path)
    assert str(path.resolve()) in str(info.value)
    assert info.value.source == str(path.resolve())


def test_missing_and_non_python_files(tmp_path):
    with pytest.raises(InputError, match="not found") as info:
        xc.load_user_functional(tmp_path / "absent.py")
    assert "absent.py" in str(info.value)
    other = tmp_path / "functional.txt"
    other.write_text("def energy_per_electron(a, b): return -a\n")
    with pytest.raises(InputError, match=r"\.py") as info:
        xc.load_user_functional(other)
    assert "functional.txt" in str(info.value)
    with pytest.raises(InputError, match="not found"):
        xc.get_functional(f"file:{tmp_path / 'absent.py'}")


def test_runtime_failure_of_user_code_is_an_input_error(tmp_path):
    path = _write(tmp_path, """
    import numpy as np

    def energy_per_electron(n_up, n_down):
        if n_up.ndim == 3:
            raise ValueError("no grids, please")
        return -np.cbrt(n_up + n_down)
    """)
    functional = xc.load_user_functional(path)    # the validation grid is 2-D
    with pytest.raises(InputError, match="no grids, please") as info:
        functional.evaluate(np.full((2, 2, 2), 0.1))
    assert str(path.resolve()) in str(info.value)
