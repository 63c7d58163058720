"""Cramér–Rao bounds checked against published limits and independent estimators."""

from __future__ import annotations

import numpy as np
import pytest

from modalnb._errors import EstimationError
from modalnb.crlb import (
    combine_channel_bounds,
    crlb_closed_form,
    crlb_modes,
    damping_std_long_record,
    sk_sums,
)
from modalnb.synth import free_decay


def _pole(alpha: float, omega: float) -> tuple[float, float]:
    """(f_n, zeta) at fs = 1 for the per-sample pole (alpha, omega)."""
    wn = np.hypot(alpha, omega)
    return wn / (2 * np.pi), alpha / wn


@pytest.mark.parametrize("omega", [0.3, 0.7, 2.0])
def test_undamped_limit_is_the_real_signal_frequency_bound(omega: float) -> None:
    n, a, sigma = 400, 1.0, 0.1
    b = crlb_modes(np.arange(n), omega / (2 * np.pi), 0.0, a, 0.4, sigma)
    var_w = b.damped_angular_frequency_std[0] ** 2
    # Real sinusoid, var w = sigma^2: var(omega) >= 24 sigma^2 / (A^2 N (N^2-1))
    # (Kay 1993, Fundamentals of Statistical Signal Processing I, Example 3.14, written
    # there as 12 / ((2pi)^2 eta N (N^2-1)) in cycles/sample with eta = A^2/(2 sigma^2);
    # from memory). Rife & Boorstyn 1974 (IEEE Trans. Inf. Theory 20(5):591-598) give
    # 12 sigma_c^2 / (b^2 N (N^2-1)) for a complex exponential with per-component noise
    # variance sigma_c^2; a real cosine of amplitude A is b = A/2 at sigma_c^2 = sigma^2/2,
    # hence the factor 2. The damping parameter is unknown here too, which in the
    # undamped limit decouples from omega only up to double-frequency terms, so 1 %.
    kay = 24 * sigma**2 / (a**2 * n * (n * n - 1))
    assert var_w == pytest.approx(kay, rel=0.01)
    # the complex-convention value with var w taken as the per-component variance is off by 2
    assert abs(var_w / (12 * sigma**2 / (a**2 * n * (n * n - 1))) - 1) > 0.9


def test_numeric_fim_matches_sk_closed_form() -> None:
    # METHODS §3 (real case, derived there): var(alpha) ~ var(omega) ~ (2 s^2/A^2) S0/D,
    # stated to agree with the numerical FIM to 0.5 % at N = 400, alpha = 0.01, omega = 0.7.
    # Analytic derivation independent of the central-difference code.
    n, alpha, omega, sigma = 400, 0.01, 0.7, 0.1
    f, z = _pole(alpha, omega)
    b = crlb_modes(np.arange(n), f, z, 1.0, 0.3, sigma)
    s0, s1, s2 = sk_sums(n, alpha)
    v = 2 * sigma**2 * s0 / (s0 * s2 - s1 * s1)
    assert b.decay_rate_std[0] ** 2 == pytest.approx(v, rel=0.005)
    assert b.damped_angular_frequency_std[0] ** 2 == pytest.approx(v, rel=0.005)
    sf, sz = crlb_closed_form(n, 1.0, f, z, 1.0, sigma)
    assert sf == pytest.approx(b.frequency_hz_std[0], rel=0.005)
    assert sz == pytest.approx(b.damping_ratio_std[0], rel=0.005)


def test_sk_sums_match_geometric_series() -> None:
    # closed forms of sum n^k r^n for k = 0, 1, 2 (standard series; any calculus table)
    n, alpha = 300, 0.02
    r = np.exp(-2 * alpha)
    k = np.arange(n)
    s0 = (1 - r**n) / (1 - r)
    s1 = r * (1 - n * r ** (n - 1) + (n - 1) * r**n) / (1 - r) ** 2
    s2 = float(np.sum(k**2 * r**k))  # brute force for k = 2
    np.testing.assert_allclose(sk_sums(n, alpha), [s0, s1, s2], rtol=1e-12)


