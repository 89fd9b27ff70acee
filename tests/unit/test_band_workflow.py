"""Band-structure and DOS workflows: gap analysis, pipelines, round trips and plots.

Sources of the expectations: the gap analysis runs on synthetic bands whose edges
are known by construction; the pipelines are checked against the lower-level
functions they wrap (``empirical_bands``, the SCF eigenvalues at mesh points,
a DOS computed on the whole mesh without symmetry).
"""

import json

import numpy as np
import pytest

from pwsolid.bandpath import sample_path, user_path
from pwsolid.errors import InputError
from pwsolid.kpoints import irreducible_kpoints, monkhorst_pack
from pwsolid.pseudo.empirical import empirical_bands
from pwsolid.scf import ground_state, prepare
from pwsolid.settings import GroundStateSettings
from pwsolid.units import HARTREE_EV
from pwsolid.workflows.band_structure import (BAND_SCHEMA, BandStructure, band_structure,
                                              empirical_band_structure, gap_analysis,
                                              read_band_csv)
from pwsolid.workflows.density_of_states import (DOS_SCHEMA, density_of_states, mesh_orbit_map,
                                                 read_dos_csv)

TINY = GroundStateSettings(cutoff=5.0, kpoint_mesh=(2, 2, 2), kpoint_shift=(0, 0, 0))


@pytest.fixture(scope="module")
def tiny_ground_state():
    from pwsolid.crystal import diamond
    from pwsolid.units import BOHR_ANGSTROM

    # silicon at 5.431 angstrom, as the `silicon` fixture of conftest.py
    return ground_state(diamond(5.431 / BOHR_ANGSTROM, "Si"), TINY)


@pytest.fixture(scope="module")
def tiny_bands(tiny_ground_state):
    return band_structure(tiny_ground_state, path="G-X|L-G", n_points=24, title="tiny silicon")


@pytest.fixture(scope="module")
def tiny_dos(tiny_ground_state):
    return density_of_states(tiny_ground_state, mesh=4)


# ----------------------------------------------------------------------------- synthetic bands

def _synthetic(silicon, n_points=41, overlap=False):
    """Quadratic bands on Γ-X | L-Γ: valence top at Γ, conduction minimum at 0.8 of Γ-X."""
    path = sample_path(user_path(silicon, "G-X|L-G"), n_points)
    k = path.cartesian
    x_cart = path.kpoints[[i for i, name in path.labels if name == "X"][0]] @ path.reciprocal
    k0 = 0.8 * x_cart
    k2 = np.einsum("ij,ij->i", k, k)
    q2 = np.einsum("ij,ij->i", k - k0, k - k0)
    top = -0.1 * k2
    bottom = (-0.05 if overlap else 0.05) + 0.2 * q2
    bands = np.stack([-0.5 + 0.01 * k2, -0.3 + 0.02 * k2, top - 0.01, top,
                      bottom, bottom + 0.3], axis=1)
    return path, bands


def test_gap_analysis_of_synthetic_bands(silicon):
    path, bands = _synthetic(silicon)
    g = gap_analysis(path, bands, 8.0)
    assert not g.metallic and g.n_valence == 4
    assert g.reference_kind == "valence-band top" and g.reference == pytest.approx(0.0, abs=1e-14)
    assert g.valence_maximum.label == "Γ" and g.valence_maximum.band == 3
    c = g.conduction_minimum
    assert c.segment == ("Γ", "X") and c.band == 4 and c.label is None
    # The samples straddle 0.8; the parabola through three samples of an exact quadratic
    # finds the minimum exactly (to rounding).
    assert abs(c.fraction - 0.8) <= 1.0 / 20
    assert c.refined_fraction == pytest.approx(0.8, abs=1e-9)
    assert c.refined_energy == pytest.approx(0.05, abs=1e-12)
    assert g.band_gap == pytest.approx(c.energy - 0.0, abs=1e-14)
    assert g.gap_kind == "indirect" and g.indirect_gap == g.band_gap
    vertical = bands[:, 4] - bands[:, 3]
    assert g.direct_gap == pytest.approx(vertical.min(), abs=1e-14)
    assert g.direct_gap > g.band_gap
    assert g.band_bottom.label == "Γ"
    assert g.occupied_bandwidth == pytest.approx(0.5, abs=1e-14)
    assert "0.80 of Γ-X" in g.summary().replace("0.8 ", "0.80 ")


