"""Unit tests of pwsolid.bandpath: special points, default paths, sampling, user paths, errors.

Reference positions: Setyawan & Curtarolo, Comput. Mater. Sci. 49, 299 (2010), as
tabulated with their Cartesian images in REFERENCES 8b (units 2 pi / a).
"""

import itertools

import numpy as np
import pytest

from pwsolid import crystal as cr
from pwsolid.bandpath import (BandPath, PathSpec, bravais_lattice, normalise_label, sample_path,
                              standard_path, user_path)
from pwsolid.errors import InputError

A = 7.0          # cube edge in bohr, any value
TWO_PI_A = 2 * np.pi / A
SQ3 = np.sqrt(3.0)

# REFERENCES 8b: Cartesian images in units of 2 pi / a ([C] recomputed there).
FCC_CART = {"Γ": (0, 0, 0), "X": (0, 1, 0), "L": (.5, .5, .5), "W": (.5, 1, 0),
            "K": (.75, .75, 0), "U": (.25, 1, .25)}
BCC_CART = {"Γ": (0, 0, 0), "H": (0, 1, 0), "P": (.5, .5, .5), "N": (.5, .5, 0)}
CUB_CART = {"Γ": (0, 0, 0), "X": (0, .5, 0), "M": (.5, .5, 0), "R": (.5, .5, .5)}
# REFERENCES 8b fractional coordinates of the convention's own vectors.
FCC_FRAC = {"X": (.5, 0, .5), "L": (.5, .5, .5), "W": (.5, .25, .75), "K": (.375, .375, .75),
            "U": (.625, .25, .625)}
HEX_FRAC = {"Γ": (0, 0, 0), "M": (.5, 0, 0), "K": (1 / 3, 1 / 3, 0), "A": (0, 0, .5),
            "L": (.5, 0, .5), "H": (1 / 3, 1 / 3, .5)}


def cart_units(spec: PathSpec, label: str) -> np.ndarray:
    return spec.cartesian(label) / TWO_PI_A


def cubic_star(v) -> tuple:
    """Invariant of a vector under the cubic group O_h: sorted absolute components."""
    return tuple(np.round(np.sort(np.abs(v)), 9))


def rotation(axis, angle):
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    k = np.array([[0, -axis[2], axis[1]], [axis[2], 0, -axis[0]], [-axis[1], axis[0], 0]])
    return np.eye(3) + np.sin(angle) * k + (1 - np.cos(angle)) * k @ k


def on_zone_boundary(spec: PathSpec, label: str) -> bool:
    """True if the point is as close to Γ as to its nearest other reciprocal-lattice point."""
    k = spec.cartesian(label)
    m = np.array(list(itertools.product(range(-3, 4), repeat=3)))
    m = m[np.any(m != 0, axis=1)]
    d = np.linalg.norm(k - m @ spec.reciprocal, axis=1)
    return bool(abs(d.min() - np.linalg.norm(k)) < 1e-9 * np.linalg.norm(spec.reciprocal))


# -- special points against REFERENCES 8b ------------------------------------------------


@pytest.mark.parametrize("build, name, table, path", [
    (lambda: cr.face_centred_cubic(A, "Al"), "FCC", FCC_CART, "Γ-X-W-K-Γ-L-U-W-L-K | U-X"),
    (lambda: cr.diamond(A, "Si"), "FCC", FCC_CART, "Γ-X-W-K-Γ-L-U-W-L-K | U-X"),
    (lambda: cr.zincblende(A, ("Ga", "As")), "FCC", FCC_CART, "Γ-X-W-K-Γ-L-U-W-L-K | U-X"),
    (lambda: cr.body_centred_cubic(A, "Na"), "BCC", BCC_CART, "Γ-H-N-Γ-P-H | P-N"),
    (lambda: cr.simple_cubic(A), "CUB", CUB_CART, "Γ-X-M-Γ-R-X | M-R"),
    (lambda: cr.cesium_chloride(A, ("Cs", "Cl")), "CUB", CUB_CART, "Γ-X-M-Γ-R-X | M-R"),
])
def test_cubic_points_match_the_cartesian_images(build, name, table, path):
    # Source: REFERENCES 8b (Setyawan & Curtarolo 2010); the builders use the convention's
    # vectors, so the images must agree exactly (1e-12: rounding only).
    spec = standard_path(build())
    assert spec.lattice_type == name
    assert spec.describe() == path
    assert set(spec.points) == set(table)
    for label, ref in table.items():
        np.testing.assert_allclose(cart_units(spec, label), ref, atol=1e-12)