def test_long_record_light_damping_form() -> None:
    # METHODS §3: std(zeta) ~ 4 zeta^(3/2) sqrt(omega_n dt) sigma/A for a long record of
    # a lightly damped mode (stated there to match the numerical FIM to 0.3 % at 12.6
    # time constants); its N -> inf derivation: var(alpha) -> 16 alpha^3 sigma^2 / A^2.
    fs, f, z, sigma = 1024.0, 61.3, 0.01, 0.01
    n = int(round(13.0 / (z * 2 * np.pi * f) * fs))  # 13 time constants
    b = crlb_modes(np.arange(n) / fs, f, z, 1.0, 0.2, sigma)
    assert b.damping_ratio_std[0] == pytest.approx(
        damping_std_long_record(fs, f, z, 1.0, sigma), rel=0.01
    )
    # and std(f_n)/f_n ~ std(zeta) (same source)
    assert b.frequency_hz_std[0] / f == pytest.approx(b.damping_ratio_std[0], rel=0.01)


def test_delta_method_matches_a_direct_physical_parametrisation() -> None:
    # Independent FIM built here on the project's generator synth.free_decay, with
    # (f_n, zeta, A, phi) as parameters directly: the CRLB is invariant under
    # reparametrisation (Kay 1993 §3.8, from memory), so both routes must agree.
    fs, f, z, a, phi, sigma = 1024.0, 61.3, 0.012, 1.3, 0.6, 0.02
    t = np.arange(700) / fs
    theta = np.array([f, z, a, phi])
    h = 1e-6 * np.array([f, z, a, 1.0])
    jac = np.empty((t.size, 4))
    for i in range(4):
        up, dn = theta.copy(), theta.copy()
        up[i] += h[i]
        dn[i] -= h[i]
        jac[:, i] = (free_decay(t, *up) - free_decay(t, *dn)) / (2 * h[i])
    cov = np.linalg.inv(jac.T @ jac / sigma**2)
    b = crlb_modes(t, f, z, a, phi, sigma)
    assert b.frequency_hz_std[0] == pytest.approx(np.sqrt(cov[0, 0]), rel=1e-4)
    assert b.damping_ratio_std[0] == pytest.approx(np.sqrt(cov[1, 1]), rel=1e-4)
    assert b.covariance[0, 1] == pytest.approx(
        cov[0, 1], rel=1e-3, abs=1e-3 * np.sqrt(cov[0, 0] * cov[1, 1])
    )


def test_several_channels_add_their_information() -> None:
    # Fisher information of independent records adds (Kay 1993 §3, from memory); with
    # a shared pole and per-channel bounds proportional to sigma_c^2/A_c^2 this is
    # 1/CRLB_total = sum_c 1/CRLB_c (METHODS §3). Exact when the channels share a phase,
    # approximate (double-frequency terms) otherwise.
    t = np.arange(800) / 1024.0
    f, z = 61.3, 0.012
    amps = np.array([1.0, 0.5, 2.0])
    noise = np.array([0.1, 0.05, 0.3])
    for phases, rel in ((np.full(3, 0.4), 1e-6), (np.array([0.4, -1.9, 2.7]), 0.01)):
        singles = [
            crlb_modes(t, f, z, a, p, s) for a, p, s in zip(amps, phases, noise, strict=True)
        ]
        both = crlb_modes(t, f, z, amps[:, None], phases[:, None], noise)
        for field in ("frequency_hz_std", "damping_ratio_std"):
            combined = combine_channel_bounds([getattr(s, field)[0] for s in singles])
            assert getattr(both, field)[0] == pytest.approx(combined, rel=rel)


