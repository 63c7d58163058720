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

Without a force record (or with a dead one)
    The response shows each tap as a new excitation of the free decay. A linear
    predictor of order :data:`AR_ORDER` is fitted by least squares to the live channel
    with the best signal-to-noise ratio (a free decay of up to AR_ORDER / 2 modes obeys
    such a recurrence exactly, so its prediction error is noise except where an input
    acts: Makhoul 1975, "Linear prediction: a tutorial review", Proc. IEEE 63(4)
    [from memory]); the error sequence right after the main onset is the template of one
    tap, and its correlation with the whole error sequence (a matched filter: Turin 1960,
    "An introduction to matched filters", IRE Trans. Inf. Theory 6(3) [from memory])
    peaks, at a later (or earlier) tap, at the tap's strength relative to the main one.
    The fit is repeated twice without the samples the two taps excite. The ratio and delay
    are reported only when that peak stands `double_hit_significance` noise standard
    deviations out (default 6, common practice for a detection threshold: a few thousand
    lags of Gaussian noise exceed 4.5 sigma rarely), else NaN. Taps closer than about
    2 * AR_ORDER samples are not resolved this way.

Threshold
    `double_hit_level` = 0.10 of the peak force (or of the main excitation, without a
    force record; common practice: 5-10 %; 10 % keeps realistic force noise, up to about
    1 % of the peak, from firing it). Rejects the hit by default: a second tap adds a
    second input the free-decay model does not have.

With a force record, only a hit with a clear force pulse (see :mod:`modalnb.checks._hit`)
is judged.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from .._pulse import MAD_TO_SIGMA
from ._base import NAN, Check, Outcome, Threshold, Variable
from ._hit import Hit

NAME = "double hit"

#: Order of the linear predictor fitted to a response without a force record: the free
#: decay of up to 16 modes (common practice, ours).
AR_ORDER = 32
#: Samples of the one-tap template: the predictor's error after a tap lasts about
#: AR_ORDER samples, plus a margin (ours).
TEMPLATE_SAMPLES = AR_ORDER + 4
#: Samples of a response searched for a second tap, from its start (bounds the cost on
#: long records; a hammer's rebound comes within tens of milliseconds).
MAX_RESPONSE_SAMPLES = 16384


#: Finest resolution of any acquisition, relative to the record's peak: one step of a
#: 24-bit converter (2**-24), the finest common in vibration data acquisition.
RESOLUTION_FLOOR = 2.0**-24


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


def _prediction_error(x: np.ndarray, drop: np.ndarray | None) -> np.ndarray:
    """Error of the least-squares linear predictor of order AR_ORDER (rows in `drop` left
    out of the fit); the first AR_ORDER samples are 0."""
    p, n = AR_ORDER, x.size
    lagged = np.stack([x[p - k - 1:n - k - 1] for k in range(p)], axis=1)
    target = x[p:]
    keep = slice(None) if drop is None else ~drop[p:]
    a, b = lagged[keep], target[keep]
    try:  # normal equations: a 32 x 32 solve, fast; noise keeps them well conditioned
        coef = np.linalg.solve(a.T @ a, a.T @ b)
    except np.linalg.LinAlgError:  # singular (e.g. a noise-free, exactly periodic record)
        coef = np.linalg.lstsq(a, b, rcond=None)[0]
    return np.concatenate((np.zeros(p), target - lagged @ coef))


