"""The tests' own reference signals (tests/reference_models.py) against solve_ivp and closed forms.

The estimation tests take truths from these helpers, so the helpers are checked here
against a second, independent route: the closed-form decay against ``solve_ivp`` of
``x'' + 2 zeta wn x' + wn^2 x = 0`` from the same initial state, and the solve_ivp impulse
response against the textbook unit-impulse response ``exp(-sigma t) sin(wd t) / (m wd)``
(Thomson & Dahleh 1998, *Theory of Vibration with Applications*, ch. 4; from memory).
"""

from __future__ import annotations

import numpy as np
from reference_models import calibration_band, eig_truth, free_decay, impulse_response
from scipy.integrate import solve_ivp


def test_closed_form_decay_matches_solve_ivp():
    fn, zeta, amp, phase = 37.0, 0.03, 1.7, 0.6
    wn = 2 * np.pi * fn
    sigma, wd = zeta * wn, wn * np.sqrt(1 - zeta**2)
    t = np.arange(2048) / 2048.0
    # initial state of A exp(-sigma t) cos(wd t + phi): x0 = A cos phi,
    # v0 = -A (sigma cos phi + wd sin phi)
    z0 = [amp * np.cos(phase), -amp * (sigma * np.cos(phase) + wd * np.sin(phase))]
    sol = solve_ivp(lambda _t, z: [z[1], -2 * zeta * wn * z[1] - wn**2 * z[0]], (0, t[-1]), z0,
                    t_eval=t, rtol=1e-11, atol=1e-13, method="DOP853")
    np.testing.assert_allclose(free_decay(t, fn, zeta, amp, phase), sol.y[0], atol=1e-8 * amp)
    assert np.all(free_decay(-t[1:], fn, zeta, amp, phase) == 0.0)  # nothing before t = 0


def test_impulse_response_matches_the_textbook_formula_and_eig():
    m, fn, zeta = 2.0, 12.0, 0.05
    wn = 2 * np.pi * fn
    k, c = m * wn**2, 2 * zeta * m * wn
    t = (np.arange(1024) - 16) / 1024.0
    x = impulse_response([[m]], [[c]], [[k]], t, quantity="displacement")[0]
    sigma, wd = zeta * wn, wn * np.sqrt(1 - zeta**2)
    tp = np.clip(t, 0, None)
    np.testing.assert_allclose(x, np.exp(-sigma * tp) * np.sin(wd * tp) / (m * wd), atol=1e-12)
    # acceleration from the equation of motion equals the second derivative of the formula
    a = impulse_response([[m]], [[c]], [[k]], t)[0]
    x_dd = np.exp(-sigma * tp) * ((sigma**2 - wd**2) * np.sin(wd * tp) - 2 * sigma * wd * np.cos(wd * tp)) / (m * wd)
    np.testing.assert_allclose(a[t >= 0], x_dd[t >= 0], atol=1e-8 * np.abs(x_dd).max())
    f, z, _ = eig_truth([[m]], [[c]], [[k]])
    np.testing.assert_allclose([f[0], z[0]], [fn, zeta], rtol=1e-12)


def test_calibration_band_matches_chi_square_quantiles():
    # the band 1 -+ 3 sqrt(2/n) on a variance ratio, against the chi-square distribution of
    # n s^2 / sigma^2 (scipy.stats): the band's tails stay small (a normal approximation)
    from scipy.stats import chi2

    for n in (60, 100):
        lo, hi = calibration_band(n)
        p_out = chi2.cdf(n * lo**2, n) + chi2.sf(n * hi**2, n)
        assert 1e-4 < p_out < 1e-2, (n, p_out)
