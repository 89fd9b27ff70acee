"""Reading input files into a Crystal and GroundStateSettings (pwsolid.config)."""

import json
import math
from dataclasses import fields
from pathlib import Path

import numpy as np
import pytest

from pwsolid.config import RunInput, load_input, parse_input, schema_table, schema_text
from pwsolid.crystal import diamond
from pwsolid.errors import InputError
from pwsolid.settings import GroundStateSettings
from pwsolid.units import BOHR_ANGSTROM, HARTREE_EV

FULL = '''
title = "Silicon wafer for the anti-glare coating line"

[crystal]
prototype = "diamond"
lattice_constant = "5.43 angstrom"
species = ["Si"]
supercell = [1, 1, 1]

[pseudopotentials]
Si = "Si-test.toml"

[basis]
cutoff = "30 Ry"
fft_grid = [27, 27, 27]

[brillouin_zone]
mesh = [6, 6, 6]
shift = [0, 0, 0]
use_symmetry = false

[exchange_correlation]
functional = "lda-pz81"

[self_consistency]
max_iterations = 25
energy_tolerance = "1e-5 eV"
density_tolerance = 1e-5
mixing_weight = 0.3
mixing_history = 5
empty_bands = 2

[output]
result_file = "out/wafer.json"
density_file = "out/wafer.npz"
'''

MINIMAL = '''
[crystal]
prototype = "diamond"
lattice_constant = "10.26 bohr"
species = "Si"
'''


def write(directory: Path, text: str, name: str = "run.toml") -> Path:
    path = directory / name
    path.write_text(text)
    return path


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    """An input directory with a dummy pseudopotential, and a different working directory."""
    (tmp_path / "Si-test.toml").write_text("# dummy: config only checks the file exists\n")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    return tmp_path


def test_full_document_builds_the_right_crystal(workdir):
    run = load_input(write(workdir, FULL))
    assert isinstance(run, RunInput)
    a = 5.43 / BOHR_ANGSTROM
    assert run.crystal.volume == pytest.approx(a**3 / 4, rel=1e-12)   # fcc primitive cell
    assert run.crystal.species == ("Si", "Si")
    assert np.allclose(run.crystal.positions, [[0, 0, 0], [0.25, 0.25, 0.25]])
    assert run.title == "Silicon wafer for the anti-glare coating line"


def test_full_document_builds_the_right_settings(workdir):
    s = load_input(write(workdir, FULL)).settings
    assert s.cutoff == pytest.approx(15.0)                       # 30 Ry
    assert s.fft_grid == (27, 27, 27)
    assert s.kpoint_mesh == (6, 6, 6)
    assert s.kpoint_shift == (0.0, 0.0, 0.0)
    assert s.use_symmetry is False
    assert s.functional == "lda-pz81"
    assert s.max_iterations == 25
    assert s.energy_tolerance == pytest.approx(1e-5 / HARTREE_EV, rel=1e-14)
    assert s.density_tolerance == 1e-5
    assert s.mixing_weight == 0.3
    assert s.mixing_history == 5
    assert s.empty_bands == 2
    assert s.pseudopotentials == {"Si": (workdir / "Si-test.toml").resolve()}


def test_relative_paths_resolve_against_the_input_directory(workdir):
    run = load_input(write(workdir, FULL))
    assert Path.cwd() != workdir
    assert run.result_file == workdir / "out" / "wafer.json"
    assert run.density_file == workdir / "out" / "wafer.npz"
    assert run.settings.pseudopotentials["Si"].parent == workdir.resolve()
    assert run.source == workdir / "run.toml"


def test_relative_input_path_is_resolved_too(workdir):
    write(workdir, FULL)
    run = load_input(Path("..") / "run.toml")          # relative to the working directory
    assert run.result_file.is_absolute()
    assert run.result_file.resolve() == (workdir / "out" / "wafer.json").resolve()


def test_defaults_are_filled_from_ground_state_settings(workdir):
    run = load_input(write(workdir, MINIMAL, "substrate.toml"))
    defaults = GroundStateSettings()
    for f in fields(GroundStateSettings):
        assert getattr(run.settings, f.name) == getattr(defaults, f.name), f.name
    assert run.settings.pseudopotentials == {}          # engine falls back to the bundled default
    assert run.title == ""
    assert run.result_file == workdir / "substrate.result.json"
    assert run.density_file == workdir / "substrate.density.npz"


