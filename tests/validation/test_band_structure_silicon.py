"""Silicon's band structure and density of states against published and computed references.

System: self-consistent LDA (Perdew-Zunger 1981) silicon with the Appelbaum-Hamann local
pseudopotential, diamond structure at a = 5.431 angstrom (room-temperature experiment,
shared/REFERENCES.md section 6a), 10 Ha cutoff, 4x4x4 mesh through Γ; bands on the
standard fcc path of Setyawan & Curtarolo (REFERENCES 8b).

Sources:
* an independent plane-wave LDA calculation with the same pseudopotential (REFERENCES
  section 4, [C]): valence bandwidth 12.7 eV, indirect gap (conduction minimum on Δ)
  0.91 eV, Γ25' -> Γ15 3.0 eV. Its cutoff and lattice constant are not stated;
* the conduction-band minimum on Γ-X near 0.85 of the way to X: REFERENCES 7 ("about
  0.85", [M] for experiment) and the empirical model of REFERENCES 3b ([C], 0.85);
* the electron count: two atoms x four valence electrons (exact);
* Cohen & Bergstresser's empirical potential was fitted to E_Γ1 = 3.4 eV (Γ25' -> Γ15;
  REFERENCES 7, [V1], printed to 0.1 eV).
"""

import numpy as np
import pytest

from pwsolid.crystal import diamond
from pwsolid.scf import ground_state
from pwsolid.settings import GroundStateSettings
from pwsolid.units import BOHR_ANGSTROM, HARTREE_EV
from pwsolid.workflows.band_structure import band_structure, empirical_band_structure
from pwsolid.workflows.density_of_states import density_of_states

pytestmark = pytest.mark.slow

SILICON = diamond(5.431 / BOHR_ANGSTROM, "Si")
SETTINGS = GroundStateSettings(cutoff=10.0, kpoint_mesh=(4, 4, 4), kpoint_shift=(0, 0, 0),
                               pseudopotentials={"Si": "Si-appelbaum-hamann.toml"})


@pytest.fixture(scope="module")
def scf():
    gs = ground_state(SILICON, SETTINGS)
    assert gs.converged
    return gs


@pytest.fixture(scope="module")
def bands(scf):
    return band_structure(scf, n_points=100)


def _gamma_direct_gap(bs, n_valence=4):
    e = bs.at_label("Γ")
    return (e[n_valence] - e[n_valence - 1]) * HARTREE_EV


def test_band_edges_sit_where_silicon_has_them(bands):
    g = bands.gaps
    assert not g.metallic and g.gap_kind == "indirect"
    assert g.valence_maximum.label == "Γ"
    c = g.conduction_minimum
    assert c.segment == ("Γ", "X") and c.label is None
    # REFERENCES 7 / 3b: about 0.85 of Γ-X. 0.05 covers the path sampling (about 1/15 of
    # Γ-X between samples, narrowed by the parabola) and LDA against model and experiment.
    assert c.refined_fraction == pytest.approx(0.85, abs=0.05)
    # The indirect gap is smaller than the direct gap at Γ (and than any direct gap).
    assert g.band_gap * HARTREE_EV < _gamma_direct_gap(bands)
    assert g.direct_gap > g.band_gap
    # the SCF mesh agrees: top at Γ, the mesh's lowest conduction state is not at Γ
    assert g.mesh.valence_maximum.label == "Γ" and g.mesh.gap_kind == "indirect"


def test_energies_against_an_independent_plane_wave_calculation(bands):
    g = bands.gaps
    # REFERENCES 4 [C]: 0.91, 3.0 and 12.7 eV. The reference's cutoff is unknown; 0.15 eV
    # allows for a different cutoff (at 10 Ha these move by a few hundredths of an eV),
    # the lattice constant and the rounding of the quoted values.
    assert g.band_gap * HARTREE_EV == pytest.approx(0.91, abs=0.15)
    assert _gamma_direct_gap(bands) == pytest.approx(3.0, abs=0.15)
    assert g.occupied_bandwidth * HARTREE_EV == pytest.approx(12.7, abs=0.15)
    assert g.band_bottom.label == "Γ"


def test_tetrahedron_dos_counts_eight_electrons_and_is_empty_in_the_gap(scf):
    d = density_of_states(scf, mesh=6)
    assert not d.metallic and d.reference_kind == "valence-band top"
    # 2 atoms x 4 valence electrons below the valence top; the tetrahedron count of
    # complete bands is exact up to rounding.
    assert d.integrated_at(d.reference) == pytest.approx(8.0, abs=1e-8)
    inside = (d.dos.energies > d.reference + 1e-9) & (d.dos.energies < d.reference + d.gap - 1e-9)
    assert inside.sum() > 10
    assert np.all(d.dos.dos[inside] == 0.0)
    assert np.allclose(d.dos.integrated[inside], 8.0, atol=1e-8)
    # the gap on this mesh is at least the path's indirect gap region (same potential)
    assert 0.3 < d.gap * HARTREE_EV < 1.5


def test_empirical_silicon_direct_gap_at_gamma():
    bs = empirical_band_structure("Si", "L-G-X", n_points=30)
    # REFERENCES 7 [V1]: E_Γ1 = 3.4 eV, printed to 0.1 eV; the model gives 3.42 eV (3b).
    assert _gamma_direct_gap(bs) == pytest.approx(3.4, abs=0.1)
    assert bs.gaps.valence_maximum.label == "Γ"
