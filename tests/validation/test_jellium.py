"""Jellium in the engine converges to the analytic uniform-gas energy per electron."""

import numpy as np

from pwsolid.cli import main
from pwsolid.workflows.jellium import jellium_convergence, uniform_gas_energy


def test_analytic_uniform_gas_terms():
    # t_s = 1.104951/rs^2 and e_x = -0.4581653/rs (REFERENCES 1a, exact closed forms);
    # e_c from PW92 at rs = 4: -31.8664 mHa (REFERENCES 1f table, [C]).
    e = uniform_gas_energy(4.0, "lda-pw92")
    assert abs(e["kinetic"] - 1.104951 / 16) < 1e-7
    assert abs(e["exchange_correlation"] - (-0.4581653 / 4 - 0.0318664)) < 2e-7


def test_self_consistent_jellium_converges_to_the_analytic_energy():
    # Exact limit: as the k-mesh grows, the Kohn-Sham energy per electron of a periodic
    # jellium cell tends to the uniform-gas value; the error must fall with the mesh and
    # be far below 0.01 mHa on a 16^3 mesh.
    study = jellium_convergence(4.0, meshes=(4, 8, 16), functional="lda-pw92")
    err = np.abs(study.errors)
    assert err[-1] < 1e-5 and err[-1] < err[0] / 10
    doc = study.as_document()
    assert len(doc["rows"]) == 3 and doc["schema"].startswith("pwsolid.jellium")


def test_jellium_command(tmp_path, capsys):
    assert main(["jellium", "--rs", "3", "--meshes", "4,6", "--output-dir", str(tmp_path)]) == 0
    assert "analytic energy per electron" in capsys.readouterr().out
    assert (tmp_path / "jellium-rs3.json").exists() and (tmp_path / "jellium-rs3.jellium.png").exists()
    assert main(["jellium", "--meshes", "4,x"]) == 3
