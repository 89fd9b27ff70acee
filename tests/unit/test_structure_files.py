"""Structures in and out through the atomistic library: hand-written CIF files of published structures,
round trips, refusals (optional extra: skipped when the atomistic library is not installed)."""

from pathlib import Path

import numpy as np
import pytest
from scipy import constants

pytest.importorskip("ase")

from pwsolid.crystal import diamond, hexagonal_close_packed, rocksalt, zincblende  # noqa: E402
from pwsolid.errors import InputError  # noqa: E402
from pwsolid.interop import MissingExtraError, require  # noqa: E402
from pwsolid.interop.structure_files import (atoms_from_crystal, crystal_from_atoms,  # noqa: E402
                                            read_structure, write_structure)
from pwsolid.units import BOHR_ANGSTROM  # noqa: E402

DATA = Path(__file__).parents[1] / "data" / "structures"
# CODATA 2018 "lattice parameter of silicon", in angstrom
SI_A = constants.physical_constants["lattice parameter of silicon"][0] * 1e10


def _shortest_bond(crystal) -> float:
    cart = crystal.cartesian_positions
    shifts = np.array(np.meshgrid(*[[-1, 0, 1]] * 3)).reshape(3, -1).T @ crystal.lattice
    d = np.linalg.norm(cart[:, None, None] - cart[None, :, None] - shifts[None, None], axis=-1)
    return float(d[d > 1e-6].min())


def test_silicon_cif_gives_the_diamond_structure():
    # Fd-3m with one 8a site expands to the 8-atom conventional cube (International
    # Tables Vol. A, space group 227); nearest neighbours at a sqrt(3)/4 (geometry).
    r = read_structure(DATA / "silicon-diamond.cif")
    c = r.crystal
    assert (r.space_group, r.space_group_number) == ("Fd-3m", 227)
    assert c.n_atoms == 8 and set(c.species) == {"Si"}
    assert c.volume * BOHR_ANGSTROM ** 3 == pytest.approx(SI_A ** 3, rel=1e-9)
    assert _shortest_bond(c) * BOHR_ANGSTROM == pytest.approx(SI_A * np.sqrt(3) / 4, rel=1e-6)


def test_primitive_reduction_matches_the_prototype():
    r = read_structure(DATA / "silicon-diamond.cif", primitive=True)
    ref = diamond(SI_A / BOHR_ANGSTROM, "Si")
    assert r.crystal.n_atoms == 2
    assert r.crystal.volume == pytest.approx(ref.volume, rel=1e-9)   # a^3/4 (fcc primitive)
    assert r.space_group_number == 227
    assert any("primitive" in m for m in r.messages)


def test_gallium_arsenide_cif_gives_zincblende():
    r = read_structure(DATA / "gallium-arsenide-zincblende.cif")
    assert (r.space_group, r.space_group_number) == ("F-43m", 216)
    assert sorted(r.crystal.species) == ["As"] * 4 + ["Ga"] * 4
    # Ga-As bond a sqrt(3)/4 with a = 5.6533 angstrom as written in the file
    assert _shortest_bond(r.crystal) * BOHR_ANGSTROM == pytest.approx(5.6533 * np.sqrt(3) / 4,
                                                                     rel=1e-6)


def test_magnesium_cif_gives_hcp():
    r = read_structure(DATA / "magnesium-hcp.cif")
    assert r.space_group_number == 194 and r.crystal.n_atoms == 2
    # the file's 0.333333 becomes exactly 1/3 on import (refined symmetry)
    from pwsolid.symmetry import find_symmetry
    assert find_symmetry(r.crystal, 1e-9).space_group_number == 194
    # hcp volume per cell: (sqrt(3)/2) a^2 c (geometry)
    assert r.crystal.volume * BOHR_ANGSTROM ** 3 == pytest.approx(
        np.sqrt(3) / 2 * 3.2094 ** 2 * 5.2108, rel=1e-9)


def test_sodium_chloride_cif_gives_rock_salt():
    # Fm-3m, Na 4a, Cl 4b (International Tables, space group 225): its primitive cell is
    # the rock-salt prototype's, Na-Cl bond a/2
    r = read_structure(DATA / "sodium-chloride-rocksalt.cif", primitive=True)
    ref = rocksalt(5.640 / BOHR_ANGSTROM, ("Na", "Cl"))
    assert r.space_group_number == 225
    np.testing.assert_allclose(r.crystal.lattice @ r.crystal.lattice.T,
                               ref.lattice @ ref.lattice.T, atol=1e-9)
    assert _shortest_bond(r.crystal) * BOHR_ANGSTROM == pytest.approx(5.640 / 2, rel=1e-9)


def test_disordered_sites_are_refused():
    with pytest.raises(InputError, match="disordered or partly occupied"):
        read_structure(DATA / "disordered-alloy.cif")