def test_gap_analysis_direct_gap_and_mesh(silicon):
    path, bands = _synthetic(silicon)
    bands[:, 4:] = 0.07 + 0.3 * np.einsum("ij,ij->i", path.cartesian, path.cartesian)[:, None] \
        + np.array([0.0, 0.2])
    mesh_k = np.array([[0, 0, 0], [0.5, 0, 0.5], [0.5, 0.5, 0.5]])
    mesh_e = np.array([[-0.5, -0.3, -0.01, 0.0, 0.07, 0.27],
                       [-0.4, -0.3, -0.2, -0.2, 0.5, 0.6],
                       [-0.45, -0.3, -0.1, -0.1, 0.4, 0.6]])
    g = gap_analysis(path, bands, 8.0, mesh_kpoints=mesh_k, mesh_eigenvalues=mesh_e,
                     mesh_rotations=np.eye(3, dtype=int)[None])
    assert g.gap_kind == "direct" and g.indirect_gap is None
    assert g.band_gap == pytest.approx(0.07) and g.direct_gap == pytest.approx(0.07)
    assert g.mesh.gap == pytest.approx(0.07) and g.mesh.gap_kind == "direct"
    assert g.mesh.valence_maximum.label == "Γ"


def test_gap_analysis_metals(silicon):
    path, bands = _synthetic(silicon, overlap=True)
    g = gap_analysis(path, bands, 8.0, fermi_level=-0.02)
    assert g.metallic and g.reference_kind == "Fermi level" and g.reference == -0.02
    assert g.valence_maximum is None and g.band_gap is None and g.gap_kind is None
    assert g.occupied_bandwidth == pytest.approx(-0.02 + 0.5)
    # An odd electron count is a metal even with a gap; without a given Fermi level the
    # sharp filling of the states places it among them.
    path, bands = _synthetic(silicon)
    odd = gap_analysis(path, bands, 7.0)
    assert odd.metallic and bands.min() < odd.reference < bands.max()
    with pytest.raises(InputError, match="at least 5 bands"):
        gap_analysis(path, bands[:, :4], 8.0)


# ----------------------------------------------------------------------------- pipelines

def test_empirical_pipeline_matches_empirical_bands():
    bs = empirical_band_structure("Si", "L-G-X", reduced_cutoff=11.0, n_points=12, n_bands=8)
    points = {"Γ": [0, 0, 0], "X": [0.5, 0, 0.5], "L": [0.5, 0.5, 0.5]}
    direct = empirical_bands("Si", list(points.values()), 8, reduced_cutoff=11.0)
    for row, label in zip(direct, points):
        # The same Hamiltonian diagonalised densely: equal to rounding.
        np.testing.assert_allclose(bs.at_label(label), row, atol=1e-10)
    assert bs.reference == pytest.approx(direct[0, 3], abs=1e-10)   # valence top Γ25'
    assert bs.gaps.n_valence == 4 and bs.gaps.mesh is None


def test_path_bands_reproduce_scf_eigenvalues(tiny_ground_state, tiny_bands):
    gs, bs = tiny_ground_state, tiny_bands
    mesh = np.asarray(gs.kpoints.fractional)
    for label in ("Γ", "X", "L"):
        k = bs.path.kpoints[[i for i, n in bs.path.labels if n == label][0]]
        match = [i for i, q in enumerate(mesh) if np.allclose((q - k) - np.rint(q - k), 0)]
        if not match:          # L is not on a 2x2x2 mesh through Γ
            continue
        # Non-self-consistent bands of the SCF density at a mesh point are the SCF
        # eigenvalues, up to the SCF's own eigensolver tolerance (~1e-7 Ha).
        np.testing.assert_allclose(bs.at_label(label), gs.eigenvalues[match[0]], atol=2e-6)
    assert bs.gaps.valence_maximum.label == "Γ"
    assert bs.gaps.mesh.conduction_minimum.label == "X"


