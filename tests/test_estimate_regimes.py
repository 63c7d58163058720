"""Regimes, formulas and hard cases of fit_modes.

Signals are closed-form free decays ``A exp(-zeta wn t) cos(wd t + phi)`` written out in
tests/reference_models.py, or ``scipy.integrate.solve_ivp`` simulations of
``x'' + 2 zeta wn x' + wn^2 x = 0``; noise is white, a given SNR below the signal's RMS.
The damping relations checked are textbook ones (Thomson & Dahleh 1998, *Theory of
Vibration with Applications*, ch. 2; Ewins 2000, *Modal Testing*, ch. 2; from memory):
log decrement ``delta = 2 pi zeta / sqrt(1 - zeta^2)``, ``Q = 1/(2 zeta)``, loss factor
``eta = 2 zeta``, envelope ``exp(-sigma t)`` with ``sigma = zeta wn``, so a decay rate of
``20 log10(e) sigma`` dB/s and a time constant ``1/sigma``.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference_models import free_decay
from scipy.integrate import solve_ivp

import modalnb
from modalnb import EstimationError, ModeFit, fit_modes, records_from_arrays

FS = 2048.0


def add_noise(clean, snr_db, rng, t):
    """White noise `snr_db` below the RMS of `clean` over t >= 0; returns (noisy, sigma)."""
    sigma = np.sqrt(np.mean(np.atleast_2d(clean)[..., t >= 0] ** 2)) * 10 ** (-snr_db / 20)
    return clean + sigma * rng.standard_normal(np.shape(clean)), sigma


def _sdof_ivp(fn, zeta, n=2048, x0=0.0, v0=1.0):
    """Free decay of x'' + 2 zeta wn x' + wn^2 x = 0 from (x0, v0), by solve_ivp.

    The default start (0, v0) is the state just after an ideal hammer impulse.
    """
    wn = 2 * np.pi * fn
    t = np.arange(n) / FS
    sol = solve_ivp(lambda _t, z: [z[1], -2 * zeta * wn * z[1] - wn * wn * z[0]], (0, t[-1]),
                    [x0, v0], t_eval=t, rtol=1e-11, atol=1e-14, method="DOP853")
    return t, sol.y[0]


@pytest.mark.parametrize("zeta", [1.0, 1.5, 3.0])
def test_non_oscillating_regimes(zeta):
    t, x = _sdof_ivp(10.0, zeta)
    rng = np.random.default_rng(5)
    y, _ = add_noise(x, 50.0, rng, t)
    res = fit_modes(records_from_arrays(y, FS), accept=[True])
    assert res.sizes["mode"] == 1
    # truth: the ODE coefficients given to solve_ivp
    np.testing.assert_allclose(res["frequency_hz"].values[0], 10.0, rtol=0.01)
    np.testing.assert_allclose(res["damping_ratio"].values[0], zeta, rtol=0.02)
    # fact of the trade (common practice): zeta = 1 is critical, above is overdamped
    expect = "critical" if zeta == 1.0 else "overdamped"
    assert res["regime"].values[0] == expect
    # no oscillation: damped frequency and log decrement are NaN and the status says why
    assert np.isnan(res["damped_frequency_hz"].values[0])
    assert "no oscillation" in res["status"].values[0]
    for name in ("frequency_hz_std", "damping_ratio_std", "q_factor", "decay_rate_db_per_s"):
        assert np.isfinite(res[name].values[0])


def test_light_damping_formulas():
    fn, zeta = 60.0, 0.004
    t = np.arange(8192) / FS
    y, _ = add_noise(free_decay(t, fn, zeta), 40.0, np.random.default_rng(2), t)
    res = fit_modes(records_from_arrays(y, FS), accept=[True])
    z = float(res["damping_ratio"][0])
    f = float(res["frequency_hz"][0])
    assert res["regime"].values[0] == "underdamped"
    # exact log decrement delta = 2 pi zeta / sqrt(1 - zeta^2) (textbook, see above)
    np.testing.assert_allclose(res["log_decrement"][0], 2 * np.pi * z / np.sqrt(1 - z * z))
    # Q = 1/(2 zeta), loss factor 2 zeta (textbook, see above)
    np.testing.assert_allclose(res["q_factor"][0], 1 / (2 * z))
    np.testing.assert_allclose(res["loss_factor"][0], 2 * z)
    # dB/s = 20 log10(e) sigma = 8.686 sigma; time constant 1/sigma (textbook, see above)
    sigma = z * 2 * np.pi * f
    np.testing.assert_allclose(res["decay_rate_db_per_s"][0], 20 * np.log10(np.e) * sigma,
                               rtol=1e-12)
    np.testing.assert_allclose(res["decay_time_constant_s"][0], 1 / sigma)
    # common practice: for zeta << 1 the damped frequency equals fn within ~zeta^2/2
    fd = float(res["damped_frequency_hz"][0])
    assert abs(fd - f) / f <= z * z / 2 * 1.01
    # against the truth given to the closed-form decay: 4 reported std, and absolute
    # tolerances at 40 dB SNR (0.01 % in f, 3 % in zeta)
    assert abs(z - zeta) < 4 * float(res["damping_ratio_std"][0])
    assert abs(f - fn) < 4 * float(res["frequency_hz_std"][0])
    assert abs(f - fn) / fn < 1e-4 and abs(z - zeta) / zeta < 0.03


def test_exponential_window_is_removed():
    fn, zeta, tau = 80.0, 0.01, 0.25
    t = np.arange(-128, 4096) / FS
    rng = np.random.default_rng(11)
    clean = free_decay(t, fn, zeta)
    y = clean + 1e-4 * rng.standard_normal(t.size)
    y = np.where(t >= 0, y * np.exp(-np.clip(t, 0, None) / tau), y)
    rec = records_from_arrays(y, FS, t0=t[0], attrs={"exponential_window_tau_s": tau})
    res = fit_modes(rec, accept=[True])
    # exact pole shift lambda_true = lambda_meas + 1/tau (Fladung & Rost 1997, Mech. Syst.
    # Signal Process. 11(1):23-36; from memory): the un-windowed zeta, 1e-4 noise
    np.testing.assert_allclose(res["damping_ratio"][0], zeta, rtol=2e-3)
    np.testing.assert_allclose(res["frequency_hz"][0], fn, rtol=1e-5)
    # the windowed apparent damping, (sigma + 1/tau) / |lambda - 1/tau|, is far from it
    wn = 2 * np.pi * fn
    s_w, wd = zeta * wn + 1 / tau, wn * np.sqrt(1 - zeta**2)
    assert abs(float(res["damping_ratio"][0]) - s_w / np.hypot(s_w, wd)) > 5e-3
    assert "exp(t/tau)" in res.attrs["settings"]


def test_close_modes_and_dead_channel():
    # gap of 1.5 half-power bandwidths: 1.5 * 2 zeta f
    f1, zeta = 100.0, 0.005
    f2 = f1 + 1.5 * 2 * zeta * f1
    t = np.arange(8192) / FS
    rng = np.random.default_rng(4)
    sig = np.stack([free_decay(t, [f1, f2], zeta, [1.0, 0.7], [0.0, 1.0]),
                    free_decay(t, [f1, f2], zeta, [0.5, -1.0], [0.3, 0.2]),
                    np.zeros(t.size)])
    y = sig + 1e-3 * rng.standard_normal(sig.shape) * (np.arange(3) < 2)[:, None]
    res = fit_modes(records_from_arrays(y[None], FS), accept=[True])
    np.testing.assert_allclose(res["frequency_hz"].values, [f1, f2], rtol=1e-4)  # closed form
    np.testing.assert_allclose(res["damping_ratio"].values, [zeta, zeta], rtol=0.02)
    assert "dead" in res["channel_note"].values[2]
    assert np.all(res["shape_amplitude"].values[:, 2] == 0)


# absolute tolerances at 40 dB SNR; at zeta 0.7 the decay lasts 1/(zeta wn) = 1.5 ms,
# about three samples, so its frequency is weakly determined
@pytest.mark.parametrize(("zeta", "f_rtol"), [(0.0005, 1e-5), (0.2, 1e-3), (0.7, 5e-3)])
def test_wide_damping_range(zeta, f_rtol):
    t = np.arange(4096) / FS
    y, _ = add_noise(free_decay(t, 150.0, zeta), 40.0, np.random.default_rng(8), t)
    res = fit_modes(records_from_arrays(y, FS), accept=[True])
    assert res.sizes["mode"] == 1
    # the decay's own parameters (closed form): 5 reported std, and absolute tolerances
    assert abs(float(res["damping_ratio"][0]) - zeta) < 5 * float(res["damping_ratio_std"][0])
    assert abs(float(res["frequency_hz"][0]) - 150.0) / 150.0 < f_rtol
    assert abs(float(res["damping_ratio"][0]) - zeta) / zeta < 1e-2
    assert res["status"].values[0].startswith("ok")


def test_low_snr_does_not_crash():
    t = np.arange(4096) / FS
    y, _ = add_noise(free_decay(t, 120.0, 0.01), 10.0, np.random.default_rng(9), t)
    res = fit_modes(records_from_arrays(y, FS), accept=[True])
    k = int(np.argmin(np.abs(res["frequency_hz"].values - 120.0)))
    assert abs(float(res["frequency_hz"][k]) - 120.0) < 5 * float(res["frequency_hz_std"][k])
    # absolute: at 10 dB SNR still within 0.2 % of the closed form's 120 Hz, zeta within 30 %
    assert abs(float(res["frequency_hz"][k]) - 120.0) < 0.24
    assert abs(float(res["damping_ratio"][k]) - 0.01) < 0.003


def test_short_window_status_and_direction_sign():
    t = np.arange(4096) / FS
    x = free_decay(t, 50.0, 0.01)
    y = np.stack([x, x]) + 1e-4 * np.random.default_rng(1).standard_normal((2, t.size))
    rec = records_from_arrays(y, FS, direction=["+Z", "-Z"])
    res = fit_modes(rec, window=(0.0, 0.05), accept=[True])  # 2.5 cycles
    assert "cycles" in res["status"].values[0]
    # the same signal labelled -Z: its shape phase is flipped by 180 degrees (sign convention)
    np.testing.assert_allclose(abs(res["shape_phase_deg"].values[0, 1]), 180.0, atol=0.1)


def test_bad_input_errors():
    t = np.arange(2048) / FS
    rec = records_from_arrays(free_decay(t, 50.0, 0.01), FS)
    with pytest.raises(EstimationError, match="all 1 hits are rejected"):
        fit_modes(rec, accept=[False])
    noise = np.random.default_rng(0).standard_normal(2048)
    with pytest.raises(EstimationError, match="no mode found"):
        fit_modes(records_from_arrays(noise, FS), accept=[True])
    with pytest.raises(EstimationError, match="window"):
        fit_modes(rec, window=(0.1, 0.1005), accept=[True])
    with pytest.raises(EstimationError, match="not fitted"):
        ModeFit().refit(window=(0.0, 0.5))


def test_refit_after_window_change_and_lmfit_report():
    t = np.arange(4096) / FS
    y, _ = add_noise(free_decay(t, [40.0, 95.0], [0.01, 0.02]), 40.0, np.random.default_rng(3), t)
    est = ModeFit(accept=[True]).fit(records_from_arrays(y, FS))
    first = est.result_["frequency_hz"].values.copy()
    new = est.refit(window=(0.2, 1.5))
    # closed form; by 0.2 s the 95 Hz mode has decayed by 21 dB (sigma = 11.9 /s), so the
    # refit sees it near the noise: 0.1 % in f, 5 % in zeta
    np.testing.assert_allclose(new["frequency_hz"].values, [40.0, 95.0], rtol=1e-3)
    np.testing.assert_allclose(new["damping_ratio"].values, [0.01, 0.02], rtol=0.05)
    assert new.attrs["window"][0] >= 0.2 and first.size == 2
    assert "m1_sigma" in est.fit_report()
    assert est.stabilisation_.sizes["pole"] > 0


def test_cross_checks_agree_on_a_clean_long_decay():
    t = np.arange(16384) / FS  # 8 s: about 25 time constants, negligible truncation bias
    y, _ = add_noise(free_decay(t, [50.0, 140.0], [0.01, 0.005]), 50.0,
                     np.random.default_rng(6), t)
    rec = records_from_arrays(y, FS)
    res = fit_modes(rec, accept=[True])
    xc = modalnb.cross_checks(rec, res)
    # the closed-form decay's zeta; each method within its bias on clean data
    for name, tol in (("log_decrement", 0.05), ("half_power", 0.1), ("hilbert", 0.1)):
        np.testing.assert_allclose(xc[f"xcheck_{name}_damping"].values, [0.01, 0.005], rtol=tol)
    over = fit_modes(records_from_arrays(_sdof_ivp(10.0, 2.0)[1], FS), accept=[True])
    xo = modalnb.cross_checks(records_from_arrays(_sdof_ivp(10.0, 2.0)[1], FS), over)
    assert np.isnan(xo["xcheck_hilbert_damping"].values[0])
    assert "no oscillation" in xo["xcheck_note"].values[0]


def test_cross_checks_on_the_demo_multimode_records():
    # demo truth (demo_truth.json, the FE model's modal damping): on a four-mode record with
    # a strong high mode right after the hit, each cross-check lands within 5 % of the true
    # damping ratio once the band-pass filter's edge ringing is cut off
    from modalnb import fit_modes
    from modalnb.demo import load_demo, load_demo_truth

    res = fit_modes(load_demo())
    truth = [m["damping_ratio"] for m in load_demo_truth()["modes"]]
    for name in ("xcheck_log_decrement_damping", "xcheck_half_power_damping", "xcheck_hilbert_damping"):
        np.testing.assert_allclose(res[name].values, truth, rtol=0.05, err_msg=name)
    assert res["xcheck_note"].values.tolist() == ["ok"] * 4
    assert "bias" in res["xcheck_hilbert_damping"].attrs


def test_stabilisation_chart_marks_the_true_modes_stable():
    # demo truth (demo_truth.json, FE model): the poles the chart calls stable (1 % in f_n,
    # 5 % in zeta, energy above the candidate limit) gather at the four true modes; noise
    # poles of the over-specified orders are mostly not marked
    from modalnb import ModeFit
    from modalnb.demo import load_demo, load_demo_truth

    st = ModeFit().fit(load_demo()).stabilisation_
    f_true = np.array([m["frequency_hz"] for m in load_demo_truth()["modes"]])
    f = st["frequency_hz"].values[st["stable"].values]
    near = np.min(np.abs(f[:, None] - f_true[None, :]) / f_true[None, :], axis=1) < 0.02
    assert near.mean() >= 0.7, near.mean()
    for ft in f_true:
        assert np.sum(np.abs(f - ft) < 0.02 * ft) >= 3, ft
