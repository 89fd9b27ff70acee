"""The BFGS trust-radius optimiser on analytic functions (numerical checks, no physics)."""

import numpy as np
import pytest

from pwsolid.optimize import QuasiNewtonState, advance, minimize, start_state


def _quadratic(a, b):
    """f = x.A x / 2 - b.x, minimum at A^-1 b (exact, any textbook)."""
    def fun(x):
        return 0.5 * x @ a @ x - b @ x, a @ x - b
    return fun


def _rosenbrock(x):
    """Rosenbrock's function, minimum 0 at (1, 1) (Rosenbrock, Comput. J. 3, 175 (1960))."""
    f = (1 - x[0]) ** 2 + 100 * (x[1] - x[0] ** 2) ** 2
    g = np.array([-2 * (1 - x[0]) - 400 * x[0] * (x[1] - x[0] ** 2), 200 * (x[1] - x[0] ** 2)])
    return f, g


def test_quadratic_minimum_reached():
    rng = np.random.default_rng(3)
    m = rng.normal(size=(6, 6))
    a = m @ m.T + 6 * np.eye(6)          # well conditioned, positive definite
    b = rng.normal(size=6)
    res = minimize(_quadratic(a, b), np.zeros(6), gradient_tolerance=1e-9, radius=0.5,
                   max_radius=5.0)
    assert res.converged
    # 1e-8: the gradient tolerance 1e-9 over the smallest eigenvalue (>= 6) of A
    np.testing.assert_allclose(res.x, np.linalg.solve(a, b), atol=1e-8)
    # BFGS needs of order n steps on an n-dimensional quadratic (finite termination
    # with exact line searches, Nocedal & Wright 2006, Sec. 6.4; capped steps and the
    # first, unscaled step cost a few more): 16 here, a loose guard against a broken update
    assert res.evaluations < 40


def test_rosenbrock_minimum_reached():
    res = minimize(_rosenbrock, np.array([-1.2, 1.0]), gradient_tolerance=1e-7,
                   max_evaluations=400, radius=0.2, max_radius=1.0)
    assert res.converged
    # near the minimum f ~ |x - x*|^2 with Hessian eigenvalues 0.4 .. 1000:
    # |grad| < 1e-7 leaves |x - x*| below 1e-6
    np.testing.assert_allclose(res.x, [1.0, 1.0], atol=1e-6)
    assert res.value < 1e-12


def test_steps_never_exceed_the_radius():
    state = start_state(np.zeros(2), *_rosenbrock(np.zeros(2)), radius=0.1, max_radius=0.3)
    for _ in range(30):
        assert np.linalg.norm(state.step) <= state.radius * (1 + 1e-12)
        assert state.radius <= 0.3
        x = state.proposal
        state = advance(state, x, *_rosenbrock(x))


def test_a_rise_is_rejected_and_the_radius_halves():
    fun = _quadratic(np.eye(2), np.zeros(2))
    state = start_state([1.0, 0.0], *fun(np.array([1.0, 0.0])), radius=0.5)
    # pretend the evaluation at the proposal came out higher (e.g. a noisy energy)
    x = state.proposal
    f, g = fun(x)
    after = advance(state, x, state.value + 1.0, g)
    assert after.rejected == 1
    np.testing.assert_array_equal(after.x, state.x)
    assert after.radius == pytest.approx(0.25)


def test_state_round_trip_resumes_identically():
    state = start_state([-1.2, 1.0], *_rosenbrock(np.array([-1.2, 1.0])))
    for _ in range(5):
        state = advance(state, state.proposal, *_rosenbrock(state.proposal))
    copy = QuasiNewtonState.from_arrays(state.as_arrays())
    a, b = state, copy
    for _ in range(5):
        a = advance(a, a.proposal, *_rosenbrock(a.proposal))
        b = advance(b, b.proposal, *_rosenbrock(b.proposal))
    np.testing.assert_array_equal(a.proposal, b.proposal)
    assert a.updates == b.updates and a.scaled == b.scaled


def test_projector_keeps_steps_in_a_subspace():
    # f symmetric under x0 <-> x1; a start on the line x0 = x1 must stay on it
    def fun(x):
        return (x[0] ** 2 + x[1] ** 2 + x[0] * x[1] - x[0] - x[1] + 0.1 * (x[0] + x[1]) ** 4,
                np.array([2 * x[0] + x[1] - 1 + 0.4 * (x[0] + x[1]) ** 3,
                          2 * x[1] + x[0] - 1 + 0.4 * (x[0] + x[1]) ** 3]))

    def project(step):
        return np.full(2, step.mean())

    state = start_state([0.0, 0.0], *fun(np.zeros(2)))
    for _ in range(10):
        state = advance(state, state.proposal, *fun(state.proposal), project=project)
        assert state.proposal[0] == pytest.approx(state.proposal[1], abs=1e-14)
