"""Band structures along paths through the Brillouin zone (layer 5).

:func:`band_structure` computes non-self-consistent Kohn-Sham eigenvalues along a
path for a fixed (usually self-consistent) density; :func:`empirical_band_structure`
does the same with the fixed Cohen-Bergstresser potential. Both return a
:class:`BandStructure`: the sampled path, the eigenvalues, the zero of energy and a
:class:`GapAnalysis` (band gap, direct gap, where the band edges sit, occupied
bandwidth).

Conventions
-----------
Eigenvalues are kept in hartree on the absolute scale of the calculation (the
average electrostatic potential of the cell is zero); ``reference`` is the zero of
the plotted and tabulated energies:

* insulators and semiconductors: the valence-band top, the highest energy of the
  ``n_valence = N_electrons / 2`` lowest bands found on the path *or* on the SCF
  mesh (a path may miss the true maximum; the mesh contains Gamma for Gamma-centred
  meshes);
* metals (an odd electron count, or valence and conduction bands that overlap): the
  Fermi level of the ground state. A :class:`~pwsolid.scf.GroundState` with smearing
  carries it; otherwise it is recomputed on the SCF mesh with the settings' smearing,
  or with a sharp filling of the lowest states when there is none.

The SCF-mesh part of the analysis comes from the ground state when one is given;
from a set-up and a density alone the eigenvalues at the irreducible SCF mesh
points are recomputed first (``setup.kpoints``, a few extra k-points).

Extrema found between two special points are also located more finely by a
parabola through the sample and its two neighbours (``refined_fraction``,
``refined_energy``); the gaps themselves are from the sampled energies, the ones
that are plotted.
"""

from __future__ import annotations

from collections.abc import Mapping

from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from ..bandpath import BandPath, PathSpec, normalise_label, sample_path, standard_path, user_path
from ..crystal import Crystal
from ..errors import InputError
from ..occupations import fermi_level as _sharp_fermi_level
from ..occupations import smeared_occupations, smearing_scheme
from ..pseudo.empirical import EMPIRICAL_MATERIALS, empirical_bands, empirical_crystal
from ..pseudo.empirical import reduced_cutoff_to_hartree
from ..safe_files import atomic_write_bytes
from ..parallel import single_threaded_blas
from ..scf import GroundState, SystemSetup, bands_at_kpoints
from ..units import HARTREE_EV

__all__ = [
    "BAND_SCHEMA",
    "BandEdgePoint",
    "MeshEdges",
    "GapAnalysis",
    "BandStructure",
    "band_structure",
    "empirical_band_structure",
    "gap_analysis",
    "read_band_csv",
]

#: Schema of :meth:`BandStructure.as_document`; fields are only added within a version.
BAND_SCHEMA = "pwsolid.band-structure/1"

Progress = Callable[[int, int], None]

# Two levels closer than this (Ha) count as one: degenerate band edges, a direct gap
# equal to the band gap. Far below the eigensolver's accuracy on eigenvalues.
_LEVEL_TOL = 1e-7
# Default residual tolerance of the eigensolver along a path: eigenvalue errors go as
# its square (~1e-10 Ha), and it is a third faster than 1e-6.
_PATH_TOLERANCE = 1e-5
# The empirical bands' default basis |k+G|^2 <= 40 (2 pi / a)^2: converged to ~0.02 eV
# for Si and Ge (shared/REFERENCES.md, section 3b).
_EMPIRICAL_REDUCED_CUTOFF = 40.0


def _ev(x):
    return None if x is None else float(x) * HARTREE_EV


def _from_ev(x):
    return None if x is None else float(x) / HARTREE_EV


# ----------------------------------------------------------------------------- data


