"""Every kind of bad input gives one clear InputError naming the file, the key and the fix.

Table-driven: each case is a small TOML text written to a file and read with
``load_input``; the message must contain the file name, the dotted key and the
expected fragment (what is wrong or what is accepted).
"""

import pytest

from pwsolid.config import load_input
from pwsolid.errors import InputError
from pwsolid.xc.libxc_bridge import libxc_available

CRYSTAL = '[crystal]\nprototype = "diamond"\nlattice_constant = "5.43 angstrom"\nspecies = ["Si"]\n'
EXPLICIT = ('[crystal]\nprototype = "explicit"\nlattice_constant = "5.43 angstrom"\n'
            'lattice_vectors = [[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]\n')
ATOMS_OK = 'atoms = [{ species = "Si", position = [0, 0, 0] }]\n'


def proto(name: str, species: str = '["Si"]', a: str = '"5.43 angstrom"', extra: str = "") -> str:
    return f'[crystal]\nprototype = "{name}"\nlattice_constant = {a}\nspecies = {species}\n{extra}'


# The fcc lattice of EXPLICIT written with a2 + 2 a1 and a3 + 2 a2' (a unimodular change
# of basis, the same lattice): the FFT grid holding the density sphere grows from 25^3
# to 25x70x150 points at 15 Ha.
SKEWED = ('[crystal]\nprototype = "explicit"\nlattice_constant = "5.43 angstrom"\n'
          'lattice_vectors = [[0, 0.5, 0.5], [0.5, 1, 1.5], [1.5, 2.5, 3]]\n' + ATOMS_OK
          + '[basis]\ncutoff = "15 Ha"\n')

