"""Silicon's elastic constants from stress-strain lines, against measurement and against
the equation of state at the same settings.

Settings: LDA, the bundled Goedecker-Teter-Hutter file, 16 Ha, a 4x4x4 mesh through
Gamma (a half-step shifted mesh is refused for strain, see the workflow), strains of
+-1 % (one per sign), at the lattice constant of a 7-point equation-of-state scan (+-4 %
of volume) of the same settings; a 5-point scan over +-3 % gave a B0 1.2 GPa lower
(fixed-cutoff energies jump as plane waves cross the cutoff, and fewer, closer points
feel it more). 16 Ha, not less: the stress is a derivative at a fixed plane-wave set
and the scan's energies are at a fixed cutoff; at 12 Ha the two bulk moduli differed by
6 % (94.5 against 100.4 GPa, the basis-set stress still changing with volume), at 16 Ha
by 1.2 % (96.6 against 95.4 GPa, measured 2026-12-05).

Checks, each with its source:

* B = (C11 + 2 C12)/3 (exact for cubic crystals) equals the scan's B0 to 2 % (the issue's
  agreement);
* C11, C12, C44 against H. J. McSkimin and P. Andreatch, J. Appl. Phys. 35, 2161 (1964),
  room temperature: 165.7, 63.9, 79.6 GPa (shared/REFERENCES.md 11b, marked there as
  recalled), within 7 %: the usual LDA scatter for silicon (O. H. Nielsen and R. M. Martin,
  Phys. Rev. B 32, 3792 (1985), LDA C11 about 155-162 GPa, from REFERENCES 11b), from the
  functional, the pseudopotential, the LDA lattice constant (0.6 % short) and a
  measurement at room temperature rather than 0 K;
* the internal-strain parameter near Nielsen and Martin's 0.53 (REFERENCES 11b; within
  0.08, the spread of published LDA values, from memory), and the clamped-ion C44 above
  the relaxed one (relaxation can only lower the energy of a strained cell);
* the stress-strain lines carry the crystal's symmetry before it is imposed: the raw
  slopes satisfy the cubic pattern, and a strain along y gives the stress of the strain
  along x with x and y exchanged (a mirror of the diamond structure; invariance);
* Born stability (silicon is stable: common practice).
"""

import numpy as np
import pytest

import pwsolid
from pwsolid.units import HA_PER_BOHR3_GPA
from pwsolid.workflows.elastic_constants import ElasticSettings, elastic_constants
from pwsolid.workflows.relaxation_evaluation import scf_evaluator

pytestmark = pytest.mark.slow     # a 7-point scan and 5 strained cells at 16 Ha: about 40 s of CPU

SETTINGS = pwsolid.GroundStateSettings(cutoff=16.0, kpoint_mesh=(4, 4, 4),
                                       kpoint_shift=(0, 0, 0))
MEASURED = {"C11": 165.7, "C12": 63.9, "C44": 79.6}   # McSkimin & Andreatch 1964, GPa


@pytest.fixture(scope="module")
def runs():
    scan = pwsolid.scan_volumes(pwsolid.diamond(pwsolid.angstrom(5.386), "Si"), SETTINGS,
                                volume_range=0.04, n_points=7)
    si = pwsolid.diamond(scan.lattice_constants["a"], "Si")
    res = elastic_constants(si, SETTINGS, ElasticSettings(largest_strain=0.01,
                                                          strains_per_sign=1))
    return scan, si, res


def test_bulk_modulus_from_constants_equals_the_equation_of_state(runs):
    scan, _, res = runs
    c = res.constants_gpa
    b = (c["C11"] + 2 * c["C12"]) / 3
    assert b == pytest.approx(res.bulk_modulus_gpa, rel=1e-12)
    assert b == pytest.approx(scan.fit.b0_gpa, rel=0.02), (b, scan.fit.b0_gpa)


def test_constants_agree_with_ultrasonic_measurement_within_lda_scatter(runs):
    _, _, res = runs
    assert res.converged and res.pattern.names == ("C11", "C12", "C44")
    for name, measured in MEASURED.items():
        assert res.constants_gpa[name] == pytest.approx(measured, rel=0.07), name


def test_internal_strain_and_clamped_ions(runs):
    _, _, res = runs
    assert res.internal_strain == pytest.approx(0.53, abs=0.08)
    assert res.clamped_constants_gpa["C44"] > 1.15 * res.constants_gpa["C44"]
    # e_xx leaves every atom on a site that forbids motion: clamped = relaxed there
    assert res.clamped_constants_gpa["C11"] == pytest.approx(res.constants_gpa["C11"], abs=0.01)


def test_stress_strain_lines_carry_the_crystal_symmetry(runs):
    _, si, res = runs
    assert res.relaxed.symmetry_residual * HA_PER_BOHR3_GPA < 0.05   # GPa: SCF-noise level
    point = next(p for p in res.points if p["strain_component"] == 1 and p["amplitude"] > 0)
    eps = np.zeros((3, 3))
    eps[1, 1] = point["amplitude"]
    cell = pwsolid.Crystal(si.lattice @ (np.eye(3) + eps), si.species, si.positions)
    sigma_y = scf_evaluator(SETTINGS)(cell, None).stress
    swap = np.array([[0, 1, 0], [1, 0, 0], [0, 0, 1]])
    expected = swap @ np.array(point["stress_Ha_per_bohr3"]) @ swap.T
    assert np.abs(sigma_y - expected).max() * HA_PER_BOHR3_GPA < 0.02


def test_silicon_is_mechanically_stable(runs):
    _, _, res = runs
    assert res.stable
    assert res.averages.shear_reuss < res.averages.shear_voigt
