"""Cohen-Bergstresser empirical-pseudopotential bands of Si and Ge against references.

Sources:
* form factors: M. L. Cohen and T. K. Bergstresser, Phys. Rev. 141, 789 (1966), Table I,
  as transcribed in REFERENCES 3a ([V2]);
* band energies at Γ, X, L: REFERENCES 3b, an independent converged calculation from the
  same form factors with the basis |k+G|^2 <= 40 (2 pi/a)^2 ([C], converged to ~0.02 eV);
* silicon's direct gap at Γ, E_Γ1 = 3.4 eV (REFERENCES 7, [V1]; the feature the form
  factors were fitted to) and the conduction-band minimum near 0.85 of Γ-X (REFERENCES 7,
  [M] for experiment; 3b [C] for this model).
"""

import numpy as np
import pytest

from pwsolid.crystal import diamond, zincblende
from pwsolid.errors import InputError
from pwsolid.pseudo.empirical import (EMPIRICAL_MATERIALS, empirical_bands, empirical_crystal,
                                      empirical_hamiltonian, empirical_potential_coefficients)
from pwsolid.units import HARTREE_EV

# High-symmetry points in fractional coordinates of the fcc vectors a/2 (0,1,1), (1,0,1),
# (1,1,0): Γ, X = (2 pi/a)(0,1,0) and L = (2 pi/a)(1/2,1/2,1/2) (REFERENCES 8b).
GAMMA, X, L = [0, 0, 0], [0.5, 0, 0.5], [0.5, 0.5, 0.5]
POINTS = np.array([GAMMA, X, L])

# REFERENCES 3b, eV relative to the valence-band top Γ25' (eight lowest states).
TABLE_3B = {
    "Si": [[-12.61, 0, 0, 0, 3.42, 3.42, 3.42, 3.89],
           [-8.33, -8.33, -3.01, -3.01, 0.95, 0.95, 12.13, 12.13],
           [-10.24, -7.37, -1.25, -1.25, 1.88, 3.98, 3.98, 7.98]],
    "Ge": [[-11.97, 0, 0, 0, 1.22, 3.49, 3.49, 3.49],
           [-8.21, -8.21, -2.57, -2.57, 1.18, 1.18, 11.56, 11.56],
           [-9.96, -6.94, -1.09, -1.09, 0.95, 4.22, 4.22, 7.84]],
}


def bands_ev(material, kpoints, reduced_cutoff=40.0, n_bands=8):
    """Bands in eV relative to the valence-band top at Γ (band index 3)."""
    e = empirical_bands(material, kpoints, n_bands, reduced_cutoff=reduced_cutoff) * HARTREE_EV
    top = empirical_bands(material, [GAMMA], 4, reduced_cutoff=reduced_cutoff)[0, 3] * HARTREE_EV
    return e - top


@pytest.fixture(scope="module")
def converged():
    return {m: bands_ev(m, POINTS) for m in ("Si", "Ge")}


@pytest.mark.parametrize("material", ["Si", "Ge"])
def test_band_energies_at_gamma_x_l(material, converged):
    # REFERENCES 3b, same basis; 0.05 eV = the table's two decimals plus its quoted
    # convergence of ~0.02 eV.
    np.testing.assert_allclose(converged[material], TABLE_3B[material], atol=0.05)


def test_silicon_direct_gap_at_gamma(converged):
    # REFERENCES 7 ([V1]): E_Γ1 = 3.4 eV (Γ25' -> Γ15), given to 0.1 eV; the CB fit aims
    # at it, and the model gives 3.42 eV (3b).
    si = converged["Si"]
    assert si[0, 4] == pytest.approx(3.4, abs=0.1)
    np.testing.assert_allclose(si[0, 4:7], si[0, 4], atol=1e-6)    # Γ15 is threefold


def test_germanium_conduction_minimum_at_l(converged):
    # REFERENCES 3b/7: germanium's lowest conduction state is at L (0.95 eV in this model),
    # below X and below Γ's lowest conduction state.
    ge = converged["Ge"]
    assert ge[2, 4] < ge[1, 4] and ge[2, 4] < ge[0, 4]
    assert ge[2, 4] == pytest.approx(0.95, abs=0.05)


def test_silicon_conduction_minimum_along_delta():
    # REFERENCES 3b [C] / 7 [M]: minimum near 0.85 of Γ-X at 0.82 eV. A parabola through
    # a 0.02 grid locates it to ~0.01; 0.03 allows for the model's flat band bottom. The
    # basis |k+G|^2 <= 30 (2 pi/a)^2 keeps energies within 0.002 eV of the 40 basis
    # (measured), so the 0.05 eV tolerance on the energy is unaffected.
    s = np.linspace(0.78, 0.92, 8)
    k = s[:, None] * np.array(X)[None, :]
    e = bands_ev("Si", k, reduced_cutoff=30, n_bands=5)[:, 4]
    i = int(np.argmin(e))
    assert 0 < i < len(s) - 1
    c2, c1, c0 = np.polyfit(s[i - 1:i + 2], e[i - 1:i + 2], 2)
    s_min = -c1 / (2 * c2)
    assert s_min == pytest.approx(0.85, abs=0.03)
    assert c0 - c1 ** 2 / (4 * c2) == pytest.approx(0.82, abs=0.05)
    assert np.all(e > 0.8)          # indirect gap: below X's 0.95 eV, above 0.8 eV


