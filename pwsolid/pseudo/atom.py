"""Self-consistent radial Kohn-Sham solver for a free, spherical pseudo-atom (layer 3).

The radial function u(r) = r R(r) of each angular momentum l is expanded in
B-splines of high degree on exponentially spaced knots (the first and last
spline are dropped, so u(0) = u(r_max) = 0). The Galerkin form of

    -u''/2 + [l(l+1)/(2 r^2) + V(r)] u + r sum_ij p_i(r) h_ij int r' p_j(r') u(r') dr' = e u

is the generalised eigenproblem H c = e S c, in which the separable nonlocal
term is the rank-n_proj matrix P h P^T with P_ia = int B_a(r) r p_i(r) dr.
The Hartree potential comes from the Galerkin solution of the radial Poisson
equation (r V_H)'' = -4 pi r n in the same basis; exchange and correlation use a
registered pwsolid functional on the spherical, spin-unpolarised density.
Occupations are spherically averaged (fractional shells allowed), which is the
reference atom to which separable dual-space Gaussian pseudopotentials are fitted.

References
----------
S. Goedecker, M. Teter and J. Hutter, Phys. Rev. B 54, 1703 (1996);
C. Hartwigsen, S. Goedecker and J. Hutter, Phys. Rev. B 58, 3641 (1998);
C. de Boor, *A Practical Guide to Splines* (Springer, 1978) for the B-spline basis.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np
from scipy.interpolate import BSpline
from scipy.linalg import eigh
from scipy.optimize import brentq
from threadpoolctl import threadpool_limits

from ..errors import ConvergenceWarning, InputError
from ..mixing import PulayMixer
from ..units import SPEED_OF_LIGHT
from ..xc import get_functional
from .separable import ProjectorChannel, projector_radial_real

__all__ = ["RadialBasis", "radial_basis", "PseudoAtom", "parse_configuration",
           "channel_matrices", "nonlocal_matrix", "radial_hartree_potential",
           "solve_radial_atom", "solve_pseudo_atom", "VALENCE_CONFIGURATIONS",
           "SEMICORE_SHELLS", "valence_configuration"]

_L_LETTERS = "spdf"

#: Speed of light in atomic units, 1/alpha (CODATA through scipy.constants).
C_LIGHT: float = SPEED_OF_LIGHT

#: Valence ground configurations of the neutral atoms (common practice; the
#: filled d shell of Ga, Ge and As belongs to the core of most of their
#: pseudopotentials, see :data:`SEMICORE_SHELLS` for those that keep it).
VALENCE_CONFIGURATIONS: dict[str, str] = {
    "H": "1s1", "He": "1s2", "Li": "2s1", "C": "2s2 2p2", "Na": "3s1", "Mg": "3s2",
    "Al": "3s2 3p1", "Si": "3s2 3p2", "K": "4s1", "Ga": "4s2 4p1", "Ge": "4s2 4p2",
    "As": "4s2 4p3",
}

#: Filled semicore shells that a pseudopotential of the given (element, valence charge)
#: keeps in the valence, in front of :data:`VALENCE_CONFIGURATIONS` (the 3d shell of the
#: 13-electron gallium, the 2s and 2p shells of the nine-electron sodium).
SEMICORE_SHELLS: dict[tuple[str, int], str] = {("Ga", 13): "3d10", ("Na", 9): "2s2 2p6"}


def valence_configuration(element: str, valence: float | None = None) -> str:
    """Neutral valence configuration of ``element`` for a pseudopotential of ``valence``
    electrons: the semicore shells of :data:`SEMICORE_SHELLS`, if any, then
    :data:`VALENCE_CONFIGURATIONS`; ``valence=None`` means no semicore shell."""
    if element not in VALENCE_CONFIGURATIONS:
        raise InputError("no default configuration for this element; give one",
                         key="configuration", value=element)
    semicore = "" if valence is None else SEMICORE_SHELLS.get((element, round(valence)), "")
    return f"{semicore} {VALENCE_CONFIGURATIONS[element]}".strip()


@dataclass(frozen=True, eq=False)
class RadialBasis:
    """B-spline basis on [0, r_max] with its quadrature.

    Attributes
    ----------
    knots : (n_knots,) float, bohr
        Clamped knot vector.
    degree : int
        Polynomial degree of the splines.
    points, weights : (n_q,) float, bohr
        Gauss-Legendre points and weights of every knot interval.
    values, derivatives : (n_q, n_basis) float
        B_a(r_q) and B_a'(r_q) of the splines that vanish at both ends.
    """

    knots: np.ndarray
    degree: int
    points: np.ndarray
    weights: np.ndarray
    values: np.ndarray
    derivatives: np.ndarray

    @property
    def size(self) -> int:
        return self.values.shape[1]

    @property
    def r_max(self) -> float:
        return float(self.knots[-1])

    def integrate(self, f: np.ndarray) -> float:
        """int_0^r_max f(r) dr of values ``f`` at :attr:`points`."""
        return float(self.weights @ f)


def radial_basis(r_max: float = 60.0, intervals: int = 100, degree: int = 8,
                 first_step: float = 2e-3, points_per_interval: int | None = None) -> RadialBasis:
    """Build the spline basis.

    Parameters
    ----------
    r_max : float, bohr
        Outer boundary, where u = 0 is imposed.
    intervals : int
        Number of knot intervals.
    degree : int
        Spline degree (order degree + 1).
    first_step : float, bohr
        Width of the innermost interval; the widths grow geometrically outwards.
    points_per_interval : int, optional
        Gauss-Legendre points per interval (default degree + 4).

    Notes
    -----
    Breakpoints x_j = a (exp(gamma j / M) - 1), j = 0..M, with a and gamma fixed
    by x_M = r_max and x_1 = first_step.
    """
    if not (r_max > 0 and intervals >= 4 and 2 <= degree <= 15 and 0 < first_step < r_max / intervals):
        raise InputError("radial grid needs r_max > 0, at least 4 intervals, degree 2-15 "
                         "and 0 < first_step < r_max / intervals",
                         value=(r_max, intervals, degree, first_step))
    m = int(intervals)
    ratio = first_step / r_max

    def mismatch(gamma):
        return math.expm1(gamma / m) / math.expm1(gamma) - ratio

    gamma = brentq(mismatch, 1e-9, 700.0)
    j = np.arange(m + 1)
    breaks = r_max * np.expm1(gamma * j / m) / math.expm1(gamma)
    breaks[0], breaks[-1] = 0.0, r_max
    k = int(degree)
    knots = np.concatenate([np.zeros(k), breaks, np.full(k, r_max)])
    n_all = len(knots) - k - 1
    nq = points_per_interval or k + 4
    x, w = np.polynomial.legendre.leggauss(nq)
    left, right = breaks[:-1, None], breaks[1:, None]
    points = (0.5 * (right - left) * x + 0.5 * (right + left)).ravel()
    weights = (0.5 * (right - left) * w).ravel()
    splines = BSpline(knots, np.eye(n_all), k, extrapolate=False)
    values = np.ascontiguousarray(splines(points)[:, 1:-1])
    derivs = np.ascontiguousarray(splines.derivative(1)(points)[:, 1:-1])
    return RadialBasis(knots, k, points, weights, values, derivs)


def parse_configuration(configuration: str | Mapping[tuple[int, int], float]) -> dict[tuple[int, int], float]:
    """Shell occupations {(n, l): electrons} from e.g. ``"3s2 3p2"`` or a mapping.

    Within each l the smallest n given labels the nodeless pseudo-orbital and
    higher n the following ones; an occupation lies in [0, 2(2l+1)].
    """
    if isinstance(configuration, str):
        shells = {}
        for token in configuration.split():
            m = re.fullmatch(r"(\d+)([spdf])(\d+(?:\.\d*)?|\.\d+)", token)
            if not m:
                raise InputError("shells are written like 3s2 or 4p0.5", key="configuration",
                                 value=token)
            key = (int(m.group(1)), _L_LETTERS.index(m.group(2)))
            shells[key] = shells.get(key, 0.0) + float(m.group(3))
    else:
        shells = {(int(n), int(l)): float(f) for (n, l), f in dict(configuration).items()}
    if not shells:
        raise InputError("the configuration holds no shell", key="configuration", value=configuration)
    for (n, l), f in shells.items():
        if not (0 <= l < n and l <= 3 and 0.0 <= f <= 2 * (2 * l + 1)):
            raise InputError("each shell needs 0 <= l < n and 0 <= electrons <= 2(2l+1)",
                             key="configuration", value=((n, l), f))
    return shells


def _label(n: int, l: int) -> str:
    return f"{n}{_L_LETTERS[l]}"


def nonlocal_matrix(basis: RadialBasis, channel: ProjectorChannel) -> np.ndarray:
    """Galerkin matrix of the separable term of one channel, (n_basis, n_basis), Ha.

    Notes
    -----
    V_ab = sum_ij P_ai h_ij P_bj, P_ai = int B_a(r) r p_i^l(r) dr: symmetric for a
    symmetric h, and of rank at most the number of radial projectors.
    """
    r = basis.points
    proj = np.stack([r * projector_radial_real(channel.l, i + 1, channel.radius, r)
                     for i in range(channel.n_radial)], axis=1)           # (n_q, n_i)
    p = basis.values.T @ (basis.weights[:, None] * proj)                  # (n_basis, n_i)
    return p @ channel.h @ p.T


def channel_matrices(basis: RadialBasis, l: int, potential: np.ndarray,
                     nonlocal_part: np.ndarray | None = None,
                     kinetic_factor: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Hamiltonian and overlap of one angular momentum.

    Parameters
    ----------
    basis : RadialBasis
    l : int
    potential : (n_q,) float, Ha
        Local potential V(r) at ``basis.points`` (ionic + Hartree + xc).
    nonlocal_part : (n_basis, n_basis) float, optional
        From :func:`nonlocal_matrix`.
    kinetic_factor : (n_q,) float, optional
        K(r) of a kinetic operator p K p (the zeroth-order regular approximation
        uses K = c^2 / (2c^2 - V)); default K = 1/2, the Schroedinger kinetic energy.

    Returns
    -------
    h, s : (n_basis, n_basis) float
        H_ab = int [B_a' B_b' / 2 + (l(l+1)/(2r^2) + V) B_a B_b] dr + V^nl_ab,
        S_ab = int B_a B_b dr. With a kinetic factor the kinetic part is
        int K [(B_a' - B_a/r)(B_b' - B_b/r) + l(l+1) B_a B_b / r^2] dr, i.e.
        int K |grad psi|^2 d^3r, which for K = 1/2 is the form above.
    """
    r, w, b, db = basis.points, basis.weights, basis.values, basis.derivatives
    s = b.T @ (w[:, None] * b)
    if kinetic_factor is None:
        v = potential + l * (l + 1) / (2 * r * r)
        h = 0.5 * db.T @ (w[:, None] * db) + b.T @ ((w * v)[:, None] * b)
    else:
        d = db - b / r[:, None]
        wk = w * kinetic_factor
        h = (d.T @ (wk[:, None] * d) + b.T @ ((wk * l * (l + 1) / (r * r) + w * potential)[:, None] * b))
    if nonlocal_part is not None:
        h = h + nonlocal_part
    return 0.5 * (h + h.T), 0.5 * (s + s.T)


