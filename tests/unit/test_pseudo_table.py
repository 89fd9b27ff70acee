"""The fitted-table machinery: target specifications, fingerprints, the written file, the
ghost check, and the input key that names a set."""

import textwrap

import pytest

from pwsolid.config import load_input as parse_input
from pwsolid.errors import InputError
from pwsolid.pseudo import load_pseudopotential
from pwsolid.pseudo.table import (TABLE_SETS, FitTargets, TableFit, entry_file_text, entry_record,
                                  ghost_levels, load_targets, read_record, table_elements,
                                  table_file, targets_fingerprint)

SILICON = dict(
    element="Si", atomic_number=14, frozen_core="1s2 2s2 2p6",
    configurations=["3s2 3p2", "3s1 3p3"], tests=["3s2 3p1"],
    radii={"s": [1.5], "p": [1.5]},
    start={"r_loc": 0.44, "c1": -7.3, "r0": 0.42, "h0_1": 5.9, "h0_2": 3.3, "r1": 0.48,
           "h1_1": 2.7},
    solid={"structure": "diamond", "lattice": 5.43, "mesh": 2, "smearing": "none"},
    cutoffs=[10, 20])


def test_every_recorded_specification_loads():
    elements = table_elements()
    assert {"Si", "C", "Al"} <= set(elements)
    for element in elements:
        t = load_targets(element)
        assert t.element == element and len(t.configurations) >= 2 and len(t.tests) >= 2
        # the neutral reference holds Z - core electrons
        core = sum(float(w[2:]) for w in t.frozen_core.split())
        assert abs(t.valence + core - t.atomic_number) < 1e-12, element


@pytest.mark.parametrize("change, key", [
    ({"colour": 1}, "colour"),
    ({"radii": {"f": [1.0]}}, "radii"),
    ({"start": {"c1": 1.0}}, "start"),
])
def test_bad_specifications_are_named(change, key):
    with pytest.raises(InputError) as info:
        FitTargets.from_mapping({**SILICON, **change}, source="targets.toml")
    assert key in str(info.value) and "targets.toml" in str(info.value)


def test_fingerprint_follows_the_targets_and_the_functional():
    t = FitTargets.from_mapping(SILICON)
    same = FitTargets.from_mapping(dict(SILICON))
    other = FitTargets.from_mapping({**SILICON, "tests": ["3s2 3p1.5"]})
    assert targets_fingerprint(t, "lda-pz81") == targets_fingerprint(same, "lda-pz81")
    assert targets_fingerprint(t, "lda-pz81") != targets_fingerprint(other, "lda-pz81")
    assert targets_fingerprint(t, "lda-pz81") != targets_fingerprint(t, "pbe")


def test_written_file_loads_and_keeps_parameters_and_record(tmp_path):
    t = FitTargets.from_mapping(SILICON)
    # a record of invented errors: this checks the file format only
    fit = TableFit(dict(t.start), [{"configuration": "3s2 3p2", "shell": "3s", "fitted": True,
                                    "all_electron": -0.4, "eigenvalue_error": 2e-4,
                                    "charge_errors": {1.5: 1e-3}}],
                   {"levels": {"s": [[-0.4, -0.4]]}, "worst": 1e-3, "ghost_free": True,
                    "sphere": 10.0, "ceiling": 2.0})
    record = entry_record(t, "lda", fit, {"cutoff_1meV_Ha": 20.0}, version="x", date="d")
    path = tmp_path / "Si.toml"
    path.write_text(entry_file_text(t, "lda", t.start, record, 20.0))
    pp = load_pseudopotential(path)
    assert pp.valence == 4 and pp.suggested_cutoff == 20.0
    assert [c.l for c in pp.separable.channels] == [0, 1]
    back = read_record(path)
    assert back["parameters"] == pytest.approx(t.start)
    assert back["record"]["summary"]["fingerprint"] == targets_fingerprint(t, "lda-pz81")
    assert FitTargets.from_mapping(back["record"]["targets"]) == t


@pytest.mark.slow
def test_ghost_check_flags_a_bound_ghost():
    # An attractive s projector binds an extra, nodeless s level below the 3s one: the
    # textbook ghost state (X. Gonze, R. Stumpf and M. Scheffler, Phys. Rev. B 44, 8503
    # (1991), from memory). With the recalled repulsive s channel there is none below the
    # valence level.
    t = FitTargets.from_mapping(SILICON)
    ghost = ghost_levels(t, "lda-pz81", {**t.start, "h0_1": -12.0, "h0_2": 0.0})
    assert not ghost["ghost_free"]
    assert ghost["levels"]["s"][0][1] < ghost["levels"]["s"][0][0] - 0.5


def test_table_files_of_both_sets_sit_in_their_own_directories():
    assert set(TABLE_SETS) == {"lda", "pbe"}
    assert table_file("Si", "lda").parent.name == "lda"
    assert table_file("Si", "pbe").parent.parent.name == "fitted-table"
    with pytest.raises(InputError):
        table_file("Si", "hf")


def _input(tmp_path, extra):
    path = tmp_path / "in.toml"
    path.write_text(textwrap.dedent(f"""
        [crystal]
        prototype = "diamond"
        species = "Si"
        lattice_constant = "5.43 angstrom"
        [pseudopotentials]
        {extra}
        """))
    return path


def test_input_names_a_set_of_the_table(tmp_path):
    if not table_file("Si", "lda").is_file():
        pytest.skip("no LDA silicon file in the table yet")
    run = parse_input(_input(tmp_path, 'fitted_table = "lda"'))
    assert run.settings.pseudopotentials["Si"] == table_file("Si", "lda").resolve()


def test_input_with_an_unknown_set_is_refused(tmp_path):
    with pytest.raises(InputError) as info:
        parse_input(_input(tmp_path, 'fitted_table = "hartree-fock"'))
    assert "fitted_table" in str(info.value) and "lda" in str(info.value)


def test_outside_charge_of_the_hydrogen_ground_state_is_exact():
    # u = 2 r exp(-r): int_R^inf u^2 dr = exp(-2R) (1 + 2R + 2R^2) (analytic)
    import numpy as np

    from pwsolid.pseudo.atom import radial_basis
    from pwsolid.pseudo.fitting import outside_charge

    basis = radial_basis(r_max=50.0, intervals=110, first_step=1e-3)
    u = 2 * basis.points * np.exp(-basis.points)
    for radius in (0.5, 1.5, 2.2):
        exact = np.exp(-2 * radius) * (1 + 2 * radius + 2 * radius ** 2)
        # 1e-9: the spline's own representation error of u, far below the 1e-3 of
        # counting the Gauss points beyond R
        assert abs(outside_charge(basis, u, radius) - exact) < 1e-9


@pytest.mark.parametrize("argv, word", [
    (["fit-pseudopotential", "Xx"], "Xx"),
    (["fit-pseudopotential", "Si", "--set", "hf"], "--set"),
    (["fit-pseudopotential"], "--all"),
    (["lattice-test-set", "--set", "hf"], "set"),
    (["lattice-test-set", "--solids", "Unobtainium"], "Unobtainium"),
])
def test_table_commands_refuse_bad_input_with_one_message(argv, word, capsys, tmp_path,
                                                          monkeypatch):
    from pwsolid.cli import main
    from pwsolid.errors import EXIT_INVALID_INPUT

    monkeypatch.chdir(tmp_path)
    assert main(argv) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert word in err and "Traceback" not in err
