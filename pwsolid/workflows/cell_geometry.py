"""Cells of a volume scan: their kind, lengths, scaling and c/a (layer 5).

Pure geometry of the lattices a scan visits: which builder made a cell
(:func:`cell_kind`), the lengths that describe it (:func:`lattice_lengths`), the
input crystal at another volume and c/a (:func:`crystal_at`), the optimal c/a at
one volume (:func:`parabola_minimum`) and over volumes (:func:`c_over_a_model`).
Lengths in bohr, volumes in bohr^3.
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

from ..crystal import Crystal

__all__ = ["cell_kind", "lattice_lengths", "hexagonal_c_over_a", "crystal_at",
           "parabola_minimum", "c_over_a_model"]


def _cos(u, v) -> float:
    return float(np.dot(u, v) / (np.linalg.norm(u) * np.linalg.norm(v)))


def cell_kind(lattice: np.ndarray) -> str:
    """'simple-cubic', 'fcc', 'bcc', 'hexagonal' for the builders' cells, else 'general'."""
    lat = np.asarray(lattice, float)
    n = np.linalg.norm(lat, axis=1)
    cos = [_cos(lat[0], lat[1]), _cos(lat[0], lat[2]), _cos(lat[1], lat[2])]
    same = np.allclose(n, n[0], rtol=1e-8)
    if same and np.allclose(cos, 0.0, atol=1e-8):
        return "simple-cubic"
    if same and np.allclose(cos, 0.5, atol=1e-8):
        return "fcc"
    if same and np.allclose(cos, -1.0 / 3.0, atol=1e-8):
        return "bcc"
    if (abs(n[0] - n[1]) <= 1e-8 * n[0] and abs(abs(cos[0]) - 0.5) <= 1e-8
            and abs(cos[1]) <= 1e-8 and abs(cos[2]) <= 1e-8):
        return "hexagonal"
    return "general"


def lattice_lengths(lattice: np.ndarray) -> dict[str, float]:
    """The lengths that describe a cell, in bohr.

    ``{"a": cube edge}`` for the primitive cells of simple cubic, fcc and bcc
    (as the :mod:`pwsolid.crystal` builders make them: a = |a1|, sqrt 2 |a1| and
    2 |a1| / sqrt 3), ``{"a": |a1|, "c": |a3|}`` for hexagonal cells, and the three
    vector lengths ``{"a1": .., "a2": .., "a3": ..}`` otherwise.
    """
    lat = np.asarray(lattice, float)
    n = np.linalg.norm(lat, axis=1)
    kind = cell_kind(lat)
    if kind == "simple-cubic":
        return {"a": float(n[0])}
    if kind == "fcc":
        return {"a": float(n[0] * math.sqrt(2.0))}
    if kind == "bcc":
        return {"a": float(n[0] * 2.0 / math.sqrt(3.0))}
    if kind == "hexagonal":
        return {"a": float(n[0]), "c": float(n[2])}
    return {"a1": float(n[0]), "a2": float(n[1]), "a3": float(n[2])}


def hexagonal_c_over_a(crystal: Crystal) -> float:
    n = np.linalg.norm(crystal.lattice, axis=1)
    return float(n[2] / n[0])


def crystal_at(crystal: Crystal, volume: float, c_over_a: float | None) -> Crystal:
    """The input crystal at ``volume``; with ``c_over_a`` the hexagonal c axis is reset too."""
    ratio = volume / crystal.volume
    if c_over_a is None:
        return crystal.scaled(ratio ** (1.0 / 3.0))
    q_in = hexagonal_c_over_a(crystal)
    s_a = (ratio * q_in / c_over_a) ** (1.0 / 3.0)
    s_c = s_a * c_over_a / q_in
    lat = crystal.lattice * np.array([s_a, s_a, s_c])[:, None]
    return Crystal(lat, crystal.species, crystal.positions, crystal.min_distance)


def parabola_minimum(qs, es):
    """Vertex (q*, E*) of the parabola through E(q), clipped to [q_min, q_max]; and a note."""
    qs, es = np.asarray(qs, float), np.asarray(es, float)
    a, b, c = np.polyfit(qs, es, 2)
    if not a > 0:
        i = int(np.argmin(es))
        return float(qs[i]), float(es[i]), "E(c/a) does not curve upward; the lowest point is used"
    q = -b / (2 * a)
    note = ""
    if q < qs[0] or q > qs[-1]:
        note = (f"the optimal c/a ({q:.4f}) lies outside the c/a values "
                f"[{qs[0]:g}, {qs[-1]:g}] and was clipped; widen the c/a values")
        q = float(np.clip(q, qs[0], qs[-1]))
    return float(q), float(np.polyval([a, b, c], q)), note


def c_over_a_model(volumes, q_opt) -> Callable[[float], float]:
    """q(V) from a polynomial of degree <= 2 in V through the optimal c/a values."""
    v = np.asarray(volumes, float)
    vm = float(v.mean())
    deg = min(2, len(v) - 1)
    coef = np.polyfit(v / vm - 1.0, np.asarray(q_opt, float), deg)
    return lambda volume: float(np.polyval(coef, volume / vm - 1.0))