def radial_hartree_potential(basis: RadialBasis, density: np.ndarray) -> np.ndarray:
    """Hartree potential (Ha) at ``basis.points`` of a spherical density (bohr^-3).

    Notes
    -----
    U = r V_H obeys U'' = -4 pi r n with U(0) = 0 and U(r_max) = q, the charge
    inside r_max; U = q r / r_max + sum_a c_a B_a with int B_a' B_b' c_b = int B_a 4 pi r n.
    """
    r, w, b, db = basis.points, basis.weights, basis.values, basis.derivatives
    source = 4 * math.pi * r * density
    charge = float(w @ (source * r))
    stiffness = db.T @ (w[:, None] * db)
    coeff = np.linalg.solve(stiffness, b.T @ (w * source))
    return (b @ coeff) / r + charge / basis.r_max


@dataclass(frozen=True, eq=False)
class PseudoAtom:
    """Result of :func:`solve_radial_atom`.

    Attributes
    ----------
    eigenvalues : dict {"3s": e, ...}, Ha
        Kohn-Sham eigenvalues of the occupied (configured) shells.
    occupations : dict {"3s": f, ...}
    total_energy : float, Ha
    energies : dict, Ha
        ``kinetic``, ``local``, ``nonlocal``, ``hartree``, ``xc``; they sum to the total.
    converged : bool
    iterations : int
    points : (n_q,) float, bohr
    density : (n_q,) float, bohr^-3
    orbitals : dict {"3s": (n_q,) float}
        u(r) = r R(r), normalised to int u^2 dr = 1.
    history : tuple of float
        Largest eigenvalue change per iteration (Ha).
    """

    eigenvalues: dict
    occupations: dict
    total_energy: float
    energies: dict
    converged: bool
    iterations: int
    points: np.ndarray = field(repr=False)
    density: np.ndarray = field(repr=False)
    orbitals: dict = field(repr=False)
    history: tuple = field(repr=False, default=())


