"""The analytic stress tensor against the energy it differentiates, and its invariances.

Method: the stress theorem of O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780
(1985): sigma_ab = (1/Omega) dF/d eps_ab at self-consistency, F the free energy the
SCF minimises. Checks:

* central finite differences of the converged (free) energy under a volume-changing
  and a shear strain, at a FIXED plane-wave set (the strained cells keep the
  reference cell's Miller indices and FFT grid, ``prepare(plane_waves=...)``), so the
  basis-set (Pulay) part is absent by construction and the comparison is exact up to
  the finite-difference error;
* a rotated copy gives the rotated tensor, a supercell the same tensor, and a
  reduced k-mesh with symmetrisation the same tensor as the full mesh (invariances of
  the physics, common practice);
* the Pulay estimate pulls the cell in (the variational principle: a lower cutoff on
  the same grid is a subset of the plane waves, so its energy is not lower).

The issue asks for 0.05 GPa; the differences below are good to ~3e-4 GPa (step 1e-3:
an h^2 error of that size, SCF converged to 1e-11 Ha), so 0.005 GPa is asked here,
which also catches small terms.
"""

import dataclasses

import numpy as np
import pytest

import pwsolid
from pwsolid.pseudo import PartialCore, load_pseudopotential
from pwsolid.resources import pseudopotential_dir
from pwsolid.scf import ground_state, prepare
from pwsolid.stress import stress_tensor
from pwsolid.units import HA_PER_BOHR3_GPA

TIGHT = dict(energy_tolerance=1e-11, density_tolerance=1e-8)
GAMMA = (0.0, 0.0, 0.0)
STEP = 1e-3
TOLERANCE_GPA = 0.005      # see the module docstring
# a volume-changing (anisotropic) and a volume-keeping shear strain direction
VOLUME_STRAIN = np.diag([1.0, 0.8, 0.6])
SHEAR_STRAIN = np.array([[0.0, 1.0, 0.5], [1.0, 0.0, -0.7], [0.5, -0.7, 0.0]])


def _displaced_silicon():
    si = pwsolid.diamond(10.26, "Si")
    return pwsolid.Crystal(si.lattice, si.species,
                           si.positions + [[0.0, 0.0, 0.0], [0.01, -0.02, 0.015]])


def _sodium_with_core():
    pp = load_pseudopotential(pseudopotential_dir() / "Na-empty-core.toml")
    return dataclasses.replace(pp, partial_core=PartialCore(1.0, 0.9))


def _case(name):
    """(crystal, settings) of each checked system: low cutoffs, small meshes."""
    if name == "silicon-separable":
        return _displaced_silicon(), pwsolid.GroundStateSettings(
            cutoff=6.0, kpoint_mesh=(2, 2, 2), **TIGHT)
    if name == "aluminium-smearing-empty-core":      # a metal, local-only file, free energy
        return pwsolid.face_centred_cubic(7.5, "Al"), pwsolid.GroundStateSettings(
            cutoff=5.0, kpoint_mesh=(3, 3, 3), smearing="fermi-dirac",
            smearing_width=0.02, **TIGHT)
    if name == "silicon-pbe":
        return _displaced_silicon(), pwsolid.GroundStateSettings(
            cutoff=6.0, kpoint_mesh=(2, 2, 2), functional="pbe", **TIGHT)
    if name == "hydrogen-spin-polarised-pbe":          # triclinic box, one unpaired electron
        lattice = np.array([[6.5, 0.0, 0.0], [0.9, 6.8, 0.0], [0.6, -0.4, 7.0]])
        return pwsolid.Crystal(lattice, ("H",), [[0.0, 0.0, 0.0]]), pwsolid.GroundStateSettings(
            cutoff=6.0, kpoint_mesh=(1, 1, 1), kpoint_shift=GAMMA, spin_polarized=True,
            fixed_moment=1.0, functional="pbe", **TIGHT)
    if name == "sodium-partial-core-pbe":
        return pwsolid.body_centred_cubic(7.9, "Na"), pwsolid.GroundStateSettings(
            cutoff=5.0, kpoint_mesh=(3, 3, 3), smearing="cold", smearing_width=0.02,
            functional="pbe", pseudopotentials={"Na": _sodium_with_core()}, **TIGHT)
    if name == "gallium-arsenide-d-projectors":
        return pwsolid.zincblende(10.68, ("Ga", "As")), pwsolid.GroundStateSettings(
            cutoff=6.0, kpoint_mesh=(2, 2, 2), pseudopotentials={
                "Ga": "Ga-hartwigsen-goedecker-hutter.toml",
                "As": "As-hartwigsen-goedecker-hutter.toml"}, **TIGHT)
    if name == "silicon-appelbaum-hamann":             # another local form, no projectors
        return _displaced_silicon(), pwsolid.GroundStateSettings(
            cutoff=5.0, kpoint_mesh=(2, 2, 2), pseudopotentials={"Si": "Si-appelbaum-hamann.toml"},
            **TIGHT)
    raise KeyError(name)


