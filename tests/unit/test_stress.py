"""Kernels of the stress tensor (pwsolid/stress.py and its helpers) against finite
strains of the energy terms they differentiate, exact limits and brute force.

A strain eps maps r -> (1 + eps) r: lattice rows L -> L (1 + eps)^T, fractional
positions and Miller indices fixed; sigma_ab = (1/Omega) dE/d eps_ab (Nielsen and
Martin, Phys. Rev. B 32, 3780 (1985)).
"""

import numpy as np
import pytest

from pwsolid.basis import basis_from_miller, make_basis
from pwsolid.electrostatics import (ewald_energy, ewald_stress, hartree_energy,
                                    hartree_stress)
from pwsolid.energies import kinetic_energy
from pwsolid.pseudo.core import PartialCore
from pwsolid.pseudo.local import (LOCAL_FORMS, AppelbaumHamann, EmptyCore, EvanescentCore,
                                  GaussianLocal, LocalForm)
from pwsolid.pseudo.separable import (ProjectorChannel, SeparablePart, nonlocal_operator,
                                      projector_gradients)
from pwsolid.stress import (StressTensor, cartesian_rotations, kinetic_stress,
                            nonlocal_stress, symmetrize_tensor)
from pwsolid.symmetry import find_symmetry
from pwsolid.crystal import diamond
from pwsolid.units import HA_PER_BOHR3_GPA

LATTICE = np.array([[0.2, 5.1, 4.9], [5.0, 0.1, 5.2], [5.3, 4.8, 0.3]])   # triclinic
RNG = np.random.default_rng(7)


def _strained(lattice, a, b, h):
    eps = np.zeros((3, 3))
    eps[a, b] += h / 2
    eps[b, a] += h / 2
    return np.asarray(lattice) @ (np.eye(3) + eps).T


def _finite_strain(energy_of_lattice, lattice, h=1e-5):
    """(1/Omega) dE/d eps_ab by central differences of symmetric strains (common practice)."""
    volume = abs(np.linalg.det(lattice))
    out = np.zeros((3, 3))
    for a in range(3):
        for b in range(3):
            out[a, b] = (energy_of_lattice(_strained(lattice, a, b, h))
                         - energy_of_lattice(_strained(lattice, a, b, -h))) / (2 * h * volume)
    return out


def test_ewald_stress_is_the_strain_derivative_of_the_ewald_energy():
    frac = np.array([[0.0, 0.0, 0.0], [0.26, 0.24, 0.27], [0.6, 0.1, 0.4]])
    charges = [4.0, 3.0, 1.5]        # not neutral: the background term is tested too
    analytic = ewald_stress(LATTICE, frac @ LATTICE, charges)
    numeric = _finite_strain(lambda lat: ewald_energy(lat, frac @ lat, charges), LATTICE)
    # lattice sums converged to 1e-12 Ha; the h^2 error of the difference is ~1e-10
    assert np.max(np.abs(analytic - numeric)) < 1e-9
    assert np.allclose(analytic, analytic.T, atol=1e-14)


def test_ewald_stress_does_not_depend_on_the_splitting():
    frac = np.array([[0.0, 0.0, 0.0], [0.25, 0.25, 0.25]])
    values = [ewald_stress(LATTICE, frac @ LATTICE, [4, 4], splitting=eta)
              for eta in (0.3, 0.5, 0.8)]
    # Ewald (1921): the split between the two series is arbitrary
    assert np.max(np.abs(values[0] - values[1])) < 1e-10
    assert np.max(np.abs(values[0] - values[2])) < 1e-10


def test_kinetic_stress_of_free_electrons_gives_two_thirds_of_the_energy_density():
    # Plane waves as orbitals: the free-electron gas, whose pressure is P = 2 T / (3 Omega)
    # (virial of the free-electron gas; N. W. Ashcroft and N. D. Mermin, Solid State
    # Physics (1976), ch. 2, from memory). Also the full tensor against finite strain.
    k = np.array([0.1, -0.2, 0.3])
    basis = make_basis(LATTICE, k, 3.0, (24, 24, 24))
    n_bands = 7
    coefficients = np.eye(n_bands, basis.size, dtype=complex)
    occupations = np.full(n_bands, 2.0)
    volume = abs(np.linalg.det(LATTICE))
    sigma = kinetic_stress(coefficients, basis.kpg, occupations, 1.0, volume)
    kinetic = kinetic_energy([coefficients], [basis.kinetic], occupations[None], [1.0])
    assert abs(-np.trace(sigma) / 3 - 2 * kinetic / (3 * volume)) < 1e-13

    def energy(lat):
        strained = basis_from_miller(lat, k, basis.miller[:n_bands], (24, 24, 24))
        return kinetic_energy([np.eye(n_bands, dtype=complex)], [strained.kinetic],
                              occupations[None], [1.0])

    # rows of basis_from_miller are re-sorted by energy: orbitals are whole plane waves,
    # so the sum does not care
    assert np.max(np.abs(sigma - _finite_strain(energy, LATTICE))) < 1e-9