def test_exponential_window_with_windowed_noise_loses_no_information() -> None:
    # A known invertible transformation of the data leaves the Fisher information
    # unchanged (Kay 1993 §3, from memory): windowing signal and noise by exp(-t/tau)
    # gives the same bound on the true poles. Noise added after the window is not
    # weighted down, so the late samples carry less information and the bound grows.
    t = np.arange(1024) / 1024.0
    base = crlb_modes(t, 61.3, 0.012, 1.0, 0.3, 0.01)
    win = crlb_modes(t, 61.3, 0.012, 1.0, 0.3, 0.01, window_tau_s=0.25)
    np.testing.assert_allclose(win.damping_ratio_std, base.damping_ratio_std, rtol=1e-9)
    np.testing.assert_allclose(win.frequency_hz_std, base.frequency_hz_std, rtol=1e-9)
    after = crlb_modes(t, 61.3, 0.012, 1.0, 0.3, 0.01, window_tau_s=0.25, noise_windowed=False)
    assert after.damping_ratio_std[0] > 1.5 * base.damping_ratio_std[0]


def _ml_fit(t, y, f0, z0, guess_amp, guess_phase, noise_std):
    """Maximum-likelihood fit (noise-weighted least squares) of damped cosines, via scipy.

    The model is written out here (not taken from modalnb) with its analytic Jacobian.
    """
    from scipy.optimize import least_squares

    m = len(f0)
    n_ch = y.shape[0]
    w = 1.0 / np.asarray(noise_std, float).reshape(n_ch, 1, 1)

    def parts(p):
        f, z = p[:m], p[m : 2 * m]
        ap = p[2 * m :].reshape(n_ch, m, 2)
        wn = 2 * np.pi * f[:, None]
        s = z[:, None] * wn
        wd = wn * np.sqrt(1 - z[:, None] ** 2)
        env = np.exp(-s * t)
        arg = wd * t + ap[:, :, 1:2]
        return f, z, ap, wn, wd, env, np.cos(arg), np.sin(arg)

    def resid(p):
        _, _, ap, _, _, env, cos, _ = parts(p)
        model = np.sum(ap[:, :, 0:1] * env * cos, axis=1)
        return ((model - y) * w[:, 0]).ravel()

    def jac(p):
        f, z, ap, wn, wd, env, cos, sin = parts(p)
        a = ap[:, :, 0:1]
        # d/d f and d/d zeta through s = zeta wn and wd = wn sqrt(1 - zeta^2)
        ds_df, ds_dz = 2 * np.pi * z[:, None], wn
        dwd_df = 2 * np.pi * np.sqrt(1 - z[:, None] ** 2)
        dwd_dz = -wn * z[:, None] / np.sqrt(1 - z[:, None] ** 2)
        d_s = -t * a * env * cos
        d_wd = -t * a * env * sin
        out = np.zeros((n_ch, t.size, p.size))
        out[:, :, :m] = np.moveaxis(d_s * ds_df + d_wd * dwd_df, 1, 2)
        out[:, :, m : 2 * m] = np.moveaxis(d_s * ds_dz + d_wd * dwd_dz, 1, 2)
        for c in range(n_ch):
            for k in range(m):
                col = 2 * m + 2 * (c * m + k)
                out[c, :, col] = env[k] * cos[c, k]
                out[c, :, col + 1] = -a[c, k, 0] * env[k] * sin[c, k]
        return (out * w).reshape(n_ch * t.size, p.size)

    p0 = np.concatenate([f0, z0, np.stack([guess_amp, guess_phase], -1).ravel()])
    sol = least_squares(resid, p0, jac=jac, x_scale="jac", xtol=1e-12, ftol=1e-12)
    return sol.x[:m], sol.x[m : 2 * m]


