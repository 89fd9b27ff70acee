"""The free pseudo-atom of each bundled separable pseudopotential against all-electron atoms.

Goedecker, Teter & Hutter, Phys. Rev. B 54, 1703 (1996) and Hartwigsen, Goedecker & Hutter,
Phys. Rev. B 58, 3641 (1998) fitted their parameters so that the spherical, spin-unpolarised
neutral pseudo-atom reproduces the all-electron LDA valence eigenvalues to about 1e-5 Ha;
the 1998 sets were fitted to relativistic all-electron atoms. A wrong recalled parameter
shows up here as a wrong eigenvalue.

Two kinds of reference:

* the all-electron LDA atoms of the NIST tables (S. Kotochigova, Z. H. Levine,
  E. L. Shirley, M. D. Stiles and C. W. Clark, NIST Standard Reference Database 141
  (1997), nonrelativistic "LDA" columns, Vosko-Wilk-Nusair correlation), values FROM
  MEMORY; they first check the all-electron mode of the solver itself;
* all-electron atoms computed by the same solver (-Z/r, all shells) in the pseudo-atom's
  own functional: nonrelativistic for the 1996 sets, scalar-relativistic in the
  zeroth-order regular approximation (van Lenthe, Baerends & Snijders, J. Chem. Phys. 99,
  4597 (1993)) for the 1998 sets. This removes the relativistic shift of the 4s levels
  of Ga-As (9-16 mHa), which no nonrelativistic table can supply.
"""

import math

import numpy as np
import pytest

from pwsolid.pseudo import load_pseudopotential
from pwsolid.pseudo.atom import (C_LIGHT, SEMICORE_SHELLS, radial_basis, solve_pseudo_atom,
                                 solve_radial_atom, valence_configuration)
from pwsolid.resources import pseudopotential_dir

Z_NUCLEUS = {"H": 1, "He": 2, "Li": 3, "C": 6, "Na": 11, "Mg": 12, "Al": 13, "Si": 14,
             "Ga": 31, "Ge": 32, "As": 33}
CORE = {1: "", 2: "", 3: "1s2", 6: "1s2", 11: "1s2 2s2 2p6", 12: "1s2 2s2 2p6",
        13: "1s2 2s2 2p6", 14: "1s2 2s2 2p6", 31: "1s2 2s2 2p6 3s2 3p6 3d10",
        32: "1s2 2s2 2p6 3s2 3p6 3d10", 33: "1s2 2s2 2p6 3s2 3p6 3d10"}
SEPARABLE_FILES = sorted(p.name for p in pseudopotential_dir().glob("*-hutter.toml"))

# Nonrelativistic all-electron LDA valence eigenvalues (Ha), NIST SRD 141, FROM MEMORY.
NIST_LDA = {
    "H": {"1s": -0.233471}, "He": {"1s": -0.570425}, "Li": {"2s": -0.105545},
    "C": {"2s": -0.501411, "2p": -0.199186}, "Na": {"3s": -0.103415}, "Mg": {"3s": -0.175427},
    "Al": {"3s": -0.287993, "3p": -0.102715}, "Si": {"3s": -0.399754, "3p": -0.153286},
    "Ga": {"4s": -0.328064, "4p": -0.101634}, "Ge": {"4s": -0.426523, "4p": -0.149882},
    "As": {"4s": -0.535020, "4p": -0.197497},
}


def _all_electron_basis():
    # fine near the nucleus for the 1s of Z = 33 (about -420 Ha); eigenvalues of the
    # valence shells are converged to 1e-6 Ha on this grid (checked against 300 intervals)
    return radial_basis(r_max=50.0, intervals=120, first_step=2e-4)


def _core(element, valence=None):
    """Core shells of the all-electron atom under a pseudopotential of ``valence``
    electrons: CORE less the semicore shells that pseudopotential keeps."""
    semicore = SEMICORE_SHELLS.get((element, round(valence or 0)), "").split()
    return " ".join(s for s in CORE[Z_NUCLEUS[element]].split() if s not in semicore)


def reference_atom(z, configuration, *, basis=None, relativistic=True,
                   functional="lda-pz81", tolerance=1e-8):
    """The all-electron atom (-Z/r, every shell listed), on the all-electron grid."""
    return solve_radial_atom(lambda r: -z / r, (), configuration, functional=functional,
                             basis=basis or _all_electron_basis(), relativistic=relativistic,
                             tolerance=tolerance)


