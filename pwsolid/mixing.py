"""Density mixing: Pulay (DIIS) extrapolation of SCF residuals, Kerker filter (layer 1).

The mixer sees flat real vectors only: the input density of an SCF step and
the output density computed from its potential. An optional preconditioner acts
on residuals (a Kerker filter from :func:`kerker_preconditioner`, for instance)
and an optional metric weights the inner product used to minimise the residual.
"""

from __future__ import annotations

import math
from collections import deque
from typing import Callable

import numpy as np

__all__ = ["PulayMixer", "LinearMixer", "kerker_preconditioner", "thomas_fermi_wavevector",
           "model_dielectric_function", "model_dielectric_preconditioner"]


def thomas_fermi_wavevector(mean_density: float) -> float:
    """Thomas-Fermi screening wave vector (1/bohr) of a uniform gas of density n (1/bohr^3).

    Notes
    -----
    k_TF^2 = 4 pi dn/dmu = 4 pi g(E_F) with g(E_F) = k_F / pi^2 (both spins,
    Hartree units) and k_F = (3 pi^2 n)^(1/3), so

        k_TF^2 = 4 k_F / pi = 4 (3 n / pi)^(1/3),

    i.e. k_TF / k_F = 0.815 sqrt(r_s). Used as the automatic screening wave
    vector of the Kerker filter: it is the screening length of the valence
    electrons treated as a free-electron gas of the mean density.

    References
    ----------
    N. W. Ashcroft and N. D. Mermin, Solid State Physics (1976), ch. 17,
    Eqs. (17.50)-(17.55) (from memory).
    """
    n = float(mean_density)
    if not (math.isfinite(n) and n > 0.0):
        raise ValueError(f"the mean density must be positive (got {mean_density!r})")
    return math.sqrt(4.0 * (3.0 * n / math.pi) ** (1.0 / 3.0))


def kerker_preconditioner(g2: np.ndarray, screening_wavevector: float) -> Callable[[np.ndarray], np.ndarray]:
    """Kerker filter on density residuals given on a real-space grid.

    Parameters
    ----------
    g2 : (n1, n2, n3) float, 1/bohr^2
        |G|^2 of every grid point in numpy FFT order (G = 0 at index (0, 0, 0)).
    screening_wavevector : float, 1/bohr
        q0 > 0, e.g. :func:`thomas_fermi_wavevector` of the mean valence density.

    Returns
    -------
    callable
        ``P(r)`` for a flat real residual of ``n1 * n2 * n3`` values (or one of
        the grid shape); returns a real array of the same shape.

    Notes
    -----
    In reciprocal space ``P r(G) = G^2 / (G^2 + q0^2) r(G)``. Long-wavelength
    components, which drive charge sloshing in metals and large cells because
    the Hartree response grows as 4 pi / G^2, are damped; short-wavelength ones
    pass nearly unchanged. The factor is 0 at G = 0: the filtered residual has
    zero mean, so a mixed density ``x_in + w P r`` keeps the electron count of
    the input density (and a Pulay combination of inputs with coefficients
    summing to 1 keeps it too). |G|^2 is even in G, so the filter maps real
    residuals to real ones and the imaginary part left by rounding is dropped;
    on the Nyquist planes of an even grid, where the stored -G/2 has no +G/2
    partner, taking the real part applies the mean of the two factors.

    References
    ----------
    G. P. Kerker, Phys. Rev. B 23, 3082 (1981).
    """
    g2 = np.asarray(g2, float)
    q0 = float(screening_wavevector)
    if g2.ndim != 3:
        raise ValueError(f"g2 must be a 3-d grid, got shape {g2.shape}")
    if not (math.isfinite(q0) and q0 > 0.0):
        raise ValueError(f"the screening wave vector must be positive (got {screening_wavevector!r})")
    factor = g2 / (g2 + q0 * q0)
    factor[0, 0, 0] = 0.0
    return _reciprocal_filter(factor)