@dataclass(frozen=True)
class BandEdgePoint:
    """A band extremum (or any notable state) and where it sits.

    Attributes
    ----------
    energy : float, Ha
        Absolute energy of the sampled state.
    band : int
        Band index (0 = lowest).
    kpoint : tuple of 3 float
        Fractional coordinates (crystal's reciprocal vectors).
    index : int or None
        Index on the path (None for a point of the SCF mesh).
    distance : float or None, 1/bohr
        Path distance of the sample.
    label : str or None
        Special-point label when the sample is one.
    segment : (str, str) or None
        Labels of the path segment the sample lies on.
    fraction : float or None
        Position of the sample along the segment, 0 at its start, 1 at its end.
    refined_fraction, refined_energy : float or None
        Vertex of the parabola through the sample and its neighbours, for an
        extremum strictly inside a segment; otherwise equal to the sampled values.
    """

    energy: float
    band: int
    kpoint: tuple
    index: int | None = None
    distance: float | None = None
    label: str | None = None
    segment: tuple | None = None
    fraction: float | None = None
    refined_fraction: float | None = None
    refined_energy: float | None = None

    def describe(self) -> str:
        """Where the state sits, in words: ``"Γ"``, ``"0.85 of Γ-X"`` or ``"k = (...)"``."""
        if self.label is not None:
            return self.label
        if self.segment is not None:
            f = self.refined_fraction if self.refined_fraction is not None else self.fraction
            return f"{f:.2f} of {self.segment[0]}-{self.segment[1]}"
        return "k = (" + ", ".join(f"{x:.4f}" for x in self.kpoint) + ")"

    def as_dict(self, reference: float) -> dict:
        return {
            "energy_eV": _ev(self.energy - reference),
            "absolute_energy_eV": _ev(self.energy),
            "band": int(self.band),
            "kpoint_fractional": [float(x) for x in self.kpoint],
            "path_index": self.index,
            "distance_per_bohr": self.distance,
            "label": self.label,
            "segment": None if self.segment is None else list(self.segment),
            "fraction": self.fraction,
            "refined_fraction": self.refined_fraction,
            "refined_energy_eV": None if self.refined_energy is None
            else _ev(self.refined_energy - reference),
            "where": self.describe(),
        }

    @classmethod
    def from_dict(cls, d: dict) -> "BandEdgePoint":
        return cls(energy=_from_ev(d["absolute_energy_eV"]), band=int(d["band"]),
                   kpoint=tuple(d["kpoint_fractional"]), index=d["path_index"],
                   distance=d["distance_per_bohr"], label=d["label"],
                   segment=None if d["segment"] is None else tuple(d["segment"]),
                   fraction=d["fraction"], refined_fraction=d["refined_fraction"],
                   refined_energy=None if d["refined_energy_eV"] is None
                   else _from_ev(d["absolute_energy_eV"]) + _from_ev(d["refined_energy_eV"])
                   - _from_ev(d["energy_eV"]))


@dataclass(frozen=True)
class MeshEdges:
    """Band edges on the SCF k-point mesh (irreducible points).

    ``valence_maximum`` is the highest state of the ``n_valence`` lowest bands (for a
    metal: the highest occupied state); ``conduction_minimum`` the lowest state above
    them (None for a metal); ``gap`` their difference (Ha), ``gap_kind`` whether they
    share a k-point.
    """

    valence_maximum: BandEdgePoint
    conduction_minimum: BandEdgePoint | None
    gap: float | None
    gap_kind: str | None