def _all_electron(element, functional, relativistic, valence=None):
    configuration = f"{_core(element, valence)} {valence_configuration(element, valence)}".strip()
    return reference_atom(Z_NUCLEUS[element], configuration, relativistic=relativistic,
                          functional=functional)


# -- the solver against exact limits --------------------------------------------------

@pytest.mark.parametrize("z", [1.0, 3.0])
def test_hydrogen_like_levels_are_exact(z):
    # exact limit: -Z^2/(2 n^2) for every l < n
    atom = solve_radial_atom(lambda r: -z / r, (), "1s1 2s1 3s1 2p1 3p1 3d1", interacting=False)
    for label, e in atom.eigenvalues.items():
        assert abs(e + z * z / (2 * int(label[0]) ** 2)) < 1e-6, (label, e)


@pytest.mark.parametrize("z", [20.0, 60.0])
def test_scaled_regular_approximation_is_exact_for_one_electron_ions(z):
    # The scaled zeroth-order regular approximation reproduces the Dirac energies of
    # s states of one-electron ions (van Lenthe, Baerends & Snijders, J. Chem. Phys. 101,
    # 9783 (1994), from memory); Dirac: E = c^2 [(1 + (Z/c / (n - d))^2)^(-1/2) - 1],
    # d = 1 - sqrt(1 - Z^2/c^2) for kappa = -1.
    basis = radial_basis(r_max=60.0 / z, intervals=100, first_step=1e-4 / z)
    atom = solve_radial_atom(lambda r: -z / r, (), "1s1 2s1 3s1", interacting=False,
                             relativistic=True, basis=basis)
    d = 1 - math.sqrt(1 - (z / C_LIGHT) ** 2)
    for label, e in atom.eigenvalues.items():
        n = int(label[0])
        dirac = C_LIGHT ** 2 * ((1 + (z / C_LIGHT / (n - d)) ** 2) ** -0.5 - 1)
        assert abs(e / dirac - 1) < 1e-7, (label, e, dirac)


def test_exchange_only_atom_obeys_the_virial_theorem():
    # For Coulomb potentials and an exchange functional homogeneous under scaling,
    # E = -T exactly (M. Levy and J. P. Perdew, Phys. Rev. A 32, 2010 (1985)).
    atom = solve_radial_atom(lambda r: -2.0 / r, (), "1s2", functional="slater-exchange")
    assert abs(atom.total_energy + atom.energies["kinetic"]) < 1e-6


@pytest.mark.parametrize("element, shells, total", [
    # NIST SRD 141, LDA (VWN correlation), from memory: eigenvalues and total energies (Ha)
    ("H", {"1s": -0.233471}, -0.445671),
    ("He", {"1s": -0.570425}, -2.834836),
    ("Li", {"1s": -1.878564, "2s": -0.105545}, -7.335195),
])
def test_light_all_electron_atoms_match_the_nist_tables(element, shells, total):
    atom = _all_electron(element, "lda-vwn", relativistic=False)
    # 1e-5 Ha: the last printed digit of a recalled table, and the grid (1e-6)
    for label, ref in shells.items():
        assert abs(atom.eigenvalues[label] - ref) < 1e-5, (label, atom.eigenvalues[label])
    assert abs(atom.total_energy - total) < 1e-5, atom.total_energy


RECALLED_AE_OK = [("Si", "3p"), ("Ga", "4s"), ("Ga", "4p"), ("Ge", "4s"), ("Ge", "4p"),
                  ("As", "4p")]
RECALLED_AE_BAD = [("Si", "3s"), ("As", "4s")]


@pytest.mark.slow
@pytest.mark.parametrize("element, label", RECALLED_AE_OK)
def test_heavier_all_electron_atoms_match_the_nist_tables(element, label):
    atom = _all_electron(element, "lda-vwn", relativistic=False)
    # 1e-4 Ha: recalled digits (Ga 4s is 5e-5 off, the rest within 1e-5)
    assert abs(atom.eigenvalues[label] - NIST_LDA[element][label]) < 1e-4, atom.eigenvalues


@pytest.mark.slow
@pytest.mark.xfail(strict=True, raises=AssertionError, reason=(
    "recalled reference values that our all-electron atom does not reproduce: Si 3s "
    "-0.398138 (recalled -0.399754, which is close to our scalar-relativistic -0.399785) "
    "and As 4s -0.523670 Ha (recalled -0.535020); the same calculation reproduces the "
    "other recalled values to 1e-5, so these two recalled digits are taken as wrong"))
