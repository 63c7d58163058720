"""Locating the hammer pulse in a force record (shared by hit checks and estimation)."""

from __future__ import annotations

import numpy as np

__all__ = ["MAD_TO_SIGMA", "contact_end", "holds_pulse", "pulse_bounds"]

#: Scale that turns a median absolute deviation into a standard deviation for Gaussian
#: noise: 1 / Phi^-1(3/4) = 1.4826, Phi the standard normal distribution function, so that
#: ``MAD_TO_SIGMA * median(|x - median(x)|)`` is a consistent estimator of sigma
#: (Rousseeuw & Croux 1993, "Alternatives to the median absolute deviation", JASA 88(424),
#: 1273-1283). The median ignores the few samples of a hammer pulse that a standard
#: deviation would be dominated by.
MAD_TO_SIGMA = 1.4826


def holds_pulse(force: np.ndarray) -> bool:
    """Whether a force record of one hit can hold a hammer pulse at all.

    A record whose samples are all equal (an unplugged or stuck force sensor: all zeros,
    or a constant offset) holds none; then there is no pulse to bound, no force spectrum
    to normalise by, and no pulse start to end a noise window. Non-finite samples hold
    none either (validated records have none).

    Examples
    --------
    >>> import numpy as np
    >>> holds_pulse(np.zeros(64)), holds_pulse(np.r_[np.zeros(10), 1.0, np.zeros(53)])
    (False, True)
    """
    f = np.asarray(force, dtype=float)
    return bool(f.size > 0 and np.all(np.isfinite(f)) and np.ptp(f) > 0)


def pulse_bounds(force: np.ndarray, time: np.ndarray, *, end_fraction: float = 0.02) -> tuple[int, int, int]:
    """Indices (start, peak, end) of the main hammer pulse in a 1-D force record.

    The peak is the sample of largest absolute force. The pulse starts at the last
    sample before the peak whose magnitude is below ``end_fraction`` of the peak, and
    ends at the first sample after the peak below that level (common practice: 2-5 %
    of the peak). ``end`` is exclusive: ``force[start:end]`` is the pulse.

    Parameters
    ----------
    force : ndarray
        Force samples of one hit.
    time : ndarray
        Matching times (s); only its length is checked.
    end_fraction : float
        Level, as a fraction of the peak magnitude, that bounds the pulse.

    Returns
    -------
    tuple of int
        ``(start, peak, end)`` sample indices.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(100) / 1000.0
    >>> f = np.zeros(100)
    >>> f[10:15] = [0.2, 0.7, 1.0, 0.6, 0.1]
    >>> pulse_bounds(f, t)
    (9, 12, 15)
    """
    f = np.abs(np.asarray(force, dtype=float))
    if f.shape != np.shape(time):
        raise ValueError("force and time must have the same shape")
    peak = int(np.argmax(f))
    level = end_fraction * f[peak]
    below_before = np.nonzero(f[:peak] <= level)[0]
    start = int(below_before[-1]) if below_before.size else 0
    below_after = np.nonzero(f[peak:] <= level)[0]
    end = peak + int(below_after[0]) if below_after.size else f.size
    return start, peak, end


def contact_end(
    force: np.ndarray, time: np.ndarray, *, fraction: float = 0.05, end_fraction: float = 0.02,
    noise_factor: float = 6.0,
) -> int:
    """Index (exclusive) where the last hammer contact of a hit has ended.

    For a clean hit this is the end of the main pulse (:func:`pulse_bounds`); after a
    double hit it is the end of the last later excursion above ``fraction`` of the peak
    (and above ``noise_factor`` times the force noise, from the median absolute second
    difference), so a fit window that starts there holds free decay only (common
    practice: fit after the last contact).

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(100) / 1000.0
    >>> f = np.zeros(100)
    >>> f[10:15] = [0.2, 0.7, 1.0, 0.6, 0.1]
    >>> f[40:43] = [0.1, 0.3, 0.1]          # a second tap at 30 % of the peak
    >>> contact_end(f, t)
    43
    """
    f = np.abs(np.asarray(force, dtype=float))
    _, peak, end = pulse_bounds(force, time, end_fraction=end_fraction)
    if f.size < 3 or f[peak] == 0:
        return end
    # robust noise level: median absolute second difference (white noise: var = 6 sigma^2;
    # the median of |d| for zero-mean Gaussian d is its MAD, hence MAD_TO_SIGMA)
    noise = MAD_TO_SIGMA * float(np.median(np.abs(np.diff(np.asarray(force, float), 2)))) / np.sqrt(6.0)
    level = max(fraction * f[peak], noise_factor * noise)
    above = np.nonzero(f[end:] > level)[0]
    if above.size == 0:
        return end
    last = end + int(above[-1])
    low = max(end_fraction * f[peak], noise_factor * noise / 2)
    below = np.nonzero(f[last:] <= low)[0]
    return last + int(below[0]) if below.size else f.size
