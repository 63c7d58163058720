"""Statistical checks: reported uncertainties against Monte Carlo, and a cantilever model."""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp
from scipy.linalg import eigh

from modalnb import fit_modes
from modalnb.records import records_from_arrays
from modalnb.synth import add_noise, free_decay


def test_reported_std_matches_scatter_over_noise_realisations():
    fs, fn, zeta = 1024.0, 60.0, 0.01
    t = np.arange(1024) / fs
    clean = free_decay(t, fn, zeta, 1.0, 0.4)
    rng = np.random.default_rng(2024)
    zf, zz = [], []
    for _ in range(100):
        y, _ = add_noise(clean, 25.0, rng, t)
        res = fit_modes(records_from_arrays(y, fs), accept=[True], scatter=False)
        k = int(np.argmin(np.abs(res["frequency_hz"].values - fn)))
        zf.append((res["frequency_hz"].values[k] - fn) / res["frequency_hz_std"].values[k])
        zz.append((res["damping_ratio"].values[k] - zeta) / res["damping_ratio_std"].values[k])
    # a calibrated 1-sigma: z-scores (error / reported std) have unit spread; the sampling
    # error of a std from 100 draws is ~ 1/sqrt(200) = 7 % (common practice bounds)
    assert 0.8 <= np.std(zf) <= 1.25
    assert 0.8 <= np.std(zz) <= 1.25
    assert abs(np.mean(zf)) < 0.35 and abs(np.mean(zz)) < 0.35


def _cantilever(n_el=24, length=0.5, b=0.025, h=0.005, e=200e9, rho=7850.0):
    """Euler-Bernoulli cantilever, cubic Hermite elements (consistent mass). Our own model."""
    le = length / n_el
    area, inertia = b * h, b * h**3 / 12
    ke = e * inertia / le**3 * np.array([
        [12, 6 * le, -12, 6 * le], [6 * le, 4 * le**2, -6 * le, 2 * le**2],
        [-12, -6 * le, 12, -6 * le], [6 * le, 2 * le**2, -6 * le, 4 * le**2]])
    me = rho * area * le / 420 * np.array([
        [156, 22 * le, 54, -13 * le], [22 * le, 4 * le**2, 13 * le, -3 * le**2],
        [54, 13 * le, 156, -22 * le], [-13 * le, -3 * le**2, -22 * le, 4 * le**2]])
    ndof = 2 * (n_el + 1)
    k = np.zeros((ndof, ndof))
    m = np.zeros((ndof, ndof))
    for i in range(n_el):
        s = slice(2 * i, 2 * i + 4)
        k[s, s] += ke
        m[s, s] += me
    return k[2:, 2:], m[2:, 2:]  # clamp the root (deflection and slope)


def test_cantilever_recovers_euler_bernoulli_ratios():
    k, m = _cantilever()
    w2, phi = eigh(k, m)
    fn_model = np.sqrt(w2[:3]) / (2 * np.pi)
    # handbook: cantilever ratios 1 : 6.267 : 17.548 (Blevins 1979; beta L 1.875, 4.694,
    # 7.855), and the worked example 16.31 Hz for this steel strip (METHODS §7)
    np.testing.assert_allclose(fn_model[1:] / fn_model[0], [6.267, 17.548], rtol=2e-3)
    np.testing.assert_allclose(fn_model[0], 16.31, rtol=3e-3)
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
    y, _ = add_noise(disp, 40.0, np.random.default_rng(7), t)
    res = fit_modes(records_from_arrays(y, fs), accept=[True])
    f = res["frequency_hz"].values
    assert f.size == 3
    # the model's own eigenvalues (scipy.linalg.eigh), within 4 reported standard deviations
    assert np.all(np.abs(f - fn_model) < 4 * res["frequency_hz_std"].values)
    np.testing.assert_allclose(f, fn_model, rtol=5e-4)
    np.testing.assert_allclose(f[1:] / f[0], [6.267, 17.548], rtol=3e-3)  # Blevins 1979
    np.testing.assert_allclose(res["damping_ratio"].values, zeta, rtol=0.03)
