"""Size of the basis-set (Pulay) stress for the bundled example inputs.

For each input: the analytic pressure at a fixed plane-wave set (Nielsen and Martin,
Phys. Rev. B 32, 3780 (1985)), the Pulay estimate (2/3)(E_c/Omega) dF/dE_c of
:func:`pwsolid.stress.pulay_stress_estimate` (finite-basis correction of Francis and
Payne, J. Phys.: Condens. Matter 2, 4395 (1990), from memory) and the pressure at
fixed cutoff they add up to. Not a test (minutes per input); run as

    python tests/validation/pulay_stress_table.py [inputs/x.toml ...]

With ``--check`` it also takes the pressure at fixed cutoff from central finite
differences of the free energy in volume (+-1 %), as a scan at fixed cutoff sees it.
"""

import argparse
import sys
import time
from pathlib import Path

import numpy as np

import pwsolid
from pwsolid.stress import stress_tensor
from pwsolid.units import HA_PER_BOHR3_GPA

ROOT = Path(__file__).resolve().parents[2]
CHEAP = ["silicon-substrate", "aluminium-film", "sodium-film", "magnesium-film",
         "gallium-arsenide-substrate", "germanium-substrate", "silicon-substrate-accurate",
         "aluminium-film-accurate", "diamond-coating"]


def fixed_cutoff_pressure(run, gs, step=0.01):
    """-dF/dV at fixed cutoff from two cells of volume (1 +- step) V."""
    energies = []
    for sign in (1, -1):
        scale = (1 + sign * step) ** (1 / 3)
        crystal = pwsolid.Crystal(run.crystal.lattice * scale, run.crystal.species,
                                  run.crystal.positions)
        energies.append(pwsolid.ground_state(crystal, run.settings).free_energy)
    return -(energies[0] - energies[1]) / (2 * step * run.crystal.volume)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("inputs", nargs="*")
    parser.add_argument("--check", action="store_true")
    args = parser.parse_args(argv)
    paths = args.inputs or [ROOT / "inputs" / f"{name}.toml" for name in CHEAP]
    print(f"{'input':32} {'cutoff Ha':>9} {'P (GPa)':>9} {'Pulay P':>9} {'P fixed Ec':>10}"
          f"{'  P fixed Ec by FD' if args.check else ''} {'s':>6}", flush=True)
    for path in paths:
        t0 = time.perf_counter()
        run = pwsolid.load_input(path)
        gs = pwsolid.ground_state(run.crystal, run.settings)
        st = stress_tensor(gs, pulay=True)
        p = st.pressure * HA_PER_BOHR3_GPA
        pp = -np.trace(st.pulay_estimate) / 3 * HA_PER_BOHR3_GPA
        extra = (f" {fixed_cutoff_pressure(run, gs) * HA_PER_BOHR3_GPA:17.4f}"
                 if args.check else "")
        print(f"{Path(path).stem:32} {run.settings.cutoff:9.1f} {p:9.4f} {pp:9.4f} "
              f"{p + pp:10.4f}{extra} {time.perf_counter() - t0:6.0f}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
