"""The elastic-constants command end to end, and its symmetry with the Python function.

A tiny silicon input (6 Ha, 2x2x2 through Gamma, the separable Goedecker-Teter-Hutter
file, atoms clamped, one strain per sign) keeps the run to five SCFs. The
numbers are not checked against the world here (tests/validation/test_elastic_silicon.py
does that): the command must write its documents and figure, resume from its restart
file, agree with the Python function on the same parsed input, and refuse a shifted
mesh before any work.
"""

import json

import pytest

from pwsolid.cli import main
from pwsolid.config import load_input
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_OK
from pwsolid.workflows.elastic_constants import elastic_constants

TINY = """
title = "Brightfilm stiffness check"
[crystal]
prototype = "diamond"
lattice_constant = "5.39 angstrom"
species = ["Si"]
[pseudopotentials]
Si = "Si-goedecker-teter-hutter.toml"
[basis]
cutoff = "6 Ha"
[brillouin_zone]
mesh = [2, 2, 2]
shift = {shift}
[self_consistency]
energy_tolerance = "1e-8 Ha"
[elastic_constants]
largest_strain = 0.01
strains_per_sign = 1
relax_internal = false
"""


@pytest.mark.slow      # five SCFs of a tiny cell, then reused: about 6 s of CPU
def test_command_writes_resumes_and_agrees_with_the_function(tmp_path, capsys):
    path = tmp_path / "tiny-si.toml"
    path.write_text(TINY.format(shift="[0, 0, 0]"))
    assert main(["elastic-constants", str(path), "--output-dir", str(tmp_path)]) == EXIT_OK
    doc = json.loads((tmp_path / "tiny-si.elastic.json").read_text())
    assert doc["schema"] == "pwsolid.elastic-constants/1" and doc["converged"]
    assert doc["independent_constants"] == ["C11", "C12", "C44"]
    assert len(doc["points"]) == 5
    assert (tmp_path / "tiny-si.elastic.png").exists()
    assert (tmp_path / "tiny-si.elastic-points.json").exists()
    # a second run takes every point from the restart file
    assert main(["elastic-constants", str(path), "--output-dir", str(tmp_path)]) == EXIT_OK
    again = json.loads((tmp_path / "tiny-si.elastic.json").read_text())
    assert again["resumed_points"] == 5
    assert again["elastic_constants_GPa"] == doc["elastic_constants_GPa"]
    # the Python function on the same parsed input gives the same constants
    run = load_input(path)
    res = elastic_constants(run.crystal, run.settings, run.elastic)
    for name, value in doc["elastic_constants_GPa"].items():
        assert res.constants_gpa[name] == pytest.approx(value, abs=1e-6)
    assert "Born stability" in capsys.readouterr().out


def test_shifted_mesh_is_refused_before_any_work(tmp_path, capsys):
    path = tmp_path / "tiny-si.toml"
    path.write_text(TINY.format(shift="[0.5, 0.5, 0.5]"))
    assert main(["elastic-constants", str(path), "--output-dir", str(tmp_path)]) \
        == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "tiny-si.toml" in err and "brillouin_zone.shift" in err
    assert "sample the Brillouin zone differently" in err
    assert not list(tmp_path.glob("tiny-si.elastic*"))
