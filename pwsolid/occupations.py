"""Occupation numbers of Kohn-Sham states: Aufbau filling and smearing (layer 1).

Two ways to fill bands live here.

* :func:`aufbau_occupations` gives fixed, integer occupations: every k-point
  carries the same number of doubly occupied bands, which is right for
  insulators and semiconductors.
* :func:`smeared_occupations` fills states across all k-points around a common
  Fermi level found by :func:`fermi_level`, with one of the smearing schemes of
  :data:`SMEARING_SCHEMES` (Fermi-Dirac, Gaussian, Methfessel-Paxton, cold
  smearing), or with a sharp step when the width is zero.

Conventions
-----------
Energies are in hartree. For a state of energy ``e`` and a smearing width
``sigma`` the scaled energy is ``x = (e - mu) / sigma``. A scheme gives, per spin,

* the occupation function ``f(x)``, going from 1 at ``x -> -inf`` to 0 at
  ``x -> +inf``;
* its delta-function approximant ``d(x) = -df/dx``, normalised to 1;
* the entropy function ``s(x) = integral_x^inf t d(t) dt``, so that
  ``ds/dx = -x d(x)`` (for Fermi-Dirac this is ``-[f ln f + (1-f) ln(1-f)]``).

Occupations of states include the spin degeneracy: ``occ = 2 f(x)``, and the
electron count per cell is ``N = sum_k w_k sum_n occ_nk`` with k-point weights
summing to 1. The dimensionless entropy is ``S = sum_k w_k sum_n 2 s(x_nk)`` and
the free energy that the smeared occupations make stationary is

    F = E - sigma * S,

so the *entropy term* that results carry is ``-sigma * S`` (hartree; negative
for Fermi-Dirac and Gaussian smearing, of either sign for the others). With
this definition ``dF/dsigma = -S`` exactly at a fixed electron count, which is
what the zero-width estimates below rest on.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar, Protocol, runtime_checkable

import numpy as np
from scipy.optimize import brentq
from scipy.special import erfc, expit

from .errors import InputError

__all__ = [
    "aufbau_occupations", "BandEdges", "band_edges",
    "SmearingScheme", "FermiDirac", "Gaussian", "MethfesselPaxton", "ColdSmearing",
    "SMEARING_SCHEMES", "smearing_scheme", "fermi_level", "smeared_occupations",
    "SmearingResult", "highest_band_charge", "TOP_BAND_CHARGE_LIMIT",
]

_SQRT_PI = math.sqrt(math.pi)
_SQRT_2PI = math.sqrt(2.0 * math.pi)
_INV_SQRT2 = 1.0 / math.sqrt(2.0)
# exp(-x^2) is exactly 0.0 in double precision for |x| > 27.3; clipping the
# argument of the Gaussian-times-polynomial parts there keeps Hermite
# polynomials of high order finite (no inf * 0) without changing any value.
_GAUSS_CLIP = 28.0
# Degenerate states closer than this (Ha) share a partial occupation equally in
# the zero-width filling, so symmetry-related states stay equivalent.
_DEGENERACY_TOL = 1e-9
#: Charge (electrons per cell) in the highest computed band above which a
#: calculation should warn that more bands are needed.
TOP_BAND_CHARGE_LIMIT = 1e-4


# --------------------------------------------------------------------------- Aufbau

def aufbau_occupations(n_kpoints: int, n_bands: int, n_electrons: float) -> np.ndarray:
    """Occupations (n_kpoints, n_bands): 2 for the lowest N/2 bands at every k, else 0.

    Raises
    ------
    InputError
        When the electron count is odd or non-integer (no insulating filling
        exists without partial occupations), or there are too few bands.
    """
    n_occ = n_electrons / 2
    if abs(n_occ - round(n_occ)) > 1e-8:
        raise InputError(
            f"{n_electrons:g} valence electrons per cell cannot fill bands completely; "
            "an insulating (Aufbau) filling needs an even electron count per cell "
            "(for a metal set occupations.smearing, e.g. \"cold\")", key="crystal", value=n_electrons)
    n_occ = int(round(n_occ))
    if n_occ > n_bands:
        raise ValueError("fewer bands than occupied states")
    occ = np.zeros((n_kpoints, n_bands))
    occ[:, :n_occ] = 2.0
    return occ


@dataclass(frozen=True)
class BandEdges:
    """Highest occupied and lowest unoccupied levels (Ha) and where they sit."""

    highest_occupied: float
    lowest_unoccupied: float | None
    highest_occupied_k: int
    lowest_unoccupied_k: int | None

    @property
    def gap(self) -> float | None:
        if self.lowest_unoccupied is None:
            return None
        return self.lowest_unoccupied - self.highest_occupied

    @property
    def is_direct(self) -> bool | None:
        if self.lowest_unoccupied_k is None:
            return None
        return self.lowest_unoccupied_k == self.highest_occupied_k


def band_edges(eigenvalues: np.ndarray, occupations: np.ndarray) -> BandEdges:
    """Band edges from eigenvalues and occupations, both (n_kpoints, n_bands)."""
    eig = np.asarray(eigenvalues)
    occ = np.asarray(occupations) > 1e-8
    occupied = np.where(occ, eig, -np.inf)
    empty = np.where(~occ, eig, np.inf)
    kh = int(np.argmax(occupied.max(axis=1)))
    homo = float(occupied.max())
    if np.all(occ):
        return BandEdges(homo, None, kh, None)
    kl = int(np.argmin(empty.min(axis=1)))
    return BandEdges(homo, float(empty.min()), kh, kl)


# --------------------------------------------------------------------------- schemes

@runtime_checkable
class SmearingScheme(Protocol):
    """The shape of a smearing scheme (functions of the scaled energy x, per spin).

    ``energy_error_order`` is the power m of the leading width dependence
    ``F(sigma) - E(0) ~ c sigma^m`` for a density of states smooth at the Fermi
    level; ``monotone`` says whether ``f`` decreases monotonically (then the
    electron count is monotonic in the Fermi level).
    """

    name: str
    monotone: bool
    energy_error_order: int

    def occupation(self, x: np.ndarray) -> np.ndarray: ...

    def delta(self, x: np.ndarray) -> np.ndarray: ...

    def entropy(self, x: np.ndarray) -> np.ndarray: ...


class _SchemeBase:
    """Shared zero-width estimate; subclasses set ``energy_error_order``."""

    energy_error_order: int = 2

    def zero_width_energy(self, energy: float, free_energy: float) -> float:
        """Estimate E(sigma -> 0) from the smeared energy E and free energy F.

        Notes
        -----
        ``dF/dsigma = -S`` holds exactly at fixed electron count, so
        ``E = F + sigma S = F - sigma dF/dsigma``. If ``F = E0 + c sigma^m`` to
        leading order, then ``E = E0 + (1 - m) c sigma^m`` and

            E0 = F + (E - F) / m = ((m - 1) F + E) / m

        cancels the leading term. For m = 2 (Fermi-Dirac, Gaussian) this is the
        familiar ``(E + F) / 2`` (M. J. Gillan, J. Phys.: Condens. Matter 1, 689
        (1989), from memory). For Methfessel-Paxton order N >= 1 (m = 2N + 2)
        and cold smearing (m = 3), common practice takes E0 = F; our estimate
        is F plus the small remaining fraction 1/m of sigma*S, derived here from
        the moments of the delta approximant (see each scheme) and checked on
        free-electron bands in tests/validation/test_smearing.py.
        """
        m = self.energy_error_order
        return float(free_energy + (energy - free_energy) / m)


def _clipped_gaussian(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    xc = np.clip(x, -_GAUSS_CLIP, _GAUSS_CLIP)
    with np.errstate(under="ignore"):
        return xc, np.exp(-xc * xc)


@dataclass(frozen=True)
class FermiDirac(_SchemeBase):
    """Fermi-Dirac smearing: f = 1 / (1 + exp(x)), sigma = k_B T.

    The entropy ``s = -[f ln f + (1 - f) ln(1 - f)]`` is the physical
    electronic entropy (in units of k_B). The delta approximant has a non-zero
    second moment (pi^2 / 3), so E and F deviate from E(0) as sigma^2.
    """

    name: ClassVar[str] = "fermi-dirac"
    monotone: ClassVar[bool] = True
    energy_error_order: ClassVar[int] = 2

    def occupation(self, x):
        return expit(-np.asarray(x, float))

    def delta(self, x):
        x = np.asarray(x, float)
        return expit(x) * expit(-x)

    def entropy(self, x):
        x = np.asarray(x, float)
        # ln f = -log(1 + e^x), ln(1 - f) = -log(1 + e^-x): written with
        # logaddexp so that no exponential overflows and 0 * log 0 never occurs.
        with np.errstate(under="ignore"):
            return expit(-x) * np.logaddexp(0.0, x) + expit(x) * np.logaddexp(0.0, -x)


@dataclass(frozen=True)
class Gaussian(_SchemeBase):
    """Gaussian smearing: d = exp(-x^2) / sqrt(pi), f = erfc(x) / 2.

    The entropy function is ``s = exp(-x^2) / (2 sqrt(pi))``; the second moment
    of d is 1/2, so E and F deviate from E(0) as sigma^2 (m = 2).
    Identical to Methfessel-Paxton of order 0.
    """

    name: ClassVar[str] = "gaussian"
    monotone: ClassVar[bool] = True
    energy_error_order: ClassVar[int] = 2

    def occupation(self, x):
        return 0.5 * erfc(np.asarray(x, float))

    def delta(self, x):
        _, g = _clipped_gaussian(np.asarray(x, float))
        return g / _SQRT_PI

    def entropy(self, x):
        _, g = _clipped_gaussian(np.asarray(x, float))
        return g / (2.0 * _SQRT_PI)


def _hermite_table(x: np.ndarray, n_max: int) -> list[np.ndarray]:
    """Physicists' Hermite polynomials H_0 .. H_n_max at x (three-term recurrence)."""
    table = [np.ones_like(x)]
    if n_max >= 1:
        table.append(2.0 * x)
    for n in range(1, n_max):
        table.append(2.0 * x * table[n] - 2.0 * n * table[n - 1])
    return table