@pytest.mark.parametrize("element, label", RECALLED_AE_BAD)
def test_recalled_values_our_all_electron_atom_does_not_reproduce(element, label):
    atom = _all_electron(element, "lda-vwn", relativistic=False)
    assert abs(atom.eigenvalues[label] - NIST_LDA[element][label]) < 1e-4, atom.eigenvalues


# -- the bundled pseudopotentials -----------------------------------------------------

def _valence(name):
    return load_pseudopotential(pseudopotential_dir() / name).valence


def _semicore(name):
    """Shells below the chemical valence that the pseudo-atom of ``name`` keeps."""
    return SEMICORE_SHELLS.get((name.split("-")[0], round(_valence(name))), "")


def _relativistic(name):
    # the 1998 sets and our own fits (named after the 1998 form) are fitted to
    # scalar-relativistic atoms
    return "hartwigsen" in name


def _pseudo_atom(name):
    # the neutral configuration, with the file's semicore shells (SEMICORE_SHELLS)
    return solve_pseudo_atom(load_pseudopotential(pseudopotential_dir() / name))


LIGHT_FILES = [n for n in SEPARABLE_FILES if Z_NUCLEUS[n.split("-")[0]] <= 14]
BROKEN_FILES: dict = {}    # file name -> reason (strict xfail); none at present


@pytest.mark.parametrize("name", LIGHT_FILES)
def test_light_pseudo_atoms_against_the_nist_tables(name):
    # Tolerance 3 mHa: (i) the papers' LDA correlation (a Pade fit to Ceperley-Alder)
    # against PZ81 moves these eigenvalues by a few 0.1 mHa (PZ81 against VWN here:
    # 0.1-0.4 mHa); (ii) the 1998 sets were fitted to relativistic atoms, and the
    # scalar-relativistic shift of these levels is at most 1.7 mHa (Si 3s, our own
    # all-electron estimate); (iii) the recalled Si 3s reference is doubtful (see
    # above) but still lies within 1.6 mHa of both silicon pseudo-atoms.
    element = name.split("-")[0]
    atom = _pseudo_atom(name)
    assert atom.converged
    for label, ref in NIST_LDA[element].items():
        assert abs(atom.eigenvalues[label] - ref) < 3e-3, (label, atom.eigenvalues[label], ref)


@pytest.mark.slow
@pytest.mark.parametrize("name", [
    pytest.param(n, marks=pytest.mark.xfail(strict=True, raises=AssertionError,
                                            reason=BROKEN_FILES[n]))
    if n in BROKEN_FILES else n for n in SEPARABLE_FILES])
def test_pseudo_atom_against_the_all_electron_atom_in_the_same_functional(name):
    # Tolerance 1 mHa: the fits reproduce their reference atoms to ~1e-5 Ha; the
    # remaining difference is our reference (the papers' Pade LDA against PZ81, and for
    # the 1998 sets the regular approximation against the fully relativistic atom with
    # spin-orbit averaged p levels), measured below 0.4 mHa for every file that passes.
    element = name.split("-")[0]
    pseudo = _pseudo_atom(name)
    reference = _all_electron(element, "lda-pz81", _relativistic(name), _valence(name))
    for label, e in pseudo.eigenvalues.items():
        assert abs(e - reference.eigenvalues[label]) < 1e-3, (
            label, e, reference.eigenvalues[label])


def test_pseudo_atom_total_energy_is_stationary_and_the_charge_neutral():
    # the Kohn-Sham total energy is variational: an error of order d in the
    # self-consistent density moves it by order d^2 (common practice)
    name = "Si-goedecker-teter-hutter.toml"
    pp = load_pseudopotential(pseudopotential_dir() / name)
    loose = solve_pseudo_atom(pp, tolerance=1e-4)
    tight = solve_pseudo_atom(pp, tolerance=1e-9)
    assert abs(loose.total_energy - tight.total_energy) < 1e-6
    charge = 4 * np.pi * np.sum(np.asarray(tight.points) ** 2 * tight.density
                                * radial_basis().weights)
    assert abs(charge - 4.0) < 1e-8


# -- transferability: excited and ionised atoms -----------------------------------------