def test_hartree_stress_is_the_strain_derivative_at_fixed_electron_numbers():
    from pwsolid.basis import grid_g_vectors

    shape = (6, 6, 6)
    field = RNG.standard_normal(shape)
    counts = np.fft.fftn(field) / field.size              # Omega n(G): fixed under strain
    volume = abs(np.linalg.det(LATTICE))

    def energy(lat):
        g2 = np.sum(grid_g_vectors(lat, shape) ** 2, axis=-1)
        return hartree_energy(counts / abs(np.linalg.det(lat)), g2, abs(np.linalg.det(lat)))

    analytic = hartree_stress(counts / volume, grid_g_vectors(LATTICE, shape), volume)
    assert np.max(np.abs(analytic - _finite_strain(energy, LATTICE))) < 1e-9


FORMS = [EmptyCore(3.0, 1.1), AppelbaumHamann(4.0, 0.6, 3.0, 0.5),
         GaussianLocal(4.0, 0.44, -7.3, 1.2, 0.3, -0.1), EvanescentCore(1.0, 3.5, 0.33)]


def test_every_registered_local_form_is_covered():
    assert {type(f) for f in FORMS} == {cls for cls, _ in LOCAL_FORMS.values()}


@pytest.mark.parametrize("form", FORMS, ids=lambda f: type(f).__name__)
def test_local_form_derivatives_match_finite_differences(form):
    # reciprocal-lattice vectors of solids are longer than ~0.3 bohr^-1; below ~1e-2
    # the closed forms of w(q) lose digits to cancellation ((1 - cos x)/x^2) and a
    # finite difference of them means nothing
    q = np.array([0.05, 0.4, 1.3, 2.9, 5.5])
    h = 1e-5
    numeric = (form.short_range(q + h) - form.short_range(q - h)) / (2 * h)
    # central difference: h^2 w''' ~ 1e-9
    assert np.allclose(form.short_range_derivative(q), numeric, rtol=1e-6, atol=1e-6)
    full = (form.form_factor(q + h) - form.form_factor(q - h)) / (2 * h)
    assert np.allclose(form.form_factor_derivative(q)[1:], full[1:], rtol=1e-6)
    # w is even in q: w'(q) = w''(0) q + O(q^3) through the series branches at small q
    small = form.short_range_derivative(np.array([1e-6, 1e-3]))
    assert abs(small[0] / 1e-6 - small[1] / 1e-3) < 1e-3 * abs(small[1] / 1e-3)
    # the generic (numerical) derivative of the interface agrees with the closed forms
    assert np.allclose(LocalForm.short_range_derivative(form, q[1:]),
                       form.short_range_derivative(q[1:]), rtol=1e-7, atol=1e-7)


def test_partial_core_form_factor_derivative():
    core = PartialCore(1.7, 0.8)
    q = np.array([0.0, 0.3, 1.1, 3.0])
    h = 1e-6
    numeric = (core.form_factor(q + h) - core.form_factor(q - h)) / (2 * h)
    assert np.allclose(core.form_factor_derivative(q), numeric, atol=1e-9)


PART = SeparablePart((ProjectorChannel(0, 0.42, np.array([[5.0, -1.1, 0.4], [-1.1, 2.0, 0.3],
                                                             [0.4, 0.3, 1.0]])),
                      ProjectorChannel(1, 0.51, np.array([[1.5, -0.6], [-0.6, 0.9]])),
                      ProjectorChannel(2, 0.38, np.array([[-3.0]]))))


