"""Vibrational thermodynamics of one phonon calculation (layer 5).

:func:`vibrational_thermodynamics` turns the phonons of a crystal at one volume
(frequencies on a q-mesh with weights, a density of states, or any
:class:`pwsolid.thermodynamics.VibrationalSpectrum`) into the zero-point energy,
the Helmholtz free energy, the internal energy, the entropy and the heat
capacity at constant volume against temperature, in a
:class:`VibrationalThermodynamics` result with a JSON document and a CSV table.
:func:`spectrum_of_phonon_document` reads the spectrum back from a saved phonon
result document (its density of states), so the command can work on a file.

Inside: Ha and K, per primitive cell; the document adds eV, meV/atom, J/(mol K)
per mole of atoms and k_B per atom.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..thermodynamics import (HarmonicThermodynamics, VibrationalSpectrum, harmonic_thermodynamics,
                              spectrum_from_dos, temperature_grid)
from ..units import GAS_CONSTANT_J_PER_MOL_K, HARTREE_EV, HARTREE_THZ

__all__ = ["VibrationalThermodynamics", "vibrational_thermodynamics",
           "spectrum_of_phonon_document", "spectrum_of_mesh", "VIBRATIONAL_SCHEMA"]

#: Schema of the vibrational-thermodynamics document.
VIBRATIONAL_SCHEMA = "pwsolid.vibrational-thermodynamics/1"


@dataclass(frozen=True, eq=False)
class VibrationalThermodynamics:
    """Harmonic thermodynamic functions of one crystal at one volume.

    Attributes
    ----------
    harmonic : HarmonicThermodynamics
        Per primitive cell, Ha and k_B.
    n_atoms : int
        Atoms per primitive cell.
    spectrum_from : str
        What the modes came from ("q-mesh 16x16x16", "density of states", ...).
    messages : tuple of str
    """

    harmonic: HarmonicThermodynamics
    n_atoms: int
    spectrum_from: str
    messages: tuple = field(default_factory=tuple)

    @property
    def converged(self) -> bool:
        """No imaginary modes (the harmonic sums are then complete)."""
        return self.harmonic.imaginary_modes == 0

    @property
    def temperatures(self) -> np.ndarray:
        return self.harmonic.temperatures

    def _per_atom(self) -> dict[str, np.ndarray]:
        h, n = self.harmonic, self.n_atoms
        return {"free_energy_meV_per_atom": h.free_energy * HARTREE_EV * 1e3 / n,
                "internal_energy_meV_per_atom": h.internal_energy * HARTREE_EV * 1e3 / n,
                "entropy_J_per_mol_K": h.entropy * GAS_CONSTANT_J_PER_MOL_K / n,
                "heat_capacity_J_per_mol_K": h.heat_capacity * GAS_CONSTANT_J_PER_MOL_K / n,
                "heat_capacity_kB_per_atom": h.heat_capacity / n}

    def as_document(self) -> dict:
        """JSON-ready result (schema ``VIBRATIONAL_SCHEMA``)."""
        h = self.harmonic
        return {
            "schema": VIBRATIONAL_SCHEMA,
            "converged": self.converged,
            "messages": list(self.messages),
            "spectrum_from": self.spectrum_from,
            "atoms_per_cell": self.n_atoms,
            "modes_counted": h.modes_counted,
            "zero_modes_left_out": h.zero_modes,
            "imaginary_modes_left_out": h.imaginary_modes,
            "zero_point_energy_meV_per_atom": h.zero_point_energy * HARTREE_EV * 1e3 / self.n_atoms,
            "zero_point_energy_eV_per_cell": h.zero_point_energy * HARTREE_EV,
            "temperatures_K": h.temperatures.tolist(),
            **{k: v.tolist() for k, v in self._per_atom().items()},
            "free_energy_eV_per_cell": (h.free_energy * HARTREE_EV).tolist(),
            "units": {"per_mol": "per mole of atoms", "energies": "zero-point energy included",
                      "heat_capacity": "at constant volume (harmonic)"},
        }

    def to_csv(self) -> str:
        """One row per temperature: K, F and U (meV/atom), S and C_V (J/(mol K))."""
        cols = self._per_atom()
        names = ["temperature_K", "free_energy_meV_per_atom", "internal_energy_meV_per_atom",
                 "entropy_J_per_mol_K", "heat_capacity_J_per_mol_K"]
        rows = [",".join(names)]
        for i, t in enumerate(self.temperatures):
            rows.append(",".join([f"{t:g}"] + [f"{cols[n][i]:.8g}" for n in names[1:]]))
        return "\n".join(rows) + "\n"

    def summary_lines(self, every: float = 100.0) -> list[str]:
        """A short table (every ``every`` K) for the screen."""
        cols = self._per_atom()
        h = self.harmonic
        lines = [f"zero-point energy {h.zero_point_energy * HARTREE_EV * 1e3 / self.n_atoms:.3f} "
                 f"meV/atom ({self.spectrum_from})",
                 f"{'T (K)':>8} {'F (meV/atom)':>14} {'S (J/mol K)':>12} {'C_V (J/mol K)':>14}"]
        for i, t in enumerate(self.temperatures):
            if abs(t / every - round(t / every)) < 1e-9:
                lines.append(f"{t:8.0f} {cols['free_energy_meV_per_atom'][i]:14.3f} "
                             f"{cols['entropy_J_per_mol_K'][i]:12.3f} "
                             f"{cols['heat_capacity_J_per_mol_K'][i]:14.3f}")
        return lines + [f"note: {m}" for m in self.messages]


def spectrum_of_mesh(mesh) -> VibrationalSpectrum:
    """The spectrum of mesh frequencies (``frequencies_THz`` (n_q, n_modes), ``weights``)."""
    return VibrationalSpectrum.from_thz(np.asarray(mesh.frequencies_THz, dtype=float),
                                        np.asarray(mesh.weights, dtype=float))


def vibrational_thermodynamics(source, temperatures=None, *, n_atoms: int | None = None,
                               q_mesh=None, spectrum_from: str | None = None
                               ) -> VibrationalThermodynamics:
    """Zero-point energy, F, U, S and C_V against temperature from phonons.

    Parameters
    ----------
    source
        A :class:`~pwsolid.thermodynamics.VibrationalSpectrum` (per cell), mesh
        frequencies (``frequencies_THz``, ``weights``), or a phonon result (with
        ``mesh`` and ``mesh_frequencies(q_mesh)``).
    temperatures : array_like, K
        Default 0 to 1000 K by 5 K.
    n_atoms
        Atoms per cell; default the number of modes / 3.
    q_mesh
        For a phonon result: the q-mesh of the sums (default the result's own mesh).
    spectrum_from
        What the modes came from, for the document (default: said by ``source``).
    """
    t = temperature_grid() if temperatures is None else temperatures
    if isinstance(source, VibrationalSpectrum):
        spectrum, what = source, "given modes"
    elif hasattr(source, "mesh_frequencies"):
        mesh = source.mesh_frequencies(q_mesh) if q_mesh is not None else source.mesh
        spectrum = spectrum_of_mesh(mesh)
        what = f"q-mesh {'x'.join(str(int(m)) for m in mesh.mesh)}"
    elif hasattr(source, "frequencies_THz") and hasattr(source, "weights"):
        spectrum = spectrum_of_mesh(source)
        what = "q-mesh" + (f" {'x'.join(str(int(m)) for m in source.mesh)}"
                           if hasattr(source, "mesh") else "")
    else:
        raise InputError("give phonon frequencies with weights, a phonon result or a "
                         "VibrationalSpectrum", key="source", value=type(source).__name__)
    n = int(n_atoms) if n_atoms is not None else max(1, round(spectrum.n_modes / 3))
    harmonic = harmonic_thermodynamics(spectrum, t)
    return VibrationalThermodynamics(harmonic, n, spectrum_from or what, harmonic.messages)


def spectrum_of_phonon_document(doc, source: str = "phonon result") -> tuple[
        VibrationalSpectrum, int, str]:
    """(spectrum, atoms per cell, description) from a saved phonon result document.

    Reads its density of states (``density_of_states.frequencies_THz`` and
    ``states_per_THz_per_cell``), rescaled to 3 n_atoms modes; every mistake is an
    InputError naming the file and the entry.
    """
    def bad(why, key):
        raise InputError(why, key=key, source=source)

    if not isinstance(doc, dict) or not str(doc.get("schema", "")).startswith("pwsolid.phonons/"):
        bad("is not a pwsolid phonon result (its 'schema' is not pwsolid.phonons/...); "
            "run the phonon command first and give its JSON result", "schema")
    try:
        n_atoms = len(doc["primitive_cell"]["species"])
        dos = doc["density_of_states"]
        f = np.asarray(dos["frequencies_THz"], dtype=float)
        g = np.asarray(dos["states_per_THz_per_cell"], dtype=float)
    except (KeyError, TypeError, ValueError):
        bad("lacks a readable density of states (density_of_states.frequencies_THz and "
            "states_per_THz_per_cell) or primitive cell", "density_of_states")
    if f.ndim != 1 or f.shape != g.shape or f.size < 3 or not np.all(np.isfinite(g)):
        bad("the density of states must be two lists of equal length of finite numbers",
            "density_of_states")
    # states per THz -> states per Ha: g_Ha = g_THz * dnu/dE = g_THz * HARTREE_THZ
    spectrum = spectrum_from_dos(f / HARTREE_THZ, np.clip(g, 0.0, None) * HARTREE_THZ,
                                 n_modes=3 * n_atoms)
    mesh = dos.get("q_mesh")
    what = "density of states" + (f" on a {'x'.join(map(str, mesh))} q-mesh" if mesh else "")
    return spectrum, n_atoms, what

