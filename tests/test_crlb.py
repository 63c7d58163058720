"""Cramér–Rao bounds checked against published limits and independent estimators.

Expected values are written out here, not taken from the module: the published
undamped limit (Kay 1993; Rife & Boorstyn 1974), the real damped-sinusoid Fisher
information with its double-frequency terms dropped (derived below from the model), and
a Fisher information built in this file by central differences of the model written out
here.
"""

from __future__ import annotations

import numpy as np
import pytest

from modalnb._errors import EstimationError
from modalnb.testing.crlb import crlb_closed_form, crlb_modes, damping_std_long_record, sk_sums
from modalnb.testing.synth import free_decay


def _damped_cosine(t, f, z, a, phi):
    """x(t) = A exp(-zeta w_n t) cos(w_n sqrt(1 - zeta^2) t + phi), written out here."""
    wn = 2 * np.pi * f
    return a * np.exp(-z * wn * t) * np.cos(wn * np.sqrt(1 - z * z) * t + phi)


def _fisher_by_differences(t, theta, sigma, weight=None, rel=1e-6):
    """FIM = J^T J / sigma^2 of (weight *) _damped_cosine over theta = (f, zeta, A, phi).

    Gaussian white noise of std `sigma`: Kay 1993, *Fundamentals of Statistical Signal
    Processing: Estimation Theory*, eq. (3.31) for a signal in Gaussian noise (from
    memory). Jacobian by central differences, here, not by modalnb.
    """
    w = np.ones_like(t) if weight is None else weight
    h = rel * np.maximum(np.abs(theta), [1.0, 1e-3, 1.0, 1.0])
    jac = np.empty((t.size, theta.size))
    for i in range(theta.size):
        up, dn = theta.copy(), theta.copy()
        up[i] += h[i]
        dn[i] -= h[i]
        jac[:, i] = w * (_damped_cosine(t, *up) - _damped_cosine(t, *dn)) / (2 * h[i])
    white = jac / sigma
    return white.T @ white


def _std_from_fim(fim):
    return np.sqrt(np.diag(np.linalg.inv(fim)))


def _sums(n, alpha):
    """S_k = sum_{n=0}^{N-1} n^k exp(-2 alpha n), k = 0, 1, 2, summed here."""
    k = np.arange(n, dtype=float)
    e = np.exp(-2 * alpha * k)
    return float(np.sum(e)), float(np.sum(k * e)), float(np.sum(k * k * e))


@pytest.mark.parametrize("omega", [0.3, 0.7, 2.0])
def test_undamped_limit_is_the_real_signal_frequency_bound(omega: float) -> None:
    n, a, sigma = 400, 1.0, 0.1
    b = crlb_modes(np.arange(n), omega / (2 * np.pi), 0.0, a, 0.4, sigma)
    var_w = b.damped_angular_frequency_std[0] ** 2
    # Real sinusoid, var w = sigma^2: var(omega) >= 24 sigma^2 / (A^2 N (N^2-1))
    # (Kay 1993, Fundamentals of Statistical Signal Processing: Estimation Theory,
    # Example 3.14, written there as 12 / ((2pi)^2 eta N (N^2-1)) in cycles/sample with
    # eta = A^2/(2 sigma^2); from memory). Rife & Boorstyn 1974 (IEEE Trans. Inf. Theory
    # 20(5):591-598) give 12 sigma_c^2 / (b^2 N (N^2-1)) for a complex exponential with
    # per-component noise variance sigma_c^2; a real cosine of amplitude A is b = A/2 at
    # sigma_c^2 = sigma^2/2, hence the factor 2. The damping parameter is unknown here too,
    # which in the undamped limit decouples from omega only up to double-frequency terms,
    # so 1 %.
    kay = 24 * sigma**2 / (a**2 * n * (n * n - 1))
    assert var_w == pytest.approx(kay, rel=0.01)
    # the complex-convention value with var w taken as the per-component variance is off by 2
    assert abs(var_w / (12 * sigma**2 / (a**2 * n * (n * n - 1))) - 1) > 0.9


