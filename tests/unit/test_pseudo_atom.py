"""Radial pseudo-atom solver: operators against brute force, grid convergence, inputs."""

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.interpolate import BSpline

from pwsolid.errors import InputError
from pwsolid.pseudo import load_pseudopotential
from pwsolid.pseudo.atom import (channel_matrices, nonlocal_matrix, parse_configuration,
                                 radial_basis, radial_hartree_potential, solve_pseudo_atom)
from pwsolid.pseudo.separable import ProjectorChannel, hgh_off_diagonal, projector_radial_real
from pwsolid.resources import pseudopotential_dir


def test_nonlocal_matrix_is_hermitian_low_rank_and_equals_direct_integrals():
    basis = radial_basis(r_max=20.0, intervals=30, degree=6)
    channel = ProjectorChannel(l=1, radius=0.6, h=hgh_off_diagonal(1, [1.3, -0.5]))
    v = nonlocal_matrix(basis, channel)
    assert np.allclose(v, v.T, atol=1e-14)
    assert np.linalg.matrix_rank(v, tol=1e-10 * np.abs(v).max()) == 2
    # brute force: P_ai = int B_a(r) r p_i(r) dr by adaptive quadrature, spline by spline
    n_all = len(basis.knots) - basis.degree - 1
    for a in (0, 3, 7):
        spline = BSpline(basis.knots, np.eye(n_all)[a + 1], basis.degree, extrapolate=False)
        p = [quad(lambda r: spline(r) * r * projector_radial_real(1, i, 0.6, r), 0, 20.0,
                  points=basis.knots[basis.knots < 20.0][:60], limit=400)[0] for i in (1, 2)]
        for b in (0, 5):
            spl_b = BSpline(basis.knots, np.eye(n_all)[b + 1], basis.degree, extrapolate=False)
            q = [quad(lambda r: spl_b(r) * r * projector_radial_real(1, i, 0.6, r), 0, 20.0,
                      points=basis.knots[basis.knots < 20.0][:60], limit=400)[0] for i in (1, 2)]
            assert abs(v[a, b] - np.array(p) @ channel.h @ np.array(q)) < 1e-10


def test_projector_expectation_value_is_its_coupling():
    # u = r p_1(r) is normalised; with one projector <u|V_nl|u> = h_11 exactly
    basis = radial_basis(r_max=20.0, intervals=60)
    channel = ProjectorChannel(l=0, radius=0.5, h=np.array([[2.5]]))
    r = basis.points
    u = r * projector_radial_real(0, 1, 0.5, r)
    _, s = channel_matrices(basis, 0, np.zeros_like(r))
    c = np.linalg.solve(s, basis.values.T @ (basis.weights * u))
    assert abs(c @ s @ c - 1) < 1e-9
    assert abs(c @ nonlocal_matrix(basis, channel) @ c - 2.5) < 1e-8


def test_hartree_potential_of_the_hydrogen_density():
    # n = exp(-2r)/pi gives V_H = 1/r - (1 + 1/r) exp(-2r) (closed form)
    basis = radial_basis(r_max=40.0, intervals=80)
    r = basis.points
    v = radial_hartree_potential(basis, np.exp(-2 * r) / math.pi)
    exact = 1 / r - (1 + 1 / r) * np.exp(-2 * r)
    assert np.max(np.abs(v - exact)) < 1e-8


def test_eigenvalues_converge_with_the_grid():
    pp = load_pseudopotential(pseudopotential_dir() / "Si-hartwigsen-goedecker-hutter.toml")
    grids = [dict(intervals=30, degree=5), dict(intervals=60, degree=6),
             dict(intervals=120, degree=8)]
    values = [np.array(list(solve_pseudo_atom(pp, basis=radial_basis(**g)).eigenvalues.values()))
              for g in grids]
    first, second = np.abs(values[1] - values[0]).max(), np.abs(values[2] - values[1]).max()
    assert second < first
    assert second < 1e-6


@pytest.mark.parametrize("text, expected", [
    ("3s2 3p2", {(3, 0): 2.0, (3, 1): 2.0}),
    ("4s1 4p0.5", {(4, 0): 1.0, (4, 1): 0.5}),
])
def test_configurations_parse(text, expected):
    assert parse_configuration(text) == expected


@pytest.mark.parametrize("text", ["3x2", "2p7", "1p1", ""])
def test_bad_configurations_are_refused(text):
    with pytest.raises(InputError):
        parse_configuration(text)


def test_a_charged_configuration_is_refused():
    pp = load_pseudopotential(pseudopotential_dir() / "Si-goedecker-teter-hutter.toml")
    with pytest.raises(InputError, match="neutral"):
        solve_pseudo_atom(pp, "3s2 3p1")
