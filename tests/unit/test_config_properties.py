"""Property tests: no input, however odd, gives anything but an InputError."""

import datetime as dt
import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pwsolid.config import RunInput, parse_input, schema_table
from pwsolid.errors import InputError
from pwsolid.units import parse_quantity

KNOWN_KEYS = sorted({part for row in schema_table() for part in row.key.split(".")}
                    | {"Si", "Ge", "species", "position", "<species>"})

keys = st.one_of(st.sampled_from(KNOWN_KEYS), st.text(max_size=12))
scalars = st.one_of(
    st.none(), st.booleans(),
    st.integers(), st.integers(min_value=-3, max_value=30),
    st.floats(allow_nan=True, allow_infinity=True), st.floats(min_value=-2, max_value=20),
    st.text(max_size=20),
    st.sampled_from(["15 Ha", "5.43 angstrom", "1e-8 Ha", "diamond", "hcp", "explicit",
                     "Si", "Si-test.toml", "1e308 nm", "-4 bohr", "0 Ha", "lda-pz81",
                     "../Si-test.toml", "/nonexistent/x.toml", "a\x00b", "x" * 300]),
    st.datetimes(), st.dates(), st.times(),
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=4),
                            st.dictionaries(keys, inner, max_size=4)),
    max_leaves=12,
)
documents = st.dictionaries(keys, values, max_size=6)

VALID = {
    "title": "Candidate film",
    "crystal": {"prototype": "diamond", "lattice_constant": "5.43 angstrom", "species": ["Si"],
                "supercell": [1, 1, 1]},
    "pseudopotentials": {"Si": "Si-test.toml"},
    "basis": {"cutoff": "15 Ha", "fft_grid": [24, 24, 24]},
    "brillouin_zone": {"mesh": [4, 4, 4], "shift": [0.5, 0.5, 0.5], "use_symmetry": True},
    "exchange_correlation": {"functional": "lda-pz81"},
    "self_consistency": {"max_iterations": 40, "energy_tolerance": "1e-8 Ha",
                         "density_tolerance": 1e-6, "mixing_weight": 0.6,
                         "mixing_history": 8, "empty_bands": 4},
    "output": {"result_file": "film.result.json", "density_file": "film.density.npz"},
}
EXPLICIT_CRYSTAL = {
    "prototype": "explicit", "lattice_constant": "5.43 angstrom",
    "lattice_vectors": [[0.0, 0.5, 0.5], [0.5, 0.0, 0.5], [0.5, 0.5, 0.0]],
    "atoms": [{"species": "Si", "position": [0.0, 0.0, 0.0]},
              {"species": "Si", "position": [0.25, 0.25, 0.25]}],
}


def _leaf_paths(node, prefix=()):
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _leaf_paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _leaf_paths(v, prefix + (i,))
    yield prefix


def _copy(node):
    if isinstance(node, dict):
        return {k: _copy(v) for k, v in node.items()}
    if isinstance(node, list):
        return [_copy(v) for v in node]
    return node


@st.composite
def mutated_documents(draw):
    """A valid document with a few leaves replaced, deleted or added: reaches deep checks."""
    doc = _copy(VALID)
    if draw(st.booleans()):
        doc["crystal"] = _copy(EXPLICIT_CRYSTAL)
    for _ in range(draw(st.integers(1, 3))):
        paths = [p for p in _leaf_paths(doc) if p]
        path = draw(st.sampled_from(paths))
        parent = doc
        for step in path[:-1]:
            parent = parent[step]
        action = draw(st.sampled_from(["replace", "delete", "add"]))
        if action == "replace":
            parent[path[-1]] = draw(values)
        elif action == "delete":
            del parent[path[-1]]
        elif isinstance(parent, dict):
            parent[draw(keys)] = draw(values)
        else:
            parent.append(draw(values))
    return doc


@pytest.fixture(scope="module")
def base_dir(tmp_path_factory):
    path = tmp_path_factory.mktemp("inputs")
    (path / "Si-test.toml").write_text("# dummy\n")
    return path


def _only_input_errors(document, base_dir):
    try:
        run = parse_input(document, source="trial.toml", base_dir=base_dir)
    except InputError as err:
        assert err.source == "trial.toml"
        assert str(err)
        return None
    assert isinstance(run, RunInput)
    return run


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(documents)
def test_random_documents_raise_only_input_errors(base_dir, document):
    _only_input_errors(document, base_dir)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mutated_documents())
def test_mutated_documents_raise_only_input_errors(base_dir, document):
    run = _only_input_errors(document, base_dir)
    if run is not None:
        # Whatever was accepted echoes back to the same settings.
        again = parse_input(run.echo, source="echo.toml", base_dir=base_dir)
        assert again.settings == run.settings
        assert again.crystal.n_atoms == run.crystal.n_atoms


def test_the_valid_documents_are_valid(base_dir):
    assert _only_input_errors(VALID, base_dir) is not None
    assert _only_input_errors({**VALID, "crystal": EXPLICIT_CRYSTAL}, base_dir) is not None


@settings(max_examples=200, deadline=None)
@given(st.one_of(st.text(max_size=30),
                 st.from_regex(r"\s*[-+]?\d*\.?\d*([eE][-+]?\d{1,4})?\s*[A-Za-z]{0,8}\s*",
                               fullmatch=True),
                 scalars),
       st.sampled_from(["energy", "length", "temperature"]))
def test_parse_quantity_raises_only_input_errors(text, kind):
    try:
        value = parse_quantity(text, kind, key="k", source="s.toml")
    except InputError as err:
        assert "s.toml" in str(err) and "'k'" in str(err)
    else:
        assert isinstance(value, float) and not math.isnan(value)