def test_numeric_fim_matches_sk_closed_form() -> None:
    # Real damped sinusoid x_n = A e^{-alpha n} cos(omega n + phi) in white noise sigma^2.
    # Derivatives: dx/dalpha = -n x, dx/domega = -n A e^{-alpha n} sin(.), dx/dA =
    # e^{-alpha n} cos(.), dx/dphi = -A e^{-alpha n} sin(.). Dropping the double-frequency
    # terms (cos^2 ~ sin^2 ~ 1/2, sin cos ~ 0: the approximation of Kay 1993, Example 3.14,
    # from memory) the FIM splits into the blocks (alpha, A) = [[A^2 S2, -A S1],
    # [-A S1, S0]] / (2 sigma^2) and (omega, phi) = A^2 [[S2, S1], [S1, S0]] / (2 sigma^2),
    # so var(alpha) = var(omega) = 2 sigma^2 S0 / (A^2 (S0 S2 - S1^2)). The dropped terms
    # are of relative size ~1/(N omega) here, hence 0.5 %.
    n, alpha, omega, sigma = 400, 0.01, 0.7, 0.1
    wn = np.hypot(alpha, omega)
    f, z = wn / (2 * np.pi), alpha / wn
    b = crlb_modes(np.arange(n), f, z, 1.0, 0.3, sigma)
    s0, s1, s2 = _sums(n, alpha)
    v = 2 * sigma**2 * s0 / (s0 * s2 - s1 * s1)
    assert b.decay_rate_std[0] ** 2 == pytest.approx(v, rel=0.005)
    assert b.damped_angular_frequency_std[0] ** 2 == pytest.approx(v, rel=0.005)
    # in (f_n, zeta) by the delta method: f_n = |s|/2pi, zeta = alpha/|s|, with alpha and
    # omega uncorrelated: var f_n = v/(2pi)^2 and var zeta = v omega^2/|s|^4 (per sample)
    sf, sz = crlb_closed_form(n, 1.0, f, z, 1.0, sigma)
    assert sf == pytest.approx(np.sqrt(v) / (2 * np.pi), rel=1e-9)
    assert sz == pytest.approx(np.sqrt(v) * omega / wn**2, rel=1e-9)
    assert b.frequency_hz_std[0] == pytest.approx(np.sqrt(v) / (2 * np.pi), rel=0.005)
    assert b.damping_ratio_std[0] == pytest.approx(np.sqrt(v) * omega / wn**2, rel=0.005)


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
    # From var(alpha) = 2 sigma^2 S0 / (A^2 (S0 S2 - S1^2)) above with N -> inf:
    # S0 = 1/(1-r), S1 = r/(1-r)^2, S2 = r(1+r)/(1-r)^3 (r = e^{-2 alpha}; sums of the
    # geometric series), so S0/(S0 S2 - S1^2) = (1-r)^3/r ~ 8 alpha^3 and
    # var(alpha) ~ 16 alpha^3 sigma^2/A^2. With alpha = zeta w_n dt and
    # var(zeta) ~ var(alpha) fs^2 / w_n^2 (zeta << 1):
    # std(zeta) ~ 4 zeta^(3/2) sqrt(w_n dt) sigma / A. 13 time constants make the record
    # "infinite" to exp(-26); the light-damping steps cost O(zeta) ~ 1 %.
    fs, f, z, sigma = 1024.0, 61.3, 0.01, 0.01
    n = int(round(13.0 / (z * 2 * np.pi * f) * fs))  # 13 time constants
    b = crlb_modes(np.arange(n) / fs, f, z, 1.0, 0.2, sigma)
    expected = 4 * z**1.5 * np.sqrt(2 * np.pi * f / fs) * sigma / 1.0
    assert b.damping_ratio_std[0] == pytest.approx(expected, rel=0.01)
    assert damping_std_long_record(fs, f, z, 1.0, sigma) == pytest.approx(expected, rel=1e-12)
    # std(f_n)/f_n = sqrt(V)/w_n and std(zeta) = sqrt(V) w_d/w_n^2: equal to O(zeta^2)
    assert b.frequency_hz_std[0] / f == pytest.approx(b.damping_ratio_std[0], rel=1e-3)


def test_delta_method_matches_a_direct_physical_parametrisation() -> None:
    # FIM built here by central differences of the damped cosine written out in this
    # file, with (f_n, zeta, A, phi) as parameters directly: the CRLB is invariant under
    # reparametrisation (Kay 1993, sect. 3.8, from memory), so the module's route
    # (poles, then the delta method) must give the same bound.
    fs, f, z, a, phi, sigma = 1024.0, 61.3, 0.012, 1.3, 0.6, 0.02
    t = np.arange(700) / fs
    cov = np.linalg.inv(_fisher_by_differences(t, np.array([f, z, a, phi]), sigma))
    b = crlb_modes(t, f, z, a, phi, sigma)
    assert b.frequency_hz_std[0] == pytest.approx(np.sqrt(cov[0, 0]), rel=1e-4)
    assert b.damping_ratio_std[0] == pytest.approx(np.sqrt(cov[1, 1]), rel=1e-4)
    assert b.covariance[0, 1] == pytest.approx(
        cov[0, 1], rel=1e-3, abs=1e-3 * np.sqrt(cov[0, 0] * cov[1, 1])
    )