@dataclass(frozen=True)
class GapAnalysis:
    """Gaps and band edges of a band structure (energies in Ha, absolute).

    Attributes
    ----------
    metallic : bool
        An odd electron count or overlapping valence and conduction bands.
    n_valence : int
        Bands below the gap (``N_electrons / 2``); for a metal, the bands holding
        electrons at the Fermi level's k-points (``ceil(N / 2)``).
    reference : float, Ha
        Valence-band top (insulator) or Fermi level (metal).
    reference_kind : str
        ``"valence-band top"`` or ``"Fermi level"``.
    valence_maximum, conduction_minimum : BandEdgePoint or None
        Band edges on the path (None for a metal).
    band_gap : float or None
        ``conduction_minimum - valence_maximum`` on the path.
    gap_kind : str or None
        ``"direct"`` when the smallest vertical gap equals the band gap, else
        ``"indirect"``.
    direct_gap : float or None
        Smallest vertical gap ``e_c(k) - e_v(k)`` on the path...
    direct_gap_point : BandEdgePoint or None
        ...and the valence state where it is found.
    band_bottom : BandEdgePoint
        Lowest state of the lowest band (on the path, or the mesh if lower).
    occupied_bandwidth : float
        ``reference - band_bottom.energy``.
    mesh : MeshEdges or None
        The same analysis on the SCF mesh.
    """

    metallic: bool
    n_valence: int
    reference: float
    reference_kind: str
    valence_maximum: BandEdgePoint | None
    conduction_minimum: BandEdgePoint | None
    band_gap: float | None
    gap_kind: str | None
    direct_gap: float | None
    direct_gap_point: BandEdgePoint | None
    band_bottom: BandEdgePoint
    occupied_bandwidth: float
    mesh: MeshEdges | None = None

    @property
    def indirect_gap(self) -> float | None:
        """The band gap when it is indirect, else None."""
        return self.band_gap if self.gap_kind == "indirect" else None

    def summary(self) -> str:
        """The analysis as a few lines of text (eV)."""
        ref = self.reference
        lines = []
        if self.metallic:
            lines.append(f"  metal: Fermi level {_ev(ref):.4f} eV (absolute)")
        else:
            v, c = self.valence_maximum, self.conduction_minimum
            lines.append(f"  valence-band top       {_ev(v.energy):9.4f} eV at {v.describe()} "
                         f"(band {v.band + 1})")
            lines.append(f"  conduction-band bottom {_ev(c.energy):9.4f} eV at {c.describe()} "
                         f"(band {c.band + 1})")
            lines.append(f"  band gap on the path   {_ev(self.band_gap):9.4f} eV ({self.gap_kind})")
            lines.append(f"  smallest direct gap    {_ev(self.direct_gap):9.4f} eV at "
                         f"{self.direct_gap_point.describe()}")
        lines.append(f"  occupied bandwidth     {_ev(self.occupied_bandwidth):9.4f} eV "
                     f"(from {self.band_bottom.describe()})")
        if self.mesh is not None:
            m = self.mesh
            if m.conduction_minimum is not None:
                lines.append(f"  on the SCF mesh: gap {_ev(m.gap):.4f} eV ({m.gap_kind}), top at "
                             f"{m.valence_maximum.describe()}, bottom at "
                             f"{m.conduction_minimum.describe()}")
            else:
                lines.append(f"  on the SCF mesh: highest occupied state "
                             f"{_ev(m.valence_maximum.energy):.4f} eV at "
                             f"{m.valence_maximum.describe()}")
        return "\n".join(lines)

    def as_dict(self) -> dict:
        ref = self.reference

        def point(p):
            return None if p is None else p.as_dict(ref)

        mesh = None
        if self.mesh is not None:
            mesh = {"valence_maximum": point(self.mesh.valence_maximum),
                    "conduction_minimum": point(self.mesh.conduction_minimum),
                    "gap_eV": _ev(self.mesh.gap), "gap_kind": self.mesh.gap_kind}
        return {
            "metallic": bool(self.metallic),
            "n_valence_bands": int(self.n_valence),
            "band_gap_eV": _ev(self.band_gap),
            "gap_kind": self.gap_kind,
            "direct_gap_eV": _ev(self.direct_gap),
            "indirect_gap_eV": _ev(self.indirect_gap),
            "direct_gap_point": point(self.direct_gap_point),
            "valence_maximum": point(self.valence_maximum),
            "conduction_minimum": point(self.conduction_minimum),
            "band_bottom": point(self.band_bottom),
            "occupied_bandwidth_eV": _ev(self.occupied_bandwidth),
            "scf_mesh": mesh,
        }

    @classmethod
    def from_dict(cls, d: dict, reference: float, reference_kind: str) -> "GapAnalysis":
        def point(p):
            return None if p is None else BandEdgePoint.from_dict(p)

        mesh = None
        if d.get("scf_mesh") is not None:
            m = d["scf_mesh"]
            mesh = MeshEdges(point(m["valence_maximum"]), point(m["conduction_minimum"]),
                             _from_ev(m["gap_eV"]), m["gap_kind"])
        return cls(metallic=bool(d["metallic"]), n_valence=int(d["n_valence_bands"]),
                   reference=reference, reference_kind=reference_kind,
                   valence_maximum=point(d["valence_maximum"]),
                   conduction_minimum=point(d["conduction_minimum"]),
                   band_gap=_from_ev(d["band_gap_eV"]), gap_kind=d["gap_kind"],
                   direct_gap=_from_ev(d["direct_gap_eV"]),
                   direct_gap_point=point(d["direct_gap_point"]),
                   band_bottom=point(d["band_bottom"]),
                   occupied_bandwidth=_from_ev(d["occupied_bandwidth_eV"]), mesh=mesh)


