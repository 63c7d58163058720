"""Damping regimes near critical, and a record mixing regimes, against the characteristic roots.

Truth: the roots of the characteristic polynomial ``m s^2 + c s + k`` (SDOF) or the
eigenvalues of the state matrix (2 DOF, ``scipy.linalg.eig``). Complex roots: underdamped;
a repeated real root (``c^2 = 4 m k``): critically damped; two distinct real roots:
overdamped (any vibration text, e.g. Thomson & Dahleh 1998, *Theory of Vibration with
Applications*, ch. 2; from memory). A real pair ``r1, r2`` has ``wn = sqrt(r1 r2)`` and
``zeta = -(r1 + r2) / (2 wn)`` (Vieta's formulas on ``s^2 + 2 zeta wn s + wn^2``).
Signals: free decays after a unit impulse, integrated by ``scipy.integrate.solve_ivp``.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference_models import impulse_response, state_matrix
from scipy.linalg import eig

import modalnb

FS = 2048.0
M1, K1 = 1.0, (2 * np.pi * 10.0) ** 2  # 10 Hz


def _regime_from_roots(m, c, k):
    disc = c * c - 4 * m * k
    if abs(disc) <= 1e-12 * c * c:
        return "critical"
    return "underdamped" if disc < 0 else "overdamped"


def _sdof_record(zeta, snr_db, seed):
    c = 2 * zeta * np.sqrt(K1 * M1)
    t = np.arange(2048) / FS
    x = impulse_response([[M1]], [[c]], [[K1]], t, quantity="displacement")[0]
    noise = np.sqrt(np.mean(x**2)) * 10 ** (-snr_db / 20)
    y = x + noise * np.random.default_rng(seed).standard_normal(t.size)
    return modalnb.records_from_arrays(y, FS), c


@pytest.mark.parametrize("zeta", [0.97, 1.00, 1.03])
def test_regime_near_critical_matches_the_characteristic_roots(zeta):
    rec, c = _sdof_record(zeta, 50.0, seed=5)
    roots = np.roots([M1, c, K1])
    expect = _regime_from_roots(M1, c, K1)
    # the roots themselves: complex pair below critical, a real pair above
    assert (np.abs(roots.imag).max() > 0) == (zeta < 1.0)
    res = modalnb.fit_modes(rec, accept=[True])
    assert res.sizes["mode"] == 1
    assert res["regime"].values[0] == expect
    # wn^2 = product of the roots, 2 zeta wn = -sum of the roots (Vieta)
    wn = np.sqrt(np.prod(roots).real)
    z_true = -np.sum(roots).real / (2 * wn)
    np.testing.assert_allclose(res["frequency_hz"].values[0], wn / (2 * np.pi), rtol=1e-3)
    np.testing.assert_allclose(res["damping_ratio"].values[0], z_true, atol=2e-3)


@pytest.mark.xfail(strict=True, raises=(AssertionError, modalnb.EstimationError), reason=(
    "engine defect: a one-DOF overdamped decay (zeta 1.03, 60 dB SNR, this noise draw) is "
    "fitted as two pole pairs (6.19 Hz zeta 1.03 and 6.87 Hz zeta 1.20, frequency std 71 and "
    "99 Hz) instead of one overdamped mode at 10 Hz (characteristic roots -49.2 and -80.2 "
    "1/s); the model-order choice splits the real pole pair. Both are now set aside as "
    "frequency-undetermined residual terms, so the fit raises 'no ... determined mode' "
    "instead of returning two false modes"))
def test_overdamped_near_critical_is_one_mode_at_high_snr():
    rec, c = _sdof_record(1.03, 60.0, seed=1)
    res = modalnb.fit_modes(rec, accept=[True])
    assert _regime_from_roots(M1, c, K1) == "overdamped"
    assert res.sizes["mode"] == 1  # one DOF: one pole pair (characteristic roots)
    assert res["regime"].values[0] == "overdamped"


def test_record_mixing_a_light_mode_and_an_overdamped_one():
    # 2 DOF built from modal data: mass-normalised shapes phi, M = I, K = phi W^2 phi^T,
    # C = phi diag(2 zeta w) phi^T (classical damping); mode 1 60 Hz at 1 %, mode 2 25 Hz
    # at zeta 1.5 (overdamped)
    phi = np.array([[1.0, 1.0], [1.0, -1.0]]) / np.sqrt(2)
    w = 2 * np.pi * np.array([60.0, 25.0])
    z = np.array([0.01, 1.5])
    m, k, c = np.eye(2), phi @ np.diag(w**2) @ phi.T, phi @ np.diag(2 * z * w) @ phi.T
    lam = eig(state_matrix(m, c, k))[0]
    osc = lam[lam.imag > 0]
    real = np.sort(lam[np.abs(lam.imag) < 1e-9].real)
    assert osc.size == 1 and real.size == 2  # truth: one complex pair and one real pair
    fn_osc, z_osc = abs(osc[0]) / (2 * np.pi), -osc[0].real / abs(osc[0])
    wn_over = np.sqrt(real[0] * real[1])
    fn_over, z_over = wn_over / (2 * np.pi), -(real[0] + real[1]) / (2 * wn_over)

    t = (np.arange(4096) - 64) / FS
    x = impulse_response(m, c, k, t, drive=0, quantity="displacement")
    rms = np.sqrt(np.mean(x[:, t >= 0] ** 2, axis=1, keepdims=True))
    y = x + rms * 10 ** (-50 / 20) * np.random.default_rng(0).standard_normal(x.shape)
    res = modalnb.fit_modes(modalnb.records_from_arrays(y, FS, t0=t[0]), accept=[True])
    assert res.sizes["mode"] == 2
    np.testing.assert_allclose(res["frequency_hz"].values, [fn_over, fn_osc], rtol=1e-4)
    np.testing.assert_allclose(res["damping_ratio"].values, [z_over, z_osc], rtol=1e-3)
    assert res["regime"].values.tolist() == ["overdamped", "underdamped"]
    # the overdamped mode does not oscillate: no damped frequency, and the status says so
    assert np.isnan(res["damped_frequency_hz"].values[0])
    assert "no oscillation" in res["status"].values[0]
    np.testing.assert_allclose(res["damped_frequency_hz"].values[1], osc[0].imag / (2 * np.pi),
                               rtol=1e-4)
