"""Unit tests of pwsolid.mixing: Pulay and linear mixing on quadratic toys, the Kerker filter.

The toys are analytic models of an SCF map (common practice for testing mixers):
a linear map x -> A x + b, whose fixed point is known, and a model metal whose
density residual is -eps(G) (n - n*) with the Thomas-Fermi dielectric function
eps(G) = 1 + k_TF^2 / G^2.
"""

import math

import numpy as np
import pytest

from pwsolid.mixing import (LinearMixer, PulayMixer, kerker_preconditioner,
                            model_dielectric_function, model_dielectric_preconditioner,
                            thomas_fermi_wavevector)

TOL = 1e-10  # residual norm at which a toy counts as converged (far above round-off ~1e-15)


def _iterate(mixer, step, x0, max_iter):
    """Iterations until ||step(x) - x|| < TOL (max_iter + 1 when never)."""
    x = x0.copy()
    for it in range(1, max_iter + 1):
        out = step(x)
        if np.linalg.norm(out - x) < TOL:
            return it, x
        x = mixer.mix(x, out)
    return max_iter + 1, x


@pytest.fixture
def linear_model():
    rng = np.random.default_rng(7)
    dim = 40
    q, _ = np.linalg.qr(rng.normal(size=(dim, dim)))
    # Symmetric Jacobian with eigenvalues in [-0.5, 0.97]: linear mixing contracts
    # slowly (the mode at 0.97 decays by 1 - w * 0.03 per step).
    lam = np.linspace(-0.5, 0.97, dim)
    a = (q * lam) @ q.T
    b = rng.normal(size=dim)
    fixed = np.linalg.solve(np.eye(dim) - a, b)
    return (lambda x: a @ x + b), fixed, dim


def test_linear_mixing_reaches_the_fixed_point_slowly(linear_model):
    step, fixed, dim = linear_model
    n_lin, x = _iterate(LinearMixer(0.6), step, np.zeros(dim), 3000)
    assert n_lin < 3000
    np.testing.assert_allclose(x, fixed, atol=1e-8)
    # Rate 1 - 0.6 * 0.03 = 0.982 per step from ||r0|| ~ 10: about 1400 steps.
    assert n_lin > 1000


def test_pulay_is_much_faster_than_linear_mixing(linear_model):
    step, fixed, dim = linear_model
    n_lin, _ = _iterate(LinearMixer(0.6), step, np.zeros(dim), 3000)
    n_pulay, x = _iterate(PulayMixer(0.6, history=8), step, np.zeros(dim), 3000)
    np.testing.assert_allclose(x, fixed, atol=1e-8)
    # Measured: 132 steps with 8 vectors against 1222 for linear mixing (the count
    # falls with the history: 473, 230, 132, 86, 59 for 2, 4, 8, 12, 20 vectors).
    assert n_pulay < 150
    assert n_pulay * 8 < n_lin


def test_identity_metric_gives_the_same_iterates(linear_model):
    step, _, dim = linear_model
    plain, weighted = PulayMixer(0.6, 5), PulayMixer(0.6, 5, metric=lambda r: r)
    x = y = np.zeros(dim)
    for _ in range(15):
        x, y = plain.mix(x, step(x)), weighted.mix(y, step(y))
    np.testing.assert_allclose(x, y, rtol=1e-9, atol=1e-12)


def test_pulay_with_full_history_converges_within_dimension_steps(linear_model):
    step, fixed, dim = linear_model
    # A full history makes Pulay equivalent to GMRES on a linear map: at most
    # dim + 1 steps in exact arithmetic (common practice); measured 40 here.
    n_pulay, x = _iterate(PulayMixer(0.6, history=dim + 2), step, np.zeros(dim), 500)
    assert n_pulay <= dim + 2
    np.testing.assert_allclose(x, fixed, atol=1e-8)


def test_pulay_reset_forgets_history():
    m = PulayMixer(0.5, history=4)
    m.mix(np.zeros(3), np.ones(3))
    m.reset()
    # After a reset the first step is plain linear mixing.
    np.testing.assert_allclose(m.mix(np.zeros(3), np.ones(3)), 0.5)


# ------------------------------------------------------------------ Kerker

def _cubic_g2(n, length):
    g = 2 * np.pi * np.fft.fftfreq(n, 1.0 / n) / length
    gx, gy, gz = np.meshgrid(g, g, g, indexing="ij")
    return gx * gx + gy * gy + gz * gz


def _fcc_like_g2(shape, a):
    """|G|^2 on the grid of an fcc cell (non-orthogonal reciprocal axes)."""
    lattice = 0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0.0]])
    recip = 2 * np.pi * np.linalg.inv(lattice).T
    axes = [np.fft.fftfreq(n, 1.0 / n) for n in shape]
    m = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1)
    g = m @ recip
    return np.einsum("...i,...i->...", g, g)