@dataclass(frozen=True, eq=False)
class BandStructure:
    """Bands along a path through the Brillouin zone.

    Attributes
    ----------
    path : BandPath
        The sampled k-points, distances, labels and breaks.
    eigenvalues : ndarray (n_k, n_bands), float64, Ha
        Absolute band energies.
    reference : float, Ha
        The zero of relative energies (see the module notes).
    gaps : GapAnalysis
    n_electrons : float
        Valence electrons per cell.
    source : str
        How the bands were computed, in words.
    title : str
        Free text (e.g. the input's title).
    """

    path: BandPath
    eigenvalues: np.ndarray
    reference: float
    gaps: GapAnalysis
    n_electrons: float
    source: str = "self-consistent density"
    title: str = ""
    extra: dict = field(default_factory=dict)

    @property
    def n_bands(self) -> int:
        return int(self.eigenvalues.shape[1])

    @property
    def reference_kind(self) -> str:
        return self.gaps.reference_kind

    def energies_ev(self, relative: bool = True) -> np.ndarray:
        """Band energies (n_k, n_bands) in eV, relative to ``reference`` by default."""
        shift = self.reference if relative else 0.0
        return (self.eigenvalues - shift) * HARTREE_EV

    @property
    def complete_below(self) -> float:
        """Energy (Ha) below which every band along the path has been computed."""
        return float(self.eigenvalues[:, -1].min())

    def at_label(self, label: str) -> np.ndarray:
        """Absolute eigenvalues (Ha) at the first occurrence of a special point."""
        want = normalise_label(label)
        for index, name in self.path.labels:
            if name == want:
                return self.eigenvalues[index].copy()
        raise InputError(f"the path has no point '{label}'; it has "
                         f"{', '.join(dict.fromkeys(n for _, n in self.path.labels))}",
                         key="band_path.label", value=label)

    # ------------------------------------------------------------------ output

    def as_document(self) -> dict:
        """JSON-ready content (schema :data:`BAND_SCHEMA`; energies in eV)."""
        p = self.path
        return {
            "schema": BAND_SCHEMA,
            "title": self.title,
            "source": self.source,
            "units": {"energy": "eV", "distance": "1/bohr",
                      "kpoints": "fractional coordinates of the reciprocal vectors",
                      "cartesian_kpoints": "1/bohr"},
            "reference": {"kind": self.reference_kind, "absolute_energy_eV": _ev(self.reference)},
            "n_electrons": float(self.n_electrons),
            "n_bands": self.n_bands,
            "path": {
                "lattice_type": p.lattice_type,
                "n_points": p.n_points,
                "labels": [{"index": int(i), "label": name,
                            "distance_per_bohr": float(p.distance[i])} for i, name in p.labels],
                "breaks": [int(b) for b in p.breaks],
                "reciprocal_vectors_per_bohr": np.asarray(p.reciprocal).tolist(),
                "kpoints_fractional": np.asarray(p.kpoints).tolist(),
                "kpoints_cartesian_per_bohr": p.cartesian.tolist(),
                "distance_per_bohr": np.asarray(p.distance).tolist(),
            },
            "energies_eV": self.energies_ev().tolist(),
            "absolute_energies_eV": self.energies_ev(relative=False).tolist(),
            "gap_analysis": self.gaps.as_dict(),
            **({"details": self.extra} if self.extra else {}),
        }

    @classmethod
    def from_document(cls, doc: dict) -> "BandStructure":
        """Rebuild a band structure from :meth:`as_document` output (e.g. a JSON file)."""
        if doc.get("schema") != BAND_SCHEMA:
            raise InputError(f"not a band-structure document (schema {doc.get('schema')!r}, "
                             f"expected {BAND_SCHEMA})", key="schema", value=doc.get("schema"))
        p = doc["path"]
        kpoints = np.array(p["kpoints_fractional"], float)
        distance = np.array(p["distance_per_bohr"], float)
        path = BandPath(kpoints, distance, tuple((d["index"], d["label"]) for d in p["labels"]),
                        tuple(p["breaks"]), np.array(p["reciprocal_vectors_per_bohr"], float),
                        p["lattice_type"])
        reference = _from_ev(doc["reference"]["absolute_energy_eV"])
        eig = np.array(doc["absolute_energies_eV"], float) / HARTREE_EV
        gaps = GapAnalysis.from_dict(doc["gap_analysis"], reference, doc["reference"]["kind"])
        return cls(path, eig, reference, gaps, float(doc["n_electrons"]), doc["source"],
                   doc.get("title", ""), dict(doc.get("details", {})))

    def to_csv(self, path) -> Path:
        """Write a plain table: distance, k1, k2, k3, then every band in eV relative to
        the reference. ``#`` lines above it give the reference and the labels."""
        p = self.path
        e = self.energies_ev()
        lines = [f"# pwsolid band structure: {self.title or self.source}",
                 f"# energies in eV relative to the {self.reference_kind} at "
                 f"{_ev(self.reference):.6f} eV (absolute)",
                 "# distance in 1/bohr; k1 k2 k3 in units of the reciprocal vectors",
                 "# labels: " + " ".join(f"{i}:{name}" for i, name in p.labels),
                 "# breaks: " + " ".join(str(b) for b in p.breaks),
                 ",".join(["distance", "k1", "k2", "k3"]
                          + [f"band_{n + 1}" for n in range(self.n_bands)])]
        for i in range(p.n_points):
            row = [f"{p.distance[i]:.8f}"] + [f"{x:.8f}" for x in p.kpoints[i]] \
                + [f"{x:.6f}" for x in e[i]]
            lines.append(",".join(row))
        return _write_text(path, "\n".join(lines) + "\n")


def _write_text(path, text: str) -> Path:
    """Write a text file atomically (never half a file)."""
    path = Path(path)
    atomic_write_bytes(path, text.encode("utf-8"))
    return path


def read_band_csv(path) -> dict:
    """Read a table written by :meth:`BandStructure.to_csv`.

    Returns a dict with ``distance`` (n_k,), ``kpoints`` (n_k, 3), ``energies_eV``
    (n_k, n_bands) relative to the reference, ``reference_eV``, ``labels`` (tuple of
    (index, label)) and ``breaks``.
    """
    reference = None
    labels: tuple = ()
    breaks: tuple = ()
    rows = []
    with open(path, encoding="utf-8") as fh:
        for line in fh:
            line = line.rstrip("\n")
            if line.startswith("#"):
                body = line[1:].strip()
                if body.startswith("energies in eV") and " at " in body:
                    reference = float(body.rsplit(" at ", 1)[1].split()[0])
                elif body.startswith("labels:"):
                    labels = tuple((int(t.split(":", 1)[0]), t.split(":", 1)[1])
                                   for t in body[len("labels:"):].split())
                elif body.startswith("breaks:"):
                    breaks = tuple(int(t) for t in body[len("breaks:"):].split())
                continue
            if line.startswith("distance"):
                continue
            if line.strip():
                rows.append([float(x) for x in line.split(",")])
    table = np.array(rows, float)
    return {"distance": table[:, 0], "kpoints": table[:, 1:4], "energies_eV": table[:, 4:],
            "reference_eV": reference, "labels": labels, "breaks": breaks}


