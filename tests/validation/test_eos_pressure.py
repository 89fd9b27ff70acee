"""The analytic pressure at each volume-scan point against -dE/dV of the scan's fit.

The pressure is P = -tr(sigma)/3 of the analytic stress, by the stress theorem of
O. H. Nielsen and R. M. Martin, Phys. Rev. B 32, 3780 (1985): the derivative of the
energy under strain at a FIXED plane-wave set. -dE/dV comes from the scan's
Birch-Murnaghan fit (F. Birch, Phys. Rev. 71, 809 (1947)). The issue asks for
agreement to 0.2 GPa at each point. Two ways, silicon with the separable
(Hartwigsen-Goedecker-Hutter) file, LDA, 2x2x2 mesh:

* at a fixed plane-wave set: every cell of the scan keeps the Miller indices and
  FFT grid of the input cell, so the energies the fit sees differentiate exactly to
  the analytic stress and only the fit's error is left (fast; 6 Ha);
* at a fixed cutoff, as an ordinary scan is run, at 20 Ha, where the basis-set
  (Pulay) pressure is measured below 0.1 GPa (slow, ~15 s): the energies then
  include the Pulay stress, and P + P_Pulay is compared with -dE/dV as well.

Measured (this machine, own runs): Pulay pressure estimate 6.8 GPa at 6 Ha, 1.4 GPa
at 10 Ha, 0.33 GPa at 15 Ha, 0.085 GPa at 20 Ha (silicon, a = 10.2 bohr,
:func:`pwsolid.stress.pulay_stress_estimate`).
"""

import dataclasses

import numpy as np
import pytest

import pwsolid
from pwsolid.scf import ground_state, prepare
from pwsolid.stress import stress_tensor
from pwsolid.units import HA_PER_BOHR3_GPA
from pwsolid.warm_start import starting_point
from pwsolid.workflows.equation_of_state import scan_volumes

TIGHT = dict(energy_tolerance=1e-10, density_tolerance=1e-7)


def _fixed_plane_wave_solver(reference):
    """A scan solver whose cells all keep ``reference``'s plane waves and FFT grid."""
    miller = [b.miller for b in reference.setup.bases]

    def solve(cell, settings, warm):
        setup = prepare(cell, settings, plane_waves=miller)
        density, _, _ = starting_point(warm, setup.grid_shape, cell.volume)
        return ground_state(cell, settings, setup=setup, initial_density=density)
    return solve


def test_pressure_equals_the_fits_minus_dE_dV_at_a_fixed_plane_wave_set():
    # centred near the fixed-set minimum (V ~ 254 bohr^3 at 6 Ha: without the Pulay
    # part the cell is smaller than at a converged cutoff) so the fit brackets it
    si = pwsolid.diamond(10.08, "Si")
    settings = pwsolid.GroundStateSettings(cutoff=6.0, kpoint_mesh=(2, 2, 2), **TIGHT)
    reference = ground_state(si, settings)
    fixed = dataclasses.replace(settings, fft_grid=reference.setup.grid_shape)
    scan = scan_volumes(si, fixed, volume_range=0.04, n_points=7,
                        solver=_fixed_plane_wave_solver(reference))
    assert scan.converged and not scan.extensions
    cmp = scan.pressure_comparison()
    assert np.all(np.isfinite(cmp["pressures"]))
    # the scan spans several GPa on either side of zero: a real comparison
    assert np.ptp(cmp["pressures"]) * HA_PER_BOHR3_GPA > 5.0
    # the Pulay part is absent by construction; what is left is the fit's error of
    # -dE/dV over +-4 % (measured 7e-4 GPa): 0.02 GPa, ten times tighter than the
    # issue's 0.2 GPa, still a 30x margin
    assert cmp["largest"] * HA_PER_BOHR3_GPA < 0.02
    doc = scan.as_document()
    assert doc["pressure_check"]["largest_abs_difference_GPa"] < 0.02


@pytest.mark.slow
def test_pressure_equals_the_fits_minus_dE_dV_at_a_converged_cutoff():
    si = pwsolid.diamond(10.2, "Si")
    settings = pwsolid.GroundStateSettings(cutoff=20.0, kpoint_mesh=(2, 2, 2), **TIGHT)
    scan = scan_volumes(si, settings, volume_range=0.03, n_points=5)
    assert scan.converged and not scan.extensions
    cmp = scan.pressure_comparison()
    # at 20 Ha the Pulay pressure is 0.085 GPa (measured below, and the module notes);
    # the fit's error of -dE/dV over +-3 % at this cutoff is ~0.02 GPa (the scatter of
    # the differences): together well inside the 0.2 GPa (measured 0.10 GPa)
    assert cmp["largest"] * HA_PER_BOHR3_GPA < 0.2
    # the difference is the Pulay pressure: adding the estimate at the centre cell to
    # the analytic pressure gives -dE/dV at fixed cutoff to the fit's error (measured
    # 0.016 GPa; 0.05 GPa allows for the estimate's decay model, a few per cent of it)
    st = stress_tensor(ground_state(si, settings), pulay=True)
    pulay = -np.trace(st.pulay_estimate) / 3.0
    assert 0.0 < pulay * HA_PER_BOHR3_GPA < 0.15
    assert np.max(np.abs(cmp["differences"] + pulay)) * HA_PER_BOHR3_GPA < 0.05
