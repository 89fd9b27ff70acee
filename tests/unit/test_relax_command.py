"""The relax-structure command end to end, and its symmetry with the Python function.

A tiny silicon input (5 Ha, 2x2x2 through Gamma, a local pseudopotential) keeps the
runs to a few SCFs. The numbers are not checked against the world here
(tests/validation does that); the command must write its documents, say when it
did not converge (exit code 4), and write a relaxed input that runs as it is.
"""

import json

import numpy as np
import pytest

from pwsolid.cli import main
from pwsolid.config import load_input
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_NOT_CONVERGED, EXIT_OK
from pwsolid.workflows.relaxation import relax_structure

TINY = """
title = "Brightfilm relaxation check"
[crystal]
prototype = "diamond"
lattice_constant = "5.05 angstrom"
species = ["Si"]
[pseudopotentials]
Si = "Si-appelbaum-hamann.toml"
[basis]
cutoff = "5 Ha"
[brillouin_zone]
mesh = [2, 2, 2]
shift = [0, 0, 0]
[self_consistency]
energy_tolerance = "1e-8 Ha"
[relaxation]
{relaxation}
"""


def _write(tmp_path, relaxation: str, name="tiny-si.toml"):
    path = tmp_path / name
    path.write_text(TINY.format(relaxation=relaxation))
    return path


@pytest.mark.slow      # three relaxations (one SCF each): about 7 s on a shared machine
def test_symmetric_positions_need_no_move_and_the_relaxed_input_runs(tmp_path, capsys):
    path = _write(tmp_path, 'moves = "positions"\nforce_threshold = "0.003 eV/angstrom"\n'
                            "max_steps = 0")
    assert main(["relax-structure", str(path), "--output-dir", str(tmp_path)]) == EXIT_OK
    doc = json.loads((tmp_path / "tiny-si.relaxation.json").read_text())
    assert doc["converged"] is True and doc["moves_made"] == 0
    assert doc["settings"]["force_threshold_Ha_per_bohr"] == pytest.approx(
        0.003 / 27.211386 * 0.529177, rel=1e-5)         # eV/angstrom -> Ha/bohr (CODATA)
    assert (tmp_path / "tiny-si.relaxation.png").exists()
    relaxed = tmp_path / "tiny-si.relaxed.toml"
    again = load_input(relaxed)
    np.testing.assert_allclose(again.crystal.lattice, load_input(path).crystal.lattice,
                               atol=1e-10)
    assert again.relaxation.force_threshold == pytest.approx(doc["settings"][
        "force_threshold_Ha_per_bohr"])
    # the written file runs as it is, and the same structure needs no move
    assert main(["relax-structure", str(relaxed), "--output-dir", str(tmp_path)]) == EXIT_OK
    doc2 = json.loads((tmp_path / "tiny-si.relaxed.relaxation.json").read_text())
    assert doc2["moves_made"] == 0
    # the Python function on the same parsed objects gives the same numbers
    run = load_input(path)
    res = relax_structure(run.crystal, run.settings, run.relaxation)
    assert res.final["energy_Ha"] == pytest.approx(doc["steps"][0]["energy_Ha"], abs=1e-9)
    out = capsys.readouterr().out
    assert "Relaxation converged after 0 moves" in out


def test_unconverged_relaxation_writes_documents_and_exits_with_code_four(tmp_path, capsys):
    path = _write(tmp_path, 'moves = "cell"\nstress_threshold = "0.0001 GPa"\nmax_steps = 1\n'
                            "basis_correction = false")
    assert main(["relax-structure", str(path), "--output-dir", str(tmp_path)]) == \
        EXIT_NOT_CONVERGED
    doc = json.loads((tmp_path / "tiny-si.relaxation.json").read_text())
    assert doc["converged"] is False and len(doc["steps"]) == 2
    assert "not converged" in (tmp_path / "tiny-si.relaxed.toml").read_text().splitlines()[0] \
        .lower()
    assert "max_steps" in capsys.readouterr().err
    # the CIF beside the relaxed input holds the final (lowest-enthalpy) structure
    final = doc["final_structure"]
    _assert_cif_holds(tmp_path / "tiny-si.relaxed.cif",
                      np.array(final["lattice_vectors_angstrom"]), final["species"],
                      np.array(final["fractional_positions"]))
    # the checkpoint stays; a re-run at the same limit says what to do
    assert (tmp_path / "tiny-si.relaxation-checkpoint.npz").exists()
    assert main(["relax-structure", str(path), "--output-dir", str(tmp_path)]) == \
        EXIT_INVALID_INPUT
    assert "raise relaxation.max_steps" in capsys.readouterr().err


def _cell_parameters(lattice):
    """Lengths (rows' norms) and angles alpha, beta, gamma (degrees) of a lattice."""
    a, b, c = lattice
    angle = lambda u, v: np.degrees(np.arccos(u @ v / np.linalg.norm(u) / np.linalg.norm(v)))
    return np.r_[np.linalg.norm(lattice, axis=1), angle(b, c), angle(a, c), angle(a, b)]


