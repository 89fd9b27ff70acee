"""Fitting separable dual-space Gaussian pseudopotentials to all-electron atoms (layer 3).

The analytic form is that of Hartwigsen, Goedecker & Hutter, Phys. Rev. B 58, 3641
(1998): a Gaussian local part (r_loc, C1..C4) and, per angular momentum l, Gaussian
projectors of radius r_l with a coupling matrix h^l whose off-diagonal elements follow
from the diagonal by the paper's fixed relations. The parameters are adjusted by
least squares (scipy ``least_squares``) so that the spherical pseudo-atom reproduces,
over several configurations (neutral, promoted, ionised), the all-electron

* Kohn-Sham eigenvalues of every valence shell, and
* charge of each valence orbital outside one or more radii (int_R^inf u^2 dr).

The second kind of target is the norm-conservation condition in integral form: a
pseudo-orbital whose charge outside R equals the all-electron one has the same
logarithmic-derivative energy slope at R (D. R. Hamann, M. Schlueter and C. Chiang,
Phys. Rev. Lett. 43, 1494 (1979)), which is what makes a pseudopotential transferable.
An optional softness term penalises the kinetic energy that pseudo-orbitals carry
above a plane-wave cutoff (the measure of A. M. Rappe, K. M. Rabe, E. Kaxiras and
J. D. Joannopoulos, Phys. Rev. B 41, 1227 (1990), used here as a penalty).

Parameters are named by strings: ``r_loc``, ``c1``..``c4`` for the local part and
``r0``, ``h0_1``, ``h0_2``, ... (radius and diagonal h of channel l = 0), ``r1``,
``h1_1`` ..., ``r2``, ``h2_1`` ... for p and d.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass, field
from typing import Mapping, Sequence

import numpy as np
from scipy.linalg import eigh
from scipy.optimize import least_squares
from scipy.special import spherical_jn

from ..errors import ConvergenceWarning, InputError
from ..xc import get_functional
from .atom import (RadialBasis, channel_matrices, nonlocal_matrix, radial_basis,
                   radial_hartree_potential, solve_radial_atom)
from .local import GaussianLocal
from .separable import ProjectorChannel, hgh_off_diagonal

__all__ = ["AtomTarget", "all_electron_targets", "outside_charge", "separable_form", "fit_separable_form",
           "FitReport", "channel_spectrum", "kinetic_energy_above"]

_LETTERS = "spdf"
_H_KEY = re.compile(r"h([0-2])_([1-3])")


@dataclass(frozen=True)
class AtomTarget:
    """All-electron data of one configuration.

    Attributes
    ----------
    configuration : str
        Valence shells only, e.g. ``"3d10 4s2 4p1"`` (the pseudo-atom's configuration).
    eigenvalues : dict {"4s": e}, Ha
    outside_charge : dict {("4s", R): q}
        int_R^inf u^2 dr of each valence orbital at each radius R (bohr).
    """

    configuration: str
    eigenvalues: dict
    outside_charge: dict


def outside_charge(basis: RadialBasis, u: np.ndarray, radius: float) -> float:
    """int_R^r_max u^2 dr of an orbital given at ``basis.points`` (a spline of the basis).

    The step at R is integrated exactly: whole knot intervals above R by their Gauss
    points, the interval holding R by Gauss-Legendre points on [R, its right end] with the
    spline evaluated there. (Counting only the Gauss points beyond R errs by up to a
    point's weight times u^2, about 0.01 e at 2 bohr on the usual grids, and differently
    on the all-electron and pseudo grids, so it does not cancel between them.)
    """
    from scipy.interpolate import BSpline

    breaks = np.unique(basis.knots)
    if radius <= breaks[0]:
        return float(basis.weights @ (u * u))
    if radius >= breaks[-1]:
        return 0.0
    k = int(np.searchsorted(breaks, radius, side="right")) - 1
    right = breaks[k + 1]
    whole = float(basis.weights @ (u * u * (basis.points > right)))
    coeff = np.linalg.lstsq(basis.values, u, rcond=None)[0]
    spline = BSpline(basis.knots, np.concatenate([[0.0], coeff, [0.0]]), basis.degree)
    x, w = np.polynomial.legendre.leggauss(basis.degree + 4)
    r = 0.5 * (right - radius) * (x + 1) + radius
    return whole + float(0.5 * (right - radius) * (w @ spline(r) ** 2))


_outside = outside_charge


def all_electron_targets(z: float, core: str, configurations: Sequence[str],
                         radii: Mapping[int, Sequence[float]], *, functional="lda-pz81",
                         relativistic: bool = True, basis: RadialBasis | None = None,
                         tolerance: float = 1e-9) -> list[AtomTarget]:
    """Valence eigenvalues and outside charges of all-electron atoms (-Z/r, every shell).

    ``radii`` maps l to the radii (bohr) at which the charge outside is a target; the
    step function is integrated on the basis' Gauss points (its interval edges do not
    fall on R, so the quadrature error is of the order of one point's weight times u^2;
    the same rule is used for the pseudo-atom, so it cancels to first order).
    """
    basis = basis or radial_basis()
    out = []
    for configuration in configurations:
        atom = solve_radial_atom(lambda r: -z / r, (), f"{core} {configuration}".strip(),
                                 functional=functional, basis=basis, relativistic=relativistic,
                                 tolerance=tolerance)
        valence = [t[:2] for t in configuration.split()]
        eig = {k: atom.eigenvalues[k] for k in valence}
        charge = {}
        for k in valence:
            for radius in radii.get(_LETTERS.index(k[1]), ()):
                charge[(k, float(radius))] = _outside(basis, atom.orbitals[k], radius)
        out.append(AtomTarget(configuration, eig, charge))
    return out


def separable_form(valence: float, parameters: Mapping[str, float]
                   ) -> tuple[GaussianLocal, tuple[ProjectorChannel, ...]]:
    """The local part and projector channels of a named parameter set (see module doc)."""
    local = GaussianLocal(valence=float(valence), r_loc=float(parameters["r_loc"]),
                          **{c: float(parameters[c]) for c in ("c1", "c2", "c3", "c4")
                             if c in parameters})
    channels = []
    for l in range(3):
        if f"r{l}" not in parameters:
            continue
        diagonal = []
        i = 1
        while f"h{l}_{i}" in parameters:
            diagonal.append(float(parameters[f"h{l}_{i}"]))
            i += 1
        if not diagonal:
            raise InputError("a projector radius needs at least one h", key=f"r{l}")
        channels.append(ProjectorChannel(l, float(parameters[f"r{l}"]),
                                         hgh_off_diagonal(l, diagonal)))
    for key in parameters:
        m = _H_KEY.fullmatch(key)
        if m and f"r{m.group(1)}" not in parameters:
            raise InputError("h given for a channel without a radius", key=key)
    return local, tuple(channels)


def kinetic_energy_above(basis: RadialBasis, u: np.ndarray, l: int, cutoff: float,
                         n_q: int = 160) -> float:
    """Kinetic energy (Ha) that orbital u = rR carries in plane waves above ``cutoff`` (Ha).

    With phi(q) = int u(r) r j_l(q r) dr, (2/pi) int phi^2 q^2 dq = 1 and the kinetic
    energy is (1/pi) int phi^2 q^4 dq. The part above q_c = sqrt(2 E_cut) is the whole
    kinetic energy, (1/2) int [u'^2 + l(l+1) u^2/r^2] dr in the spline basis, less the
    part below q_c (Gauss-Legendre in q): the transform is only needed at q <= q_c,
    where the radial quadrature resolves j_l(q r) over the whole orbital.
    """
    r, w = basis.points, basis.weights
    coeff = np.linalg.lstsq(basis.values, u, rcond=None)[0]
    du = basis.derivatives @ coeff
    total = 0.5 * float(w @ (du * du + l * (l + 1) * u * u / (r * r)))
    q_c = math.sqrt(2 * cutoff)
    x, wq = np.polynomial.legendre.leggauss(n_q)
    q = 0.5 * q_c * (x + 1)
    phi = spherical_jn(l, np.outer(q, r)) @ (w * u * r)
    below = float((0.5 * q_c * wq) @ (phi * phi * q ** 4)) / math.pi
    return total - below


def channel_spectrum(local: GaussianLocal, channels: Sequence[ProjectorChannel],
                     configuration: str, l: int, count: int = 4, *, functional="lda-pz81",
                     basis: RadialBasis | None = None) -> np.ndarray:
    """The ``count`` lowest levels (Ha) of angular momentum l in the self-consistent
    potential of the pseudo-atom in ``configuration``: the ghost-state check (a bound
    level below the one that stands for the lowest valence shell of that l would be a
    ghost; so would an extra bound level between two valence shells)."""
    basis = basis or radial_basis()
    atom = solve_radial_atom(local.real_space, channels, configuration, functional=functional,
                             basis=basis)
    n = atom.density
    v_h = radial_hartree_potential(basis, n)
    v_xc = get_functional(functional).evaluate(n)[1]
    nl = sum((nonlocal_matrix(basis, c) for c in channels if c.l == l),
             np.zeros((basis.size, basis.size)))
    h, s = channel_matrices(basis, l, local.real_space(basis.points) + v_h + v_xc, nl)
    return eigh(h, s, eigvals_only=True, subset_by_index=[0, count - 1])


@dataclass
class FitReport:
    """Result of :func:`fit_separable_form`.

    Attributes
    ----------
    parameters : dict
        All parameters, fitted and fixed.
    eigenvalue_errors : dict {(configuration, shell): pseudo - all-electron}, Ha
    charge_errors : dict {(configuration, shell, R): pseudo - all-electron}, electrons
    softness : dict {shell: kinetic energy above the softness cutoff}, Ha (neutral atom)
    cost : float
    """

    parameters: dict
    eigenvalue_errors: dict
    charge_errors: dict
    softness: dict = field(default_factory=dict)
    cost: float = 0.0

    @property
    def worst_eigenvalue_error(self) -> float:
        return max(abs(v) for v in self.eigenvalue_errors.values())

    @property
    def worst_charge_error(self) -> float:
        return max((abs(v) for v in self.charge_errors.values()), default=0.0)

    def table(self) -> str:
        """Plain-text table of every target error."""
        lines = [f"{'configuration':<18} {'shell':<5} {'d eps (mHa)':>12} {'d q_out (me) at R':>30}"]
        for (conf, k), de in self.eigenvalue_errors.items():
            dq = "  ".join(f"{dq * 1e3:+.2f}@{r:g}" for (c, kk, r), dq in self.charge_errors.items()
                           if c == conf and kk == k)
            lines.append(f"{conf:<18} {k:<5} {de * 1e3:>+12.3f} {dq:>30}")
        return "\n".join(lines)


def _pseudo_errors(valence, parameters, targets, basis, functional):
    local, channels = separable_form(valence, parameters)
    eig, chg, atoms = {}, {}, []
    for t in targets:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            atom = solve_radial_atom(local.real_space, channels, t.configuration,
                                     functional=functional, basis=basis, tolerance=1e-9,
                                     max_iterations=150)
        atoms.append(atom)
        for k, e in t.eigenvalues.items():
            eig[(t.configuration, k)] = atom.eigenvalues[k] - e
        for (k, radius), q in t.outside_charge.items():
            chg[(t.configuration, k, radius)] = _outside(basis, atom.orbitals[k], radius) - q
    return eig, chg, atoms


def fit_separable_form(valence: float, targets: Sequence[AtomTarget], start: Mapping[str, float],
                       free: Sequence[str], *, eigenvalue_scale: float = 1e-3,
                       charge_scale: float = 1e-3, softness_cutoff: float | None = None,
                       softness_scale: float = 1e-2, bounds: Mapping[str, tuple] | None = None,
                       functional="lda-pz81", basis: RadialBasis | None = None,
                       max_iterations: int = 40, log=None, extra_residuals=None) -> FitReport:
    """Least-squares fit of the parameters named in ``free`` to all-electron targets.

    Parameters
    ----------
    valence : float
        Ionic charge of the pseudopotential.
    targets : sequence of AtomTarget
        From :func:`all_electron_targets`; the configurations are the pseudo-atom's.
    start : mapping
        Every parameter (fixed ones keep these values).
    free : sequence of str
        The parameters to fit.
    eigenvalue_scale, charge_scale : float
        An eigenvalue error of ``eigenvalue_scale`` Ha and a charge error of
        ``charge_scale`` electrons weigh as one unit in the sum of squares.
    softness_cutoff : float, optional
        If given (Ha), the kinetic energy above it of each valence orbital of the first
        (reference) configuration is added as a residual, in units of ``softness_scale`` Ha.
    bounds : mapping name -> (low, high), optional
    max_iterations : int
        Trust-region steps (each costs one evaluation plus one per free parameter for
        the finite-difference Jacobian).
    log : callable, optional
        Called with a progress line whenever the cost improves.
    extra_residuals : callable parameters -> sequence of float, optional
        Further dimensionless residuals (e.g. levels of the atom in a sphere, which
        keep the scattering right up to higher energies and ghost states out),
        appended to the sum of squares as they are.
    """
    basis = basis or radial_basis()
    free = list(free)
    params = dict(start)
    lo = [(-np.inf if bounds is None or k not in bounds else bounds[k][0]) for k in free]
    hi = [(np.inf if bounds is None or k not in bounds else bounds[k][1]) for k in free]
    count = [0]
    best = [np.inf]

    def residuals(x):
        p = dict(params, **dict(zip(free, x)))
        try:
            eig, chg, atoms = _pseudo_errors(valence, p, targets, basis, functional)
        except (np.linalg.LinAlgError, ValueError):
            return np.full(n_res[0], 1e3)
        res = [v / eigenvalue_scale for v in eig.values()] + [v / charge_scale for v in chg.values()]
        if softness_cutoff is not None:
            a = atoms[0]
            res += [kinetic_energy_above(basis, u, _LETTERS.index(k[1]), softness_cutoff)
                    / softness_scale for k, u in a.orbitals.items()]
        if extra_residuals is not None:
            try:
                res += [float(v) for v in extra_residuals(p)]
            except (np.linalg.LinAlgError, ValueError):
                return np.full(n_res[0], 1e3)
        count[0] += 1
        cost = 0.5 * float(np.sum(np.square(res)))
        if cost < best[0]:
            best[0] = cost
            if log is not None:
                log(f"  evaluation {count[0]}: cost {cost:.4g} at "
                    + ", ".join(f"{k}={v:.6f}" for k, v in zip(free, x)))
        return np.array(res)

    n_res = [0]
    first = residuals(np.array([params[k] for k in free]))
    n_res[0] = len(first)
    fit = least_squares(residuals, np.array([params[k] for k in free]), bounds=(lo, hi),
                        x_scale="jac", diff_step=1e-5, max_nfev=max_iterations)
    params.update(zip(free, map(float, fit.x)))
    eig, chg, atoms = _pseudo_errors(valence, params, targets, basis, functional)
    soft = {}
    if softness_cutoff is not None:
        soft = {k: kinetic_energy_above(basis, u, _LETTERS.index(k[1]), softness_cutoff)
                for k, u in atoms[0].orbitals.items()}
    return FitReport(params, eig, chg, soft, float(fit.cost))
