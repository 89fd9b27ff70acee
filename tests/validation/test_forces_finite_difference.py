"""Analytic forces against central finite differences of the self-consistent energy.

The method is the Hellmann-Feynman theorem (H. Hellmann, Einfuehrung in die
Quantenchemie (1937); R. P. Feynman, Phys. Rev. 56, 340 (1939)): at self-consistency
the force is the explicit derivative of the energy, with no basis (Pulay) term in
plane waves. The check is the energy itself: every atom moves by +-h along one random
direction u (unit length, over all atoms at once), and -dF/dh from a central
difference of the converged (free) energy F must equal sum_I F_I . u to 1e-5 Ha/bohr
(the accuracy the relaxation work needs; issue 16). The FFT grid depends on the lattice
only, so the three runs share plane waves and grid; symmetry is off since displaced
cells have none.

Numerical budget of each check (common practice): the SCF converges F to ~1e-12 Ha,
so the difference quotient with h = 5e-3 bohr carries ~1e-10 Ha/bohr of noise; its
truncation error h^2 F'''/6 is ~1e-7 Ha/bohr at these force constants.
"""

import dataclasses

import numpy as np
import pytest

from pwsolid.crystal import Crystal, diamond, zincblende
from pwsolid.forces import atomic_forces, symmetrize_forces
from pwsolid.pseudo import PartialCore, load_pseudopotential
from pwsolid.resources import pseudopotential_dir
from pwsolid.scf import WavefunctionStart, ground_state
from pwsolid.settings import GroundStateSettings

TIGHT = dict(use_symmetry=False, energy_tolerance=1e-12, density_tolerance=1e-10,
             max_iterations=120)
STEP = 5e-3                       # bohr
FORCE_TOLERANCE = 1e-5            # Ha/bohr, the requirement
A_SI = 10.26                      # bohr, silicon near its LDA lattice constant (from memory)
A_AL = 7.65                       # bohr, aluminium, 4.05 angstrom (REFERENCES 6a, from memory)


def _shaken(crystal: Crystal, seed: int, amplitude: float = 0.15) -> Crystal:
    """The crystal with every atom displaced at random by ~``amplitude`` bohr."""
    rng = np.random.default_rng(seed)
    cart = crystal.cartesian_positions + amplitude * rng.standard_normal((crystal.n_atoms, 3))
    return Crystal(crystal.lattice, crystal.species, cart @ np.linalg.inv(crystal.lattice))


def _two_atom_aluminium() -> Crystal:
    # fcc as a body-centred tetragonal cell: a_t = a/sqrt 2, c = a, two atoms
    lat = np.diag([A_AL / np.sqrt(2), A_AL / np.sqrt(2), A_AL])
    return Crystal(lat, ("Al", "Al"), [[0, 0, 0], [0.5, 0.5, 0.5]])


def _with_partial_core(name: str):
    # No bundled file carries a partial core: a bundled file with a soft Gaussian core
    # (Louie, Froyen & Cohen, Phys. Rev. B 26, 1738 (1982), model of pwsolid.pseudo.core)
    pp = load_pseudopotential(pseudopotential_dir() / name)
    return dataclasses.replace(pp, partial_core=PartialCore(charge=1.0, radius=0.9))


def _check_against_energy(crystal: Crystal, settings: GroundStateSettings, seed: int):
    """Analytic and finite-difference -dF/dh along a random direction; the forces."""
    gs = ground_state(crystal, settings)
    assert gs.converged
    forces = atomic_forces(gs)
    u = np.random.default_rng(seed + 1).standard_normal((crystal.n_atoms, 3))
    u /= np.linalg.norm(u)
    start = WavefunctionStart.of(gs)
    density = gs.density if gs.spin_densities is None else gs.spin_densities

    def free_energy(h):
        cart = crystal.cartesian_positions + h * u
        moved = Crystal(crystal.lattice, crystal.species, cart @ np.linalg.inv(crystal.lattice))
        # warm starts only shorten the SCF: it converges to the same state
        run = ground_state(moved, settings, initial_density=density, initial_wavefunctions=start)
        assert run.converged
        return run.free_energy

    numeric = -(free_energy(STEP) - free_energy(-STEP)) / (2 * STEP)
    analytic = float(np.sum(forces.cartesian * u))
    return analytic, numeric, forces