@dataclass(frozen=True)
class MethfesselPaxton(_SchemeBase):
    """Methfessel-Paxton smearing of order N >= 0 (order 0 is Gaussian smearing).

    Notes
    -----
    With physicists' Hermite polynomials H_n and
    ``A_n = (-1)^n / (n! 4^n sqrt(pi))``:

        d_N(x) = sum_{n=0}^{N} A_n H_2n(x) exp(-x^2)
        f_N(x) = erfc(x)/2 + sum_{n=1}^{N} A_n H_{2n-1}(x) exp(-x^2)
        s_N(x) = A_N H_2N(x) exp(-x^2) / 2

    (s_N follows from ds/dx = -x d with x H_2n = H_{2n+1}/2 + 2n H_{2n-1}; the
    sum telescopes.) The even moments 2..2N of d_N vanish, so for a smooth
    density of states E and F deviate from E(0) as sigma^(2N+2).

    For N >= 1 the occupations are not monotonic and leave [0, 1] slightly
    (order 1: about -0.035 .. 1.035 per spin; larger orders oscillate more), so
    per-state occupations lie a little outside [0, 2]; the electron count may
    then be non-monotonic in the Fermi level (see :func:`fermi_level`).

    References
    ----------
    M. Methfessel and A. T. Paxton, Phys. Rev. B 40, 3616 (1989).
    """

    order: int = 1
    name: ClassVar[str] = "methfessel-paxton"

    def __post_init__(self):
        order = self.order
        integral = (isinstance(order, (int, np.integer)) and not isinstance(order, bool)) or (
            isinstance(order, float) and order.is_integer())
        if not (integral and 0 <= order <= 30):
            raise InputError("the Methfessel-Paxton order must be an integer from 0 to 30",
                             key="occupations.order", value=order)
        object.__setattr__(self, "order", int(order))

    @property
    def monotone(self) -> bool:
        return self.order == 0

    @property
    def energy_error_order(self) -> int:
        return 2 * int(self.order) + 2

    def _coefficient(self, n: int) -> float:
        return (-1.0) ** n / (math.factorial(n) * 4.0 ** n * _SQRT_PI)

    def occupation(self, x):
        x = np.asarray(x, float)
        out = 0.5 * erfc(x)
        if self.order == 0:
            return out
        xc, g = _clipped_gaussian(x)
        h = _hermite_table(xc, 2 * self.order)
        poly = sum(self._coefficient(n) * h[2 * n - 1] for n in range(1, self.order + 1))
        return out + poly * g

    def delta(self, x):
        xc, g = _clipped_gaussian(np.asarray(x, float))
        h = _hermite_table(xc, 2 * self.order)
        poly = sum(self._coefficient(n) * h[2 * n] for n in range(self.order + 1))
        return poly * g

    def entropy(self, x):
        xc, g = _clipped_gaussian(np.asarray(x, float))
        h = _hermite_table(xc, 2 * self.order)
        return 0.5 * self._coefficient(self.order) * h[2 * self.order] * g


