"""The self-consistent field driver: one Kohn-Sham ground state (layer 4).

:func:`prepare` builds everything that stays fixed during the iterations
(symmetry, k-points, bases, FFT plans, ionic potential, Ewald energy);
:func:`scf_step` advances a small explicit :class:`SCFState`; :func:`ground_state`
owns the loop, the stopping rules and the log, and returns a :class:`GroundState`.
"""

from __future__ import annotations

import copy
import dataclasses
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from .basis import PlaneWaveSet, density_sphere, grid_g_vectors, make_basis
from .crystal import Crystal
from .eigensolver import davidson, dense_lowest_eigenpairs
from .electrostatics import ewald_energy, hartree_energy, hartree_potential
from .energies import EnergyTerms, kinetic_energy, local_energy, nonlocal_energy
from .xc_grid import exchange_correlation_on_grid
from .store import load_checkpoint, save_checkpoint
from .errors import ConvergenceError, ConvergenceWarning, InputError
from .fft import FFTGrid, make_fft_grid
from .hamiltonian import KPointHamiltonian, core_density, kinetic_preconditioner, local_potential
from .kpoints import KPointSet, join_by_full_symmetry
from .mixing import (PulayMixer, kerker_preconditioner, model_dielectric_preconditioner,
                     thomas_fermi_wavevector)
from .parallel import (SerialCommunicator, distribute, fft_threads_for, single_threaded_blas,
                       world)
from .occupations import (TOP_BAND_CHARGE_LIMIT, BandEdges, SmearingResult, aufbau_occupations,
                          band_edges, highest_band_charge, smeared_occupations, smearing_scheme)
from .preflight import load_pseudopotentials, plan_ground_state
from .pseudo import nonlocal_operator
from .settings import GroundStateSettings
from .symmetry import SymmetryOperations, make_density_symmetrizer
from .warm_start import WavefunctionStart
from .warm_start import start_wavefunctions as _start_wavefunctions

__all__ = ["SystemSetup", "SCFState", "GroundState", "WavefunctionStart", "prepare", "scf_step",
           "ground_state",
           "load_pseudopotentials", "effective_potential", "bands_at_kpoints"]

Log = Callable[[str], None]


def _nonlocal(crystal: Crystal, pps: dict, basis: PlaneWaveSet):
    """(P, D) of the separable pseudopotentials at one k-point, or (None, None)."""
    atoms = [(tau, pps[s].separable) for s, tau in zip(crystal.species, crystal.cartesian_positions)
             if pps[s].is_nonlocal]
    if not atoms:
        return None, None
    return nonlocal_operator(basis.kpg, atoms, crystal.volume)


@dataclass(frozen=True, eq=False)
class SystemSetup:
    """Everything fixed during the SCF iterations of one crystal and settings."""

    crystal: Crystal
    settings: GroundStateSettings
    pseudopotentials: dict
    functional: object
    symmetry: SymmetryOperations
    kpoints: KPointSet
    grid_shape: tuple[int, int, int]
    fft: FFTGrid
    bases: list[PlaneWaveSet]
    g2: np.ndarray                  # |G|^2 on the grid, bohr^-2
    v_loc_g: np.ndarray             # ionic local potential, Fourier coefficients (Ha)
    v_loc_r: np.ndarray             # the same on the real-space grid
    ewald: float
    n_electrons: float
    n_bands: int
    symmetrize: Callable | None
    nonlocal_ops: list = field(default_factory=list)   # per k: (P, D) or (None, None)
    comm: object = field(default_factory=SerialCommunicator)  # see pwsolid.parallel
    owned: tuple = ()                                  # channel indices this process solves
    n_spin: int = 1
    g_vectors: np.ndarray | None = None               # Cartesian G on the grid, bohr^-1
    core_density: np.ndarray | None = None            # model core density n_c(r) for E_xc, bohr^-3

    @property
    def grid_size(self) -> int:
        return int(np.prod(self.grid_shape))

    @property
    def n_channels(self) -> int:
        """Spin channels times k-points; channel j is spin j // n_k at k-point j % n_k."""
        return self.n_spin * len(self.bases)

    @property
    def channel_weights(self) -> np.ndarray:
        """Weight of each channel (sums to 1); occupations per state run from 0 to 2."""
        return np.tile(self.kpoints.weights, self.n_spin) / self.n_spin

    def channel(self, j: int) -> tuple[int, int]:
        """(spin, k-point index) of channel j."""
        return divmod(j, len(self.bases))

    @property
    def volume(self) -> float:
        return self.crystal.volume


def prepare(crystal: Crystal, settings: GroundStateSettings | None = None, *,
            comm=None, external_potential=None, plane_waves=None) -> SystemSetup:
    """Build the fixed set-up of a ground-state calculation.

    ``comm`` (default: :func:`pwsolid.parallel.world`) spreads the k-points over MPI
    processes; every process holds the whole density and all eigenvalues.

    ``plane_waves`` (one Miller-index array per irreducible k-point, e.g.
    ``[b.miller for b in reference.bases]``) fixes the basis instead of the cutoff
    sphere: a strained copy of a cell then keeps its plane waves (see
    :func:`pwsolid.basis.basis_from_miller`); set ``basis.fft_grid`` alike.

    ``external_potential`` (Ha, on the FFT grid the settings give, or a callable of
    the grid shape returning it) is added to the ionic local potential, e.g. a weak
    cosine to measure the static density response; its energy is then part of the
    ``local_pseudopotential`` term.
    """
    comm = comm if comm is not None else world()
    settings = settings or GroundStateSettings()
    n_spin = 2 if settings.spin_polarized else 1
    # every check before the first iteration lives in the plan (check-input runs it too)
    plan = plan_ground_state(crystal, settings, join_kpoints=join_by_full_symmetry,
                             plane_waves=plane_waves)
    pps, functional, n_el = plan.pseudopotentials, plan.functional, plan.n_electrons
    symmetry, k_list, grid, bases, n_bands = (plan.symmetry, plan.kpoints, plan.grid,
                                              plan.bases, plan.n_bands)
    g = grid_g_vectors(crystal.lattice, grid)
    g2 = np.einsum("...i,...i->...", g, g)
    forms = {s: pp.local for s, pp in pps.items()}
    fft = make_fft_grid(grid, batch=max(1, min(n_bands, 16)), threads=fft_threads_for(grid))
    v_loc_g = local_potential(crystal.lattice, crystal.positions, crystal.species, forms, grid)
    if external_potential is not None:
        v_ext = external_potential(tuple(grid)) if callable(external_potential) else \
            np.asarray(external_potential, float)
        if v_ext.shape != tuple(grid):
            raise InputError(f"the external potential is on a {v_ext.shape} grid, the "
                             f"calculation on {tuple(grid)}", key="external_potential")
        v_loc_g = v_loc_g + fft.field_to_reciprocal(v_ext)
    v_loc_r = fft.field_to_real(v_loc_g).real
    n_core_g = core_density(crystal.lattice, crystal.positions, crystal.species,
                            {s: pp.partial_core for s, pp in pps.items()}, grid)
    n_core = None if n_core_g is None else fft.field_to_real(n_core_g).real
    ewald = (ewald_energy(crystal.lattice, crystal.cartesian_positions,
                          [pps[s].valence for s in crystal.species]) if crystal.n_atoms else 0.0)
    symmetrize = None
    if k_list.operations is not None and k_list.operations.n_ops > 1:
        sphere = density_sphere(crystal.lattice, settings.cutoff, grid)
        symmetrize = make_density_symmetrizer(k_list.operations, grid, sphere)
    return SystemSetup(crystal, settings, pps, functional, symmetry, k_list, tuple(grid), fft,
                       bases, g2, v_loc_g, v_loc_r, ewald, n_el, n_bands, symmetrize,
                       [_nonlocal(crystal, pps, b) for b in bases], comm,
                       tuple(distribute([b.size for b in bases] * n_spin, comm.size, comm.rank)),
                       n_spin, g, n_core)


