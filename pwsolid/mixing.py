"""Density mixing: Pulay (DIIS) extrapolation of SCF residuals (layer 1).

The mixer sees flat real vectors only: the input density of an SCF step and
the output density computed from its potential. An optional preconditioner acts
on residuals (a Kerker filter, for instance) and an optional metric weights the
inner product used to minimise the residual.
"""

from __future__ import annotations

from collections import deque
from typing import Callable

import numpy as np

__all__ = ["PulayMixer", "LinearMixer"]


class LinearMixer:
    """x_next = x_in + weight * P(x_out - x_in)."""

    def __init__(self, weight: float = 0.3, preconditioner: Callable | None = None):
        self.weight = float(weight)
        self.preconditioner = preconditioner

    def mix(self, x_in: np.ndarray, x_out: np.ndarray) -> np.ndarray:
        r = x_out - x_in
        if self.preconditioner is not None:
            r = self.preconditioner(r)
        return x_in + self.weight * r

    def reset(self) -> None:
        pass


class PulayMixer:
    """Pulay mixing with a bounded history.

    Parameters
    ----------
    weight
        Fraction of the extrapolated residual added to the extrapolated input.
    history
        Number of (input, residual) pairs kept.
    preconditioner
        Callable applied to the extrapolated residual (default: identity).
    metric
        Callable returning M r for the inner product <r_i, M r_j> (default: identity).

    Notes
    -----
    With residuals R_i = x_out,i - x_in,i, the coefficients c minimise
    ||sum_i c_i R_i|| subject to sum_i c_i = 1; then
    x_next = sum_i c_i x_in,i + weight * P(sum_i c_i R_i).

    References
    ----------
    P. Pulay, Chem. Phys. Lett. 73, 393 (1980).
    """

    def __init__(self, weight: float = 0.6, history: int = 8,
                 preconditioner: Callable | None = None, metric: Callable | None = None):
        self.weight = float(weight)
        self.preconditioner = preconditioner
        self.metric = metric
        self._inputs: deque = deque(maxlen=int(history))
        self._residuals: deque = deque(maxlen=int(history))

    def reset(self) -> None:
        self._inputs.clear()
        self._residuals.clear()

    def mix(self, x_in: np.ndarray, x_out: np.ndarray) -> np.ndarray:
        """Return the next input vector from this step's input and output."""
        self._inputs.append(np.array(x_in, dtype=float, copy=True))
        self._residuals.append(np.asarray(x_out, dtype=float) - x_in)
        res = np.array(self._residuals)
        weighted = res if self.metric is None else np.array([self.metric(r) for r in res])
        a = res @ weighted.T
        m = len(res)
        scale = np.max(np.abs(np.diag(a))) or 1.0
        a = a + 1e-12 * scale * np.eye(m)      # keeps nearly dependent histories solvable
        try:
            c = np.linalg.solve(a, np.ones(m))
            c /= c.sum()
        except np.linalg.LinAlgError:
            c = np.zeros(m)
            c[-1] = 1.0
        if not np.all(np.isfinite(c)):
            c = np.zeros(m)
            c[-1] = 1.0
        x_opt = c @ np.array(self._inputs)
        r_opt = c @ res
        if self.preconditioner is not None:
            r_opt = self.preconditioner(r_opt)
        return x_opt + self.weight * r_opt