def test_projector_gradients_match_finite_differences():
    q = RNG.standard_normal((40, 3)) * 1.5
    q[0] = 0.0                                    # k + G = 0 (Gamma) is included
    tau = np.array([0.3, -0.2, 0.5])
    grads = projector_gradients(q, tau, PART, 90.0)
    h = 1e-6
    for b in range(3):
        d = np.zeros(3)
        d[b] = h
        # the structure phase is held fixed, as under strain: differentiate at tau = 0
        # and put the phase back
        plus = nonlocal_operator(q + d, [(np.zeros(3), PART)], 90.0)[0]
        minus = nonlocal_operator(q - d, [(np.zeros(3), PART)], 90.0)[0]
        numeric = (plus - minus) / (2 * h) * np.exp(-1j * q @ tau)
        # the l = 1, 2 harmonics are masked at q = 0 in the operator: skip that column
        assert np.max(np.abs(grads[b][:, 1:] - numeric[:, 1:])) < 1e-8


def test_nonlocal_stress_is_the_strain_derivative_of_the_projector_energy():
    k = np.array([0.15, 0.0, -0.1])
    frac = np.array([[0.0, 0.0, 0.0], [0.27, 0.22, 0.3]])
    grid = (20, 20, 20)
    basis = make_basis(LATTICE, k, 2.5, grid)
    coefficients = RNG.standard_normal((3, basis.size)) + 1j * RNG.standard_normal((3, basis.size))
    f = np.array([2.0, 1.3, 0.4])
    volume = abs(np.linalg.det(LATTICE))

    def energy(lat):
        strained = basis_from_miller(lat, k, basis.miller, grid)
        # keep the coefficient of each Miller index with it (rows are re-sorted)
        order = [np.flatnonzero((basis.miller == m).all(axis=1))[0] for m in strained.miller]
        c = coefficients[:, order]
        proj, d = nonlocal_operator(strained.kpg, [(x, PART) for x in frac @ lat],
                                    abs(np.linalg.det(lat)))
        b = c @ proj.conj().T
        return float(np.einsum("n,na,ab,nb->", f, b.conj(), d, b).real)

    analytic = nonlocal_stress(coefficients, basis.kpg, [(x, PART) for x in frac @ LATTICE],
                               f, 1.0, volume)
    numeric = _finite_strain(energy, LATTICE)
    assert np.max(np.abs(analytic - numeric)) < 1e-7 * np.max(np.abs(numeric))


def test_cubic_symmetrisation_leaves_only_a_pressure():
    si = diamond(10.26, "Si")
    ops = find_symmetry(si)
    rot = cartesian_rotations(si.lattice, ops.rotations)
    # Cartesian images of lattice rotations are orthogonal
    assert np.allclose(np.einsum("nij,nkj->nik", rot, rot), np.eye(3), atol=1e-12)
    t = RNG.standard_normal((3, 3))
    s = symmetrize_tensor(t, rot)
    # a second-rank tensor with cubic symmetry is a multiple of the identity (Nye,
    # Physical Properties of Crystals (1957), from memory)
    assert np.allclose(s, np.trace(t) / 3 * np.eye(3), atol=1e-12)


def test_basis_from_miller_reproduces_make_basis():
    k = np.array([0.25, 0.0, 0.5])
    a = make_basis(LATTICE, k, 4.0, (24, 24, 24))
    b = basis_from_miller(LATTICE, k, a.miller[::-1], (24, 24, 24))
    assert np.array_equal(a.miller, b.miller) and np.allclose(a.kpg, b.kpg)
    assert np.array_equal(a.grid_index, b.grid_index)
    with pytest.raises(ValueError):
        basis_from_miller(LATTICE, k, a.miller, (4, 4, 4))


def test_document_units_and_sign():
    tensor = np.diag([-1e-4, -2e-4, -3e-4])
    st = StressTensor(tensor, {"kinetic": tensor}, pulay_estimate=-1e-5 * np.eye(3))
    doc = st.as_document()
    # 1 Ha/bohr^3 = 29421.02648 GPa (the figure of issue 16's contract, from memory of a
    # CODATA release); scipy's release differs in the 7th digit
    assert abs(HA_PER_BOHR3_GPA / 29421.02648 - 1) < 1e-6
    assert doc["pressure_GPa"] == pytest.approx(2e-4 * HA_PER_BOHR3_GPA, rel=1e-14)
    assert doc["tensor_GPa"][2][2] == pytest.approx(-3e-4 * HA_PER_BOHR3_GPA)
    assert doc["pressure_at_fixed_cutoff_GPa"] == pytest.approx((2e-4 + 1e-5) * HA_PER_BOHR3_GPA)
    lines = st.summary_lines()
    assert any("pressure" in line and "GPa" in line for line in lines)
    assert StressTensor(tensor, {}).as_document()["pulay_estimate_GPa"] is None
