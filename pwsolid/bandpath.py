"""Paths through the Brillouin zone for band structures (layer 2).

A path is given by labelled special points joined into continuous pieces; a
jump between pieces is a *break*. :func:`standard_path` finds the Bravais
lattice of a crystal and returns the special points and default path of
Setyawan & Curtarolo; :func:`user_path` takes the user's own points;
:func:`sample_path` turns either into evenly spaced k-points (a
:class:`BandPath`).

Conventions
-----------
Fractional k-points are in units of the *crystal's own* reciprocal vectors
``b_i`` (rows of ``Crystal.reciprocal``), so ``k_cart = k_frac @ reciprocal``
in 1/bohr. The convention's special points refer to the convention's primitive
vectors, which need not be the crystal's: each point is taken to Cartesian
through the convention's vectors (oriented as the crystal's conventional cell
found by spglib) and from there to the crystal's fractional coordinates. When
the crystal's own vectors have the convention's lengths and angles, they are
used as the convention's vectors, so the fractional coordinates are the
published ones.

Gamma is written ``"Γ"`` (and Sigma ``"Σ"``); input may also say ``"G"``,
``"Gamma"``, ``"\\Gamma"``, ``"Sigma"``.

References
----------
W. Setyawan and S. Curtarolo, Comput. Mater. Sci. 49, 299 (2010).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import spglib

from .crystal import ELEMENTS, Crystal
from .errors import InputError

__all__ = [
    "PathSpec",
    "BandPath",
    "SUPPORTED_LATTICES",
    "bravais_lattice",
    "standard_path",
    "user_path",
    "sample_path",
    "normalise_label",
]

#: Bravais-lattice names (Setyawan-Curtarolo) for which a standard path exists.
SUPPORTED_LATTICES: tuple[str, ...] = ("CUB", "FCC", "BCC", "TET", "BCT1", "BCT2", "HEX")

_GAMMA = "Γ"
_SIGMA = "Σ"
_ALIASES = {"g": _GAMMA, "gamma": _GAMMA, "\\gamma": _GAMMA, "γ": _GAMMA, "gm": _GAMMA,
            "sigma": _SIGMA, "\\sigma": _SIGMA}

# Convention's primitive vectors as rows, in units of the conventional cell's rows.
_HALF = 0.5
_TEMPLATES = {
    "CUB": np.eye(3),
    "FCC": _HALF * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]], float),
    "BCC": _HALF * np.array([[-1, 1, 1], [1, -1, 1], [1, 1, -1]], float),
    "TET": np.eye(3),
    "BCT": _HALF * np.array([[-1, 1, 1], [1, -1, 1], [1, 1, -1]], float),
    "HEX": np.eye(3),
}

_PATH_HINT = ("give the path yourself with user_path(crystal, [[(label, [k1, k2, k3]), ...], ...]) "
              "in fractional coordinates of the crystal's reciprocal vectors")


def normalise_label(label) -> str:
    """Canonical spelling of a special-point label (``"G"``, ``"Gamma"`` -> ``"Γ"``)."""
    text = str(label).strip()
    if not text:
        raise InputError("a special-point label must not be empty", key="band_path.label",
                         value=label)
    low = text.lower()
    if low in _ALIASES:
        return _ALIASES[low]
    for word, symbol in (("gamma", _GAMMA), ("sigma", _SIGMA)):   # "Sigma1" -> "Σ1"
        if low.startswith(word) and low[len(word):].isdigit():
            return symbol + low[len(word):]
    return text


# ----------------------------------------------------------------------------- data


@dataclass(frozen=True, eq=False)
class PathSpec:
    """Special points and the order in which a band path visits them (not yet sampled).

    Attributes
    ----------
    reciprocal : ndarray (3, 3), 1/bohr
        Reciprocal vectors (rows) of the crystal the fractional points refer to.
    points : dict str -> ndarray (3,)
        Fractional coordinates of every named point.
    pieces : tuple of tuple of str
        Continuous pieces of the path, each a sequence of at least two labels.
    lattice_type : str
        Bravais-lattice name (``"FCC"``, ...) or ``"user"``.
    """

    reciprocal: np.ndarray
    points: dict
    pieces: tuple
    lattice_type: str

    def cartesian(self, label: str) -> np.ndarray:
        """Cartesian position (1/bohr) of a named point."""
        return self.points[normalise_label(label)] @ self.reciprocal

    def describe(self) -> str:
        """The path as text, e.g. ``"Γ-X-W | U-X"``."""
        return " | ".join("-".join(piece) for piece in self.pieces)


@dataclass(frozen=True, eq=False)
class BandPath:
    """Sampled k-points along a path.

    Attributes
    ----------
    kpoints : ndarray (n, 3), float64
        Fractional coordinates in units of the crystal's reciprocal vectors.
    distance : ndarray (n,), float64, 1/bohr
        Cumulative Cartesian path length; it does not advance across a break.
    labels : tuple of (int, str)
        Index into ``kpoints`` and label of every special point on the path.
    breaks : tuple of int
        Indices ``i`` where a new continuous piece starts (the path jumps between
        points ``i - 1`` and ``i``; ``distance[i] == distance[i - 1]``).
    reciprocal : ndarray (3, 3), 1/bohr
        Reciprocal vectors (rows) of the crystal.
    lattice_type : str
        Bravais-lattice name or ``"user"``.
    """

    kpoints: np.ndarray
    distance: np.ndarray
    labels: tuple
    breaks: tuple
    reciprocal: np.ndarray
    lattice_type: str

    @property
    def n_points(self) -> int:
        return len(self.kpoints)

    @property
    def cartesian(self) -> np.ndarray:
        """Cartesian k-points (n, 3) in 1/bohr."""
        return self.kpoints @ self.reciprocal

    def ticks(self) -> tuple[np.ndarray, tuple[str, ...]]:
        """Tick positions (1/bohr) and texts; labels on either side of a break read ``"K|U"``."""
        pos: list[float] = []
        text: list[str] = []
        for index, label in self.labels:
            x = float(self.distance[index])
            if pos and index in self.breaks and abs(x - pos[-1]) < 1e-12:
                text[-1] = f"{text[-1]}|{label}"
            else:
                pos.append(x)
                text.append(label)
        return np.array(pos), tuple(text)


# ----------------------------------------------------------------------------- lattice type


def _spglib_dataset(crystal: Crystal, tolerance: float):
    numbers = [ELEMENTS.index(s) + 1 for s in crystal.species]
    cell = (np.asarray(crystal.lattice), np.asarray(crystal.positions), numbers)
    try:
        try:
            dataset = spglib.get_symmetry_dataset(cell, symprec=tolerance, _throw=True)
        except TypeError:      # spglib releases before the _throw argument
            dataset = spglib.get_symmetry_dataset(cell, symprec=tolerance)
    except Exception as exc:   # the error type differs between spglib releases
        raise InputError(f"spglib could not determine the space group ({exc}); {_PATH_HINT}",
                         key="band_path", value=None) from exc
    if dataset is None:
        raise InputError(f"spglib could not determine the space group; {_PATH_HINT}",
                         key="band_path")

    def get(name):
        return dataset[name] if isinstance(dataset, dict) else getattr(dataset, name)

    return int(get("number")), str(get("international")), np.asarray(get("transformation_matrix"), float)


def bravais_lattice(crystal: Crystal, tolerance: float = 1e-5) -> tuple[str, np.ndarray]:
    """Bravais lattice of ``crystal`` and its conventional cell.

    Parameters
    ----------
    crystal : Crystal
    tolerance : float
        Distance tolerance in bohr for spglib.

    Returns
    -------
    name : str
        One of :data:`SUPPORTED_LATTICES`, or another Setyawan-Curtarolo name
        (``"ORC"``, ``"RHL"``, ...) for which no standard path is implemented.
    conventional : ndarray (3, 3), bohr
        Conventional cell vectors (rows) in the crystal's Cartesian frame.
    """
    number, symbol, transform = _spglib_dataset(crystal, tolerance)
    # spglib: (a_s b_s c_s) = (a b c) P^-1 with lattice vectors as columns.
    conventional = np.linalg.inv(transform).T @ crystal.lattice
    centring = symbol[0]
    if number >= 195:
        name = {"P": "CUB", "F": "FCC", "I": "BCC"}[centring]
    elif number >= 168 or (number >= 143 and centring == "P"):
        name = "HEX"
    elif number >= 143:
        name = "RHL"
    elif number >= 75:
        if centring == "P":
            name = "TET"
        else:
            a = np.linalg.norm(conventional[:2], axis=1).mean()
            c = np.linalg.norm(conventional[2])
            name = "BCT1" if c < a else "BCT2"
    elif number >= 16:
        name = "ORC" if centring == "P" else f"ORC-{centring}"
    elif number >= 3:
        name = "MCL"
    else:
        name = "TRI"
    return name, conventional


# ----------------------------------------------------------------------------- conventions


def _convention(name: str, a: float, c: float):
    """Special points (fractional, convention's primitive cell) and default path."""
    f = lambda *x: np.array(x, float)  # noqa: E731
    G = _GAMMA
    if name == "CUB":
        pts = {G: f(0, 0, 0), "X": f(0, .5, 0), "M": f(.5, .5, 0), "R": f(.5, .5, .5)}
        path = ((G, "X", "M", G, "R", "X"), ("M", "R"))
    elif name == "FCC":
        pts = {G: f(0, 0, 0), "X": f(.5, 0, .5), "L": f(.5, .5, .5), "W": f(.5, .25, .75),
               "K": f(.375, .375, .75), "U": f(.625, .25, .625)}
        path = ((G, "X", "W", "K", G, "L", "U", "W", "L", "K"), ("U", "X"))
    elif name == "BCC":
        pts = {G: f(0, 0, 0), "H": f(.5, -.5, .5), "P": f(.25, .25, .25), "N": f(0, 0, .5)}
        path = ((G, "H", "N", G, "P", "H"), ("P", "N"))
    elif name == "TET":
        pts = {G: f(0, 0, 0), "A": f(.5, .5, .5), "M": f(.5, .5, 0), "R": f(0, .5, .5),
               "X": f(0, .5, 0), "Z": f(0, 0, .5)}
        path = ((G, "X", "M", G, "Z", "R", "A", "Z"), ("X", "R"), ("M", "A"))
    elif name == "BCT1":                      # c < a
        eta = (1 + c * c / (a * a)) / 4
        pts = {G: f(0, 0, 0), "M": f(-.5, .5, .5), "N": f(0, .5, 0), "P": f(.25, .25, .25),
               "X": f(0, 0, .5), "Z": f(eta, eta, -eta), "Z1": f(-eta, 1 - eta, eta)}
        path = ((G, "X", "M", G, "Z", "P", "N", "Z1", "M"), ("X", "P"))
    elif name == "BCT2":                      # c > a
        eta = (1 + a * a / (c * c)) / 4
        zeta = a * a / (2 * c * c)
        S, S1 = _SIGMA, _SIGMA + "1"
        pts = {G: f(0, 0, 0), "N": f(0, .5, 0), "P": f(.25, .25, .25), S: f(-eta, eta, eta),
               S1: f(eta, 1 - eta, -eta), "X": f(0, 0, .5), "Y": f(-zeta, zeta, .5),
               "Y1": f(.5, .5, -zeta), "Z": f(.5, .5, -.5)}
        path = ((G, "X", "Y", S, G, "Z", S1, "N", "P", "Y1", "Z"), ("X", "P"))
    elif name == "HEX":
        third = 1.0 / 3.0
        pts = {G: f(0, 0, 0), "M": f(.5, 0, 0), "K": f(third, third, 0), "A": f(0, 0, .5),
               "L": f(.5, 0, .5), "H": f(third, third, .5)}
        path = ((G, "M", "K", G, "A", "L", "H", "A"), ("L", "M"), ("K", "H"))
    else:
        raise InputError(f"no standard band path for the {name} Bravais lattice "
                         f"(standard paths exist for {', '.join(SUPPORTED_LATTICES)}); {_PATH_HINT}",
                         key="band_path", value=name)
    return pts, path


def _same_metric(a: np.ndarray, b: np.ndarray, rtol: float = 1e-6) -> bool:
    ga, gb = a @ a.T, b @ b.T
    return bool(np.allclose(ga, gb, rtol=0, atol=rtol * np.abs(gb).max()))


def standard_path(crystal: Crystal, tolerance: float = 1e-5) -> PathSpec:
    """Special points and default path of Setyawan & Curtarolo for ``crystal``.

    Parameters
    ----------
    crystal : Crystal
        Cubic (simple, face- or body-centred), tetragonal (simple or body-centred)
        or hexagonal crystal.
    tolerance : float
        Distance tolerance in bohr for the space-group search (spglib).

    Returns
    -------
    PathSpec
        Points in fractional coordinates of ``crystal.reciprocal``.

    Raises
    ------
    InputError
        For a Bravais lattice without an implemented standard path.
    """
    name, conv = bravais_lattice(crystal, tolerance)
    lengths = np.linalg.norm(conv, axis=1)
    a, c = float(lengths[:2].mean()), float(lengths[2])
    pts, path = _convention(name, a, c)
    template = _TEMPLATES["BCT" if name.startswith("BCT") else name]
    primitive = template @ conv
    if _same_metric(crystal.lattice, primitive):
        primitive = crystal.lattice           # the crystal uses the convention's vectors
    recip_conv = 2 * np.pi * np.linalg.inv(primitive).T
    to_crystal = recip_conv @ crystal.lattice.T / (2 * np.pi)   # fractional -> crystal fractional
    frac = {label: _clean(k @ to_crystal) for label, k in pts.items()}
    return PathSpec(crystal.reciprocal, frac, path, name)


def _clean(k: np.ndarray) -> np.ndarray:
    k = np.asarray(k, float).copy()
    k[np.abs(k) < 1e-12] = 0.0
    return k


# ----------------------------------------------------------------------------- user paths


def _parse_text(text: str) -> list[list[str]]:
    pieces = [[normalise_label(p) for p in piece.split("-") if p.strip()]
              for piece in text.replace(",", "|").split("|")]
    return pieces


def user_path(crystal: Crystal, segments) -> PathSpec:
    """A path through points of the user's choice.

    Parameters
    ----------
    crystal : Crystal
    segments : str or list of lists
        Continuous pieces of the path. Each piece is a list of points, each point
        either ``(label, [k1, k2, k3])`` with fractional coordinates in units of the
        crystal's reciprocal vectors, or a bare label of the crystal's standard
        points (``"G"``, ``"X"``, ...). A string such as ``"G-X-W|L-K"`` names
        standard points only; ``|`` (or ``,``) separates pieces.

    Returns
    -------
    PathSpec

    Raises
    ------
    InputError
        For a piece with fewer than two points, a point repeated in a row, a label
        used for two different points, malformed coordinates or an unknown label.
    """
    if isinstance(segments, str):
        segments = _parse_text(segments)
    try:
        segments = [piece if isinstance(piece, str) else list(piece) for piece in segments]
    except TypeError as exc:
        raise InputError("the band path must be a list of pieces, each a list of points",
                         key="band_path", value=segments) from exc
    if not segments:
        raise InputError("the band path is empty", key="band_path", value=segments)
    standard: PathSpec | None = None
    points: dict[str, np.ndarray] = {}
    pieces = []
    for piece in segments:
        if isinstance(piece, str):
            raise InputError("each piece of the band path must be a list of points",
                             key="band_path", value=piece)
        labels = []
        for item in piece:
            if isinstance(item, str):
                label = normalise_label(item)
                if label not in points:
                    if standard is None:
                        try:
                            standard = standard_path(crystal)
                        except InputError as exc:
                            raise InputError(
                                f"the point '{item}' has no coordinates and this crystal has no "
                                f"standard points ({exc.reason})", key="band_path",
                                value=item) from exc
                    if label not in standard.points:
                        raise InputError(
                            f"unknown special point '{item}' for the {standard.lattice_type} "
                            f"lattice; known points: {', '.join(standard.points)}; or give "
                            "(label, [k1, k2, k3])", key="band_path", value=item)
                    points[label] = standard.points[label]
            else:
                try:
                    raw_label, coords = item
                    k = np.asarray(coords, float)
                except (TypeError, ValueError) as exc:
                    raise InputError("a path point must be a label or (label, [k1, k2, k3])",
                                     key="band_path", value=item) from exc
                label = normalise_label(raw_label)
                if k.shape != (3,) or not np.all(np.isfinite(k)):
                    raise InputError(f"the point '{label}' needs three finite fractional "
                                     "coordinates", key="band_path", value=item)
                if label in points and not np.allclose(points[label], k, atol=1e-10):
                    raise InputError(f"the label '{label}' names two different points",
                                     key="band_path", value=item)
                points[label] = k
            labels.append(label)
        if len(labels) < 2:
            raise InputError("each piece of the band path needs at least two points",
                             key="band_path", value=piece)
        pieces.append(tuple(labels))
    spec = PathSpec(crystal.reciprocal, points, tuple(pieces), "user")
    for piece in spec.pieces:
        for p, q in zip(piece[:-1], piece[1:]):
            if np.linalg.norm(spec.cartesian(q) - spec.cartesian(p)) < 1e-10:
                raise InputError(f"the path goes from '{p}' to '{q}', which are the same point",
                                 key="band_path", value=[p, q])
    return spec


# ----------------------------------------------------------------------------- sampling


def _split_intervals(lengths: np.ndarray, total: int) -> np.ndarray:
    """Integers >= 1 summing to ``total``, proportional to ``lengths`` (largest remainders)."""
    exact = lengths / lengths.sum() * total
    n = np.maximum(np.floor(exact).astype(int), 1)
    while n.sum() > total:                      # the floor of 1 overshot: take from the largest
        n[np.argmax(np.where(n > 1, n - exact, -np.inf))] -= 1
    remainder = exact - n
    for i in np.argsort(-remainder)[: total - n.sum()]:
        n[i] += 1
    return n


def sample_path(path: PathSpec, n_points: int | None = None, *,
                density: float | None = None) -> BandPath:
    """Evenly spaced k-points along a path.

    Parameters
    ----------
    path : PathSpec
        From :func:`standard_path` or :func:`user_path`.
    n_points : int, optional
        Total number of k-points (default 150 when ``density`` is not given).
    density : float, optional
        Points per 1/bohr of path length instead of a total.

    Returns
    -------
    BandPath
        Each segment gets a number of intervals proportional to its Cartesian
        length (at least one); shared corners appear once per continuous piece.
    """
    if n_points is not None and density is not None:
        raise InputError("give either a number of points or a density, not both",
                         key="band_path.points", value=(n_points, density))
    seg_start, seg_end, seg_piece = [], [], []
    for ip, piece in enumerate(path.pieces):
        for p, q in zip(piece[:-1], piece[1:]):
            seg_start.append(p)
            seg_end.append(q)
            seg_piece.append(ip)
    k0 = np.array([path.points[p] for p in seg_start])
    k1 = np.array([path.points[q] for q in seg_end])
    lengths = np.linalg.norm((k1 - k0) @ path.reciprocal, axis=1)
    n_pieces = len(path.pieces)
    if density is not None:
        density = float(density)
        if not np.isfinite(density) or density <= 0:
            raise InputError("the point density must be positive (points per 1/bohr)",
                             key="band_path.density", value=density)
        intervals = np.maximum(np.rint(lengths * density).astype(int), 1)
    else:
        n_points = 150 if n_points is None else n_points
        if int(n_points) != n_points or n_points < len(lengths) + n_pieces:
            raise InputError(f"the path has {len(lengths)} segments in {n_pieces} pieces and needs "
                             f"at least {len(lengths) + n_pieces} points",
                             key="band_path.points", value=n_points)
        intervals = _split_intervals(lengths, int(n_points) - n_pieces)

    k_list, dist, labels, breaks = [], [], [], []
    x = 0.0
    previous_piece = -1
    for s in range(len(lengths)):
        if seg_piece[s] != previous_piece:       # a new continuous piece: its first point
            if previous_piece >= 0:
                breaks.append(len(k_list))
            labels.append((len(k_list), seg_start[s]))
            k_list.append(k0[s])
            dist.append(x)
            previous_piece = seg_piece[s]
        t = np.arange(1, intervals[s] + 1) / intervals[s]
        k_list.extend(k0[s] + t[:, None] * (k1[s] - k0[s]))
        dist.extend(x + t * lengths[s])
        x += lengths[s]
        labels.append((len(k_list) - 1, seg_end[s]))
    kpoints = np.array(k_list)
    distance = np.array(dist)
    kpoints.setflags(write=False)
    distance.setflags(write=False)
    return BandPath(kpoints, distance, tuple(labels), tuple(breaks), path.reciprocal,
                    path.lattice_type)
