"""pwsolid as a calculator of the Atomic Simulation Environment (the "atomistic library"):
its own optimiser and EOS fit on pwsolid numbers.

Optional extra: skipped when the atomistic library is not installed (the test extra installs it)."""

import numpy as np
import pytest

pytest.importorskip("ase")

from ase.build import bulk  # noqa: E402
from ase.eos import EquationOfState  # noqa: E402
from ase.optimize import BFGS  # noqa: E402

from pwsolid.eos import fit_equation_of_state  # noqa: E402
from pwsolid.interop.atomistic_calculator import PwsolidCalculator  # noqa: E402
from pwsolid.scf import ground_state  # noqa: E402
from pwsolid.settings import GroundStateSettings  # noqa: E402
from pwsolid.interop.structure_files import crystal_from_atoms  # noqa: E402
from pwsolid.units import BOHR_ANGSTROM, HARTREE_EV  # noqa: E402

# small but well-behaved silicon: 2 atoms, separable file, 8 Ha, 3x3x3 mesh through
# Gamma (a half-step shifted mesh is not invariant under the full cubic group, and a
# displaced cell then samples the zone differently from the ideal one; 2x2x2 through
# Gamma closes the small-basis gap of a displaced cell)
SETTINGS = GroundStateSettings(cutoff=8.0, kpoint_mesh=(3, 3, 3), kpoint_shift=(0, 0, 0),
                               energy_tolerance=1e-10,
                               density_tolerance=1e-8)
A = 5.43   # angstrom


def test_energy_is_pwsolid_energy_in_electronvolt():
    si = bulk("Si", "diamond", a=A)
    si.calc = PwsolidCalculator(SETTINGS)
    direct = ground_state(crystal_from_atoms(si), SETTINGS)
    assert si.get_potential_energy() == pytest.approx(direct.total_energy * HARTREE_EV, abs=1e-7)
    assert si.get_potential_energy(force_consistent=True) == pytest.approx(
        direct.free_energy * HARTREE_EV, abs=1e-7)


def test_forces_are_minus_the_energy_gradient_through_ase():
    # central differences of the atomistic library's own energies (Hellmann-Feynman: forces are the
    # negative gradient of the energy); 1e-3 angstrom steps, O(h^2) error ~1e-6 eV/A
    si = bulk("Si", "diamond", a=A)
    si.positions[1] += [0.06, -0.03, 0.02]
    calc = PwsolidCalculator(SETTINGS)
    si.calc = calc
    forces = si.get_forces()
    h = 1e-3
    for axis in range(3):
        energies = []
        for sign in (1, -1):
            moved = si.copy()
            moved.positions[1, axis] += sign * h
            moved.calc = calc
            energies.append(moved.get_potential_energy(force_consistent=True))
        assert forces[1, axis] == pytest.approx(-(energies[0] - energies[1]) / (2 * h), abs=2e-4)
    assert np.abs(forces.sum(axis=0)).max() < 1e-4     # no net force on a periodic cell


@pytest.mark.slow
def test_ase_optimiser_restores_the_diamond_bond():
    # the ideal diamond positions are a minimum by symmetry (every force vanishes by
    # the site symmetry -43m): the atomistic library's BFGS must bring a displaced atom back to
    # a sqrt(3)/4 from its neighbour (geometry of the diamond structure)
    si = bulk("Si", "diamond", a=A)
    si.positions[1] += [0.08, -0.05, 0.03]
    calc = PwsolidCalculator(SETTINGS)
    si.calc = calc
    opt = BFGS(si, logfile=None)
    assert opt.run(fmax=0.005, steps=30)
    bond = si.get_distance(0, 1, mic=True)
    assert bond == pytest.approx(A * np.sqrt(3) / 4, abs=2e-3)
    # every step after the first started from the previous density and orbitals
    assert np.mean(calc.scf_iterations[1:]) < calc.scf_iterations[0]


def test_ase_equation_of_state_agrees_with_pwsolid_fit():
    # the atomistic library's Birch-Murnaghan fit and pwsolid's of the same seven energies: two
    # implementations of Birch, Phys. Rev. 71, 809 (1947)
    calc = PwsolidCalculator(SETTINGS)
    volumes, energies = [], []
    for a in np.linspace(5.25, 5.55, 7):
        si = bulk("Si", "diamond", a=a)
        si.calc = calc
        volumes.append(si.get_volume())
        energies.append(si.get_potential_energy())
    v0, e0, b0 = EquationOfState(volumes, energies, eos="birchmurnaghan").fit()
    ours = fit_equation_of_state(np.array(volumes) / BOHR_ANGSTROM ** 3,
                                 np.array(energies) / HARTREE_EV, "birch-murnaghan")
    assert v0 == pytest.approx(ours.v0 * BOHR_ANGSTROM ** 3, rel=1e-4)
    assert e0 == pytest.approx(ours.e0 * HARTREE_EV, abs=1e-5)
    assert b0 == pytest.approx(ours.b0 * HARTREE_EV / BOHR_ANGSTROM ** 3, rel=2e-3)


def test_compressed_cell_pushes_outward():
    # a cell squeezed 5 % below its equilibrium lattice constant has positive pressure:
    # the atomistic library's stress (1/V dE/d eps) is then negative on the diagonal (sign convention)
    si = bulk("Si", "diamond", a=0.95 * A)
    si.calc = PwsolidCalculator(SETTINGS)
    stress = si.get_stress()
    assert np.all(stress[:3] < 0) and np.allclose(stress[3:], 0, atol=1e-6)
    assert si.calc.pressure_gpa() > 5.0


