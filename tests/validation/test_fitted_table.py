"""Every file of pwsolid's fitted pseudopotential table against the all-electron atom.

For each file in pseudos/fitted-table/<set>/ the recorded targets are read back from the
file itself and the free pseudo-atom is solved again in every fitted and test-only
configuration (pwsolid.pseudo.table.evaluate_entry):

* valence eigenvalues within 1 mHa and charges outside the recorded radii within 0.01 e
  of pwsolid's own scalar-relativistic all-electron atom in the same functional (common
  practice for norm-conserving sets; the all-electron atom itself is checked against
  published atomic tables in test_pseudo_atoms.py and test_gradient_radial_atom.py);
* no ghost state: the levels of each l of the neutral atom in a 10 bohr hard-walled
  sphere pair up with the all-electron ones up to 2 Ha;
* the figures recorded in the file are the ones recomputed (a file cannot claim more
  than it delivers).

Plus a fast lattice check of the table in a solid: LDA silicon at a low cutoff against
the all-electron LDA window (shared/REFERENCES.md 6b, from memory).
"""

from pathlib import Path

import numpy as np
import pytest

import pwsolid
from pwsolid.eos import fit_equation_of_state
from pwsolid.pseudo import load_pseudopotential
from pwsolid.pseudo.table import (CHARGE_GOAL, EIGENVALUE_GOAL, TABLE_DIRECTORY, TABLE_SETS,
                                  FitTargets, evaluate_entry, read_record, table_file)
from pwsolid.resources import pseudopotential_dir

pytestmark = pytest.mark.slow

FILES = sorted(str(p.relative_to(pseudopotential_dir())) for s in TABLE_SETS
               for p in (pseudopotential_dir() / TABLE_DIRECTORY / s).glob("*.toml"))


def _evaluate(name):
    path = pseudopotential_dir() / name
    data = read_record(path)
    record = data["record"]
    targets = FitTargets.from_mapping(record["targets"])
    return record, evaluate_entry(targets, record["summary"]["functional"], data["parameters"])


@pytest.mark.parametrize("name", FILES)
def test_table_file_is_transferable_and_ghost_free(name):
    record, fit = _evaluate(name)
    load_pseudopotential(pseudopotential_dir() / name)          # the file loads
    de, dq = fit.worst()
    summary = record["summary"]
    # the record tells the truth (1e-3 mHa, 1e-5 e: the rounding of the record)
    assert abs(fit.worst(True)[0] * 1e3 - summary["worst_fitted_eigenvalue_error_mHa"]) < 2e-3
    assert abs(fit.worst(False)[0] * 1e3 - summary["worst_test_eigenvalue_error_mHa"]) < 2e-3
    assert fit.ghost["ghost_free"] == record["ghost_check"]["ghost_free"]
    if not summary["meets_goals"]:
        pytest.xfail(f"recorded as missing the goals: {de * 1e3:.2f} mHa, {dq:.4f} e, "
                     f"ghost-free {fit.ghost['ghost_free']}")
    assert de <= EIGENVALUE_GOAL, de
    assert dq <= CHARGE_GOAL, dq
    assert fit.ghost["ghost_free"], fit.ghost


def test_lda_silicon_lattice_constant_at_low_cutoff():
    # All-electron LDA silicon: 5.40-5.41 angstrom, about 96.5 GPa (REFERENCES 6b, from
    # memory). 1 % in a0 and 10 % in B0 leave room for the low cutoff and mesh here.
    path = table_file("Si", "lda")
    if not path.is_file():
        pytest.skip("no LDA silicon in the table")
    settings = pwsolid.GroundStateSettings(cutoff=16.0, kpoint_mesh=(2, 2, 2),
                                           pseudopotentials={"Si": str(path)})
    volumes, energies = [], []
    for f in np.linspace(0.94, 1.06, 5) ** (1 / 3):
        crystal = pwsolid.diamond(pwsolid.angstrom(5.405 * f), "Si")
        gs = pwsolid.ground_state(crystal, settings)
        assert gs.converged
        volumes.append(crystal.volume)
        energies.append(gs.total_energy)
    fit = fit_equation_of_state(np.array(volumes), np.array(energies), "birch-murnaghan")
    a0 = 5.405 * (fit.v0 / pwsolid.diamond(pwsolid.angstrom(5.405), "Si").volume) ** (1 / 3)
    assert abs(a0 / 5.405 - 1) < 0.01, a0
    assert abs(fit.b0 * pwsolid.units.HA_PER_BOHR3_GPA / 96.5 - 1) < 0.10, fit.b0
