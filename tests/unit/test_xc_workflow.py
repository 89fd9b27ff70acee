"""Unit tests of the uniform-gas testbench workflow (pwsolid.workflows.uniform_gas)
and of its plot (pwsolid.plots.xc)."""

import json
import math
from pathlib import Path

import numpy as np
import pytest

from pwsolid import xc
from pwsolid.errors import InputError
from pwsolid.units import HARTREE_EV
from pwsolid.workflows import uniform_gas

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "inputs" / "functionals" / "brightfilm-trial-correlation.py"


def test_table_holds_exchange_correlation_and_total():
    rs = [1.0, 2.0, 10.0]
    zeta = [0.0, 0.5, 1.0]
    table = uniform_gas.uniform_gas_table(["lda-pw92", "slater-exchange"], rs, zeta)
    assert table.functionals == ("lda-pw92", "slater-exchange")
    assert table.exchange.shape == table.correlation.shape == table.total.shape == (2, 3, 3)
    np.testing.assert_allclose(table.total, table.exchange + table.correlation, rtol=1e-14)
    # exact exchange of the gas, -0.4581653/rs Ha times the spin factor [C]
    factor = 0.5 * ((1 + np.array(zeta)) ** (4 / 3) + (1 - np.array(zeta)) ** (4 / 3))
    expected = -0.75 * (9 / (4 * math.pi ** 2)) ** (1 / 3) / np.array(rs)[:, None] * factor
    np.testing.assert_allclose(table.exchange[0], expected, rtol=1e-13)
    np.testing.assert_array_equal(table.correlation[1], 0.0)      # no correlation part
    np.testing.assert_allclose(table.in_ev("total"), table.total * HARTREE_EV, rtol=1e-15)
    n = xc.density_from_radius(np.array(rs))
    np.testing.assert_allclose(table.correlation[0, :, 0], xc.pw92_correlation(n)[0],
                               rtol=1e-13)
    assert table.exchange_assumed == (False, False)


def test_table_of_unpolarized_callable_has_gaps():
    def toy(n):
        eps = -0.9 * np.cbrt(n)
        return eps, (4 / 3) * eps

    table = uniform_gas.uniform_gas_table([toy], [1.0, 3.0], [0.0, 1.0])
    assert np.all(np.isfinite(table.total[0, :, 0])) and np.all(np.isnan(table.total[0, :, 1]))
    assert table.exchange_assumed == (True,)
    doc = table.as_document()
    assert doc["total_Ha"][0][0][1] is None
    json.dumps(doc, allow_nan=False)


@pytest.mark.parametrize("rs, zeta", [([0.0], [0.0]), ([-1.0], [0.0]), ([np.nan], [0.0]),
                                      ([1.0], [1.5]), ([1.0], [-0.1])])
def test_table_refuses_bad_grids(rs, zeta):
    with pytest.raises(InputError):
        uniform_gas.uniform_gas_table(["lda-pw92"], rs, zeta)


def test_table_needs_a_functional():
    with pytest.raises(InputError):
        uniform_gas.uniform_gas_table([], [1.0])


def test_report_contents_and_document():
    report = uniform_gas.testbench_report("lda-pz81", ["lda-pw92", "lda-vwn", "lda-pz81"])
    assert report.references == ("lda-pw92", "lda-vwn")          # itself left out
    assert report.table.functionals == ("lda-pz81", "lda-pw92", "lda-vwn")
    np.testing.assert_allclose(report.differences["lda-vwn"],
                               report.table.correlation[0] - report.table.correlation[2])
    assert len(report.monte_carlo) == len(xc.CEPERLEY_ALDER_1980)
    assert report.failed_conditions == ()
    doc = report.as_document()
    text = json.dumps(doc, allow_nan=False)
    assert doc["schema"] == uniform_gas.TESTBENCH_SCHEMA
    assert doc["functional"]["name"] == "lda-pz81"
    assert "Ceperley" in doc["monte_carlo"]["source"]
    assert len(doc["exact_conditions"]) == 8
    assert "curves" not in text
    # PZ81 fits CA to 0.17 mHa (REFERENCES 1f, [C]); summary in mHa
    assert doc["monte_carlo"]["summary"]["zeta=0"]["max_abs_mHa"] < 0.5
    # the dense plot curves
    assert report.curves.rs.size > 100 and report.zeta_curves.zeta.size > 20


def test_report_of_user_file_and_failures_are_listed():
    report = uniform_gas.testbench_report(f"file:{EXAMPLE}")
    assert report.functional.name == "brightfilm-trial"
    assert report.references == uniform_gas.DEFAULT_REFERENCES
    doc = report.as_document()
    assert doc["functional"]["origin"].startswith("file:")
    wigner = uniform_gas.testbench_report("lda-wigner", [])
    assert wigner.references == () and wigner.differences == {}
    assert set(wigner.failed_conditions) == {"polarisation-weakens-correlation",
                                             "high-density-logarithm"}


def test_testbench_report_is_not_collected_as_a_test():
    assert uniform_gas.testbench_report.__test__ is False


def test_plot_on_given_axes():
    # (Writing PNG and SVG is checked by the command's end-to-end test.)
    from pwsolid.plots import new_axes
    from pwsolid.plots.xc import UniformGasPlot

    def toy(n):       # no spin-polarised form: the zeta curves are skipped
        eps = -0.9 * np.cbrt(n)
        return eps, (4 / 3) * eps

    report = uniform_gas.testbench_report(toy, ["lda-pw92"])
    fig, axes = new_axes(1, 3)
    assert UniformGasPlot.from_result(report).plot(axes) is fig
    assert axes[0].get_xscale() == "log"
    with pytest.raises(ValueError):
        UniformGasPlot.from_report(report).plot(axes[:2])
    import matplotlib.pyplot as plt
    plt.close(fig)
