"""Fit the 13-electron gallium pseudopotential (3d10 4s2 4p1 in the valence).

Run:  python tests/validation/semicore_gallium_fit.py [--fit [--from-start]] [--write] [--solid]

* without options: the table of the bundled file
  pseudos/Ga-semicore-fitted-hartwigsen-goedecker-hutter.toml against the all-electron
  targets, the ghost-state check and the softness table (about 30 s on one core);
* ``--fit``: refit from the file's values (or, with ``--from-start``, from START below:
  about 10 minutes on a shared core, ending on the file's values to all six printed
  digits) and print the table;
* ``--write``: write the fitted values into the bundled file;
* ``--solid``: the GaAs lattice constant and bulk modulus at the cutoffs of CUTOFFS
  (5-point Birch-Murnaghan scans over +-8% in volume, 4^3 mesh; at 80 Ha about 16
  minutes with the two cores shared).

The form is the separable dual-space Gaussian one of C. Hartwigsen, S. Goedecker and
J. Hutter, Phys. Rev. B 58, 3641 (1998) (their off-diagonal h relations); the numbers
are our own, fitted by :func:`pwsolid.pseudo.fitting.fit_separable_form` to our
scalar-relativistic (zeroth-order regular approximation) all-electron LDA atom with
Perdew-Zunger 1981 correlation, over the configurations of CONFIGURATIONS. Targets: every
valence eigenvalue, and each valence orbital's charge outside the radii of RADII
(norm conservation in integral form). The 3s and 3p shells stay in the core.
"""

import sys
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))

from test_pseudo_atoms import _all_electron_basis, _core  # noqa: E402

from pwsolid.errors import InputError  # noqa: E402
from pwsolid.pseudo import Pseudopotential, load_pseudopotential  # noqa: E402
from pwsolid.pseudo.atom import radial_basis, solve_radial_atom  # noqa: E402
from pwsolid.pseudo.fitting import (all_electron_targets, channel_spectrum,  # noqa: E402
                                    fit_separable_form, kinetic_energy_above, separable_form)
from pwsolid.pseudo.separable import SeparablePart  # noqa: E402
from pwsolid.resources import pseudopotential_dir  # noqa: E402

FILE = "Ga-semicore-fitted-hartwigsen-goedecker-hutter.toml"
Z, VALENCE = 31, 13
# neutral, 4s -> 4p promotion, two cations; the first is the reference configuration
CONFIGURATIONS = ["3d10 4s2 4p1", "3d10 4s1 4p2", "3d10 4s2", "3d10 4s1 4p1"]
# a 3d -> 4p excitation, not fitted: reported as a transferability check
CHECK_ONLY = ["3d9 4s2 4p2"]
RADII = {0: [1.5, 2.2], 1: [1.5, 2.2], 2: [1.0, 1.5]}     # bohr
SOFTNESS_CUTOFF = 40.0      # Ha: kinetic energy above it is penalised ...
SOFTNESS_SCALE = 0.5        # ... in units of this (Ha per orbital)
CHARGE_SCALE = 3e-3         # electrons weighing as 1 mHa of eigenvalue error
ITERATIONS = 30             # trust-region steps of the final fit
BOUNDS = {"r_loc": (0.42, 0.8), "r0": (0.3, 0.9), "r1": (0.3, 0.9), "r2": (0.25, 0.9)}
# Start of the final fit: the rounded result of an earlier fit of the same form and
# targets with a charge weight of 1e-3 electrons, itself started from a rough physical
# guess (r_loc = 0.45 bohr, somewhat inside the 3d maximum at 0.53 bohr; repulsive s and
# p channels, so that no 1s-3p-like level is bound; an attractive d channel, since the
# bare local part binds the 3d far too weakly).
START = {"r_loc": 0.45, "c1": 11.8, "c2": 2.6, "r0": 0.39, "h0_1": 18.9, "h0_2": -0.06,
         "r1": 0.45, "h1_1": -0.02, "h1_2": 1.7, "r2": 0.30, "h2_1": -18.0, "h2_2": 1.36}
CUTOFFS = (30.0, 40.0, 50.0, 60.0, 80.0)
SUGGESTED_CUTOFF = 80.0     # Ha
# the measured solid, quoted in the file's comments (from ``--solid`` and
# tests/validation/lattice_constant_table.py)
SOLID_NOTE = ("GaAs with As-hartwigsen-goedecker-hutter.toml (5-point Birch-Murnaghan, +-8%): "
              "a = 5.609 angstrom, B = 73.6 GPa\n# at 80 Ha, 2^3 mesh (5.610, 73.1 at 100 Ha; "
              "5.602, 73.9 at 80 Ha, 4^3; 5.602, 74.5 with 7 points\n# over +-4%), in the all-electron LDA window 5.60-5.62 "
              "angstrom (recalled from memory); below about 80 Ha the energy-volume curve is too rough to fit.")


def targets(configurations):
    return all_electron_targets(Z, _core("Ga", VALENCE), configurations, RADII,
                                basis=_all_electron_basis())