def test_echo_has_every_key_with_defaults_in_user_units(workdir):
    run = load_input(write(workdir, MINIMAL, "substrate.toml"))
    echo = run.echo
    assert echo["crystal"]["lattice_constant"] == "10.26 bohr"
    assert echo["crystal"]["species"] == ["Si"]
    assert echo["crystal"]["supercell"] == [1, 1, 1]
    assert echo["basis"] == {"cutoff": "15 Ha", "fft_grid": None}
    assert echo["brillouin_zone"] == {"mesh": [4, 4, 4], "shift": [0.5, 0.5, 0.5],
                                      "use_symmetry": True}
    assert echo["exchange_correlation"] == {"functional": "lda-pz81"}
    assert echo["self_consistency"]["energy_tolerance"] == "1e-08 Ha"
    assert echo["self_consistency"]["max_iterations"] == 40
    assert echo["output"]["result_file"] == str(workdir / "substrate.result.json")
    json.dumps(echo)                                          # goes into a result document
    documented = {row.key for row in schema_table()}
    for section, keys in echo.items():
        if section in ("title", "pseudopotentials"):
            continue
        for key in keys:
            assert f"{section}.{key}" in documented


def test_echo_keeps_the_units_the_user_wrote(workdir):
    echo = load_input(write(workdir, FULL)).echo
    assert echo["basis"]["cutoff"] == "30 Ry"
    assert echo["self_consistency"]["energy_tolerance"] == "1e-5 eV"
    assert echo["crystal"]["lattice_constant"] == "5.43 angstrom"
    assert echo["pseudopotentials"] == {"Si": str((workdir / "Si-test.toml").resolve())}


@pytest.mark.parametrize("text", [FULL, MINIMAL])
def test_echo_parses_back_to_the_same_run(workdir, text):
    run = load_input(write(workdir, text))
    again = parse_input(run.echo, source="echo", base_dir=workdir / "elsewhere")
    assert again.settings == run.settings
    assert np.allclose(again.crystal.lattice, run.crystal.lattice)
    assert np.allclose(again.crystal.positions, run.crystal.positions)
    assert again.result_file == run.result_file
    assert again.echo == run.echo


EXPLICIT = '''
[crystal]
prototype = "explicit"
lattice_constant = "5.43 angstrom"
lattice_vectors = [[0.0, 0.5, 0.5], [0.5, 0.0, 0.5], [0.5, 0.5, 0.0]]

[[crystal.atoms]]
species = "Si"
position = [0.0, 0.0, 0.0]

[[crystal.atoms]]
species = "Si"
position = [0.25, 0.25, 0.25]
'''


def test_explicit_cell_equals_the_diamond_prototype(workdir):
    run = load_input(write(workdir, EXPLICIT))
    reference = diamond(5.43 / BOHR_ANGSTROM, "Si")
    assert np.allclose(run.crystal.lattice, reference.lattice, atol=1e-12)
    assert np.allclose(run.crystal.positions, reference.positions, atol=1e-12)
    assert run.crystal.species == reference.species
    assert run.echo["crystal"]["atoms"][1] == {"species": "Si", "position": [0.25, 0.25, 0.25]}
    assert "species" not in run.echo["crystal"]


def test_explicit_atoms_as_inline_tables(workdir):
    text = '''
[crystal]
prototype = "explicit"
lattice_constant = "4.2 angstrom"
lattice_vectors = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]
atoms = [ { species = "Cs", position = [0, 0, 0] }, { species = "Cl", position = [0.5, 0.5, 0.5] } ]
'''
    run = load_input(write(workdir, text))
    assert run.crystal.species == ("Cs", "Cl")
    assert run.crystal.volume == pytest.approx((4.2 / BOHR_ANGSTROM) ** 3)


def test_hcp_ideal_and_given_c_over_a(workdir):
    base = '[crystal]\nprototype = "hcp"\nlattice_constant = "2.95 angstrom"\nspecies = "Ti"\n'
    ideal = load_input(write(workdir, base, "ideal.toml"))
    c = ideal.crystal.lattice[2, 2] / np.linalg.norm(ideal.crystal.lattice[0])
    assert c == pytest.approx(math.sqrt(8 / 3))
    assert ideal.echo["crystal"]["c_over_a"] == pytest.approx(math.sqrt(8 / 3))
    given = load_input(write(workdir, base + "c_over_a = 1.587\n", "given.toml"))
    assert given.crystal.lattice[2, 2] / np.linalg.norm(given.crystal.lattice[0]) == \
        pytest.approx(1.587)