CASES = {
    # separable silicon (Goedecker-Teter-Hutter s and p projectors)
    "silicon-separable": (lambda: diamond(A_SI, "Si"),
                          dict(cutoff=6.0, kpoint_mesh=(2, 2, 2))),
    # two-atom aluminium with smearing (default Al: empty-core, local only); cold smearing's
    # free energy is the variational quantity (Marzari et al., Phys. Rev. Lett. 82, 3296 (1999))
    "aluminium-smeared-local-only": (_two_atom_aluminium,
                                     dict(cutoff=6.0, kpoint_mesh=(2, 2, 2), smearing="cold",
                                          smearing_width=0.02)),
    # spin-polarised, fixed moment, separable aluminium, Fermi-Dirac smearing (Mermin F)
    "aluminium-spin-polarised": (_two_atom_aluminium,
                                 dict(cutoff=6.0, kpoint_mesh=(2, 2, 2), smearing="fermi-dirac",
                                      smearing_width=0.02, spin_polarized=True,
                                      fixed_moment=1.0, pseudopotentials={
                                          "Al": "Al-hartwigsen-goedecker-hutter.toml"})),
    # the gradient functional (Perdew, Burke & Ernzerhof, Phys. Rev. Lett. 77, 3865 (1996))
    "silicon-pbe": (lambda: diamond(A_SI, "Si"),
                    dict(cutoff=6.0, kpoint_mesh=(2, 2, 2), functional="pbe")),
    # nonlinear core correction
    "silicon-partial-core": (lambda: diamond(A_SI, "Si"),
                             dict(cutoff=6.0, kpoint_mesh=(2, 2, 2),
                                  pseudopotentials={
                                      "Si": _with_partial_core("Si-goedecker-teter-hutter.toml")})),
    # the core split half and half between the spins, with the gradient functional
    "aluminium-partial-core-spin-pbe": (_two_atom_aluminium,
                                        dict(cutoff=6.0, kpoint_mesh=(2, 2, 2), functional="pbe",
                                             smearing="fermi-dirac", smearing_width=0.02,
                                             spin_polarized=True, fixed_moment=1.0,
                                             pseudopotentials={"Al": _with_partial_core(
                                                 "Al-hartwigsen-goedecker-hutter.toml")})),
    # local-only (Appelbaum-Hamann Si) and separable (Ge: s, p, d with the HGH couplings)
    # files mixed in one crystal
    "silicon-germanium-mixed": (lambda: zincblende(10.5, ("Si", "Ge")),
                                dict(cutoff=6.0, kpoint_mesh=(2, 2, 2), pseudopotentials={
                                    "Si": "Si-appelbaum-hamann.toml",
                                    "Ge": "Ge-hartwigsen-goedecker-hutter.toml"})),
}


#: Terms that must carry forces well above the tolerance, so the check tests them
TESTED_PARTS = {"silicon-separable": ("nonlocal",), "aluminium-spin-polarised": ("nonlocal",),
                "silicon-partial-core": ("partial_core",),
                "aluminium-partial-core-spin-pbe": ("partial_core", "nonlocal"),
                "silicon-germanium-mixed": ("nonlocal",)}


@pytest.mark.parametrize("name", list(CASES))
def test_forces_equal_finite_differences_of_the_energy(name):
    build, extra = CASES[name]
    crystal = _shaken(build(), seed=len(name))
    analytic, numeric, forces = _check_against_energy(
        crystal, GroundStateSettings(**TIGHT, **extra), seed=len(name))
    assert abs(analytic - numeric) < FORCE_TOLERANCE
    assert forces.largest > 50 * FORCE_TOLERANCE      # the displacement made real forces
    for part in ("local", "ewald") + TESTED_PARTS.get(name, ()):
        assert np.abs(forces.parts[part]).max() > 10 * FORCE_TOLERANCE