def test_fcc_fractional_coordinates_are_the_published_ones():
    # Source: REFERENCES 8b; the fcc builder uses the convention's vectors (1e-12: rounding).
    spec = standard_path(cr.face_centred_cubic(A, "Cu"))
    for label, ref in FCC_FRAC.items():
        np.testing.assert_allclose(spec.points[label], ref, atol=1e-12)


def test_hexagonal_points_and_lengths():
    # Source: REFERENCES 8b: fractional points of the convention's vectors (the hcp builder's),
    # |ΓM| = 2 pi / (a sqrt 3), |ΓK| = 4 pi / (3 a), A at pi / c (exact, 1e-12 rounding).
    a, c_over_a = 6.0, 1.624
    spec = standard_path(cr.hexagonal_close_packed(a, "Mg", c_over_a=c_over_a))
    assert spec.lattice_type == "HEX"
    assert spec.describe() == "Γ-M-K-Γ-A-L-H-A | L-M | K-H"
    for label, ref in HEX_FRAC.items():
        np.testing.assert_allclose(spec.points[label], ref, atol=1e-12)
    norm = lambda lab: np.linalg.norm(spec.cartesian(lab))  # noqa: E731
    assert norm("M") == pytest.approx(2 * np.pi / (a * SQ3), rel=1e-12)
    assert norm("K") == pytest.approx(4 * np.pi / (3 * a), rel=1e-12)
    assert norm("A") == pytest.approx(np.pi / (c_over_a * a), rel=1e-12)


def test_non_standard_primitive_vectors_give_the_same_cartesian_points():
    # The crystal's own vectors differ from the convention's (another unimodular basis of
    # the same fcc lattice): the Cartesian points must not change, the fractional ones must.
    fcc = cr.face_centred_cubic(A, "Al")
    mixed = np.array([[1, 0, 0], [1, 1, 0], [1, 1, 1]]) @ fcc.lattice
    other = cr.Crystal(mixed, ("Al",), [[0, 0, 0]])
    spec = standard_path(other)
    assert spec.lattice_type == "FCC"
    for label, ref in FCC_CART.items():
        assert cubic_star(cart_units(spec, label)) == cubic_star(ref)
    assert not np.allclose(spec.points["X"], FCC_FRAC["X"])
    # The path is connected the same way: equal segment lengths (1e-9: rounding).
    ref = standard_path(fcc)
    for piece_a, piece_b in zip(spec.pieces, ref.pieces):
        for (p, q), (r, s) in zip(zip(piece_a, piece_a[1:]), zip(piece_b, piece_b[1:])):
            assert np.linalg.norm(spec.cartesian(q) - spec.cartesian(p)) == pytest.approx(
                np.linalg.norm(ref.cartesian(s) - ref.cartesian(r)), rel=1e-9)


def test_rotated_crystal_rotates_the_points():
    # A rigidly rotated bcc crystal: every point is the rotated reference point
    # (up to a cubic symmetry operation, which spglib may choose; 1e-9: rounding).
    rot = rotation([1, 2, 3], 0.7)
    bcc = cr.body_centred_cubic(A, "Fe")
    turned = cr.Crystal(bcc.lattice @ rot.T, ("Fe",), [[0, 0, 0]])
    spec = standard_path(turned)
    assert spec.lattice_type == "BCC"
    for label, ref in BCC_CART.items():
        back = cart_units(spec, label) @ rot        # undo the rotation
        assert cubic_star(back) == cubic_star(ref)