@pytest.mark.parametrize("proto, species, n_atoms", [
    ("zincblende", ["Ga", "As"], 2), ("rocksalt", ["Mg", "O"], 2),
    ("cesium-chloride", ["Cs", "Cl"], 2), ("fcc", ["Al"], 1), ("bcc", "W", 1),
    ("simple-cubic", ["Po"], 1),
])
def test_prototypes_and_species(workdir, proto, species, n_atoms):
    text = (f'[crystal]\nprototype = "{proto}"\nlattice_constant = "4.05 angstrom"\n'
            f'species = {json.dumps(species)}\n')
    run = load_input(write(workdir, text))
    assert run.crystal.n_atoms == n_atoms
    expected = species if isinstance(species, list) else [species]
    assert list(run.crystal.unique_species) == expected


def test_supercell_repeats_the_cell(workdir):
    run = load_input(write(workdir, MINIMAL + "supercell = [2, 1, 3]\n"))
    assert run.crystal.n_atoms == 12
    assert run.crystal.volume == pytest.approx(6 * 10.26**3 / 4)
    assert run.echo["crystal"]["supercell"] == [2, 1, 3]


def test_bare_pseudopotential_name_falls_back_to_bundled_directory(workdir, monkeypatch):
    bundled = workdir / "bundled"
    bundled.mkdir()
    (bundled / "Si-bundled.toml").write_text("# dummy\n")
    monkeypatch.setenv("PWSOLID_PSEUDO_DIR", str(bundled))
    run = load_input(write(workdir, MINIMAL + '[pseudopotentials]\nSi = "Si-bundled.toml"\n'))
    assert run.settings.pseudopotentials["Si"] == (bundled / "Si-bundled.toml").resolve()


def test_file_beside_the_input_wins_over_bundled(workdir, monkeypatch):
    bundled = workdir / "bundled"
    bundled.mkdir()
    (bundled / "Si-test.toml").write_text("# dummy\n")
    monkeypatch.setenv("PWSOLID_PSEUDO_DIR", str(bundled))
    run = load_input(write(workdir, MINIMAL + '[pseudopotentials]\nSi = "Si-test.toml"\n'))
    assert run.settings.pseudopotentials["Si"] == (workdir / "Si-test.toml").resolve()


def test_pseudopotential_in_subdirectory_and_absolute(workdir):
    sub = workdir / "mine"
    sub.mkdir()
    (sub / "Si-own.toml").write_text("# dummy\n")
    run = load_input(write(workdir, MINIMAL + '[pseudopotentials]\nSi = "mine/Si-own.toml"\n'))
    assert run.settings.pseudopotentials["Si"] == (sub / "Si-own.toml").resolve()
    text = MINIMAL + f'[pseudopotentials]\nSi = {json.dumps(str(sub / "Si-own.toml"))}\n'
    run = load_input(write(workdir, text, "absolute.toml"))
    assert run.settings.pseudopotentials["Si"] == (sub / "Si-own.toml").resolve()


def test_species_without_entry_is_left_out(workdir):
    text = ('[crystal]\nprototype = "zincblende"\nlattice_constant = "5.65 angstrom"\n'
            'species = ["Ga", "As"]\n[pseudopotentials]\nGa = "Si-test.toml"\n')
    run = load_input(write(workdir, text))
    assert set(run.settings.pseudopotentials) == {"Ga"}


def test_parse_input_from_a_dict_without_a_file(tmp_path):
    document = {"crystal": {"prototype": "fcc", "lattice_constant": "4.05 angstrom",
                            "species": ["Al"]}}
    run = parse_input(document, base_dir=tmp_path)
    assert run.source is None
    assert run.result_file == tmp_path / "pwsolid.result.json"
    with pytest.raises(InputError) as err:
        parse_input({"crystal": {**document["crystal"], "species": ["Al", "Cu"]}})
    assert err.value.source is None and err.value.key == "crystal.species"


def test_range_errors_from_settings_get_the_file_name(workdir):
    path = write(workdir, MINIMAL + '[basis]\ncutoff = "0.1 Ha"\n', "tiny.toml")
    with pytest.raises(InputError) as err:
        load_input(path)
    assert err.value.source == str(path) and err.value.key == "basis.cutoff"


def test_schema_table_documents_every_key_once():
    keys = [row.key for row in schema_table()]
    assert len(keys) == len(set(keys))
    assert {"basis.cutoff", "crystal.lattice_constant", "self_consistency.energy_tolerance",
            "output.density_file", "pseudopotentials.<species>", "title"} <= set(keys)
    rows = {row.key: row for row in schema_table()}
    assert rows["basis.cutoff"].unit == "energy" and rows["basis.cutoff"].default == '"15 Ha"'
    assert rows["crystal.lattice_constant"].default == "required"
    assert all(row.description for row in schema_table())
    text, table = schema_text(), schema_text(markdown=True)
    for key in keys:
        assert key in text and f"`{key}`" in table
