"""The noise floor and the dead-channel rule: one definition for hit checks and estimation.

Both the hit checks (signal-to-noise, decay to the floor) and the engine (channel weights)
need to know which samples hold noise only and which channels carry no signal. The rules
live here, below both layers, so the two can never disagree.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "MIN_NOISE_SAMPLES",
    "PULSE_GUARD_SAMPLES",
    "dead_channels",
    "noise_end",
    "noise_sigma",
    "rms",
    "unit_scale",
]

#: Fewest noise-only samples for a noise floor. The standard deviation of a Gaussian
#: sample of size n has a relative standard error of about 1/sqrt(2 n) (a large-sample
#: result, e.g. Kendall & Stuart, The Advanced Theory of Statistics, vol. 1; from memory): 13 % at 32
#: samples, 18 % at 16. With fewer, the floor is estimated another way (record tail or
#: residual RMS).
MIN_NOISE_SAMPLES = 32

#: Samples left out before the hammer pulse starts: the pulse-start index is the last
#: sample below 2 % of the peak (``modalnb._pulse.pulse_bounds``), and the response of an
#: anti-alias filtered channel leads it by a sample or so (common practice).
PULSE_GUARD_SAMPLES = 2


def noise_end(time: np.ndarray, pulse_start: int | None = None) -> int:
    """Index (exclusive) where the noise-only part of a record ends.

    The samples before the trigger (``time < 0``), and, when a hammer pulse is known, also
    before ``pulse_start - PULSE_GUARD_SAMPLES``.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(-50, 200) / 1000.0
    >>> noise_end(t)
    50
    >>> noise_end(t, pulse_start=40)
    38
    """
    end = int(np.searchsorted(np.asarray(time, float), 0.0))
    if pulse_start is not None:
        end = min(end, max(int(pulse_start) - PULSE_GUARD_SAMPLES, 0))
    return end


def unit_scale(x: np.ndarray, axis: int | tuple[int, ...] | None = None) -> np.ndarray:
    """Powers of two that bring the largest magnitude of `x` (over `axis`) into [0.5, 1)
    (subnormal peaks to at least 2**-52, peaks near the largest double to below 4).

    Multiplying a channel by its factor before any arithmetic that can overflow or
    underflow (squares, sums of squares, matrix decompositions) keeps a channel recorded
    in any units (1e300 or 1e-300 of them) in the range of double precision; a power of
    two changes no significant bit, so dividing by it again gives back the original
    units exactly. All-zero or non-finite slices get 1. The result keeps the reduced axes
    (size 1), so ``x * unit_scale(x, axis)`` broadcasts.

    Examples
    --------
    >>> import numpy as np
    >>> float(unit_scale(np.array([3.0, -1.0]))[0])
    0.25
    >>> g = unit_scale(np.array([[1e-300], [0.0]]), axis=1)[:, 0]
    >>> bool(0.5 <= g[0] * 1e-300 < 1.0), float(g[1])
    (True, 1.0)
    """
    a = np.abs(np.asarray(x, float))
    with np.errstate(invalid="ignore"):
        peak = np.max(a, axis=axis, keepdims=True) if a.size else np.ones([1] * a.ndim)
    ok = np.isfinite(peak) & (peak > 0)
    _, exponent = np.frexp(np.where(ok, peak, 1.0))
    # 2**+-1022 keep the factor itself a normal number (subnormal or near-overflow peaks)
    return np.where(ok, np.ldexp(1.0, np.clip(-exponent, -1022, 1022)), 1.0)


def rms(x: np.ndarray, axis: int | tuple[int, ...] | None = None) -> np.ndarray:
    """Root mean square over `axis`, without overflow or underflow at any scale.

    Each slice is brought to unit peak (:func:`unit_scale`) before it is squared, so
    ``rms(1e300 * x) == 1e300 * rms(x)`` to rounding where ``np.sqrt(np.mean(x**2))``
    overflows (and 1e-300 underflows to zero).

    Examples
    --------
    >>> import numpy as np
    >>> float(rms(np.array([3e300, -3e300, 3e300, -3e300])))
    3e+300
    """
    a = np.asarray(x, float)
    g = unit_scale(a, axis)
    r = np.sqrt(np.mean((a * g) ** 2, axis=axis, keepdims=True)) / g
    return np.squeeze(r, axis=axis) if axis is not None else float(r.squeeze())


def noise_sigma(x: np.ndarray, axis: int | tuple[int, ...] = -1) -> np.ndarray:
    """Noise standard deviation of noise-only samples (mean removed along the last axis).

    Several hits (leading axes in `axis`) pool their samples, each about its own mean.
    Computed at unit scale (:func:`unit_scale`, :func:`rms`): any units work.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.random.default_rng(0).normal(3.0, 0.5, 20000)
    >>> round(float(noise_sigma(x)), 2)
    0.5
    """
    a = np.asarray(x, float)
    g = unit_scale(a, axis)  # scale-safe: no overflow in the mean or the squares
    a = a * g
    a = a - a.mean(axis=-1, keepdims=True)
    return rms(a, axis=axis) / np.squeeze(g, axis=axis)


def dead_channels(x: np.ndarray) -> np.ndarray:
    """Channels that carry no signal: every sample equal (a flat line), per channel.

    `x` is ``(..., channel, time)``; a channel is dead when it is constant over time in
    every leading index (all hits given).

    Examples
    --------
    >>> import numpy as np
    >>> dead_channels(np.array([[0.0, 0.0, 0.0], [0.0, 1.0, 0.0]])).tolist()
    [True, False]
    """
    a = np.asarray(x, float)
    flat = np.ptp(a, axis=-1) == 0
    return flat.reshape(-1, a.shape[-2]).all(axis=0) if a.ndim > 2 else flat
