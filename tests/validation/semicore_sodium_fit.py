"""Fit a nine-electron (2s2 2p6 3s1) sodium pseudopotential to our own all-electron atom.

Run:  python tests/validation/semicore_sodium_fit.py           (evaluate the file, ~20 s)
      python tests/validation/semicore_sodium_fit.py --fit     (refit, ~3 min on a free core)
      python tests/validation/semicore_sodium_fit.py --fit "[r_loc, c1, ...]"   (own start)

The form is the separable dual-space Gaussian one of C. Hartwigsen, S. Goedecker and
J. Hutter, Phys. Rev. B 58, 3641 (1998): local part r_loc, c1-c3; s and p channels with
three radial projectors each, their off-diagonal couplings fixed by the paper's
relations (:func:`pwsolid.pseudo.separable.hgh_off_diagonal`). The reference is
pwsolid's own scalar-relativistic (zeroth-order regular approximation) all-electron LDA
atom (Perdew-Zunger 1981 correlation) on the grid of test_pseudo_atoms.py; only the 1s
shell is frozen in the core.

Targets, over the configurations of :data:`CONFIGURATIONS` (neutral, 3s -> 3p
promotion, half-ionised, the cation):

* every valence Kohn-Sham eigenvalue (2s, 2p, 3s, 3p), weight 1 per Ha;
* the charge of each valence orbital inside 1 bohr, and of 3s and 3p inside 0.5 bohr
  too (:data:`CHARGE_RADII`; norm conservation, which governs the energy dependence of
  the scattering and so transferability; common practice), :data:`CHARGE_WEIGHT` per e;
* the levels of the neutral atom in a hard-walled sphere of :data:`BOX_RADIUS` bohr, up
  to about 1 Ha: the scattering at the energies of the metal's bands.

Softness is guarded by lower bounds on the Gaussian radii and by a penalty on the
plane-wave kinetic energy that the neutral pseudo-atom's 2s and 2p electrons carry above
:data:`SOFTNESS_CUTOFF` (the Fourier tail; common practice for judging a cutoff). That
penalty trades against the p-channel scattering: fits with the penalty at 40 Ha
(r_p = 0.36 bohr, converged near 50 Ha) miss the sphere's 4p level by about 25 mHa, and
one of them gives bcc sodium 4.09 angstrom (50 Ha, 10^3 mesh); the bundled fit
(r_p = 0.29 bohr) misses it by 7 mHa and gives 4.06 angstrom but needs 80 Ha (README,
Cautions).

Without ``--fit`` the script evaluates the bundled ``pseudos/Na-semicore-fitted-hartwigsen-goedecker-hutter.toml``
and prints: the level and charge errors per configuration, fitted and not
(:data:`CHECKED`: a mixed promotion and a 2p -> 3s core excitation); the ghost-state
check (every level per l of the neutral atom, free and in a 6 bohr sphere, pseudo against
all-electron less the 1s); the kinetic-energy tails of the pseudo-orbitals against the
cutoff; and the TOML tables of the parameters.
"""

import json
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares

sys.path.insert(0, str(Path(__file__).parent))

from test_pseudo_atoms import _all_electron_basis, reference_atom  # noqa: E402

from pwsolid.pseudo import load_pseudopotential  # noqa: E402
from pwsolid.pseudo.atom import radial_basis, solve_radial_atom  # noqa: E402
from pwsolid.pseudo.fitting import kinetic_energy_above, separable_form  # noqa: E402
from pwsolid.resources import pseudopotential_dir  # noqa: E402

Z = 11
FROZEN_CORE = "1s2"
VALENCE = 9
FILE_NAME = "Na-semicore-fitted-hartwigsen-goedecker-hutter.toml"
#: valence configurations fitted (pseudo-atom notation; the all-electron atom adds 1s2)
CONFIGURATIONS = ["2s2 2p6 3s1 3p0", "2s2 2p6 3s0 3p1", "2s2 2p6 3s0.5 3p0",
                  "2s2 2p6"]
