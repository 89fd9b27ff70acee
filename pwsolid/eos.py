"""Equations of state E(V): closed forms and least-squares fits (layer 1).

Arrays in, arrays out: volumes in bohr^3, energies in Ha, pressures and bulk
moduli in Ha/bohr^3 (``pwsolid.units.HA_PER_BOHR3_GPA`` converts to GPa).

Every closed form is written in the four parameters of the equilibrium state:
the energy E0 and volume V0 at the minimum, the bulk modulus B0 = V E''(V0)
and its pressure derivative B0' = dB/dP at V0. They are registered by name in
:data:`EOS_FORMS`; a user may pass a callable ``E(V, e0, v0, b0, b0p)`` of the
same shape instead of a name.

The ``"polynomial"`` form is linear least squares of E against a polynomial
in the Eulerian-like variable t = (V/V_ref)^(-2/3) (V_ref is the mean sampled
volume); V0, B0 and B0' are derived from its minimum. We fit in V^(-2/3)
rather than in V because the third-order Birch-Murnaghan energy is an exact
cubic in that variable, so order 3 loses nothing on smooth data and order 2 is
the second-order Birch form (B0' = 4 exactly).

Notes
-----
With eta = (V0/V)^(2/3) and x = (V/V0)^(1/3):

* Birch-Murnaghan (3rd order):
  E = E0 + (9 V0 B0 / 16) [(eta - 1)^3 B0' + (eta - 1)^2 (6 - 4 eta)]
* Vinet: E = E0 + 2 B0 V0 / (B0' - 1)^2
  {2 - [5 + 3 B0' (x - 1) - 3 x] exp[-(3/2)(B0' - 1)(x - 1)]}
* Murnaghan: E = E0 + (B0 V / B0') [(V0/V)^B0' / (B0' - 1) + 1] - B0 V0 / (B0' - 1)

and P = -dE/dV for each (written out in the pressure functions).

References
----------
F. Birch, Phys. Rev. 71, 809 (1947).
P. Vinet, J. Ferrante, J. H. Rose and J. R. Smith, J. Phys. C 19, L467 (1986);
J. Geophys. Res. 92, 9319 (1987) (the energy form).
F. D. Murnaghan, Proc. Natl. Acad. Sci. USA 30, 244 (1944).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Callable, Mapping, Protocol

import numpy as np
from scipy.optimize import least_squares

from .errors import ConvergenceWarning, InputError
from .units import HA_PER_BOHR3_GPA

__all__ = [
    "EnergyForm",
    "PressureForm",
    "EOSForm",
    "EOSFit",
    "EOS_FORMS",
    "birch_murnaghan_energy",
    "birch_murnaghan_pressure",
    "vinet_energy",
    "vinet_pressure",
    "murnaghan_energy",
    "murnaghan_pressure",
    "fit_equation_of_state",
    "fit_all_forms",
    "compare_fits",
]

#: Fewest energy points accepted by a fit (four parameters plus one degree of freedom).
MIN_POINTS = 5
_PARAMETER_NAMES = ("e0", "v0", "b0", "b0_prime")


class EnergyForm(Protocol):
    """E(V; E0, V0, B0, B0') in Ha for volumes in bohr^3, B0 in Ha/bohr^3."""

    def __call__(self, volume, e0: float, v0: float, b0: float, b0p: float): ...


class PressureForm(Protocol):
    """P(V; V0, B0, B0') = -dE/dV in Ha/bohr^3."""

    def __call__(self, volume, v0: float, b0: float, b0p: float): ...


# --- closed forms ---------------------------------------------------------------------

def birch_murnaghan_energy(volume, e0, v0, b0, b0p):
    """Third-order Birch-Murnaghan energy (Ha) at ``volume`` (bohr^3, any shape).

    Notes
    -----
    E = E0 + (9 V0 B0/16) [(eta - 1)^3 B0' + (eta - 1)^2 (6 - 4 eta)], eta = (V0/V)^(2/3).

    References
    ----------
    F. Birch, Phys. Rev. 71, 809 (1947).
    """
    eta = (v0 / np.asarray(volume, dtype=float)) ** (2.0 / 3.0)
    d = eta - 1.0
    return e0 + 9.0 * v0 * b0 / 16.0 * (d ** 3 * b0p + d ** 2 * (6.0 - 4.0 * eta))


def birch_murnaghan_pressure(volume, v0, b0, b0p):
    """Third-order Birch-Murnaghan pressure (Ha/bohr^3).

    Notes
    -----
    P = (3 B0/2) (eta^(7/2) - eta^(5/2)) [1 + (3/4)(B0' - 4)(eta - 1)], eta = (V0/V)^(2/3).
    """
    eta = (v0 / np.asarray(volume, dtype=float)) ** (2.0 / 3.0)
    return 1.5 * b0 * (eta ** 3.5 - eta ** 2.5) * (1.0 + 0.75 * (b0p - 4.0) * (eta - 1.0))


def vinet_energy(volume, e0, v0, b0, b0p):
    """Vinet (universal) energy (Ha); singular at B0' = 1.

    Notes
    -----
    E = E0 + 2 B0 V0/(B0' - 1)^2 {2 - [5 + 3 B0'(x - 1) - 3x] exp[-(3/2)(B0' - 1)(x - 1)]},
    x = (V/V0)^(1/3).

    References
    ----------
    P. Vinet, J. Ferrante, J. H. Rose and J. R. Smith, J. Geophys. Res. 92, 9319 (1987).
    """
    x = (np.asarray(volume, dtype=float) / v0) ** (1.0 / 3.0)
    a = 1.5 * (b0p - 1.0)
    return e0 + 2.0 * b0 * v0 / (b0p - 1.0) ** 2 * (
        2.0 - (5.0 + 3.0 * b0p * (x - 1.0) - 3.0 * x) * np.exp(-a * (x - 1.0)))


def vinet_pressure(volume, v0, b0, b0p):
    """Vinet pressure (Ha/bohr^3): P = 3 B0 (1 - x) x^-2 exp[(3/2)(B0' - 1)(1 - x)].

    References
    ----------
    P. Vinet, J. Ferrante, J. H. Rose and J. R. Smith, J. Phys. C 19, L467 (1986).
    """
    x = (np.asarray(volume, dtype=float) / v0) ** (1.0 / 3.0)
    return 3.0 * b0 * (1.0 - x) / x ** 2 * np.exp(1.5 * (b0p - 1.0) * (1.0 - x))


def murnaghan_energy(volume, e0, v0, b0, b0p):
    """Murnaghan energy (Ha); singular at B0' = 0 and 1.

    Notes
    -----
    E = E0 + (B0 V/B0') [(V0/V)^B0'/(B0' - 1) + 1] - B0 V0/(B0' - 1).

    References
    ----------
    F. D. Murnaghan, Proc. Natl. Acad. Sci. USA 30, 244 (1944).
    """
    v = np.asarray(volume, dtype=float)
    return (e0 + b0 * v / b0p * ((v0 / v) ** b0p / (b0p - 1.0) + 1.0)
            - b0 * v0 / (b0p - 1.0))


def murnaghan_pressure(volume, v0, b0, b0p):
    """Murnaghan pressure (Ha/bohr^3): P = (B0/B0') [(V0/V)^B0' - 1]."""
    v = np.asarray(volume, dtype=float)
    return b0 / b0p * ((v0 / v) ** b0p - 1.0)


# --- registry -------------------------------------------------------------------------

@dataclass(frozen=True)
class EOSForm:
    """A named equation of state.

    Parameters
    ----------
    name
        Registry name.
    energy
        ``E(V, e0, v0, b0, b0p)``; ``None`` for the polynomial, which has its own fit.
    pressure
        ``P(V, v0, b0, b0p)``; when ``None``, P = -dE/dV by central differences.
    reference
        Paper the form comes from.
    b0_prime_min
        Lower bound on B0' during the fit (the Vinet and Murnaghan forms are singular
        at B0' = 1); the fit never touches the bound itself.
    """

    name: str
    energy: EnergyForm | None
    pressure: PressureForm | None = None
    reference: str = ""
    b0_prime_min: float = -math.inf

    @property
    def is_polynomial(self) -> bool:
        return self.energy is None


#: Equations of state by name.
EOS_FORMS: dict[str, EOSForm] = {
    "birch-murnaghan": EOSForm("birch-murnaghan", birch_murnaghan_energy,
                               birch_murnaghan_pressure, "F. Birch, Phys. Rev. 71, 809 (1947)"),
    "vinet": EOSForm("vinet", vinet_energy, vinet_pressure,
                     "P. Vinet et al., J. Phys. C 19, L467 (1986); "
                     "J. Geophys. Res. 92, 9319 (1987)", b0_prime_min=1.0),
    "murnaghan": EOSForm("murnaghan", murnaghan_energy, murnaghan_pressure,
                         "F. D. Murnaghan, PNAS 30, 244 (1944)", b0_prime_min=1.0),
    "polynomial": EOSForm("polynomial", None, None,
                          "polynomial in V^(-2/3), linear least squares"),
}

#: Default order of the polynomial form (exact for third-order Birch-Murnaghan data).
DEFAULT_POLYNOMIAL_ORDER = 3


# --- result ---------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)   # arrays inside: equality is identity
class EOSFit:
    """A fitted equation of state.

    Attributes
    ----------
    form
        Registry name of the form (or the name of a user's callable).
    e0, v0, b0, b0_prime
        Minimum energy (Ha), equilibrium volume (bohr^3), bulk modulus (Ha/bohr^3)
        and its pressure derivative.
    standard_errors
        Standard errors of ``e0``, ``v0``, ``b0``, ``b0_prime`` (keys as named), from
        the Jacobian of the least-squares problem scaled by the residual variance;
        ``None`` when the fit has no degrees of freedom.
    volumes, energies
        The data, sorted by volume, shape (n,), bohr^3 and Ha.
    residuals
        Fitted minus given energy at each (sorted) volume, shape (n,), Ha.
    rms_residual
        Root mean square of ``residuals``, Ha.
    converged
        Whether the optimiser met its tolerances (always true for the polynomial).
    minimum_inside_range
        Whether V0 lies within the sampled volumes.
    message
        What went wrong, or what to watch (empty when all is well).
    polynomial_order
        Order of the polynomial form, else ``None``.
    """

    form: str
    e0: float
    v0: float
    b0: float
    b0_prime: float
    standard_errors: Mapping[str, float] | None
    volumes: np.ndarray
    energies: np.ndarray
    residuals: np.ndarray
    rms_residual: float
    converged: bool
    minimum_inside_range: bool
    message: str = ""
    polynomial_order: int | None = None
    _energy: Callable = field(default=None, repr=False, compare=False)
    _pressure: Callable = field(default=None, repr=False, compare=False)

    @property
    def b0_gpa(self) -> float:
        """Bulk modulus in GPa."""
        return self.b0 * HA_PER_BOHR3_GPA

    @property
    def b0_gpa_error(self) -> float | None:
        """Standard error of the bulk modulus in GPa (``None`` without degrees of freedom)."""
        if self.standard_errors is None:
            return None
        return self.standard_errors["b0"] * HA_PER_BOHR3_GPA

    @property
    def n_points(self) -> int:
        return int(self.volumes.size)

    def energy(self, volume):
        """Fitted energy (Ha) at ``volume`` (bohr^3, scalar or array)."""
        return _like_input(volume, self._energy(np.asarray(volume, dtype=float)))

    def pressure(self, volume):
        """Fitted pressure P = -dE/dV (Ha/bohr^3) at ``volume`` (bohr^3, scalar or array)."""
        return _like_input(volume, self._pressure(np.asarray(volume, dtype=float)))


def _like_input(volume, values):
    return float(values) if np.ndim(volume) == 0 else np.asarray(values, dtype=float)


# --- input checks ---------------------------------------------------------------------

def _checked_data(volumes, energies) -> tuple[np.ndarray, np.ndarray]:
    """Validate and sort the data by volume (the fit does not depend on the order)."""
    try:
        v = np.asarray(volumes, dtype=float)
        e = np.asarray(energies, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"volumes and energies must be numbers ({exc})") from None
    if v.ndim != 1 or e.ndim != 1:
        raise InputError(f"volumes and energies must be 1-D arrays "
                         f"(got shapes {v.shape} and {e.shape})", key="volumes")
    if v.size != e.size:
        raise InputError(f"{v.size} volumes but {e.size} energies; give one energy per volume",
                         key="energies")
    if v.size < MIN_POINTS:
        raise InputError(f"an equation-of-state fit needs at least {MIN_POINTS} points "
                         "(four parameters and one degree of freedom)", key="volumes",
                         value=v.size)
    for name, arr in (("volumes", v), ("energies", e)):
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            raise InputError(f"{name} must be finite; entry {int(bad[0])} is {arr[bad[0]]!r}",
                             key=name)
    if np.any(v <= 0):
        raise InputError("volumes must be positive (bohr^3)", key="volumes",
                         value=float(v[v <= 0][0]))
    order = np.argsort(v, kind="stable")
    v, e = v[order], e[order]
    dup = np.flatnonzero(np.diff(v) <= 1e-12 * v[1:])
    if dup.size:
        raise InputError("volumes must be distinct; a volume appears twice",
                         key="volumes", value=float(v[dup[0]]))
    return v, e


def _resolve_form(form) -> EOSForm:
    if isinstance(form, EOSForm):
        return form
    if isinstance(form, str):
        key = form.strip().lower()
        if key not in EOS_FORMS:
            raise InputError(f"unknown equation-of-state form; valid names are "
                             f"{', '.join(EOS_FORMS)} (or pass a callable E(V, e0, v0, b0, b0p))",
                             key="form", value=form)
        return EOS_FORMS[key]
    if callable(form):
        return EOSForm(getattr(form, "__name__", "custom"), form, None, "user callable")
    raise InputError("form must be a registered name, an EOSForm or a callable "
                     f"E(V, e0, v0, b0, b0p); valid names are {', '.join(EOS_FORMS)}",
                     key="form", value=form)


# --- fits -----------------------------------------------------------------------------

def _parabola_start(v, e):
    """Starting (e0, v0, b0, b0p) from E = a s^2 + b s + c, s = V/V_ref - 1."""
    vref = float(np.mean(v))
    a, b, c = np.polyfit(v / vref - 1.0, e, 2)
    # Relative tests: equal energies leave a curvature of rounding size, not zero.
    flat = np.ptp(e) <= 1e-14 * np.max(np.abs(e))
    if flat or not a > 1e-10 * max(float(np.ptp(e)), abs(b)):
        raise InputError("the energies do not curve upward over the sampled volumes "
                         "(a parabola through them has no minimum), so no equation of "
                         "state can be fitted; sample volumes around the minimum",
                         key="energies")
    # A minimum far outside the data is extrapolation anyway; keep the start sane.
    s0 = float(np.clip(-b / (2 * a), 0.5 * v[0] / vref - 1.0, 2.0 * v[-1] / vref - 1.0))
    v0 = vref * (1.0 + s0)
    return (a * s0 ** 2 + b * s0 + c, v0, v0 * 2.0 * a / vref ** 2, 4.0)


def _numerical_pressure(energy: Callable) -> Callable:
    def pressure(volume):
        # Central difference; the step balances truncation (h^2) against rounding.
        h = 1e-5 * volume
        return -(energy(volume + h) - energy(volume - h)) / (2.0 * h)
    return pressure


def _standard_errors(jac, residual_var, scale) -> tuple[dict | None, str]:
    """sqrt(diag(s^2 (J^T J)^-1)) in physical units; NaN for undetermined parameters."""
    if not np.all(np.isfinite(jac)):
        return ({k: math.nan for k in _PARAMETER_NAMES},
                "standard errors unavailable: the Jacobian is not finite")
    _, sing, vt = np.linalg.svd(jac, full_matrices=False)
    if sing.size < len(scale) or sing[-1] <= 1e-12 * sing[0]:
        return ({k: math.nan for k in _PARAMETER_NAMES},
                "the data do not determine all four parameters (singular Jacobian)")
    cov = (vt.T / sing ** 2) @ vt * residual_var
    err = np.sqrt(np.diag(cov)) * np.asarray(scale)
    return dict(zip(_PARAMETER_NAMES, (float(x) for x in err))), ""


def _range_message(v0, v) -> tuple[bool, str]:
    inside = bool(v[0] <= v0 <= v[-1])
    if inside:
        return True, ""
    return False, (f"the minimum V0 = {v0:.6g} bohr^3 lies outside the sampled volumes "
                   f"[{v[0]:.6g}, {v[-1]:.6g}]; the parameters are extrapolated")


def _fit_parametric(spec: EOSForm, v, e, max_evaluations) -> EOSFit:
    start = _parabola_start(v, e)
    e_ref = float(np.mean(e))
    e_scale = float(np.ptp(e))
    energy = spec.energy

    # E0 must enter additively (E = E0 + f(V; V0, B0, B0')): the fit works with
    # energies relative to e_ref so that the residuals do not lose digits to E0.
    try:
        probe = np.asarray(energy(v, 1.0, *start[1:]), dtype=float) - np.asarray(
            energy(v, 0.0, *start[1:]), dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"the equation-of-state callable failed on E(V, e0, v0, b0, b0p): "
                         f"{exc}", key="form", value=spec.name) from None
    if probe.shape != v.shape or not np.allclose(probe, 1.0, rtol=0, atol=1e-9):
        raise InputError("an equation-of-state callable must return one energy per volume "
                         "and take E0 additively: E(V, e0, v0, b0, b0p) = e0 + f(V, v0, b0, b0p)",
                         key="form", value=spec.name)

    scale = np.array([e_scale, start[1], start[2], 1.0])
    shift = np.array([e_ref, 0.0, 0.0, 0.0])
    e_rel = e - e_ref

    def params(q):
        return q * scale + shift

    def residuals(q):
        _, v0, b0, b0p = q * scale
        return (energy(v, q[0] * e_scale, v0, b0, b0p) - e_rel) / e_scale

    q0 = (np.asarray(start) - shift) / scale
    lower = np.array([-np.inf, 0.0, 0.0, spec.b0_prime_min])
    q0[3] = max(q0[3], spec.b0_prime_min + 1.0)
    # Tight tolerances: on exact data the parameters are recovered to ~1e-10.
    with np.errstate(over="ignore", invalid="ignore"):
        res = least_squares(residuals, q0, jac="3-point", bounds=(lower, np.inf),
                            method="trf", x_scale=1.0, ftol=1e-14, xtol=1e-13, gtol=1e-14,
                            max_nfev=max_evaluations)
    p = params(res.x)
    e0, v0, b0, b0p = (float(x) for x in p)

    messages = []
    converged = bool(res.success) and bool(np.all(np.isfinite(res.fun)))
    if not converged:
        messages.append(f"the least-squares fit did not converge ({res.message})")
    if np.any(res.active_mask != 0):
        converged = False
        messages.append("a parameter ended on its bound (V0 > 0, B0 > 0, "
                        f"B0' > {spec.b0_prime_min:g}); the form does not fit these data")

    dof = v.size - 4
    fitted = energy(v, e0, v0, b0, b0p)
    resid = np.asarray(fitted - e, dtype=float)
    errors, why = _standard_errors(res.jac, float(np.sum(res.fun ** 2)) / dof, scale)
    if why:
        messages.append(why)
    inside, msg = _range_message(v0, v)
    if msg:
        messages.append(msg)
    if not converged:
        warnings.warn(f"equation-of-state fit '{spec.name}': " + "; ".join(messages),
                      ConvergenceWarning, stacklevel=3)

    def energy_of(vol):
        return energy(vol, e0, v0, b0, b0p)

    if spec.pressure is not None:
        def pressure_of(vol):
            return spec.pressure(vol, v0, b0, b0p)
    else:
        pressure_of = _numerical_pressure(energy_of)

    return EOSFit(form=spec.name, e0=e0, v0=v0, b0=b0, b0_prime=b0p,
                  standard_errors=errors, volumes=v, energies=e, residuals=resid,
                  rms_residual=float(np.sqrt(np.mean(resid ** 2))), converged=converged,
                  minimum_inside_range=inside, message="; ".join(messages),
                  _energy=energy_of, _pressure=pressure_of)


class _PolynomialModel:
    """E = sum_k c_k u^k with u = (t - t_mid)/t_half and t = (V/V_ref)^(-2/3).

    The affine map to u in [-1, 1] keeps the Vandermonde matrix well conditioned.
    """

    def __init__(self, vref, t_mid, t_half, coef):
        self.vref, self.t_mid, self.t_half = vref, t_mid, t_half
        self.poly = np.polynomial.Polynomial(coef)

    def u_of(self, volume):
        return ((volume / self.vref) ** (-2.0 / 3.0) - self.t_mid) / self.t_half

    def energy(self, volume):
        return self.poly(self.u_of(volume))

    def pressure(self, volume):
        # P = -dE/dV = (2/3) t^(5/2) dE/dt / V_ref, since dt/dV = -(2/3) t / V.
        t = (volume / self.vref) ** (-2.0 / 3.0)
        return 2.0 / 3.0 * t ** 2.5 * self.poly.deriv(1)(self.u_of(volume)) / (
            self.t_half * self.vref)

    def parameters(self):
        """(e0, v0, b0, b0p) at the minimum nearest the sampled range, or None.

        With E_t = dE/dt: B0 = (4/9) t0^(7/2) E_tt / V_ref and
        B0' = 4 + (2/3) t0 E_ttt / E_tt (from B = -V dP/dV, B' = (dB/dV)/(dP/dV)).
        """
        d1, d2, d3 = (self.poly.deriv(k) for k in (1, 2, 3))
        roots = d1.roots()
        real = roots[np.abs(roots.imag) <= 1e-9 * (1.0 + np.abs(roots.real))].real
        t = self.t_mid + self.t_half * real
        ok = (d2(real) > 0) & (t > 0)
        if not np.any(ok):
            return None
        u0 = real[ok][np.argmin(np.abs(real[ok]))]
        t0 = self.t_mid + self.t_half * u0
        e_tt = d2(u0) / self.t_half ** 2
        e_ttt = d3(u0) / self.t_half ** 3
        return (float(self.poly(u0)), float(self.vref * t0 ** -1.5),
                float(4.0 / 9.0 * t0 ** 3.5 * e_tt / self.vref),
                float(4.0 + 2.0 / 3.0 * t0 * e_ttt / e_tt))


def _fit_polynomial(v, e, order) -> EOSFit:
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)):
        raise InputError("the polynomial order must be an integer", key="order", value=order)
    order = int(order)
    if not 2 <= order <= v.size - 1:
        raise InputError(f"the polynomial order must lie between 2 (B0 needs E'') and "
                         f"{v.size - 1} (one less than the {v.size} points)",
                         key="order", value=order)
    _parabola_start(v, e)  # same upward-curvature check as the closed forms
    vref = float(np.mean(v))
    t = (v / vref) ** (-2.0 / 3.0)
    t_mid, t_half = 0.5 * (t.max() + t.min()), 0.5 * (t.max() - t.min())
    u = (t - t_mid) / t_half
    e_ref = float(np.mean(e))
    a = np.vander(u, order + 1, increasing=True)
    coef, *_ = np.linalg.lstsq(a, e - e_ref, rcond=None)
    coef[0] += e_ref

    model = _PolynomialModel(vref, t_mid, t_half, coef)
    p = model.parameters()
    if p is None:
        raise InputError(f"the order-{order} polynomial through these energies has no "
                         "minimum; sample volumes around the minimum or lower the order",
                         key="energies")
    e0, v0, b0, b0p = p
    resid = model.energy(v) - e
    dof = v.size - (order + 1)
    messages = []
    errors = None
    if dof > 0:
        var = float(np.sum(resid ** 2)) / dof
        cov_c = var * np.linalg.pinv(a.T @ a)
        jac = _polynomial_parameter_jacobian(vref, t_mid, t_half, coef, np.array(p))
        if jac is None:
            errors = {k: math.nan for k in _PARAMETER_NAMES}
            messages.append("standard errors unavailable: the minimum is too shallow")
        else:
            errors = dict(zip(_PARAMETER_NAMES,
                              (float(x) for x in np.sqrt(np.diag(jac @ cov_c @ jac.T)))))
    inside, msg = _range_message(v0, v)
    if msg:
        messages.append(msg)
    return EOSFit(form="polynomial", e0=e0, v0=v0, b0=b0, b0_prime=b0p,
                  standard_errors=errors, volumes=v, energies=e, residuals=resid,
                  rms_residual=float(np.sqrt(np.mean(resid ** 2))), converged=True,
                  minimum_inside_range=inside, message="; ".join(messages),
                  polynomial_order=order, _energy=model.energy, _pressure=model.pressure)


