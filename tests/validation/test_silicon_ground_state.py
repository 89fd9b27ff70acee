"""Self-consistent silicon: invariances of the physics and facts of the trade.

LDA (Slater exchange + Perdew-Zunger 1981) throughout. The invariance checks use the
default (nonlocal, Goedecker-Teter-Hutter) silicon pseudopotential, so they cover the
projectors too; the band-edge check quotes numbers for the Appelbaum-Hamann local
pseudopotential (Phys. Rev. B 8, 1777 (1973)) and names it.
"""

import numpy as np
import pytest

from pwsolid.basis import fft_grid_for_cutoff
from pwsolid.eigensolver import davidson, dense_lowest_eigenpairs
from pwsolid.hamiltonian import KPointHamiltonian, kinetic_preconditioner
from pwsolid.scf import _effective_potential, ground_state
from pwsolid.settings import GroundStateSettings
from pwsolid.units import HARTREE_EV

from conftest import LOCAL_SILICON

TIGHT = dict(energy_tolerance=1e-11, density_tolerance=1e-9, max_iterations=60)


def test_reduced_mesh_gives_the_full_mesh_energy(silicon):
    # Symmetry is exact: the irreducible wedge with weights plus density
    # symmetrisation must reproduce the full mesh to SCF precision.
    base = GroundStateSettings(cutoff=6.0, kpoint_mesh=(3, 3, 3), kpoint_shift=(0, 0, 0), **TIGHT)
    reduced = ground_state(silicon, base)
    full = ground_state(silicon, base.replace(use_symmetry=False))
    assert len(reduced.kpoints.weights) == 4 and len(full.kpoints.weights) == 27
    assert abs(reduced.total_energy - full.total_energy) < 1e-8


def test_shifted_mesh_symmetry_reduction(silicon, monkeypatch):
    # The mesh's own subgroup (the operations that map the shifted fcc mesh onto
    # itself) reproduces the full mesh exactly: reduction and symmetrisation are exact.
    import pwsolid.scf as scf

    base = GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0.5, 0.5, 0.5),
                               **TIGHT)
    full = ground_state(silicon, base.replace(use_symmetry=False))
    with monkeypatch.context() as m:
        m.setattr(scf, "join_by_full_symmetry", lambda kset, ops: kset)
        reduced = ground_state(silicon, base)
    assert reduced.kpoints.operations.n_ops < 48
    assert len(reduced.kpoints.weights) < len(full.kpoints.weights)
    assert abs(reduced.total_energy - full.total_energy) < 1e-8


@pytest.mark.parametrize("mesh", [2, 4])
def test_shifted_mesh_keeps_the_degeneracies_at_gamma(silicon, mesh):
    # Group theory (O_h; Bouckaert, Smoluchowski & Wigner, Phys. Rev. 50, 58 (1936)):
    # silicon's valence top Gamma25' and the conduction state Gamma15 are threefold
    # degenerate. A shifted fcc mesh keeps only part of the group; the density is
    # symmetrised with all of it (joined k-points, Chadi-Cohen's two for 2x2x2), so
    # the self-consistent potential keeps the degeneracies to eigensolver precision.
    from pwsolid.scf import bands_at_kpoints

    s = GroundStateSettings(cutoff=8.0, kpoint_mesh=(mesh,) * 3, kpoint_shift=(0.5, 0.5, 0.5))
    gs = ground_state(silicon, s)
    assert gs.kpoints.operations.n_ops == 48
    if mesh == 2:
        assert gs.kpoints.n_kpoints == 2
        assert sorted(gs.kpoints.weights) == pytest.approx([0.25, 0.75], abs=1e-14)
    e = np.asarray(bands_at_kpoints(gs.setup, gs.density, [[0.0, 0.0, 0.0]], 8,
                                    tolerance=1e-9)).ravel()
    assert np.ptp(e[1:4]) < 1e-6 and np.ptp(e[4:7]) < 1e-6      # Ha
    assert e[4] - e[3] > 0.05


@pytest.mark.slow
def test_variational_principle_in_the_cutoff(silicon):
    # Nested bases at a fixed k-mesh and a fixed FFT grid: the minimum of the same
    # functional over a larger space can only be lower.
    grid = fft_grid_for_cutoff(silicon.lattice, 10.0)
    energies = []
    for cutoff in (3.0, 4.5, 6.0, 8.0, 10.0):
        s = GroundStateSettings(cutoff=cutoff, kpoint_mesh=(2, 2, 2), fft_grid=grid, **TIGHT)
        energies.append(ground_state(silicon, s).total_energy)
    assert np.all(np.diff(energies) < 1e-9), energies
    assert energies[0] - energies[-1] > 1e-3   # and the test is not trivially flat