# ----------------------------------------------------------------------------- analysis


def _segments(path: BandPath):
    """(start index, end index, start label, end label) of every continuous segment."""
    # A label pair whose second index starts a new piece straddles a break.
    breaks = set(path.breaks)
    return [(i0, i1, a, b) for (i0, a), (i1, b) in zip(path.labels[:-1], path.labels[1:])
            if i1 > i0 and i1 not in breaks]


def _locate(path: BandPath, eig: np.ndarray, index: int, band: int, sense: int) -> BandEdgePoint:
    """Describe the state (index, band) of the path; ``sense`` +1 for a maximum, -1 minimum."""
    energy = float(eig[index, band])
    label = next((name for i, name in path.labels if i == index), None)
    seg = next((s for s in _segments(path) if s[0] <= index <= s[1]), None)
    segment = fraction = refined_fraction = refined_energy = None
    if seg is not None:
        i0, i1, a, b = seg
        d0, d1 = float(path.distance[i0]), float(path.distance[i1])
        segment = (a, b)
        fraction = (float(path.distance[index]) - d0) / (d1 - d0)
        refined_fraction, refined_energy = fraction, energy
        if i0 < index < i1 and label is None:
            x = path.distance[index - 1:index + 2]
            y = eig[index - 1:index + 2, band]
            c2, c1, c0 = np.polyfit(x - x[1], y, 2)
            if sense * c2 < 0:            # a parabola with the extremum's curvature
                shift = float(np.clip(-c1 / (2 * c2), x[0] - x[1], x[2] - x[1]))
                refined_fraction = (float(x[1]) + shift - d0) / (d1 - d0)
                refined_energy = float(c0 + c1 * shift + c2 * shift * shift)
    return BandEdgePoint(energy, int(band), tuple(float(v) for v in path.kpoints[index]),
                         int(index), float(path.distance[index]), label, segment, fraction,
                         refined_fraction, refined_energy)


def _mesh_point(kpoints, eig, k, band, names=None) -> BandEdgePoint:
    kk = tuple(float(v) for v in kpoints[k])
    label = None if names is None else names(kk)
    return BandEdgePoint(float(eig[k, band]), int(band), kk, label=label)


def _special_point_namer(path: BandPath, rotations):
    """A function naming a k-point after the path's special point it is equivalent to.

    Equivalence: ``k ~ W^T k`` for the given rotations, ``k ~ -k`` (time reversal)
    and ``k ~ k + G``.
    """
    special = {}
    for index, name in path.labels:
        special.setdefault(name, np.asarray(path.kpoints[index], float))
    rots = np.asarray(rotations if rotations is not None else np.eye(3, dtype=int)[None], float)
    rots = np.concatenate([rots, -rots])

    def name_of(k):
        images = np.einsum("rij,i->rj", rots, np.asarray(k, float))     # W^T k
        for name, q in special.items():
            d = images - q
            if np.any(np.all(np.abs(d - np.rint(d)) < 1e-8, axis=1)):
                return name
        return None

    return name_of


def _same_k(a, b) -> bool:
    d = np.asarray(a, float) - np.asarray(b, float)
    return bool(np.allclose(d - np.rint(d), 0.0, atol=1e-8))


def _mesh_edges(kpoints, eig, n_valence: int, metallic: bool, reference: float,
                names=None) -> MeshEdges:
    if metallic:
        below = np.where(eig <= reference + _LEVEL_TOL, eig, -np.inf)
        k, band = np.unravel_index(int(np.argmax(below)), eig.shape)
        return MeshEdges(_mesh_point(kpoints, eig, k, band, names), None, None, None)
    kv = int(np.argmax(eig[:, n_valence - 1]))
    kc = int(np.argmin(eig[:, n_valence]))
    vbm = _mesh_point(kpoints, eig, kv, n_valence - 1, names)
    cbm = _mesh_point(kpoints, eig, kc, n_valence, names)
    gap = cbm.energy - vbm.energy
    direct = float(np.min(eig[:, n_valence] - eig[:, n_valence - 1]))
    kind = "direct" if direct <= gap + _LEVEL_TOL or _same_k(vbm.kpoint, cbm.kpoint) else "indirect"
    return MeshEdges(vbm, cbm, gap, kind)