def _polynomial_parameter_jacobian(vref, t_mid, t_half, coef, p):
    """d(e0, v0, b0, b0p)/d(coefficients) by central differences.

    The parameters are smooth (rational) functions of the coefficients, so a relative
    step of 1e-6 gives the derivatives to ~1e-10, ample for error propagation.
    """
    step = 1e-6 * max(float(np.max(np.abs(coef[1:]))), 1e-300)
    cols = []
    for k in range(coef.size):
        plus, minus = coef.copy(), coef.copy()
        plus[k] += step
        minus[k] -= step
        pp = _PolynomialModel(vref, t_mid, t_half, plus).parameters()
        pm = _PolynomialModel(vref, t_mid, t_half, minus).parameters()
        if pp is None or pm is None:
            return None
        cols.append((np.array(pp) - np.array(pm)) / (2.0 * step))
    return np.column_stack(cols)


def fit_equation_of_state(volumes, energies, form="birch-murnaghan", *,
                          order: int | None = None, max_evaluations: int = 2000) -> EOSFit:
    """Fit an equation of state to energies at several volumes.

    Parameters
    ----------
    volumes : array_like, shape (n,), float
        Cell volumes, bohr^3, distinct and positive; any order (they are sorted, and
        the result holds them sorted).
    energies : array_like, shape (n,), float
        Total energies, Ha, one per volume.
    form
        A name from :data:`EOS_FORMS`, an :class:`EOSForm`, or a callable
        ``E(V, e0, v0, b0, b0p)`` in which E0 enters additively.
    order
        Order of the ``"polynomial"`` form (2 to n - 1; default 3). Not accepted for
        the other forms.
    max_evaluations
        Cap on residual evaluations of the nonlinear fit.

    Returns
    -------
    EOSFit
        Parameters, standard errors, residuals and flags; see :class:`EOSFit`.

    Raises
    ------
    InputError
        Fewer than 5 points, non-finite or non-positive values, duplicate volumes,
        energies that do not curve upward, an unknown form name, or a bad order.

    Warns
    -----
    ConvergenceWarning
        When the nonlinear least-squares fit does not converge (``converged`` is false).

    Notes
    -----
    Starting values come from a parabola in V; the closed forms are then fitted by
    :func:`scipy.optimize.least_squares` in scaled parameters. Standard errors are
    sqrt(diag(s^2 (J^T J)^-1)) with s^2 the residual sum of squares over n - p.
    """
    spec = _resolve_form(form)
    v, e = _checked_data(volumes, energies)
    if spec.is_polynomial:
        return _fit_polynomial(v, e, DEFAULT_POLYNOMIAL_ORDER if order is None else order)
    if order is not None:
        raise InputError(f"'order' applies only to the polynomial form, not '{spec.name}'",
                         key="order", value=order)
    return _fit_parametric(spec, v, e, max_evaluations)