# One s -> p promotion and one cation (or half-ionised atom) per element; the semicore
# shells of a pseudopotential that keeps them (SEMICORE_SHELLS) are put in front.
EXCITED = {"H": ["1s0.5"], "He": ["1s1"], "Li": ["2s0 2p1", "2s0.5"], "C": ["2s1 2p3", "2s2 2p1"],
           "Na": ["3s0 3p1", "3s0.5"], "Mg": ["3s1 3p1", "3s1"], "Al": ["3s1 3p2", "3s2"],
           "Si": ["3s1 3p3", "3s2 3p1"], "Ga": ["4s1 4p2", "4s2"], "Ge": ["4s1 4p3", "4s2 4p1"],
           "As": ["4s1 4p4", "4s2 4p2"]}
# Files with semicore shells: one more, unfitted valence configuration (full valence
# notation). A 2p -> 3s core excitation (2s2 2p5 3s2) is not checked here: it moves the
# semicore levels by about 0.5 Ha and the fitted file follows it to 3.8 mHa (printed by
# tests/validation/semicore_sodium_fit.py).
SEMICORE_EXCITED = {"Na-semicore-fitted-hartwigsen-goedecker-hutter.toml": ["2s2 2p6 3s0.5 3p0.5"]}
POOR_TRANSFER = {
    "Na-hartwigsen-goedecker-hutter.toml": "3s 6.2 mHa off in 3s0 3p1, 3.0 in 3s0.5",
    "Mg-hartwigsen-goedecker-hutter.toml": "3s 3.5 mHa off in the cation 3s1",
}


@pytest.mark.slow
@pytest.mark.parametrize("name", [
    pytest.param(n, marks=pytest.mark.xfail(strict=True, raises=AssertionError, reason=(
        "measured: " + POOR_TRANSFER[n] + "; valence-only potentials of the alkali and "
        "alkaline-earth metals, whose diffuse valence shell sits over a polarisable 2p "
        "core, transfer worst (common practice); one-electron sodium is also 1.6% short "
        "in the solid, where the nine-electron Na-semicore-fitted-hartwigsen-goedecker-hutter.toml passes both")))
    if n in POOR_TRANSFER else n
    for n in SEPARABLE_FILES])
def test_excited_and_ionised_pseudo_atoms_follow_the_all_electron_atom(name):
    # Transferability: away from the reference configuration a norm-conserving
    # pseudopotential follows the all-electron levels to about 1 mHa for a one-electron
    # promotion or ionisation (common practice); 2 mHa here (measured: 1.5 mHa at most
    # for every file but the two expected failures).
    element = name.split("-")[0]
    z = Z_NUCLEUS[element]
    pp = load_pseudopotential(pseudopotential_dir() / name)
    channels = pp.separable.channels if pp.separable is not None else ()
    configurations = ([f"{_semicore(name)} {c}".strip() for c in EXCITED[element]]
                      + SEMICORE_EXCITED.get(name, []))
    for configuration in configurations:
        pseudo = solve_radial_atom(pp.local.real_space, channels, configuration,
                                   functional="lda-pz81")
        reference = reference_atom(z, f"{_core(element, pp.valence)} {configuration}".strip(),
                                   relativistic=_relativistic(name))
        for label, e in pseudo.eigenvalues.items():
            assert abs(e - reference.eigenvalues[label]) < 2e-3, (
                configuration, label, e, reference.eigenvalues[label])


# -- ghost states -----------------------------------------------------------------------

# The next shell of each l, left empty: in a separable potential a spurious bound level
# (a ghost) would sit below or between these and the valence levels and take a label,
# so the levels of every shell would no longer match the all-electron ones (common
# practice: X. Gonze, R. Stumpf and M. Scheffler, Phys. Rev. B 44, 8503 (1991), from
# memory). 5p and 4d lie in the continuum: both atoms share the 50-bohr box.
NEXT_SHELLS = {"Ga": "5s0 5p0 4d0", "Ge": "5s0 5p0 4d0", "As": "5s0 5p0 4d0"}
GHOST_FILES = [n for n in SEPARABLE_FILES if n.split("-")[0] in NEXT_SHELLS]


@pytest.mark.slow
@pytest.mark.parametrize("name", GHOST_FILES)
def test_no_ghost_state_below_or_between_the_valence_levels(name):
    # 1 mHa: the valence levels agree to 0.7 mHa (above); the empty ones measured within
    # 0.07 mHa for the 13-electron and the three-electron gallium
    element = name.split("-")[0]
    pp = load_pseudopotential(pseudopotential_dir() / name)
    configuration = f"{valence_configuration(element, pp.valence)} {NEXT_SHELLS[element]}"
    pseudo = solve_radial_atom(pp.local.real_space, pp.separable.channels, configuration,
                               basis=radial_basis(r_max=50.0))
    reference = reference_atom(Z_NUCLEUS[element], f"{_core(element, pp.valence)} {configuration}")
    for label, e in pseudo.eigenvalues.items():
        assert abs(e - reference.eigenvalues[label]) < 1e-3, (label, e, reference.eigenvalues[label])