def response_second_tap(x: np.ndarray, time: np.ndarray) -> tuple[float, float, float]:
    """Second tap in a response without force: (ratio, delay s, significance in sigma).

    See the module notes. The ratio is the matched-filter output at the second tap over
    that at the main one (the latter less the noise energy of the template), the delay
    its time minus that of the main onset.

    Examples
    --------
    Two unit-area impulses 8 ms apart, the second 40 % of the first, on an oscillator of
    80 Hz and 2 % damping (x = h(t) + 0.4 h(t - 0.008), h = exp(-zeta wn t) sin(wd t)):

    >>> import numpy as np
    >>> fs = 5000.0
    >>> t = np.arange(-100, 2400) / fs
    >>> wn = 2 * np.pi * 80.0
    >>> wd = wn * np.sqrt(1 - 0.02**2)
    >>> def h(s):
    ...     return np.where(s >= 0, np.exp(-0.02 * wn * s) * np.sin(wd * s), 0.0)
    >>> x = h(t) + 0.4 * h(t - 0.008)
    >>> x = x + 1e-3 * np.random.default_rng(0).standard_normal(t.size)
    >>> ratio, delay, sigmas = response_second_tap(x, t)
    >>> round(ratio, 1), round(delay * 1e3, 1), sigmas > 6
    (0.4, 8.0, True)
    """
    x = np.asarray(x, dtype=float)[:MAX_RESPONSE_SAMPLES]
    n = x.size
    if n < 4 * (AR_ORDER + TEMPLATE_SAMPLES):
        return NAN, NAN, NAN
    drop = None
    for _ in range(3):
        e = _prediction_error(x, drop)
        tail = e[AR_ORDER:]
        sigma = MAD_TO_SIGMA * float(np.median(np.abs(tail - np.median(tail))))
        # no acquisition resolves finer than a 24-bit step of the record's peak: below
        # that the "noise" is arithmetic rounding (a synthetic, noise-free record), whose
        # structured residue must not pass for a second tap
        sigma = max(sigma, RESOLUTION_FLOOR * float(np.max(np.abs(x))))
        main = int(np.argmax(np.abs(e)))
        lo = max(main - 2, 0)
        template = e[lo:lo + TEMPLATE_SAMPLES]
        corr = np.correlate(e, template, mode="valid")  # corr[j] = sum template * e[j:]
        near = np.zeros(corr.size, dtype=bool)
        near[max(lo - template.size + 1, 0):lo + template.size] = True
        second = int(np.argmax(np.where(near, -np.inf, corr)))
        drop = np.zeros(n, dtype=bool)
        drop[lo:lo + AR_ORDER + TEMPLATE_SAMPLES] = True
        drop[second:second + AR_ORDER + TEMPLATE_SAMPLES] = True
    energy = float(corr[lo]) - template.size * sigma**2
    noise = sigma * float(np.linalg.norm(template))
    sigmas = float(corr[second]) / noise if noise > 0 else math.inf
    # a second tap means something only beside a main tap that itself stands out of the
    # noise: with no visible main tap (a record that starts at the tap, inside the
    # predictor's first AR_ORDER samples, or one without any tap) report the weaker of the two
    main_sigmas = energy / noise if noise > 0 else (math.inf if energy > 0 else 0.0)
    sigmas = min(sigmas, main_sigmas)
    ratio = float(corr[second]) / energy if energy > 0 else NAN
    delay = float(time[second + main - lo] - time[main])
    return ratio, delay, sigmas


def _from_response(hit: Hit, th: Mapping[str, Any], out: Outcome) -> Outcome:
    fl = hit.floors
    with np.errstate(divide="ignore", invalid="ignore"):
        snr = np.where(hit.dead, -np.inf, fl.peak / fl.noise)
    snr = np.nan_to_num(snr, nan=-np.inf, posinf=np.finfo(float).max)
    if hit.dead.all():
        return out
    c = int(np.argmax(snr))
    ratio, delay, sigmas = response_second_tap(hit.response[c], hit.time)
    if not sigmas >= th["double_hit_significance"]:
        return out
    out.values.update(double_hit_ratio=ratio, double_hit_delay_s=delay)
    if ratio > th["double_hit_level"]:
        when = "later" if delay > 0 else "earlier"
        out.findings.append(
            f"double hit (second excitation in the {hit.channels[c]} response "
            f"{100 * ratio:.0f} % of the main one, {1e3 * abs(delay):.1f} ms {when})"
        )
    return out


def double_hit(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Double-hit measure and finding of one hit (see the module notes)."""
    out = Outcome({"double_hit_ratio": NAN, "double_hit_delay_s": NAN})
    if hit.pulse is None:  # no force record, or a dead (flat) one: judge the response
        return _from_response(hit, th, out)
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
                  "is a double hit (without a force record: a second excitation of the "
                  "response above this fraction of the main one; common practice 5-10 %)",
                  kind="fraction"),
        Threshold("double_hit_significance", 6.0,
                  "without a force record, a second excitation counts only when its "
                  "matched-filter peak is at least this many noise standard deviations "
                  "(common practice for a detection threshold, ours)"),
    ),
    variables=(
        Variable("double_hit_ratio", "float",
                 "largest force excursion outside the main pulse (or merged second hump) "
                 "over the peak", units="1"),
        Variable("double_hit_delay_s", "float",
                 "time of that excursion minus that of the main peak", units="s"),
    ),
)
