"""Every command refuses an unwritable output location before any work (issue 15).

Table-driven over every command and every option or input key that names where results
go: a directory given as a file, a file given as a directory, a parent that is a file
(so that the directory cannot be created) and a read-only parent. Each must end in exit
code 3 with one clear line naming the option, no traceback, and no calculation started:
the fixture replaces the entry points of the work (the SCF set-up, the uniform-gas
testbench, the empirical bands, the jellium and response studies) with a function that
fails loudly.
"""

import importlib
import os

import pytest

import pwsolid.scf
from pwsolid.cli import main
from pwsolid.commands.common import write_or_keep
from pwsolid.errors import EXIT_INVALID_INPUT

TINY = """
title = "Brightfilm output check"
[crystal]
prototype = "diamond"
lattice_constant = "5.05 angstrom"
species = ["Si"]
[pseudopotentials]
Si = "Si-appelbaum-hamann.toml"
[basis]
cutoff = "4 Ha"
[brillouin_zone]
mesh = [1, 1, 1]
shift = [0, 0, 0]
{output}
"""


class WorkStarted(Exception):
    """Raised when a command starts computing although its outputs cannot be written."""


def _no_work(*args, **kwargs):
    raise WorkStarted("the calculation started before the outputs were checked")


@pytest.fixture
def setup(tmp_path, monkeypatch):
    monkeypatch.setattr(pwsolid.scf, "prepare", _no_work)
    # (the workflows package re-exports functions under the names of its modules)
    monkeypatch.setattr(importlib.import_module("pwsolid.workflows.uniform_gas"),
                        "testbench_report", _no_work)
    monkeypatch.setattr(importlib.import_module("pwsolid.workflows.band_structure"),
                        "empirical_band_structure", _no_work)
    monkeypatch.setattr(importlib.import_module("pwsolid.workflows.density_response"),
                        "static_response", _no_work)
    monkeypatch.setattr(importlib.import_module("pwsolid.workflows.jellium"),
                        "jellium_convergence", _no_work)
    for name in ("jellium_surface", "surface_convergence"):
        module = importlib.import_module("pwsolid.workflows.jellium_surface")
        if hasattr(module, name):
            monkeypatch.setattr(module, name, _no_work)
    monkeypatch.chdir(tmp_path)
    (tmp_path / "a-directory").mkdir()
    (tmp_path / "a-file.txt").write_text("not a directory\n")
    return tmp_path


def _input(tmp_path, output: str = ""):
    path = tmp_path / "tiny-si.toml"
    path.write_text(TINY.format(output=output))
    return str(path)


# Bad locations: (kind, path relative to the test folder, used for files or directories)
DIRECTORY_AS_FILE = "a-directory"
FILE_AS_DIRECTORY = "a-file.txt"
UNDER_A_FILE = "a-file.txt/sub/out.json"

# (command id, argv builder taking (input path, bad location))
FILE_OPTIONS = [
    ("relax-structure --checkpoint-file",
     lambda i, p: ["relax-structure", i, "--checkpoint-file", p]),
    ("ground-state --result-file", lambda i, p: ["ground-state", i, "--result-file", p]),
    ("ground-state --density-file", lambda i, p: ["ground-state", i, "--density-file", p]),
    ("ground-state --checkpoint-file",
     lambda i, p: ["ground-state", i, "--checkpoint-file", p]),
    ("equation-of-state --restart-file",
     lambda i, p: ["equation-of-state", i, "--restart-file", p]),
    ("compare-structures --result-file",
     lambda i, p: ["compare-structures", i, i.replace("tiny-si", "tiny-si-2"), "--result-file",
                   p]),
    ("jellium-surface --points-file",
     lambda i, p: ["jellium-surface", "--radii", "4", "--points-file", p]),
]
DIRECTORY_OPTIONS = [
    ("relax-structure", lambda i, p: ["relax-structure", i, "--output-dir", p]),
    ("equation-of-state", lambda i, p: ["equation-of-state", i, "--output-dir", p]),
    ("converge-settings", lambda i, p: ["converge-settings", i, "--output-dir", p]),
    ("compare-structures",
     lambda i, p: ["compare-structures", i, i.replace("tiny-si", "tiny-si-2"), "--output-dir", p]),
    ("band-structure", lambda i, p: ["band-structure", i, "--output-dir", p]),
    ("density-of-states", lambda i, p: ["density-of-states", i, "--output-dir", p]),
    ("empirical-bands", lambda i, p: ["empirical-bands", "Si", "--output-dir", p]),
    ("jellium", lambda i, p: ["jellium", "--output-dir", p]),
    ("density-response", lambda i, p: ["density-response", "--output-dir", p]),
    ("xc-testbench", lambda i, p: ["xc-testbench", "--output-dir", p]),
    ("phonons", lambda i, p: ["phonons", i, "--output-dir", p]),
    ("jellium-surface", lambda i, p: ["jellium-surface", "--radii", "4", "--output-dir", p]),
    ("quasi-harmonic", lambda i, p: ["quasi-harmonic", i, "--output-dir", p]),
    ("vibrational-thermodynamics",
     lambda i, p: ["vibrational-thermodynamics", i, "--output-dir", p]),
]
INPUT_KEYS = ["result_file", "density_file", "checkpoint_file"]