def test_symmetry_tolerance_decides_what_counts_as_equal():
    # 0.2 bohr displacement breaks Fd-3m at a tight tolerance, not at a loose one
    si = diamond(10.26, "Si")
    moved = type(si)(si.lattice, si.species, si.positions + [[0, 0, 0], [0.01, 0, 0]])
    atoms = atoms_from_crystal(moved)
    path = Path(__file__).parent / "_moved_si.cif"
    try:
        atoms.write(path)
        assert read_structure(path, symmetry_tolerance=1e-3).space_group_number < 227
        # refined at the loose tolerance: exactly symmetric afterwards, even at a tight one
        refined = read_structure(path, symmetry_tolerance=0.5).crystal
        from pwsolid.symmetry import find_symmetry
        assert find_symmetry(refined, 1e-8).space_group_number == 227
        assert read_structure(path, symmetry_tolerance=0.5).space_group_number == 227
    finally:
        path.unlink(missing_ok=True)


@pytest.mark.parametrize("crystal", [diamond(10.26, "Si"), zincblende(10.68, ("Ga", "As")),
                                     hexagonal_close_packed(6.06, "Mg", 1.62)])
def test_round_trip_through_ase_and_cif(crystal, tmp_path):
    back = crystal_from_atoms(atoms_from_crystal(crystal))
    np.testing.assert_allclose(back.lattice, crystal.lattice, atol=1e-12)
    np.testing.assert_allclose(back.positions, crystal.positions, atol=1e-12)
    assert back.species == crystal.species
    write_structure(tmp_path / "x.cif", crystal)
    again = read_structure(tmp_path / "x.cif").crystal
    # CIF stores cell lengths and angles: the cell may be rotated, not reshaped
    np.testing.assert_allclose(again.lattice @ again.lattice.T,
                               crystal.lattice @ crystal.lattice.T, atol=1e-8)
    assert sorted(again.species) == sorted(crystal.species)


def test_molecule_slab_and_bad_files_are_refused(tmp_path):
    import ase
    with pytest.raises(InputError, match="not periodic"):
        read_structure(DATA / "water-molecule.xyz")
    slab = ase.Atoms("Si2", positions=[[0, 0, 0], [1.3, 1.3, 1.3]], cell=[5, 5, 20],
                     pbc=[True, True, False])
    with pytest.raises(InputError, match="not periodic along c"):
        crystal_from_atoms(slab)
    with pytest.raises(InputError, match="not found"):
        read_structure(tmp_path / "nothing.cif")
    junk = tmp_path / "junk.cif"
    junk.write_bytes(bytes(range(256)) * 4)
    with pytest.raises(InputError, match="could not read"):
        read_structure(junk)


def test_unknown_species_is_named(tmp_path):
    # the rock-salt CIF with an element symbol that does not exist (issue 18, bad input)
    text = (DATA / "sodium-chloride-rocksalt.cif").read_text()
    unknown = tmp_path / "unknown.cif"
    unknown.write_text(text.replace("Cl1 Cl", "Xx1 Xx"))
    with pytest.raises(InputError, match="unknown species 'Xx'"):
        read_structure(unknown)


def test_missing_library_names_the_extra():
    with pytest.raises(MissingExtraError, match=r'pip install "pwsolid\[nothing\]"'):
        require("a_module_that_does_not_exist_here", "nothing", "this feature")


def _input(tmp_path, crystal_lines: str) -> Path:
    import shutil
    for name in ("silicon-diamond.cif", "water-molecule.xyz"):
        shutil.copy(DATA / name, tmp_path / name)
    path = tmp_path / "from-file.toml"
    path.write_text(f"[crystal]\n{crystal_lines}\n[basis]\ncutoff = \"6 Ha\"\n")
    return path


def test_input_key_reads_the_crystal_from_a_structure_file(tmp_path):
    from pwsolid.config import load_input
    run = load_input(_input(tmp_path, 'structure_file = "silicon-diamond.cif"\n'
                                      'primitive_cell = true'))
    ref = diamond(SI_A / BOHR_ANGSTROM, "Si")
    np.testing.assert_allclose(run.crystal.lattice, ref.lattice, atol=1e-9)
    assert run.echo["crystal"]["space_group_number_found"] == 227
    conventional = load_input(_input(tmp_path, 'structure_file = "silicon-diamond.cif"'))
    assert conventional.crystal.n_atoms == 8


@pytest.mark.parametrize("lines, key, words", [
    ('structure_file = "silicon-diamond.cif"\nprototype = "diamond"', "crystal.prototype",
     "not used with crystal.structure_file"),
    ('structure_file = "water-molecule.xyz"', "crystal.structure_file", "not periodic"),
    ('structure_file = "nothing-here.cif"', "crystal.structure_file", "not found"),
    ('structure_file = "silicon-diamond.cif"\nsymmetry_tolerance = "5 bohr"',
     "crystal.symmetry_tolerance", "between"),
    ('prototype = "diamond"\nlattice_constant = "5.43 angstrom"\nspecies = "Si"\n'
     'primitive_cell = true', "crystal.primitive_cell", "only used with"),
])
def test_structure_file_mistakes_get_one_clear_message(tmp_path, capsys, lines, key, words):
    from pwsolid.cli import main
    assert main(["check-input", str(_input(tmp_path, lines))]) == 3
    err = capsys.readouterr().err
    assert key in err and words in err and "Traceback" not in err
