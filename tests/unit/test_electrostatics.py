"""Hartree by FFT against analytic results, Ewald against its own splitting."""

import numpy as np

from pwsolid.basis import grid_g_vectors
from pwsolid.crystal import face_centred_cubic
from pwsolid.electrostatics import ewald_energy, hartree_energy, hartree_potential
from pwsolid.fft import make_fft_grid


def test_hartree_of_a_gaussian_matches_the_direct_g_sum():
    # Periodic Gaussians: n(G) = exp(-G^2 s^2 / 2) / Omega, so E_H has a closed-form
    # lattice sum that the FFT route must reproduce term by term.
    cell = np.diag([9.0, 10.0, 11.0])
    grid = (36, 40, 45)
    fft = make_fft_grid(grid)
    g = grid_g_vectors(cell, grid)
    g2 = np.sum(g * g, axis=-1)
    s = 0.9
    volume = np.linalg.det(cell)
    n_g = np.exp(-g2 * s * s / 2) / volume
    n_r = fft.field_to_real(n_g).real
    e_fft = hartree_energy(fft.field_to_reciprocal(n_r), g2, volume)
    r = np.arange(-30, 31)
    m = np.stack(np.meshgrid(r, r, r, indexing="ij"), -1).reshape(-1, 3)
    gg = m @ (2 * np.pi * np.linalg.inv(cell).T)
    gg2 = np.sum(gg * gg, axis=1)
    gg2 = gg2[gg2 > 0]
    direct = 0.5 * volume * np.sum(4 * np.pi / gg2 * np.exp(-gg2 * s * s) / volume ** 2)
    assert abs(e_fft - direct) < 1e-10
    v = hartree_potential(fft.field_to_reciprocal(n_r), g2)
    assert v.flat[0] == 0     # neutralising background


def test_ewald_does_not_depend_on_the_splitting():
    al = face_centred_cubic(7.6, "Al")
    values = [ewald_energy(al.lattice, al.cartesian_positions, [3.0], splitting=eta)
              for eta in (0.3, 0.5, 0.9, 1.5)]
    assert np.ptp(values) < 1e-10


def test_ewald_is_invariant_under_translation_and_extensive():
    si = face_centred_cubic(10.26, "Si").supercell((1, 1, 1))
    pos = np.array([[0, 0, 0], [0.25, 0.25, 0.25]]) @ si.lattice
    e1 = ewald_energy(si.lattice, pos, [4, 4])
    e2 = ewald_energy(si.lattice, pos + [0.3, -1.1, 2.0], [4, 4])
    assert abs(e1 - e2) < 1e-10
    big = si.lattice * np.array([[2], [1], [1]])
    pos2 = np.concatenate([pos, pos + si.lattice[0]])
    assert abs(ewald_energy(big, pos2, [4, 4, 4, 4]) - 2 * e1) < 1e-9
