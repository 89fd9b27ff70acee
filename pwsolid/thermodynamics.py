"""Harmonic vibrational thermodynamics from phonon energies (layer 1).

Arrays in, arrays out: phonon energies hbar*omega in Ha, temperatures in K,
results per cell (per primitive cell when the modes are a Brillouin-zone
average with weights summing to one). Nothing here knows about crystals or
force constants: :class:`VibrationalSpectrum` holds energies and weights, and
:func:`harmonic_thermodynamics` turns them into the zero-point energy, the
Helmholtz free energy, the internal energy, the entropy and the heat capacity
at constant volume over a list of temperatures. :func:`spectrum_from_dos`
makes a spectrum from a density of states on a grid (trapezoid weights), so the
same formulas serve a DOS.

Notes
-----
With x = hbar w / (k_B T) for each mode of weight g:

* zero-point energy  E_zp = sum g hbar w / 2
* free energy        F = E_zp + k_B T sum g ln(1 - e^-x)
* internal energy    U = E_zp + sum g hbar w / (e^x - 1)
* entropy            S / k_B = sum g [x / (e^x - 1) - ln(1 - e^-x)]
* heat capacity      C_V / k_B = sum g x^2 e^x / (e^x - 1)^2

(the Bose-Einstein occupation of each oscillator; F = U - T S, S = -dF/dT,
C_V = dU/dT = T dS/dT.) They are evaluated with e^-x, expm1 and log so that
neither x -> 0 (classical limit) nor x -> infinity (T -> 0) loses digits or
overflows. Modes at zero energy (the acoustic modes at Gamma) carry no heat
capacity at any finite x and a divergent log: they are left out, as are
imaginary modes (given as negative energies), and both are counted in the result.

References
----------
A. A. Maradudin, E. W. Montroll, G. H. Weiss and I. P. Ipatova, *Theory of
Lattice Dynamics in the Harmonic Approximation*, 2nd ed. (Academic Press,
1971), ch. IV; N. W. Ashcroft and N. D. Mermin, *Solid State Physics*
(1976), ch. 23.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError
from .units import HARTREE_THZ, KELVIN_HA

__all__ = ["VibrationalSpectrum", "HarmonicThermodynamics", "harmonic_thermodynamics",
           "spectrum_from_dos", "check_temperatures", "temperature_grid",
           "SOFT_MODE_THRESHOLD_HA", "DEFAULT_HIGHEST_TEMPERATURE", "DEFAULT_TEMPERATURE_STEP"]

#: Default temperature grid of the commands: 0 K to this, K.
DEFAULT_HIGHEST_TEMPERATURE = 1000.0
#: Default step of that grid, K (fine enough for d ln V / dT by differences).
DEFAULT_TEMPERATURE_STEP = 5.0

#: Modes below this energy (Ha; about 0.002 THz) count as zero (acoustic at Gamma).
SOFT_MODE_THRESHOLD_HA = 3e-7
#: x above which e^-x is zero to double precision (and expm1 would overflow).
_X_MAX = 700.0


def check_temperatures(temperatures, key: str = "temperatures") -> np.ndarray:
    """Temperatures (K) as a finite, non-negative 1-D float array, or an InputError."""
    try:
        t = np.atleast_1d(np.asarray(temperatures, dtype=float))
    except (TypeError, ValueError):
        raise InputError("temperatures must be numbers in kelvin", key=key,
                         value=temperatures) from None
    if t.ndim != 1 or t.size == 0:
        raise InputError("give a list of temperatures in kelvin", key=key,
                         value=np.asarray(temperatures).tolist())
    if not np.all(np.isfinite(t)) or np.any(t < 0):
        raise InputError("temperatures must be finite and not negative (kelvin)", key=key,
                         value=t.tolist())
    return t


def temperature_grid(highest: float = DEFAULT_HIGHEST_TEMPERATURE,
                     step: float = DEFAULT_TEMPERATURE_STEP, *,
                     key: str = "temperatures") -> np.ndarray:
    """0, step, 2 step, ... up to ``highest`` (K, included when it falls on the grid)."""
    ok = all(isinstance(x, (int, float)) and not isinstance(x, bool) and np.isfinite(x)
             for x in (highest, step))
    if not ok or not (0 < step <= highest <= 1e5) or highest / step > 1e5:
        raise InputError("needs 0 < step <= highest temperature <= 100000 K and at most "
                         "100000 steps", key=key, value=[highest, step])
    n = int(math.floor(highest / step + 1e-9))
    return step * np.arange(n + 1, dtype=float)


@dataclass(frozen=True, eq=False)
class VibrationalSpectrum:
    """Phonon energies with their weights.

    Attributes
    ----------
    energies : ndarray (n_q, n_modes), float, Ha
        hbar*omega of every mode at every wave vector; negative numbers stand for
        imaginary frequencies (unstable modes).
    weights : ndarray (n_q,), float
        Weight of each wave vector; a Brillouin-zone average has weights summing
        to 1, so that the thermodynamics is per primitive cell. Any other weights
        (say, 1 for each of N independent oscillators) are taken as given.
    """

    energies: np.ndarray
    weights: np.ndarray

    def __post_init__(self):
        e = np.asarray(self.energies, dtype=float)
        if e.ndim == 1:
            e = e[None, :]
        if e.ndim != 2 or e.size == 0:
            raise InputError("phonon energies must be a (n_q, n_modes) table",
                             key="frequencies", value=list(np.shape(self.energies)))
        w = np.broadcast_to(np.asarray(self.weights, dtype=float), (e.shape[0],)).copy()
        if not (np.all(np.isfinite(e)) and np.all(np.isfinite(w))) or np.any(w < 0):
            raise InputError("phonon energies and weights must be finite, weights not "
                             "negative", key="frequencies")
        object.__setattr__(self, "energies", e)
        object.__setattr__(self, "weights", w)

    @classmethod
    def from_thz(cls, frequencies_thz, weights=1.0) -> "VibrationalSpectrum":
        """A spectrum from ordinary frequencies nu (THz): hbar omega = h nu."""
        return cls(np.asarray(frequencies_thz, dtype=float) / HARTREE_THZ, weights)

    @property
    def mode_weights(self) -> np.ndarray:
        """Weight of every mode, shape of ``energies``."""
        return np.broadcast_to(self.weights[:, None], self.energies.shape)

    @property
    def n_modes(self) -> float:
        """Weighted count of the modes (3 n_atoms for a zone average)."""
        return float(np.sum(self.mode_weights))

    def thermodynamics(self, temperatures, **kwargs) -> "HarmonicThermodynamics":
        """:func:`harmonic_thermodynamics` of this spectrum."""
        return harmonic_thermodynamics(self, temperatures, **kwargs)


@dataclass(frozen=True, eq=False)
class HarmonicThermodynamics:
    """Harmonic thermodynamic functions of one spectrum over temperatures.

    Attributes
    ----------
    temperatures : ndarray (n_T,), K
    zero_point_energy : float, Ha per cell
    free_energy : ndarray (n_T,), Ha per cell
        Helmholtz free energy F = U - T S, with the zero-point energy.
    internal_energy : ndarray (n_T,), Ha per cell
        With the zero-point energy.
    entropy : ndarray (n_T,), k_B per cell
    heat_capacity : ndarray (n_T,), k_B per cell
        At constant volume.
    modes_counted : float
        Weighted number of modes summed.
    zero_modes, imaginary_modes : float
        Weighted number of modes left out: at (near) zero energy, and imaginary.
    messages : tuple of str
    """

    temperatures: np.ndarray
    zero_point_energy: float
    free_energy: np.ndarray
    internal_energy: np.ndarray
    entropy: np.ndarray
    heat_capacity: np.ndarray
    modes_counted: float
    zero_modes: float = 0.0
    imaginary_modes: float = 0.0
    messages: tuple[str, ...] = field(default_factory=tuple)

    @property
    def vibrational_energy(self) -> np.ndarray:
        """U minus the zero-point energy, Ha per cell."""
        return self.internal_energy - self.zero_point_energy


def _mode_terms(energy: np.ndarray, kt: float) -> tuple[np.ndarray, ...]:
    """Per-mode (ln(1 - e^-x), occupation n, x n, C/k_B) at one k_B T > 0."""
    x = np.minimum(energy / kt, _X_MAX)
    ex = np.exp(-x)
    one_minus = -np.expm1(-x)                # 1 - e^-x without cancellation at small x
    log_term = np.log(one_minus)
    occupation = ex / one_minus              # 1 / (e^x - 1)
    heat = x * x * ex / (one_minus * one_minus)
    return log_term, occupation, x * occupation, heat


def harmonic_thermodynamics(spectrum: VibrationalSpectrum, temperatures, *,
                            soft_threshold: float = SOFT_MODE_THRESHOLD_HA
                            ) -> HarmonicThermodynamics:
    """Zero-point energy, F, U, S and C_V of harmonic oscillators over temperatures.

    Parameters
    ----------
    spectrum : VibrationalSpectrum
        Energies hbar*omega (Ha) and weights.
    temperatures : array_like (n_T,), K
        Non-negative; T = 0 gives the ground state (F = U = E_zp, S = C_V = 0).
    soft_threshold : float, Ha
        Modes with |hbar omega| below it count as zero (acoustic at Gamma) and are
        left out; imaginary modes (below -soft_threshold) are left out and counted.

    Returns
    -------
    HarmonicThermodynamics
        Per cell: the same normalisation as the weights.
    """
    t = check_temperatures(temperatures)
    e = spectrum.energies
    g = spectrum.mode_weights
    keep = e > soft_threshold
    imaginary = float(np.sum(g[e < -soft_threshold]))
    zero = float(np.sum(g[np.abs(e) <= soft_threshold]))
    e_k, g_k = e[keep], g[keep]
    zpe = 0.5 * float(np.sum(g_k * e_k))
    n = t.size
    free, internal, entropy, heat = (np.full(n, zpe), np.full(n, zpe), np.zeros(n), np.zeros(n))
    for i, temperature in enumerate(t):
        if temperature <= 0.0 or e_k.size == 0:
            continue
        kt = temperature * KELVIN_HA
        log_term, occ, x_occ, c = _mode_terms(e_k, kt)
        free[i] = zpe + kt * float(np.sum(g_k * log_term))
        internal[i] = zpe + float(np.sum(g_k * e_k * occ))
        entropy[i] = float(np.sum(g_k * (x_occ - log_term)))
        heat[i] = float(np.sum(g_k * c))
    messages = []
    if imaginary > 0:
        messages.append(f"{imaginary:.4g} imaginary mode(s) per cell (weighted) left out: the "
                        "structure is unstable at this volume or the force constants are "
                        "not converged")
    return HarmonicThermodynamics(t, zpe, free, internal, entropy, heat,
                                  modes_counted=float(np.sum(g_k)), zero_modes=zero,
                                  imaginary_modes=imaginary, messages=tuple(messages))


def spectrum_from_dos(energies, dos, *, n_modes: float | None = None) -> VibrationalSpectrum:
    """A spectrum from a phonon density of states on a grid.

    Parameters
    ----------
    energies : array_like (n,), Ha
        Increasing grid of hbar*omega (may start at 0 or below).
    dos : array_like (n,), states per Ha per cell
        g(hbar omega) on the grid.
    n_modes : float, optional
        When given (3 n_atoms), the DOS is rescaled to integrate to it exactly.

    Returns
    -------
    VibrationalSpectrum
        One "wave vector" whose modes are the grid points, with trapezoid weights
        g_i * dE_i: sums over it are the trapezoid integrals over the DOS.
    """
    e = np.asarray(energies, dtype=float)
    d = np.asarray(dos, dtype=float)
    if e.ndim != 1 or e.shape != d.shape or e.size < 2 or np.any(np.diff(e) <= 0):
        raise InputError("a density of states needs an increasing energy grid and one value "
                         "per grid point", key="dos")
    if not np.all(np.isfinite(d)) or np.any(d < 0):
        raise InputError("a density of states must be finite and not negative", key="dos")
    width = np.zeros_like(e)
    step = np.diff(e)
    width[:-1] += 0.5 * step
    width[1:] += 0.5 * step
    weights = d * width
    if n_modes is not None:
        total = float(np.sum(weights))
        if total <= 0:
            raise InputError("the density of states is zero everywhere", key="dos")
        weights = weights * (float(n_modes) / total)
    return _grid_spectrum(e, weights)


def _grid_spectrum(e: np.ndarray, weights: np.ndarray) -> VibrationalSpectrum:
    # Each grid point is its own "wave vector" with one mode, so the weights can differ.
    return VibrationalSpectrum(e[:, None], weights)