def test_maximum_likelihood_fit_reaches_the_bound_single_mode() -> None:
    # Above threshold the ML estimator is asymptotically efficient (Kay 1993 Thm 7.3,
    # from memory); scipy.optimize.least_squares is an estimator independent of modalnb.
    # 300 trials: the sampling error of a variance is about sqrt(2/300) = 8 %.
    rng = np.random.default_rng(1)
    fs, f, z, a, phi, sigma = 1024.0, 61.3, 0.012, 1.0, 0.5, 0.02
    t = np.arange(512) / fs
    clean = free_decay(t, f, z, a, phi)
    est = np.array(
        [
            _ml_fit(
                t,
                (clean + sigma * rng.standard_normal(t.size))[None],
                [f],
                [z],
                [[a]],
                [[phi]],
                [sigma],
            )
            for _ in range(300)
        ]
    )[:, :, 0]
    b = crlb_modes(t, f, z, a, phi, sigma)
    ratio_f = np.mean((est[:, 0] - f) ** 2) / b.frequency_hz_std[0] ** 2
    ratio_z = np.mean((est[:, 1] - z) ** 2) / b.damping_ratio_std[0] ** 2
    assert 0.75 < ratio_f < 1.3
    assert 0.75 < ratio_z < 1.3


@pytest.mark.slow
def test_maximum_likelihood_fit_reaches_the_bound_two_modes_two_channels() -> None:
    # Same source as above, for the multi-mode, multi-channel FIM (two close modes,
    # 2.3 half-power bandwidths apart, different shapes, different channel noise).
    rng = np.random.default_rng(2)
    fs = 1024.0
    t = np.arange(512) / fs
    f = np.array([60.0, 62.8])
    z = np.array([0.01, 0.01])
    amp = np.array([[1.0, 0.7], [0.8, 1.0]])
    ph = np.array([[0.3, -1.0], [0.3, 2.1]])
    sig = np.array([0.01, 0.02])
    clean = np.stack([free_decay(t, f, z, amp[c], ph[c]) for c in range(2)])
    est = []
    for _ in range(200):
        y = clean + sig[:, None] * rng.standard_normal(clean.shape)
        est.append(np.concatenate(_ml_fit(t, y, f, z, amp, ph, sig)))
    est = np.array(est)
    b = crlb_modes(t, f, z, amp, ph, sig)
    ratios = np.concatenate(
        [
            np.mean((est[:, :2] - f) ** 2, 0) / b.frequency_hz_std**2,
            np.mean((est[:, 2:] - z) ** 2, 0) / b.damping_ratio_std**2,
        ]
    )
    assert np.all((ratios > 0.7) & (ratios < 1.4)), ratios


def test_bad_input_raises_one_line_errors() -> None:
    t = np.arange(100) / 100.0
    with pytest.raises(EstimationError, match="zero amplitude in every channel"):
        crlb_modes(t, [5.0, 12.0], 0.01, amplitude=[1.0, 0.0])
    with pytest.raises(EstimationError, match=r"damping_ratio.*\[0, 1\)"):
        crlb_modes(t, 5.0, 1.2)
    with pytest.raises(EstimationError, match="noise_std"):
        crlb_modes(t, 5.0, 0.01, amplitude=[[1.0], [2.0]], noise_std=[0.1, 0.2, 0.3])
    with pytest.raises(EstimationError, match="noise_std` must be positive"):
        crlb_modes(t, 5.0, 0.01, noise_std=0.0)


def test_zero_amplitude_in_one_channel_only_is_fine() -> None:
    # a mode absent from one channel leaves that channel's phase unidentifiable; the
    # bound then equals the one from the other channel alone (information adds, and the
    # empty channel adds none for that mode) -- Kay 1993 §3, from memory
    t = np.arange(600) / 1024.0
    one = crlb_modes(t, 61.3, 0.012, 1.0, 0.3, 0.01)
    two = crlb_modes(t, 61.3, 0.012, [[1.0], [0.0]], [[0.3], [0.0]], [0.01, 0.01])
    np.testing.assert_allclose(two.damping_ratio_std, one.damping_ratio_std, rtol=1e-6)