# -- the fitting module -----------------------------------------------------------------

@pytest.mark.slow
def test_fit_recovers_a_perturbed_coefficient_from_its_own_atom():
    # Targets from the silicon 1998 pseudo-atom itself; one coefficient moved by 0.05 Ha
    # must come back (to 1e-4 Ha: the targets are matched to the SCF tolerance), and the
    # errors the report gives must then vanish.
    from pwsolid.pseudo.fitting import (AtomTarget, fit_separable_form, outside_charge,
                                        separable_form)

    pp = load_pseudopotential(pseudopotential_dir() / "Si-hartwigsen-goedecker-hutter.toml")
    params = {"r_loc": pp.local.r_loc, "c1": pp.local.c1}
    for ch in pp.separable.channels:
        params[f"r{ch.l}"] = ch.radius
        for i, h in enumerate(np.diag(ch.h), start=1):
            params[f"h{ch.l}_{i}"] = float(h)
    local, channels = separable_form(4, params)
    assert np.allclose(local.real_space(np.array([0.3, 1.0])),
                       pp.local.real_space(np.array([0.3, 1.0])))
    basis = radial_basis()
    targets = []
    for configuration in ("3s2 3p2", "3s1 3p3"):
        atom = solve_radial_atom(local.real_space, channels, configuration, basis=basis)
        charge = {(k, 1.5): outside_charge(basis, u, 1.5) for k, u in atom.orbitals.items()}
        targets.append(AtomTarget(configuration, dict(atom.eigenvalues), charge))
    start = dict(params, h0_1=params["h0_1"] + 0.05)
    report = fit_separable_form(4, targets, start, ["h0_1"], basis=basis, max_iterations=20)
    assert abs(report.parameters["h0_1"] - params["h0_1"]) < 1e-4
    assert report.worst_eigenvalue_error < 1e-6 and report.worst_charge_error < 1e-6


# -- ghost states of the files fitted by pwsolid -------------------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("name", ["Na-semicore-fitted-hartwigsen-goedecker-hutter.toml"])
def test_fitted_semicore_file_has_no_ghost_states(name):
    # A separable potential can bind a spurious extra level in a channel (a ghost state;
    # X. Gonze, R. Stumpf and M. Scheffler, Phys. Rev. B 44, 8503 (1991), from memory).
    # Every level per l of the neutral atom, free and in a hard-walled sphere of 6 bohr
    # (which turns the continuum into levels up to 1.6 Ha), is compared with the
    # all-electron atom less its frozen shells: a ghost shifts the whole ladder by a
    # level spacing (0.5-1 Ha here). Tolerances: 2 mHa for the free atom's levels; in the
    # sphere 30 mHa, the scattering error of a pseudopotential at 1-1.5 Ha above its
    # reference energies (measured: 24 mHa at most, for 5p).
    element = name.split("-")[0]
    z = Z_NUCLEUS[element]
    pp = load_pseudopotential(pseudopotential_dir() / name)
    levels = "4s0 5s0 3p0 4p0 5p0 3d0 4d0 5d0"
    valence = f"{valence_configuration(element, pp.valence)} {levels}"
    # the free atom in the all-electron grid's 50 bohr, so that its unbound levels match too
    for box, tolerance in ((None, 2e-3), (6.0, 3e-2)):
        basis = radial_basis(r_max=box or 50.0, intervals=110 if box is None else 70,
                             first_step=1e-3)
        ae_basis = (_all_electron_basis() if box is None
                    else radial_basis(r_max=box, intervals=110, first_step=2e-4))
        pseudo = solve_radial_atom(pp.local.real_space, pp.separable.channels, valence,
                                   functional="lda-pz81", basis=basis)
        reference = reference_atom(z, f"{_core(element, pp.valence)} {valence}", basis=ae_basis)
        for label, e in pseudo.eigenvalues.items():
            assert abs(e - reference.eigenvalues[label]) < tolerance, (
                box, label, e, reference.eigenvalues[label])