@dataclass
class SCFState:
    """What changes from one SCF iteration to the next."""

    density: np.ndarray                 # input density n_in(r), bohr^-3
    wavefunctions: list | None = None   # per k: (n_bands, n_pw) complex
    eigenvalues: np.ndarray | None = None
    occupations: np.ndarray | None = None
    output_density: np.ndarray | None = None
    energy: EnergyTerms | None = None
    smearing: SmearingResult | None = None
    residual: float = np.inf
    blas_seconds: float = 0.0
    iteration: int = 0
    applications: int = 0               # single-vector H applications so far
    history: list = field(default_factory=list)
    warm: bool = False                  # started from a neighbouring cell's density
    kinetic_density: np.ndarray | None = None         # meta-GGAs: input tau (mixed like n)
    output_kinetic_density: np.ndarray | None = None  # meta-GGAs: tau of the new orbitals


def effective_potential(setup: SystemSetup, density: np.ndarray,
                        kinetic_density: np.ndarray | None = None) -> np.ndarray:
    """V_eff(r) = V_loc + V_H[n] + V_xc[n] on the FFT grid (Ha), for a density on the grid
    (and, for a meta-GGA, its kinetic-energy density)."""
    return _effective_potential(setup, np.asarray(density, float), kinetic_density)


def bands_at_kpoints(setup: SystemSetup, density: np.ndarray, kpoints_fractional,
                     n_bands: int, *, tolerance: float = 1e-6,
                     progress: Callable[[int, int], None] | None = None,
                     kinetic_density: np.ndarray | None = None) -> np.ndarray:
    """Non-self-consistent eigenvalues (Ha) at arbitrary k-points for a fixed density.

    Parameters
    ----------
    setup
        From :func:`prepare` (gives the cutoff, FFT grid, potentials).
    density
        Density on ``setup.grid_shape`` (usually the self-consistent one).
    kpoints_fractional : (n_k, 3)
        k in units of the reciprocal vectors.
    n_bands
        Bands per k-point.
    progress
        Called as ``progress(done, total)`` after each k-point.
    kinetic_density
        For a meta-GGA: the kinetic-energy density stored with the density (same
        shape); its v_tau enters every Hamiltonian.

    Returns
    -------
    ndarray (n_k, n_bands)
        Eigenvalues in Ha. Each k-point starts from a dense diagonalisation in
        its slowest plane waves, then Davidson converges it to ``tolerance``.
        Under MPI the k-points are spread over the processes of ``setup.comm``
        (contiguous blocks); every process returns all of them.
    """
    from .parallel import map_over_ranks

    s = setup.settings
    k_list = np.atleast_2d(np.asarray(kpoints_fractional, float))
    with single_threaded_blas():
        density = np.asarray(density, float)
        v_eff, v_tau = _potentials(setup, density, _stored_tau(setup, density, kinetic_density))
        v_eff_g = setup.fft.field_to_reciprocal(v_eff)

        def solve(k):
            basis = make_basis(setup.crystal.lattice, k, s.cutoff, setup.grid_shape)
            if basis.size < n_bands:
                raise InputError(f"{n_bands} bands need more plane waves than the {basis.size} "
                                 "of this cutoff", key="basis.cutoff", value=s.cutoff)
            proj, coupling = _nonlocal(setup.crystal, setup.pseudopotentials, basis)
            guess = _initial_guess(basis, v_eff_g, n_bands, setup.grid_shape, proj, coupling)
            ham = KPointHamiltonian(basis, setup.fft, v_eff, proj, coupling,
                                    *_tau_fields(v_tau, 0))
            return davidson(ham.apply, kinetic_preconditioner(basis.kinetic), guess,
                            tolerance=tolerance, max_iterations=200).eigenvalues

        done = []

        def report(index, result, computed_here):
            done.append(index)
            if progress is not None:
                progress(len(done), len(k_list))

        # the k-points are independent: each process solves a contiguous block of
        # them and every process ends with all eigenvalues
        eigenvalues = map_over_ranks(solve, list(k_list), setup.comm, on_result=report)
    return np.array(eigenvalues, dtype=float).reshape(len(k_list), n_bands)


def _effective_potential(setup: SystemSetup, density: np.ndarray, kinetic_density=None):
    """V_eff on the grid: shape (*grid) unpolarised, (2, *grid) for densities (up, down)."""
    return _potentials(setup, density, kinetic_density)[0]