@dataclass(frozen=True)
class ColdSmearing(_SchemeBase):
    """Marzari-Vanderbilt cold smearing.

    Notes
    -----
    With ``y = x + 1/sqrt(2)`` (our x = (e - mu)/sigma; the paper writes the
    same functions of (mu - e)/sigma):

        d(x) = exp(-y^2) (1 + sqrt(2) y) / sqrt(pi)
        f(x) = erfc(y)/2 + exp(-y^2) / sqrt(2 pi)
        s(x) = y exp(-y^2) / sqrt(2 pi)

    Both terms of f are positive, so no occupation is negative; f overshoots 1
    on the occupied side (maximum 1.0833 per spin at y = -1/sqrt(2)), so
    per-state occupations lie in [0, 2.17]. The first and second moments of d
    vanish (the second is what removes the sigma^2 term), the third is
    1/sqrt(2), so for a smooth density of states E and F deviate from E(0) as
    sigma^3 (m = 3), F twice as little as E.

    References
    ----------
    N. Marzari, D. Vanderbilt, A. De Vita and M. C. Payne, Phys. Rev. Lett. 82,
    3296 (1999).
    """

    name: ClassVar[str] = "cold"
    monotone: ClassVar[bool] = False
    energy_error_order: ClassVar[int] = 3

    def occupation(self, x):
        y = np.asarray(x, float) + _INV_SQRT2
        _, g = _clipped_gaussian(y)
        return 0.5 * erfc(y) + g / _SQRT_2PI

    def delta(self, x):
        y = np.asarray(x, float) + _INV_SQRT2
        yc, g = _clipped_gaussian(y)
        return g * (1.0 + math.sqrt(2.0) * yc) / _SQRT_PI

    def entropy(self, x):
        y = np.asarray(x, float) + _INV_SQRT2
        yc, g = _clipped_gaussian(y)
        return yc * g / _SQRT_2PI


