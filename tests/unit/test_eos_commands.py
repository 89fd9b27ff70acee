"""The equation-of-state, converge-settings and compare-structures commands end to end.

A tiny silicon input (5 Ha, 2x2x2 through Gamma) keeps the runs short. Its
lattice constant, 5.05 angstrom, is near the minimum at this low cutoff (found
by running the command once), so the scan needs no range extension. The numbers
themselves are not checked here (tests/validation does that at sounder
settings); the commands must run, write their files, resume and refuse bad
options with exit code 3.
"""

import json

import pytest

from pwsolid.cli import main
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_OK

TINY = """
title = "Brightfilm quick check"
[crystal]
prototype = "diamond"
lattice_constant = "5.05 angstrom"
species = ["Si"]
{extra_crystal}
[pseudopotentials]
Si = "Si-appelbaum-hamann.toml"
[basis]
cutoff = "5 Ha"
[brillouin_zone]
mesh = {mesh}
shift = [0, 0, 0]
[self_consistency]
energy_tolerance = "1e-7 Ha"
density_tolerance = 1e-5
"""


@pytest.fixture
def tiny(tmp_path):
    path = tmp_path / "tiny-si.toml"
    path.write_text(TINY.format(extra_crystal="", mesh="[2, 2, 2]"))
    return path


def test_equation_of_state_command_writes_its_files(tiny, capsys):
    args = ["equation-of-state", str(tiny), "--points", "5", "--volume-range", "4%"]
    assert main(args) == EXIT_OK
    out = capsys.readouterr()
    for name in ("Birch-Murnaghan", "Vinet", "Murnaghan", "polynomial", "spread between forms"):
        assert name in out.out
    assert "volume scan [" in out.err and "5/5" in out.err          # the progress bar
    d = tiny.parent
    for suffix in (".eos.json", ".eos.png", ".eos.svg", ".eos-points.json"):
        assert (d / f"tiny-si{suffix}").stat().st_size > 100
    doc = json.loads((d / "tiny-si.eos.json").read_text())
    assert doc["schema"] == "pwsolid.equation-of-state/1"
    assert len(doc["points"]) == 5 and doc["scan"]["relative_volume_range"] == 0.04
    assert set(doc["fits"]) == {"birch-murnaghan", "vinet", "murnaghan", "polynomial"}
    assert doc["title"] == "Brightfilm quick check"
    # every point carries its analytic pressure beside the fit's -dE/dV (the numbers are
    # checked in tests/validation/test_eos_pressure.py)
    for p in doc["points"]:
        assert p["pressure_minus_fit_GPa"] == pytest.approx(
            p["pressure_GPa"] - p["fit_pressure_GPa"], abs=1e-9)
    assert doc["pressure_check"]["points_with_pressure"] == 5
    assert "pressure at each point" in out.out


def test_equation_of_state_resumes_from_its_restart_file(tiny, capsys):
    # an interrupted scan leaves finished points in <stem>.eos-points.json: here the
    # restart file of a finished 5-point scan is cut to two points, as after an interruption
    args = ["equation-of-state", str(tiny), "--points", "5", "--quiet"]
    assert main(args) == EXIT_OK
    restart = tiny.parent / "tiny-si.eos-points.json"
    doc = json.loads(restart.read_text())
    doc["points"] = doc["points"][:2]
    restart.write_text(json.dumps(doc))
    capsys.readouterr()
    assert main(args) == EXIT_OK
    out = capsys.readouterr()
    assert "2 from the restart file" in out.out and out.err == ""
    assert len(json.loads(restart.read_text())["points"]) == 5


def test_equation_of_state_output_dir_and_restart_file(tiny, tmp_path):
    out_dir = tmp_path / "results"
    restart = tmp_path / "keep" / "points.json"
    assert main(["equation-of-state", str(tiny), "--points", "5", "--quiet",
                 "--output-dir", str(out_dir), "--restart-file", str(restart)]) == EXIT_OK
    assert (out_dir / "tiny-si.eos.json").exists() and (out_dir / "tiny-si.eos.svg").exists()
    assert restart.exists() and not (out_dir / "tiny-si.eos-points.json").exists()


def test_restart_file_of_other_settings_is_refused(tiny, tmp_path, capsys):
    restart = tmp_path / "points.json"
    assert main(["equation-of-state", str(tiny), "--points", "5", "--quiet",
                 "--restart-file", str(restart)]) == EXIT_OK
    other = tmp_path / "other.toml"
    other.write_text(TINY.format(extra_crystal="", mesh="[2, 2, 2]").replace('"5 Ha"', '"5.5 Ha"'))
    capsys.readouterr()
    assert main(["equation-of-state", str(other), "--points", "5", "--quiet",
                 "--restart-file", str(restart)]) == EXIT_INVALID_INPUT
    assert "other settings" in capsys.readouterr().err


@pytest.mark.parametrize("options, words", [
    (["--volume-range", "abc"], "--volume-range"),
    (["--volume-range", "0.8"], "volume range"),
    (["--points", "three"], "--points"),
    (["--points", "3"], "between 5"),
    (["--c-over-a", "1.6,x"], "--c-over-a"),
    (["--c-over-a", "1.55,1.6,1.65"], "hexagonal"),
])
def test_equation_of_state_bad_options_exit_3(tiny, capsys, options, words):
    assert main(["equation-of-state", str(tiny), "--quiet", *options]) == EXIT_INVALID_INPUT
    assert words in capsys.readouterr().err


