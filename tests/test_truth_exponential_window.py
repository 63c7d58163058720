"""Exponential-window correction with several modes, against a solve_ivp simulation.

Physics: a 3-DOF chain ``M x'' + C x' + K x = f`` with a local damper (non-proportional
damping), struck at DOF 1 by a unit impulse at the trigger (t = 0): the state just after
the impulse is ``x = 0``, ``x' = M^-1 e_1``; the free motion is integrated by
``scipy.integrate.solve_ivp`` (tests/reference_models.py). Truth: poles from
``scipy.linalg.eig`` of the state matrix.

Acquisition: the recorder applies the exponential (force/response) window ``w(t) =
exp(-t/tau)`` from the trigger to response plus sensor noise; the pre-trigger samples are
not windowed. Since ``w(t) e^{lambda t} = e^{(lambda - 1/tau) t}``, every pole of the
windowed record is shifted by exactly ``-1/tau`` (damped frequency unchanged): the
classical correction ``sigma_true = sigma_measured - 1/tau`` (Fladung & Rost 1997,
"Application and correction of the exponential window for frequency response
functions", Mechanical Systems and Signal Processing 11(1):23-36; from memory). The
records carry ``exponential_window_tau_s`` and the fit window starts after the trigger.
"""

from __future__ import annotations

import numpy as np
from reference_models import eig_truth, impulse_response

import modalnb

FS = 2048.0
PRE = 128
TAU = 0.25
M3 = np.diag([1.0, 1.5, 0.8])
K3 = 1e5 * np.array([[2.0, -1.0, 0.0], [-1.0, 2.0, -1.0], [0.0, -1.0, 1.2]])
C3 = 2e-5 * K3 + 0.5 * M3
C3[0, 0] += 2.0  # a local damper at DOF 1: complex modes


def _windowed_records(snr_db, seed, tau=TAU, with_attr=True):
    t = (np.arange(4096) - PRE) / FS
    x = impulse_response(M3, C3, K3, t)  # acceleration, 3 channels
    rms = np.sqrt(np.mean(x[:, t >= 0] ** 2, axis=1, keepdims=True))
    noise = rms * 10 ** (-snr_db / 20) * np.random.default_rng(seed).standard_normal(x.shape)
    w = np.where(t >= 0, np.exp(-np.clip(t, 0.0, None) / tau), 1.0)
    attrs = {"exponential_window_tau_s": tau} if with_attr else None
    return modalnb.records_from_arrays((x + noise) * w, FS, t0=t[0], attrs=attrs,
                                       channels=["dof1", "dof2", "dof3"]), t


def test_three_modes_recovered_through_the_window():
    fn, zeta, _ = eig_truth(M3, C3, K3)
    rec, t = _windowed_records(40.0, seed=1)
    res = modalnb.fit_modes(rec, window=(0.02, float(t[-1])), accept=[True])
    assert res.attrs["window"][0] >= 0.02  # the fit window starts after the trigger
    assert res.sizes["mode"] == 3
    f, z = res["frequency_hz"].values, res["damping_ratio"].values
    # truth: scipy.linalg.eig of the state matrix; absolute tolerances at 40 dB SNR
    np.testing.assert_allclose(f, fn, rtol=1e-4)
    np.testing.assert_allclose(z, zeta, rtol=1e-2)
    # and within 4 reported standard deviations
    assert np.all(np.abs(f - fn) < 4 * res["frequency_hz_std"].values)
    assert np.all(np.abs(z - zeta) < 4 * res["damping_ratio_std"].values)
    # the correction is not small here: the window's 1/(tau wn) exceeds the structure's zeta
    assert np.all(1 / (TAU * 2 * np.pi * fn) > zeta)


def test_without_the_tau_attribute_the_poles_are_shifted_by_one_over_tau():
    fn, zeta, _ = eig_truth(M3, C3, K3)
    rec, t = _windowed_records(60.0, seed=2, with_attr=False)
    # the windowed noise is not stationary (it decays with w): ask for the three modes
    # (and a low model order, or the search takes minutes)
    res = modalnb.fit_modes(rec, window=(0.02, float(t[-1])), n_modes=3, max_order=12,
                            accept=[True])
    # the windowed poles: sigma + 1/tau with the same damped frequency wd (exact shift)
    wn = 2 * np.pi * fn
    sigma, wd = zeta * wn + 1 / TAU, wn * np.sqrt(1 - zeta**2)
    zeta_windowed = sigma / np.hypot(sigma, wd)
    assert res.sizes["mode"] == 3
    np.testing.assert_allclose(res["frequency_hz"].values, np.hypot(sigma, wd) / (2 * np.pi), rtol=1e-5)
    np.testing.assert_allclose(res["damping_ratio"].values, zeta_windowed, rtol=2e-3)
    # the same record told its tau gives back the structure's damping
    rec_tau, _ = _windowed_records(60.0, seed=2)
    fixed = modalnb.fit_modes(rec_tau, window=(0.02, float(t[-1])), accept=[True])
    np.testing.assert_allclose(fixed["damping_ratio"].values, zeta, rtol=2e-3)
    assert np.all(zeta_windowed > 2 * zeta)