#: Smearing schemes by name (Methfessel-Paxton at its usual order 1; other
#: orders through :func:`smearing_scheme` or ``MethfesselPaxton(order)``).
SMEARING_SCHEMES: dict[str, SmearingScheme] = {
    "fermi-dirac": FermiDirac(),
    "gaussian": Gaussian(),
    "methfessel-paxton": MethfesselPaxton(1),
    "cold": ColdSmearing(),
}


def smearing_scheme(scheme: str | SmearingScheme, order: int | None = None) -> SmearingScheme:
    """Resolve a scheme given by name (case-insensitive) or as an object of the same shape.

    Parameters
    ----------
    scheme
        A key of :data:`SMEARING_SCHEMES` or an object with ``occupation``,
        ``delta`` and ``entropy`` methods (see :class:`SmearingScheme`).
    order
        Methfessel-Paxton order (only with ``"methfessel-paxton"``).

    Raises
    ------
    InputError
        Unknown name (the message lists the valid ones), or an order given to a
        scheme that has none.
    """
    if isinstance(scheme, str):
        key = scheme.strip().lower().replace("_", "-").replace(" ", "-")
        if key not in SMEARING_SCHEMES:
            raise InputError("unknown smearing scheme; valid names are "
                             + ", ".join(f"'{n}'" for n in SMEARING_SCHEMES),
                             key="occupations.smearing", value=scheme)
        if order is not None:
            if key != "methfessel-paxton":
                raise InputError(f"the '{key}' smearing takes no order",
                                 key="occupations.order", value=order)
            return MethfesselPaxton(order)
        return SMEARING_SCHEMES[key]
    if all(callable(getattr(scheme, m, None)) for m in ("occupation", "delta", "entropy")):
        if order is not None:
            raise InputError("an order goes with a scheme name, not a scheme object",
                             key="occupations.order", value=order)
        return scheme
    raise InputError("a smearing scheme is a name ("
                     + ", ".join(f"'{n}'" for n in SMEARING_SCHEMES)
                     + ") or an object with occupation, delta and entropy methods",
                     key="occupations.smearing", value=scheme)


