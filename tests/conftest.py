"""Shared fixtures: small, fast systems for engine tests."""

import numpy as np
import pytest

from pwsolid.crystal import diamond
from pwsolid.units import BOHR_ANGSTROM

#: The bundled local silicon pseudopotential (Appelbaum & Hamann, Phys. Rev. B 8, 1777
#: (1973)); tests that quote numbers computed with it name it explicitly, because the
#: default silicon pseudopotential is the nonlocal Goedecker-Teter-Hutter one.
LOCAL_SILICON = {"Si": "Si-appelbaum-hamann.toml"}

#: Silicon's room-temperature lattice constant, 5.431 angstrom (REFERENCES 6a, [V1]).
SILICON_A = 5.431 / BOHR_ANGSTROM


@pytest.fixture
def silicon():
    return diamond(SILICON_A, "Si")


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)
