"""Locating the hammer pulse in a force record (shared by hit checks and estimation)."""

from __future__ import annotations

import numpy as np

__all__ = ["pulse_bounds"]


def pulse_bounds(force: np.ndarray, time: np.ndarray, *, end_fraction: float = 0.02) -> tuple[int, int, int]:
    """Indices (start, peak, end) of the main hammer pulse in a 1-D force record.

    The peak is the sample of largest absolute force. The pulse starts at the last
    sample before the peak whose magnitude is below ``end_fraction`` of the peak, and
    ends at the first sample after the peak below that level (common practice: 2-5 %
    of the peak, ../METHODS §5). ``end`` is exclusive: ``force[start:end]`` is the pulse.

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