@pytest.mark.slow
def test_size_extensivity_of_a_doubled_cell(silicon):
    # A 2x1x1 supercell with the folded mesh and the commensurate FFT grid samples
    # exactly the same plane waves: twice the energy.
    grid = fft_grid_for_cutoff(silicon.lattice, 6.0)
    prim = ground_state(silicon, GroundStateSettings(
        cutoff=6.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0), fft_grid=grid, **TIGHT))
    big = ground_state(silicon.supercell((2, 1, 1)), GroundStateSettings(
        cutoff=6.0, kpoint_mesh=(1, 2, 2), kpoint_shift=(0, 0, 0),
        fft_grid=(2 * grid[0], grid[1], grid[2]), empty_bands=8, **TIGHT))
    assert abs(big.total_energy - 2 * prim.total_energy) < 1e-6


@pytest.mark.slow
def test_translation_changes_energy_only_by_the_egg_box_error(silicon):
    # Only the exchange-correlation energy, evaluated on the real-space grid, breaks
    # translation invariance; the error must shrink when the grid is refined.
    shift = np.array([0.37, -0.81, 1.23])
    errors = []
    for scale in (1.0, 1.6):
        grid = tuple(int(round(n * scale)) for n in fft_grid_for_cutoff(silicon.lattice, 6.0))
        s = GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2), fft_grid=grid, **TIGHT)
        e0 = ground_state(silicon, s).total_energy
        e1 = ground_state(silicon.translated(shift), s).total_energy
        errors.append(abs(e1 - e0))
    assert errors[0] < 1e-3            # a small egg-box effect on the default grid
    assert errors[1] < errors[0] / 3   # and it falls on a finer grid


def test_davidson_eigenvalues_equal_dense_diagonalisation(silicon):
    gs = ground_state(silicon, GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2)))
    v_eff = _effective_potential(gs.setup, gs.density)
    for basis in gs.setup.bases:
        ham = KPointHamiltonian(basis, gs.setup.fft, v_eff, *gs.setup.nonlocal_ops[
            gs.setup.bases.index(basis)])
        ref, _ = dense_lowest_eigenpairs(ham.dense_matrix(), gs.setup.n_bands)
        res = davidson(ham.apply, kinetic_preconditioner(basis.kinetic),
                       np.random.default_rng(1).standard_normal((gs.setup.n_bands, basis.size)) + 0j,
                       tolerance=1e-9, max_iterations=300)
        assert np.max(np.abs(res.eigenvalues - ref)) < 1e-8


@pytest.mark.slow
def test_silicon_is_an_indirect_gap_insulator_with_the_valence_top_at_gamma(silicon):
    # A Gamma-centred 4x4x4 mesh contains Gamma, X and points on Delta, so the band
    # edges on the mesh locate the valence maximum and the conduction minimum.
    gs = ground_state(silicon, GroundStateSettings(cutoff=12.0, kpoint_mesh=(4, 4, 4),
                                                   kpoint_shift=(0, 0, 0),
                                                   pseudopotentials=LOCAL_SILICON))
    assert gs.converged
    edges = gs.band_edges
    k_top = gs.kpoints.fractional[edges.highest_occupied_k]
    assert np.allclose(k_top, 0)                       # valence top at Gamma
    assert not edges.is_direct and edges.gap > 0       # indirect gap, an insulator
    eig = gs.eigenvalues * HARTREE_EV
    gamma = int(np.flatnonzero(np.all(np.isclose(gs.kpoints.fractional, 0), axis=1))[0])
    direct_gamma = eig[gamma, 4] - eig[gamma, 3]
    width = eig[:, 3].max() - eig[:, 0].min()
    # An independent plane-wave LDA calculation with this pseudopotential
    # (shared/REFERENCES.md section 4, [C]) gives: indirect gap 0.91 eV (along Delta),
    # Gamma25'->Gamma15 3.0 eV, valence bandwidth 12.7 eV. Our mesh reaches X and
    # 0.5 Gamma-X only, so the mesh gap is an upper bound of the Delta minimum;
    # tolerances allow for that and for the unknown cutoff of the reference.
    assert 0.85 < edges.gap * HARTREE_EV < 1.2
    assert abs(direct_gamma - 3.0) < 0.2
    assert abs(width - 12.7) < 0.3
    # LDA silicon: indirect gap well below the 1.17 eV measured at 0 K (REFERENCES 7, [V1])
    # on a converged zone sampling; with a local pseudopotential it is larger than the
    # ~0.5 eV of nonlocal LDA (from memory), so only the ordering is checked here.
    assert direct_gamma > edges.gap * HARTREE_EV
