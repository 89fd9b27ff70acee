"""Occupation numbers of Kohn-Sham states (layer 1).

This version fills bands by the Aufbau principle with fixed, integer
occupations: every k-point carries the same number of doubly occupied bands,
which is right for insulators and semiconductors.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InputError

__all__ = ["aufbau_occupations", "BandEdges", "band_edges"]


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
            "(use a supercell or a different structure)", key="crystal", value=n_electrons)
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