# (case id, TOML text, dotted key named in the message, expected message fragment)
CASES = [
    ("cell too skewed for the FFT grid", SKEWED, "crystal.lattice_vectors",
     "too skewed for the FFT grid: its vectors need a 25x70x150 grid, an equivalent "
     "reduced cell only 25x25x25"),
    # unknown names, with near-miss suggestions
    ("misspelt key", CRYSTAL + '[basis]\ncutof = "15 Ha"\n', "basis.cutof",
     "did you mean 'basis.cutoff'?"),
    ("misspelt section", CRYSTAL + '[basi]\ncutoff = "15 Ha"\n', "basi", "did you mean 'basis'?"),
    ("key at top level", 'cutoff = "15 Ha"\n' + CRYSTAL, "cutoff", "did you mean 'basis.cutoff'?"),
    ("key in wrong section", CRYSTAL + '[basis]\nmesh = [4, 4, 4]\n', "basis.mesh",
     "did you mean 'brillouin_zone.mesh'?"),
    ("unrelated key", CRYSTAL + '[basis]\ncolour = "blue"\n', "basis.colour",
     "valid keys of [basis]: cutoff, fft_grid"),
    ("unknown prototype", proto("diamant"), "crystal.prototype", "did you mean 'diamond'?"),
    ("unknown prototype lists all", proto("wurtzite"), "crystal.prototype",
     "valid prototypes: simple-cubic, bcc, fcc, diamond"),
    ("unknown atom key", EXPLICIT + 'atoms = [{ species = "Si", positon = [0, 0, 0] }]\n',
     "crystal.atoms[1].positon", "did you mean 'position'?"),
    # missing required entries
    ("no crystal section", '[basis]\ncutoff = "15 Ha"\n', "crystal", "missing required section"),
    ("no lattice constant", '[crystal]\nprototype = "fcc"\nspecies = "Al"\n',
     "crystal.lattice_constant", "missing required key"),
    ("no prototype", '[crystal]\nlattice_constant = "4.05 angstrom"\nspecies = "Al"\n',
     "crystal.prototype", "missing required key"),
    ("no species", '[crystal]\nprototype = "fcc"\nlattice_constant = "4.05 angstrom"\n',
     "crystal.species", "missing required key"),
    ("no atoms for explicit", EXPLICIT, "crystal.atoms", "missing required key"),
    ("atom without position", EXPLICIT + 'atoms = [{ species = "Si" }]\n',
     "crystal.atoms[1].position", "missing 'position'"),
    # wrong TOML types
    ("number for energy", CRYSTAL + "[basis]\ncutoff = 15\n", "basis.cutoff", '"15 Ha"'),
    ("number for length", proto("fcc", a="4.05"), "crystal.lattice_constant", '"4.05 bohr"'),
    ("number for tolerance", CRYSTAL + "[self_consistency]\nenergy_tolerance = 1e-8\n",
     "self_consistency.energy_tolerance", '"1e-08 Ha"'),
    ("float for integer", CRYSTAL + "[self_consistency]\nmax_iterations = 40.0\n",
     "self_consistency.max_iterations", "TOML integer, no decimal point); write 40"),
    ("boolean for integer", CRYSTAL + "[self_consistency]\nempty_bands = true\n",
     "self_consistency.empty_bands", "must be an integer"),
    ("float in mesh", CRYSTAL + "[brillouin_zone]\nmesh = [4.0, 4, 4]\n", "brillouin_zone.mesh",
     "a list of 3 integers"),
    ("boolean in mesh", CRYSTAL + "[brillouin_zone]\nmesh = [true, 4, 4]\n",
     "brillouin_zone.mesh", "TOML integer"),
    ("string for boolean", CRYSTAL + '[brillouin_zone]\nuse_symmetry = "yes"\n',
     "brillouin_zone.use_symmetry", "TOML boolean: true or false"),
    ("integer for boolean", CRYSTAL + "[brillouin_zone]\nuse_symmetry = 1\n",
     "brillouin_zone.use_symmetry", "TOML boolean"),
    ("quoted number", CRYSTAL + '[self_consistency]\nmixing_weight = "0.6"\n',
     "self_consistency.mixing_weight", "without quotes"),
    ("quoted c/a", proto("hcp", '"Ti"', extra='c_over_a = "1.6"\n'), "crystal.c_over_a",
     "without quotes"),
    ("non-finite number", CRYSTAL + "[self_consistency]\ndensity_tolerance = nan\n",
     "self_consistency.density_tolerance", "finite"),
    ("section not a table", "basis = 5\n" + CRYSTAL, "basis", "must be a table"),
    ("section name inside a section", CRYSTAL + "basis = 5\n", "crystal.basis",
     "'basis' is a section"),
    ("title not text", 'title = 5\n' + CRYSTAL, "title", "must be a string"),
    ("functional not text", CRYSTAL + "[exchange_correlation]\nfunctional = 3\n",
     "exchange_correlation.functional", "name string"),
    ("output not text", CRYSTAL + "[output]\nresult_file = 5\n", "output.result_file",
     "file name string"),
    ("fft grid of two", CRYSTAL + "[basis]\nfft_grid = [24, 24]\n", "basis.fft_grid",
     "a list of 3 integers"),
    # units
    ("unknown energy unit", CRYSTAL + '[basis]\ncutoff = "15 Hz"\n', "basis.cutoff",
     "unknown energy unit 'Hz'"),
    ("energy unit for a length", proto("fcc", a='"4.05 eV"'), "crystal.lattice_constant",
     "unknown length unit 'eV'"),
    ("unit missing", CRYSTAL + '[basis]\ncutoff = "15"\n', "basis.cutoff", "cannot read"),
    # unphysical values (ranges from GroundStateSettings and Crystal)
    ("cutoff too small", CRYSTAL + '[basis]\ncutoff = "0.1 Ha"\n', "basis.cutoff",
     "between 0.5 Ha and 5000 Ha"),
    ("zero iterations", CRYSTAL + "[self_consistency]\nmax_iterations = 0\n",
     "self_consistency.max_iterations", "between 1 and 100000"),
    ("negative empty bands", CRYSTAL + "[self_consistency]\nempty_bands = -1\n",
     "self_consistency.empty_bands", "between 0 and 10000"),
    ("mixing weight above one", CRYSTAL + "[self_consistency]\nmixing_weight = 1.5\n",
     "self_consistency.mixing_weight", "(0, 1]"),
    ("odd shift", CRYSTAL + "[brillouin_zone]\nshift = [0.25, 0, 0]\n", "brillouin_zone.shift",
     "each 0 (through Gamma) or 0.5"),
    ("zero mesh", CRYSTAL + "[brillouin_zone]\nmesh = [0, 4, 4]\n", "brillouin_zone.mesh",
     "between 1 and 200"),
    ("negative lattice constant", proto("fcc", '"Al"', a='"-4.05 angstrom"'),
     "crystal.lattice_constant", "positive length"),
    ("huge lattice constant", proto("fcc", '"Al"', a='"1e5 bohr"'), "crystal.lattice_constant",
     "between 0.5 and 1000.0 bohr"),
    ("negative c/a", proto("hcp", '"Ti"', extra="c_over_a = -1.6\n"), "crystal.c_over_a",
     "positive number (the ratio c/a)"),
    # the value is echoed as typed, in the user's unit (issue 15)
    ("negative lattice constant echoed as typed", proto("fcc", '"Al"', a='"-4.05 angstrom"'),
     "crystal.lattice_constant", "(got '-4.05 angstrom')"),
    # species and prototypes
    ("one species for zincblende", proto("zincblende", '["Ga"]'), "crystal.species",
     "prototype 'zincblende' takes 2 species (1 given)"),
    ("two species for diamond", proto("diamond", '["Si", "Ge"]'), "crystal.species",
     "prototype 'diamond' takes 1 species (2 given)"),
    ("unknown element", proto("fcc", '"Xx"'), "crystal.species", "unknown species 'Xx'"),
    ("lower-case element", proto("fcc", '"al"'), "crystal.species", "did you mean 'Al'?"),
    ("number as species", proto("fcc", "[13]"), "crystal.species", "element symbols as strings"),
    ("c/a for fcc", proto("fcc", '"Al"', extra="c_over_a = 1.6\n"), "crystal.c_over_a",
     "only used with prototype 'hcp'"),
    ("species for explicit", EXPLICIT + ATOMS_OK + 'species = "Si"\n', "crystal.species",
     "not used with prototype 'explicit'"),
    ("vectors for a prototype", CRYSTAL + "lattice_vectors = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]\n",
     "crystal.lattice_vectors", "use prototype = \"explicit\""),
    # lattice vectors and atoms
    ("two lattice vectors", EXPLICIT.replace(", [0.5, 0.5, 0]]", "]") + ATOMS_OK,
     "crystal.lattice_vectors", "three rows of three numbers"),
    ("short lattice vector", EXPLICIT.replace("[0.5, 0.5, 0]]", "[0.5, 0.5]]") + ATOMS_OK,
     "crystal.lattice_vectors", "three rows of three numbers"),
    ("singular cell", EXPLICIT.replace("[0.5, 0.5, 0]]", "[0.5, 0.5, 1.0]]") + ATOMS_OK,
     "crystal.lattice_vectors", "linearly dependent"),
    ("left-handed cell", EXPLICIT.replace("[[0, 0.5, 0.5], [0.5, 0, 0.5]",
                                          "[[0.5, 0, 0.5], [0, 0.5, 0.5]") + ATOMS_OK,
     "crystal.lattice_vectors", "left-handed"),
    ("atom as a bare list", EXPLICIT + "atoms = [[0, 0, 0]]\n", "crystal.atoms[1]",
     "atom 1 must be a list of tables"),
    ("no atoms", EXPLICIT + "atoms = []\n", "crystal.atoms", "at least one atom"),
    ("atom of unknown element", EXPLICIT + 'atoms = [{ species = "Qq", position = [0, 0, 0] }]\n',
     "crystal.atoms[1].species", "unknown element"),
    ("atom position of two", EXPLICIT + 'atoms = [{ species = "Si", position = [0, 0] }]\n',
     "crystal.atoms[1].position", "a list of 3 numbers"),
    ("atoms on top of each other",
     EXPLICIT + 'atoms = [{ species = "Si", position = [0, 0, 0] },'
                ' { species = "Si", position = [0.01, 0, 0] }]\n',
     "crystal.atoms", "bohr apart"),
    # supercell
    ("zero supercell", CRYSTAL + "supercell = [0, 1, 1]\n", "crystal.supercell",
     "integer from 1 to 20"),
    ("float supercell", CRYSTAL + "supercell = [2.0, 1, 1]\n", "crystal.supercell",
     "TOML integer"),
    ("supercell of two", CRYSTAL + "supercell = [2, 2]\n", "crystal.supercell",
     "a list of 3 integers"),
    ("enormous supercell", CRYSTAL + "supercell = [10, 10, 10]\n", "crystal.supercell",
     "2000 atoms; at most 500"),
    # pseudopotentials
    ("missing pseudopotential file", CRYSTAL + '[pseudopotentials]\nSi = "Si-nowhere.toml"\n',
     "pseudopotentials.Si", "bundled files for Si: Si-alpha.toml, Si-beta.toml"),
    ("pseudopotential for absent element", CRYSTAL + '[pseudopotentials]\nGe = "Si-test.toml"\n',
     "pseudopotentials.Ge", "not in the crystal"),
    ("pseudopotential not a name", CRYSTAL + "[pseudopotentials]\nSi = 14\n",
     "pseudopotentials.Si", "file name string"),
    # relaxation (the relax-structure command)
    ("force threshold without unit", CRYSTAL + "[relaxation]\nforce_threshold = 1e-4\n",
     "relaxation.force_threshold", 'needs its unit, written as a string, e.g. "1e-4 Ha/bohr"'),
    ("force threshold in a pressure unit", CRYSTAL + '[relaxation]\nforce_threshold = "1 GPa"\n',
     "relaxation.force_threshold", "accepted units: Ha/bohr, eV/angstrom"),
    ("stress threshold without unit", CRYSTAL + '[relaxation]\nstress_threshold = "0.05"\n',
     "relaxation.stress_threshold", "accepted units: GPa, MPa, kbar"),
    ("negative relaxation steps", CRYSTAL + "[relaxation]\nmax_steps = -3\n",
     "relaxation.max_steps", "integer from 0 to 10000"),
    ("nothing free to relax", CRYSTAL + '[relaxation]\nmoves = "none"\n', "relaxation.moves",
     "nothing free to move"),
    ("unknown relaxation moves", CRYSTAL + '[relaxation]\nmoves = "atoms"\n',
     "relaxation.moves", "accepted: positions, cell, both"),
    ("misspelt relaxation key", CRYSTAL + '[relaxation]\nforce_treshold = "1e-4 Ha/bohr"\n',
     "relaxation.force_treshold", "did you mean 'relaxation.force_threshold'?"),
    # elastic constants (the elastic-constants command)
    ("strain far beyond the linear range", CRYSTAL + "[elastic_constants]\nlargest_strain = 0.5\n",
     "elastic_constants.largest_strain", "must be a number from 1e-5 to 0.05"),
    ("strain written as a percentage", CRYSTAL + '[elastic_constants]\nlargest_strain = "1 %"\n',
     "elastic_constants.largest_strain", "must be a plain number, e.g. 0.01"),
    ("no strain points", CRYSTAL + "[elastic_constants]\nstrains_per_sign = 0\n",
     "elastic_constants.strains_per_sign", "integer from 1 to 10"),
    ("elastic force threshold without unit", CRYSTAL + "[elastic_constants]\nforce_threshold = 1e-4\n",
     "elastic_constants.force_threshold", "needs its unit"),
    # phonons (the phonons command)
    ("zero phonon supercell", CRYSTAL + "[phonons]\nsupercell = [0, 2, 2]\n",
     "phonons.supercell", "three repeats from 1 to 20"),
    ("phonon supercell of two", CRYSTAL + "[phonons]\nsupercell = [2, 2]\n",
     "phonons.supercell", "a list of 3 TOML integers"),
    ("displacement without unit", CRYSTAL + "[phonons]\ndisplacement_length = 0.02\n",
     "phonons.displacement_length", "5.43 angstrom"),
    ("huge displacement", CRYSTAL + '[phonons]\ndisplacement_length = "1 angstrom"\n',
     "phonons.displacement_length", "from 0.001 to 0.2 bohr"),
    ("unknown phonon DOS method", CRYSTAL + '[phonons]\ndos_method = "histogram"\n',
     "phonons.dos_method", "accepted: tetrahedron, gaussian"),
    ("phonon DOS width without unit", CRYSTAL + '[phonons]\ndos_width = "0.1"\n',
     "phonons.dos_width", "accepted units: THz, cm^-1, meV"),
    ("misspelt phonon key", CRYSTAL + "[phonons]\ndos_mseh = [8, 8, 8]\n",
     "phonons.dos_mseh", "did you mean 'phonons.dos_mesh'?"),
    # thermal (the quasi-harmonic command)
    ("temperature without unit", CRYSTAL + "[thermal]\nhighest_temperature = 800\n",
     "thermal.highest_temperature", 'needs its unit, written as a string, e.g. "1000 K"'),
    ("temperature step above the highest", CRYSTAL
     + '[thermal]\nhighest_temperature = "100 K"\ntemperature_step = "200 K"\n',
     "thermal.highest_temperature", "0 < step <= highest temperature"),
    ("too few volumes for the fits", CRYSTAL + "[thermal]\nvolume_points = 4\n",
     "thermal.volume_points", "integer from 5"),
    ("unknown free-energy form", CRYSTAL + '[thermal]\nequation_of_state = "cubic"\n',
     "thermal.equation_of_state", "accepted: birch-murnaghan, vinet, murnaghan, polynomial"),
    ("misspelt thermal key", CRYSTAL + "[thermal]\nqmesh = [8, 8, 8]\n",
     "thermal.qmesh", "did you mean 'thermal.q_mesh'?"),
    # Libxc names: without the library the message says how to install it
    ("unknown Libxc name", CRYSTAL + '[exchange_correlation]\nfunctional = "libxc:gga_c_pbee"\n',
     "exchange_correlation.functional",
     "'gga_c_pbe'" if libxc_available() else "apt-get install libxc9"),
    ("Libxc meta-GGA", CRYSTAL + '[exchange_correlation]\nfunctional = "libxc:mgga_x_scan"\n',
     "exchange_correlation.functional",
     "is a meta-GGA" if libxc_available() else "apt-get install libxc9"),
    ("Libxc hybrid", CRYSTAL + '[exchange_correlation]\nfunctional = "libxc:hyb_gga_xc_pbeh"\n',
     "exchange_correlation.functional",
     "exact (Fock) exchange" if libxc_available() else "apt-get install libxc9"),
]