#: configurations checked but not fitted (a 2p -> 3s core excitation, a mixed promotion)
CHECKED = ["2s2 2p5 3s2 3p0", "2s2 2p6 3s0.5 3p0.5"]
#: bohr: 1 bohr lies beyond the 2s and 2p peaks (0.61, 0.54 bohr); the 3s and 3p charges
#: inside 0.5 bohr too, which set how the semicore levels follow the valence occupation
CHARGE_RADII = {"2s": (1.0,), "2p": (1.0,), "3s": (0.5, 1.0), "3p": (0.5, 1.0)}
CHARGE_WEIGHT = 0.3          # Ha per electron of charge error
GHOST_BOX = 6.0              # bohr
#: the neutral atom in a hard-walled sphere of BOX_RADIUS bohr (about 1.6 Wigner-Seitz
#: radii of the metal): its levels up to about 1 Ha probe the scattering at the
#: energies of the bands, weight BOX_WEIGHT per Ha
BOX_RADIUS = 6.0
BOX_CONFIGURATION = "2s2 2p6 3s1 4s0 3p0 4p0 3d0 4d0"
BOX_WEIGHT = 1.0
SOFTNESS_CUTOFF = 60.0       # Ha
SOFTNESS_WEIGHT = 0.1        # per Ha of (occupation-weighted) kinetic-energy tail
#: parameter layout and bounds (radii in bohr, energies in Ha)
NAMES = ["r_loc", "c1", "c2", "c3", "r_s", "h1s", "h2s", "h3s", "r_p", "h1p", "h2p", "h3p"]
LOWER = [0.20, -40, -40, -40, 0.15, -40, -40, -40, 0.15, -40, -40, -40]
UPPER = [0.80, 40, 40, 40, 0.90, 40, 40, 40, 0.90, 40, 40, 40]


def pseudo_basis():
    return radial_basis(r_max=50.0, intervals=110, first_step=1e-3)


def all_electron(configuration):
    return reference_atom(Z, f"{FROZEN_CORE} {configuration}", tolerance=1e-9)


def parts(x):
    """Local form and projector channels of a parameter vector."""
    p = dict(zip(NAMES, x))
    return separable_form(VALENCE, {"r_loc": p["r_loc"], "c1": p["c1"], "c2": p["c2"],
                                    "c3": p["c3"], "r0": p["r_s"], "h0_1": p["h1s"],
                                    "h0_2": p["h2s"], "h0_3": p["h3s"], "r1": p["r_p"],
                                    "h1_1": p["h1p"], "h1_2": p["h2p"], "h1_3": p["h3p"]})


def charge_inside(atom, basis, label, radius):
    u = atom.orbitals[label]
    return float(basis.weights @ (np.where(atom.points < radius, u * u, 0.0)))


def pseudo_atom(local, channels, configuration, basis):
    return solve_radial_atom(local.real_space, channels, configuration, functional="lda-pz81",
                             basis=basis, tolerance=1e-9, max_iterations=150)


def kinetic_tail(atom, basis, label, cutoff):
    """Kinetic energy (Ha) of orbital ``label`` carried by plane waves above ``cutoff`` (Ha)."""
    return kinetic_energy_above(basis, atom.orbitals[label], "spdf".index(label[1]), cutoff)


def residual_table(x, references, basis, configurations=CONFIGURATIONS):
    local, channels = parts(x)
    rows = []
    tails = []
    for configuration, ref in zip(configurations, references):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            atom = pseudo_atom(local, channels, configuration, basis)
        for label, e in atom.eigenvalues.items():
            dq = [charge_inside(atom, basis, label, r)
                  - charge_inside(ref, _all_electron_basis(), label, r)
                  for r in CHARGE_RADII[label]]
            rows.append((configuration, label, e, e - ref.eigenvalues[label], dq))
        if configuration == CONFIGURATIONS[0]:
            tails = [atom.occupations[k] * kinetic_tail(atom, basis, k, SOFTNESS_CUTOFF)
                     for k in ("2s", "2p")]
    return rows, tails


def box_bases():
    return (radial_basis(r_max=BOX_RADIUS, intervals=70, first_step=1e-3),
            radial_basis(r_max=BOX_RADIUS, intervals=110, first_step=2e-4))


def box_reference():
    return reference_atom(Z, f"{FROZEN_CORE} {BOX_CONFIGURATION}", basis=box_bases()[1],
                          tolerance=1e-9)


def box_errors(x, reference):
    local, channels = parts(x)
    atom = pseudo_atom(local, channels, BOX_CONFIGURATION, box_bases()[0])
    return {k: e - reference.eigenvalues[k] for k, e in atom.eigenvalues.items()}


