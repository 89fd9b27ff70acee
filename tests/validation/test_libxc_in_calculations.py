"""Libxc functionals (``libxc:<name>``) in the ground state, the input file and the store.

Source: Libxc (Lehtola et al., SoftwareX 7, 1 (2018)) implements the same published
formulas as pwsolid's Perdew-Zunger 1981 and Perdew-Burke-Ernzerhof 1996 (agreement of
the kernels to 1e-13: tests/validation/test_libxc_reference.py), so the same crystal
must give the same total energy with either, to the SCF's tolerance. Skipped without
the Libxc C library (CI installs Debian's libxc9 where it can).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from pwsolid.crystal import diamond
from pwsolid.errors import InputError
from pwsolid.scf import ground_state
from pwsolid.settings import GroundStateSettings
from pwsolid.xc.libxc_bridge import libxc_available, libxc_version

from conftest import SILICON_A

pytestmark = pytest.mark.skipif(not libxc_available(),
                                reason="the Libxc C library is not installed")

SETTINGS = GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2), energy_tolerance=1e-10,
                               density_tolerance=1e-8)


@pytest.mark.parametrize("builtin, libxc", [
    ("lda-pz81", "libxc:lda_x+lda_c_pz"),
    ("pbe", "libxc:gga_x_pbe+gga_c_pbe"),
])
def test_libxc_functional_gives_the_builtin_energy(builtin, libxc):
    silicon = diamond(SILICON_A, "Si")
    mine = ground_state(silicon, SETTINGS.replace(functional=builtin))
    theirs = ground_state(silicon, SETTINGS.replace(functional=libxc))
    assert mine.converged and theirs.converged
    # kernels agree to 1e-13 relative; what is left is the SCF's stopping (1e-10 Ha)
    assert theirs.energy.total == pytest.approx(mine.energy.total, abs=1e-8)
    assert theirs.setup.functional.origin == f"libxc {libxc_version()}"


def test_fingerprint_and_result_name_the_libxc_version():
    from pwsolid import store
    from pwsolid.results import ground_state_document

    silicon = diamond(SILICON_A, "Si")
    settings = SETTINGS.replace(functional="libxc:lda_x+lda_c_pz")
    result = ground_state(silicon, settings)
    print_ = store.fingerprint(silicon, settings, result.setup.pseudopotentials)
    assert print_.values["functional"] == (
        f"libxc:lda_x+lda_c_pz (Libxc {libxc_version()})")
    doc = ground_state_document(result)
    assert doc["exchange_correlation"]["origin"] == f"libxc {libxc_version()}"
    # another spelling of the same functionals is the same calculation
    respelt = settings.replace(functional="LIBXC: XC_LDA_X + lda_c_pz")
    assert store.fingerprint(silicon, respelt, result.setup.pseudopotentials) == print_


def test_input_file_takes_a_libxc_functional_and_refuses_a_hybrid(tmp_path):
    from pwsolid.config import load_input

    text = ('[crystal]\nprototype = "diamond"\nspecies = "Si"\n'
            'lattice_constant = "5.43 angstrom"\n'
            '[exchange_correlation]\nfunctional = "{}"\n')
    good = tmp_path / "good.toml"
    good.write_text(text.format("libxc:gga_x_pbe+gga_c_pbe"))
    assert load_input(good).settings.functional == "libxc:gga_x_pbe+gga_c_pbe"
    bad = tmp_path / "bad.toml"
    bad.write_text(text.format("libxc:hyb_gga_xc_b3lyp"))
    with pytest.raises(InputError, match="exact \\(Fock\\) exchange") as info:
        load_input(bad)
    assert "bad.toml" in str(info.value) and "exchange_correlation.functional" in str(info.value)


@pytest.mark.slow
def test_spin_polarised_libxc_gga_gives_the_builtin_energy():
    # a silicon cell held at a moment of 2 electrons: zeta between 0 and 1 everywhere,
    # so every spin-polarised kernel and gradient invariant is exercised
    silicon = diamond(SILICON_A, "Si")
    settings = SETTINGS.replace(spin_polarized=True, fixed_moment=2.0,
                                smearing="fermi-dirac", smearing_width=0.01)
    mine = ground_state(silicon, settings.replace(functional="pbe"))
    theirs = ground_state(silicon, settings.replace(functional="libxc:gga_x_pbe+gga_c_pbe"))
    assert mine.converged and theirs.converged
    assert abs(mine.magnetization - 2.0) < 1e-8
    assert theirs.free_energy == pytest.approx(mine.free_energy, abs=1e-8)


def test_testbench_command_takes_a_libxc_functional(tmp_path, capsys):
    from pwsolid.cli import main

    assert main(["xc-testbench", "libxc:lda_x+lda_c_pw_mod", "--no-plots",
                 "--output-dir", str(tmp_path)]) == 0
    (report,) = tmp_path.glob("*.json")
    doc = json.loads(report.read_text())
    assert doc["functional"]["origin"] == f"libxc {libxc_version()}"
    # Libxc's PW92 (PBE form) against pwsolid's Table I PW92: the A constants differ in
    # the sixth digit, a few 1e-6 Ha at most on the testbench's range
    differences = np.array(doc["correlation_differences_mHa"]["lda-pw92"], dtype=float)
    assert np.nanmax(np.abs(differences)) < 0.01
    assert main(["xc-testbench", "libxc:mgga_x_scan", "--no-plots",
                 "--output-dir", str(tmp_path)]) == 3
    assert "meta-GGA" in capsys.readouterr().err