def _potentials(setup: SystemSetup, density: np.ndarray, kinetic_density=None):
    """(V_eff, meta-GGA fields or None): the fields are (v_tau, its Laplacian), each of
    the density's shape."""
    total = density if density.ndim == 3 else density.sum(axis=0)
    n_g = setup.fft.field_to_reciprocal(total)
    v_h = setup.fft.field_to_real(hartree_potential(n_g, setup.g2)).real
    xc = _xc_on_grid(setup, density, kinetic_density)
    v_eff = setup.v_loc_r + v_h + xc.potential
    if xc.tau_potential is None:
        return v_eff, None
    return v_eff, (xc.tau_potential, _laplacian(setup, xc.tau_potential))


def _laplacian(setup: SystemSetup, field_: np.ndarray) -> np.ndarray:
    """Spectral Laplacian of one field or a stack of (up, down) fields."""
    stack = field_ if field_.ndim == 4 else field_[None]
    out = setup.fft.to_real(-setup.g2[None] * setup.fft.to_reciprocal(
        stack.astype(complex))).real
    return out if field_.ndim == 4 else out[0]


def _tau_fields(fields, spin: int) -> tuple:
    """(v_tau, its Laplacian) of one spin channel, or (None, None) without a meta-GGA."""
    if fields is None:
        return None, None
    v_tau, lap = fields
    return (v_tau, lap) if v_tau.ndim == 3 else (v_tau[spin], lap[spin])


def needs_kinetic_density(setup: SystemSetup) -> bool:
    """Whether the set-up's functional is a meta-GGA (needs tau)."""
    return bool(getattr(setup.functional, "needs_kinetic_density", False))


def _stored_tau(setup: SystemSetup, density: np.ndarray, kinetic_density):
    """The kinetic-energy density for a non-self-consistent run (meta-GGAs only)."""
    if not needs_kinetic_density(setup):
        return None
    if kinetic_density is None:
        raise InputError(f"the meta-GGA '{setup.functional.name}' needs the kinetic-energy "
                         "density stored with the density: recompute the ground state (its "
                         "density file then holds both)", key="exchange_correlation.functional",
                         value=setup.functional.name)
    tau = np.asarray(kinetic_density, float)
    if tau.shape != density.shape:
        # a spin-polarised tau with a total density: the total
        tau = tau.sum(axis=0) if tau.ndim == 4 and density.ndim == 3 else tau
    if tau.shape != density.shape:
        raise InputError("the stored kinetic-energy density does not match the density's grid",
                         key="kinetic_density", value=list(tau.shape))
    return tau


def uniform_gas_kinetic_density(density: np.ndarray) -> np.ndarray:
    """tau of a uniform gas of the local (spin) density(ies), a meta-GGA's first guess."""
    from .xc.meta_functional import spin_uniform_kinetic_density

    if density.ndim == 3:
        return 2.0 * spin_uniform_kinetic_density(0.5 * density)
    return spin_uniform_kinetic_density(density)


def _xc_on_grid(setup: SystemSetup, density: np.ndarray, kinetic_density=None,
                energy_only: bool = False):
    """E_xc and V_xc of the valence density plus the model core density (if any).

    A meta-GGA gets the valence kinetic-energy density only (the model core has
    no orbitals)."""
    if setup.core_density is not None:
        # the core is unpolarised: half of it in each spin channel
        density = density + (setup.core_density if density.ndim == 3
                             else 0.5 * setup.core_density[None])
    return exchange_correlation_on_grid(setup.functional, density, setup.fft, setup.g_vectors,
                                        kinetic_density, energy_only=energy_only)


def _channel_potential(v_eff: np.ndarray, spin: int) -> np.ndarray:
    return v_eff if v_eff.ndim == 3 else v_eff[spin]


def _initial_guess(basis: PlaneWaveSet, potential_g: np.ndarray, n_bands: int,
                   shape, projectors=None, coupling=None) -> np.ndarray:
    """Lowest states of H in the slowest plane waves (complete shells), padded into the basis."""
    n_small = min(basis.size, max(3 * n_bands, 60))
    kin = basis.kinetic
    while n_small < basis.size and abs(kin[n_small] - kin[n_small - 1]) < 1e-8:
        n_small += 1
    m = basis.miller[:n_small]
    dm = (m[:, None, :] - m[None, :, :]) % np.array(shape)
    h = potential_g[dm[..., 0], dm[..., 1], dm[..., 2]]
    h[np.diag_indices_from(h)] += kin[:n_small]
    if projectors is not None:
        p = projectors[:, :n_small]
        h += p.T @ coupling @ p.conj()
    _, vecs = dense_lowest_eigenpairs(0.5 * (h + h.conj().T), n_bands)
    guess = np.zeros((n_bands, basis.size), dtype=complex)
    guess[:, :n_small] = vecs
    # a little noise lets the solver leave the small subspace's symmetry sector if needed
    rng = np.random.default_rng(0)
    guess[:, n_small:] = 1e-3 * (rng.standard_normal((n_bands, basis.size - n_small))
                                 / (1 + kin[n_small:]))
    return guess


def _with_more_bands(block: np.ndarray, basis: PlaneWaveSet, n_bands: int) -> np.ndarray:
    """``block`` with extra start rows (random, damped by the kinetic energy like a
    preconditioned residual); the eigensolver orthonormalises them."""
    rng = np.random.default_rng(block.shape[0])
    extra = n_bands - block.shape[0]
    damp = 1.0 / (1.0 + basis.kinetic)
    rows = (rng.standard_normal((extra, basis.size))
            + 1j * rng.standard_normal((extra, basis.size))) * damp
    return np.vstack([block, rows])


def _eigensolver_tolerance(residual: float, iteration: int, warm: bool = False) -> float:
    # Loose while the density is far from self-consistency, tight near the end;
    # the energy error goes as the square of the residual norm. A warm start (the
    # density of a neighbouring cell) is already close: a loose first solve would
    # throw that away (measured on a silicon volume scan: 9 -> 6 iterations a point).
    # When the caller knows how close (``start_residual``), the first solve goes to
    # about that: its own error then adds little to the first density residual.
    if iteration == 1:
        if not warm:
            return 1e-2
        return float(np.clip(residual, 1e-7, _FIRST_TOLERANCE_WARM)) if np.isfinite(residual) \
            else _FIRST_TOLERANCE_WARM
    return float(np.clip(0.05 * residual, 1e-7, 1e-2))