CASES = ["silicon-separable", "aluminium-smearing-empty-core", "silicon-pbe",
         "hydrogen-spin-polarised-pbe", "sodium-partial-core-pbe",
         "gallium-arsenide-d-projectors", "silicon-appelbaum-hamann"]


def _strained(crystal, strain):
    return pwsolid.Crystal(crystal.lattice @ (np.eye(3) + strain).T, crystal.species,
                           crystal.positions)


@pytest.mark.parametrize("name", CASES)
def test_stress_equals_finite_strain_differences_at_a_fixed_plane_wave_set(name):
    crystal, settings = _case(name)
    settings = dataclasses.replace(settings, use_symmetry=False)
    reference = ground_state(crystal, settings)
    assert reference.converged
    settings = dataclasses.replace(settings, fft_grid=reference.setup.grid_shape)
    miller = [b.miller for b in reference.setup.bases]
    sigma = stress_tensor(reference).tensor
    for direction in (VOLUME_STRAIN, SHEAR_STRAIN):
        energies = []
        for sign in (1, -1):
            cell = _strained(crystal, sign * STEP * direction)
            # cold starts: a warm start from the reference density stalled the metals'
            # SCF near 1e-6 at these tight tolerances
            gs = ground_state(cell, settings, setup=prepare(cell, settings, plane_waves=miller))
            assert gs.converged
            energies.append(gs.free_energy)
        numeric = (energies[0] - energies[1]) / (2 * STEP * crystal.volume)
        analytic = float(np.sum(sigma * direction))
        assert abs(analytic - numeric) * HA_PER_BOHR3_GPA < TOLERANCE_GPA, (direction, analytic,
                                                                           numeric)


def _rotation(axis, angle):
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    return np.eye(3) + np.sin(angle) * k + (1 - np.cos(angle)) * k @ k


def test_rotated_crystal_gives_the_rotated_stress_and_a_supercell_the_same_stress():
    crystal, settings = _case("silicon-separable")
    settings = dataclasses.replace(settings, use_symmetry=False)
    gs = ground_state(crystal, settings)
    sigma = stress_tensor(gs).tensor
    rot = _rotation([1.0, 2.0, 3.0], 0.7)
    turned = pwsolid.Crystal(crystal.lattice @ rot.T, crystal.species, crystal.positions)
    sigma_turned = stress_tensor(ground_state(turned, settings)).tensor
    # same calculation in other Cartesian axes: equal to SCF convergence (~1e-8 relative)
    assert np.max(np.abs(sigma_turned - rot @ sigma @ rot.T)) * HA_PER_BOHR3_GPA < 1e-4
    # doubled along a1 with half the k-points along b1 (the shifted points 1/4, 3/4 of
    # b1 are 1/2 of b1/2): the same plane waves and k-sum
    n1, n2, n3 = gs.setup.grid_shape
    double = dataclasses.replace(settings, kpoint_mesh=(1, 2, 2), fft_grid=(2 * n1, n2, n3))
    sigma_double = stress_tensor(ground_state(crystal.supercell((2, 1, 1)), double)).tensor
    assert np.max(np.abs(sigma_double - sigma)) * HA_PER_BOHR3_GPA < 1e-4


def test_reduced_mesh_with_symmetrisation_gives_the_full_mesh_stress():
    si = pwsolid.diamond(10.2, "Si")
    settings = pwsolid.GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2),
                                           kpoint_shift=GAMMA, **TIGHT)
    full = stress_tensor(ground_state(si, dataclasses.replace(settings, use_symmetry=False)))
    reduced = ground_state(si, settings)
    assert len(reduced.setup.bases) < 8
    sym = stress_tensor(reduced)
    assert np.max(np.abs(sym.tensor - full.tensor)) * HA_PER_BOHR3_GPA < 1e-4
    # cubic crystal: the stress is a pressure, off-diagonal zero, as symmetry demands
    assert np.max(np.abs(sym.tensor - np.trace(sym.tensor) / 3 * np.eye(3))) < 1e-12
    assert np.allclose(sum(sym.parts.values()), sym.tensor, atol=1e-14)


def test_pulay_estimate_pulls_the_cell_in():
    si = pwsolid.diamond(10.26, "Si")
    settings = pwsolid.GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), **TIGHT)
    st = stress_tensor(ground_state(si, settings), pulay=True)
    p = st.pulay_estimate
    # isotropic, and negative: fewer plane waves on the same grid cannot lower the
    # variational energy (a cutoff this low converges it poorly: clearly nonzero)
    assert np.allclose(p, p[0, 0] * np.eye(3), atol=0)
    assert p[0, 0] * HA_PER_BOHR3_GPA < -0.1
    assert st.as_document()["pressure_at_fixed_cutoff_GPa"] > st.pressure * HA_PER_BOHR3_GPA