def test_equation_of_state_missing_input_exit_3(tmp_path, capsys):
    assert main(["equation-of-state", str(tmp_path / "nope.toml")]) == EXIT_INVALID_INPUT


def test_converge_settings_command(tiny, capsys):
    assert main(["converge-settings", str(tiny), "--cutoffs", "4,5", "--meshes", "1,2",
                 "--no-lattice", "--energy-precision", "5 meV"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "Cutoff series" in out and "Mesh series" in out and "Recommended for 5 meV/atom" in out
    doc = json.loads((tiny.parent / "tiny-si.convergence.json").read_text())
    assert doc["schema"] == "pwsolid.settings-convergence/1"
    assert [p["cutoff_Ha"] for p in doc["cutoff_series"]["settings"]] == [4.0, 5.0]
    assert [p["kpoint_mesh"] for p in doc["mesh_series"]["settings"]] == [[1, 1, 1], [2, 2, 2]]
    assert doc["requested_precision"]["energy_per_atom_meV"] == pytest.approx(5.0)
    for suffix in (".png", ".svg"):
        assert (tiny.parent / f"tiny-si.convergence{suffix}").stat().st_size > 1000


def test_cutoff_and_mesh_lists_are_read_with_units():
    from pwsolid.commands.convergence import parse_cutoffs, parse_meshes

    assert parse_cutoffs("6,8, 10") == [6.0, 8.0, 10.0]                 # bare numbers: Ha
    # 4 Ha and 5 Ha in eV with the CODATA hartree, 27.211386 eV, rounded to 1 meV
    assert parse_cutoffs("108.846,136.057 eV") == pytest.approx([4.0, 5.0], abs=1e-4)
    assert parse_cutoffs("12,16 Ry") == [6.0, 8.0]
    assert parse_meshes("2,4,6") == [2, 4, 6]
    assert parse_meshes("4x4x2, 6x6x4") == [(4, 4, 2), (6, 6, 4)]


@pytest.mark.parametrize("options, words", [
    (["--cutoffs", "a,b"], "--cutoffs"),
    (["--cutoffs", "6"], "at least two"),
    (["--cutoffs", "4,5 angstrom"], "unit"),
    (["--meshes", "2x2"], "--meshes"),
    (["--energy-precision", "1"], "--energy-precision"),
    (["--lattice-precision", "1 meV"], "--lattice-precision"),
    (["--energy-precision", "-1 meV"], "positive"),
])
def test_converge_settings_bad_options_exit_3(tiny, capsys, options, words):
    args = ["converge-settings", str(tiny), "--no-lattice", "--quiet", *options]
    assert main(args) == EXIT_INVALID_INPUT
    assert words in capsys.readouterr().err


def test_compare_structures_command(tiny, tmp_path, capsys):
    # the same silicon in a doubled cell (mesh halved along the doubled axis, so the
    # k-points fold onto the same set): equal energy per atom is size extensivity
    doubled = tmp_path / "tiny-si-doubled.toml"
    doubled.write_text(TINY.format(extra_crystal="supercell = [1, 1, 2]", mesh="[2, 2, 1]"))
    out_dir = tmp_path / "comparison"
    assert main(["compare-structures", str(tiny), str(doubled), "--points", "5",
                 "--output-dir", str(out_dir)]) == EXIT_OK
    out = capsys.readouterr().out
    assert "tiny-si-doubled" in out and "lowest:" in out
    doc = json.loads((out_dir / "structure-comparison.json").read_text())
    assert doc["schema"] == "pwsolid.structure-comparison/1"
    rows = {r["name"]: r for r in doc["candidates"]}
    assert rows["tiny-si-doubled"]["atoms_per_cell"] == 4
    # same plane waves and k-points, FFT grids of the same density: 0.1 meV/atom and
    # 0.1 % of the volume leave room for the grid-dependent exchange-correlation sum
    assert max(r["energy_above_lowest_per_atom_eV"] for r in rows.values()) < 1e-4
    v = [r["equilibrium_volume_per_atom_angstrom3"] for r in rows.values()]
    assert v[0] == pytest.approx(v[1], rel=1e-3)
    assert (out_dir / "tiny-si.eos-points.json").exists()
    assert (out_dir / "tiny-si-doubled.eos-points.json").exists()


def test_compare_structures_refuses_incomparable_inputs(tiny, tmp_path, capsys):
    other = tmp_path / "other.toml"
    other.write_text(TINY.format(extra_crystal="", mesh="[2, 2, 2]").replace('"5 Ha"', '"6 Ha"'))
    assert main(["compare-structures", str(tiny), str(other), "--quiet"]) == EXIT_INVALID_INPUT
    assert "differ in cutoff" in capsys.readouterr().err
    assert main(["compare-structures", str(tiny), "--quiet"]) == EXIT_INVALID_INPUT
    assert main(["compare-structures", str(tiny), str(tiny), "--quiet"]) == EXIT_INVALID_INPUT