_FIRST_TOLERANCE_WARM = 1e-3
# Davidson steps per SCF iteration after the first: the orbitals carry over from one
# iteration to the next, so a few steps each keep up with the density, and fewer do
# once the density residual is small. Measured (SCF iterations, H applications):
# silicon, 15 Ha, 8x8x8, 7 volumes from scratch: 4 steps throughout, 70 and 154,629;
# 4 then 3 below 1e-4, 70 and 146,294; 4 then 2, 80 and 150,000. The 8-atom aluminium
# supercell of benchmarks/metals_scf.py: 4 throughout, 10 and 36.8 per band; 4 then 3,
# 10 and 35.7; 3 throughout, 18 and 48.4.
_LATE_DAVIDSON_STEPS = 4
_TAIL_DAVIDSON_STEPS = 3
_TAIL_RESIDUAL = 1e-4


def _davidson_steps(residual: float) -> int:
    return _TAIL_DAVIDSON_STEPS if residual < _TAIL_RESIDUAL else _LATE_DAVIDSON_STEPS


def scf_step(setup: SystemSetup, state: SCFState) -> SCFState:
    """One SCF iteration: potential from n_in, eigenstates, occupations, n_out and energy."""
    state.iteration += 1
    meta = needs_kinetic_density(setup)
    if meta and state.kinetic_density is None:
        state.kinetic_density = uniform_gas_kinetic_density(state.density)
    v_eff, v_tau = _potentials(setup, state.density, state.kinetic_density)
    tol = _eigensolver_tolerance(state.residual, state.iteration, state.warm)
    nb = setup.n_bands
    if state.wavefunctions is None:
        state.wavefunctions = [None] * setup.n_channels
    fresh = any(state.wavefunctions[j] is None or state.wavefunctions[j].shape[0] != nb
                for j in setup.owned)
    for j in setup.owned:
        spin, ik = setup.channel(j)
        w = state.wavefunctions[j]
        if w is None:
            v_eff_g = setup.fft.field_to_reciprocal(_channel_potential(v_eff, spin))
            state.wavefunctions[j] = _initial_guess(setup.bases[ik], v_eff_g, nb,
                                                    setup.grid_shape, *setup.nonlocal_ops[ik])
        elif w.shape[0] < nb:                      # bands added by a remedy
            state.wavefunctions[j] = _with_more_bands(w, setup.bases[ik], nb)
    # All bands converge together: converging only the charged ones and polishing the
    # empty ones at the end cost more SCF iterations than it saved (measured on silicon).
    first = fresh or (state.warm and state.iteration == 1)
    steps = 30 if first else _davidson_steps(state.residual)
    eigs, applications = _solve_bands(setup, state, v_eff, tol, steps, nb, v_tau)
    smear, occ = _occupations(setup, eigs)
    n_out = _density(setup, state.wavefunctions, occ)
    tau_out = kinetic_energy_density(setup, state.wavefunctions, occ) if meta else None
    state.output_kinetic_density = tau_out
    energy = _energy(setup, state.wavefunctions, occ, n_out, tau_out)
    residual = float(np.abs(n_out - state.density).sum() / setup.grid_size
                     * setup.volume / setup.n_electrons)
    # With smearing the variational quantity is the free energy F = E - sigma S.
    free = energy.total + (smear.entropy_term if smear is not None else 0.0)
    previous = state.history[-1]["free_energy_Ha"] if state.history else None
    state.eigenvalues, state.occupations, state.output_density = eigs, occ, n_out
    state.energy, state.residual, state.smearing = energy, residual, smear
    state.applications += applications
    if setup.n_spin == 2:
        mag = (n_out[0] - n_out[1]) * setup.volume / n_out[0].size
        extra = {"magnetization": float(mag.sum()), "absolute_magnetization": float(np.abs(mag).sum())}
    else:
        extra = {}
    state.history.append({
        **extra,
        "iteration": state.iteration,
        "total_energy_Ha": energy.total,
        "free_energy_Ha": free,
        "energy_change_Ha": None if previous is None else free - previous,
        "density_residual": residual,
        "eigensolver_tolerance": tol,
        "hamiltonian_applications_per_band": applications / (nb * setup.n_channels),
    })
    return state


def _occupations(setup: SystemSetup, eigenvalues: np.ndarray):
    """(SmearingResult or None, occupations (n_channels, n_bands)), 0..2 per state.

    Channel weights carry the 1/n_spin, so an occupation of 2 in a spin channel is one
    electron per spin orbital times the k-weight. With a fixed magnetization each spin
    channel gets its own Fermi level and N_sigma = (N +- M)/2 electrons.
    """
    s = setup.settings
    nk = len(setup.bases)
    scheme = None
    if s.smearing != "none":
        scheme = smearing_scheme(s.smearing, s.smearing_order if s.smearing == "methfessel-paxton"
                                 else None)
    if setup.n_spin == 2 and (s.fixed_moment is not None or scheme is None):
        moment = s.fixed_moment or 0.0
        counts = (0.5 * (setup.n_electrons + moment), 0.5 * (setup.n_electrons - moment))
        parts = []
        for spin, n_sigma in enumerate(counts):
            block = eigenvalues[spin * nk:(spin + 1) * nk]
            if n_sigma < 1e-12:                      # an empty spin channel
                parts.append((None, np.zeros_like(block)))
            elif scheme is None:
                parts.append((None, aufbau_occupations(nk, setup.n_bands, 2 * n_sigma)))
            else:
                r = smeared_occupations(block, setup.kpoints.weights, 2 * n_sigma, scheme,
                                        s.smearing_width)
                parts.append((r, r.occupations))
        occ = np.concatenate([p[1] for p in parts])
        if scheme is None:
            return None, occ
        results = [p[0] for p in parts if p[0] is not None]
        # each call counted both spins (factor 2): the physical entropy is half the sum;
        # the reported Fermi level is the mean of the two channels' levels
        combined = SmearingResult(occ, float(np.mean([r.fermi_level for r in results])),
                                  0.5 * sum(r.entropy_term for r in results),
                                  0.5 * sum(r.entropy for r in results), results[0].width,
                                  scheme, 0.5 * sum(r.electron_count for r in results))
        return combined, occ
    if scheme is None:
        return None, aufbau_occupations(nk, setup.n_bands, setup.n_electrons)
    r = smeared_occupations(eigenvalues, setup.channel_weights, setup.n_electrons, scheme,
                            s.smearing_width)
    return r, r.occupations


