"""Warm starts: a calculation started from finished neighbouring ones (layer 4).

One home for every way pwsolid reuses a converged calculation to start another:
the SCF (:func:`pwsolid.scf.ground_state` takes ``initial_density``,
``initial_wavefunctions`` and ``start_residual``), the volume scans and
convergence studies, and later relaxations and the atomistic library calculator.

* :class:`WavefunctionStart`: converged orbitals, carried to a new cell's plane
  waves by Miller index at equal k-points (:func:`start_wavefunctions`), and
  optionally extrapolated from two cells after rotating out the gauge freedom.
* :class:`WarmStart`: the density (and orbitals) of a finished cell, chained to
  up to two further neighbours; :func:`transfer_density` moves a density to a
  homogeneously deformed cell, :func:`extrapolate_density` extrapolates it in
  volume, and :func:`starting_point` turns a chain into the SCF's starting
  density, orbitals and expected residual; when the atoms moved it adds the
  change of a superposition of atomic densities (:func:`moved_atoms_density`,
  forms from :func:`atomic_density_forms`).
"""

from __future__ import annotations

import dataclasses
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from .basis import transfer_coefficients
from .errors import InputError
from .hamiltonian import superposed_density

__all__ = ["WavefunctionStart", "start_wavefunctions", "WarmStart", "transfer_density",
           "extrapolate_density", "starting_point", "wavefunction_start_of",
           "RadialFormFactor", "atomic_density_forms", "moved_atoms_density"]


@dataclass(frozen=True, eq=False)
class WavefunctionStart:
    """Converged orbitals of one cell, kept to start a neighbouring cell's SCF.

    ``coefficients[j]`` is channel j's ``(n_bands, n_pw)`` block (``None`` for a
    channel another MPI process solved) on the plane waves ``miller[k]`` of
    k-point k = j mod n_k; ``k_fractional`` ``(n_k, 3)`` names the k-points.
    ``blend`` holds ``(weight, WavefunctionStart)`` pairs of further cells to
    extrapolate with (see :meth:`extrapolated`).
    """

    k_fractional: np.ndarray
    n_spin: int
    miller: tuple
    coefficients: tuple
    blend: tuple = ()

    @classmethod
    def of(cls, result) -> "WavefunctionStart":
        """The orbitals of a ground state (:class:`pwsolid.scf.GroundState`)."""
        setup = result.setup
        return cls(np.array([b.k_fractional for b in setup.bases]), setup.n_spin,
                   tuple(b.miller for b in setup.bases), tuple(result.wavefunctions))

    def extrapolated(self, pairs) -> "WavefunctionStart":
        """These orbitals combined with others', ``(weight, start)`` pairs.

        The start block is ``X + sum_i w_i (U_i X_i - X)``: each other block,
        carried to the new plane waves, is first rotated onto this one (the
        unitary U_i closest to their overlap), since orbitals of separate runs
        differ by phases and by mixing within (near-)degenerate bands. Weights
        of a Lagrange extrapolation in volume make the start exact to that order.
        """
        return dataclasses.replace(self, blend=tuple((float(w), start) for w, start in pairs))


def _rotated_onto(block: np.ndarray, reference: np.ndarray) -> np.ndarray:
    """``U block`` with the unitary U maximising Re tr(<reference|U block>) (orthogonal
    Procrustes: U from the singular vectors of the overlap); rows are orbitals."""
    u, _, vh = np.linalg.svd(block.conj() @ reference.T)
    return (u @ vh).T @ block


def start_wavefunctions(setup, start: WavefunctionStart) -> list | None:
    """``start`` carried onto this set-up's bases, or None if the k-points differ.

    Channels with nothing to carry (other process, other band count) stay ``None``
    and get the usual fresh guess; a blended start whose partners lack a channel
    uses the nearest cell's orbitals alone there.
    """
    ks = np.array([b.k_fractional for b in setup.bases])

    def same_kpoints(s):
        return (s.n_spin == setup.n_spin and ks.shape == s.k_fractional.shape
                and np.allclose(ks, s.k_fractional, atol=1e-9))

    if not same_kpoints(start):
        return None
    blend = [(w, other) for w, other in start.blend if same_kpoints(other)]
    out = [None] * setup.n_channels
    for j in setup.owned:
        ik = setup.channel(j)[1]

        def carried(s):
            old = s.coefficients[j]
            if old is None or old.shape[0] < setup.n_bands:
                return None
            return transfer_coefficients(s.miller[ik], old[:setup.n_bands], setup.bases[ik])

        c = carried(start)
        if c is None:
            continue
        others = [(w, carried(other)) for w, other in blend]
        if all(o is not None for _, o in others):
            c = c + sum(w * (_rotated_onto(o, c) - c) for w, o in others)
        out[j] = c
    return out


