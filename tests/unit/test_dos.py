"""Unit tests of pwsolid.dos: Gaussian and linear-tetrahedron densities of states.

Sources: the free-electron density of states g(E) = Omega sqrt(2E) / pi^2 per cell with
spin (= (Omega / 2 pi^2) (2m / hbar^2)^{3/2} sqrt(E), textbook closed form, [C]); the
tetrahedron formulas of Bloechl, Jepsen & Andersen, Phys. Rev. B 49, 16223 (1994).
"""

import numpy as np
import pytest

from pwsolid.dos import (gaussian_dos, mesh_tetrahedra, tetrahedron_dos, tetrahedron_fermi_level,
                         tetrahedron_weights)

A = 6.0                                       # simple cubic cell edge, bohr
RECIP = 2 * np.pi / A * np.eye(3)
OMEGA = A ** 3
BOUNDARY = 0.5 * (np.pi / A) ** 2             # lowest zone-boundary energy (X point), Ha


def free_electron_mesh(n: int, n_bands: int = 4) -> np.ndarray:
    """Lowest free-electron bands |k+G|^2/2 of the simple cubic cell on an n^3 mesh (Γ included)."""
    f = np.arange(n) / n
    f[f >= 0.5] -= 1.0
    k = np.stack(np.meshgrid(f, f, f, indexing="ij"), -1)
    g = np.array(np.meshgrid(*(np.arange(-1, 2),) * 3, indexing="ij")).reshape(3, -1).T
    kin = 0.5 * np.sum(((k[..., None, :] + g) @ RECIP) ** 2, axis=-1)
    return np.sort(kin, axis=-1)[..., :n_bands]


def cosine_band(n: int) -> np.ndarray:
    """Nearest-neighbour tight-binding band -(cos 2pi k1 + cos 2pi k2 + cos 2pi k3) / 4, Ha."""
    f = np.arange(n) / n
    c = np.cos(2 * np.pi * f)
    return -(c[:, None, None] + c[None, :, None] + c[None, None, :])[..., None] / 4


def free_dos(e):
    return OMEGA * np.sqrt(2 * e) / np.pi ** 2


def free_count(e):
    return OMEGA * (2 * e) ** 1.5 / (3 * np.pi ** 2)


# -- tetrahedra -------------------------------------------------------------------------


def test_tetrahedra_fill_the_mesh_cells():
    mesh = (3, 4, 5)
    tet = mesh_tetrahedra(mesh, RECIP)
    assert tet.shape == (6 * 60, 4)
    # Each cell's six tetrahedra share one main diagonal: the first and last corners
    # are the same for all six, and every mesh point is a corner of 24 tetrahedra.
    by_cell = tet.reshape(60, 6, 4)
    assert np.all(by_cell[:, :, 0] == by_cell[:, :1, 0]) and np.all(by_cell[:, :, 3] == by_cell[:, :1, 3])
    assert np.all(np.bincount(tet.ravel(), minlength=60) == 24)


def test_shortest_diagonal_is_chosen():
    # fcc reciprocal vectors (a bcc lattice): the shortest cell diagonal of the mesh.
    b = 2 * np.pi * np.array([[-1, 1, 1], [1, -1, 1], [1, 1, -1]], float)
    tet = mesh_tetrahedra((4, 4, 4), b)
    n = np.array([4, 4, 4])
    start, end = np.unravel_index(tet[0, 0], n), np.unravel_index(tet[0, 3], n)
    d = (np.array(end) - np.array(start) + 2) % 4 - 2
    lengths = [np.linalg.norm(np.array(s) @ b / 4) for s in
               ([1, 1, 1], [1, 1, -1], [1, -1, 1], [-1, 1, 1])]
    assert np.linalg.norm(d @ b / 4) == pytest.approx(min(lengths))


def test_dos_integrates_to_the_number_of_states():
    # Above every band the integrated DOS is 2 n_bands (spin included): exact. The DOS
    # integrates to the same count (trapezoid rule on a fine grid: 1e-3).
    eps = free_electron_mesh(8, n_bands=4)
    e = np.linspace(eps.min() - 0.01, eps.max() + 0.01, 1601)
    d = tetrahedron_dos(eps, RECIP, e)
    assert d.integrated[-1] == pytest.approx(8.0, abs=1e-12)
    assert d.integrated[0] == 0.0
    assert np.trapezoid(d.dos, e) == pytest.approx(8.0, rel=1e-3)
    g = gaussian_dos(eps.reshape(-1, 4), np.full(512, 1 / 512), e, 0.002)
    assert np.trapezoid(g.dos, e) == pytest.approx(8.0, rel=1e-3)
    assert g.integrated[-1] == pytest.approx(8.0, rel=1e-9)
    d1 = tetrahedron_dos(eps, RECIP, e, spin_degeneracy=1)
    np.testing.assert_allclose(d1.dos * 2, d.dos)


def test_dos_is_the_derivative_of_the_integrated_dos():
    # Centred differences of the closed-form N(E) (step 1e-6 Ha: error ~1e-7 relative).
    eps = cosine_band(6)
    e = np.linspace(-0.7, 0.7, 57)
    h = 1e-6
    d = tetrahedron_dos(eps, RECIP, e)
    upper = tetrahedron_dos(eps, RECIP, e + h).integrated
    lower = tetrahedron_dos(eps, RECIP, e - h).integrated
    fd = (upper - lower) / (2 * h)
    np.testing.assert_allclose(d.dos, fd, atol=1e-5 * d.dos.max())