def _mixer(setup: SystemSetup) -> PulayMixer:
    s = setup.settings
    choice = s.mixing_preconditioner
    if choice == "auto":
        choice = ("kerker" if s.smearing != "none"
                  else "model-dielectric" if setup.n_spin == 1 else "none")
    pre = None
    if choice in ("kerker", "model-dielectric"):
        q0 = s.screening_wavevector or thomas_fermi_wavevector(setup.n_electrons / setup.volume)
        pre = _per_channel(kerker_preconditioner(setup.g2, q0) if choice == "kerker" else
                           model_dielectric_preconditioner(setup.g2, s.dielectric_constant, q0),
                           setup.n_spin, needs_kinetic_density(setup))
    weight = s.mixing_weight
    if weight is None:
        # measured on the displaced 8-atom silicon relaxation (benchmarks/relaxation_steps.py):
        # mean SCF iterations of the warm steps 3.25 at 0.6, 2.75 at 1; cold steps 8.9 and 7.1
        weight = 1.0 if choice == "model-dielectric" else 0.6
    return PulayMixer(weight, s.mixing_history, preconditioner=pre)


def _per_channel(precondition, n_spin: int, meta: bool = False):
    """Extend a one-grid preconditioner to (up, down) residuals: it filters the total
    density only; the magnetization passes unchanged, so the moment can still relax.
    With ``meta`` the vector's second half is a meta-GGA's tau, passed unchanged (the
    Kerker filter removes a residual's mean, which tau's must keep; filtering tau alike
    stalled a spin-polarised r2SCAN silicon run that converges in 34 iterations so)."""
    if meta:
        inner = _per_channel(precondition, n_spin)

        def apply_meta(vector):
            density, tau = np.split(np.asarray(vector), 2)
            return np.concatenate([np.ravel(inner(density)), tau])
        return apply_meta
    if n_spin == 1:
        return precondition

    def apply(vector):
        up, down = np.asarray(vector).reshape(2, -1)
        total, moment = precondition(up + down), up - down
        return np.concatenate([0.5 * (total + moment), 0.5 * (total - moment)])
    return apply


def _solve_bands(setup: SystemSetup, state: SCFState, v_eff: np.ndarray, tol: float,
                 max_iterations: int, n_converge: int, v_tau=None) -> tuple[np.ndarray, int]:
    """Davidson at every owned k-point, warm-started from ``state.wavefunctions``;
    the lowest ``n_converge`` bands must meet ``tol``."""
    from .parallel import (apply_by_plane_waves, band_group, collect_columns, plane_wave_slice,
                           share_columns)

    nb = setup.n_bands
    applications = 0
    eigs = np.zeros((setup.n_channels, nb))
    # With more processes than k-points (a Gamma-only supercell), the idle ones
    # join an owner: the group solves the owner's k-points together, each member
    # holding a slice of the plane waves (see parallel.band_group). Alone, the
    # group is this process and every step below is the serial one.
    group, channels = band_group(setup.comm, setup.owned)
    total = group.allreduce_sum if group.size > 1 else None
    if total is not None:   # the owner's limits (a fresh start iterates longer): same steps
        tol, max_iterations, n_converge = group.bcast((tol, max_iterations, n_converge))
    for j in channels:
        spin, ik = setup.channel(j)
        basis = setup.bases[ik]
        ham = KPointHamiltonian(basis, setup.fft, _channel_potential(v_eff, spin),
                                *setup.nonlocal_ops[ik], *_tau_fields(v_tau, spin))
        mine = plane_wave_slice(group, basis.size)
        result = davidson(apply_by_plane_waves(group, basis.size, ham.apply),
                          kinetic_preconditioner(basis.kinetic[mine], total=total),
                          share_columns(group, state.wavefunctions[j] if group.rank == 0 else None),
                          tolerance=tol, max_iterations=max_iterations, n_converge=n_converge,
                          total=total)
        if group.rank == 0:         # the owner keeps the whole vectors; helpers count nothing
            state.wavefunctions[j] = collect_columns(group, result.vectors)
            eigs[j] = result.eigenvalues
            applications += result.n_applications
            state.blas_seconds += result.seconds_blas
        else:
            collect_columns(group, result.vectors)
    return setup.comm.allreduce_sum(eigs), setup.comm.allreduce_sum(applications)


def _density(setup: SystemSetup, wavefunctions, occupations) -> np.ndarray:
    n = np.zeros((setup.n_spin, *setup.grid_shape))
    weights = setup.channel_weights
    for j in setup.owned:
        spin, ik = setup.channel(j)
        f = occupations[j]
        sel = np.abs(f) > 1e-14      # smeared occupations may be slightly negative
        setup.fft.accumulate_density(wavefunctions[j][sel], setup.bases[ik].grid_index,
                                     weights[j] * f[sel], n[spin])
    n = setup.comm.allreduce_sum(n) / setup.volume
    if setup.symmetrize is not None:
        n = np.stack([setup.symmetrize(x) for x in n])
    return n[0] if setup.n_spin == 1 else n


def kinetic_energy_density(setup: SystemSetup, wavefunctions, occupations) -> np.ndarray:
    """tau(r) = 1/2 sum_nk w_k f_nk |grad psi_nk(r)|^2 on the grid (Ha bohr^-3), per spin.

    Each Cartesian component of the gradient is one batched transform of the
    coefficients times (k+G)_a (:meth:`pwsolid.fft.FFTGrid.accumulate_density`);
    symmetrised like the density. Shape (*grid), or (2, *grid) spin-polarised.
    """
    tau = np.zeros((setup.n_spin, *setup.grid_shape))
    weights = setup.channel_weights
    for j in setup.owned:
        spin, ik = setup.channel(j)
        basis = setup.bases[ik]
        f = occupations[j]
        sel = np.abs(f) > 1e-14
        block = wavefunctions[j][sel]
        for a in range(3):
            setup.fft.accumulate_density(block * basis.kpg[:, a], basis.grid_index,
                                         0.5 * weights[j] * f[sel], tau[spin])
    tau = setup.comm.allreduce_sum(tau) / setup.volume
    if setup.symmetrize is not None:
        tau = np.stack([setup.symmetrize(x) for x in tau])
    return tau[0] if setup.n_spin == 1 else tau