# --------------------------------------------------------------------------- Fermi level

def _check_bands(eigenvalues, weights, n_electrons):
    eig = np.ascontiguousarray(eigenvalues, dtype=float)   # strided views are much slower
    if eig.ndim != 2:
        raise ValueError(f"eigenvalues must be (n_kpoints, n_bands), got shape {eig.shape}")
    w = np.asarray(weights, float).reshape(-1)
    if w.shape != (eig.shape[0],):
        raise ValueError(f"{w.size} weights for {eig.shape[0]} k-points")
    if np.any(w < 0) or abs(w.sum() - 1.0) > 1e-8:
        raise ValueError(f"k-point weights must be non-negative and sum to 1 (sum {w.sum():.12g})")
    n = float(n_electrons)
    capacity = 2.0 * eig.shape[1]
    if not 0.0 < n <= capacity * (1 + 1e-12):
        raise ValueError(f"{n:g} electrons per cell do not fit in {eig.shape[1]} bands "
                         "(need 0 < electrons <= 2 * bands)")
    n = min(n, capacity)      # a count above capacity by rounding only: all bands full
    if not np.all(np.isfinite(eig)):
        raise ValueError("eigenvalues must be finite")
    return eig, w, n


def _check_width(width) -> float:
    try:
        sigma = float(width)
    except (TypeError, ValueError):
        raise InputError("the smearing width must be a number of hartree >= 0",
                         key="occupations.width", value=width) from None
    if not (math.isfinite(sigma) and sigma >= 0.0):
        raise InputError("the smearing width must be finite and >= 0 Ha",
                         key="occupations.width", value=width)
    return sigma


def _count(mu, eig, w, scheme, sigma) -> float:
    occ = scheme.occupation((eig - mu) / sigma)
    return 2.0 * float(w @ occ.sum(axis=1))


def _step_filling(eig, w, n) -> tuple[np.ndarray, float]:
    """Zero-width filling of the lowest states over all k: occupations and Fermi level."""
    flat = eig.ravel()
    cap = np.repeat(2.0 * w, eig.shape[1])
    order = np.argsort(flat, kind="stable")
    cum = np.cumsum(cap[order])
    tol = 1e-12 * max(1.0, n)
    i = min(int(np.searchsorted(cum, n - tol)), flat.size - 1)
    e_top = flat[order[i]]
    group = np.abs(flat - e_top) <= _DEGENERACY_TOL
    below = flat < e_top - _DEGENERACY_TOL
    occ = np.where(below, 2.0, 0.0)
    fraction = (n - cap[below].sum()) / cap[group].sum()
    if fraction > 1.0 - 1e-12:        # rounding of the cumulative sum: a filled level
        fraction = 1.0
    fraction = max(fraction, 0.0)
    occ[group] = 2.0 * fraction
    above = flat[flat > e_top + _DEGENERACY_TOL]
    if fraction > 1.0 - 1e-12 and above.size:
        mu = 0.5 * (e_top + above.min())      # a filled shell: mid-gap
    else:
        mu = e_top
    return occ.reshape(eig.shape), float(mu)


