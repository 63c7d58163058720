"""Double hit: did the hammer strike more than once?

Measure
    The largest force excursion (about the median force) outside the main pulse widened
    by `double_hit_margin` pulse durations on each side, over the peak force
    (``double_hit_ratio``), and its time minus that of the main peak
    (``double_hit_delay_s``). Searching before the pulse too catches a weak first tap
    followed by a stronger one (negative delay, "earlier").

    Two taps whose pulses overlap merge into one pulse; the second is still found when it
    forms a hump rising more than `double_hit_level` of the peak above the valley between
    the two (its topographic prominence), reported as a "merged second tap". Taps closer
    than about half a pulse duration make a single, longer and skewed pulse that only a
    long ``pulse_duration_s`` betrays.

Threshold
    `double_hit_level` = 0.10 of the peak force (common practice: 5-10 %; 10 % keeps
    realistic force noise, up to about 1 % of the peak, from firing it). Rejects the hit by
    default: a second tap adds a second input the free-decay model does not have.

Only a hit with a clear force pulse (see :mod:`modalnb.checks._hit`) is judged.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from ._base import NAN, Check, Outcome, Threshold, Variable
from ._hit import Hit

NAME = "double hit"


def local_peaks(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Local maxima of `x` and their topographic prominences.

    A local maximum is a sample (or the middle of a run of equal samples) higher than both
    neighbours; its prominence is its height above the higher of the two lowest points
    reached, on each side, before the signal rises above the peak or the record ends
    (the definition of scipy.signal.peak_prominences, after the topographic prominence of
    mountain peaks). Written with numpy so the checks need not import scipy.signal.

    Returns
    -------
    (indices, prominences) : ndarray of int, ndarray of float

    Examples
    --------
    >>> import numpy as np
    >>> idx, prom = local_peaks(np.array([0.0, 1.0, 0.2, 0.6, 0.6, 0.1, 0.0]))
    >>> idx.tolist(), [round(p, 2) for p in prom.tolist()]
    ([1, 3], [1.0, 0.4])
    """
    x = np.asarray(x, dtype=float)
    n = x.size
    peaks: list[int] = []
    i = 1
    while i < n - 1:
        if x[i - 1] < x[i]:
            ahead = i + 1
            while ahead < n - 1 and x[ahead] == x[i]:
                ahead += 1
            if x[ahead] < x[i]:
                peaks.append((i + ahead - 1) // 2)
                i = ahead
        i += 1
    prom = np.empty(len(peaks))
    for k, p in enumerate(peaks):
        left = x[p]
        j = p
        while j >= 0 and x[j] <= x[p]:
            left = min(left, x[j])
            j -= 1
        right = x[p]
        j = p
        while j < n and x[j] <= x[p]:
            right = min(right, x[j])
            j += 1
        prom[k] = x[p] - max(left, right)
    return np.array(peaks, dtype=np.int64), prom


def second_hump(pulse: np.ndarray, main: int, prominence: float) -> int | None:
    """Index of the most prominent local maximum of |pulse| other than `main`, or None.

    Only maxima at least `prominence` above their valleys count; the pulse is padded with
    a zero at each end so humps at its very ends are found.

    Examples
    --------
    >>> import numpy as np
    >>> second_hump(np.array([0.1, 1.0, 0.5, 0.7, 0.2]), 1, 0.1)
    3
    """
    mag = np.abs(pulse)
    idx, prom = local_peaks(np.concatenate(([0.0], mag, [0.0])))
    keep = (prom >= prominence) & (idx - 1 != main)
    if not keep.any():
        return None
    return int(idx[keep][np.argmax(prom[keep])]) - 1


def double_hit(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Double-hit measure and finding of one hit (see the module notes)."""
    out = Outcome({"double_hit_ratio": NAN, "double_hit_delay_s": NAN})
    p = hit.clear_pulse
    if p is None:
        return out
    t, fb, level = hit.time, p.centred, th["double_hit_level"]
    ratio = delay = NAN
    kind = "second excursion"
    if p.outside.any():
        k = int(np.argmax(np.abs(fb) * p.outside))
        ratio = float(abs(fb[k]) / p.peak_force)
        delay = float(t[k] - t[p.peak])
    hump = second_hump(fb[p.start:p.end], p.peak - p.start, level * p.peak_force)
    if hump is not None and not (ratio > level):
        kind = "merged second tap"
        ratio = float(abs(fb[p.start + hump]) / p.peak_force)
        delay = float(t[p.start + hump] - t[p.peak])
    out.values.update(double_hit_ratio=ratio, double_hit_delay_s=delay)
    if ratio > level:
        when = "later" if delay > 0 else "earlier"
        out.findings.append(
            f"double hit ({kind} {100 * ratio:.0f} % of peak, {1e3 * abs(delay):.1f} ms {when})"
        )
    return out


CHECK = Check(
    name=NAME,
    run=double_hit,
    thresholds=(
        Threshold("double_hit_level", 0.10,
                  "a force excursion outside the main pulse above this fraction of the peak "
                  "is a double hit (common practice 5-10 %)", kind="fraction"),
    ),
    variables=(
        Variable("double_hit_ratio", "float",
                 "largest force excursion outside the main pulse (or merged second hump) "
                 "over the peak", units="1"),
        Variable("double_hit_delay_s", "float",
                 "time of that excursion minus that of the main peak", units="s"),
    ),
)
