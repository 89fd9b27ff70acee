"""Whatever ``check-input`` accepts, the run accepts (issue 15).

Hypothesis writes random but well-typed inputs (small cells, tiny cutoffs and meshes,
forced FFT grids, band counts, smearing, spin moments of any size) and runs
``pwsolid check-input`` on each. For every file it accepts, the set-up and the first
SCF iteration must run without an error; for every file it refuses, the message is one
clear line with exit code 3. Kept fast: cutoffs of a few hartree, meshes of 1 or 2.
"""

import warnings

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from pwsolid.cli import main
from pwsolid.config import load_input
from pwsolid.scf import ground_state

CELLS = [
    ('prototype = "diamond"\nlattice_constant = "5.43 angstrom"\nspecies = ["Si"]\n'
     '[pseudopotentials]\nSi = "Si-appelbaum-hamann.toml"\n'),
    'prototype = "fcc"\nlattice_constant = "4.05 angstrom"\nspecies = ["Al"]\n',
    'prototype = "bcc"\nlattice_constant = "4.23 angstrom"\nspecies = ["Na"]\n',
]


@st.composite
def inputs(draw):
    cell = draw(st.sampled_from(CELLS))
    crystal, _, pseudo = cell.partition("[pseudopotentials]")
    lines = ["[crystal]", crystal.strip()]
    if pseudo:
        lines += ["[pseudopotentials]", pseudo.strip()]
    lines += ["[basis]", f'cutoff = "{draw(st.floats(0.5, 4.0)):.3f} Ha"']
    if draw(st.booleans()):
        lines.append(f"fft_grid = {[draw(st.integers(2, 20)) for _ in range(3)]}")
    lines += ["[brillouin_zone]", f"mesh = {[draw(st.integers(1, 2)) for _ in range(3)]}",
              f"shift = {[draw(st.sampled_from([0, 0.5])) for _ in range(3)]}"]
    smearing = draw(st.sampled_from(["none", "fermi-dirac", "cold"]))
    lines += ["[occupations]", f'smearing = "{smearing}"']
    if draw(st.booleans()):
        lines += ["[spin]", "polarized = true"]
        if draw(st.booleans()):
            lines.append(f"fixed_moment = {draw(st.floats(-12, 12)):.3f}")
        if draw(st.booleans()):
            lines.append(f"initial_moment = {draw(st.floats(-12, 12)):.3f}")
    lines += ["[self_consistency]", "max_iterations = 1"]
    if draw(st.booleans()):
        lines.append(f"empty_bands = {draw(st.integers(0, 6))}")
    return "\n".join(lines) + "\n"


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(text=inputs())
def test_what_check_input_accepts_the_run_accepts(tmp_path_factory, capsys, text):
    folder = tmp_path_factory.mktemp("prop")
    path = folder / "trial.toml"
    path.write_text(text)
    code = main(["check-input", str(path)])
    err = capsys.readouterr().err
    if code != 0:
        assert code == 3 and "Traceback" not in err and err.count("\n") == 1, (text, err)
        return
    run = load_input(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")      # one iteration does not converge: that is fine
        result = ground_state(run.crystal, run.settings)
    assert result.iterations == 1, text
