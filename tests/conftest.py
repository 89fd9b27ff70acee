"""Shared fixtures: small, fast systems for engine tests."""

import numpy as np
import pytest

from pwsolid.crystal import diamond
from pwsolid.units import BOHR_ANGSTROM

#: Silicon's room-temperature lattice constant, 5.431 angstrom (REFERENCES 6a, [V1]).
SILICON_A = 5.431 / BOHR_ANGSTROM


@pytest.fixture
def silicon():
    return diamond(SILICON_A, "Si")


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)