def test_setup_and_density_give_the_same_bands(tiny_ground_state, tiny_bands):
    gs = tiny_ground_state
    setup = prepare(gs.crystal, gs.settings)
    calls = []
    bs = band_structure(setup, gs.density, "G-X|L-G", n_points=24,
                        progress=lambda done, total: calls.append((done, total)))
    np.testing.assert_allclose(bs.eigenvalues, tiny_bands.eigenvalues, atol=1e-7)
    # the irreducible SCF mesh first (recomputed without a ground state), then the path
    total = gs.kpoints.n_kpoints + 24
    assert calls[-1] == (total, total) and len(calls) == total
    with pytest.raises(InputError):
        band_structure(setup, None)
    with pytest.raises(InputError):
        band_structure(setup, gs.density[:-1])


def test_band_structure_document_round_trip(tiny_bands, tmp_path):
    doc = json.loads(json.dumps(tiny_bands.as_document()))
    assert doc["schema"] == BAND_SCHEMA
    assert len(doc["energies_eV"]) == tiny_bands.path.n_points
    back = BandStructure.from_document(doc)
    np.testing.assert_allclose(back.eigenvalues, tiny_bands.eigenvalues, rtol=0, atol=1e-12)
    np.testing.assert_allclose(back.path.kpoints, tiny_bands.path.kpoints)
    assert back.path.labels == tiny_bands.path.labels and back.path.breaks == tiny_bands.path.breaks
    g, h = back.gaps, tiny_bands.gaps
    assert g.band_gap == pytest.approx(h.band_gap, abs=1e-12) and g.gap_kind == h.gap_kind
    assert g.conduction_minimum.describe() == h.conduction_minimum.describe()
    assert g.mesh.valence_maximum.label == h.mesh.valence_maximum.label
    with pytest.raises(InputError):
        BandStructure.from_document({"schema": "something else"})


def test_band_structure_csv_round_trip(tiny_bands, tmp_path):
    path = tiny_bands.to_csv(tmp_path / "tiny.bands.csv")
    table = read_band_csv(path)
    # written with 6 decimals in eV and 8 in k and distance
    np.testing.assert_allclose(table["energies_eV"], tiny_bands.energies_ev(), atol=1e-6)
    np.testing.assert_allclose(table["kpoints"], tiny_bands.path.kpoints, atol=1e-8)
    np.testing.assert_allclose(table["distance"], tiny_bands.path.distance, atol=1e-8)
    assert table["labels"] == tiny_bands.path.labels
    assert table["breaks"] == tiny_bands.path.breaks
    assert table["reference_eV"] == pytest.approx(tiny_bands.reference * HARTREE_EV, abs=1e-6)


# ----------------------------------------------------------------------------- DOS

@pytest.mark.parametrize("mesh", [(4, 4, 4), (3, 3, 3), (4, 4, 2)])
def test_orbit_map_unfolds_the_irreducible_set(silicon, mesh):
    from pwsolid.symmetry import find_symmetry

    reps, orbit_of, kset = mesh_orbit_map(mesh, find_symmetry(silicon))
    assert len(reps) == kset.n_kpoints
    full = monkhorst_pack(mesh)
    np.testing.assert_allclose(full[reps], kset.fractional)
    # orbit sizes are the irreducible weights
    np.testing.assert_allclose(np.bincount(orbit_of) / len(full), kset.weights)
    assert np.all(orbit_of[reps] == np.arange(len(reps)))
    alone = irreducible_kpoints(mesh, (0, 0, 0), None, time_reversal=False)
    assert len(mesh_orbit_map(mesh, None, time_reversal=False)[0]) == alone.n_kpoints


def test_dos_with_symmetry_equals_the_whole_mesh(tiny_ground_state, tiny_dos):
    full = density_of_states(tiny_ground_state, mesh=4, use_symmetry=False,
                             energies=tiny_dos.dos.energies - tiny_dos.reference)
    assert full.n_irreducible == 64 and tiny_dos.n_irreducible < 64
    # same bands up to the eigensolver tolerance (residual 1e-5: eigenvalues ~1e-10 Ha)
    np.testing.assert_allclose(full.eigenvalues, tiny_dos.eigenvalues, atol=1e-7)
    np.testing.assert_allclose(full.dos.integrated, tiny_dos.dos.integrated, atol=1e-5)