def _run_and_check(argv, capsys, option):
    code = main(argv)
    err = capsys.readouterr().err
    assert code == EXIT_INVALID_INPUT, err
    assert "Traceback" not in err and err.count("\n") == 1
    assert option in err


def _copy_for_compare(setup, argv):
    # compare-structures needs a second candidate
    src = setup / "tiny-si.toml"
    (setup / "tiny-si-2.toml").write_text(src.read_text())


def test_there_is_a_case_for_every_command_that_writes():
    from pwsolid.cli import build_parser

    sub = next(a for a in build_parser()._actions if a.dest == "command")
    writers = set(sub.choices) - {"check-input", "input-keys", "list-pseudopotentials"}
    covered = {name.split()[0] for name, _ in FILE_OPTIONS + DIRECTORY_OPTIONS}
    assert writers <= covered, writers - covered


@pytest.mark.parametrize("bad", [DIRECTORY_AS_FILE, UNDER_A_FILE])
@pytest.mark.parametrize("name, argv", FILE_OPTIONS, ids=[c[0] for c in FILE_OPTIONS])
def test_file_options_refuse_unwritable_locations(setup, capsys, name, argv, bad):
    inp = _input(setup)
    _copy_for_compare(setup, argv)
    _run_and_check(argv(inp, str(setup / bad)), capsys, name.split()[-1])


@pytest.mark.parametrize("bad", [FILE_AS_DIRECTORY, "a-file.txt/cannot-be-made"])
@pytest.mark.parametrize("name, argv", DIRECTORY_OPTIONS, ids=[c[0] for c in DIRECTORY_OPTIONS])
def test_output_directories_refuse_unwritable_locations(setup, capsys, name, argv, bad):
    inp = _input(setup)
    _copy_for_compare(setup, argv)
    _run_and_check(argv(inp, str(setup / bad)), capsys, "--output-dir")


@pytest.mark.parametrize("key", INPUT_KEYS)
@pytest.mark.parametrize("command", ["ground-state", "check-input"])
@pytest.mark.parametrize("bad", [DIRECTORY_AS_FILE, UNDER_A_FILE])
def test_output_keys_of_the_input_refuse_unwritable_locations(setup, capsys, key, command, bad):
    inp = _input(setup, f'[output]\n{key} = "{bad}"\n')
    _run_and_check([command, inp], capsys, f"output.{key}")


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only directories, so a "
                    "read-only parent stops nothing here; the file-as-directory cases cover it")
@pytest.mark.parametrize("name, argv", DIRECTORY_OPTIONS[:1] + FILE_OPTIONS[:1],
                         ids=["equation-of-state", "ground-state"])
def test_read_only_parent_is_refused(setup, capsys, name, argv):
    locked = setup / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        inp = _input(setup)
        option = "--output-dir" if "--output-dir" in argv("i", "p") else name.split()[-1]
        _run_and_check(argv(inp, str(locked / "out")), capsys, option)
    finally:
        locked.chmod(0o700)


def test_a_write_that_fails_at_the_end_keeps_the_result_and_says_where(tmp_path, monkeypatch,
                                                                       capsys):
    monkeypatch.chdir(tmp_path)
    target = tmp_path / "gone" / "result.json"
    written = []

    def write(path):
        if path == target:
            raise PermissionError(13, "Permission denied")
        path.write_text("{}")
        written.append(path)

    kept = write_or_keep(target, write, "result")
    assert kept == tmp_path / "pwsolid-kept-result.json" and kept.read_text() == "{}"
    err = capsys.readouterr().err
    assert str(target) in err and str(kept) in err and "Permission denied" in err


def test_ground_state_keeps_its_result_when_the_disk_refuses_it_at_the_end(tmp_path,
                                                                            monkeypatch, capsys):
    import pwsolid.results

    monkeypatch.chdir(tmp_path)
    inp = _input(tmp_path, '[output]\nresult_file = "out/r.json"\n')
    real = pwsolid.results.write_json

    def refuse_first(path, doc):
        if path.name == "r.json" and path.parent.name == "out":
            raise OSError(28, "No space left on device")
        real(path, doc)

    monkeypatch.setattr(pwsolid.results, "write_json", refuse_first)
    assert main(["ground-state", inp, "--quiet"]) in (0, 4)
    captured = capsys.readouterr()
    kept = tmp_path / "pwsolid-kept-r.json"
    assert kept.exists() and str(kept) in captured.err and "No space left" in captured.err
    assert "Traceback" not in captured.err
