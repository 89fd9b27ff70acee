"""Write libxc_reference.npz: values of the Libxc C library for pwsolid's tests.

Usage (from the repository root, with Libxc installed; Debian: apt-get install libxc9)::

    PYTHONPATH=. python tests/data/libxc/make_libxc_reference.py           # write
    PYTHONPATH=. python tests/data/libxc/make_libxc_reference.py --compare # compare only

The table holds, for each Libxc functional (or sum) below, the energies and
potentials on a grid of the uniform gas and of gradients: r_s from 0.01 to 100 bohr,
polarisations zeta = 0, 0.3, -0.6, 0.95 and 1 (40 points in r_s), and reduced gradients
s = |grad n| / (2 k_F n) from 0 to 3 (for the polarised gradient invariants, the two
spin gradients at 72.5 degrees to each other, so that sigma_ud is neither 0 nor
extreme). Unpolarised local: (eps, v); polarised local: (eps, v_up, v_down);
unpolarised gradient: (e, de/dn, de/dsigma), e per volume; polarised gradient:
(e, de/dn_up, de/dn_down, de/dsigma_uu, de/dsigma_ud, de/dsigma_dd). The Libxc
version is stored in the file as ``libxc_version``.

Libxc is called through pwsolid's ctypes bridge (pwsolid/xc/libxc_bridge.py), which
only arranges the arrays for Libxc's C calls; the values are Libxc's. The comparison
(``--compare``, and after writing) prints the largest relative difference of pwsolid's
built-in functionals from the table, which tests/validation/test_libxc_reference.py
checks to 1e-10.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

TABLE = Path(__file__).with_name("libxc_reference.npz")

# 40 points: none at r_s = 1, where the two pieces of Perdew-Zunger 1981 meet with a
# jump of their rounding (3e-5 Ha) and either side is right.
RS = np.geomspace(0.01, 100.0, 40)
ZETAS = np.array([0.0, 0.3, -0.6, 0.95, 1.0])
REDUCED_GRADIENTS = np.array([0.0, 0.25, 0.5, 1.0, 2.0, 3.0])
# cos of the angle between grad n_up and grad n_down
GRADIENT_COSINE = 0.3

#: Libxc specifications tabulated (LDA: local kernels; GGA: gradient kernels).
SPECS = {
    "lda_x": "lda", "lda_x+lda_c_pz": "lda", "lda_x+lda_c_pw": "lda",
    "lda_x+lda_c_pw_mod": "lda", "lda_x+lda_c_vwn": "lda", "lda_x+lda_c_vbh": "lda",
    "lda_x+lda_c_hl": "lda", "lda_x+lda_c_wigner": "lda",
    "gga_x_pbe": "gga", "gga_x_pbe+gga_c_pbe": "gga", "gga_c_pbe": "gga",
}


def grid_inputs() -> dict[str, np.ndarray]:
    """The input arrays of the four kinds of evaluation (flat, float64)."""
    rs, zeta = np.meshgrid(RS, ZETAS, indexing="ij")
    n = 3.0 / (4.0 * np.pi * rs.ravel() ** 3)
    up, down = 0.5 * n * (1.0 + zeta.ravel()), 0.5 * n * (1.0 - zeta.ravel())
    rs3, zeta3, s3 = np.meshgrid(RS, ZETAS, REDUCED_GRADIENTS, indexing="ij")
    n3 = 3.0 / (4.0 * np.pi * rs3.ravel() ** 3)
    k_fermi = np.cbrt(3.0 * np.pi ** 2 * n3)
    grad = 2.0 * k_fermi * n3 * s3.ravel()          # |grad n| of the total density
    up3, down3 = 0.5 * n3 * (1.0 + zeta3.ravel()), 0.5 * n3 * (1.0 - zeta3.ravel())
    # spin gradients proportional to the spin densities, at an angle to each other
    g_up, g_down = 0.5 * grad * (1.0 + zeta3.ravel()), 0.5 * grad * (1.0 - zeta3.ravel())
    rs2, s2 = np.meshgrid(RS, REDUCED_GRADIENTS, indexing="ij")
    n2 = 3.0 / (4.0 * np.pi * rs2.ravel() ** 3)
    sigma2 = (2.0 * np.cbrt(3.0 * np.pi ** 2 * n2) * n2 * s2.ravel()) ** 2
    return {
        "lda_unpolarized/n": 3.0 / (4.0 * np.pi * RS ** 3),
        "lda_polarized/n_up": up, "lda_polarized/n_down": down,
        "lda_polarized/zeta": zeta.ravel(),
        "gga_unpolarized/n": n2, "gga_unpolarized/sigma": sigma2,
        "gga_polarized/n_up": up3, "gga_polarized/n_down": down3,
        "gga_polarized/sigma_uu": g_up ** 2,
        "gga_polarized/sigma_ud": GRADIENT_COSINE * g_up * g_down,
        "gga_polarized/sigma_dd": g_down ** 2,
        "gga_polarized/zeta": zeta3.ravel(),
    }


def evaluate(functional, family: str, inputs: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """The four evaluations of a pwsolid Functional on the grid, stacked per kind."""
    f = functional
    if family == "lda":
        return {"lda_unpolarized": np.array(f.evaluate(inputs["lda_unpolarized/n"])),
                "lda_polarized": np.array(f.evaluate_polarized(
                    inputs["lda_polarized/n_up"], inputs["lda_polarized/n_down"]))}
    return {"gga_unpolarized": np.array(f.evaluate_gradient(
                inputs["gga_unpolarized/n"], inputs["gga_unpolarized/sigma"])),
            "gga_polarized": np.array(f.evaluate_gradient_polarized(
                *(inputs[f"gga_polarized/{k}"] for k in
                  ("n_up", "n_down", "sigma_uu", "sigma_ud", "sigma_dd"))))}


def write_table() -> None:
    from pwsolid.xc import get_functional
    from pwsolid.xc.libxc_bridge import libxc_version

    inputs = grid_inputs()
    arrays = dict(inputs)
    for spec, family in SPECS.items():
        for kind, values in evaluate(get_functional(f"libxc:{spec}"), family, inputs).items():
            arrays[f"{spec}|{kind}"] = values
    arrays["libxc_version"] = np.array(libxc_version())
    np.savez_compressed(TABLE, **arrays)
    print(f"wrote {TABLE} (Libxc {libxc_version()}, {len(SPECS)} functionals)")


def compare(live: bool) -> None:
    """Largest relative difference of pwsolid's built-ins from the table (or live)."""
    from pwsolid.xc import get_functional

    sys.path.insert(0, str(Path(__file__).parents[2] / "validation"))
    from test_libxc_reference import COMPARISONS, ours, part_scale, relative_differences

    table = np.load(TABLE)
    source = "live Libxc" if live else f"the table (Libxc {table['libxc_version']})"
    print(f"pwsolid built-ins against {source}: largest relative difference")
    for mine, spec, family, polarised in COMPARISONS:
        reference = (evaluate(get_functional(f"libxc:{spec}"), family, grid_inputs())
                     if live else {k: table[f"{spec}|{k}"] for k in
                                   (f"{family}_unpolarized", f"{family}_polarized")})
        mine_values = evaluate(ours(mine), family, grid_inputs())
        for kind, values in mine_values.items():
            if kind.endswith("_polarized") and not polarised:
                continue
            worst = relative_differences(values, reference[kind], kind, grid_inputs(),
                                         scale=part_scale(table, spec, kind))
            full = relative_differences(values, reference[kind], kind, grid_inputs(), True)
            print(f"  {mine:22s} {spec:22s} {kind:16s} {worst:.1e}"
                  + (f"  (|zeta| = 1, energy: {full:.1e})" if full else ""))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--compare", action="store_true",
                        help="compare with the stored table and live Libxc; write nothing")
    args = parser.parse_args(argv)
    if not args.compare:
        write_table()
    compare(live=False)
    try:
        compare(live=True)
    except Exception as exc:             # no Libxc here: the stored table is enough
        print(f"no live comparison: {exc}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