@dataclass(frozen=True)
class WarmStart:
    """The density of a finished point, to start a neighbouring one from.

    Attributes
    ----------
    density : ndarray (n1, n2, n3) float64, bohr^-3
        Self-consistent density on that point's FFT grid.
    volume : float
        That point's cell volume, bohr^3.
    wavefunctions : WavefunctionStart or None
        That point's orbitals, when the solver returned them: the next point's
        eigensolver starts from them instead of from scratch.
    partner : WarmStart or None
        The next nearest finished point on the same line of the scan (same c/a),
        which may have a partner in turn: the starting density is then
        extrapolated in volume from up to three points, the orbitals from two
        (see :func:`extrapolate_density`).
    crystal : pwsolid.crystal.Crystal or None
        That point's structure, when known: a start for the same cell with moved
        atoms then adds the change of the atomic densities (:func:`starting_point`).
    earlier : WarmStart or None
        The point this one was started from (with its ``crystal``), when known: the
        moved-atoms start then also extrapolates the change of the bonding density
        (:func:`moved_atoms_density`).
    """

    density: np.ndarray
    volume: float
    wavefunctions: Any = None
    partner: "WarmStart | None" = None
    crystal: Any = None
    earlier: "WarmStart | None" = None

    @classmethod
    def of(cls, result, partner: "WarmStart | None" = None) -> "WarmStart":
        """What a finished ground state offers its neighbours: its self-consistent
        density, cell volume and orbitals (``partner``: the next nearest, if any)."""
        return cls(np.asarray(result.density, float), float(result.crystal.volume),
                   wavefunction_start_of(result), partner)