def gap_analysis(path: BandPath, eigenvalues, n_electrons: float, *,
                 mesh_kpoints=None, mesh_eigenvalues=None, mesh_weights=None,
                 mesh_rotations=None, fermi_level: float | None = None) -> GapAnalysis:
    """Band gaps, band edges and bandwidth of bands along a path.

    Parameters
    ----------
    path : BandPath
    eigenvalues : array (n_k, n_bands), Ha
        Bands at ``path.kpoints``.
    n_electrons : float
        Valence electrons per cell (two per band).
    mesh_kpoints : array (n_m, 3), optional
        Fractional k-points of the SCF mesh...
    mesh_eigenvalues : array (n_m, n_bands_m), Ha, optional
        ...and the bands there (same potential).
    mesh_weights : array (n_m,), optional
        Weights of the mesh points (sum 1; default equal), for a metal's Fermi level.
    mesh_rotations : array (n_ops, 3, 3) int, optional
        Rotations ``W`` of the crystal: a mesh point equivalent (``W^T k``, ``-k``,
        ``k + G``) to a special point of the path is named after it.
    fermi_level : float, Ha, optional
        The ground state's Fermi level, used as the reference of a metal. Without it
        a metal's Fermi level is the sharp filling of the mesh (or path) states.

    Returns
    -------
    GapAnalysis

    Notes
    -----
    The system is an insulator when ``N`` is even and the ``N/2``-th band lies
    entirely below the next one on the path and on the mesh; then the reference is
    the valence-band top of both. The gap is *direct* when the smallest vertical gap
    ``min_k [e_c(k) - e_v(k)]`` equals the band gap (within 1e-7 Ha).
    """
    eig = np.asarray(eigenvalues, float)
    if eig.ndim != 2 or eig.shape[0] != path.n_points:
        raise ValueError(f"eigenvalues {eig.shape} must be (n_k = {path.n_points}, n_bands)")
    have_mesh = mesh_eigenvalues is not None
    meig = np.asarray(mesh_eigenvalues, float) if have_mesh else None
    half = n_electrons / 2
    even = abs(half - round(half)) < 1e-8
    n_valence = int(round(half)) if even else int(np.ceil(half))
    n_bands = eig.shape[1] if not have_mesh else min(eig.shape[1], meig.shape[1])
    if n_bands <= n_valence:
        raise InputError(f"{n_bands} bands hold no empty band above the {n_valence} occupied "
                         f"ones; ask for at least {n_valence + 1} bands", key="bands",
                         value=n_bands)
    top = eig[:, n_valence - 1].max()
    bottom = eig[:, n_valence].min()
    if have_mesh:
        top = max(top, meig[:, n_valence - 1].max())
        bottom = min(bottom, meig[:, n_valence].min())
    metallic = not even or top >= bottom - _LEVEL_TOL

    if metallic:
        if fermi_level is None:
            # A sharp filling of the mesh states (of the path's, as a crude last resort).
            source = meig if have_mesh else eig
            weights = (np.asarray(mesh_weights, float) if have_mesh and mesh_weights is not None
                       else np.full(len(source), 1.0 / len(source)))
            fermi_level = _sharp_fermi_level(source, weights, n_electrons)
        reference, kind = float(fermi_level), "Fermi level"
        vbm = cbm = dpoint = None
        gap = direct = None
        gap_kind = None
    else:
        reference, kind = float(top), "valence-band top"
        iv = int(np.argmax(eig[:, n_valence - 1]))
        ic = int(np.argmin(eig[:, n_valence]))
        vbm = _locate(path, eig, iv, n_valence - 1, +1)
        cbm = _locate(path, eig, ic, n_valence, -1)
        gap = cbm.energy - vbm.energy
        vertical = eig[:, n_valence] - eig[:, n_valence - 1]
        idir = int(np.argmin(vertical))
        direct = float(vertical[idir])
        dpoint = _locate(path, eig, idir, n_valence - 1, +1)
        gap_kind = "direct" if direct <= gap + _LEVEL_TOL else "indirect"

    ib = int(np.argmin(eig[:, 0]))
    band_bottom = _locate(path, eig, ib, 0, -1)
    mesh = None
    if have_mesh:
        mk = np.asarray(mesh_kpoints, float) if mesh_kpoints is not None \
            else np.full((len(meig), 3), np.nan)
        names = _special_point_namer(path, mesh_rotations)
        mesh = _mesh_edges(mk, meig, n_valence, metallic, reference, names)
        kb = int(np.argmin(meig[:, 0]))
        if meig[kb, 0] < band_bottom.energy - _LEVEL_TOL:
            band_bottom = _mesh_point(mk, meig, kb, 0, names)
    return GapAnalysis(metallic, n_valence, reference, kind, vbm, cbm, gap, gap_kind, direct,
                       dpoint, band_bottom, reference - band_bottom.energy, mesh)


# ----------------------------------------------------------------------------- workflows