def solve_radial_atom(local_potential: Callable[[np.ndarray], np.ndarray],
                      channels: Sequence[ProjectorChannel], configuration,
                      *, functional="lda-pz81", interacting: bool = True,
                      basis: RadialBasis | None = None, tolerance: float = 1e-9,
                      max_iterations: int = 200, mixing_weight: float = 0.5,
                      relativistic: bool = False,
                      core_density: Callable[[np.ndarray], np.ndarray] | None = None) -> PseudoAtom:
    """Self-consistent spherical Kohn-Sham atom with a local and a separable potential.

    Parameters
    ----------
    local_potential : callable r -> V(r), Ha
        Ionic local potential (e.g. ``Pseudopotential.local.real_space`` or -Z/r).
    channels : sequence of ProjectorChannel
        Separable projectors (empty for a purely local potential).
    configuration : str or mapping
        Shell occupations, see :func:`parse_configuration`.
    functional : str, callable or Functional
        Exchange-correlation functional of :mod:`pwsolid.xc`: local, or of the density
        gradient (PBE; not together with ``core_density``).
    interacting : bool
        False leaves out Hartree and exchange-correlation (a one-electron test mode).
    basis : RadialBasis, optional
        Default :func:`radial_basis` ().
    tolerance : float, Ha
        Stop when no eigenvalue moves by more than this between iterations and
        the potential residual is below it.
    relativistic : bool
        Scalar-relativistic kinetic energy of the zeroth-order regular
        approximation, p c^2/(2c^2 - V) p with V the whole local potential; meant
        for all-electron atoms (local_potential = -Z/r), to estimate the
        relativistic shifts of valence levels. No separable term is allowed.
    core_density : callable r -> n_c(r), bohr^-3, optional
        Model core density added to the valence density in exchange and
        correlation only (nonlinear core correction, e.g. ``PartialCore.density``);
        the ``xc`` energy is then E_xc[n + n_c].

    Returns
    -------
    PseudoAtom

    Notes
    -----
    The input Hartree + xc potential is Pulay-mixed;
    the relativistic form follows E. van Lenthe, E. J. Baerends and J. G. Snijders,
    J. Chem. Phys. 99, 4597 (1993) and Ch. Chang, M. Pelissier and Ph. Durand,
    Phys. Scr. 34, 394 (1986), with unscaled eigenvalues; the total energy is
    E = T + int V_loc n + sum f <u|V_nl|u> + E_H + E_xc, from the final orbitals.
    Warns with ConvergenceWarning when ``max_iterations`` is reached.
    """
    # the matrices are ~100 x 100: BLAS threads only contend for the cores
    with threadpool_limits(limits=1, user_api="blas"):
        return _solve(local_potential, channels, configuration, functional, interacting,
                      basis, tolerance, max_iterations, mixing_weight, relativistic,
                      core_density)


