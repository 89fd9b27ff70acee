"""What a partial core (nonlinear core correction) does to sodium and gallium arsenide.

Run:  python tests/validation/core_correction_study.py [Na|Ga ...] [--free]   (~2 min each)

For each element:

1. the scalar-relativistic all-electron LDA atom (PZ81) gives the core density, and
   :func:`pwsolid.pseudo.fit_partial_core` fits the Gaussian core outside a matching
   radius;
2. the bundled 1998 file's coefficients are refitted with that core so that the
   pseudo-atom's valence levels follow the all-electron ones over neutral, promoted and
   ionised configurations. By default the refit is regularised towards the published
   numbers (1 mHa per unit change), i.e. the smallest change that restores the levels;
   ``--free`` drops the regularisation, and then fits equally good in the atom land far
   apart in parameter space;
3. the LDA lattice constant is computed with the bundled file and with the refitted one
   (the same settings and 5-point scan as test_lda_lattice_constants.py, at the cutoff
   and mesh below).

This is a study, not a test: it prints a table; the README's Cautions quote it.
"""

import dataclasses
import math
import sys
import warnings
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares

sys.path.insert(0, str(Path(__file__).parent))

import test_lda_lattice_constants as lattice  # noqa: E402
from test_pseudo_atoms import CORE, Z_NUCLEUS, _all_electron_basis, reference_atom  # noqa: E402

from pwsolid.pseudo import fit_partial_core, load_pseudopotential  # noqa: E402
from pwsolid.pseudo.atom import solve_radial_atom  # noqa: E402
from pwsolid.pseudo.separable import ProjectorChannel, SeparablePart, hgh_off_diagonal  # noqa: E402
from pwsolid.resources import pseudopotential_dir  # noqa: E402

# element: file, configurations, refitted coefficients ("c1" or (channel, index) of
# h_diagonal), matching radius (bohr), solid case, cutoff (Ha), mesh
STUDIES = {
    "Na": ("Na-hartwigsen-goedecker-hutter.toml",
           ["3s1 3p0", "3s0.5 3p0", "3s0.5 3p0.5", "3s0 3p1"],
           ["c1", (0, 0), (0, 1), (1, 0)], 1.2, "Na", 14.0, 12),
    "Ga": ("Ga-hartwigsen-goedecker-hutter.toml",
           ["4s2 4p1", "4s1 4p1", "4s1 4p2", "4s2 4p0", "4s1.5 4p1"],
           ["c1", (0, 0), (0, 1), (1, 0), (1, 1), (2, 0)], 1.2, "GaAs", 16.0, 4),
}
REGULARISATION = 1e-3       # Ha per unit change of a coefficient
# scan centres (angstrom) of the README's figures, where the lattice tests now centre on
# the nine-electron sodium
SCAN_CENTRES = {"Na": 4.00}


def _all_electron(z, configuration):
    return reference_atom(z, f"{CORE[z]} {configuration}", tolerance=1e-9)


def _core_density(atom, z):
    r = atom.points
    shells = [token[:2] for token in CORE[z].split()]
    return sum(atom.occupations[k] * atom.orbitals[k] ** 2 for k in shells) / (4 * math.pi * r * r)


def _with(pp, layout, values, core):
    local = dataclasses.replace(pp.local, **{k: v for k, v in zip(layout, values)
                                             if isinstance(k, str)})
    channels = []
    for c, channel in enumerate(pp.separable.channels):
        diagonal = list(np.diag(channel.h))
        for k, v in zip(layout, values):
            if isinstance(k, tuple) and k[0] == c:
                diagonal[k[1]] = v
        channels.append(ProjectorChannel(channel.l, channel.radius,
                                         hgh_off_diagonal(channel.l, diagonal)))
    return dataclasses.replace(pp, local=local, separable=SeparablePart(tuple(channels)),
                               partial_core=core, source_file=None)


def _level_errors(pp, configurations, references):
    out = []
    for configuration, reference in zip(configurations, references):
        atom = solve_radial_atom(pp.local.real_space, pp.separable.channels, configuration,
                                 functional="lda-pz81", tolerance=1e-9,
                                 core_density=pp.partial_core.density)
        out += [e - reference.eigenvalues[k] for k, e in atom.eigenvalues.items()]
    return np.array(out)


def study(element, free=False):
    name, configurations, layout, matching, solid, cutoff, mesh = STUDIES[element]
    z = Z_NUCLEUS[element]
    published = load_pseudopotential(pseudopotential_dir() / name)
    references = [_all_electron(z, c) for c in configurations]
    atom = references[0]
    core = fit_partial_core(atom.points, _all_electron_basis().weights, _core_density(atom, z),
                            matching)
    start = np.array([getattr(published.local, k) if isinstance(k, str)
                      else published.separable.channels[k[0]].h[k[1], k[1]] for k in layout])
    weight = 0.0 if free else REGULARISATION

    def residuals(values):
        errors = _level_errors(_with(published, layout, values, core), configurations,
                               references)
        return np.concatenate([errors, weight * (values - start)])

    before = np.max(np.abs(residuals(start)[:-len(layout)]))
    fit = least_squares(residuals, start, x_scale=0.1, diff_step=1e-4)
    refitted = _with(published, layout, fit.x, core)
    after = np.max(np.abs(fit.fun[:-len(layout)]))
    print(f"{element}: core {core.charge:.4f} e, radius {core.radius:.4f} bohr (outside "
          f"{matching} bohr); worst level error with the core, before refit {before * 1e3:.1f} "
          f"mHa, after {after * 1e3:.2f} mHa", flush=True)
    print("  refitted:", ", ".join(f"{k}={v:.6f}" for k, v in zip(map(str, layout), fit.x)))
    case = list(lattice.CASES[solid])
    case[4], case[5] = cutoff, mesh
    case[1] = SCAN_CENTRES.get(solid, case[1])
    rows = []
    for label, pp in (("bundled", published), ("with core, refitted", refitted)):
        files = dict(case[3]) if isinstance(case[3], dict) else {element: case[3]}
        files[element] = pp
        lattice.CASES[solid] = tuple(case[:3] + [files] + case[4:])
        a, b, _ = lattice.equilibrium(solid)
        rows.append((label, a, b))
        print(f"  {solid} {label}: a = {a:.4f} angstrom, B = {b:.1f} GPa "
              f"({cutoff:g} Ha, {mesh}^3)", flush=True)
    return rows


if __name__ == "__main__":
    warnings.simplefilter("ignore")
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    for element in args or list(STUDIES):
        study(element, free="--free" in sys.argv)