def _screening_radius(dielectric_constant: float, q0: float) -> float:
    """R_s (bohr) with sinh(q0 R_s) / (q0 R_s) = eps0, by bisection on x = q0 R_s."""
    lo, hi = 1e-12, 1.0
    while math.sinh(hi) / hi < dielectric_constant:
        hi *= 2.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if math.sinh(mid) / mid < dielectric_constant:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi) / q0


def model_dielectric_function(q: np.ndarray, dielectric_constant: float,
                              screening_wavevector: float) -> np.ndarray:
    """Resta's model dielectric function of a semiconductor, eps(q) (dimensionless).

    Parameters
    ----------
    q : array, 1/bohr (q >= 0)
    dielectric_constant : float
        eps0 > 1, the static electronic dielectric constant (silicon: about 12).
    screening_wavevector : float, 1/bohr
        q0 > 0, the Thomas-Fermi wave vector of the valence electrons
        (:func:`thomas_fermi_wavevector`).

    Notes
    -----
    With the screening radius R_s fixed by sinh(q0 R_s) / (q0 R_s) = eps0,

        eps(q) = (q0^2 + q^2) / (q0^2 sin(q R_s) / (eps0 q R_s) + q^2)   for q R_s < pi,
        eps(q) = 1 + q0^2 / q^2                                            beyond,

    which tends to eps0 at q -> 0 and joins the Thomas-Fermi form continuously at
    q R_s = pi, where the sine vanishes: the valence charge screens like a free-electron
    gas within R_s of a test charge and not at all beyond.

    References
    ----------
    R. Resta, Phys. Rev. B 16, 2717 (1977) (from memory).
    """
    eps0, q0 = float(dielectric_constant), float(screening_wavevector)
    if not (math.isfinite(eps0) and eps0 > 1.0):
        raise ValueError(f"the dielectric constant must exceed 1 (got {dielectric_constant!r})")
    if not (math.isfinite(q0) and q0 > 0.0):
        raise ValueError(f"the screening wave vector must be positive (got {screening_wavevector!r})")
    r_s = _screening_radius(eps0, q0)
    q = np.asarray(q, float)
    x = q * r_s
    inside = x < math.pi
    # sin(x)/x = np.sinc(x / pi); at q = 0 the ratio is eps0 exactly
    screened = q0 * q0 * np.sinc(x / math.pi) / eps0
    thomas_fermi = 1.0 + q0 * q0 / np.where(q > 0, q * q, 1.0)
    return np.where(inside, (q0 * q0 + q * q) / (screened + q * q), thomas_fermi)


def model_dielectric_preconditioner(g2: np.ndarray, dielectric_constant: float,
                                    screening_wavevector: float) -> Callable[[np.ndarray], np.ndarray]:
    """Density residuals divided by Resta's model dielectric function, 1/eps(|G|).

    The same calling convention as :func:`kerker_preconditioner` (flat real residuals
    on the grid of ``g2``). For an insulator the Kerker factor G^2 / (G^2 + q0^2) = 1 /
    eps_TF(G) tends to 0 at small G, where the true response tends to 1 / eps0: the
    model keeps that long-wavelength response, so one mixing step with weight 1 removes
    most of the linear part of the residual. G = 0 is zeroed (the charge is kept).

    References
    ----------
    R. Resta, Phys. Rev. B 16, 2717 (1977) (the model); G. P. Kerker, Phys. Rev. B 23,
    3082 (1981) (preconditioning by a model dielectric function).
    """
    g2 = np.asarray(g2, float)
    if g2.ndim != 3:
        raise ValueError(f"g2 must be a 3-d grid, got shape {g2.shape}")
    factor = 1.0 / model_dielectric_function(np.sqrt(g2), dielectric_constant,
                                             screening_wavevector)
    factor[0, 0, 0] = 0.0
    return _reciprocal_filter(factor)