def _energy(setup: SystemSetup, wavefunctions, occupations, density,
            kinetic_density=None) -> EnergyTerms:
    total = density if density.ndim == 3 else density.sum(axis=0)
    n_g = setup.fft.field_to_reciprocal(total)
    e_loc, e_g0 = local_energy(setup.v_loc_g, n_g, setup.volume)
    e_xc = _xc_on_grid(setup, density, kinetic_density, energy_only=True).energy(setup.volume)
    own = list(setup.owned)
    ks = [setup.channel(j)[1] for j in own]
    mine = [wavefunctions[j] for j in own]
    occ, w = occupations[own], setup.channel_weights[own]
    band_terms = setup.comm.allreduce_sum(np.array([
        kinetic_energy(mine, [setup.bases[i].kinetic for i in ks], occ, w),
        nonlocal_energy(mine, [setup.nonlocal_ops[i] for i in ks], occ, w)]))
    return EnergyTerms(
        kinetic=float(band_terms[0]),
        local_pseudopotential=e_loc,
        hartree=hartree_energy(n_g, setup.g2, setup.volume),
        exchange_correlation=e_xc,
        ewald=setup.ewald,
        pseudopotential_g0=e_g0,
        nonlocal_pseudopotential=float(band_terms[1]),
    )


@dataclass(frozen=True, eq=False)
class GroundState:
    """The result of a ground-state calculation (atomic units).

    ``as_document()`` in :mod:`pwsolid.results` turns it into the JSON result.
    """

    setup: SystemSetup
    converged: bool
    iterations: int
    energy: EnergyTerms
    eigenvalues: np.ndarray          # (n_k, n_bands) Ha
    occupations: np.ndarray          # (n_k, n_bands)
    density: np.ndarray              # (*grid) bohr^-3, self-consistent output density (total)
    wavefunctions: list
    history: list
    band_edges: BandEdges | None
    smearing: SmearingResult | None
    hamiltonian_applications: int
    wall_seconds: float
    fft_seconds: float
    blas_seconds: float
    messages: tuple[str, ...] = ()
    spin_densities: np.ndarray | None = None   # (2, *grid) up and down, spin-polarised runs
    kinetic_density: np.ndarray | None = None  # meta-GGAs: tau of the final orbitals, like n
    # (SCFState, PulayMixer) at the stop, kept on request (``resumable``) so that
    # ``continue_from`` can carry on to tighter tolerances
    continuation: tuple | None = field(default=None, repr=False)

    @property
    def magnetization(self) -> float | None:
        """Total moment N_up - N_down per cell (spin-polarised runs), else None."""
        if self.spin_densities is None:
            return None
        return float((self.spin_densities[0] - self.spin_densities[1]).mean() * self.crystal.volume)

    @property
    def absolute_magnetization(self) -> float | None:
        """int |n_up - n_down| d^3r per cell (spin-polarised runs), else None."""
        if self.spin_densities is None:
            return None
        return float(np.abs(self.spin_densities[0] - self.spin_densities[1]).mean()
                     * self.crystal.volume)

    @property
    def crystal(self) -> Crystal:
        return self.setup.crystal

    @property
    def settings(self) -> GroundStateSettings:
        return self.setup.settings

    @property
    def kpoints(self) -> KPointSet:
        return self.setup.kpoints

    @property
    def total_energy(self) -> float:
        """Total energy E (Ha); with smearing, E at the smeared occupations."""
        return self.energy.total

    @property
    def free_energy(self) -> float:
        """F = E - sigma S (Ha); equal to E without smearing."""
        return self.energy.total + (self.smearing.entropy_term if self.smearing else 0.0)

    @property
    def zero_width_energy(self) -> float:
        """Estimate of E at vanishing smearing (Ha): the energy to compare structures with."""
        return self.smearing.zero_width_energy(self.energy.total) if self.smearing else self.energy.total

    @property
    def fermi_level(self) -> float | None:
        """Fermi level (Ha) with smearing; None for fixed occupations (see band_edges)."""
        return self.smearing.fermi_level if self.smearing else None

    @property
    def applications_per_band(self) -> float:
        return self.hamiltonian_applications / (self.setup.n_bands * self.setup.n_channels)


def ground_state(crystal: Crystal, settings: GroundStateSettings | None = None, *,
                 log: Log | None = None, initial_density: np.ndarray | None = None,
                 setup: SystemSetup | None = None, checkpoint=None,
                 checkpoint_every: int = 1,
                 initial_wavefunctions: WavefunctionStart | None = None,
                 start_residual: float | None = None,
                 accept_mismatch: bool = False, resumable: bool = False,
                 continue_from: GroundState | None = None) -> GroundState:
    """Self-consistent Kohn-Sham ground state of a crystal.

    Parameters
    ----------
    crystal
        The crystal.
    settings
        Numerical settings (defaults: ``GroundStateSettings()``).
    log
        Called with each line of the live iteration table (``print`` for a terminal).
    initial_density
        Starting density on the FFT grid (default: uniform).
    setup
        A prepared set-up to reuse (must match crystal and settings).
    checkpoint
        Path of a checkpoint file. If it exists and belongs to this calculation the
        run continues from it; it is rewritten every ``checkpoint_every`` iterations
        (atomically), so an interrupted or killed run resumes with the same call.
        A checkpoint of another calculation, or a corrupted one, raises InputError
        (see :mod:`pwsolid.store`).
    initial_wavefunctions
        Orbitals of a neighbouring calculation (``WavefunctionStart.of(result)``),
        e.g. the previous volume of a scan: carried over by Miller index at equal
        k-points (fractional), they replace the first iterations' search from
        scratch. Ignored when the k-points differ; a checkpoint takes precedence.
    start_residual
        Expected density residual of ``initial_density`` (as the history reports
        it), e.g. of an extrapolation from earlier cells: the first eigensolver
        pass is then converged to about that instead of the default 1e-3, so a
        very good start is not spoilt by the error of its first orbitals.
    accept_mismatch
        Continue from a checkpoint of another calculation (e.g. another functional)
        instead of refusing it; the differences are listed in the result's messages.
    resumable
        Keep the SCF's last state and Pulay history in the result (``continuation``),
        for a later ``continue_from``.
    continue_from
        A ``resumable`` result of the same crystal and basis, stopped at looser
        tolerances: the SCF carries on from its last densities, orbitals and Pulay
        history (the iteration count and history continue too) to the tolerances
        of ``setup`` or ``settings``, instead of starting again. Measured on the
        displaced 8-atom silicon relaxation (benchmarks/relaxation_steps.py): the
        confirmation of a loosely converged step took 2-3 iterations instead of
        5-6 from its output density. ``initial_density`` and ``initial_wavefunctions``
        are then ignored.

    Returns
    -------
    GroundState
        With ``converged`` False (and a ConvergenceWarning) if the tolerances
        were not met within ``max_iterations``.

    Notes
    -----
    When the SCF stalls (the density residual has not halved in six iterations),
    documented remedies are tried in turn before giving up, each recorded in the
    result's messages: (1) halve the mixing weight and double the Pulay history;
    (2) halve it again and switch the Kerker preconditioner on; (3) compute more
    bands (a fifth more, at least four).

    Raises
    ------
    ConvergenceError
        When the eigensolver breaks down (non-finite values, loss of orthogonality).
    """
    with single_threaded_blas():
        try:
            return _ground_state(crystal, settings, log, initial_density, setup, checkpoint,
                                 max(1, int(checkpoint_every)), initial_wavefunctions,
                                 start_residual, accept_mismatch, resumable, continue_from)
        except (FloatingPointError, np.linalg.LinAlgError) as exc:
            raise ConvergenceError(
                f"the eigensolver broke down ({exc}); lower self_consistency.mixing_weight or "
                "raise basis.cutoff") from None