def test_several_channels_add_their_information() -> None:
    # Fisher information of independent records adds (Kay 1993, sect. 3.6, from memory).
    # With one shared pole and channels that share a phase, each channel's FIM is one
    # matrix times A_c^2/sigma_c^2, so 1/CRLB = sum_c 1/CRLB_c exactly:
    # std = 1/sqrt(sum_c 1/std_c^2). With different phases the amplitude/phase nuisance
    # parameters differ per channel and the relation holds up to double-frequency terms.
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
            stds = np.array([getattr(s, field)[0] for s in singles])
            combined = 1.0 / np.sqrt(np.sum(1.0 / stds**2))
            assert getattr(both, field)[0] == pytest.approx(combined, rel=rel)
    # each single channel's bound against the FIM built here for that channel
    for a, p, s, single in zip(amps, phases, noise, singles, strict=True):
        ref = _std_from_fim(_fisher_by_differences(t, np.array([f, z, a, p]), s))
        assert single.damping_ratio_std[0] == pytest.approx(ref[1], rel=1e-4)


def test_exponential_window_bounds_against_a_fim_built_here() -> None:
    # Windowed record w(t) x(t), w = exp(-(t - t_w)/tau) after t_w, 1 before.
    # (a) noise added after the window (std sigma): FIM = (w J)^T (w J) / sigma^2, built
    #     here by central differences; the late samples are weighted down, the bound grows.
    # (b) the measured noise windowed too (std w sigma): FIM = (w J)^T (w J) / (w sigma)^2
    #     = J^T J / sigma^2, the unwindowed FIM (a known invertible weighting neither adds
    #     nor removes information, Kay 1993, sect. 3.8, from memory). The expected value is
    #     the FIM of the unwindowed record built here, so a module that ignored or
    #     misapplied the window fails (a) or (b).
    fs, f, z, a, phi, sigma, tau, t_w = 1024.0, 61.3, 0.012, 1.0, 0.3, 0.01, 0.25, 0.1
    t = np.arange(1024) / fs
    theta = np.array([f, z, a, phi])
    w = np.exp(-np.clip(t - t_w, 0.0, None) / tau)
    plain = _std_from_fim(_fisher_by_differences(t, theta, sigma))
    after = _std_from_fim(_fisher_by_differences(t, theta, sigma, w))
    assert after[1] > 1.5 * plain[1]  # (a) and (b) expect different values

    b_after = crlb_modes(
        t, f, z, a, phi, sigma, window_tau_s=tau, window_start_s=t_w, noise_windowed=False
    )
    assert b_after.frequency_hz_std[0] == pytest.approx(after[0], rel=1e-4)
    assert b_after.damping_ratio_std[0] == pytest.approx(after[1], rel=1e-4)
    b_win = crlb_modes(t, f, z, a, phi, sigma, window_tau_s=tau, window_start_s=t_w)
    assert b_win.frequency_hz_std[0] == pytest.approx(plain[0], rel=1e-4)
    assert b_win.damping_ratio_std[0] == pytest.approx(plain[1], rel=1e-4)


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
    # a mode absent from one channel leaves that channel's phase unidentifiable (dropped);
    # the empty channel adds no information on the pole (information adds, Kay 1993,
    # sect. 3.6, from memory), so the bound is the one of the other channel alone: the
    # FIM built here from that channel.
    fs, f, z, a, phi, sigma = 1024.0, 61.3, 0.012, 1.0, 0.3, 0.01
    t = np.arange(600) / fs
    ref = _std_from_fim(_fisher_by_differences(t, np.array([f, z, a, phi]), sigma))
    two = crlb_modes(t, f, z, [[a], [0.0]], [[phi], [0.0]], [sigma, sigma])
    assert two.frequency_hz_std[0] == pytest.approx(ref[0], rel=1e-4)
    assert two.damping_ratio_std[0] == pytest.approx(ref[1], rel=1e-4)