def _reciprocal_filter(factor: np.ndarray) -> Callable[[np.ndarray], np.ndarray]:
    """``P(r)``: a flat (or grid-shaped) real residual times ``factor`` in reciprocal space."""
    shape, size = factor.shape, factor.size

    def precondition(residual: np.ndarray) -> np.ndarray:
        r = np.asarray(residual, float)
        if r.size != size:
            raise ValueError(f"residual of {r.size} values for a grid of {size} points")
        out = np.fft.ifftn(np.fft.fftn(r.reshape(shape)) * factor)
        return np.ascontiguousarray(out.real).reshape(r.shape)

    return precondition


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
    The constrained minimisation is solved as a least-squares problem in
    residual differences (see ``_coefficients``), which stays accurate when the
    residuals span many orders of magnitude. With a Kerker preconditioner the
    mixed density keeps the electron count of the inputs (the filter removes the
    mean of the residual and the coefficients sum to 1).

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

    def history_arrays(self) -> tuple[np.ndarray, np.ndarray]:
        """The stored (inputs, residuals), shape (m, n) each, for checkpoints."""
        if not self._inputs:
            return np.zeros((0, 0)), np.zeros((0, 0))
        return np.array(self._inputs), np.array(self._residuals)

    def restore_history(self, inputs: np.ndarray, residuals: np.ndarray) -> None:
        """Continue from a saved history (the most recent rows last)."""
        self.reset()
        for x, r in zip(inputs, residuals):
            self._inputs.append(np.array(x, float))
            self._residuals.append(np.array(r, float))

    def _coefficients(self, res: np.ndarray) -> np.ndarray:
        """Pulay coefficients (summing to 1) for residuals res (m, n), newest last.

        Written as c = e_last + (gamma, -sum gamma) so the constraint holds
        exactly, the unconstrained least-squares problem
        min || R_last + sum_j gamma_j (R_j - R_last) || is solved with columns
        scaled to unit norm and an SVD cut-off (singular values below 1e-10 of
        the largest dropped). Unlike the normal equations of the bordered
        system, this does not square the condition number, so the mixer keeps
        converging when the newest residual is 1e-10 of the oldest.
        """
        m = len(res)
        c = np.zeros(m)
        c[-1] = 1.0
        if m == 1:
            return c
        last = res[-1]
        diff = res[:-1] - last                       # (m - 1, n)
        if self.metric is not None:
            # <u, M v> = u . (M v) for a symmetric positive metric: solve the
            # (column-scaled) normal equations by a cut-off eigen-decomposition.
            m_diff = np.array([self.metric(v) for v in diff])
            gram = 0.5 * (diff @ m_diff.T + m_diff @ diff.T)
            rhs = -(m_diff @ last)
            scale = np.sqrt(np.clip(np.diag(gram), 0.0, None))
            scale[scale == 0.0] = 1.0
            vals, vecs = np.linalg.eigh(gram / np.outer(scale, scale))
            keep = vals > 1e-14 * max(vals.max(), 0.0)
            if not np.any(keep):
                return c
            proj = vecs[:, keep].T @ (rhs / scale)
            gamma = (vecs[:, keep] @ (proj / vals[keep])) / scale
        else:
            norms = np.linalg.norm(diff, axis=1)
            norms[norms == 0.0] = 1.0
            gamma, *_ = np.linalg.lstsq((diff / norms[:, None]).T, -last, rcond=1e-10)
            gamma = gamma / norms
        if not np.all(np.isfinite(gamma)):
            return c
        c[:-1] = gamma
        c[-1] = 1.0 - gamma.sum()
        return c

    def mix(self, x_in: np.ndarray, x_out: np.ndarray) -> np.ndarray:
        """Return the next input vector from this step's input and output."""
        self._inputs.append(np.array(x_in, dtype=float, copy=True))
        self._residuals.append(np.asarray(x_out, dtype=float) - x_in)
        res = np.array(self._residuals)
        c = self._coefficients(res)
        x_opt = c @ np.array(self._inputs)
        r_opt = c @ res
        if self.preconditioner is not None:
            r_opt = self.preconditioner(r_opt)
        return x_opt + self.weight * r_opt