def _solve(local_potential, channels, configuration, functional, interacting, basis,
           tolerance, max_iterations, mixing_weight, relativistic, core_density) -> PseudoAtom:
    shells = parse_configuration(configuration)
    if relativistic and channels:
        raise InputError("the relativistic kinetic energy is for all-electron atoms: "
                         "give no projectors", key="relativistic", value=True)
    basis = basis or radial_basis()
    xc = get_functional(functional) if interacting else None
    gradient = xc is not None and xc.needs_gradients
    if gradient and core_density is not None:
        raise InputError("a model core density is taken with local functionals only",
                         key="functional", value=xc.name)
    r, w = basis.points, basis.weights
    v_ion = np.asarray(local_potential(r), dtype=float)
    n_core = np.zeros_like(r) if core_density is None else np.asarray(core_density(r), float)
    by_l: dict[int, list[tuple[int, float]]] = {}
    for (n, l), f in sorted(shells.items()):
        by_l.setdefault(l, []).append((n, f))
    nl_mats = {}
    for ch in channels:
        nl_mats[ch.l] = nl_mats.get(ch.l, 0.0) + nonlocal_matrix(basis, ch)
    lowest = {l: min(n for n, _ in items) for l, items in by_l.items()}

    unscaled: dict = {}

    n_q = r.size

    def solve(v_mixed):
        # v_mixed: the local Hartree + xc potential, followed for a gradient functional
        # by q = 2 de/dsigma n' of the gradient term (see _gradient_matrix)
        v_scf = v_mixed[:n_q]
        extra = _gradient_matrix(basis, v_mixed[n_q:]) if gradient else 0.0
        eps, orbs, coefs = {}, {}, {}
        kin = C_LIGHT ** 2 / (2 * C_LIGHT ** 2 - v_ion - v_scf) if relativistic else None
        for l, items in by_l.items():
            h, s = channel_matrices(basis, l, v_ion + v_scf, nl_mats.get(l, 0.0) + extra, kin)
            top = max(n for n, _ in items) - lowest[l]
            e, c = eigh(h, s, subset_by_index=[0, top])
            raw = e
            if relativistic:
                # scaled energies e / (1 + <p K^2/c^2 p>), exact for one-electron ions
                kk = channel_matrices(basis, l, np.zeros_like(r), None, kin * kin / C_LIGHT ** 2)[0]
                e = e / (1.0 + np.einsum("ak,ab,bk->k", c, kk, c))
            for n, _ in items:
                k = n - lowest[l]
                eps[(n, l)] = float(e[k])
                unscaled[(n, l)] = float(raw[k])
                coefs[(n, l)] = c[:, k]
                orbs[(n, l)] = basis.values @ c[:, k]
        return eps, orbs, coefs

    def density_of(orbs):
        return sum(shells[key] * u * u for key, u in orbs.items()) / (4 * math.pi * r * r)

    def slope_of(coefs):
        # dn/dr of n = sum f u^2 / (4 pi r^2), from the splines' own derivatives
        total = np.zeros_like(r)
        for key, c in coefs.items():
            u, du = basis.values @ c, basis.derivatives @ c
            total += shells[key] * (2 * u * du / (r * r) - 2 * u * u / r ** 3)
        return total / (4 * math.pi)

    def effective(n, coefs):
        """Hartree potential, local xc potential (the q part appended for a gradient
        functional) and the xc energy per volume."""
        if xc is None:
            return np.zeros_like(r), np.zeros_like(r), np.zeros_like(r)
        v_h = radial_hartree_potential(basis, n)
        if gradient:
            slope = slope_of(coefs)
            e, de_dn, de_dsigma = xc.evaluate_gradient(n, slope * slope)
            # the far tail, where n underflows: no potential
            q = np.where(n > _GRADIENT_FLOOR, 2 * de_dsigma * slope, 0.0)
            return v_h, np.concatenate([np.where(n > _GRADIENT_FLOOR, de_dn, 0.0), q]), e
        e_xc, v_xc = xc.evaluate(n + n_core)
        return v_h, v_xc, e_xc * (n + n_core)

    mixer = PulayMixer(weight=mixing_weight, history=8)
    v_in = np.zeros(2 * n_q if gradient else n_q)
    old = None
    history = []
    converged = False
    it = 0
    for it in range(1, max_iterations + 1):
        eps, orbs, coefs = solve(v_in)
        n = density_of(orbs)
        v_h, v_xc, _ = effective(n, coefs)
        v_out = v_xc.copy()
        v_out[:n_q] += v_h
        change = 0.0 if old is None else max(abs(eps[k] - old[k]) for k in eps)
        residual = float(np.sqrt(w @ ((v_out[:n_q] - v_in[:n_q]) ** 2 * r * r)))
        if gradient:
            residual += float(np.sqrt(w @ ((v_out[n_q:] - v_in[n_q:]) ** 2 * r * r)))
        history.append(change)
        old = eps
        if xc is None or (it > 1 and change < tolerance and residual < tolerance):
            converged = True
            break
        v_in = mixer.mix(v_in, v_out)
    if not converged:
        warnings.warn(f"radial atom not converged after {max_iterations} iterations "
                      f"(last eigenvalue change {history[-1]:.2e} Ha)", ConvergenceWarning,
                      stacklevel=3)
    # energies from the final orbitals and their own density
    n = density_of(orbs)
    v_h, v_xc, e_xc = effective(n, coefs)
    # kinetic energy of whichever kinetic operator was used: eigenvalue minus the
    # potential terms of the final eigenproblem (whose potential was v_in)
    nl_of = {k: (c @ nl_mats[k[1]] @ c if k[1] in nl_mats else 0.0) for k, c in coefs.items()}
    grad_mat = _gradient_matrix(basis, v_in[n_q:]) if gradient else None
    grad_of = {k: (c @ grad_mat @ c if gradient else 0.0) for k, c in coefs.items()}
    kinetic = sum(shells[k] * (unscaled[k] - w @ (orbs[k] ** 2 * (v_ion + v_in[:n_q]))
                               - nl_of[k] - grad_of[k]) for k in coefs)
    nonloc = sum(shells[k] * nl_of[k] for k in coefs)
    rho = 4 * math.pi * r * r * n
    energies = {"kinetic": float(kinetic), "local": float(w @ (rho * v_ion)),
                "nonlocal": float(nonloc), "hartree": float(0.5 * w @ (rho * v_h)),
                "xc": float(w @ (4 * math.pi * r * r * e_xc))}
    return PseudoAtom(
        eigenvalues={_label(*k): v for k, v in eps.items()},
        occupations={_label(*k): shells[k] for k in eps},
        total_energy=float(sum(energies.values())), energies=energies,
        converged=converged, iterations=it, points=r, density=n,
        orbitals={_label(*k): u for k, u in orbs.items()}, history=tuple(history))