def file_parameters(path=None):
    """The named parameters of the bundled file."""
    pp = load_pseudopotential(path or pseudopotential_dir() / FILE)
    p = {"r_loc": pp.local.r_loc, "c1": pp.local.c1, "c2": pp.local.c2}
    for ch in pp.separable.channels:
        p[f"r{ch.l}"] = ch.radius
        for i, h in enumerate(np.diag(ch.h), start=1):
            p[f"h{ch.l}_{i}"] = float(h)
    return p


def as_pseudopotential(parameters):
    local, channels = separable_form(VALENCE, parameters)
    return Pseudopotential(element="Ga", valence=float(VALENCE), local=local,
                           form="goedecker-teter-hutter", separable=SeparablePart(channels))


def report_table(parameters, fitted, checked):
    """Print the errors against every target; return the worst eigenvalue (Ha) and charge
    (electrons) errors of the fitted configurations and the worst eigenvalue error (Ha)
    of the checked ones."""
    local, channels = separable_form(VALENCE, parameters)
    basis = radial_basis()
    worst_e, worst_q, worst_check = 0.0, 0.0, 0.0
    print(f"{'configuration':<16} {'shell':<5} {'AE eps':>10} {'d eps mHa':>10}   "
          f"d q_out (1e-3 e) at R (bohr)")
    for group, items in (("fitted", fitted), ("check", checked)):
        for t in items:
            atom = solve_radial_atom(local.real_space, channels, t.configuration, basis=basis)
            for k, e in t.eigenvalues.items():
                de = atom.eigenvalues[k] - e
                dq = {r: float(basis.weights @ (atom.orbitals[k] ** 2 * (basis.points > r))) - q
                      for (kk, r), q in t.outside_charge.items() if kk == k}
                if group == "fitted":
                    worst_e = max(worst_e, abs(de))
                    worst_q = max([worst_q] + [abs(v) for v in dq.values()])
                else:
                    worst_check = max(worst_check, abs(de))
                cells = "  ".join(f"{v * 1e3:+6.2f}@{r:g}" for r, v in dq.items())
                print(f"{t.configuration:<16} {k:<5} {e:>10.5f} {de * 1e3:>+10.3f}   {cells}"
                      + ("" if group == "fitted" else "   (not fitted)"))
    print(f"worst over the fitted configurations: {worst_e * 1e3:.2f} mHa, "
          f"{worst_q * 1e3:.2f} x 1e-3 electrons; not fitted: {worst_check * 1e3:.1f} mHa")
    return worst_e, worst_q, worst_check


def ghost_check(parameters):
    """Lowest levels of each l in the neutral atom's self-consistent potential.

    No ghost: the lowest s, p and d levels are the 4s, 4p and 3d ones (they equal the
    self-consistent eigenvalues), and the next level of each l lies above them, near the
    all-electron 5s, 5p, 4d (weakly bound or in the box continuum of r_max = 60 bohr).
    """
    local, channels = separable_form(VALENCE, parameters)
    atom = solve_radial_atom(local.real_space, channels, CONFIGURATIONS[0])
    ok = True
    for l, shell in enumerate(("4s", "4p", "3d")):
        levels = channel_spectrum(local, channels, CONFIGURATIONS[0], l, count=4)
        lowest_is_valence = abs(levels[0] - atom.eigenvalues[shell]) < 1e-6
        ok &= lowest_is_valence and levels[1] > atom.eigenvalues[shell] + 0.05
        print(f"l={l}: levels (Ha) " + " ".join(f"{e:+.5f}" for e in levels)
              + f"   lowest = {shell}: {lowest_is_valence}")
    print("ghost-state check:", "no ghost" if ok else "GHOST OR MISPLACED LEVEL")
    return ok


def softness_table(parameters):
    """Kinetic energy (Ha per electron) above each plane-wave cutoff, neutral atom."""
    local, channels = separable_form(VALENCE, parameters)
    basis = radial_basis()
    atom = solve_radial_atom(local.real_space, channels, CONFIGURATIONS[0], basis=basis)
    print("cutoff (Ha)  " + "  ".join(f"{k:>9}" for k in atom.orbitals))
    for cutoff in CUTOFFS:
        print(f"{cutoff:>11g}  " + "  ".join(
            f"{kinetic_energy_above(basis, u, 'spd'.index(k[1]), cutoff):9.2e}"
            for k, u in atom.orbitals.items()))