_STALL_WINDOW = 6


def _stalled(history: list) -> bool:
    """No halving of the density residual over the last few iterations."""
    if len(history) < 2 * _STALL_WINDOW:
        return False
    recent = min(h["density_residual"] for h in history[-_STALL_WINDOW:])
    before = min(h["density_residual"] for h in history[:-_STALL_WINDOW])
    return recent > 0.5 * before


def _remedy(setup: SystemSetup, mixer: PulayMixer, step: int):
    """The ``step``-th remedy for a stalled SCF: (set-up, mixer, description) or None."""
    s = setup.settings
    if step == 0:
        new = PulayMixer(mixer.weight / 2, min(2 * s.mixing_history, 40),
                         preconditioner=mixer.preconditioner)
        return setup, new, (f"mixing weight {mixer.weight:g} -> {new.weight:g}, Pulay history "
                     f"{s.mixing_history} -> {min(2 * s.mixing_history, 40)}")
    if step == 1:
        q0 = s.screening_wavevector or thomas_fermi_wavevector(setup.n_electrons / setup.volume)
        new = PulayMixer(mixer.weight / 2, min(2 * s.mixing_history, 40),
                         preconditioner=_per_channel(kerker_preconditioner(setup.g2, q0),
                                                     setup.n_spin, needs_kinetic_density(setup)))
        return (setup, new,
                f"mixing weight {mixer.weight:g} -> {new.weight:g} with Kerker preconditioning")
    if step == 2:
        # A band cut at the top of the computed ones (a degenerate partner missing, or
        # a smearing tail) converges slowly in the eigensolver and keeps the density noisy.
        n_new = setup.n_bands + max(4, int(np.ceil(0.2 * setup.n_bands)))
        if n_new > min(b.size for b in setup.bases):
            return None
        return (dataclasses.replace(setup, n_bands=n_new), mixer,
                f"bands {setup.n_bands} -> {n_new}")
    return None


def _mix(state: SCFState, mixer: PulayMixer) -> None:
    """Next input density (and, for a meta-GGA, kinetic-energy density) by Pulay mixing;
    n and tau are one vector, so the extrapolation keeps them consistent."""
    shape = state.density.shape
    if state.output_kinetic_density is None:
        state.density = mixer.mix(state.density.ravel(),
                                  state.output_density.ravel()).reshape(shape)
        return
    size = state.density.size
    mixed = mixer.mix(np.concatenate([state.density.ravel(), state.kinetic_density.ravel()]),
                      np.concatenate([state.output_density.ravel(),
                                      state.output_kinetic_density.ravel()]))
    state.density = mixed[:size].reshape(shape)
    state.kinetic_density = mixed[size:].reshape(shape)


def _spin_start(setup: SystemSetup, density: np.ndarray) -> np.ndarray:
    """Total density -> (up, down) with the starting (or fixed) moment spread uniformly."""
    if setup.n_spin == 1:
        return density if density.ndim == 3 else density.sum(axis=0)
    if density.ndim == 4:
        return density
    s = setup.settings
    moment = s.fixed_moment if s.fixed_moment is not None else s.initial_moment
    m = np.clip(moment / setup.n_electrons, -1.0, 1.0)
    return np.stack([0.5 * (1 + m) * density, 0.5 * (1 - m) * density])


def _resume(setup: SystemSetup, state: SCFState, mixer: PulayMixer, path,
            accept_mismatch: bool = False) -> tuple[str, ...]:
    """Continue from a checkpoint (refused with InputError if it is not this calculation's,
    unless ``accept_mismatch``); returns the accepted differences."""
    record = load_checkpoint(path, setup, accept_mismatch=accept_mismatch)
    arrays, meta = record.arrays, record.metadata
    state.density = arrays["density"]
    state.kinetic_density = arrays.get("kinetic_density")
    state.iteration = int(meta["iteration"])
    state.applications = int(meta.get("applications", 0))
    state.history = list(meta.get("history", []))
    if len(arrays["mixer_inputs"]):
        mixer.restore_history(arrays["mixer_inputs"], arrays["mixer_residuals"])
    nk = setup.n_channels
    if all(f"wavefunctions_{ik}" in arrays for ik in range(nk)) and setup.comm.size == 1:
        waves = [arrays[f"wavefunctions_{ik}"] for ik in range(nk)]
        sizes = [setup.bases[setup.channel(j)[1]].size for j in range(nk)]
        if all(w.shape == (setup.n_bands, n) for w, n in zip(waves, sizes)):
            state.wavefunctions = waves
            state.eigenvalues = arrays.get("eigenvalues")
    if state.history:
        state.residual = float(state.history[-1]["density_residual"])
    return record.mismatches