#: bohr^-3: below this density (the far tail) the gradient potential is left out
_GRADIENT_FLOOR = 1e-14


def _gradient_matrix(basis: RadialBasis, q: np.ndarray) -> np.ndarray:
    """Galerkin matrix of the gradient part of a gradient functional's potential, Ha.

    Notes
    -----
    With E_xc = int e(n, sigma) d^3r, sigma = n'^2, the matrix element between
    psi_a = B_a/r Y_lm and psi_b is int [e_n psi_a psi_b + 2 e_sigma grad n . grad(psi_a
    psi_b)] d^3r; the second part, with q = 2 e_sigma n', is
    int q [B_a' B_b + B_a B_b' - 2 B_a B_b / r] dr (no second derivative of the density;
    the same weak form as the plane-wave gradient potential).
    """
    r, w, b, db = basis.points, basis.weights, basis.values, basis.derivatives
    wq = w * q
    m = db.T @ (wq[:, None] * b)
    return m + m.T - 2 * b.T @ ((wq / r)[:, None] * b)


def solve_pseudo_atom(pseudo, configuration=None, *, functional="lda-pz81",
                      basis: RadialBasis | None = None, tolerance: float = 1e-9) -> PseudoAtom:
    """The free neutral pseudo-atom of a loaded :class:`~pwsolid.pseudo.Pseudopotential`.

    Parameters
    ----------
    pseudo : Pseudopotential
        Its ``local.real_space`` and ``separable`` channels are used.
    configuration : str or mapping, optional
        Default: :func:`valence_configuration` of the element and valence charge.
    functional, basis, tolerance
        As in :func:`solve_radial_atom`.
    """
    if configuration is None:
        configuration = valence_configuration(pseudo.element, pseudo.valence)
    shells = parse_configuration(configuration)
    electrons = sum(shells.values())
    if abs(electrons - pseudo.valence) > 1e-9:
        raise InputError(f"the configuration holds {electrons:g} electrons but the "
                         f"pseudopotential has valence {pseudo.valence:g} (the atom must be neutral)",
                         key="configuration", value=configuration)
    channels = pseudo.separable.channels if pseudo.separable is not None else ()
    core = pseudo.partial_core.density if pseudo.partial_core is not None else None
    return solve_radial_atom(pseudo.local.real_space, channels, shells, functional=functional,
                             basis=basis, tolerance=tolerance, core_density=core)