@pytest.fixture
def pseudo_setup(tmp_path, monkeypatch):
    (tmp_path / "Si-test.toml").write_text("# dummy\n")
    bundled = tmp_path / "bundled"
    bundled.mkdir()
    for name in ("Si-alpha.toml", "Si-beta.toml", "Ge-alpha.toml"):
        (bundled / name).write_text("# dummy\n")
    monkeypatch.setenv("PWSOLID_PSEUDO_DIR", str(bundled))
    return tmp_path


def test_there_are_enough_cases():
    assert len(CASES) >= 40
    assert len({case[0] for case in CASES}) == len(CASES)


@pytest.mark.parametrize("text, key, fragment", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_bad_input_is_reported_clearly(pseudo_setup, text, key, fragment):
    path = pseudo_setup / "coating-trial.toml"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        load_input(path)
    message = str(err.value)
    assert fragment in message
    assert str(path) in message
    assert f"'{key}'" in message
    assert err.value.source == str(path)


@pytest.mark.parametrize("text, key, fragment", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_bad_input_gives_exit_code_three_and_no_traceback(pseudo_setup, text, key, fragment,
                                                          capsys):
    from pwsolid.cli import main
    from pwsolid.errors import EXIT_INVALID_INPUT

    path = pseudo_setup / "coating-trial.toml"
    path.write_text(text)
    assert main(["check-input", str(path)]) == EXIT_INVALID_INPUT
    err = capsys.readouterr().err
    assert fragment in err and "Traceback" not in err and err.count("\n") == 1


def test_odd_electron_count_without_smearing_is_caught_before_running(tmp_path, capsys):
    from pwsolid.cli import main

    path = tmp_path / "sodium.toml"
    path.write_text('[crystal]\nprototype = "bcc"\nlattice_constant = "4.23 angstrom"\n'
                    'species = "Na"\n')
    assert main(["check-input", str(path)]) == 3
    assert "occupations.smearing" in capsys.readouterr().err


def test_missing_pseudopotential_names_the_places_searched(pseudo_setup):
    path = pseudo_setup / "coating-trial.toml"
    path.write_text(CRYSTAL + '[pseudopotentials]\nSi = "Si-nowhere.toml"\n')
    with pytest.raises(InputError) as err:
        load_input(path)
    message = str(err.value)
    assert str(pseudo_setup / "Si-nowhere.toml") in message
    assert str(pseudo_setup / "bundled" / "Si-nowhere.toml") in message
    assert "Ge-alpha" not in message
    assert "'Si-nowhere.toml'" in message          # the value as written


def test_missing_file(tmp_path):
    path = tmp_path / "no-such-film.toml"
    with pytest.raises(InputError, match="input file not found") as err:
        load_input(path)
    assert str(path) in str(err.value)


def test_directory_instead_of_file(tmp_path):
    with pytest.raises(InputError, match="is a directory") as err:
        load_input(tmp_path)
    assert str(tmp_path) in str(err.value)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin1.toml"
    path.write_bytes('title = "Schicht f\u00fcr Glas"\n'.encode("latin-1"))
    with pytest.raises(InputError, match="not UTF-8") as err:
        load_input(path)
    assert str(path) in str(err.value)


@pytest.mark.parametrize("text, where", [
    ('[crystal]\nprototype = "fcc"\nlattice_constant = 4.05 angstrom\n', "line 3"),
    ('[crystal]\nprototype = "fcc"\n[crystal]\n', "line 3"),
    ('title = "unterminated\n', "line 1"),
])
def test_invalid_toml_reports_line_and_column(tmp_path, text, where):
    path = tmp_path / "broken.toml"
    path.write_text(text)
    with pytest.raises(InputError) as err:
        load_input(path)
    message = str(err.value)
    assert "invalid TOML" in message and where in message and "column" in message
    assert str(path) in message


# -- checks that need the pseudopotentials: check-input and the run refuse them alike ------
# (issue 15: check-input used to pass these files and the run then failed.) Silicon has
# 8 valence electrons per two-atom cell.
SPIN = CRYSTAL + "[spin]\npolarized = true\n"
RUN_CASES = [
    ("fixed moment above the electron count", SPIN + "fixed_moment = 100.0\n",
     "spin.fixed_moment", "cannot exceed the 8 valence electrons"),
    ("negative fixed moment above the electron count", SPIN + "fixed_moment = -9.0\n",
     "spin.fixed_moment", "accepted: -8 to 8"),
    ("initial moment above the electron count", SPIN + "initial_moment = 50\n",
     "spin.initial_moment", "cannot exceed the 8 valence electrons"),
    ("fft grid too small for the basis", CRYSTAL + "[basis]\nfft_grid = [4, 4, 4]\n",
     "basis.fft_grid", "too small for the basis"),
    ("more bands than plane waves", CRYSTAL + '[basis]\ncutoff = "0.5 Ha"\n'
     "[brillouin_zone]\nmesh = [1, 1, 1]\nshift = [0, 0, 0]\n", "basis.cutoff",
     "raise the cutoff"),
    ("cutoff beyond the memory of the machine", CRYSTAL + '[basis]\ncutoff = "5000 Ha"\n',
     "basis.cutoff", "does not fit the memory of this machine: estimated memory"),
]


@pytest.fixture
def small_memory(monkeypatch):
    # a machine of 4 GB free: the 5000 Ha case needs tens of GB (issue 15) on any machine
    import pwsolid.preflight

    monkeypatch.setattr(pwsolid.preflight, "available_memory", lambda: 4e9)


@pytest.mark.parametrize("text, key, fragment", [c[1:] for c in RUN_CASES],
                         ids=[c[0] for c in RUN_CASES])
def test_check_input_refuses_what_the_run_refuses(tmp_path, capsys, small_memory, text, key,
                                                  fragment):
    from pwsolid.cli import main
    from pwsolid.scf import prepare

    path = tmp_path / "coating-trial.toml"
    path.write_text(text)
    assert main(["check-input", str(path)]) == 3
    err = capsys.readouterr().err
    assert fragment in err and f"'{key}'" in err and "Traceback" not in err
    run = load_input(path)
    with pytest.raises(InputError) as error:
        prepare(run.crystal, run.settings)
    assert error.value.key == key and fragment in str(error.value)


def test_fully_polarised_silicon_is_accepted_and_gets_enough_bands():
    # |M| = N is the largest moment: every electron in the up channel, N bands needed there
    from pwsolid.crystal import diamond
    from pwsolid.scf import prepare
    from pwsolid.settings import GroundStateSettings

    setup = prepare(diamond(10.26, "Si"), GroundStateSettings(
        cutoff=4.0, kpoint_mesh=(1, 1, 1), kpoint_shift=(0, 0, 0), spin_polarized=True,
        fixed_moment=-8.0))
    assert setup.n_bands >= 8


def test_check_input_prints_the_memory_and_time_estimate(tmp_path, capsys):
    from pwsolid.cli import main

    path = tmp_path / "coating-trial.toml"
    path.write_text(CRYSTAL)
    assert main(["check-input", str(path)]) == 0
    out = capsys.readouterr().out
    assert "estimated memory" in out and "plane waves" in out and "FFT grid" in out


def test_the_plane_wave_estimate_matches_the_basis():
    # The count of G inside the cutoff sphere approaches Omega k_c^3 / (6 pi^2), the
    # sphere's volume over the reciprocal cell's (common practice); at 15 Ha silicon has
    # about 700 plane waves, where the surface of the sphere makes a few per cent.
    from pwsolid.crystal import diamond
    from pwsolid.scf import prepare
    from pwsolid.settings import GroundStateSettings

    setup = prepare(diamond(10.26, "Si"), GroundStateSettings(cutoff=15.0, kpoint_mesh=(2, 2, 2)))
    from pwsolid.preflight import estimate_resources

    estimate = estimate_resources(setup.crystal, setup.settings, len(setup.bases),
                                  setup.n_bands, setup.grid_shape)
    mean = sum(b.size for b in setup.bases) / len(setup.bases)
    assert abs(estimate.plane_waves - mean) < 0.05 * mean


def test_bundled_examples_write_to_the_working_directory(tmp_path, monkeypatch):
    # issue 15: running the repository's examples must not leave files among them
    from pwsolid.resources import inputs_dir

    monkeypatch.chdir(tmp_path)
    run = load_input(inputs_dir() / "silicon-substrate.toml")
    for path in (run.result_file, run.density_file, run.checkpoint_file):
        assert path.parent == tmp_path
    # a copy of the examples outside the package (a checkout's inputs/ folder beside an
    # installed, non-editable package) is recognised by its contents
    checkout = tmp_path / "checkout" / "inputs"
    checkout.mkdir(parents=True)
    copy = checkout / "silicon-substrate.toml"
    copy.write_bytes((inputs_dir() / "silicon-substrate.toml").read_bytes())
    assert load_input(copy).result_file.parent == tmp_path
    copy.write_text(copy.read_text() + "\n# my own change\n")
    assert load_input(copy).result_file.parent == checkout


# -- command-line options named in their messages (issue 15) -------------------------------
@pytest.mark.parametrize("argv, option, fragment", [
    (["xc-testbench", "--compare", "foo"], "--compare", "unknown exchange-correlation"),
    (["density-response", "--rs", "0"], "--rs", "positive number in bohr"),
    (["jellium", "--rs", "-2"], "--rs", "positive number in bohr"),
    (["empirical-bands", "Si", "--path", ""], "--path", "is empty"),
    (["empirical-bands", "Si", "--path", "  "], "--path", "is empty"),
])
def test_options_are_named_in_their_messages(tmp_path, monkeypatch, capsys, argv, option,
                                             fragment):
    from pwsolid.cli import main

    monkeypatch.chdir(tmp_path)
    assert main(argv) == 3
    err = capsys.readouterr().err
    assert f"'{option}'" in err and fragment in err and "exchange_correlation" not in err
    assert "singular" not in err and err.count("\n") == 1


def test_band_structure_refuses_an_empty_path_before_any_work(tmp_path, capsys):
    from pwsolid.cli import main

    path = tmp_path / "coating-trial.toml"
    path.write_text(CRYSTAL)
    assert main(["band-structure", str(path), "--path", "", "--output-dir", str(tmp_path)]) == 3
    assert "'--path'" in capsys.readouterr().err
    assert not (tmp_path / "coating-trial.density.npz").exists()


def test_interrupted_scan_says_how_to_resume(tmp_path, monkeypatch, capsys):
    import importlib

    from pwsolid.cli import main

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(importlib.import_module("pwsolid.workflows.equation_of_state"),
                        "scan_volumes", interrupted)
    path = tmp_path / "coating-trial.toml"
    path.write_text(CRYSTAL + '[basis]\ncutoff = "4 Ha"\n[brillouin_zone]\nmesh = [1, 1, 1]\n')
    assert main(["equation-of-state", str(path), "--quiet", "--output-dir",
                 str(tmp_path)]) == 130
    err = capsys.readouterr().err
    assert "coating-trial.eos-points.json" in err and "run the same command again" in err


def test_help_and_pseudopotential_list_read_right(capsys):
    from pwsolid.cli import build_parser, main

    assert "LDA and GGA" in build_parser().description
    assert main(["list-pseudopotentials"]) == 0
    lines = [line for line in capsys.readouterr().out.splitlines() if line.strip()]
    starts = {line.index("valence") for line in lines}
    assert len(starts) == 1, "the valence column is not aligned"
    assert not any(" 1 atoms" in line for line in lines)
