"""The band-structure, empirical-bands and density-of-states commands, end to end.

A tiny silicon input (5 Ha, 2x2x2 mesh through Γ) keeps each run to a second or two;
the commands are called as ``pwsolid.cli.main([...])`` and judged by their exit
codes, messages and files.
"""

import json

import pytest

from pwsolid.cli import main
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_OK

TINY_INPUT = """\
title = "Brightfilm substrate study: tiny silicon test"
[crystal]
prototype = "diamond"
lattice_constant = "5.431 angstrom"
species = ["Si"]
[basis]
cutoff = "{cutoff}"
[brillouin_zone]
mesh = [2, 2, 2]
shift = [0, 0, 0]
[output]
result_file = "{stem}.result.json"
density_file = "{density}"
"""


def _input(directory, stem="tiny", cutoff="5 Ha", density="tiny.density.npz"):
    path = directory / f"{stem}.toml"
    path.write_text(TINY_INPUT.format(cutoff=cutoff, stem=stem, density=density))
    return path


@pytest.fixture(scope="module")
def first_run(tmp_path_factory):
    """band-structure without a density file: the ground state runs first."""
    directory = tmp_path_factory.mktemp("bands")
    inp = _input(directory)
    out = directory / "out"
    code = main(["band-structure", str(inp), "--points", "20", "--output-dir", str(out),
                 "--quiet"])
    return directory, inp, out, code


def test_band_structure_runs_the_ground_state_first(first_run, capsys):
    directory, inp, out, code = first_run
    assert code == EXIT_OK
    assert (directory / "tiny.density.npz").exists()
    for suffix in ("bands.json", "bands.csv", "bands.png", "bands.svg", "bands.pdf"):
        path = out / f"tiny.{suffix}"
        assert path.exists() and path.stat().st_size > 0, path
    doc = json.loads((out / "tiny.bands.json").read_text())
    assert doc["schema"] == "pwsolid.band-structure/1"
    assert doc["gap_analysis"]["gap_kind"] == "indirect"
    assert doc["reference"]["kind"] == "valence-band top"
    assert len(doc["path"]["kpoints_fractional"]) == 20


def test_band_structure_reuses_the_density_and_adds_dos(first_run, capsys):
    directory, inp, out, _ = first_run
    capsys.readouterr()
    code = main(["band-structure", str(inp), "--path", "L-G-X", "--points", "15",
                 "--with-dos", "--dos-mesh", "3", "--formats", "png", "--window=-13,6",
                 "--output-dir", str(out / "dos"), "--quiet"])
    text = capsys.readouterr().out
    assert code == EXIT_OK
    assert "Using the density" in text and "running the ground state" not in text
    assert "band gap on the path" in text and "states below the valence-band top" in text
    for suffix in ("bands.json", "bands.csv", "bands.png", "dos.json", "dos.csv"):
        assert (out / "dos" / f"tiny.{suffix}").stat().st_size > 0
    assert not (out / "dos" / "tiny.bands.svg").exists()


def test_density_of_states_command(first_run, capsys):
    directory, inp, out, _ = first_run
    code = main(["density-of-states", str(inp), "--mesh", "3", "--method", "gaussian",
                 "--width", "0.2 eV", "--output-dir", str(out / "g"), "--formats", "png,svg",
                 "--quiet"])
    assert code == EXIT_OK
    for suffix in ("dos.json", "dos.csv", "dos.png", "dos.svg"):
        assert (out / "g" / f"tiny.{suffix}").stat().st_size > 0
    doc = json.loads((out / "g" / "tiny.dos.json").read_text())
    assert doc["method"] == "gaussian" and doc["gaussian_width_eV"] == pytest.approx(0.2)
    assert main(["density-of-states", str(inp), "--mesh", "2", "--output-dir",
                 str(out / "t"), "--formats", "png", "--quiet"]) == EXIT_OK
    assert "states below it" in capsys.readouterr().out


def test_a_density_of_another_calculation_is_refused(first_run, capsys):
    directory, _, out, _ = first_run
    other = _input(directory, stem="other", cutoff="6 Ha")
    capsys.readouterr()
    code = main(["band-structure", str(other), "--density-file",
                 str(directory / "tiny.density.npz"), "--output-dir", str(out), "--quiet"])
    assert code == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "different calculation" in err and "cutoff" in err
    assert main(["density-of-states", str(other), "--output-dir", str(out), "--quiet",
                 "--density-file", str(directory / "tiny.density.npz")]) == EXIT_INVALID_INPUT


@pytest.mark.parametrize("options, key", [
    (["--points", "ten"], "--points"),
    (["--points", "1"], "--points"),
    (["--formats", "png,gif"], "--formats"),
    (["--window=8,-3"], "--window"),
    (["--window", "low,high"], "--window"),
    (["--bands", "0"], "--bands"),
    (["--path", "G-Q"], "band_path"),
    (["--dos-mesh", "0"], "--dos-mesh"),
])
def test_bad_band_structure_options(first_run, capsys, options, key):
    directory, inp, out, _ = first_run
    capsys.readouterr()
    code = main(["band-structure", str(inp), "--output-dir", str(out / "bad"), "--quiet",
                 *options])
    assert code == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert key in err and err.count("\n") == 1            # one clear message
    assert not (out / "bad").exists()                    # refused before any work


@pytest.mark.parametrize("options", [["--method", "histogram"], ["--width", "0.1 eV"],
                                     ["--method", "gaussian", "--width", "0.1"],
                                     ["--mesh", "4,4"]])
def test_bad_density_of_states_options(first_run, options):
    directory, inp, out, _ = first_run
    assert main(["density-of-states", str(inp), "--quiet", *options]) == EXIT_INVALID_INPUT


def test_empirical_bands_command(tmp_path, capsys):
    code = main(["empirical-bands", "si", "--cutoff", "6 Ry", "--points", "20",
                 "--output-dir", str(tmp_path), "--formats", "png,pdf", "--quiet"])
    assert code == EXIT_OK
    for suffix in ("bands.json", "bands.csv", "bands.png", "bands.pdf"):
        assert (tmp_path / f"si-empirical.{suffix}").stat().st_size > 0
    assert "band gap on the path" in capsys.readouterr().out
    doc = json.loads((tmp_path / "si-empirical.bands.json").read_text())
    assert doc["details"]["cutoff_Ha"] == pytest.approx(3.0)
    assert main(["empirical-bands", "Sn", "--output-dir", str(tmp_path)]) == EXIT_INVALID_INPUT
    assert main(["empirical-bands", "Si", "--cutoff", "8", "--output-dir",
                 str(tmp_path)]) == EXIT_INVALID_INPUT
    assert main(["empirical-bands", "Si", "--bands", "4", "--output-dir",
                 str(tmp_path)]) == EXIT_INVALID_INPUT
