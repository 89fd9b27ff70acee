"""The declared settings table, the input reader and the settings validation agree (issue 15).

For every key of ``SETTINGS_TABLE`` that an input file can hold, hypothesis draws values
inside and outside the declared range (or choices): a valid value passes all three (the
row's own check, ``parse_input`` and ``GroundStateSettings``), an invalid one fails all
three with the same key name in the message. Also: every row is documented in
``input-keys``, and the choices come from the registries that own them.
"""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pwsolid.config import INPUT_TABLES, parse_input, schema_table
from pwsolid.errors import InputError
from pwsolid.occupations import SMEARING_SCHEMES
from pwsolid.settings import SETTINGS_TABLE, UNIT_TEXT, GroundStateSettings

CRYSTAL = {"prototype": "fcc", "lattice_constant": "4.05 angstrom", "species": ["Al"]}
ROWS = [r for r in SETTINGS_TABLE if r.key and r.kind in
        ("quantity", "integer", "number", "integers3", "numbers3", "name", "boolean")
        and r.field != "functional"]


def _inside(row):
    if row.kind == "boolean":
        return st.booleans()
    if row.kind == "name":
        return st.sampled_from(row.choices())
    if row.each is not None:
        return st.tuples(*[st.sampled_from(row.each)] * 3)
    integer = row.kind in ("integer", "integers3")
    low, high = row.low, row.high
    if integer:
        one = st.integers(int(low), int(high))
    else:
        one = st.floats(low, high, exclude_min=row.low_open, exclude_max=row.high_open,
                        allow_nan=False)
    return st.tuples(one, one, one) if row.kind.endswith("3") else one


def _outside(row):
    if row.kind == "boolean":
        return st.nothing()
    if row.kind == "name":
        return st.text(alphabet="abcdefghijklmnopqrstuvwxyz-", min_size=1, max_size=12).filter(
            lambda t: t not in row.choices())
    integer = row.kind in ("integer", "integers3")
    if row.each is not None:
        one = st.floats(-2, 2, allow_nan=False).filter(lambda x: x not in row.each)
    else:
        pieces = []
        if row.low is not None:
            below = st.integers(int(row.low) - 1000, int(row.low) - 1) if integer else \
                st.floats(row.low - 1e3, row.low, exclude_max=not row.low_open, allow_nan=False)
            pieces.append(below)
        if row.high is not None:
            above = st.integers(int(row.high) + 1, int(row.high) + 1000) if integer else \
                st.floats(row.high, row.high + 1e3, exclude_min=not row.high_open,
                          allow_nan=False)
            pieces.append(above)
        one = st.one_of(pieces)
    if row.kind.endswith("3"):
        return st.tuples(one, st.just(row.each[0] if row.each else int(row.low or 1)),
                         st.just(row.each[0] if row.each else int(row.low or 1)))
    return one


def _written(row, value):
    """The value as an input file writes it."""
    if row.kind == "quantity":
        return f"{value!r} {UNIT_TEXT[row.unit]}"
    if isinstance(value, tuple):
        return list(value)
    return value


def _context(row):
    """Other settings the key needs to be meaningful (a moment needs spin polarisation)."""
    return {"spin_polarized": True} if row.field in ("initial_moment", "fixed_moment") else {}


def _document(row, value):
    doc = {"crystal": dict(CRYSTAL), row.section: {row.short_key: _written(row, value)}}
    if _context(row):
        doc.setdefault("spin", {})["polarized"] = True
    return doc


def _all_three(row, value):
    """Results of the row check, the reader and the settings: None or the InputError."""
    out = []
    for attempt in (lambda: row.check(value),
                    lambda: parse_input(_document(row, value), source="trial.toml"),
                    lambda: GroundStateSettings(**{row.field: value, **_context(row)})):
        try:
            attempt()
            out.append(None)
        except InputError as exc:
            out.append(exc)
    return out


@pytest.mark.parametrize("row", ROWS, ids=[r.key for r in ROWS])
@settings(max_examples=15, deadline=None)
@given(data=st.data())
def test_valid_values_pass_the_table_the_reader_and_the_settings(row, data):
    value = data.draw(_inside(row))
    assert _all_three(row, value) == [None, None, None], value


@pytest.mark.parametrize("row", [r for r in ROWS if r.kind != "boolean"],
                         ids=[r.key for r in ROWS if r.kind != "boolean"])
@settings(max_examples=15, deadline=None)
@given(data=st.data())
def test_invalid_values_fail_all_three_naming_the_same_key(row, data):
    value = data.draw(_outside(row))
    errors = _all_three(row, value)
    assert all(e is not None for e in errors), (value, errors)
    for error in errors:
        assert f"'{row.key}'" in str(error), str(error)


def test_every_declared_key_is_documented_and_read():
    documented = {r.key for r in schema_table()}
    for name, rows in INPUT_TABLES.items():
        for row in rows:
            assert row.key in documented and row.key.startswith(name + ".")
    assert {r.key for r in SETTINGS_TABLE if r.key} <= documented


def test_api_only_settings_are_named_by_their_field():
    # issue 15: the background charge was reported under 'crystal.background_electrons',
    # a key the reader rejects as unknown
    with pytest.raises(InputError) as err:
        GroundStateSettings(background_electrons=-1.0)
    assert err.value.key == "background_electrons"
    with pytest.raises(InputError, match="unknown key 'crystal.background_electrons'"):
        parse_input({"crystal": {**CRYSTAL, "background_electrons": 1.0}})


def test_smearing_choices_come_from_the_registry(monkeypatch):
    row = next(r for r in SETTINGS_TABLE if r.field == "smearing")
    assert set(row.choices()) == {"none", *SMEARING_SCHEMES}
    monkeypatch.setitem(SMEARING_SCHEMES, "test-scheme", SMEARING_SCHEMES["gaussian"])
    assert GroundStateSettings(smearing="test-scheme").smearing == "test-scheme"


def test_functionals_are_checked_against_the_xc_registry():
    with pytest.raises(InputError) as err:
        GroundStateSettings(functional="lda-nonsense")
    assert err.value.key == "exchange_correlation.functional" and "pbe" in str(err.value)
    assert math.isclose(GroundStateSettings(functional="PBE").cutoff, 15.0)