def residuals(x, references, basis, box=None):
    try:
        rows, tails = residual_table(x, references, basis)
        boxed = [] if box is None else list(box_errors(x, box).values())
    except Exception:           # unconverged or singular trial atom: a large, finite misfit
        extra = 0 if box is None else len(BOX_CONFIGURATION.split())
        return np.full(RESIDUAL_SIZE + extra, 1.0)
    out = []
    for *_, de, dq in rows:
        out += [de] + [CHARGE_WEIGHT * d for d in dq]
    out += [SOFTNESS_WEIGHT * t for t in tails]
    out += [BOX_WEIGHT * e for e in boxed]
    return np.array(out)


RESIDUAL_SIZE = sum(1 + len(CHARGE_RADII[t[:2]]) for c in CONFIGURATIONS for t in c.split()) + 2
#: ``--fit`` starts from here and reproduces the bundled file. This start is itself the
#: result of an earlier fit from :data:`GENERIC_START` with the charge inside 1 bohr only,
#: no sphere levels, the softness penalty at 45 Ha and a 2p -> 3s core excitation among the
#: configurations.
STARTS = [
    [0.284531, 0.448055, 0.051284, 0.0, 0.246236, 4.186019, -0.000119, -3.342896, 0.289609,
     -4.661498, 4.239025, 0.0],
]
#: From this generic guess the present targets lead to another minimum of lower cost
#: (3.39e-5 against 5.45e-5, mostly a smaller kinetic tail above 60 Ha) but larger level
#: errors (1.26 mHa fitted, 6.3 mHa in the core excitation) and r_p = 0.245 bohr:
#: r_loc=0.284977, c1=-0.800054, c2=0.002464, c3=-0.000034, r_s=0.240948, h1s=5.132267,
#: h2s=-0.023629, h3s=-3.310503, r_p=0.244914, h1p=-4.922182, h2p=-0.004555, h3p=4.317779
#: (bcc sodium at 70 Ha, 6^3: 4.053 angstrom, 9.4 GPa, against 4.055 and 9.6 for the
#: bundled file; README, Cautions). Pass it on the command line to see it.
GENERIC_START = [0.25, -2.0, 0.0, 0.0, 0.25, 2.0, 0.0, 0.0, 0.25, -1.0, 0.0, 0.0]


def fit(references, basis, starts=STARTS):
    best = None
    box = box_reference()
    for start in starts:
        t0 = time.time()
        result = least_squares(residuals, start, args=(references, basis, box),
                               bounds=(LOWER, UPPER), x_scale=0.1, diff_step=1e-5,
                               max_nfev=250)
        print(f"start {start}: cost {result.cost:.3e}, {time.time() - t0:.0f} s", flush=True)
        print("   ", ", ".join(f"{k}={v:.6f}" for k, v in zip(NAMES, result.x)), flush=True)
        if best is None or result.cost < best.cost:
            best = result
    return best.x


def from_file(path):
    pp = load_pseudopotential(path)
    s, p = pp.separable.channels
    return [pp.local.r_loc, pp.local.c1, pp.local.c2, pp.local.c3, s.radius, *np.diag(s.h),
            p.radius, *np.diag(p.h)]


def ghost_check(x, basis, box=None):
    """Lowest levels per l in the neutral atom, pseudo against all-electron (Ha).

    With ``box`` (bohr) both atoms sit in a hard-walled sphere of that radius, which
    turns the continuum into levels up to several Ha: equal levels there mean equal
    scattering over that energy range, and a ghost state shows as an extra level.
    """
    local, channels = parts(x)
    extra = "4s0 5s0 6s0 7s0 3p0 4p0 5p0 6p0 7p0 3d0 4d0 5d0 6d0"
    ae_basis = _all_electron_basis()
    if box is not None:
        basis = radial_basis(r_max=box, intervals=70, first_step=1e-3)
        ae_basis = radial_basis(r_max=box, intervals=110, first_step=2e-4)
    ps = pseudo_atom(local, channels, f"2s2 2p6 3s1 {extra}", basis)
    ae = reference_atom(Z, f"{FROZEN_CORE} 2s2 2p6 3s1 {extra}", basis=ae_basis, tolerance=1e-9)
    rows = [(k, ae.eigenvalues[k], ps.eigenvalues[k]) for k in ae.eigenvalues if k != "1s"]
    return sorted(rows, key=lambda t: ("spd".index(t[0][1]), int(t[0][0])))