def test_kerker_damps_long_wavelengths_and_passes_short_ones():
    n, length, q0 = 24, 20.0, 1.0
    g2 = _cubic_g2(n, length)
    precondition = kerker_preconditioner(g2, q0)
    x = np.arange(n) * length / n
    xx = np.meshgrid(x, x, x, indexing="ij")[0]
    for m in (1, 10):
        gm = 2 * np.pi * m / length
        wave = np.cos(gm * xx)
        out = precondition(wave.ravel()).reshape(wave.shape)
        # A single plane wave is an eigenvector: the factor G^2/(G^2 + q0^2) exactly.
        np.testing.assert_allclose(out, gm**2 / (gm**2 + q0**2) * wave, atol=1e-13)
    long_ratio = (2 * np.pi / length) ** 2 / ((2 * np.pi / length) ** 2 + q0**2)
    short_ratio = (20 * np.pi / length) ** 2 / ((20 * np.pi / length) ** 2 + q0**2)
    assert long_ratio < 0.1 and short_ratio > 0.9


def test_kerker_keeps_reality_removes_the_mean_and_keeps_the_shape(rng):
    shape = (9, 9, 9)                       # odd: every G has its -G partner on the grid
    g2 = _fcc_like_g2(shape, 10.2)
    precondition = kerker_preconditioner(g2, 0.8)
    r = rng.normal(size=shape) + 0.3
    out = precondition(r.ravel())
    assert out.dtype == np.float64 and out.shape == (r.size,)
    assert abs(out.sum()) < 1e-12 * r.size  # G = 0 factor is 0: electron count kept
    # The complex pipeline is real up to round-off (|G|^2 is even in G).
    factor = g2 / (g2 + 0.64)
    factor[0, 0, 0] = 0.0
    full = np.fft.ifftn(np.fft.fftn(r) * factor)
    assert np.abs(full.imag).max() < 1e-14 * np.abs(full.real).max()
    np.testing.assert_allclose(out.reshape(shape), full.real, atol=1e-14)
    assert precondition(r).shape == shape


def test_kerker_argument_errors():
    g2 = _cubic_g2(4, 5.0)
    with pytest.raises(ValueError):
        kerker_preconditioner(g2, 0.0)
    with pytest.raises(ValueError):
        kerker_preconditioner(g2.ravel(), 1.0)
    with pytest.raises(ValueError):
        kerker_preconditioner(g2, 1.0)(np.zeros(10))


def _screened_model(g2, eps, mean, rng):
    """(step, start, target) of a model SCF map whose density residual is
    -eps(G) (n - n*) for a smooth random n* of the given mean (G = 0 kept)."""
    smooth = np.fft.ifftn(np.fft.fftn(rng.normal(size=g2.shape)) * np.exp(-g2)).real
    target = mean * (1 + 0.3 * smooth / np.abs(smooth).max())

    def step(x):
        delta = np.fft.ifftn(np.fft.fftn(x.reshape(g2.shape) - target) * eps).real
        return x - delta.ravel()

    return step, np.full(g2.size, target.mean()), target


def test_pulay_with_kerker_cures_charge_sloshing(rng):
    # Model metal in a long cubic cell: residual -eps(G) (n - n*), eps = 1 + k^2/G^2.
    # eps reaches 1 + k^2 / G_min^2 ~ 29, so unpreconditioned mixing is unstable
    # for weights above 2/29 and slow below; Kerker with q0 = k makes P eps = 1.
    n, length = 12, 30.0
    g2 = _cubic_g2(n, length)
    mean = 0.01
    k = thomas_fermi_wavevector(mean)
    eps = np.ones_like(g2)
    eps[g2 > 0] = 1 + k * k / g2[g2 > 0]
    step, start, target = _screened_model(g2, eps, mean, rng)
    kerker = kerker_preconditioner(g2, k)
    n_kerker, x = _iterate(PulayMixer(0.6, 8, preconditioner=kerker), step, start, 200)
    assert n_kerker <= 10
    np.testing.assert_allclose(x, target.ravel(), atol=1e-9)
    assert x.sum() == pytest.approx(start.sum(), rel=1e-13)   # electron count unchanged
    # A screening wave vector off by a factor 2 either way still works well.
    for q0 in (0.5 * k, 2.0 * k):
        n_off, _ = _iterate(PulayMixer(0.6, 8, preconditioner=kerker_preconditioner(g2, q0)),
                            step, start, 200)
        assert n_off <= 20            # measured 18 for both
    # Measured: 3 steps with the matched filter, 36 without any.
    n_plain, _ = _iterate(PulayMixer(0.6, 8), step, start, 200)
    assert n_plain > 3 * n_kerker
    # Linear mixing at full weight with the ideal filter is exact in one step.
    n_linear, _ = _iterate(LinearMixer(1.0, preconditioner=kerker), step, start, 5)
    assert n_linear == 2


