"""Static density response of jellium: the engine and the functional together.

Reference: linear response of the uniform gas, chi = chi_0 / (1 - (4 pi/q^2 + f_xc) chi_0)
with the Lindhard function chi_0 (J. Lindhard, K. Dan. Vidensk. Selsk. Mat.-Fys. Medd.
28, 8 (1954); exact for the non-interacting gas) and the LDA kernel f_xc = d^2(n eps_xc)/dn^2.
"""

import pytest

from pwsolid.workflows.density_response import lindhard, static_response


def test_lindhard_limits():
    # chi_0(q -> 0) = -k_F / pi^2 (the density of states at the Fermi level, both spins),
    # and -k_F/(2 pi^2) at q = 2 k_F (textbook values, common practice).
    k_f = 0.7
    assert abs(lindhard(1e-6, k_f) / (-k_f / 3.141592653589793 ** 2) - 1) < 1e-9
    assert abs(lindhard(2 * k_f, k_f) / (-k_f / (2 * 3.141592653589793 ** 2)) - 1) < 1e-12


@pytest.mark.slow
def test_response_matches_lindhard_with_the_lda_kernel():
    # 1% for q/k_F in [0.5, 1.5] (issue target) at r_s = 3; the linear regime is shown by
    # halving the amplitude (same chi to 0.1%), and the kernel matters: plain random-phase
    # screening misses by more than the tolerance at the larger q.
    result = static_response(3.0, harmonics=(2, 3, 4, 5), mesh=(16, 16, 3))
    for p in result.points:
        assert 0.5 <= p.q / result.k_fermi <= 1.5
        assert abs(p.relative_error) < 0.01, (p.harmonic, p.relative_error)
        assert abs(p.measured_half_amplitude / p.measured - 1) < 1e-3
    assert abs(result.points[-1].random_phase / result.points[-1].theory - 1) > 0.02


def test_density_response_command(tmp_path, capsys):
    from pwsolid.cli import main

    assert main(["density-response", "--harmonics", "3", "--mesh", "6,6,1",
                 "--output-dir", str(tmp_path)]) == 0
    assert "Lindhard" in capsys.readouterr().out
    assert (tmp_path / "density-response-rs3.json").exists()
    assert main(["density-response", "--mesh", "6,6"]) == 3