def file_text(parameters, worst_e, worst_q, worst_check, solid_note):
    """The pseudopotential file for ``parameters`` (our TOML format)."""
    p = parameters

    def diag(l):
        i, out = 1, []
        while f"h{l}_{i}" in p:
            out.append(f"{p[f'h{l}_{i}']:.6f}")
            i += 1
        return ", ".join(out)

    configurations = ", ".join(CONFIGURATIONS)
    return f'''# Ga: separable dual-space Gaussian pseudopotential, 13 valence electrons (3d10 4s2 4p1;
# the 3d shell is in the valence, 1s-3p frozen), LDA, in the analytic form of Hartwigsen,
# Goedecker & Hutter (1998) with their fixed off-diagonal h relations. FITTED BY PWSOLID
# (tests/validation/semicore_gallium_fit.py --fit --write) to its own scalar-relativistic
# all-electron LDA (PZ81) atom: eigenvalues and outside charges of every valence orbital
# over {configurations}.
# {solid_note}
# With the 3d shell in the valence the plane-wave basis must be larger than for the
# three-electron Ga-hartwigsen-goedecker-hutter.toml (the 3d maximum lies at 0.53 bohr).
element = "Ga"
valence_charge = 13
form = "goedecker-teter-hutter"
suggested_cutoff = "{SUGGESTED_CUTOFF:g} Ha"

[parameters]
r_loc = {{ value = {p["r_loc"]:.6f}, unit = "bohr" }}
c1 = {{ value = {p.get("c1", 0.0):.6f}, unit = "Ha" }}
c2 = {{ value = {p.get("c2", 0.0):.6f}, unit = "Ha" }}

[[projectors]]
l = 0
radius = {{ value = {p["r0"]:.6f}, unit = "bohr" }}
h_diagonal = [{diag(0)}]
off_diagonal = "hartwigsen-goedecker-hutter"

[[projectors]]
l = 1
radius = {{ value = {p["r1"]:.6f}, unit = "bohr" }}
h_diagonal = [{diag(1)}]
off_diagonal = "hartwigsen-goedecker-hutter"

[[projectors]]
l = 2
radius = {{ value = {p["r2"]:.6f}, unit = "bohr" }}
h_diagonal = [{diag(2)}]
off_diagonal = "hartwigsen-goedecker-hutter"

[source]
reference = "analytic form: C. Hartwigsen, S. Goedecker and J. Hutter, Phys. Rev. B 58, 3641 (1998) (no spin-orbit terms); parameters fitted by pwsolid, not taken from any table (no paper or table could be read here)"
status = "fitted by pwsolid to its own all-electron atom: LDA (Perdew-Zunger 1981), scalar-relativistic zeroth-order regular approximation, spherical and spin-unpolarised; configurations {configurations}; targets the valence eigenvalues and each valence orbital's charge outside {RADII[0]} bohr (s, p) and {RADII[2]} bohr (d); worst errors {worst_e * 1e3:.2f} mHa and {worst_q * 1e3:.1f} milli-electrons (the 3d charge outside 1.5 bohr); not fitted, a 3d hole (3d9 4s2 4p2) puts the 3d level {worst_check * 1e3:.0f} mHa off, so it is not for d-hole states; no ghost states (lowest level of each l is the 4s, 4p, 3d)"
'''


def solid(parameters, cutoffs=CUTOFFS, mesh=4):
    """GaAs a (angstrom) and B (GPa) with these Ga parameters and the bundled As."""
    import test_lda_lattice_constants as lattice

    pp = as_pseudopotential(parameters)
    rows = []
    for cutoff in cutoffs:
        case = list(lattice.CASES["GaAs"])
        case[3] = {"Ga": pp, "As": "As-hartwigsen-goedecker-hutter.toml"}
        case[4], case[5] = float(cutoff), mesh
        lattice.CASES["GaAs"] = tuple(case)
        start = time.time()
        try:
            a, b, _ = lattice.equilibrium("GaAs")
        except InputError as exc:       # too low a cutoff: E(V) too rough to fit
            print(f"GaAs {cutoff:g} Ha, {mesh}^3: no equation of state ({exc})", flush=True)
            continue
        rows.append((cutoff, a, b))
        print(f"GaAs {cutoff:g} Ha, {mesh}^3: a = {a:.4f} angstrom, B = {b:.1f} GPa "
              f"({time.time() - start:.0f} s)", flush=True)
    return rows


def main(argv):
    warnings.simplefilter("ignore")
    clock = time.time()
    fitted, checked = targets(CONFIGURATIONS), targets(CHECK_ONLY)
    parameters = dict(START) if "--from-start" in argv else file_parameters()
    if "--fit" in argv:
        report = fit_separable_form(VALENCE, fitted, parameters, list(parameters),
                                    charge_scale=CHARGE_SCALE, bounds=BOUNDS,
                                    softness_cutoff=SOFTNESS_CUTOFF,
                                    softness_scale=SOFTNESS_SCALE, max_iterations=ITERATIONS,
                                    log=print)
        parameters = report.parameters
        print("fitted:", ", ".join(f"{k} = {v:.6f}" for k, v in parameters.items()))
    worst_e, worst_q, worst_check = report_table(parameters, fitted, checked)
    ghost_free = ghost_check(parameters)
    softness_table(parameters)
    if "--write" in argv:
        if not ghost_free:
            raise SystemExit("not written: the ghost-state check failed")
        (pseudopotential_dir() / FILE).write_text(
            file_text(parameters, worst_e, worst_q, worst_check, SOLID_NOTE))
        print("wrote", pseudopotential_dir() / FILE)
    if "--solid" in argv:
        solid(parameters)
    print(f"({time.time() - clock:.0f} s)")


if __name__ == "__main__":
    main(sys.argv[1:])
