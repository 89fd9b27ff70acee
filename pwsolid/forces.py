"""Forces on the atoms: analytic derivatives of the (free) energy (layer 4).

By the Hellmann-Feynman theorem the force on atom I is the expectation value of
-dH/dR_I in the self-consistent state: the orbitals, occupations and density are
stationary points of the energy (of the free energy F = E - sigma S with smearing,
whose occupations are variational too), so their response to the displacement drops
out. Plane waves do not move with the atoms, so there is no basis (Pulay) force.
What is left are the terms of the energy that depend on the positions explicitly:

* the local pseudopotential, through the structure factor exp(-i G . tau);
* the separable projectors, through their phases exp(-i (k+G) . tau);
* the ion-ion Ewald energy;
* the partial core density in exchange and correlation (nonlinear core correction).

The G = 0 term ``pseudopotential_g0`` = (N_electrons / Omega) sum_atoms w_s(0) does not
depend on where the atoms are (only on how many of each species the cell holds), so
it gives no force.

References
----------
H. Hellmann, Einfuehrung in die Quantenchemie (Deuticke, Leipzig, 1937);
R. P. Feynman, Phys. Rev. 56, 340 (1939).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .basis import grid_miller_indices
from .electrostatics import ewald_forces
from .parallel import single_threaded_blas
from .scf import GroundState, SystemSetup, _xc_on_grid
from .symmetry import SymmetryOperations, atom_permutations
from .units import BOHR_ANGSTROM, HARTREE_EV

__all__ = ["AtomicForces", "atomic_forces", "structure_factor_forces", "nonlocal_forces",
           "symmetrize_forces"]

#: One Ha/bohr in eV/angstrom.
EV_PER_ANGSTROM = HARTREE_EV / BOHR_ANGSTROM

_PARTS = ("local", "nonlocal", "ewald", "partial_core")


@dataclass(frozen=True, eq=False)
class AtomicForces:
    """Forces on every atom of a ground state (Ha/bohr, Cartesian).

    Attributes
    ----------
    cartesian : ndarray (n_atoms, 3) float, Ha/bohr
        The total force, symmetrised with the crystal's operations when asked.
    parts : dict of str -> ndarray (n_atoms, 3), Ha/bohr
        ``"local"``, ``"nonlocal"``, ``"ewald"``, ``"partial_core"`` (unsymmetrised;
        a part the crystal lacks is zero). When symmetry reduced the k-mesh, the
        separable part is a sum over the irreducible k-points only, which only the
        group average turns into the full-mesh force.
    net : ndarray (3,) float, Ha/bohr
        Sum over the atoms of the unsymmetrised total: zero but for the "egg-box"
        error of exchange-correlation on the grid (translation invariance), which
        falls with the cutoff, so its size is a health check of the calculation.
    species : tuple of str
        Element of each atom.
    symmetrized : bool
        Whether ``cartesian`` was averaged over more than the identity.
    """

    cartesian: np.ndarray
    parts: dict = field(default_factory=dict)
    net: np.ndarray = field(default_factory=lambda: np.zeros(3))
    species: tuple = ()
    symmetrized: bool = False

    @property
    def largest(self) -> float:
        """Largest |F_I| over the atoms (Ha/bohr)."""
        if not len(self.cartesian):
            return 0.0
        return float(np.max(np.linalg.norm(self.cartesian, axis=1)))

    def as_document(self) -> dict:
        """JSON block: per-atom forces in Ha/bohr and eV/angstrom, largest and net force."""
        atoms = [{"index": i + 1, "species": s,
                  "force_Ha_per_bohr": [float(x) for x in f],
                  "force_eV_per_angstrom": [float(x) * EV_PER_ANGSTROM for x in f]}
                 for i, (s, f) in enumerate(zip(self.species, self.cartesian))]
        return {
            "atoms": atoms,
            "largest_force_Ha_per_bohr": self.largest,
            "largest_force_eV_per_angstrom": self.largest * EV_PER_ANGSTROM,
            "net_force_Ha_per_bohr": [float(x) for x in self.net],
            "net_force_eV_per_angstrom": [float(x) * EV_PER_ANGSTROM for x in self.net],
            "symmetrized": self.symmetrized,
            "parts_Ha_per_bohr": {k: np.asarray(v, float).tolist() for k, v in self.parts.items()},
        }

    def summary_lines(self) -> list[str]:
        """Screen lines: the force on each atom, the largest force and the net force."""
        lines = [f"{'force on atom':<16}{'x':>12}{'y':>12}{'z':>12}   eV/angstrom"]
        for i, (s, f) in enumerate(zip(self.species, self.cartesian)):
            x, y, z = f * EV_PER_ANGSTROM
            lines.append(f"{i + 1:>5} {s:<10}{x:>12.6f}{y:>12.6f}{z:>12.6f}")
        lines.append(f"largest force   {self.largest * EV_PER_ANGSTROM:.6f} eV/angstrom "
                     f"({self.largest:.3e} Ha/bohr)")
        net = float(np.linalg.norm(self.net))
        lines.append(f"net force       {net * EV_PER_ANGSTROM:.3e} eV/angstrom "
                     f"({net:.3e} Ha/bohr; zero up to numerical error)")
        return lines


def structure_factor_forces(g_vectors: np.ndarray, miller: np.ndarray, field_g: np.ndarray,
                            form_factors: list, fractional_positions: np.ndarray) -> np.ndarray:
    """Forces from a term Re sum_G W(G)* sum_I f_I(|G|) exp(-i G . tau_I).

    Parameters
    ----------
    g_vectors : (n_G, 3) float, bohr^-1
        Cartesian G of the grid.
    miller : (n_G, 3) int
        The same G as Miller indices (exact phases exp(2 pi i m . x)).
    field_g : (n_G,) complex
        W(G): the density n(G) (bohr^-3) for the local pseudopotential, the
        exchange-correlation potential V_xc(G) (Ha) for the partial core.
    form_factors : list of (n_G,) float or None, one per atom
        f_I(|G|) of the atom's species (Ha bohr^3 or electrons); None for an atom
        that does not take part.
    fractional_positions : (n_atoms, 3) float

    Returns
    -------
    ndarray (n_atoms, 3) float, Ha/bohr

    Notes
    -----
    E = Re sum_G W(G)* sum_I f_I(|G|) exp(-i G . tau_I) gives
    F_I = -dE/dtau_I = sum_G G f_I(|G|) Im[exp(i G . tau_I) W(G)].
    The G = 0 term carries the factor G = 0: the finite G = 0 parts of the
    pseudopotentials depend on no position.
    """
    forces = np.zeros((len(form_factors), 3))
    for i, (f, x) in enumerate(zip(form_factors, np.asarray(fractional_positions, float))):
        if f is None:
            continue
        phase = np.exp(2j * np.pi * (miller @ x))
        forces[i] = (f * (phase * field_g).imag) @ g_vectors
    return forces


def nonlocal_forces(coefficients: np.ndarray, weights: np.ndarray, projectors: np.ndarray,
                    coupling: np.ndarray, kpg: np.ndarray, owner: np.ndarray,
                    n_atoms: int) -> np.ndarray:
    """Forces of the separable pseudopotential from the bands of one k-point.

    Parameters
    ----------
    coefficients : (n_bands, n_pw) complex
        Normalised plane-wave coefficients c_n(G).
    weights : (n_bands,) float
        k-point weight times occupation of each band.
    projectors : (n_proj, n_pw) complex
        P[a, G] = <k+G|p_a> of every projector (phase exp(-i (k+G) . tau) included).
    coupling : (n_proj, n_proj) float, Ha
        The block-diagonal h_ab (symmetric).
    kpg : (n_pw, 3) float, bohr^-1
        Cartesian k + G.
    owner : (n_proj,) int
        Index of the atom each projector sits on.
    n_atoms : int

    Returns
    -------
    ndarray (n_atoms, 3) float, Ha/bohr

    Notes
    -----
    With b_na = sum_G c_n(G) P[a, G]*, E_nl = sum_n w_n sum_ab b_na* h_ab b_nb; only
    the phase of P depends on tau, dP[a, G]/dtau = -i (k+G) P[a, G], so
    db_na/dtau = sum_G c_n(G) i (k+G) P[a, G]* and
    F_I = -2 Re sum_n w_n sum_{a on I} (db_na/dtau)* (b h)_na.
    """
    p_conj = projectors.conj().T                                   # (n_pw, n_proj)
    bh = (coefficients @ p_conj) @ coupling.T                       # (nb, n_proj)
    per_projector = np.empty((3, projectors.shape[0]))
    for x in range(3):               # three BLAS-3 products, one per direction
        db = (coefficients * (1j * kpg[:, x])[None, :]) @ p_conj
        per_projector[x] = -2.0 * np.einsum("n,na,na->a", weights, db.conj(), bh).real
    forces = np.zeros((n_atoms, 3))
    np.add.at(forces, owner, per_projector.T)
    return forces


def symmetrize_forces(forces: np.ndarray, operations: SymmetryOperations, lattice: np.ndarray,
                      fractional_positions: np.ndarray, species) -> np.ndarray:
    """Group average of a set of atomic vectors (Cartesian).

    Notes
    -----
    An operation x' = W x + t sends atom i to atom j = perm(i) and turns a Cartesian
    vector by R = A^T W A^-T (A: lattice vectors as rows); the average is
    F_j = (1/N_ops) sum_ops R F_{perm^-1(j)}.
    """
    perm = atom_permutations(operations, fractional_positions, species)
    a_t = np.asarray(lattice, float).T
    rot = np.einsum("xy,oyz,zw->oxw", a_t, operations.rotations.astype(float), np.linalg.inv(a_t))
    turned = np.einsum("oxy,iy->oix", rot, forces)
    out = np.zeros_like(forces, dtype=float)
    np.add.at(out, perm.ravel(), turned.reshape(-1, 3))
    return out / operations.n_ops


def atomic_forces(gs: GroundState, *, symmetrize: bool = True) -> AtomicForces:
    """Hellmann-Feynman forces on every atom of a converged ground state.

    Parameters
    ----------
    gs : GroundState
        A (converged) ground state; the forces are those of its output density and
        orbitals, accurate to first order in the SCF residual.
    symmetrize : bool
        Average the total over the crystal's space-group operations (those the
        calculation found; none when it ran with ``use_symmetry=False``). Keep it on
        for a run on a symmetry-reduced k-mesh: its separable term is a sum over the
        irreducible k-points, which is the full-mesh force only after the average.

    Returns
    -------
    AtomicForces
        F_I = -dF/dR_I in Ha/bohr, F the free energy (the total energy without smearing).

    References
    ----------
    R. P. Feynman, Phys. Rev. 56, 340 (1939).
    """
    setup = gs.setup
    crystal = setup.crystal
    parts = {name: np.zeros((crystal.n_atoms, 3)) for name in _PARTS}
    if crystal.n_atoms:
        parts["local"], parts["partial_core"] = _grid_forces(gs)
        # small matrix products: BLAS threads only fight each other (see pwsolid.parallel)
        with single_threaded_blas():
            parts["nonlocal"] = _nonlocal_forces(gs)
        parts["ewald"] = ewald_forces(crystal.lattice, crystal.cartesian_positions,
                                      [setup.pseudopotentials[s].valence for s in crystal.species])
    total = sum(parts.values())
    ops = setup.symmetry
    symmetrized = bool(symmetrize and crystal.n_atoms and ops.n_ops > 1)
    cartesian = (symmetrize_forces(total, ops, crystal.lattice, crystal.positions, crystal.species)
                 if symmetrized else total.copy())
    return AtomicForces(cartesian, parts, total.sum(axis=0), tuple(crystal.species), symmetrized)


def _grid_forces(gs: GroundState) -> tuple[np.ndarray, np.ndarray]:
    """(local pseudopotential, partial core) forces from fields on the FFT grid."""
    setup: SystemSetup = gs.setup
    crystal = setup.crystal
    g = setup.g_vectors.reshape(-1, 3)
    q = np.linalg.norm(g, axis=1)
    miller = grid_miller_indices(setup.grid_shape).reshape(-1, 3)
    pps = setup.pseudopotentials
    # E_loc = Omega Re sum_G V_loc(G)* n(G) with V_loc(G) = (1/Omega) sum_I v_s(|G|) S_I(G)
    local_ff = {s: pps[s].local.form_factor(q) for s in dict.fromkeys(crystal.species)}
    n_g = setup.fft.field_to_reciprocal(gs.density).ravel()
    local = structure_factor_forces(g, miller, n_g, [local_ff[s] for s in crystal.species],
                                    crystal.positions)
    if setup.core_density is None:
        return local, np.zeros_like(local)
    # dE_xc = int V_xc dn_c; with spin each channel holds half the core (scf._xc_on_grid)
    density = gs.density if gs.spin_densities is None else gs.spin_densities
    v_xc = _xc_on_grid(setup, density, getattr(gs, "kinetic_density", None)).potential
    if v_xc.ndim == 4:
        v_xc = 0.5 * (v_xc[0] + v_xc[1])
    v_g = setup.fft.field_to_reciprocal(v_xc).ravel()
    core_ff = {s: (None if pps[s].partial_core is None else pps[s].partial_core.form_factor(q))
               for s in dict.fromkeys(crystal.species)}
    core = structure_factor_forces(g, miller, v_g, [core_ff[s] for s in crystal.species],
                                   crystal.positions)
    return local, core


def _nonlocal_forces(gs: GroundState) -> np.ndarray:
    """Separable-projector forces summed over this process's channels, then over processes."""
    setup: SystemSetup = gs.setup
    crystal = setup.crystal
    pps = setup.pseudopotentials
    # projector rows follow scf._nonlocal: atoms with projectors in crystal order
    owner = np.concatenate([np.full(pps[s].separable.n_projectors, i, dtype=int)
                            for i, s in enumerate(crystal.species) if pps[s].is_nonlocal]
                           or [np.zeros(0, int)])
    forces = np.zeros((crystal.n_atoms, 3))
    weights = setup.channel_weights
    for j in setup.owned:
        ik = setup.channel(j)[1]
        proj, coupling = setup.nonlocal_ops[ik]
        if proj is None or not len(proj):
            continue
        forces += nonlocal_forces(gs.wavefunctions[j], weights[j] * gs.occupations[j], proj,
                                  coupling, setup.bases[ik].kpg, owner, crystal.n_atoms)
    return setup.comm.allreduce_sum(forces)