def test_dos_reference_count_and_gap(tiny_dos):
    d = tiny_dos
    assert not d.metallic and d.reference_kind == "valence-band top" and d.gap > 0
    # two silicon atoms x four valence electrons fill the bands below the valence top
    assert d.integrated_at(d.reference) == pytest.approx(8.0, abs=1e-9)
    inside = (d.dos.energies > d.reference + 1e-6) & (d.dos.energies < d.reference + d.gap - 1e-6)
    assert inside.any() and np.all(d.dos.dos[inside] == 0.0)
    assert d.dos.energies[-1] <= d.complete_below + 1e-12


def test_gaussian_dos_and_bad_arguments(tiny_ground_state):
    g = density_of_states(tiny_ground_state, mesh=3, method="gaussian",
                          width=0.2 / HARTREE_EV, energies=np.linspace(-15, 0, 301) / HARTREE_EV)
    assert g.method == "gaussian" and g.width == pytest.approx(0.2 / HARTREE_EV)
    np.testing.assert_allclose(g.energies_ev, np.linspace(-15, 0, 301), atol=1e-9)
    # erfc tails: 8 electrons up to a fraction of a state at the valence top itself
    assert 7.0 < g.integrated[-1] < 8.0
    with pytest.raises(InputError, match="unknown DOS method"):
        density_of_states(tiny_ground_state, mesh=3, method="histogram")
    with pytest.raises(InputError, match="only used by the Gaussian"):
        density_of_states(tiny_ground_state, mesh=3, width=0.01)
    with pytest.raises(InputError):
        density_of_states(tiny_ground_state, mesh=(3, 0, 3))


def test_dos_document_and_csv_round_trip(tiny_dos, tmp_path):
    doc = json.loads(json.dumps(tiny_dos.as_document()))
    assert doc["schema"] == DOS_SCHEMA and doc["mesh"] == [4, 4, 4]
    np.testing.assert_allclose(doc["energies_eV"], tiny_dos.energies_ev)
    table = read_dos_csv(tiny_dos.to_csv(tmp_path / "x.dos.csv"))
    np.testing.assert_allclose(table["energies_eV"], tiny_dos.energies_ev, atol=1e-6)
    np.testing.assert_allclose(table["dos_per_eV"], tiny_dos.dos_per_ev, atol=1e-8)
    np.testing.assert_allclose(table["integrated"], tiny_dos.integrated, atol=1e-8)
    assert table["reference_eV"] == pytest.approx(tiny_dos.reference * HARTREE_EV, abs=1e-6)


# ----------------------------------------------------------------------------- plots

def _nonempty(paths, formats):
    assert [p.suffix for p in paths] == [f".{f}" for f in formats]
    for p in paths:
        assert p.stat().st_size > 1000, p


def test_band_plots_render_in_every_format(tiny_bands, tiny_dos, tmp_path):
    from pwsolid.plots.bands import BandStructurePlot, DensityOfStatesPlot

    formats = ("png", "svg", "pdf")
    with_dos = BandStructurePlot.from_result(tiny_bands, tiny_dos)
    _nonempty(with_dos.save(tmp_path / "si.bands", formats), formats)
    assert (tmp_path / "si.bands.png").exists()       # dots in the stem are kept
    alone = BandStructurePlot.from_result(tiny_bands, window=(-6, 4), title="")
    _nonempty(alone.save(tmp_path / "alone", ("png",)), ("png",))
    _nonempty(DensityOfStatesPlot.from_result(tiny_dos).save(tmp_path / "dos", formats), formats)
    with pytest.raises(ValueError):
        BandStructurePlot.from_result(tiny_bands, window=(4, -6))


def test_metal_band_plot(silicon, tmp_path):
    from pwsolid.plots.bands import BandStructurePlot

    path, bands = _synthetic(silicon, overlap=True)
    g = gap_analysis(path, bands, 8.0, fermi_level=-0.02)
    bs = BandStructure(path, bands, g.reference, g, 8.0, "synthetic bands", "a toy metal")
    fig = BandStructurePlot.from_result(bs).plot()
    assert fig.axes and fig.axes[0].get_ylabel().endswith("Fermi level (eV)")
    _nonempty(BandStructurePlot.from_result(bs).save(tmp_path / "metal", ("png",)), ("png",))
