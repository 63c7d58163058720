"""One hit, analysed once for all checks: its force pulse, noise floors, dead channels.

Several checks look at the same things (the double-hit, soft-tip and weak-hit checks at
the main force pulse; the low-SNR and not-decayed checks at each channel's noise floor and
peak), so they are measured here, once per hit, and every check reads them from the
:class:`Hit`.

Measures and where their rules come from:

* the main pulse: :func:`modalnb._pulse.pulse_bounds` on the force minus its median,
  bounded at `pulse_end_fraction` of the peak (default 0.02; common practice 2-5 %);
* the force noise: ``MAD_TO_SIGMA * median(|force|)`` over the samples outside the pulse
  widened by `double_hit_margin` pulse durations on each side (default 0.5; common
  practice, ours) -- the median absolute deviation scaled to a standard deviation
  (Rousseeuw & Croux 1993, JASA 88(424));
* a *clear* pulse: one whose peak is at least the weak-hit check's `min_force_snr_db`
  above the force noise; only a clear pulse is measured further (duration, double hit,
  spectrum) and bounds the response's noise window;
* a channel's noise floor: the standard deviation of its noise-only samples before the
  trigger and the pulse (:func:`modalnb._noise.noise_end`, :func:`modalnb._noise.noise_sigma`)
  when there are at least `min_noise_samples` of them (default
  :data:`modalnb._noise.MIN_NOISE_SAMPLES`); otherwise the noise standard deviation from
  second differences of the last 10 % of the record (at least MIN_NOISE_SAMPLES samples;
  the 10 % is common practice): the pseudo-residual estimator of Gasser, Sroka &
  Jennen-Steinmetz (1986), "Residual variance and residual pattern in nonlinear
  regression", Biometrika 73(3) [from memory], which a slowly varying ring-down barely
  affects. The channel's offset (mean of the same samples) is removed before its peak is
  taken (from the pulse start on, or from t = 0 without a clear pulse);
* dead channels: :func:`modalnb._noise.dead_channels` (every sample equal).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from .._noise import MIN_NOISE_SAMPLES, dead_channels, noise_end, noise_sigma, rms, unit_scale
from .._pulse import MAD_TO_SIGMA, pulse_bounds
from ._base import NAN, Threshold, Variable, db

#: Thresholds of the hit analysis itself (shared by several checks).
THRESHOLDS = (
    Threshold("pulse_end_fraction", 0.02,
              "the main pulse is bounded where the force falls below this fraction of its "
              "peak (common practice 2-5 %)", kind="fraction"),
    Threshold("double_hit_margin", 0.5,
              "samples within this many pulse durations before the pulse start or after "
              "its end belong to the pulse: they are not searched for a second tap, not "
              "used for the force noise, and end the force window of the spectrum "
              "(common practice, ours)"),
    Threshold("min_noise_samples", MIN_NOISE_SAMPLES,
              "fewest pre-trigger samples for a noise floor from the pre-trigger; with "
              "fewer, the floor comes from second differences of the record tail "
              "(modalnb._noise.MIN_NOISE_SAMPLES: relative standard error of a standard "
              "deviation about 1/sqrt(2 n), 13 % at 32)", kind="count", minimum=2),
)

#: Variables of the hit analysis.
VARIABLES = (
    Variable("peak_force", "float", "peak of the force minus its median", units="{force}"),
    Variable("pulse_duration_s", "float",
             "time the main pulse spends above pulse_end_fraction of its peak "
             "(interpolated crossings); NaN without a clear pulse", units="s"),
    Variable("noise_source", "str", '"pre-trigger" or "record tail"'),
)

#: Fraction of the record, at its end, used for the fallback noise floor (common practice).
TAIL_FRACTION = 0.10


def second_difference_sigma(x: np.ndarray) -> float:
    """Noise standard deviation from second differences (white noise: var = 6 sigma^2).

    A slowly varying signal largely cancels in ``x[n-1] - 2 x[n] + x[n+1]`` while white
    noise of variance sigma^2 gives 6 sigma^2 (Gasser, Sroka & Jennen-Steinmetz 1986,
    Biometrika 73(3) [from memory]).

    Examples
    --------
    >>> import numpy as np
    >>> x = np.linspace(0, 1, 20001) + np.random.default_rng(0).normal(0, 0.1, 20001)
    >>> round(second_difference_sigma(x), 2)
    0.1
    """
    if x.size < 3:
        return NAN
    d = x[:-2] - 2.0 * x[1:-1] + x[2:]
    return float(rms(d) / np.sqrt(6.0))  # scale-safe root mean square


def _crossing_time(t: np.ndarray, y: np.ndarray, i0: int, i1: int, level: float) -> float:
    """Linear-interpolated time where |y| crosses `level` between samples i0 and i1."""
    y0, y1 = abs(y[i0]), abs(y[i1])
    if y1 == y0:
        return float(t[i0])
    return float(t[i0] + (level - y0) / (y1 - y0) * (t[i1] - t[i0]))


@dataclass(frozen=True)
class ForcePulse:
    """The main hammer pulse of one hit (indices into the hit's samples)."""

    centred: np.ndarray  #: force minus its median
    start: int
    peak: int
    end: int  #: exclusive
    peak_force: float  #: |centred[peak]|
    margin: int  #: samples of `double_hit_margin` pulse durations
    outside: np.ndarray  #: bool, samples outside the pulse widened by `margin`
    noise: float  #: force noise standard deviation (MAD of the outside samples)
    snr_db: float  #: peak over noise, dB (inf without noise)
    clear: bool  #: peak at least min_force_snr_db above the noise
    duration_s: float  #: NaN when not clear


def force_pulse(force: np.ndarray, time: np.ndarray, th: Mapping[str, Any]) -> ForcePulse | None:
    """Analyse the main pulse of one hit's force; None for a flat (dead) force record.

    `th` holds ``pulse_end_fraction``, ``double_hit_margin`` and ``min_force_snr_db``.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(-64, 960) / 10000.0
    >>> f = np.where((t >= 0) & (t <= 1e-3), np.sin(np.pi * t / 1e-3), 0.0)
    >>> f = f + 1e-3 * np.random.default_rng(0).standard_normal(t.size)
    >>> p = force_pulse(f, t, {"pulse_end_fraction": 0.02, "double_hit_margin": 0.5,
    ...                        "min_force_snr_db": 20.0})
    >>> p.clear, round(p.snr_db)
    (True, 60)
    """
    f = np.asarray(force, dtype=float)
    if np.ptp(f) == 0:
        return None
    n_t = f.size
    fb = f - np.median(f)
    start, peak, end = pulse_bounds(fb, time, end_fraction=th["pulse_end_fraction"])
    peak_abs = float(abs(fb[peak]))
    width = max(end - start, 1)
    margin = max(int(math.ceil(th["double_hit_margin"] * width)), 1)
    outside = np.ones(n_t, dtype=bool)
    outside[max(start - margin, 0):min(end + margin, n_t)] = False
    quiet = np.abs(fb[outside])
    noise = MAD_TO_SIGMA * float(np.median(quiet)) if quiet.size else 0.0
    snr = db(peak_abs / noise) if noise > 0 else math.inf
    clear = not (noise > 0 and snr < th["min_force_snr_db"])
    duration = NAN
    if clear:
        level = th["pulse_end_fraction"] * peak_abs
        t_on = _crossing_time(time, fb, start, start + 1, level) if start < peak \
            else float(time[start])
        t_off = _crossing_time(time, fb, end - 1, end, level) if end < n_t else float(time[-1])
        duration = t_off - t_on
    return ForcePulse(fb, start, peak, end, peak_abs, margin, outside, noise, snr, clear,
                      duration)


@dataclass(frozen=True)
class Floors:
    """Per-channel offset, noise floor and peak of one hit (NaN for dead channels)."""

    baseline: np.ndarray
    noise: np.ndarray
    peak: np.ndarray  #: max |x - baseline| from the pulse start (or t = 0) on
    source: str  #: "pre-trigger" or "record tail"


def response_floors(response: np.ndarray, time: np.ndarray, dead: np.ndarray,
                    pulse_start: int | None, min_noise_samples: int) -> Floors:
    """Offsets, noise floors and peaks of the channels of one hit (see the module notes).

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(-100, 900) / 1000.0
    >>> x = np.where(t >= 0, np.exp(-5 * t) * np.sin(2 * np.pi * 20 * t), 0.0)
    >>> x = x + 0.01 * np.random.default_rng(0).standard_normal(t.size)
    >>> fl = response_floors(x[None], t, np.array([False]), None, 32)
    >>> fl.source, round(float(fl.noise[0]), 3)
    ('pre-trigger', 0.01)
    """
    n_ch, n_t = response.shape
    n_pre = noise_end(time, pulse_start)
    use_pre = n_pre >= min_noise_samples
    post_from = pulse_start if pulse_start is not None else int(np.searchsorted(time, 0.0))
    n_tail = max(int(round(TAIL_FRACTION * n_t)), min(MIN_NOISE_SAMPLES, n_t))
    base, noise, peak = (np.full(n_ch, NAN) for _ in range(3))
    for c in np.flatnonzero(~dead):
        x = response[c]
        if use_pre:
            base[c] = float(np.mean(x[:n_pre]))
            noise[c] = float(noise_sigma(x[:n_pre]))
        else:
            base[c] = float(np.mean(x[-n_tail:]))
            noise[c] = second_difference_sigma(x[-n_tail:])
        if post_from < n_t:
            peak[c] = float(np.max(np.abs(x[post_from:] - base[c])))
    return Floors(base, noise, peak, "pre-trigger" if use_pre else "record tail")


@dataclass(frozen=True)
class Hit:
    """One hit as every check sees it: its samples, settings and shared measures."""

    label: int
    time: np.ndarray
    sample_rate: float
    band: tuple[float, float] | None
    channels: tuple[str, ...]
    response: np.ndarray  #: (channel, time)
    full_scale: np.ndarray | None  #: per channel, or None
    force: np.ndarray | None  #: raw force samples, None without a force record
    force_full_scale: float | None
    pulse: ForcePulse | None  #: None without a force record or with a flat one
    dead: np.ndarray  #: bool per channel
    floors: Floors
    notes: tuple[str, ...]  #: advisories that are not checks ("no force record", ...)

    @property
    def clear_pulse(self) -> ForcePulse | None:
        """The pulse when it is clear (measured further), else None."""
        return self.pulse if self.pulse is not None and self.pulse.clear else None


@dataclass(frozen=True)
class RecordArrays:
    """The arrays of a validated record set, read once for all hits."""

    labels: list[int]
    time: np.ndarray
    sample_rate: float
    band: tuple[float, float] | None
    channels: tuple[str, ...]
    response: np.ndarray  #: (hit, channel, time), each channel at unit peak (power of two)
    full_scale: np.ndarray | None  #: per channel, in the scaled units of `response`
    force: np.ndarray | None  #: (hit, time)
    force_full_scale: float | None
    force_units: str


def record_arrays(records: xr.Dataset, sample_rate: float,
                  band: tuple[float, float] | None) -> RecordArrays:
    """Read the arrays and full scales of a validated record set."""
    channels = tuple(str(c) for c in records["channel"].values)
    n_ch = len(channels)
    full: np.ndarray | None = None
    if "full_scale" in records.coords:
        full = np.asarray(records["full_scale"].values, dtype=float).reshape(n_ch)
    elif "full_scale" in records.attrs:
        full = np.full(n_ch, float(np.asarray(records.attrs["full_scale"]).item()))
    f_fs = float(np.asarray(records.attrs["force_full_scale"]).item()) \
        if "force_full_scale" in records.attrs else None
    with_force = "force" in records.data_vars
    # every check works on channels brought to unit peak by a power of two (exact): no
    # overflow or underflow in any units; the checks report ratios only, and a full scale
    # is scaled with its channel
    response = np.asarray(records["response"].values, dtype=float)
    gain = unit_scale(response, axis=(0, 2))
    response = response * gain
    if full is not None:
        full = full * gain.reshape(n_ch)
    return RecordArrays(
        labels=[int(h) for h in records["hit"].values],
        time=np.asarray(records["time"].values, dtype=float),
        sample_rate=sample_rate,
        band=band,
        channels=channels,
        response=response,
        full_scale=full,
        force=np.asarray(records["force"].values, dtype=float) if with_force else None,
        force_full_scale=f_fs,
        force_units=str(records["force"].attrs.get("units", "")) if with_force else "",
    )


def analyse_hit(arrays: RecordArrays, index: int, th: Mapping[str, Any]) -> Hit:
    """The :class:`Hit` at position `index` of `arrays`, with its shared measures."""
    t = arrays.time
    notes: list[str] = []
    force = pulse = None
    if arrays.force is None:
        notes.append("no force record")
    else:
        force = arrays.force[index]
        pulse = force_pulse(force, t, th)  # None when flat: the "no pulse" check says so
    resp = arrays.response[index]
    dead = dead_channels(resp)
    start = pulse.start if pulse is not None and pulse.clear else None
    floors = response_floors(resp, t, dead, start, int(th["min_noise_samples"]))
    return Hit(arrays.labels[index], t, arrays.sample_rate, arrays.band, arrays.channels,
               resp, arrays.full_scale, force, arrays.force_full_scale, pulse, dead, floors,
               tuple(notes))


def hit_values(hit: Hit) -> dict[str, Any]:
    """Values of the hit analysis's own :data:`VARIABLES`."""
    p = hit.pulse
    return {
        "peak_force": p.peak_force if p is not None else NAN,
        "pulse_duration_s": p.duration_s if p is not None else NAN,
        "noise_source": hit.floors.source,
    }