@pytest.mark.parametrize("c", [4.0, 9.0])
def test_tetragonal_lattices(c):
    # Simple tetragonal: X = (0, pi/a, 0), M = (pi/a, pi/a, 0), Z = (0, 0, pi/c) (zone-face
    # centres of a rectangular box, exact). Body-centred (BCT1 for c < a, BCT2 for c > a):
    # Setyawan & Curtarolo points, not in REFERENCES, checked here by geometry: every point
    # other than Γ lies on the Brillouin-zone boundary.
    a = 5.0
    tet = standard_path(cr.Crystal(np.diag([a, a, c]), ("Sn",), [[0, 0, 0]]))
    assert tet.lattice_type == "TET"
    np.testing.assert_allclose(tet.cartesian("X"), [0, np.pi / a, 0], atol=1e-12)
    np.testing.assert_allclose(tet.cartesian("M"), [np.pi / a, np.pi / a, 0], atol=1e-12)
    np.testing.assert_allclose(tet.cartesian("Z"), [0, 0, np.pi / c], atol=1e-12)
    bct_vectors = 0.5 * np.array([[-a, a, c], [a, -a, c], [a, a, -c]])
    bct = standard_path(cr.Crystal(bct_vectors, ("Sn",), [[0, 0, 0]]))
    assert bct.lattice_type == ("BCT1" if c < a else "BCT2")
    for spec in (tet, bct):
        for label in spec.points:
            if label != "Γ":
                assert on_zone_boundary(spec, label), (spec.lattice_type, label)


def test_every_cubic_and_hexagonal_point_is_on_the_zone_boundary():
    # Geometry check of all special points (other than Γ) of the implemented lattices.
    for crystal in (cr.face_centred_cubic(A, "Al"), cr.body_centred_cubic(A, "Na"),
                    cr.simple_cubic(A), cr.hexagonal_close_packed(6.0, "Mg")):
        spec = standard_path(crystal)
        for label in spec.points:
            if label != "Γ":
                assert on_zone_boundary(spec, label), (spec.lattice_type, label)


def test_bravais_lattice_of_a_low_symmetry_crystal():
    monoclinic = cr.Crystal([[6.0, 0, 0], [0, 7.0, 0], [1.5, 0, 8.0]], ("Ga", "As"),
                            [[0, 0, 0], [0.3, 0.5, 0.2]])
    assert bravais_lattice(monoclinic)[0] in {"MCL", "TRI"}
    with pytest.raises(InputError, match="user_path"):
        standard_path(monoclinic)


# -- sampling ---------------------------------------------------------------------------


def segment_intervals(path: BandPath):
    """(Cartesian length, number of intervals) of every segment of a sampled path."""
    out = []
    for (i, _), (j, _) in zip(path.labels[:-1], path.labels[1:]):
        if j in path.breaks and i == j - 1:
            continue                               # the jump across a break
        out.append((path.distance[j] - path.distance[i], j - i))
    return out


def test_points_per_segment_are_proportional_to_length():
    spec = standard_path(cr.face_centred_cubic(A, "Al"))
    path = sample_path(spec, 300)
    assert path.n_points == 300
    segs = segment_intervals(path)
    assert len(segs) == 10
    lengths = np.array([s[0] for s in segs])
    counts = np.array([s[1] for s in segs])
    ideal = lengths / lengths.sum() * counts.sum()
    # Rounding to whole intervals: within one interval of the proportional share.
    assert np.all(np.abs(counts - ideal) < 1.0)
    # Even spacing inside each segment (1e-12: rounding).
    for (i, _), (j, _) in zip(path.labels[:-1], path.labels[1:]):
        if j - i > 1:
            steps = np.linalg.norm(np.diff(path.cartesian[i:j + 1], axis=0), axis=1)
            np.testing.assert_allclose(steps, steps[0], rtol=1e-12)


def test_density_sampling():
    spec = standard_path(cr.simple_cubic(A))
    density = 40.0                                 # points per 1/bohr
    path = sample_path(spec, density=density)
    for length, count in segment_intervals(path):
        assert abs(count - length * density) <= 0.5 + 1e-9


