"""Every check a ground state makes before its first iteration, and what it will cost
(layer 4).

:func:`plan_ground_state` counts the electrons, checks the spin moments and the filling
against that count, estimates memory and time from the plane-wave counts, bands,
k-points and FFT grid (refusing what cannot fit the machine), and builds the k-points
and plane-wave sets. :func:`pwsolid.scf.prepare` starts from this plan, and
``pwsolid check-input`` runs exactly it, so whatever ``check-input`` accepts the run
accepts too.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass

import numpy as np

from . import xc as _xc
from .basis import PlaneWaveSet, basis_from_miller, fft_grid_for_cutoff, make_basis
from .crystal import Crystal
from .errors import InputError
from .kpoints import KPointSet, irreducible_kpoints, join_by_full_symmetry
from .pseudo import (Pseudopotential, default_pseudopotential_file, load_pseudopotential,
                     resolve_pseudopotential)
from .settings import NO_SMEARING, GroundStateSettings, check_electron_count
from .symmetry import SymmetryOperations, find_symmetry, identity_only, reduced_lattice
from .units import BOHR_ANGSTROM

__all__ = ["ResourceEstimate", "GroundStatePlan", "plan_ground_state", "load_pseudopotentials",
           "count_electrons", "band_count", "estimate_resources", "available_memory",
           "check_cell_shape", "SKEWED_GRID_FACTOR", "LONG_RUN_SECONDS"]

#: A cell whose FFT grid is this many times larger than that of its reduced
#: equivalent is refused: the extra grid points cost time and memory for nothing.
SKEWED_GRID_FACTOR = 2.0

#: Runs estimated to take longer than this (seconds) print their estimate first.
LONG_RUN_SECONDS = 60.0

# Rough costs behind the estimate (common practice for plane-wave codes, calibrated
# loosely on this program's silicon benchmark): about 3 wave-function blocks alive per
# channel (orbitals, Davidson residuals and their H-images), 30 real fields on the grid
# (densities, potentials, mixer history, G-vectors), a flop rate of 3e9 per second, about
# 12 Hamiltonian applications per band and 15 iterations.
_BLOCKS_PER_CHANNEL = 4
_GRID_FIELDS = 40
_FLOPS_PER_SECOND = 3.0e9
_APPLICATIONS_PER_BAND = 12
_ITERATIONS = 15


def load_pseudopotentials(species, choices) -> dict[str, Pseudopotential]:
    """One Pseudopotential per species: given objects, given files, or the bundled default."""
    out = {}
    for s in dict.fromkeys(species):
        choice = choices.get(s)
        if isinstance(choice, Pseudopotential):
            pp = choice
        else:
            path = (default_pseudopotential_file(s) if choice is None
                    else resolve_pseudopotential(s, choice))
            pp = load_pseudopotential(path)
        if pp.element != s:
            raise InputError(f"the file is for element {pp.element}, not {s}",
                             key=f"pseudopotentials.{s}", value=str(pp.source_file))
        out[s] = pp
    return out


def count_electrons(crystal: Crystal, settings: GroundStateSettings, pps: dict) -> float:
    """Valence electrons per cell: the pseudo-ions' valences plus background electrons."""
    return float(sum(pps[s].valence for s in crystal.species)) + settings.background_electrons


def band_count(settings: GroundStateSettings, n_electrons: float) -> int:
    """Bands computed per k-point and spin: the occupied ones and the empty margin.

    A fixed spin moment M fills (N + |M|)/2 states of the majority spin; when that is
    more than the N/2 occupied bands, at least two bands beyond it are computed.
    """
    n_occ = int(np.ceil(n_electrons / 2 - 1e-8))
    empty = settings.empty_bands
    if empty is None:
        empty = 4 if settings.smearing == NO_SMEARING else 4 + int(np.ceil(0.2 * n_occ))
    n_bands = n_occ + empty
    if settings.spin_polarized and settings.fixed_moment:
        n_major = int(np.ceil((n_electrons + abs(settings.fixed_moment)) / 2 - 1e-8))
        if n_major > n_occ:
            n_bands = max(n_bands, n_major + 2)
    return n_bands