def _nearest_root(func, start: float, step: float, limit: float, tol: float) -> float:
    """Root of func nearest to ``start``: grow a bracket both ways, then Brent, then bisection."""
    f0 = func(start)
    if abs(f0) <= tol:
        return start
    inner = {-1: (start, f0), +1: (start, f0)}
    bracket = None
    h = step
    while bracket is None:
        for side in ((+1, -1) if f0 < 0 else (-1, +1)):   # try the monotone direction first
            x_in, f_in = inner[side]
            x_out = start + side * h
            f_out = func(x_out)
            if f_out == 0.0 or np.sign(f_out) != np.sign(f_in):
                bracket = (min(x_in, x_out), max(x_in, x_out))
                break
            inner[side] = (x_out, f_out)
        if h > limit:
            raise RuntimeError("no Fermi level found")    # cannot happen for 0 < N <= capacity
        h *= 2.0
    a, b = bracket
    fa, fb = func(a), func(b)
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    mu = brentq(func, a, b, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
    fmu = func(mu)
    if abs(fmu) <= tol:
        return mu
    # Bisection polish down to neighbouring floats; keep the best point seen.
    best = (abs(fmu), mu)
    if np.sign(fmu) == np.sign(fa):
        a, fa = mu, fmu
    else:
        b, fb = mu, fmu
    for _ in range(200):
        m = 0.5 * (a + b)
        if m <= a or m >= b:
            break
        fm = func(m)
        best = min(best, (abs(fm), m))
        if abs(fm) <= tol:
            break
        if np.sign(fm) == np.sign(fa):
            a, fa = m, fm
        else:
            b, fb = m, fm
    return best[1]


def fermi_level(eigenvalues: np.ndarray, weights: np.ndarray, n_electrons: float,
                scheme: str | SmearingScheme = "gaussian", width: float = 0.0) -> float:
    """Fermi level (Ha) at which the smeared bands hold ``n_electrons`` per cell.

    Parameters
    ----------
    eigenvalues : (n_kpoints, n_bands) float, Ha
    weights : (n_kpoints,) float, summing to 1
    n_electrons
        Electrons per cell, 0 < n <= 2 n_bands.
    scheme
        Name in :data:`SMEARING_SCHEMES` or a scheme object.
    width
        Smearing width sigma (Ha). Zero gives the sharp filling of the lowest
        states across all k-points (see :func:`smeared_occupations`).

    Notes
    -----
    The count N(mu) = sum_k w_k sum_n 2 f((e_nk - mu)/sigma) is matched by
    growing a bracket around a first guess until N - n changes sign, Brent's
    method inside it, and a bisection polish to neighbouring floating-point
    numbers, so that the count is reproduced to 1e-12 (or to dN/dmu times the
    float spacing of mu, if that is larger, for extremely narrow widths).

    Schemes with non-monotonic occupations (Methfessel-Paxton N >= 1, cold) can
    give a non-monotonic N(mu) with several roots. We take the root nearest to
    the Gaussian Fermi level of the same width (unique, since Gaussian N(mu) is
    monotonic), reached by bracketing outwards from it; this is the root that
    continues smoothly from the monotone scheme and the one a sharp filling
    would give as sigma -> 0.
    """
    eig, w, n = _check_bands(eigenvalues, weights, n_electrons)
    sigma = _check_width(width)
    if sigma == 0.0:
        return _step_filling(eig, w, n)[1]
    return _fermi_level(eig, w, n, smearing_scheme(scheme), sigma)


def _fermi_level(eig, w, n, scheme, sigma) -> float:
    tol = 1e-12 * max(1.0, n) * 0.1
    guess = _step_filling(eig, w, n)[1]
    span = float(eig.max() - eig.min()) + 100.0 * sigma
    if not getattr(scheme, "monotone", False):
        gauss = SMEARING_SCHEMES["gaussian"]
        guess = _nearest_root(lambda mu: _count(mu, eig, w, gauss, sigma) - n,
                              guess, sigma, span, tol)
    return float(_nearest_root(lambda mu: _count(mu, eig, w, scheme, sigma) - n,
                               guess, 0.25 * sigma, span, tol))


# --------------------------------------------------------------------------- results

@dataclass(frozen=True, eq=False)
class SmearingResult:
    """Occupations around a common Fermi level.

    Attributes
    ----------
    occupations : (n_kpoints, n_bands) float
        Electrons per state including spin (0..2 for Fermi-Dirac, Gaussian and
        zero width; slightly outside for Methfessel-Paxton N >= 1 and cold
        smearing, see those classes).
    fermi_level : float, Ha
    entropy_term : float, Ha
        ``-sigma * S``; the free energy is ``F = E + entropy_term``.
    entropy : float
        Dimensionless S = sum_k w_k sum_n 2 s(x_nk).
    width : float, Ha
    scheme : SmearingScheme or None (zero width)
    electron_count : float
        sum_k w_k sum_n occupations, as reproduced.
    """

    occupations: np.ndarray
    fermi_level: float
    entropy_term: float
    entropy: float
    width: float
    scheme: SmearingScheme | None
    electron_count: float

    def free_energy(self, energy: float) -> float:
        """F = E - sigma S for the total energy E computed with these occupations."""
        return float(energy + self.entropy_term)

    def zero_width_energy(self, energy: float) -> float:
        """Estimate of the energy at zero width from E computed with these occupations.

        Uses the scheme's ``zero_width_energy(E, F)`` (see
        ``_SchemeBase.zero_width_energy`` for the formula and its sources);
        at zero width it is E itself.
        """
        if self.scheme is None or self.width == 0.0:
            return float(energy)
        estimate = getattr(self.scheme, "zero_width_energy", None)
        if estimate is None:        # a user scheme without its own estimate: (E + F) / 2
            return float(energy + 0.5 * self.entropy_term)
        return float(estimate(energy, self.free_energy(energy)))


def smeared_occupations(eigenvalues: np.ndarray, weights: np.ndarray, n_electrons: float,
                        scheme: str | SmearingScheme = "gaussian",
                        width: float = 0.0) -> SmearingResult:
    """Occupations, Fermi level and entropy term for smeared (or sharp) filling.

    Parameters
    ----------
    eigenvalues : (n_kpoints, n_bands) float, Ha
    weights : (n_kpoints,) float, summing to 1
    n_electrons
        Electrons per cell.
    scheme
        Name in :data:`SMEARING_SCHEMES` or a scheme object (ignored at zero width).
    width
        Smearing width sigma (Ha).

    Returns
    -------
    SmearingResult

    Notes
    -----
    At zero width the lowest states across all k-points are filled with 2
    electrons each; states degenerate (within 1e-9 Ha) with the last one share
    the remaining electrons equally. The Fermi level is the energy of that last
    level, or mid-gap when it is exactly filled. This is right for insulators
    (where it reproduces :func:`aufbau_occupations` when the gap is positive)
    and for fixed occupations; for metals it is a sharp, poorly convergent
    filling, which is why smearing exists.
    """
    eig, w, n = _check_bands(eigenvalues, weights, n_electrons)
    sigma = _check_width(width)
    if sigma == 0.0:
        occ, mu = _step_filling(eig, w, n)
        return SmearingResult(occ, mu, 0.0, 0.0, 0.0, None, float(w @ occ.sum(axis=1)))
    sch = smearing_scheme(scheme)
    mu = _fermi_level(eig, w, n, sch, sigma)
    x = (eig - mu) / sigma
    occ = 2.0 * np.asarray(sch.occupation(x), float)
    s = 2.0 * float(w @ np.asarray(sch.entropy(x), float).sum(axis=1))
    return SmearingResult(occ, float(mu), -sigma * s, s, sigma, sch, float(w @ occ.sum(axis=1)))


def highest_band_charge(occupations: np.ndarray, weights: np.ndarray | None = None) -> float:
    """Charge held by the highest computed band (electrons per cell).

    With k-point weights, ``sum_k w_k |occ[k, -1]|``; without, the largest
    ``|occ[k, -1]|`` over k. A calculation should warn when this exceeds
    :data:`TOP_BAND_CHARGE_LIMIT`: the smearing tail reaches beyond the bands
    computed, so more bands are needed.
    """
    top = np.abs(np.asarray(occupations, float)[:, -1])
    if weights is None:
        return float(top.max())
    return float(np.asarray(weights, float) @ top)