def _ground_state(crystal, settings, log, initial_density, setup, checkpoint,
                  checkpoint_every, initial_wavefunctions=None,
                  start_residual=None, accept_mismatch=False, resumable=False,
                  continue_from=None) -> GroundState:
    t_start = time.perf_counter()
    setup = setup or prepare(crystal, settings)
    s = setup.settings
    setup.fft.reset_counters()
    if initial_density is not None:
        density = np.array(initial_density, float)
        if density.shape[-3:] != setup.grid_shape:
            raise InputError("the starting density is on a different FFT grid",
                             key="initial_density", value=list(density.shape))
    else:
        density = np.full(setup.grid_shape, setup.n_electrons / setup.volume)
    density = _spin_start(setup, density)
    mixer = _mixer(setup)
    state = SCFState(density=density, warm=initial_density is not None)
    if start_residual is not None and state.warm:
        state.residual = float(start_residual)
    if initial_wavefunctions is not None:
        state.wavefunctions = _start_wavefunctions(setup, initial_wavefunctions)
    if continue_from is not None:
        state, mixer = _continued(continue_from)
    emit = log or (lambda line: None)
    messages = []
    if checkpoint is not None and Path(checkpoint).exists():
        accepted = _resume(setup, state, mixer, checkpoint, accept_mismatch)
        messages.append(f"resumed from {checkpoint} after iteration {state.iteration}")
        messages.extend(f"the checkpoint was made for another calculation, accepted on "
                        f"request: {d}" for d in accepted)
        emit(f"resuming from {checkpoint} after iteration {state.iteration}")
    label = "free energy (Ha)" if s.smearing != "none" else "total energy (Ha)"
    emit(f"{'iter':>4} {label:>20} {'change (Ha)':>12} {'density res.':>12} "
         f"{'H/band':>7} {'seconds':>8}")
    converged = False
    remedies = 0
    stall_base = len(state.history)
    while state.iteration < s.max_iterations:
        t0 = time.perf_counter()
        state = scf_step(setup, state)
        rec = state.history[-1]
        rec["seconds"] = time.perf_counter() - t0
        change = rec["energy_change_Ha"]
        emit(f"{rec['iteration']:>4} {rec['free_energy_Ha']:>20.10f} "
             f"{'' if change is None else f'{change:12.3e}':>12} {rec['density_residual']:>12.3e} "
             f"{rec['hamiltonian_applications_per_band']:>7.2f} {rec['seconds']:>8.2f}")
        if (change is not None and abs(change) < s.energy_tolerance
                and state.residual < s.density_tolerance):
            converged = True
            break
        # a remedy needs iterations to act: none is started on the last one
        if state.iteration < s.max_iterations and _stalled(state.history[stall_base:]):
            fix = _remedy(setup, mixer, remedies)
            if fix is not None:
                setup, mixer, what = fix
                remedies += 1
                stall_base = len(state.history)
                note = f"SCF stalled at iteration {state.iteration}; remedy {remedies}: {what}"
                messages.append(note)
                emit(note)
        _mix(state, mixer)
        if checkpoint is not None and setup.comm.rank == 0 and state.iteration % checkpoint_every == 0:
            save_checkpoint(checkpoint, setup, state, mixer)
    if not converged:
        tried = f" after {remedies} remedies (see above)" if remedies else ""
        msg = (f"SCF not converged after {state.iteration} iterations{tried} (last energy "
               f"change {state.history[-1]['energy_change_Ha']}, density residual "
               f"{state.residual:.2e}); raise self_consistency.max_iterations, lower "
               "self_consistency.mixing_weight, or for a metal set occupations.smearing")
        messages.append(msg)
        warnings.warn(msg, ConvergenceWarning, stacklevel=2)
    edges = None
    if state.smearing is None:
        edges = band_edges(state.eigenvalues, state.occupations)
        if edges.gap is not None and edges.gap < 0:
            msg = ("the lowest unoccupied level lies below the highest occupied one: this system "
                   "is a metal, and fixed integer occupations do not describe it; set "
                   "occupations.smearing (e.g. \"cold\")")
            messages.append(msg)
            warnings.warn(msg, ConvergenceWarning, stacklevel=2)
    else:
        top = highest_band_charge(state.occupations, setup.channel_weights)
        if top > TOP_BAND_CHARGE_LIMIT:
            msg = (f"the highest computed band still holds {top:.1e} electrons: the smearing "
                   "tail is cut off; raise self_consistency.empty_bands")
            messages.append(msg)
            warnings.warn(msg, ConvergenceWarning, stacklevel=2)
    return GroundState(
        setup=setup, converged=converged, iterations=state.iteration, energy=state.energy,
        eigenvalues=state.eigenvalues, occupations=state.occupations,
        density=(state.output_density if setup.n_spin == 1 else state.output_density.sum(axis=0)),
        spin_densities=None if setup.n_spin == 1 else state.output_density,
        kinetic_density=state.output_kinetic_density,
        wavefunctions=state.wavefunctions, history=state.history,
        band_edges=edges, smearing=state.smearing, hamiltonian_applications=state.applications,
        wall_seconds=time.perf_counter() - t_start, fft_seconds=setup.fft.seconds,
        blas_seconds=state.blas_seconds, messages=tuple(messages),
        continuation=(state, mixer) if resumable else None)


def next_input_density(result: GroundState) -> np.ndarray | None:
    """The density a ``resumable`` result's SCF would have tried next (its last output
    Pulay-mixed with the history; (2, ...) spin densities when spin-polarised), or None.
    Nearer self-consistency than the output density, whose error in an insulator is
    the input's amplified by the dielectric response: a better start for a neighbour."""
    if result.continuation is None:
        return None
    return _continued(result)[0].density


def _continued(result: GroundState) -> tuple[SCFState, PulayMixer]:
    """A copy of the state and mixer a ``resumable`` result stopped with, mixed once (the
    SCF stops before mixing its last output), to carry on from."""
    if result.continuation is None:
        raise ValueError("continue_from needs a result of ground_state(..., resumable=True)")
    state, mixer = result.continuation
    state = dataclasses.replace(state, history=[dict(h) for h in state.history],
                                wavefunctions=list(state.wavefunctions))
    mixer = copy.deepcopy(mixer)
    _mix(state, mixer)
    return state, mixer
