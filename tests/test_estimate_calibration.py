"""Reported uncertainties against Monte Carlo scatter, and a cantilever model.

Calibration: over n independent noise draws of the same clean record, the RMS error of an
estimate (against the physics truth) should equal the mean reported standard deviation.
The sample variance of n Gaussian errors has a relative standard error ``sqrt(2/n)``
(chi-square with n degrees of freedom), so the RMSE / mean-std ratio must lie in
``sqrt(1 -+ 3 sqrt(2/n))`` (tests/reference_models.py, ``calibration_band``). Checked in
four scenarios: one mode on one channel, three modes on one channel, three modes on three
channels, and three modes through an exponential window. Clean records come from the
closed form or from ``scipy.integrate.solve_ivp``; truth from the closed form's parameters
or ``scipy.linalg.eig`` of the state matrix.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference_models import (
    calibration_band,
    cantilever_fe,
    eig_truth,
    free_decay,
    impulse_response,
)
from scipy.integrate import solve_ivp
from scipy.linalg import eigh

import modalnb

M3 = np.diag([1.0, 1.5, 0.8])
K3 = 1e5 * np.array([[2.0, -1.0, 0.0], [-1.0, 2.0, -1.0], [0.0, -1.0, 1.2]])
C3 = 2e-5 * K3 + 0.5 * M3
C3[0, 0] += 2.0  # local damper: complex modes


def _noisy(clean, t, snr_db, rng):
    """Clean record plus white noise snr_db below its RMS over t >= 0 (per channel)."""
    clean = np.atleast_2d(clean)
    rms = np.sqrt(np.mean(clean[:, t >= 0] ** 2, axis=1, keepdims=True))
    return clean + rms * 10 ** (-snr_db / 20) * rng.standard_normal(clean.shape)


def _monte_carlo(make_records, fn, zeta, n, **fit_kw):
    """(RMSE / mean std) of frequency and damping per mode over n noise draws."""
    ef, ez, sf, sz = [], [], [], []
    for i in range(n):
        res = modalnb.fit_modes(make_records(np.random.default_rng(1000 + i)), accept=[True],
                                scatter=False, **fit_kw)
        f = res["frequency_hz"].values
        k = [int(np.argmin(np.abs(f - x))) for x in fn]  # the fitted mode nearest each true one
        ef.append(f[k] - fn)
        ez.append(res["damping_ratio"].values[k] - zeta)
        sf.append(res["frequency_hz_std"].values[k])
        sz.append(res["damping_ratio_std"].values[k])
    ef, ez, sf, sz = map(np.array, (ef, ez, sf, sz))
    rf = np.sqrt(np.mean(ef**2, axis=0)) / np.mean(sf, axis=0)
    rz = np.sqrt(np.mean(ez**2, axis=0)) / np.mean(sz, axis=0)
    return rf, rz, ef, ez


def _check(rf, rz, n):
    lo, hi = calibration_band(n)
    assert np.all((lo <= rf) & (rf <= hi)), (rf, lo, hi)
    assert np.all((lo <= rz) & (rz <= hi)), (rz, lo, hi)


def test_std_calibrated_one_mode_one_channel():
    fs, fn, zeta = 1024.0, 60.0, 0.01
    t = np.arange(1024) / fs
    clean = free_decay(t, fn, zeta, 1.0, 0.4)  # closed form, written out in reference_models
    n = 100

    def make(rng):
        return modalnb.records_from_arrays(_noisy(clean, t, 25.0, rng)[0], fs)

    rf, rz, ef, ez = _monte_carlo(make, [fn], [zeta], n)
    _check(rf, rz, n)
    # no bias beyond 3 standard errors of the mean
    assert abs(ef.mean()) < 3 * ef.std() / np.sqrt(n) and abs(ez.mean()) < 3 * ez.std() / np.sqrt(n)
    # and absolute accuracy from the truth at 25 dB: 0.1 % in f, 10 % in zeta
    assert np.sqrt(np.mean(ef**2)) / fn < 1e-3 and np.sqrt(np.mean(ez**2)) / zeta < 0.1


@pytest.mark.slow
def test_std_calibrated_three_modes_one_channel():
    fs = 2048.0
    t = np.arange(2048) / fs
    fn, zeta, _ = eig_truth(M3, C3, K3)
    clean = impulse_response(M3, C3, K3, t)[2]  # acceleration of DOF 3 (solve_ivp)
    n = 60

    def make(rng):
        return modalnb.records_from_arrays(_noisy(clean, t, 30.0, rng)[0], fs)

    rf, rz, ef, ez = _monte_carlo(make, fn, zeta, n, n_modes=3)
    _check(rf, rz, n)
    assert np.all(np.sqrt(np.mean(ef**2, axis=0)) / fn < 1e-3)  # eig truth, 30 dB


@pytest.mark.slow
def test_std_calibrated_three_modes_three_channels():
    fs = 2048.0
    t = np.arange(2048) / fs
    fn, zeta, _ = eig_truth(M3, C3, K3)
    clean = impulse_response(M3, C3, K3, t)  # all three DOFs (solve_ivp)
    n = 60

    def make(rng):
        return modalnb.records_from_arrays(_noisy(clean, t, 30.0, rng), fs)

    rf, rz, ef, ez = _monte_carlo(make, fn, zeta, n, n_modes=3)
    _check(rf, rz, n)
    assert np.all(np.sqrt(np.mean(ef**2, axis=0)) / fn < 1e-3)  # eig truth, 30 dB


@pytest.mark.slow
def test_std_calibrated_through_an_exponential_window():
    # the recorder multiplies response + noise by exp(-t/tau) from the trigger; the records
    # say tau, the fit window starts after the trigger (exact pole shift -1/tau, see
    # tests/test_truth_exponential_window.py for the source)
    fs, tau, pre = 2048.0, 0.25, 128
    t = (np.arange(2048 + pre) - pre) / fs
    fn, zeta, _ = eig_truth(M3, C3, K3)
    clean = impulse_response(M3, C3, K3, t)
    w = np.where(t >= 0, np.exp(-np.clip(t, 0.0, None) / tau), 1.0)
    n = 60

    def make(rng):
        return modalnb.records_from_arrays(_noisy(clean, t, 30.0, rng) * w, fs, t0=t[0],
                                           attrs={"exponential_window_tau_s": tau})

    rf, rz, ef, ez = _monte_carlo(make, fn, zeta, n, n_modes=3, window=(0.01, float(t[-1])))
    _check(rf, rz, n)
    assert np.all(np.sqrt(np.mean(ez**2, axis=0)) / zeta < 0.1)  # eig truth, 30 dB


def test_cantilever_recovers_euler_bernoulli_ratios():
    # steel strip 500 x 25 x 5 mm, 24 Hermite cubic elements (tests/reference_models.py)
    length, b, h, e, rho = 0.5, 0.025, 0.005, 200e9, 7850.0
    k, m = cantilever_fe(24, length, b, h, e, rho)
    w2, phi = eigh(k, m)
    fn_model = np.sqrt(w2[:3]) / (2 * np.pi)
    # handbook: f_n = (beta_n L)^2 / (2 pi L^2) sqrt(E I / (rho A)) with beta_n L = 1.87510,
    # 4.69409, 7.85476 (Blevins 1979, Formulas for Natural Frequency and Mode Shape,
    # table 8-1; from memory): ratios (4.69409/1.87510)^2 = 6.267, (7.85476/1.87510)^2 = 17.548
    beta = np.array([1.87510407, 4.69409113, 7.85475744])
    f_handbook = beta**2 / (2 * np.pi * length**2) * np.sqrt(e * (b * h**3 / 12) / (rho * b * h))
    np.testing.assert_allclose(f_handbook[0], 16.31, atol=0.01)  # the formula, evaluated by hand
    np.testing.assert_allclose(fn_model, f_handbook, rtol=2e-4)  # FE converges from above
    # simulate a tap near the tip in modal coordinates (3 modes, 1 % damping), measured at
    # three points along the beam, with solve_ivp; then recover by the estimator
    fs, zeta = 2048.0, 0.01
    t = np.arange(4 * 2048) / fs
    tip = phi[-2, :3]  # deflection of the free end, mass-normalised shapes
    picks = [k.shape[0] - 2, k.shape[0] - 12, k.shape[0] - 24]  # deflection dofs
    wn = 2 * np.pi * fn_model
    q0 = tip * 1.0  # modal velocities after a unit impulse at the tip

    def rhs(_t, z):
        q, v = z[:3], z[3:]
        return np.concatenate([v, -2 * zeta * wn * v - wn**2 * q])

    sol = solve_ivp(rhs, (0, t[-1]), np.concatenate([np.zeros(3), q0]), t_eval=t,
                    rtol=1e-10, atol=1e-14, method="DOP853")
    disp = phi[picks][:, :3] @ sol.y[:3]
    y = _noisy(disp, t, 40.0, np.random.default_rng(7))
    res = modalnb.fit_modes(modalnb.records_from_arrays(y, fs), accept=[True])
    f = res["frequency_hz"].values
    assert f.size == 3
    # the model's own eigenvalues (scipy.linalg.eigh): absolute tolerance at 40 dB, and
    # within 4 reported standard deviations
    np.testing.assert_allclose(f, fn_model, rtol=5e-4)
    assert np.all(np.abs(f - fn_model) < 4 * res["frequency_hz_std"].values)
    np.testing.assert_allclose(f[1:] / f[0], (beta[1:] / beta[0]) ** 2, rtol=3e-3)  # Blevins 1979
    np.testing.assert_allclose(res["damping_ratio"].values, zeta, rtol=0.03)
