"""The meta-GGA testbench (conditions, tables, command) and user meta-GGA files.

Checks against the world: the conditions are exact properties named in
pwsolid.xc.meta_conditions (each with its source); here they must pass for SCAN and
r2SCAN and must fail for files built to break them (so no check passes vacuously);
a user file wrapping r2SCAN without derivatives gets numerical derivatives that agree
with r2SCAN's exact ones; a user file's potentials drive the SCF to r2SCAN's energy.
"""

import json
import textwrap
from pathlib import Path

import numpy as np
import pytest

from pwsolid import xc
from pwsolid.cli import main
from pwsolid.errors import InputError
from pwsolid.workflows.uniform_gas import testbench_report
from pwsolid.xc.lda import density_from_radius
from pwsolid.xc.meta_conditions import meta_grid_point

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "inputs" / "functionals" / "brightfilm-meta-exchange.py"

WRAPPED_R2SCAN = """
    import numpy as np
    from pwsolid.xc import get_functional
    NAME = "wrapped-r2scan"
    _F = get_functional("r2scan")

    def meta_energy_per_electron(n_up, n_down, s_uu, s_ud, s_dd, t_up, t_down):
        e = _F.evaluate_meta_polarized(n_up, n_down, s_uu, s_ud, s_dd, t_up, t_down)[0]
        return e / (n_up + n_down)
"""

BROKEN = """
    import numpy as np
    NAME = "broken-meta-correlation"
    ENERGY_TERM = "correlation"          # with r2SCAN exchange

    def meta_energy_per_electron(n_up, n_down, s_uu, s_ud, s_dd, t_up, t_down):
        # not PW92 at alpha = 1, not zero for one orbital, positive at large tau
        n = n_up + n_down
        tau_unif = 2.871 * n ** (5 / 3)
        return -0.02 + 0.004 * (t_up + t_down) / tau_unif
"""


def _write(tmp_path, body, name):
    path = tmp_path / name
    path.write_text(textwrap.dedent(body))
    return path


@pytest.mark.parametrize("name", ["scan", "r2scan"])
def test_built_in_meta_ggas_pass_every_condition_and_carry_alpha_s_tables(name):
    report = testbench_report(name)
    statuses = {c.name: c.status for c in report.conditions}
    assert report.failed_conditions == ()
    assert statuses["meta-uniform-gas-limit"] == "pass"
    assert statuses["single-orbital-correlation-free"] == "pass"
    document = report.as_document()
    meta = document["meta_dependence"]
    fx = np.array(meta["exchange_enhancement"])
    s, alpha = meta["reduced_gradient_s"], meta["iso_orbital_alpha"]
    assert fx.shape == (len(s), len(alpha))
    # F_x(s = 0, alpha = 1) = 1 (uniform gas) and F_x(s = 0, alpha = 0) = h0x = 1.174
    assert fx[s.index(0.0), alpha.index(1.0)] == pytest.approx(1.0, abs=1e-12)
    assert fx[s.index(0.0), alpha.index(0.0)] == pytest.approx(1.174, abs=1e-12)
    assert document["functional"]["needs_kinetic_density"] is True
    json.dumps(document)


def test_conditions_fail_for_a_functional_built_to_break_them(tmp_path):
    broken = xc.load_user_functional(_write(tmp_path, BROKEN, "broken.py"))
    report = testbench_report(broken)
    failed = set(report.failed_conditions)
    assert {"meta-uniform-gas-limit", "single-orbital-correlation-free",
            "meta-correlation-nonpositive"} <= failed
    statuses = {c.name: c.status for c in report.conditions}
    assert statuses["meta-exchange-uniform-scaling"] == "pass"     # r2SCAN's exchange
    assert statuses["meta-derivatives-consistency"] == "pass"      # numerical, consistent


def test_example_meta_exchange_file_is_judged(tmp_path):
    functional = xc.load_user_functional(EXAMPLE)
    assert functional.needs_kinetic_density and functional.exchange is not None
    report = testbench_report(functional)
    statuses = {c.name: c.status for c in report.conditions}
    assert statuses["meta-uniform-gas-limit"] == "pass"
    assert statuses["meta-exchange-uniform-scaling"] == "pass"
    assert statuses["meta-exchange-spin-scaling"] == "pass"
    assert statuses["two-electron-exchange-bound"] == "fail"      # by construction: 1.17 + s


def test_numerical_derivatives_of_a_user_file_agree_with_the_exact_ones(tmp_path):
    user = xc.load_user_functional(_write(tmp_path, WRAPPED_R2SCAN, "wrapped.py"))
    exact = xc.get_functional("r2scan")
    rs, zeta, s, alpha = (a.ravel() for a in np.meshgrid(
        [0.5, 2.0, 8.0], [0.0, 0.5, 0.9], [0.0, 0.5, 2.0], [0.0, 1.0, 3.0], indexing="ij"))
    n = density_from_radius(rs)
    args = meta_grid_point(n, zeta, s, alpha)
    mine = user.evaluate_meta_polarized(*args)
    reference = exact.evaluate_meta_polarized(*args)
    scales = [n, n, args[2] + 1e-2 * n ** (8 / 3), n ** (8 / 3), args[4] + 1e-2 * n ** (8 / 3),
              n ** (5 / 3), n ** (5 / 3)]
    assert np.allclose(mine[0], reference[0], rtol=1e-14, atol=0)
    for k in range(7):
        natural = np.abs(reference[0]) / scales[k]
        error = np.abs(mine[k + 1] - reference[k + 1]) / (np.abs(reference[k + 1]) + 1e-3 * natural)
        assert error.max() < 1e-6, (k, error.max())


def test_bad_meta_file_is_refused_with_the_file_named(tmp_path):
    path = _write(tmp_path, """
        def meta_energy_per_electron(n_up, n_down, s_uu, s_ud, s_dd, t_up, t_down):
            return 1.0 / (t_up - t_up)
    """, "bad.py")
    with pytest.raises(InputError, match="not finite") as info:
        xc.load_user_functional(path)
    assert "bad.py" in str(info.value)
    term = _write(tmp_path, """
        ENERGY_TERM = "kinetic"
        def meta_energy_per_electron(*args):
            return -args[0]
    """, "term.py")
    with pytest.raises(InputError, match="ENERGY_TERM"):
        xc.load_user_functional(term)


def test_command_prints_alpha_s_tables_and_writes_the_report(tmp_path, capsys):
    code = main(["xc-testbench", "scan", "--output-dir", str(tmp_path), "--no-plots"])
    out = capsys.readouterr().out
    assert code == 0
    assert "Exchange enhancement F_x(s, alpha)" in out and "PASS  meta-uniform-gas-limit" in out
    document = json.loads((tmp_path / "scan-uniform-gas.json").read_text())
    assert "meta_dependence" in document


@pytest.mark.slow
def test_user_meta_file_drives_the_scf_like_the_built_in_one(tmp_path):
    import pwsolid

    path = _write(tmp_path, WRAPPED_R2SCAN, "wrapped.py")
    si = pwsolid.diamond(10.26, "Si")
    energies = []
    for functional in ("r2scan", f"file:{path}"):
        settings = pwsolid.GroundStateSettings(cutoff=4.0, kpoint_mesh=(1, 1, 1),
                                               functional=functional)
        energies.append(pwsolid.ground_state(si, settings).total_energy)
    assert abs(energies[0] - energies[1]) < 1e-6