def report(x, references, basis):
    rows, _ = residual_table(x, references, basis)
    checked, _ = residual_table(x, [all_electron(c) for c in CHECKED], basis, CHECKED)
    rows += [(c + " (not fitted)", *rest) for c, *rest in checked]
    print("| configuration | level | pseudo e (Ha) | e - all-electron (mHa) | charge "
          "inside 1 bohr - all-electron (e) | inside 0.5 bohr |")
    print("|---|---|---|---|---|---|")
    for c, label, e, de, dq in rows:
        inner = f"{dq[0]:+.5f}" if len(dq) > 1 else ""
        print(f"| {c} | {label} | {e:.6f} | {de * 1e3:+.3f} | {dq[-1]:+.5f} | {inner} |")
    fitted = rows[:len(rows) - len(checked)]
    worst_e = max(abs(r[3]) for r in fitted)
    worst_q = max(abs(d) for r in fitted for d in r[4])
    worst_checked = max(abs(r[3]) for r in checked)
    print(f"fitted configurations: worst level error {worst_e * 1e3:.3f} mHa, worst charge "
          f"error {worst_q:.5f} e; configurations not fitted: worst level error "
          f"{worst_checked * 1e3:.3f} mHa")
    print("\nghost-state check, neutral atom (all-electron 1s left out), free and in a "
          f"hard-walled sphere of {GHOST_BOX} bohr:")
    print("| level | all-electron (Ha) | pseudo (Ha) | difference (mHa) | "
          "all-electron, box | pseudo, box | difference (mHa) |")
    print("|---|---|---|---|---|---|---|")
    for (label, e_ae, e_ps), (_, b_ae, b_ps) in zip(ghost_check(x, basis),
                                                    ghost_check(x, basis, GHOST_BOX)):
        print(f"| {label} | {e_ae:.6f} | {e_ps:.6f} | {(e_ps - e_ae) * 1e3:+.3f} | "
              f"{b_ae:.4f} | {b_ps:.4f} | {(b_ps - b_ae) * 1e3:+.1f} |")
    local, channels = parts(x)
    atom = pseudo_atom(local, channels, CONFIGURATIONS[0], basis)
    print("\nkinetic energy above the cutoff, neutral pseudo-atom (mHa):")
    print("| orbital | " + " | ".join(f"{c} Ha" for c in (20, 30, 40, 50, 60, 80)) + " |")
    print("|---|" + "---|" * 6)
    for label in ("2s", "2p", "3s"):
        print(f"| {label} | " + " | ".join(f"{kinetic_tail(atom, basis, label, c) * 1e3:.2f}"
                                          for c in (20, 30, 40, 50, 60, 80)) + " |")
    return worst_e, worst_q, worst_checked


def parameter_tables(x):
    """The [parameters] and [[projectors]] tables of the file, TOML text."""
    d = dict(zip(NAMES, x))
    return (f"""[parameters]
r_loc = {{ value = {d['r_loc']:.6f}, unit = "bohr" }}
c1 = {{ value = {d['c1']:.6f}, unit = "Ha" }}
c2 = {{ value = {d['c2']:.6f}, unit = "Ha" }}
c3 = {{ value = {d['c3']:.6f}, unit = "Ha" }}

[[projectors]]
l = 0
radius = {{ value = {d['r_s']:.6f}, unit = "bohr" }}
h_diagonal = [{d['h1s']:.6f}, {d['h2s']:.6f}, {d['h3s']:.6f}]
off_diagonal = "hartwigsen-goedecker-hutter"

[[projectors]]
l = 1
radius = {{ value = {d['r_p']:.6f}, unit = "bohr" }}
h_diagonal = [{d['h1p']:.6f}, {d['h2p']:.6f}, {d['h3p']:.6f}]
off_diagonal = "hartwigsen-goedecker-hutter"
""")


if __name__ == "__main__":
    t0 = time.time()
    basis = pseudo_basis()
    references = [all_electron(c) for c in CONFIGURATIONS]
    if "--fit" in sys.argv:
        starts = [json.loads(a) for a in sys.argv[1:] if a.startswith("[")]
        x = fit(references, basis, starts or STARTS)
    else:
        x = from_file(pseudopotential_dir() / FILE_NAME)
    print("parameters:", ", ".join(f"{k}={v:.6f}" for k, v in zip(NAMES, x)))
    print(parameter_tables(x))
    report(x, references, basis)
    print(f"\n({time.time() - t0:.0f} s)")