def test_distance_and_breaks():
    spec = standard_path(cr.face_centred_cubic(A, "Al"))      # ... L-K | U-X
    path = sample_path(spec, 120)
    assert len(path.breaks) == 1
    b = path.breaks[0]
    labels = dict(path.labels)
    assert labels[b - 1] == "K" and labels[b] == "U"
    assert path.distance[b] == path.distance[b - 1]          # no length across the jump
    steps = np.linalg.norm(np.diff(path.cartesian, axis=0), axis=1)
    gaps = np.diff(path.distance)
    keep = np.ones(len(gaps), bool)
    keep[b - 1] = False
    np.testing.assert_allclose(gaps[keep], steps[keep], rtol=1e-12)
    # Shared corners once per piece: no two consecutive identical points.
    assert np.all(steps[keep] > 0)
    x, texts = path.ticks()
    assert texts == ("Γ", "X", "W", "K", "Γ", "L", "U", "W", "L", "K|U", "X")
    assert np.all(np.diff(x) > 0)
    total = sum(np.linalg.norm(spec.cartesian(q) - spec.cartesian(p))
                for piece in spec.pieces for p, q in zip(piece, piece[1:]))
    assert path.distance[-1] == pytest.approx(total, rel=1e-12)


def test_path_endpoints_are_the_special_points():
    spec = standard_path(cr.hexagonal_close_packed(6.0, "Mg"))
    path = sample_path(spec, 90)
    for index, label in path.labels:
        np.testing.assert_allclose(path.kpoints[index], spec.points[label], atol=1e-14)


# -- user paths -------------------------------------------------------------------------


def test_user_path_with_coordinates_and_breaks():
    fcc = cr.face_centred_cubic(A, "Al")
    spec = user_path(fcc, [[("G", [0, 0, 0]), ("X", [0.5, 0, 0.5])],
                           [("Gamma", [0, 0, 0]), ("L", [0.5, 0.5, 0.5])]])
    assert spec.lattice_type == "user"
    assert spec.pieces == (("Γ", "X"), ("Γ", "L"))
    path = sample_path(spec, 40)
    assert path.n_points == 40 and path.breaks == (path.labels[2][0],)
    np.testing.assert_allclose(cart_units(spec, "X"), FCC_CART["X"], atol=1e-12)


def test_user_path_from_standard_labels_and_text():
    fcc = cr.face_centred_cubic(A, "Al")
    a = user_path(fcc, [["G", "X", "W"], ["L", "Gamma"]])
    b = user_path(fcc, "G-X-W|L-Γ")
    assert a.pieces == b.pieces == (("Γ", "X", "W"), ("L", "Γ"))
    for label in ("Γ", "X", "W", "L"):
        np.testing.assert_allclose(a.points[label], standard_path(fcc).points[label])


def test_label_spellings():
    assert normalise_label("G") == normalise_label("gamma") == normalise_label("\\Gamma") == "Γ"
    assert normalise_label("Sigma1") == "Σ1"
    assert normalise_label(" X ") == "X"


@pytest.mark.parametrize("segments, message", [
    ([["G", "Q"]], "unknown special point 'Q'"),
    ([["G"]], "at least two points"),
    ([], "empty"),
    ([[("A", [0, 0]), ("B", [0, 0, 0.5])]], "three finite"),
    ([[("A", [0, 0, 0]), ("A", [0, 0, 0.5])]], "two different points"),
    ([["G", "G"]], "same point"),
    (["G-X"], "list of points"),
])
def test_user_path_errors(segments, message):
    with pytest.raises(InputError, match=message):
        user_path(cr.face_centred_cubic(A, "Al"), segments)


def test_label_without_coordinates_on_an_unsupported_lattice():
    monoclinic = cr.Crystal([[6.0, 0, 0], [0, 7.0, 0], [1.5, 0, 8.0]], ("Ga", "As"),
                            [[0, 0, 0], [0.3, 0.5, 0.2]])
    with pytest.raises(InputError, match="no coordinates"):
        user_path(monoclinic, [["G", "X"]])
    spec = user_path(monoclinic, [[("G", [0, 0, 0]), ("Y", [0, 0.5, 0])]])   # explicit: fine
    assert sample_path(spec, 11).n_points == 11


def test_sampling_errors():
    spec = standard_path(cr.simple_cubic(A))
    with pytest.raises(InputError, match="at least"):
        sample_path(spec, 5)
    with pytest.raises(InputError, match="not both"):
        sample_path(spec, 100, density=10.0)
    with pytest.raises(InputError, match="positive"):
        sample_path(spec, density=-1.0)