def test_basis_convergence(converged):
    # REFERENCES 3b: with |k+G|^2 <= 11 or 21 (2 pi/a)^2 the energies relative to the
    # valence-band top shift by up to about 0.15 eV (we find 0.18 eV at 11, 0.03 eV at 21;
    # bound 0.25 eV); the shifts shrink as the basis grows, against a larger basis (50).
    # Absolute eigenvalues (V(0) = 0) are variational: nested bases can only lower them
    # (Cauchy interlacing, exact up to round-off 1e-12 Ha).
    ref = empirical_bands("Si", POINTS, 8, reduced_cutoff=50)
    absolute = {r: empirical_bands("Si", POINTS, 8, reduced_cutoff=r) for r in (11, 21, 40)}
    shifts = [np.max(np.abs(absolute[r] - ref)) * HARTREE_EV for r in (11, 21, 40)]
    assert shifts[0] > shifts[1] > shifts[2]
    assert shifts[0] < 0.5 and shifts[2] < 0.005
    for lo, hi in ((11, 21), (21, 40)):
        assert np.all(absolute[hi] <= absolute[lo] + 1e-12)
    assert np.all(ref <= absolute[40] + 1e-12)
    relative = {r: bands_ev("Si", POINTS, r) for r in (11, 21)}
    rel_shifts = [np.max(np.abs(relative[r] - converged["Si"])) for r in (11, 21)]
    assert 0.25 > rel_shifts[0] > rel_shifts[1]


# -- construction ------------------------------------------------------------------------


def test_plane_wave_count_at_gamma():
    # |G|^2 <= 19 (2 pi/a)^2 holds 89 vectors (REFERENCES 3a [C]); the fcc reciprocal shells
    # 0,3,4,8,11,12,16,19 hold 1,8,6,12,24,8,6,24 vectors (all-even or all-odd h,k,l).
    # At |G|^2 <= 40 our enumeration gives 283 (shells up to 40: ... 35 (48), 36 (30), 40 (24));
    # the "253" printed in REFERENCES 3a disagrees with this shell count.
    assert empirical_hamiltonian(None, "Si", GAMMA, reduced_cutoff=19).shape == (89, 89)
    hkl = np.array(np.meshgrid(*(np.arange(-7, 8),) * 3, indexing="ij")).reshape(3, -1).T
    same_parity = np.all(hkl % 2 == hkl[:, :1] % 2, axis=1)
    count40 = int(np.sum(same_parity & (np.sum(hkl ** 2, axis=1) <= 40)))
    assert count40 == 283
    assert empirical_hamiltonian(None, "Si", GAMMA, reduced_cutoff=40).shape == (283, 283)


def test_hamiltonian_is_hermitian_and_origin_independent():
    # A shift of the origin is a unitary change of basis: the same eigenvalues for CB's
    # bond-centred cell and the builder's cell with an atom at the origin (1e-10 Ha:
    # round-off of a 100-plane-wave diagonalisation).
    a = EMPIRICAL_MATERIALS["GaAs"].lattice_constant
    h = empirical_hamiltonian(None, "GaAs", [0.1, 0.2, 0.3], reduced_cutoff=15)
    assert np.abs(h - h.conj().T).max() < 1e-14
    k = [[0.1, 0.2, 0.3], X]
    cb = empirical_bands("GaAs", k, 8, reduced_cutoff=15)
    builder = empirical_bands("GaAs", k, 8, reduced_cutoff=15,
                              crystal=zincblende(a, ("Ga", "As")))
    np.testing.assert_allclose(cb, builder, atol=1e-10)


def test_form_factors_follow_the_bond_centred_formula():
    # REFERENCES 3a: V(G) = V_S cos(G.tau) + i V_A sin(G.tau) with the anion at +tau
    # (exact; values converted from Ry to Ha).
    crystal = empirical_crystal("GaAs")
    data = EMPIRICAL_MATERIALS["GaAs"]
    a = data.lattice_constant
    tau = np.full(3, a / 8)
    np.testing.assert_allclose(crystal.cartesian_positions[1], tau, atol=1e-12)
    m = np.array(np.meshgrid(*(np.arange(-3, 4),) * 3, indexing="ij")).reshape(3, -1).T
    g = m @ crystal.reciprocal
    g2 = np.rint(np.sum(g ** 2, axis=1) / (2 * np.pi / a) ** 2).astype(int)
    vs = np.array([data.symmetric.get(s, 0.0) for s in g2]) * 0.5
    va = np.array([data.antisymmetric.get(s, 0.0) for s in g2]) * 0.5
    expected = vs * np.cos(g @ tau) + 1j * va * np.sin(g @ tau)
    np.testing.assert_allclose(empirical_potential_coefficients(crystal, "GaAs", m), expected,
                               atol=1e-14)
    assert empirical_potential_coefficients(crystal, "GaAs", [0, 0, 0]) == 0


def test_empirical_input_errors():
    with pytest.raises(InputError, match="known materials"):
        empirical_bands("Unobtainium", [GAMMA], 4, reduced_cutoff=11)
    with pytest.raises(InputError, match="exactly one"):
        empirical_bands("Si", [GAMMA], 4)
    with pytest.raises(InputError, match="form factors are for"):
        empirical_bands("Si", [GAMMA], 4, reduced_cutoff=11, crystal=diamond(10.7, "Ge"))
    with pytest.raises(InputError, match="plane waves"):
        empirical_bands("Si", [GAMMA], 40, reduced_cutoff=3)
