"""The closed-form decay generator (modalnb.testing.synth) against an independent integrator.

Reference: ``scipy.integrate.solve_ivp`` (DOP853) of ``m x'' + c x' + k x = 0`` from the
generator's initial conditions, with ``c = 2 zeta sqrt(k m)`` and ``k = m w_n^2``. The
tolerance is set from the integrator's own ``rtol``/``atol``: the global error of an
adaptive explicit Runge-Kutta method over a few hundred steps stays a modest multiple of
its local tolerance (Hairer, Nørsett & Wanner 1993, *Solving Ordinary Differential
Equations I*, sect. II.4; from memory), here a factor 100 on ``rtol * max|x| + atol``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from modalnb.testing.synth import add_noise, free_decay, snr_db

RTOL, ATOL = 1e-10, 1e-12
M = 2.5  # any mass: the free decay depends on zeta and w_n only


def _ode(t, f_hz, zeta, x0, v0):
    wn = 2 * np.pi * f_hz
    k = M * wn**2
    c = 2 * zeta * np.sqrt(k * M)

    def rhs(_t, y):
        return [y[1], -(c * y[1] + k * y[0]) / M]

    sol = solve_ivp(rhs, (t[0], t[-1]), [x0, v0], method="DOP853", t_eval=t, rtol=RTOL, atol=ATOL)
    assert sol.success
    return sol.y[0]


def _tol(ref):
    return 100 * (RTOL * np.max(np.abs(ref)) + ATOL)


@pytest.mark.parametrize(("f_hz", "zeta", "amp", "phase"), [
    (12.0, 0.0, 1.0, 0.0),
    (12.0, 0.02, 1.5, 0.7),
    (40.0, 0.3, 0.8, -2.0),
    (5.0, 0.97, 1.0, 0.4),
])
def test_underdamped_decay_matches_solve_ivp(f_hz, zeta, amp, phase):
    # x = A e^{-zeta w_n t} cos(w_d t + phi): x(0) = A cos phi,
    # x'(0) = -A (zeta w_n cos phi + w_d sin phi)
    t = np.linspace(0.0, 1.0, 2001)
    wn = 2 * np.pi * f_hz
    wd = wn * np.sqrt(1 - zeta**2)
    x0 = amp * np.cos(phase)
    v0 = -amp * (zeta * wn * np.cos(phase) + wd * np.sin(phase))
    ref = _ode(t, f_hz, zeta, x0, v0)
    np.testing.assert_allclose(free_decay(t, f_hz, zeta, amp, phase), ref, rtol=0, atol=_tol(ref))


@pytest.mark.parametrize("zeta", [1.0, 1.03, 2.5])
def test_critically_and_overdamped_decay_released_from_rest(zeta):
    # documented: for zeta >= 1 the response is released from rest at x = A (phase ignored)
    t = np.linspace(0.0, 0.5, 1001)
    ref = _ode(t, 8.0, zeta, 1.7, 0.0)
    np.testing.assert_allclose(free_decay(t, 8.0, zeta, 1.7, 0.9), ref, rtol=0, atol=_tol(ref))


def test_several_modes_add_and_nothing_before_zero():
    # linear superposition: the sum of the single-mode ODE solutions
    t = np.linspace(-0.1, 0.8, 1801)
    f, z, a, p = [7.0, 23.0, 51.0], [0.01, 1.0, 0.05], [1.0, 0.4, 0.2], [0.3, 0.0, -1.1]
    x = free_decay(t, f, z, a, p)
    assert np.all(x[t < 0] == 0.0)
    pos = t >= 0
    ref = np.zeros(pos.sum())
    for fk, zk, ak, pk in zip(f, z, a, p, strict=True):
        wn = 2 * np.pi * fk
        if zk < 1:
            wd = wn * np.sqrt(1 - zk**2)
            x0, v0 = ak * np.cos(pk), -ak * (zk * wn * np.cos(pk) + wd * np.sin(pk))
        else:
            x0, v0 = ak, 0.0
        ref += _ode(t[pos], fk, zk, x0, v0)
    np.testing.assert_allclose(x[pos], ref, rtol=0, atol=3 * _tol(ref))


def test_snr_definition_and_added_noise_level():
    # SNR (dB) = 20 log10(RMS(clean over t >= 0) / noise RMS), written out here
    rng = np.random.default_rng(7)
    t = np.arange(-100, 20000) / 1000.0
    clean = free_decay(t, 30.0, 0.01, 2.0, 0.2)
    rms = np.sqrt(np.mean(clean[t >= 0] ** 2))
    assert snr_db(clean, 0.05, t) == pytest.approx(20 * np.log10(rms / 0.05), rel=1e-12)
    noisy, sigma = add_noise(clean, 30.0, rng, t)
    assert sigma == pytest.approx(rms * 10 ** (-30 / 20), rel=1e-12)
    # the sample std of 20 100 Gaussian values is within 4 x 1/sqrt(2 n) = 2 % of sigma
    assert np.std(noisy - clean) == pytest.approx(sigma, rel=0.02)