def test_thomas_fermi_wavevector_for_rs_2():
    rs = 2.0
    n = 3 / (4 * math.pi * rs**3)
    k_f = (3 * math.pi**2 * n) ** (1 / 3)
    k_tf = thomas_fermi_wavevector(n)
    # k_TF^2 = 4 k_F / pi (Thomas-Fermi screening of the uniform gas, Hartree units).
    assert k_tf == pytest.approx(math.sqrt(4 * k_f / math.pi), rel=1e-14)
    assert k_tf == pytest.approx(math.sqrt(4 * (3 * n / math.pi) ** (1 / 3)), rel=1e-14)
    # k_TF / k_F = 0.815 sqrt(r_s): N. W. Ashcroft & N. D. Mermin, Solid State Physics
    # (1976), Eq. (17.55), from memory; printed to three digits, hence rel 1e-3.
    assert k_tf / k_f == pytest.approx(0.815 * math.sqrt(rs), rel=1e-3)
    # k_F r_s = (9 pi / 4)^(1/3) = 1.919158 (REFERENCES.md 1a): k_TF = 1.10534 / bohr.
    assert k_tf == pytest.approx(math.sqrt(4 * 1.919158293 / rs / math.pi), rel=1e-9)
    with pytest.raises(ValueError):
        thomas_fermi_wavevector(0.0)


def test_model_dielectric_function_limits():
    # R. Resta, Phys. Rev. B 16, 2717 (1977) (from memory): eps(0) = eps0, with the
    # screening radius from sinh(q0 R_s) / (q0 R_s) = eps0; Thomas-Fermi 1 + q0^2/q^2
    # from q R_s = pi on (continuous there); eps -> 1 at large q (no screening).
    eps0, q0 = 11.7, 1.1
    x = 4.0                                             # solve sinh(x)/x = eps0 by Newton
    for _ in range(50):
        x -= (math.sinh(x) / x - eps0) / (math.cosh(x) / x - math.sinh(x) / x ** 2)
    r_s = x / q0
    q = np.array([0.0, 1e-6, 0.5 * math.pi / r_s, math.pi / r_s * (1 - 1e-9), 3.0, 50.0])
    eps = model_dielectric_function(q, eps0, q0)
    assert eps[0] == pytest.approx(eps0, rel=1e-12) and eps[1] == pytest.approx(eps0, rel=1e-9)
    half = q[2]
    screened = q0 ** 2 * math.sin(half * r_s) / (eps0 * half * r_s)
    assert eps[2] == pytest.approx((q0 ** 2 + half ** 2) / (screened + half ** 2), rel=1e-9)
    assert eps[3] == pytest.approx(1 + q0 ** 2 / q[3] ** 2, rel=1e-7)
    assert eps[4] == pytest.approx(1 + q0 ** 2 / 9.0, rel=1e-14)
    assert eps[5] == pytest.approx(1.0, abs=1e-3)
    # screening only lowers the response: 1 <= eps <= eps0, falling with q
    grid = np.linspace(0, 10, 2001)
    curve = model_dielectric_function(grid, eps0, q0)
    assert np.all(np.diff(curve) <= 1e-12) and curve.min() >= 1.0
    with pytest.raises(ValueError):
        model_dielectric_function(grid, 1.0, q0)
    with pytest.raises(ValueError):
        model_dielectric_function(grid, eps0, 0.0)


def test_pulay_with_the_model_dielectric_solves_a_model_insulator(rng):
    # Model insulator in a long cubic cell: residual -eps(G) (n - n*) with Resta's eps,
    # which tends to eps0 = 12 at small G (where a Kerker filter assumes a metal's
    # 1 + q0^2/G^2). Dividing by the same eps makes one full-weight linear step exact;
    # Pulay with it needs a few steps, far fewer than plain or Kerker-filtered Pulay.
    n, length, eps0 = 12, 30.0, 12.0
    g2 = _cubic_g2(n, length)
    mean = 0.03
    q0 = thomas_fermi_wavevector(mean)
    eps = model_dielectric_function(np.sqrt(g2), eps0, q0)
    step, start, target = _screened_model(g2, eps, mean, rng)
    model = model_dielectric_preconditioner(g2, eps0, q0)
    n_linear, x = _iterate(LinearMixer(1.0, preconditioner=model), step, start, 5)
    assert n_linear == 2
    n_model, x = _iterate(PulayMixer(1.0, 8, preconditioner=model), step, start, 200)
    np.testing.assert_allclose(x, target.ravel(), atol=1e-9)
    assert x.sum() == pytest.approx(start.sum(), rel=1e-13)   # electron count unchanged
    n_plain, _ = _iterate(PulayMixer(0.6, 8), step, start, 200)
    n_kerker, _ = _iterate(PulayMixer(0.6, 8, preconditioner=kerker_preconditioner(g2, q0)),
                           step, start, 200)
    # measured: 2 steps with the model, 32 plain, 13 with the Kerker filter
    assert n_model <= 3 and n_plain > 2 * n_model and n_kerker > 2 * n_model
    # a dielectric constant off by a factor 2 still works well (measured: 10 steps)
    n_off, _ = _iterate(PulayMixer(1.0, 8, preconditioner=model_dielectric_preconditioner(
        g2, 2 * eps0, q0)), step, start, 200)
    assert n_off < n_plain
