"""Synthetic ring-downs with known truth, for tests, benchmarks and examples.

These are the closed-form free decays of a viscously damped single-degree-of-freedom
oscillator ``m x'' + c x' + k x = 0`` (any vibration text, e.g. Rao 2011, *Mechanical
Vibrations*, 5th ed., sect. 2.6; from memory), summed over modes. They are an outside
reference for the estimator only insofar as the formulas are: the test suite checks them
against ``scipy.integrate.solve_ivp`` (tests/test_synth.py), and tests of the main job
also use such independent simulations.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

__all__ = ["free_decay", "add_noise", "snr_db"]


def free_decay(
    time: np.ndarray,
    frequency_hz: Sequence[float] | float,
    damping_ratio: Sequence[float] | float,
    amplitude: Sequence[float] | float = 1.0,
    phase_rad: Sequence[float] | float = 0.0,
) -> np.ndarray:
    """Sum of damped free vibrations, zero before ``time = 0``.

    For ζ < 1 each term is ``A exp(-ζ ωn t) cos(ωd t + φ)`` with ``ωd = ωn sqrt(1 - ζ²)``.
    For ζ >= 1 (no oscillation) each term is the response released from rest at
    displacement ``A`` (``v0 = 0``; ``phase_rad`` is ignored): critically damped
    ``A (1 + ωn t) exp(-ωn t)``, overdamped ``C1 exp(s1 t) + C2 exp(s2 t)`` with
    ``s1,2 = -ωn (ζ ∓ sqrt(ζ² - 1))``, ``C1 = -s2 A / (s1 - s2)``, ``C2 = s1 A / (s1 - s2)``
    (Rao 2011, sect. 2.6; from memory). Each term solves ``x'' + 2 ζ ωn x' + ωn² x = 0``
    with ``ωn = 2 pi frequency_hz``.

    Parameters
    ----------
    time : ndarray
        Times in s.
    frequency_hz, damping_ratio, amplitude, phase_rad : float or sequence
        One value per mode (broadcast together).

    Returns
    -------
    ndarray
        Same shape as `time`.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(4) / 40.0
    >>> np.round(free_decay(t, 5.0, 0.0), 3)
    array([ 1.   ,  0.707,  0.   , -0.707])
    """
    t = np.asarray(time, dtype=float)
    f, z, a, p = np.broadcast_arrays(
        np.atleast_1d(np.asarray(frequency_hz, float)),
        np.atleast_1d(np.asarray(damping_ratio, float)),
        np.atleast_1d(np.asarray(amplitude, float)),
        np.atleast_1d(np.asarray(phase_rad, float)),
    )
    tp = np.where(t >= 0, t, 0.0)
    out = np.zeros_like(t)
    for fk, zk, ak, pk in zip(f, z, a, p, strict=True):
        wn = 2 * np.pi * fk
        if zk < 1:
            wd = wn * np.sqrt(1 - zk * zk)
            term = ak * np.exp(-zk * wn * tp) * np.cos(wd * tp + pk)
        elif zk == 1:
            term = ak * (1 + wn * tp) * np.exp(-wn * tp)
        else:
            r = np.sqrt(zk * zk - 1)
            s1, s2 = -wn * (zk - r), -wn * (zk + r)
            c1 = -s2 * ak / (s1 - s2)
            c2 = s1 * ak / (s1 - s2)
            term = c1 * np.exp(s1 * tp) + c2 * np.exp(s2 * tp)
        out += np.where(t >= 0, term, 0.0)
    return out


def snr_db(clean: np.ndarray, noise_rms: float, time: np.ndarray | None = None) -> float:
    """SNR in dB: RMS of `clean` over ``time >= 0`` divided by `noise_rms`.

    Examples
    --------
    >>> round(snr_db(np.ones(10), 0.1), 6)
    20.0
    """
    c = np.asarray(clean, float)
    if time is not None:
        c = c[..., np.asarray(time) >= 0]
    return float(20 * np.log10(np.sqrt(np.mean(c**2)) / noise_rms))


def add_noise(
    clean: np.ndarray,
    snr: float,
    rng: np.random.Generator,
    time: np.ndarray | None = None,
) -> tuple[np.ndarray, float]:
    """Add white Gaussian noise at SNR `snr` dB (definition of :func:`snr_db`).

    The SNR is computed over the last axis, per signal.

    Returns
    -------
    noisy : ndarray
    noise_rms : float or ndarray
        The noise standard deviation used (per signal).

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x, s = add_noise(np.ones((2, 1000)), 20.0, rng)
    >>> np.allclose(s, 0.1)
    True
    """
    c = np.asarray(clean, float)
    ref = c if time is None else c[..., np.asarray(time) >= 0]
    rms = np.sqrt(np.mean(ref**2, axis=-1, keepdims=True))
    sigma = rms / 10 ** (snr / 20)
    noisy = c + sigma * rng.standard_normal(c.shape)
    return noisy, np.squeeze(sigma, -1) if c.ndim > 1 else float(sigma.item())