@dataclass(frozen=True)
class ResourceEstimate:
    """What a ground state will roughly need, known before any array is made.

    Attributes
    ----------
    memory_bytes : float
        Peak memory of the wave functions, grid fields and projectors (bytes).
    seconds : float
        Rough wall time of a full SCF (about 15 iterations) on one core.
    plane_waves : int
        Plane waves per k-point (estimated from the cutoff sphere).
    channels : int
        k-points times spin channels.
    bands : int
        Bands per channel.
    grid : tuple of 3 int
        FFT grid.
    """

    memory_bytes: float
    seconds: float
    plane_waves: int
    channels: int
    bands: int
    grid: tuple

    def describe(self) -> str:
        """One line for the user: memory and time with what they come from."""
        return (f"estimated memory {_bytes_text(self.memory_bytes)}, time about "
                f"{_seconds_text(self.seconds)} ({self.plane_waves} plane waves x {self.bands} "
                f"bands x {self.channels} k-points and spins, FFT grid "
                f"{'x'.join(map(str, self.grid))})")


def _bytes_text(n: float) -> str:
    for unit, size in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6)):
        if n >= size:
            return f"{n / size:.3g} {unit}"
    return f"{n / 1e3:.3g} kB"


def _seconds_text(s: float) -> str:
    if s >= 3600:
        return f"{s / 3600:.3g} hours"
    if s >= 60:
        return f"{s / 60:.3g} minutes"
    return f"{max(s, 0.1):.2g} s"


def estimate_resources(crystal: Crystal, settings: GroundStateSettings, n_kpoints: int,
                       n_bands: int, grid) -> ResourceEstimate:
    """Memory and time of a ground state from plane-wave count, bands, k-points and grid.

    Notes
    -----
    The plane waves inside the cutoff sphere number about
    N_pw = Omega k_c^3 / (6 pi^2) with k_c = sqrt(2 E_cut) (the sphere's volume over the
    reciprocal cell's, (2 pi)^3 / Omega). Memory: a few complex (16-byte) blocks of
    N_pw x N_bands per channel, a few tens of real fields and one complex FFT batch on
    the grid. Time: each Hamiltonian application costs two FFTs of about
    5 N_grid log2 N_grid flops plus the subspace work 8 N_pw N_bands^2.
    """
    k_c = math.sqrt(2.0 * settings.cutoff)
    n_pw = max(1, int(crystal.volume * k_c ** 3 / (6.0 * math.pi ** 2)))
    channels = n_kpoints * (2 if settings.spin_polarized else 1)
    n_grid = float(np.prod(grid))
    waves = 16.0 * n_pw * n_bands * channels * _BLOCKS_PER_CHANNEL
    fields = n_grid * (8.0 * _GRID_FIELDS + 16.0 * min(n_bands, 16) * 2)
    memory = waves + fields + 50e6          # the interpreter and libraries
    fft = 2 * 5.0 * n_grid * math.log2(max(n_grid, 2.0))
    per_application = fft + 8.0 * n_pw * n_bands
    flops = _ITERATIONS * channels * n_bands * _APPLICATIONS_PER_BAND * per_application
    return ResourceEstimate(memory, flops / _FLOPS_PER_SECOND, n_pw, channels, n_bands,
                            tuple(int(g) for g in grid))