def test_tetrahedron_dos_of_free_electrons():
    # Source: free-electron closed form, g(E) = Omega sqrt(2E) / pi^2 with spin. Below the
    # first zone-boundary energy only the lowest band contributes and it is the sphere.
    # Linear interpolation of a convex band overestimates energies: error O(h^2), so the
    # error must shrink with the mesh; with 24^3 points the DOS is within 3 % from 0.3 to
    # 0.9 of the boundary energy (fewer states per tetrahedron below; the observed error is
    # about 1 %).
    e = np.linspace(0.3, 0.9, 13) * BOUNDARY
    errors = []
    for n in (8, 12, 24):
        d = tetrahedron_dos(free_electron_mesh(n), RECIP, e)
        errors.append(np.max(np.abs(d.integrated / free_count(e) - 1)))
        if n == 24:
            np.testing.assert_allclose(d.dos, free_dos(e), rtol=0.03)
            np.testing.assert_allclose(d.integrated, free_count(e), rtol=0.03)
    assert errors[0] > errors[1] > errors[2]


def test_gaussian_converges_to_tetrahedron_for_small_widths():
    # On a dense mesh the Gaussian DOS tends to the tetrahedron DOS as the width shrinks
    # (until the width reaches the mesh's energy spacing). The difference is measured on the
    # band interior, away from the van Hove kinks at -1/4 and +1/4 where broadening rounds
    # the cusp; the 4 % bound at the smallest width is the observed ~1 % with margin.
    eps = cosine_band(48)
    weights = np.full(48 ** 3, 48.0 ** -3)
    e = np.concatenate([np.linspace(-0.65, -0.35, 16), np.linspace(0.35, 0.65, 16)])
    tet = tetrahedron_dos(eps, RECIP, e)
    errs = []
    for width in (0.08, 0.04, 0.02):
        g = gaussian_dos(eps.reshape(-1, 1), weights, e, width)
        errs.append(np.max(np.abs(g.dos - tet.dos)) / tet.dos.max())
    assert errs[0] > errs[1] > errs[2]
    assert errs[2] < 0.04


def test_gaussian_dos_of_one_level():
    # One level at 0 in one k-point: a normalised Gaussian of the given width (exact).
    e = np.array([-0.1, 0.0, 0.05])
    g = gaussian_dos([[0.0]], [1.0], e, 0.05)
    np.testing.assert_allclose(g.dos, 2 * np.exp(-0.5 * (e / 0.05) ** 2) / (np.sqrt(2 * np.pi) * 0.05))
    assert g.integrated[1] == pytest.approx(1.0)


# -- integration weights ----------------------------------------------------------------


@pytest.mark.parametrize("n_electrons", [1.0, 2.7, 5.0])
def test_weights_sum_to_the_electron_count(n_electrons):
    # At the tetrahedron Fermi level the weights hold exactly the electrons (bisection to
    # 1e-12 Ha: the count to ~1e-9), with and without Bloechl's correction, whose corner
    # sum vanishes.
    eps = free_electron_mesh(10)
    ef = tetrahedron_fermi_level(eps, RECIP, n_electrons)
    for bloechl in (True, False):
        w = tetrahedron_weights(eps, RECIP, ef, bloechl=bloechl)
        assert w.shape == eps.shape
        assert w.sum() == pytest.approx(n_electrons, abs=1e-8)
    assert tetrahedron_dos(eps, RECIP, [ef]).integrated[0] == pytest.approx(n_electrons, abs=1e-8)


def test_weights_of_full_bands_and_insulators():
    # Two separated cosine bands with 2 electrons per cell: the lower band is full, every
    # state carries 2 / N_k exactly, the Fermi level is mid-gap.
    band = cosine_band(6)
    eps = np.concatenate([band, band + 2.0], axis=-1)       # bands [-0.75, 0.75] and [1.25, 2.75]
    ef = tetrahedron_fermi_level(eps, RECIP, 2.0)
    assert ef == pytest.approx(1.0, abs=1e-9)
    w = tetrahedron_weights(eps, RECIP, ef)
    np.testing.assert_allclose(w[..., 0], 2 / 216, rtol=1e-12)
    np.testing.assert_allclose(w[..., 1], 0.0, atol=0)


def test_bloechl_correction_improves_the_band_energy():
    # Free electrons, 1 electron per cell, Fermi level from the tetrahedron count itself
    # (as an SCF would use it): the band energy sum w e approaches the closed form
    # (3/5) N E_F much faster with Bloechl's correction, which removes the leading
    # O(h^2) error of the linear method (Bloechl et al. 1994, Sec. III). Observed: plain
    # ~1e-3 Ha, corrected ~1e-5 Ha or better; required: 20 times smaller, and converging.
    n_e = 1.0
    exact = 0.6 * n_e * 0.5 * (3 * np.pi ** 2 * n_e / OMEGA) ** (2 / 3)
    plain, corrected = [], []
    for n in (8, 12):
        eps = free_electron_mesh(n)
        ef = tetrahedron_fermi_level(eps, RECIP, n_e)
        for bloechl, store in ((False, plain), (True, corrected)):
            w = tetrahedron_weights(eps, RECIP, ef, bloechl=bloechl)
            store.append(abs(np.sum(w * eps) - exact))
    assert plain[1] < plain[0]
    assert corrected[0] < plain[0] / 20 and corrected[1] < plain[1] / 20


def test_input_checks():
    with pytest.raises(ValueError, match="sum to 1"):
        gaussian_dos([[0.0]], [0.5], [0.0], 0.1)
    with pytest.raises(ValueError, match="n_bands"):
        tetrahedron_dos(np.zeros((2, 2, 2)), RECIP, [0.0])
    with pytest.raises(ValueError, match="do not fit"):
        tetrahedron_fermi_level(cosine_band(4), RECIP, 3.0)