def _resolve_source(setup_or_ground_state, density):
    """(setup, density, ground state or None) from either calling form.

    ``density`` may also be the mapping :func:`pwsolid.store.load_density` returns; its
    ``kinetic_density`` (meta-GGAs) is then used by :func:`kinetic_density_of`.
    """
    if isinstance(density, Mapping):
        density = density["density"]
    if isinstance(setup_or_ground_state, GroundState):
        gs = setup_or_ground_state
        return gs.setup, (gs.density if density is None else np.asarray(density, float)), gs
    if isinstance(setup_or_ground_state, SystemSetup):
        if density is None:
            raise InputError("a density is needed with a set-up (or pass the ground state)",
                             key="density", value=None)
        d = np.asarray(density, float)
        if d.shape != tuple(setup_or_ground_state.grid_shape):
            raise InputError(f"the density is on a {d.shape} grid, the set-up uses "
                             f"{tuple(setup_or_ground_state.grid_shape)}", key="density",
                             value=list(d.shape))
        return setup_or_ground_state, d, None
    raise TypeError("expected a GroundState or a SystemSetup from pwsolid.scf.prepare, got "
                    f"{type(setup_or_ground_state).__name__}")


def kinetic_density_of(setup_or_ground_state, density):
    """The stored kinetic-energy density (meta-GGAs) of either calling form, or None."""
    if isinstance(density, Mapping):
        return density.get("kinetic_density")
    if isinstance(setup_or_ground_state, GroundState) and density is None:
        return setup_or_ground_state.kinetic_density
    return None


def _sample(crystal: Crystal, path, n_points: int | None) -> BandPath:
    if isinstance(path, BandPath):
        return path
    if path is None:
        spec = standard_path(crystal)
    elif isinstance(path, PathSpec):
        spec = path
    else:
        spec = user_path(crystal, path)
    return sample_path(spec, n_points)


def _combined_progress(progress: Progress | None, offset: int, total: int):
    if progress is None:
        return None
    return lambda done, _n: progress(offset + done, total)


def _mesh_data(setup: SystemSetup, density, gs: GroundState | None, n_bands: int,
               tolerance: float, progress, offset: int, total: int, tau=None):
    """(k-points, eigenvalues, weights, Fermi level or None) on the SCF mesh."""
    k_list = np.asarray(setup.kpoints.fractional)
    weights = np.asarray(setup.kpoints.weights)
    if gs is not None:
        return k_list, np.asarray(gs.eigenvalues), weights, getattr(gs, "fermi_level", None)
    eig = bands_at_kpoints(setup, density, k_list, n_bands, tolerance=tolerance,
                           progress=_combined_progress(progress, offset, total),
                           kinetic_density=tau)
    return k_list, eig, weights, _settings_fermi_level(setup, eig, weights)


def _settings_fermi_level(setup: SystemSetup, eig, weights) -> float | None:
    """Fermi level of the mesh bands with the settings' smearing (None without smearing)."""
    s = setup.settings
    name = getattr(s, "smearing", "none")
    width = getattr(s, "smearing_width", 0.0)
    if name in (None, "none") or not width:
        return None
    order = getattr(s, "smearing_order", None) if name == "methfessel-paxton" else None
    try:
        half = setup.n_electrons / 2
        if abs(half - round(half)) < 1e-8 and eig.shape[1] > round(half) and \
                eig[:, int(round(half)) - 1].max() < eig[:, int(round(half))].min():
            return None                   # an insulator: the reference is the valence top
        return smeared_occupations(eig, weights, setup.n_electrons, smearing_scheme(name, order),
                                   width).fermi_level
    except (ValueError, InputError):
        return None


