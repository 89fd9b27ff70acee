"""Quasi-Newton minimisation with a trust radius, step by step (layer 1).

The optimiser knows nothing of crystals: it sees a vector ``x``, a value ``f(x)``
and a gradient ``g(x)``. Its whole memory is a small :class:`QuasiNewtonState`
(current point, value, gradient, Hessian model, trust radius, proposed next point)
that can be written to a file and read back (:meth:`QuasiNewtonState.as_arrays`,
:meth:`QuasiNewtonState.from_arrays`), so a caller whose evaluations are expensive
(a self-consistent calculation per point) can stop after any evaluation and resume.

One step is::

    state = start_state(x0, f0, g0, radius=0.2)     # after evaluating x0
    while not done:
        x = state.proposal                           # where to evaluate next
        f, g = evaluate(x)
        state = advance(state, x, f, g)              # accept or reject, update, propose

:func:`minimize` runs this loop for a cheap callable (tests, toy problems).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

__all__ = ["QuasiNewtonState", "QuasiNewtonResult", "start_state", "advance", "minimize"]

# Trust-radius control (Nocedal & Wright 2006, Algorithm 4.1): shrink when the
# model's predicted decrease was poor, grow when it was good and the step was capped.
_SHRINK_BELOW = 0.25
_GROW_ABOVE = 0.75
# A pair (s, y) with y.s below this fraction of |s||y| carries no usable curvature
# (Nocedal & Wright 2006, Sec. 6.1: the update needs y.s > 0); it is skipped.
_CURVATURE_FLOOR = 1e-8


@dataclass(frozen=True)
class QuasiNewtonState:
    """Everything a BFGS trust-radius minimiser needs between evaluations.

    Attributes
    ----------
    x : ndarray (n,)
        The best point accepted so far.
    value : float
        f(x).
    gradient : ndarray (n,)
        grad f(x).
    hessian : ndarray (n, n)
        BFGS model B of the Hessian (symmetric positive definite).
    radius : float
        Trust radius: no proposed step is longer than this (units of x).
    proposal : ndarray (n,)
        The next point to evaluate.
    predicted : float
        Change of f the quadratic model predicts at ``proposal`` (negative).
    max_radius : float
        Upper bound of the trust radius.
    noise : float
        Rises of f up to this size are accepted (evaluation noise, e.g. of an SCF).
    updates, rejected : int
        BFGS updates made and steps rejected so far.
    scaled : bool
        Whether the initial Hessian has been rescaled by the first curvature pair.
    """

    x: np.ndarray
    value: float
    gradient: np.ndarray
    hessian: np.ndarray
    radius: float
    proposal: np.ndarray
    predicted: float
    max_radius: float
    noise: float = 0.0
    updates: int = 0
    rejected: int = 0
    scaled: bool = False

    @property
    def step(self) -> np.ndarray:
        """The proposed step ``proposal - x``."""
        return self.proposal - self.x

    def as_arrays(self) -> dict:
        """Arrays and scalars of the state (for an archive); see :meth:`from_arrays`."""
        scalars = np.array([self.value, self.radius, self.predicted, self.max_radius, self.noise,
                            self.updates, self.rejected, float(self.scaled)])
        return {"x": self.x, "gradient": self.gradient, "hessian": self.hessian,
                "proposal": self.proposal, "scalars": scalars}

    @classmethod
    def from_arrays(cls, arrays: dict) -> "QuasiNewtonState":
        """The state saved by :meth:`as_arrays`."""
        v, r, p, m, noise, u, rej, sc = (float(a) for a in arrays["scalars"])
        return cls(np.array(arrays["x"], float), v, np.array(arrays["gradient"], float),
                   np.array(arrays["hessian"], float), r, np.array(arrays["proposal"], float),
                   p, m, noise, int(u), int(rej), bool(sc))


def _propose(x, g, hessian, radius) -> tuple[np.ndarray, float]:
    """Quasi-Newton step -B^-1 g, cut back to the trust radius; (proposal, predicted change).

    Notes
    -----
    The cut keeps the Newton direction (a step cap, as in common practice for
    geometry optimisers) rather than solving the trust-region subproblem exactly;
    with B positive definite the direction is a descent direction, and the model
    change m(p) = g.p + p.B p / 2 is negative for any length up to the full step.
    """
    p = -np.linalg.solve(hessian, g)
    length = float(np.linalg.norm(p))
    if length > radius:
        p *= radius / length
    predicted = float(g @ p + 0.5 * p @ hessian @ p)
    return x + p, predicted


def start_state(x0, value: float, gradient, *, radius: float = 0.2, max_radius: float = 1.0,
                curvature: float = 1.0, noise: float = 0.0) -> QuasiNewtonState:
    """The state after the first evaluation, with the first step proposed.

    Parameters
    ----------
    x0 : array_like (n,)
        Starting point.
    value, gradient
        f(x0) and grad f(x0).
    radius, max_radius : float
        Initial and largest trust radius (units of x).
    curvature : float
        Initial Hessian model B0 = curvature * I (units of f / x^2); after the
        first accepted pair it is rescaled to y.y / y.s (Nocedal & Wright 2006,
        eq. 6.20, the same scaling for B).
    noise : float
        Rises of f no larger than this count as no rise (see :func:`advance`).
    """
    x0 = np.array(x0, float).ravel()
    g = np.array(gradient, float).ravel()
    if x0.shape != g.shape:
        raise ValueError(f"x has shape {x0.shape} but the gradient {g.shape}")
    if not (radius > 0 and max_radius >= radius and curvature > 0 and noise >= 0):
        raise ValueError("need 0 < radius <= max_radius, curvature > 0 and noise >= 0")
    hessian = curvature * np.eye(len(x0))
    proposal, predicted = _propose(x0, g, hessian, radius)
    return QuasiNewtonState(x0, float(value), g, hessian, float(radius), proposal, predicted,
                            float(max_radius), float(noise))


def _bfgs_update(hessian, s, y, scaled: bool) -> tuple[np.ndarray, bool, bool]:
    """BFGS update of the Hessian model B with the pair (s, y): (B+, scaled, updated);
    B is unchanged when y.s <= 0.

    Notes
    -----
    B+ = B - (B s)(B s)^T / (s.B s) + y y^T / (y.s)   (Nocedal & Wright 2006, eq. 6.19)
    """
    ys = float(y @ s)
    if ys <= _CURVATURE_FLOOR * np.linalg.norm(s) * np.linalg.norm(y):
        return hessian, scaled, False
    if not scaled:
        hessian = (float(y @ y) / ys) * np.eye(len(s))
    bs = hessian @ s
    new = hessian - np.outer(bs, bs) / float(s @ bs) + np.outer(y, y) / ys
    return 0.5 * (new + new.T), True, True


def advance(state: QuasiNewtonState, x, value: float, gradient,
            project: Callable[[np.ndarray], np.ndarray] | None = None) -> QuasiNewtonState:
    """Take the evaluation at ``x`` (normally ``state.proposal``) and propose the next point.

    Parameters
    ----------
    state
        The state that proposed ``x``.
    x, value, gradient
        The evaluated point, f and grad f there.
    project
        Optional linear projector applied to every proposed step (e.g. onto
        symmetry-allowed directions); the gradient should already lie in its range.

    Returns
    -------
    QuasiNewtonState
        If f rose by more than ``state.noise`` the step is rejected: the state
        keeps its point, learns the curvature of the pair, halves the radius and
        proposes again. Otherwise the point is accepted and the radius adapted to
        rho = actual / predicted change (Nocedal & Wright 2006, Algorithm 4.1).
    """
    x = np.array(x, float).ravel()
    g = np.array(gradient, float).ravel()
    s = x - state.x
    y = g - state.gradient
    hessian, scaled, updated = _bfgs_update(state.hessian, s, y, state.scaled)
    length = float(np.linalg.norm(s))
    actual = float(value) - state.value
    # a rise within the rounding of f itself is no rise (near the minimum the
    # changes of f fall below its last digits while the gradient still steers)
    rejected = bool(actual > state.noise + 8 * np.finfo(float).eps * max(1.0, abs(state.value)))
    if rejected:
        radius = 0.5 * min(state.radius, length) if length > 0 else 0.5 * state.radius
        base_x, base_f, base_g = state.x, state.value, state.gradient
    else:
        rho = actual / state.predicted if state.predicted < 0 else 1.0
        radius = state.radius
        if rho < _SHRINK_BELOW:
            radius = 0.5 * radius
        elif rho > _GROW_ABOVE and length >= 0.99 * state.radius:
            radius = min(2.0 * radius, state.max_radius)
        base_x, base_f, base_g = x, float(value), g
    proposal, predicted = _propose(base_x, base_g, hessian, radius)
    if project is not None:
        proposal = base_x + project(proposal - base_x)
        p = proposal - base_x
        predicted = float(base_g @ p + 0.5 * p @ hessian @ p)
    return replace(state, x=base_x, value=base_f, gradient=base_g, hessian=hessian,
                   radius=radius, proposal=proposal, predicted=predicted,
                   updates=state.updates + updated,
                   rejected=state.rejected + rejected, scaled=scaled)


@dataclass(frozen=True)
class QuasiNewtonResult:
    """Outcome of :func:`minimize`: the best point, its value and gradient, and counts."""

    x: np.ndarray
    value: float
    gradient: np.ndarray
    converged: bool
    evaluations: int
    rejected: int
    message: str


def minimize(fun: Callable[[np.ndarray], tuple[float, np.ndarray]], x0, *,
             gradient_tolerance: float = 1e-6, max_evaluations: int = 500,
             radius: float = 0.2, max_radius: float = 1.0,
             curvature: float = 1.0) -> QuasiNewtonResult:
    """Minimise ``fun(x) -> (f, grad f)`` until ``max |grad f| < gradient_tolerance``.

    The BFGS trust-radius loop of :func:`start_state` and :func:`advance` for a
    callable that is cheap enough to run in one go.
    """
    f, g = fun(np.array(x0, float))
    state = start_state(x0, f, g, radius=radius, max_radius=max_radius, curvature=curvature)
    evaluations = 1
    while np.max(np.abs(state.gradient)) >= gradient_tolerance:
        if evaluations >= max_evaluations:
            return QuasiNewtonResult(state.x, state.value, state.gradient, False, evaluations,
                                     state.rejected, f"no convergence in {evaluations} evaluations")
        x = state.proposal
        f, g = fun(x)
        evaluations += 1
        state = advance(state, x, f, g)
    return QuasiNewtonResult(state.x, state.value, state.gradient, True, evaluations,
                             state.rejected, f"converged in {evaluations} evaluations")