def fit_all_forms(volumes, energies, *,
                  polynomial_order: int = DEFAULT_POLYNOMIAL_ORDER) -> dict[str, EOSFit]:
    """Fit every registered form to the same data; returns ``{name: EOSFit}``."""
    return {name: fit_equation_of_state(volumes, energies, name,
                                        order=polynomial_order if spec.is_polynomial else None)
            for name, spec in EOS_FORMS.items()}


def compare_fits(fits: Mapping[str, EOSFit]) -> dict:
    """Spread of the parameters across several fits of the same data.

    Returns
    -------
    dict
        ``forms`` (tuple of names), ``all_converged`` (bool), and for each of
        ``e0``, ``v0``, ``b0``, ``b0_prime``, ``b0_gpa`` a dict with ``min``, ``max``,
        ``mean``, ``spread`` (max - min) and ``relative_spread`` (spread / |mean|;
        ``nan`` for E0 = 0).
    """
    if not fits:
        raise InputError("compare_fits needs at least one fit", key="fits")
    summary: dict = {"forms": tuple(fits),
                     "all_converged": all(f.converged for f in fits.values())}
    for name in ("e0", "v0", "b0", "b0_prime", "b0_gpa"):
        values = np.array([getattr(f, name) for f in fits.values()], dtype=float)
        mean = float(values.mean())
        spread = float(values.max() - values.min())
        summary[name] = {"min": float(values.min()), "max": float(values.max()),
                         "mean": mean, "spread": spread,
                         "relative_spread": spread / abs(mean) if mean != 0 else math.nan}
    return summary