def available_memory() -> float | None:
    """Memory the system can give this process now (bytes), or None if unknown."""
    try:
        with open("/proc/meminfo") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024.0
    except OSError:
        pass
    try:
        return float(os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE"))
    except (ValueError, OSError, AttributeError):
        return None


def _check_fits(estimate: ResourceEstimate, settings: GroundStateSettings) -> None:
    free = available_memory()
    if free is not None and estimate.memory_bytes > free:
        raise InputError(f"this calculation does not fit the memory of this machine: "
                         f"{estimate.describe()}, but only {_bytes_text(free)} is available; "
                         "lower the cutoff, the k-point mesh or the cell size",
                         key="basis.cutoff", value=f"{settings.cutoff:g} Ha")


def check_cell_shape(lattice: np.ndarray, settings: GroundStateSettings) -> None:
    """Refuse a cell so skewed that its FFT grid is far larger than an equivalent cell's."""
    if settings.fft_grid is not None:
        return
    grid = fft_grid_for_cutoff(lattice, settings.cutoff)
    reduced = reduced_lattice(lattice)
    better = fft_grid_for_cutoff(reduced, settings.cutoff)
    if np.prod(grid) > SKEWED_GRID_FACTOR * np.prod(better):
        rows = "; ".join("[" + ", ".join(f"{x * BOHR_ANGSTROM:.6f}" for x in r) + "]"
                         for r in reduced)
        raise InputError(
            f"the cell is too skewed for the FFT grid: its vectors need a "
            f"{'x'.join(map(str, grid))} grid, an equivalent reduced cell only "
            f"{'x'.join(map(str, better))}; give the reduced lattice vectors (angstrom) "
            f"{rows} and the atoms in fractional coordinates of that cell",
            key="crystal.lattice_vectors", value=np.round(lattice * BOHR_ANGSTROM, 6).tolist())


def _symmetry_of(crystal: Crystal) -> SymmetryOperations:
    """Space group of the crystal; a cell without atoms (jellium) has its lattice's symmetry."""
    if crystal.n_atoms:
        return find_symmetry(crystal)
    return find_symmetry(Crystal(crystal.lattice, ("H",), [[0.0, 0.0, 0.0]]))


@dataclass(frozen=True, eq=False)
class GroundStatePlan:
    """The checked, cheap part of a ground-state set-up (see :func:`plan_ground_state`)."""

    pseudopotentials: dict
    functional: object
    n_electrons: float
    symmetry: SymmetryOperations
    kpoints: KPointSet
    grid: tuple
    bases: list[PlaneWaveSet]
    n_bands: int
    estimate: ResourceEstimate


def plan_ground_state(crystal: Crystal, settings: GroundStateSettings, *,
                      join_kpoints=join_by_full_symmetry,
                      plane_waves=None) -> GroundStatePlan:
    """Run every check of a ground state that comes before its first iteration.

    Loads the pseudopotentials and the functional, counts the electrons and checks the
    moments and the filling against them, estimates memory and time and refuses what
    cannot fit the available memory, then builds the k-points and plane-wave sets
    (checking a forced FFT grid and the number of plane waves against the bands).
    ``join_kpoints(kpoints, symmetry)`` completes a mesh that the full group does not
    keep (the driver passes its own, so that a test can switch it off).
    ``plane_waves`` (one Miller-index array per irreducible k-point) fixes the basis
    instead of the cutoff sphere (see :func:`pwsolid.scf.prepare`).

    Raises
    ------
    InputError
        Naming the key to change, for the first problem found.
    """
    pps = load_pseudopotentials(crystal.species, settings.pseudopotentials)
    functional = _xc.get_functional(settings.functional)
    n_el = count_electrons(crystal, settings, pps)
    check_electron_count(settings, n_el)
    symmetry = _symmetry_of(crystal) if settings.use_symmetry else identity_only()
    k_list = irreducible_kpoints(settings.kpoint_mesh, settings.kpoint_shift,
                                 symmetry if settings.use_symmetry else None,
                                 time_reversal=settings.use_symmetry)
    if settings.use_symmetry:
        # a mesh the full group does not keep: symmetrise with the full group anyway
        k_list = join_kpoints(k_list, symmetry)
    grid = tuple(settings.fft_grid or fft_grid_for_cutoff(crystal.lattice, settings.cutoff))
    n_bands = band_count(settings, n_el)
    estimate = estimate_resources(crystal, settings, len(k_list.fractional), n_bands, grid)
    _check_fits(estimate, settings)
    if plane_waves is not None and len(plane_waves) != len(k_list.fractional):
        raise ValueError(f"{len(plane_waves)} plane-wave sets for {len(k_list.fractional)} "
                         "k-points")
    try:
        if plane_waves is None:
            bases = [make_basis(crystal.lattice, k, settings.cutoff, grid)
                     for k in k_list.fractional]
        else:
            bases = [basis_from_miller(crystal.lattice, k, m, grid)
                     for k, m in zip(k_list.fractional, plane_waves)]
    except ValueError as exc:
        raise InputError(f"{exc}; use a larger grid or remove the setting",
                         key="basis.fft_grid", value=list(grid)) from None
    smallest = min(b.size for b in bases)
    if n_bands > smallest:
        raise InputError(f"{n_bands} bands need at least as many plane waves, but a k-point has "
                         f"only {smallest}; raise the cutoff", key="basis.cutoff",
                         value=settings.cutoff)
    return GroundStatePlan(pps, functional, n_el, symmetry, k_list, grid, bases, n_bands,
                           estimate)