def test_gallium_arsenide_with_semicore_d_projectors():
    # 13-electron gallium (s, p, d projectors with the Hartwigsen-Goedecker-Hutter couplings,
    # Phys. Rev. B 58, 3641 (1998)) and arsenic. PW92 correlation (Perdew & Wang, Phys. Rev.
    # B 45, 13244 (1992)), not PZ81: the two PZ81 branches meet at r_s = 1 with a small jump
    # in the potential, which the semicore density crosses, leaving ~1e-6 Ha wiggles in E(h)
    # (measured: third differences of E along the path fell from 1e-6 to 5e-9 Ha with PW92).
    # The low cutoff turns the crystal metallic, hence the smearing; one k-point keeps it quick.
    crystal = _shaken(zincblende(10.6, ("Ga", "As")), seed=7)
    settings = GroundStateSettings(
        **TIGHT, cutoff=8.0, kpoint_mesh=(1, 1, 1), functional="lda-pw92",
        smearing="fermi-dirac", smearing_width=0.01,
        pseudopotentials={"Ga": "Ga-semicore-fitted-hartwigsen-goedecker-hutter.toml",
                          "As": "As-hartwigsen-goedecker-hutter.toml"})
    analytic, numeric, forces = _check_against_energy(crystal, settings, seed=7)
    assert abs(analytic - numeric) < FORCE_TOLERANCE
    assert np.abs(forces.parts["nonlocal"]).max() > 1e-3


@pytest.mark.slow
def test_net_force_is_small_and_symmetry_forbidden_forces_vanish():
    # Translation invariance (common practice): the unsymmetrised forces sum to zero but
    # for the "egg-box" error of exchange-correlation on the grid, which falls with the
    # cutoff (measured on displaced silicon: 1.9e-6 Ha/bohr at 10 Ha, 3e-7 at 14 Ha,
    # 4e-8 at 24 Ha); 14 Ha leaves a margin of three under the 1e-6 of issue 16.
    crystal = _shaken(diamond(A_SI, "Si"), seed=17)
    settings = GroundStateSettings(use_symmetry=False, energy_tolerance=1e-11,
                                   density_tolerance=1e-9, cutoff=14.0, kpoint_mesh=(2, 2, 2))
    forces = atomic_forces(ground_state(crystal, settings))
    assert np.linalg.norm(forces.net) < 1e-6
    assert forces.largest > 1e-2
    # Ideal diamond: the site symmetry -43m allows no force (group theory, common
    # practice). On the full k-mesh without symmetry the raw sum of the terms must
    # already vanish (to the egg-box error), not only the group average; the mesh must
    # then have the crystal's symmetry (through Gamma: a shifted fcc mesh keeps only a
    # subgroup, and gives forces along [111] of 1e-3 Ha/bohr at 2x2x2).
    ideal = diamond(A_SI, "Si")
    raw = atomic_forces(ground_state(ideal, settings.replace(cutoff=10.0,
                                                             kpoint_shift=(0, 0, 0))),
                        symmetrize=False)
    assert np.abs(raw.cartesian).max() < 1e-6
    # With the irreducible wedge the k-sums are not symmetric term by term: the group
    # average restores the full mesh exactly
    reduced = ground_state(ideal, settings.replace(use_symmetry=True, cutoff=10.0))
    assert np.abs(atomic_forces(reduced).cartesian).max() < 1e-12


@pytest.mark.parametrize("shift", [(0, 0, 0), (0.5, 0.5, 0.5)])
def test_irreducible_wedge_gives_the_full_mesh_forces(shift):
    # Symmetry is exact (common practice): one silicon atom moved along [111] leaves R-3m;
    # forces from the irreducible k-points, averaged over the group, must equal the
    # full mesh's forces (averaged the same way, which removes the egg-box net force,
    # 3e-7 Ha/bohr here) to SCF precision.
    si = diamond(A_SI, "Si")
    cart = si.cartesian_positions + np.array([[0.0, 0.0, 0.0], [0.05, 0.05, 0.05]])
    crystal = Crystal(si.lattice, si.species, cart @ np.linalg.inv(si.lattice))
    settings = GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2), kpoint_shift=shift,
                                   energy_tolerance=1e-11, density_tolerance=1e-9)
    reduced = ground_state(crystal, settings)
    full = ground_state(crystal, settings.replace(use_symmetry=False))
    ops = reduced.setup.symmetry
    assert ops.n_ops == 12 and len(reduced.kpoints.weights) < len(full.kpoints.weights)
    expected = symmetrize_forces(atomic_forces(full).cartesian, ops, crystal.lattice,
                                 crystal.positions, crystal.species)
    got = atomic_forces(reduced).cartesian
    assert np.abs(got - expected).max() < 1e-8
    assert np.abs(got).max() > 1e-3
    assert np.allclose(got[0], got[0, 0]) and np.allclose(got[0], -got[1])  # along [111]