def transfer_density(density: np.ndarray, old_volume: float, new_shape,
                     new_volume: float) -> np.ndarray:
    """Carry a density to a homogeneously deformed cell, keeping the electron count.

    Parameters
    ----------
    density : ndarray (n1, n2, n3) or (n_spin, n1, n2, n3) float64
        Density (bohr^-3) on the old cell's FFT grid; spin densities are carried
        channel by channel, each keeping its own electron count.
    old_volume, new_volume : float
        Cell volumes, bohr^3.
    new_shape : 3 ints
        FFT grid of the new cell.

    Returns
    -------
    ndarray, shape ``new_shape`` (with the spin axis first, if any), float64
        The density at the same fractional coordinates times V_old / V_new.

    Notes
    -----
    On the same grid this is exact. On another grid the Fourier coefficients
    n_G with Miller indices |m_i| <= min((n_i^old - 1)//2, (n_i^new - 1)//2) are
    copied (an even grid's Nyquist row has no partner and is dropped, so the
    field stays real); the G = 0 coefficient, hence the charge, is kept. Ringing
    below zero is clipped and the charge restored by rescaling.
    """
    density = np.asarray(density, float)
    new_shape = tuple(int(n) for n in new_shape)
    if density.ndim == 4:
        return np.stack([transfer_density(d, old_volume, new_shape, new_volume)
                         for d in density])
    factor = float(old_volume) / float(new_volume)
    if density.shape == new_shape:
        return density * factor
    coef = np.fft.fftn(density) / density.size
    out = np.zeros(new_shape, complex)
    old_idx, new_idx = [], []
    for n_old, n_new in zip(density.shape, new_shape):
        m = min((n_old - 1) // 2, (n_new - 1) // 2)
        freq = np.r_[0:m + 1, -m:0]
        old_idx.append(freq % n_old)
        new_idx.append(freq % n_new)
    out[np.ix_(*new_idx)] = coef[np.ix_(*old_idx)]
    moved = np.fft.ifftn(out).real * np.prod(new_shape) * factor
    charge = float(density.mean()) * old_volume
    moved = np.maximum(moved, 0.0)
    mean = float(moved.mean())
    if mean <= 0:
        return np.full(new_shape, charge / new_volume)
    return moved * (charge / (mean * new_volume))


def _chain(start: WarmStart, new_volume: float, depth: int) -> list[WarmStart]:
    """``start`` and up to ``depth - 1`` of its partners, all at distinct volumes;
    ``start`` alone when the target lies over two spacings beyond it."""
    chain = [start]
    while (len(chain) < depth and chain[-1].partner is not None
           and min(abs(chain[-1].partner.volume - p.volume) for p in chain)
           > 1e-9 * start.volume):
        chain.append(chain[-1].partner)
    if len(chain) > 1 and abs(new_volume - start.volume) > 2 * abs(start.volume - chain[1].volume):
        return [start]
    return chain


def _lagrange_weights(volumes, new_volume: float) -> np.ndarray:
    """Weights w_i (summing to 1) with sum_i w_i f(V_i) = f(V) exactly for a polynomial
    f of degree len(volumes) - 1."""
    v = np.asarray(volumes, float)
    w = np.ones(len(v))
    for i in range(len(v)):
        for j in range(len(v)):
            if i != j:
                w[i] *= (new_volume - v[j]) / (v[i] - v[j])
    return w


def extrapolate_density(start: WarmStart, new_shape, new_volume: float) -> np.ndarray:
    """Starting density of a cell from one to three finished neighbours (bohr^-3).

    With one neighbour this is :func:`transfer_density`. With more (``start``,
    ``start.partner``, its partner) each is carried to the new grid and the
    densities are combined by Lagrange extrapolation in volume, quadratic from
    three points: the density at fixed fractional coordinates (times V, as the
    transfer does) changes smoothly with the volume. Measured on silicon, 15 Ha,
    2 % volume steps, distance (L1, per electron) of the start from the
    self-consistent density: 8.5e-3 from one neighbour, 1.8e-4 linear from two,
    2.6e-5 quadratic from three; the same with a cutoff scaled to keep the
    plane-wave set fixed, so the steps of that set are no limit here. The
    carried densities hold the same charge and the weights sum to 1, so the
    combination does too; negative values are clipped and the charge restored.
    Partners farther than two spacings from the target are not used.
    """
    return _extrapolation(start, new_shape, new_volume)[0]


def _extrapolation(start: WarmStart, new_shape, new_volume: float):
    """(density, estimated residual or None) of :func:`extrapolate_density`.

    The estimate is the size of the last term, the distance (L1, per electron, as
    the SCF measures its residual) from the extrapolation one order lower: for a
    smooth series a pessimistic measure of the error. None for a single neighbour.
    """
    chain = _chain(start, new_volume, 3)
    carried = [transfer_density(p.density, p.volume, new_shape, new_volume) for p in chain]
    if len(carried) == 1:
        return carried[0], None
    vols = [p.volume for p in chain]
    orders = [np.maximum(np.tensordot(_lagrange_weights(vols[:k], new_volume),
                                      np.array(carried[:k]), axes=1), 0.0)
              for k in (len(chain) - 1, len(chain))]
    lower, out = (x * (float(carried[0].mean()) / float(x.mean())) for x in orders)
    estimate = float(np.abs(out - lower).mean() / out.mean())
    return out, estimate


# The first eigensolver pass of an extrapolated start goes to this fraction of the
# estimated start residual (see _extrapolation). Measured on silicon (15 Ha, 2 % steps):
# quadratic starts were 2e-5 to 3e-5 from self-consistency against estimates of 1.6e-4
# to 1.8e-4, and a first pass to about the start residual cost the fewest H applications
# per point (with two Davidson steps per later iteration: 7,486 at 3e-5, 8,760 at 1e-4,
# 9,006 at 1e-5). A poor extrapolation (a large estimate) keeps the default 1e-3 of a
# warm start: a tight pass there once cost a toy cell 17 SCF iterations instead of 12.
_START_RESIDUAL_PER_ESTIMATE = 0.2


def _extrapolated_orbitals(start: WarmStart, new_volume: float):
    """The neighbour's orbitals, extrapolated linearly in volume when a second
    neighbour has them too. Measured on silicon (15 Ha, 2 % steps): the first
    eigensolver pass to 1e-4 costs 15 H applications per band from the nearest
    orbitals, 7.6 from the linear extrapolation; quadratic gave no more (8.1)."""
    chain = [p for p in _chain(start, new_volume, 2) if p.wavefunctions is not None]
    if start.wavefunctions is None or len(chain) < 2:
        return start.wavefunctions
    weights = _lagrange_weights([p.volume for p in chain], new_volume)
    return start.wavefunctions.extrapolated([(weights[1], chain[1].wavefunctions)])


def starting_point(warm: WarmStart | None, grid_shape, volume: float, crystal=None,
                   atomic_forms: dict | None = None):
    """(density, orbitals, expected residual) to start a cell of ``volume`` (bohr^3)
    and FFT grid ``grid_shape`` from a chain of finished neighbours.

    The density is extrapolated (:func:`extrapolate_density`), the orbitals
    linearly when two neighbours have them; the expected residual (None for a
    single neighbour) sets the first eigensolver tolerance of the SCF. All None
    without a neighbour. With the new structure ``crystal`` and ``atomic_forms``
    (species -> form factor of its atomic density, :func:`atomic_density_forms`),
    and a neighbour that knows its own structure (``warm.crystal``, same species),
    the density also follows the moved atoms (:func:`moved_atoms_density`).
    """
    if warm is None:
        return None, None, None
    density, expected = _extrapolation(warm, grid_shape, volume)
    old = warm.crystal
    if (crystal is not None and atomic_forms is not None and old is not None
            and list(old.species) == list(crystal.species)):
        earlier = []
        before = warm.earlier
        while before is not None and len(earlier) < EARLIER_STRUCTURES:
            if before.crystal is None or list(before.crystal.species) != list(crystal.species):
                break
            earlier.append((transfer_density(before.density, before.volume, grid_shape, volume),
                            before.crystal.positions))
            before = before.earlier
        density = moved_atoms_density(
            density, crystal.lattice, old.positions, crystal.positions, crystal.species,
            atomic_forms, earlier=earlier or None)
    waves = _extrapolated_orbitals(warm, volume)
    if expected is not None:
        expected *= _START_RESIDUAL_PER_ESTIMATE
    return density, waves, expected


def wavefunction_start_of(outcome) -> WavefunctionStart | None:
    """The orbitals of a ground-state outcome (None for outcomes without orbitals,
    such as the model energies tests pass through a solver seam)."""
    if getattr(outcome, "setup", None) is not None and \
            getattr(outcome, "wavefunctions", None) is not None:
        return WavefunctionStart.of(outcome)
    return None


@dataclass(frozen=True, eq=False)
class RadialFormFactor:
    """Fourier transform of a spherical density, tabulated: ``form_factor(q)``
    interpolates ``values`` (electrons) linearly in ``q`` (1/bohr, ascending) and
    is 0 beyond the table."""

    q: np.ndarray
    values: np.ndarray

    @classmethod
    def of(cls, r: np.ndarray, weights: np.ndarray, density: np.ndarray,
           q_max: float = 40.0, n_q: int = 4001) -> "RadialFormFactor":
        """n(q) = 4 pi int r^2 n(r) sin(qr)/(qr) dr on a radial quadrature (``r``,
        ``weights``, bohr) of a density ``n(r)`` (bohr^-3), tabulated to ``q_max``."""
        q = np.linspace(0.0, q_max, n_q)
        kernel = np.sinc(np.outer(q, r) / np.pi)
        return cls(q, 4 * np.pi * kernel @ (weights * r ** 2 * density))

    def form_factor(self, q: np.ndarray) -> np.ndarray:
        return np.interp(q, self.q, self.values, right=0.0)


def atomic_density_forms(pseudopotentials: dict, model: str = "pseudo-atom") -> dict:
    """Form factors of each species' free-atom valence density (electrons).

    ``model="pseudo-atom"``: the density of the neutral pseudo-atom
    (:func:`pwsolid.pseudo.atom.solve_pseudo_atom`, LDA, its ground configuration);
    ``"gaussian"``: a normalised Gaussian of the valence charge, 1 bohr wide (a
    cheaper model; measured on the displaced 8-atom silicon relaxation it gave no
    gain over the carried density alone, the pseudo-atom 9 %, see
    benchmarks/README.md). ``pseudopotentials`` maps species to loaded
    pseudopotentials.
    None when a species' pseudo-atom cannot be solved (no default configuration,
    no convergence): a start without the moved-atoms term is still a good start.
    """
    from .pseudo.atom import radial_basis, solve_pseudo_atom
    from .pseudo.core import PartialCore

    if model not in ("pseudo-atom", "gaussian"):
        raise ValueError(f"unknown atomic density model {model!r}")
    if model == "gaussian":
        return {s: PartialCore(float(pp.valence), 1.0) for s, pp in pseudopotentials.items()}
    basis = radial_basis()
    forms = {}
    for s, pp in pseudopotentials.items():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                atom = solve_pseudo_atom(pp, basis=basis)
            except (InputError, ValueError, ArithmeticError, np.linalg.LinAlgError):
                return None
        if not atom.converged:
            return None
        forms[s] = RadialFormFactor.of(basis.points, basis.weights, atom.density)
    return forms


def moved_atoms_density(density: np.ndarray, lattice: np.ndarray, old_positions: np.ndarray,
                        new_positions: np.ndarray, species, forms: dict,
                        earlier=None) -> np.ndarray:
    """A self-consistent density carried along with moved atoms (bohr^-3).

    Parameters
    ----------
    density : ndarray (n1, n2, n3) or (n_spin, n1, n2, n3) float64, bohr^-3
        Self-consistent density of the atoms at ``old_positions``.
    lattice : (3, 3) bohr
        The new cell (the density already carried to it at fixed fractional
        coordinates, as :func:`transfer_density` does).
    old_positions, new_positions : (n_atoms, 3) fractional
    species : sequence of str
    forms : mapping species -> ``form_factor(q)`` of its atomic density
    earlier : (density, positions), a sequence of such pairs, or None
        Self-consistent densities (same grid and cell) and fractional positions of
        structures visited before ``old_positions``, the most recent first: the bonding
        part is then extrapolated too, with the coefficients that best continue the
        atoms' path (see Notes).

    Returns
    -------
    ndarray, the shape of ``density``, float64
        n + N[R_new] - N[R_old], N the superposition of atomic densities
        (:func:`pwsolid.hamiltonian.superposed_density`), plus the extrapolated change
        of the bonding density; spin channels take half the change each. Negative
        values are clipped and the charge restored.

    Notes
    -----
    The first-order density extrapolation for moving atoms: the part of the density
    that the atoms carry rigidly follows them, the bonding rearrangement
    b = n - N[R_old] is kept. With earlier structures R_1, R_2, ... (bonding densities
    b_i), the new move is fitted by the earlier ones,
    R_new - R_old ~ sum_i c_i (R_old - R_i) (least squares, Cartesian, nearest image),
    and b_new = b + sum_i c_i (b - b_i): exact when the bonding density is linear in
    the positions along the path. With one earlier structure c is kept within [0, 1]
    (Alfe's form); with more, directions the earlier moves barely span are dropped
    (singular values below ``_PATH_CUTOFF`` of the largest) and the fitted move must
    not be longer than the new one (spin densities use the first-order form).

    References
    ----------
    D. Alfe, Comput. Phys. Commun. 118, 31 (1999) (from memory); the fit over several
    earlier structures as in T. A. Arias, M. C. Payne and J. D. Joannopoulos,
    Phys. Rev. B 45, 1538 (1992) (from memory).
    """
    density = np.asarray(density, float)
    shape = density.shape[-3:]
    at_old = superposed_density(lattice, old_positions, species, forms, shape)
    change = superposed_density(lattice, new_positions, species, forms, shape) - at_old
    if earlier is not None and isinstance(earlier[0], np.ndarray):
        earlier = [earlier]
    if earlier and density.ndim == 3:
        coefficients = _path_coefficients(lattice, [p for _, p in earlier], old_positions,
                                          new_positions)
        bond = density - at_old
        for c, (dens, pos) in zip(coefficients, earlier):
            if c != 0.0:
                before = np.asarray(dens, float) - superposed_density(lattice, pos, species,
                                                                      forms, shape)
                change = change + c * (bond - before)
    if density.ndim == 4:
        change = change / density.shape[0]
    moved = np.maximum(density + change, 0.0)
    axes = (-3, -2, -1)
    return moved * (density.mean(axis=axes, keepdims=True)
                    / moved.mean(axis=axes, keepdims=True))


#: At most this many structures before the previous one enter the moved-atoms start.
EARLIER_STRUCTURES = 4
#: Moves of earlier structures along directions with singular values below this fraction
#: of the largest are not fitted (a nearly dependent path would amplify noise).
_PATH_CUTOFF = 0.1


def _moves(lattice, a, b) -> np.ndarray:
    """Cartesian move (flat, bohr) from fractional positions ``a`` to ``b``, nearest image."""
    d = np.asarray(b, float) - np.asarray(a, float)
    return ((d - np.rint(d)) @ np.asarray(lattice, float)).ravel()


def _path_coefficients(lattice, earlier, old, new) -> np.ndarray:
    """c minimising |(new - old) - sum_i c_i (old - earlier_i)| (Cartesian, nearest image
    of every atom). One earlier structure: c in [0, 1] (0 when the last move was zero).
    More: a truncated least-squares fit, scaled down when the fitted move would be longer
    than the new move."""
    step = _moves(lattice, old, new)
    columns = np.array([_moves(lattice, e, old) for e in earlier]).T
    norms = np.linalg.norm(columns, axis=0)
    if len(earlier) == 1:
        if norms[0] == 0.0:
            return np.zeros(1)
        return np.array([float(np.clip(step @ columns[:, 0] / norms[0] ** 2, 0.0, 1.0))])
    c = np.zeros(len(earlier))
    use = norms > 0.0
    if not np.any(use):
        return c
    c[use], *_ = np.linalg.lstsq(columns[:, use], step, rcond=_PATH_CUTOFF)
    fitted = float(np.linalg.norm(columns @ c))
    length = float(np.linalg.norm(step))
    if fitted > length > 0.0:
        c *= length / fitted
    return c