def _assert_cif_holds(path, lattice_angstrom, species, fractional):
    """The CIF, read back by the atomistic library's reader, holds this cell and these atoms. A CIF keeps
    cell lengths and angles, not the orientation: compared through them (CIF standard,
    Hall, Allen and Brown, Acta Cryst. A47, 655 (1991))."""
    ase_io = pytest.importorskip("ase.io")
    back = ase_io.read(path, format="cif")
    # 1e-8: the writer prints full float precision; angles through arccos lose a little
    np.testing.assert_allclose(back.cell.cellpar(), _cell_parameters(lattice_angstrom),
                               atol=1e-8)
    assert back.get_chemical_symbols() == list(species)
    d = back.get_scaled_positions(wrap=False) - np.asarray(fractional)
    np.testing.assert_allclose(d - np.rint(d), 0.0, atol=1e-8)


def test_the_relaxed_structure_is_written_as_a_cif_that_reads_back(tmp_path):
    from pwsolid.commands.relax_structure import write_cif
    from pwsolid.crystal import Crystal, hexagonal_close_packed
    from pwsolid.units import BOHR_ANGSTROM

    pytest.importorskip("ase.io")
    hcp = hexagonal_close_packed(6.06, "Mg", 1.62)
    # a low-symmetry cell: sheared, atoms moved off their sites
    moved = Crystal(hcp.lattice @ np.array([[1.0, 0.02, 0.0], [0.0, 0.99, 0.01], [0.0, 0.0, 1.03]]),
                    hcp.species, hcp.positions + [[0.011, -0.02, 0.003], [0.0, 0.017, -0.005]])
    path = tmp_path / "moved.relaxed.cif"
    assert write_cif(path, moved) is None
    _assert_cif_holds(path, moved.lattice * BOHR_ANGSTROM, moved.species, moved.positions)


def test_without_ase_the_cif_is_skipped_with_a_note(tmp_path, monkeypatch):
    import sys

    from pwsolid.commands.relax_structure import write_cif
    from pwsolid.crystal import diamond

    monkeypatch.setitem(sys.modules, "ase", None)       # makes 'import ase' fail
    monkeypatch.setitem(sys.modules, "ase.io", None)
    note = write_cif(tmp_path / "si.cif", diamond(10.26, "Si"))
    assert "atomistic library" in note and "\n" not in note
    assert not (tmp_path / "si.cif").exists()


@pytest.mark.parametrize("option, where", [("--output-dir", "a file"),
                                           ("--checkpoint-file", "a directory"),
                                           ("--checkpoint-file", "under a file")])
def test_unwritable_outputs_are_refused_before_any_work(tmp_path, capsys, monkeypatch, option,
                                                        where):
    import pwsolid.workflows.relaxation as relaxation

    monkeypatch.setattr(relaxation, "relax_structure", None)     # no work may start
    path = _write(tmp_path, 'moves = "cell"')
    blocker = tmp_path / "blocker"
    blocker.write_text("")
    target = {"a file": blocker, "a directory": tmp_path,
              "under a file": blocker / "c.npz"}[where]
    assert main(["relax-structure", str(path), option, str(target)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert option in err and "Traceback" not in err


def test_threshold_without_unit_exits_with_code_three(tmp_path, capsys):
    path = _write(tmp_path, "force_threshold = 0.0001")
    assert main(["relax-structure", str(path)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert "relaxation.force_threshold" in err and "Ha/bohr" in err


def test_interrupted_command_resumes_from_its_checkpoint(tmp_path, capsys, monkeypatch):
    import pwsolid.workflows.relaxation as relaxation

    path = _write(tmp_path, 'moves = "cell"\nstress_threshold = "0.05 GPa"\nmax_steps = 10\n'
                            "basis_correction = false")
    real = relaxation.scf_evaluator

    def interrupted_after_two(*args, **kwargs):
        evaluate, calls = real(*args, **kwargs), []

        def wrapped(crystal, previous):
            calls.append(1)
            if len(calls) == 3:
                raise KeyboardInterrupt
            return evaluate(crystal, previous)
        return wrapped

    monkeypatch.setattr(relaxation, "scf_evaluator", interrupted_after_two)
    assert main(["relax-structure", str(path), "--output-dir", str(tmp_path)]) == 130
    assert "run the same command to continue" in capsys.readouterr().err
    monkeypatch.setattr(relaxation, "scf_evaluator", real)
    assert main(["relax-structure", str(path), "--output-dir", str(tmp_path)]) == EXIT_OK
    assert "resumed from" in capsys.readouterr().out
    doc = json.loads((tmp_path / "tiny-si.relaxation.json").read_text())
    assert doc["converged"] is True and doc["steps"][0]["scf_iterations"] > 0
    assert not (tmp_path / "tiny-si.relaxation-checkpoint.npz").exists()