# no bundled default for Ga and As (the inputs name these files)
_GALLIUM_ARSENIDE = {"Ga": "Ga-hartwigsen-goedecker-hutter.toml",
                     "As": "As-hartwigsen-goedecker-hutter.toml"}


@pytest.mark.parametrize("name, prototype", [
    # Fd-3m Si on 8a, a = 5.431020511 angstrom (CODATA 2018); primitive cell
    ("silicon-diamond.cif", lambda: __import__("pwsolid").diamond(5.431020511 / BOHR_ANGSTROM, "Si")),
    # P6_3/mmc Mg on 2c, a = 3.2094, c = 5.2108 angstrom (from memory)
    ("magnesium-hcp.cif", lambda: __import__("pwsolid").hexagonal_close_packed(
        3.2094 / BOHR_ANGSTROM, "Mg", 5.2108 / 3.2094)),
    # rock salt: no chlorine pseudopotential is bundled for the NaCl CIF (its crystal is
    # checked in tests/unit/test_structure_files.py), so rock-salt LiH carries the energy
    # check: Fm-3m, Li on 4a, H on 4b, a = 4.083 angstrom (from memory)
    ("lithium-hydride-rocksalt.cif", lambda: __import__("pwsolid").rocksalt(
        4.083 / BOHR_ANGSTROM, ("Li", "H"))),
    # F-43m GaAs, Ga on 4a, As on 4c, a = 5.6533 angstrom (from memory)
    ("gallium-arsenide-zincblende.cif", lambda: __import__("pwsolid").zincblende(
        5.6533 / BOHR_ANGSTROM, ("Ga", "As"))),
])
def test_structure_file_gives_the_prototype_energy(name, prototype):
    # the same crystal in another orientation or description has the same energy: the
    # k-mesh and the plane-wave set are defined on the lattice vectors, so a rotated
    # cell with the same metric is the same calculation (invariance; 1e-8 Ha)
    from pathlib import Path
    from pwsolid.interop.structure_files import read_structure
    path = Path(__file__).parents[1] / "data" / "structures" / name
    imported = read_structure(path, primitive=True).crystal
    # a mesh through Gamma keeps the hexagonal symmetry (a half-step shift does not)
    settings = GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0),
                                   energy_tolerance=1e-11,
                                   density_tolerance=1e-9, smearing="cold", smearing_width=0.01,
                                   pseudopotentials=_GALLIUM_ARSENIDE if "gallium" in name
                                   else {})
    e_file = ground_state(imported, settings).free_energy
    e_proto = ground_state(prototype(), settings).free_energy
    assert e_file == pytest.approx(e_proto, abs=1e-8)


def test_calculator_returns_the_native_forces_and_stress():
    # the same ground state through the atomistic library and natively: equal after the unit conversion
    from pwsolid.forces import atomic_forces
    from pwsolid.stress import stress_tensor
    si = bulk("Si", "diamond", a=A)
    si.positions[1] += [0.05, 0.02, -0.04]
    si.calc = PwsolidCalculator(SETTINGS)
    forces, stress = si.get_forces(), si.get_stress(voigt=False)
    gs = si.calc.ground_state
    np.testing.assert_allclose(forces, atomic_forces(gs).cartesian * HARTREE_EV / BOHR_ANGSTROM,
                               rtol=0, atol=1e-12)
    np.testing.assert_allclose(stress, stress_tensor(gs).tensor * HARTREE_EV / BOHR_ANGSTROM ** 3,
                               rtol=0, atol=1e-12)


@pytest.mark.slow
def test_ase_optimiser_and_native_relaxation_reach_the_same_structure():
    # two optimisers (the atomistic library's BFGS on pwsolid forces; pwsolid's own BFGS) on the same
    # energy surface of a cell with every atom displaced and no symmetry left: the
    # minimum is the same structure (1e-3 bohr; both stop at forces of 5e-5 Ha/bohr,
    # which with force constants of ~0.2 Ha/bohr^2 leaves ~2.5e-4 bohr)
    from pwsolid.crystal import diamond
    from pwsolid.interop.structure_files import atoms_from_crystal
    from pwsolid.workflows.relaxation import RelaxationSettings, relax_structure
    rng = np.random.default_rng(7)
    start = diamond(5.43 / BOHR_ANGSTROM, "Si")
    start = type(start)(start.lattice, start.species,
                        start.positions + rng.uniform(-0.01, 0.01, start.positions.shape))
    settings = SETTINGS
    native = relax_structure(start, settings, RelaxationSettings(
        moves="positions", force_threshold=5e-5, keep_symmetry=False))
    assert native.converged
    atoms = atoms_from_crystal(start)
    atoms.calc = PwsolidCalculator(settings)
    assert BFGS(atoms, logfile=None).run(fmax=5e-5 * HARTREE_EV / BOHR_ANGSTROM, steps=40)
    ours = native.crystal.cartesian_positions
    theirs = atoms.get_positions() / BOHR_ANGSTROM
    # compare the bond vector (a common translation of both atoms costs nothing), up
    # to a lattice vector (atomistic library keeps atoms unwrapped, pwsolid wraps them into the cell)
    gap = (theirs[1] - theirs[0]) - (ours[1] - ours[0])
    frac = gap @ np.linalg.inv(start.lattice)
    gap = (frac - np.round(frac)) @ start.lattice
    assert np.abs(gap).max() < 1e-3