def band_structure(setup_or_ground_state, density=None, path=None, *, n_points: int = 150,
                   n_bands: int | None = None, tolerance: float = _PATH_TOLERANCE,
                   progress: Progress | None = None, title: str = "") -> BandStructure:
    """Kohn-Sham bands along a path for a fixed density (non-self-consistent).

    Parameters
    ----------
    setup_or_ground_state : GroundState or SystemSetup
        A ground state (its density, eigenvalues and Fermi level are used) or a
        set-up from :func:`pwsolid.scf.prepare` with ``density``.
    density : ndarray (n1, n2, n3), bohr^-3, optional
        The density defining the potential; default the ground state's.
    path : None, str, list, PathSpec or BandPath
        None: the standard path of the crystal's Bravais lattice (Setyawan &
        Curtarolo); a string such as ``"G-X-W-K-G-L"`` or a list of pieces (see
        :func:`pwsolid.bandpath.user_path`); a PathSpec; or an already sampled
        BandPath.
    n_points : int
        Total number of k-points along the path.
    n_bands : int, optional
        Bands per k-point (default: those of the set-up, occupied plus empty).
    tolerance : float
        Residual tolerance of the eigensolver at each k-point.
    progress : callable, optional
        ``progress(done, total)`` after each k-point (SCF-mesh points first, when
        they must be recomputed, then the path).
    title : str
        Free text kept with the result.

    Returns
    -------
    BandStructure
    """
    setup, dens, gs = _resolve_source(setup_or_ground_state, density)
    tau = kinetic_density_of(setup_or_ground_state, density)
    crystal = setup.crystal
    bpath = _sample(crystal, path, n_points)
    nb = int(setup.n_bands if n_bands is None else n_bands)
    if nb < 1:
        raise InputError("ask for at least one band", key="bands", value=n_bands)
    n_mesh = 0 if gs is not None else setup.kpoints.n_kpoints
    total = n_mesh + bpath.n_points
    mk, meig, mw, ef = _mesh_data(setup, dens, gs, setup.n_bands, tolerance, progress, 0, total,
                                  tau)
    eig = bands_at_kpoints(setup, dens, bpath.kpoints, nb, tolerance=tolerance,
                           kinetic_density=tau,
                           progress=_combined_progress(progress, n_mesh, total))
    rotations = getattr(setup.kpoints.operations, "rotations", None)
    gaps = gap_analysis(bpath, eig, setup.n_electrons, mesh_kpoints=mk, mesh_eigenvalues=meig,
                        mesh_weights=mw, mesh_rotations=rotations, fermi_level=ef)
    extra = {"cutoff_Ha": float(setup.settings.cutoff),
             "scf_mesh": list(setup.settings.kpoint_mesh),
             "eigensolver_tolerance": float(tolerance)}
    return BandStructure(bpath, eig, gaps.reference, gaps, float(setup.n_electrons),
                         "non-self-consistent bands of a fixed self-consistent density", title,
                         extra)


def empirical_band_structure(material, path=None, *, cutoff: float | None = None,
                             reduced_cutoff: float | None = None, n_points: int = 150,
                             n_bands: int = 8, lattice_constant: float | None = None,
                             progress: Progress | None = None, title: str = "") -> BandStructure:
    """Bands of the Cohen-Bergstresser empirical potential (fixed potential, no SCF).

    Parameters
    ----------
    material : str
        ``"Si"``, ``"Ge"`` or ``"GaAs"`` (see :data:`pwsolid.pseudo.empirical.EMPIRICAL_MATERIALS`).
    path : as for :func:`band_structure`
        Default: the standard fcc path.
    cutoff : float, Ha, optional
        Plane-wave cutoff ``|k+G|^2 / 2``; or ``reduced_cutoff``, the bound on
        ``|k+G|^2`` in units of ``(2 pi / a)^2``. Default ``reduced_cutoff = 40``
        (converged to ~0.02 eV).
    n_points : int
    n_bands : int
        At least 5 (four valence bands and one conduction band).
    lattice_constant : float, bohr, optional
        Cube edge (default: the table's value).
    progress : callable, optional
        ``progress(done, total)`` after each k-point.

    Returns
    -------
    BandStructure
        Reference: the valence-band top (four valence bands: 8 electrons per cell).

    References
    ----------
    M. L. Cohen and T. K. Bergstresser, Phys. Rev. 141, 789 (1966).
    """
    crystal = empirical_crystal(material, lattice_constant)
    a = (4.0 * crystal.volume) ** (1.0 / 3.0)
    if cutoff is None and reduced_cutoff is None:
        reduced_cutoff = _EMPIRICAL_REDUCED_CUTOFF
    if cutoff is not None and reduced_cutoff is not None:
        raise InputError("give either a cutoff or a reduced cutoff, not both",
                         key="empirical.cutoff", value=(cutoff, reduced_cutoff))
    cutoff_ha = float(cutoff) if cutoff is not None else reduced_cutoff_to_hartree(reduced_cutoff, a)
    if not np.isfinite(cutoff_ha) or cutoff_ha <= 0:
        raise InputError("the basis cutoff must be positive", key="empirical.cutoff", value=cutoff_ha)
    bpath = _sample(crystal, path, n_points)
    k = bpath.kpoints
    eig = np.empty((len(k), int(n_bands)))
    with single_threaded_blas():          # many small matrices: threads only contend
        for i in range(len(k)):
            eig[i] = empirical_bands(material, k[i:i + 1], n_bands, cutoff_ha, crystal=crystal)[0]
            if progress is not None:
                progress(i + 1, len(k))
    n_electrons = 8.0                     # two atoms, four valence electrons each
    gaps = gap_analysis(bpath, eig, n_electrons)
    name = next((n for n in EMPIRICAL_MATERIALS if n.lower() == str(material).lower()),
                "".join(dict.fromkeys(crystal.species)))
    return BandStructure(bpath, eig, gaps.reference, gaps, n_electrons,
                         f"empirical pseudopotential (Cohen-Bergstresser form factors) of {name}",
                         title or f"{name}, empirical pseudopotential bands",
                         {"cutoff_Ha": cutoff_ha, "material": name,
                          "lattice_constant_bohr": float(a)})
