"""Weak hit: does the hammer blow stand clear of the force noise in the band analysed?

Measures
    ``force_band_snr_db``: the in-band signal-to-noise ratio of the blow, in dB. The force
    (minus its median) over the pulse window (the main pulse widened by
    `double_hit_margin` pulse durations on each side, at least :data:`MIN_WINDOW` samples)
    is transformed (FFT), and its energy in the band (the check band, else 0 to 0.45 fs:
    modalnb._utils.default_band) is divided by the mean in-band
    energy of noise-only stretches of the same length, cut from the force samples
    outside the pulse window (their averaged periodogram: Welch 1967, "The use of fast
    Fourier transform for the estimation of power spectra", IEEE Trans. Audio
    Electroacoustics 15(2) [from memory], with a rectangular window and no overlap). 0 dB: the window
    holds no more in-band energy than noise does. A blow that drives the band 20 dB over
    the noise gives an FRF whose force spectrum the noise barely touches.

    The time-domain peak over the force noise (``min_force_snr_db``, :mod:`._hit`) still
    decides whether there is a *clear* pulse at all; without one this check warns too.

    ``force_range_used``: with a force full scale (attr ``force_full_scale``, the ADC range
    in force units), the peak force as a fraction of it.

Thresholds and what they give
    `min_band_snr_db` = 20 dB (common practice, ours): below it, a warning "weak hit".
    `min_force_range` = 0.10 of the force full scale (common practice: a blow that uses
    under a tenth of the range wastes converter resolution) gives a *note*, not a warning:
    with a quiet force channel such a blow is still clean (the in-band SNR says so), and a
    warning that fires on good data teaches people to ignore warnings.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from .._noise import unit_scale
from .._utils import default_band
from ._base import NAN, Check, Outcome, Threshold, Variable, db
from ._hit import Hit

NAME = "weak hit"

#: Fewest samples of the pulse window (and of each noise stretch) for the in-band SNR:
#: enough FFT bins to resolve a band (common practice, ours).
MIN_WINDOW = 64


def band_snr_db(hit: Hit) -> float:
    """The in-band signal-to-noise of the hit's force pulse in dB (module notes); NaN
    without a clear pulse or without a noise stretch.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.checks._hit import force_pulse
    >>> t = np.arange(-512, 3584) / 10000.0
    >>> f = np.where((t >= 0) & (t <= 1e-3), np.sin(np.pi * t / 1e-3), 0.0)
    >>> f = f + 1e-3 * np.random.default_rng(0).standard_normal(t.size)
    >>> th = {"pulse_end_fraction": 0.02, "double_hit_margin": 0.5, "min_force_snr_db": 20.0}
    >>> class H:  # the two fields the measure reads
    ...     pulse = force_pulse(f, t, th); sample_rate = 1e4; band = None
    >>> 40 < band_snr_db(H) < 60
    True
    """
    p = hit.pulse
    if p is None or not p.clear:
        return NAN
    x = p.centred * unit_scale(p.centred)  # a power of two: no overflow in the squares below
    n = x.size
    lo = max(p.start - p.margin, 0)
    hi = min(p.end + p.margin, n)
    if hi - lo < MIN_WINDOW:  # widen about the pulse to MIN_WINDOW samples
        lo = max(min(lo, n - MIN_WINDOW), 0)
        hi = min(lo + MIN_WINDOW, n)
    length = hi - lo
    band = hit.band if hit.band is not None else default_band(hit.sample_rate)
    freqs = np.fft.rfftfreq(length, 1.0 / hit.sample_rate)
    inband = (freqs >= band[0]) & (freqs <= band[1])
    if not inband.any():
        return NAN
    signal = float(np.sum(np.abs(np.fft.rfft(x[lo:hi]))[inband] ** 2))
    quiet = np.ones(n, dtype=bool)
    quiet[lo:hi] = False
    quiet &= p.outside
    segments = []
    for run in np.split(np.flatnonzero(quiet), np.flatnonzero(np.diff(np.flatnonzero(quiet)) > 1) + 1):
        for k in range(run.size // length):  # whole noise stretches within one quiet run
            segments.append(x[run[k * length]:run[k * length] + length])
    if not segments:
        return NAN
    noise = float(np.mean([np.sum(np.abs(np.fft.rfft(s))[inband] ** 2) for s in segments]))
    if noise <= 0:
        return float("inf")
    return 0.5 * db(signal / noise)  # an energy ratio: 10 log10


def weak_hit(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Weak-hit findings and notes of one hit."""
    p = hit.pulse
    snr = band_snr_db(hit)
    used = NAN
    if p is not None and hit.force_full_scale:
        used = p.peak_force / hit.force_full_scale
    out = Outcome({"force_band_snr_db": snr, "force_range_used": used})
    if p is None:
        return out
    if not p.clear:
        out.findings.append(
            f"weak hit (no clear force pulse: peak {p.snr_db:.0f} dB above the force noise)"
        )
    elif np.isfinite(snr) and snr < th["min_band_snr_db"]:
        out.findings.append(
            f"weak hit (in-band force {snr:.0f} dB above noise, under {th['min_band_snr_db']:g} dB)"
        )
    if np.isfinite(used) and used < th["min_force_range"]:
        out.notes.append(f"peak force {100 * used:.1f} % of the force range "
                         f"(under {100 * th['min_force_range']:g} %: a harder blow would use "
                         "more of the converter's resolution)")
    return out


CHECK = Check(
    name=NAME,
    run=weak_hit,
    thresholds=(
        Threshold("min_force_range", 0.10,
                  "with force_full_scale, a peak force below this fraction of it gives a "
                  "note (not a warning): converter resolution left unused (common practice)"),
        Threshold("min_force_snr_db", 20.0,
                  "a force peak less than this many dB above the force noise is a weak hit "
                  "with no clear pulse; the pulse measures are then NaN (common practice, "
                  "ours)"),
        Threshold("min_band_snr_db", 20.0,
                  "a clear pulse whose in-band energy is less than this many dB above that "
                  "of a noise stretch of the same length warns 'weak hit' (common practice, "
                  "ours)"),
    ),
    variables=(
        Variable("force_band_snr_db", "float",
                 "in-band energy of the force pulse window over that of force noise of the "
                 "same length; NaN without a clear pulse", units="dB"),
        Variable("force_range_used", "float",
                 "peak force as a fraction of force_full_scale; NaN without one"),
    ),
)
