"""Hit checks: is each hammer hit of a record set fit for modal estimation?

:func:`check_hits` measures every hit of a record set (double hit, clipping, signal-to-noise,
force spectrum roll-off, decay by the record end, dead channels) and decides, from
thresholds that are plain keyword parameters, whether the hit is accepted. Which checks
reject a hit and which only warn is data (the ``reject`` parameter), and the user can
override any decision per hit (the ``overrides`` parameter). :func:`format_hit_report`
prints the result as an aligned plain-text table.

Nothing here imports ipywidgets or plotly.

Defaults and where they come from (../shared/METHODS.md §5 unless said otherwise):

* pulse bounds at 2 % of the peak force (common practice: 2-5 %);
* double hit: a force excursion outside the main pulse above 10 % of the peak
  (common practice: 5-10 %; 10 % keeps realistic force noise, up to ~1 % of the peak,
  from firing it);
* clipping: samples at or above 99 % of the ADC full scale, or, without a full scale,
  runs of 3 or more equal extreme samples (common practice: 0.95-0.99 of full scale,
  runs of 2-3 or more);
* weak hit: peak force below 10 % of the force full scale (common practice), or a force
  peak less than 20 dB above the force noise (common practice, ours);
* soft tip: force spectrum dropping more than 20 dB across the band of interest
  (common practice: 10-20 dB, quoted in instrument manuals and tutorials);
* low SNR: ring-down peak less than 30 dB above the noise floor (common practice, ours);
* not decayed: response level over the last 5 % of the record above -40 dB of its peak
  and more than 6 dB above the noise floor (the 1 % end level recommended by Fladung,
  "Windows used for impact testing", IMAC; the rest common practice, ours).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError, RecordError
from ._pulse import pulse_bounds
from ._utils import did_you_mean
from .records import get_sample_rate, has_force, validate_records

__all__ = ["CHECK_NAMES", "DEFAULT_REJECT", "check_hits", "format_hit_report"]

#: Names of the checks, as used in ``reject`` and at the start of reason/warning phrases.
CHECK_NAMES = (
    "double hit",
    "clipping",
    "weak hit",
    "low snr",
    "soft tip",
    "not decayed",
    "dead channel",
)
#: Checks that reject a hit by default; all others only warn (METHODS.md §5: "Reject
#: double hits and overloads", common practice).
DEFAULT_REJECT = ("double hit", "clipping")

_NAN = float("nan")


# --------------------------------------------------------------------------- helpers


def _db(ratio: float) -> float:
    """20 log10(ratio), with 0 -> -inf and NaN kept."""
    if not np.isfinite(ratio):
        return float(ratio) if not np.isnan(ratio) else _NAN
    if ratio <= 0:
        return -math.inf
    return 20.0 * math.log10(ratio)


def _second_difference_sigma(x: np.ndarray) -> float:
    """Noise standard deviation from second differences (white noise: var = 6 sigma^2).

    The pseudo-residual estimator of Gasser, Sroka & Jennen-Steinmetz (1986, Biometrika
    73(3)) [from memory]: a slowly varying signal largely cancels in
    ``x[n-1] - 2 x[n] + x[n+1]`` while white noise of variance sigma^2 gives 6 sigma^2.
    """
    if x.size < 3:
        return _NAN
    d = x[:-2] - 2.0 * x[1:-1] + x[2:]
    return float(np.sqrt(np.mean(d * d) / 6.0))


def _flat_top_samples(x: np.ndarray, run: int) -> int:
    """Samples in runs of >= `run` consecutive samples equal to the record's max or min.

    Only an extreme whose magnitude is at least half the largest magnitude counts, so a
    one-sided pulse whose quiet baseline is exactly zero is not taken for a flat top.
    """
    peak = float(np.max(np.abs(x)))
    if peak == 0.0:
        return 0
    total = 0
    for extreme in {float(np.max(x)), float(np.min(x))}:
        if abs(extreme) < 0.5 * peak:
            continue
        at = np.concatenate(([False], x == extreme, [False]))
        edges = np.flatnonzero(np.diff(at.astype(np.int8)))
        lengths = edges[1::2] - edges[::2]
        total += int(lengths[lengths >= run].sum())
    return total


def _second_hump(pulse: np.ndarray, main: int, prominence: float) -> int | None:
    """Index of the most prominent local maximum of |pulse| other than `main`, or None.

    Two taps closer than a pulse duration merge into one pulse with two humps; a hump
    counts when it rises `prominence` above the valley that separates it from the main
    peak (scipy.signal.find_peaks prominence).
    """
    from scipy.signal import find_peaks

    mag = np.abs(pulse)
    # pad with zeros so humps at the very ends of the pulse are found
    idx, props = find_peaks(np.concatenate(([0.0], mag, [0.0])), prominence=prominence)
    idx = idx - 1
    keep = idx != main
    if not keep.any():
        return None
    return int(idx[keep][np.argmax(props["prominences"][keep])])


def _crossing_time(t: np.ndarray, y: np.ndarray, i0: int, i1: int, level: float) -> float:
    """Linear-interpolated time where |y| crosses `level` between samples i0 and i1."""
    y0, y1 = abs(y[i0]), abs(y[i1])
    if y1 == y0:
        return float(t[i0])
    return float(t[i0] + (level - y0) / (y1 - y0) * (t[i1] - t[i0]))


def _spectrum_levels(mag: np.ndarray, freqs: np.ndarray, lo: float, hi: float) -> np.ndarray:
    inside = mag[(freqs > lo) & (freqs < hi)]
    edges = np.interp([lo, hi], freqs, mag)
    return np.concatenate((edges, inside))


def _drop_frequency(mag: np.ndarray, freqs: np.ndarray, drop_db: float) -> float:
    """Lowest frequency where `mag` has fallen `drop_db` below its value at 0 Hz."""
    ref = mag[0]
    if not ref > 0:
        return _NAN
    target = ref * 10.0 ** (-drop_db / 20.0)
    below = np.flatnonzero(mag <= target)
    if below.size == 0:
        return _NAN
    k = int(below[0])
    if k == 0:
        return 0.0
    # interpolate in dB between bins k-1 and k
    with np.errstate(divide="ignore"):
        a, b = 20 * np.log10(mag[k - 1]), 20 * np.log10(mag[k])
    g = 20 * math.log10(target)
    if not np.isfinite(b) or a == b:
        return float(freqs[k])
    return float(freqs[k - 1] + (a - g) / (a - b) * (freqs[k] - freqs[k - 1]))


def _join(items: Iterable[str]) -> str:
    return "; ".join(i for i in items if i)


def _names(names: Iterable[str]) -> str:
    return ", ".join(names)


def _check_reject(reject: Iterable[str]) -> tuple[str, ...]:
    if isinstance(reject, str):
        reject = (reject,)
    out = []
    for name in reject:
        if name not in CHECK_NAMES:
            raise ModalnbError(
                f"`reject` names an unknown check {name!r}; known checks: "
                f"{', '.join(map(repr, CHECK_NAMES))}.{did_you_mean(str(name), CHECK_NAMES)}"
            )
        out.append(name)
    return tuple(out)


def _check_band(band: Any, nyquist: float, source: str | None) -> tuple[float, float] | None:
    if band is None:
        return None
    try:
        lo, hi = (float(b) for b in band)
    except (TypeError, ValueError):
        raise ModalnbError(
            f"`band` must be a pair (low, high) of frequencies in Hz, was {band!r}."
        ) from None
    if not (0.0 <= lo < hi and np.isfinite(hi)):
        raise ModalnbError(f"`band` must satisfy 0 <= low < high, was {band!r}.")
    if hi > nyquist * (1 + 1e-9):
        where = f"{source}: " if source else ""
        raise RecordError(
            f"{where}band upper edge {hi:g} Hz is above the Nyquist frequency {nyquist:g} Hz "
            "of the records. Hint: lower the band's upper edge."
        )
    return lo, hi


def _check_overrides(overrides: Mapping[Any, Any] | None, hits: list[int],
                     source: str | None) -> dict[int, bool]:
    if not overrides:
        return {}
    where = f"{source}: " if source else ""
    out: dict[int, bool] = {}
    for key, value in overrides.items():
        label: int | None = None
        if isinstance(key, bool):
            label = None
        elif isinstance(key, (int, np.integer)):
            label = int(key)
        elif isinstance(key, str) and key.strip().lstrip("+-").isdigit():
            label = int(key)
        if label is None or label not in hits:
            raise RecordError(
                f"{where}override for unknown hit {key!r}; the hit labels are {hits}. "
                "Hint: use one of those labels."
            )
        if not isinstance(value, (bool, np.bool_)):
            raise RecordError(
                f"{where}override for hit {label} must be True (accept) or False (reject), "
                f"was {value!r}."
            )
        out[label] = bool(value)
    return out


def _full_scales(ds: xr.Dataset, n_ch: int) -> np.ndarray | None:
    if "full_scale" in ds.coords:
        return np.asarray(ds["full_scale"].values, dtype=float).reshape(n_ch)
    if "full_scale" in ds.attrs:
        return np.full(n_ch, float(np.asarray(ds.attrs["full_scale"]).item()))
    return None


# --------------------------------------------------------------------------- main API


def check_hits(
    records: xr.Dataset,
    *,
    band: tuple[float, float] | None = None,
    overrides: Mapping[int, bool] | None = None,
    reject: Iterable[str] = DEFAULT_REJECT,
    pulse_end_fraction: float = 0.02,
    double_hit_level: float = 0.10,
    double_hit_margin: float = 0.5,
    clip_level: float = 0.99,
    flat_run: int = 3,
    min_force_range: float = 0.10,
    min_force_snr_db: float = 20.0,
    max_rolloff_db: float = 20.0,
    min_snr_db: float = 30.0,
    max_end_level_db: float = -40.0,
    end_window: float = 0.05,
    end_noise_margin_db: float = 6.0,
    min_noise_samples: int = 16,
    source: str | None = None,
) -> xr.Dataset:
    """Measure every hit of a record set and decide whether it is accepted.

    Parameters
    ----------
    records : xarray.Dataset
        A record set (see :mod:`modalnb.records`); it is validated first.
    band : (float, float), optional
        Band of interest (low, high) in Hz for the force roll-off check. Without it the
        roll-off is not judged (``force_rolloff_db`` is NaN) but ``force_bandwidth_hz``
        is still reported.
    overrides : mapping of hit label to bool, optional
        The user's decision per hit (True accepts, False rejects). It wins over the
        checks and is recorded in ``user_decision``, ``reason`` and ``warnings``.
    reject : iterable of str
        Checks whose findings reject the hit; the others only warn. Names are those of
        :data:`CHECK_NAMES`. Default ``("double hit", "clipping")`` (METHODS.md §5,
        common practice).
    pulse_end_fraction : float
        The main pulse is bounded where the force falls below this fraction of its peak
        (default 0.02; common practice 2-5 %, METHODS.md §5).
    double_hit_level : float
        A force excursion outside the main pulse above this fraction of the peak is a
        double hit (default 0.10; common practice 5-10 %, METHODS.md §5).
    double_hit_margin : float
        Samples within this many pulse durations before the pulse start or after the
        pulse end are not searched for a second excursion (default 0.5; common practice,
        ours).
    clip_level : float
        Samples with ``|x| >= clip_level * full_scale`` are clipped (default 0.99; common
        practice 0.95-0.99, METHODS.md §5). The full scale is the per-channel coord
        ``full_scale`` or the attr ``full_scale``; for the force, attr
        ``force_full_scale``.
    flat_run : int
        Without a full scale, runs of at least this many equal samples at the record's
        maximum or minimum are clipped (default 3; common practice 2-3, METHODS.md §5).
    min_force_range : float
        With ``force_full_scale``, a peak force below this fraction of it is a weak hit
        (default 0.10; common practice, METHODS.md §5).
    min_force_snr_db : float
        A force peak less than this many dB above the force noise is a weak hit with no
        clear pulse; the pulse measures are then NaN (default 20 dB; common practice,
        ours).
    max_rolloff_db : float
        With `band`, a force spectrum dropping more than this across the band warns
        "soft tip" (default 20 dB; common practice 10-20 dB, METHODS.md §5). It is also
        the drop that defines ``force_bandwidth_hz``.
    min_snr_db : float
        A response channel whose ring-down peak is less than this many dB above its
        noise floor warns "low snr" (default 30 dB; common practice, ours).
    max_end_level_db : float
        A response channel whose RMS over the last `end_window` of the record is above
        this level relative to its peak (and more than `end_noise_margin_db` above its
        noise floor) warns "not decayed" (default -40 dB, i.e. 1 %: Fladung, "Windows used
        for impact testing", IMAC, via METHODS.md §4).
    end_window : float
        Fraction of the record, at its end, where the end level is measured (default
        0.05; common practice, ours).
    end_noise_margin_db : float
        See `max_end_level_db` (default 6 dB; common practice, ours).
    min_noise_samples : int
        Fewest pre-trigger samples for a noise floor from the pre-trigger; with fewer, the
        noise floor comes from second differences of the record tail (default 16).
    source : str, optional
        File name for error messages.

    Returns
    -------
    xarray.Dataset
        Over ``hit``: ``accepted`` (bool), ``reason`` and ``warnings`` (str, lower-case
        phrases joined by "; "), ``user_decision`` ("accepted", "rejected" or ""),
        ``peak_force``, ``pulse_duration_s``, ``double_hit_ratio``,
        ``double_hit_delay_s`` (time of the second excursion minus that of the main
        peak), ``force_rolloff_db``, ``force_bandwidth_hz``, ``force_clipped_samples``,
        ``clipped_samples`` (worst of channels and force), ``clipped_channels``,
        ``dead_channels``, ``snr_db`` and ``end_level_db`` (worst live channel),
        ``noise_source`` ("pre-trigger" or "record tail"). Over ``(hit, channel)``:
        ``channel_snr_db``, ``channel_end_level_db``, ``channel_clipped_samples``,
        ``channel_dead``. The thresholds used are stored as attrs.

    Raises
    ------
    RecordError
        Invalid records, an override for an unknown hit, a band above Nyquist.
    ModalnbError
        An unknown check name in `reject`, a malformed `band`.

    Notes
    -----
    1. The main pulse is located with :func:`modalnb._pulse.pulse_bounds`. The double-hit
       measure is the largest force excursion (about the median force) outside the pulse
       widened by `double_hit_margin` pulse durations, over the peak; searching before
       the pulse too catches a weak first tap followed by a stronger one. Two taps whose
       pulses overlap merge into one pulse; the second is still found when it forms a
       hump rising more than `double_hit_level` of the peak above the valley between the
       two (reported as a "merged second tap"). Taps closer than about half a pulse
       duration make a single, longer and skewed pulse that only a long
       ``pulse_duration_s`` betrays.
    2. The force spectrum is the FFT of the force window (unity over the pulse and its
       margin, zero elsewhere; Fladung, IMAC, via METHODS.md §5), zero-padded. The
       roll-off is the ratio of its largest to smallest magnitude inside `band`.
    3. The noise floor of a channel is the standard deviation of its samples before the
       trigger (before the pulse start with a force record, t < 0 without one); with
       fewer than `min_noise_samples` such samples it is estimated from second
       differences of the last 10 % of the record (Gasser, Sroka & Jennen-Steinmetz
       1986), which a slowly varying residual ring-down barely affects. A channel's
       offset (mean of the same samples) is removed before its peak and end level are
       measured.
    4. A dead channel (all samples equal) is a warning naming it, never an error; its
       measures are NaN and it is left out of the worst-channel values.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> fs = 10000.0
    >>> t = np.arange(-200, 4800) / fs
    >>> f = np.where((t >= 0) & (t < 1e-3), np.sin(np.pi * t / 1e-3), 0.0)
    >>> x = np.exp(-40 * t) * np.sin(2 * np.pi * 150 * t) * (t >= 0)
    >>> rng = np.random.default_rng(0)
    >>> ds = records_from_arrays(x + 1e-4 * rng.standard_normal(t.size), fs,
    ...                          force=f, t0=t[0])
    >>> out = check_hits(ds)
    >>> bool(out["accepted"].item()), str(out["reason"].item())
    (True, '')
    """
    validate_records(records, source=source)
    reject_set = set(_check_reject(reject))
    fs = get_sample_rate(records)
    band_ = _check_band(band, fs / 2.0, source)
    hits = [int(h) for h in records["hit"].values]
    user = _check_overrides(overrides, hits, source)
    for name, v in (("pulse_end_fraction", pulse_end_fraction),
                    ("double_hit_level", double_hit_level), ("clip_level", clip_level),
                    ("end_window", end_window)):
        if not (0.0 < float(v) <= 1.0):
            raise ModalnbError(f"`{name}` must be in (0, 1], was {v!r}.")
    if int(flat_run) < 2:
        raise ModalnbError(f"`flat_run` must be an integer >= 2, was {flat_run!r}.")

    t = np.asarray(records["time"].values, dtype=float)
    n_t = t.size
    channels = [str(c) for c in records["channel"].values]
    n_hit, n_ch = len(hits), len(channels)
    resp = np.asarray(records["response"].values, dtype=float)
    with_force = has_force(records)
    force = np.asarray(records["force"].values, dtype=float) if with_force else None
    ch_fs = _full_scales(records, n_ch)
    f_fs = float(np.asarray(records.attrs["force_full_scale"]).item()) \
        if "force_full_scale" in records.attrs else None

    hv: dict[str, list[Any]] = {k: [] for k in (
        "accepted", "reason", "warnings", "user_decision", "peak_force", "pulse_duration_s",
        "double_hit_ratio", "double_hit_delay_s", "force_rolloff_db", "force_bandwidth_hz",
        "force_clipped_samples", "clipped_samples", "clipped_channels", "dead_channels",
        "snr_db", "end_level_db", "noise_source")}
    ch_snr = np.full((n_hit, n_ch), _NAN)
    ch_end = np.full((n_hit, n_ch), _NAN)
    ch_clip = np.zeros((n_hit, n_ch), dtype=np.int64)
    ch_dead = np.zeros((n_hit, n_ch), dtype=bool)
    n_end = max(int(round(end_window * n_t)), min(8, n_t))
    n_tail = max(int(round(0.10 * n_t)), min(32, n_t))

    for ih, hit in enumerate(hits):
        findings: list[tuple[str, str]] = []  # (check name, phrase)
        notes: list[str] = []                 # advisories that are not checks
        peak_force = pulse_s = dh_ratio = dh_delay = rolloff = bandwidth = _NAN
        f_clip = 0
        pulse_start: int | None = None
        clipped_names: list[str] = []

        # ---- force
        if force is None:
            notes.append("no force record")
        else:
            f = force[ih]
            if f_fs is not None:
                f_clip = int(np.count_nonzero(np.abs(f) >= clip_level * f_fs))
            if np.ptp(f) == 0:
                notes.append("dead force record (all samples equal)")
            else:
                if f_fs is None:
                    f_clip = _flat_top_samples(f, int(flat_run))
                fb = f - np.median(f)
                start, peak, end = pulse_bounds(fb, t, end_fraction=pulse_end_fraction)
                peak_abs = abs(fb[peak])
                peak_force = float(peak_abs)
                width = max(end - start, 1)
                margin = max(int(math.ceil(double_hit_margin * width)), 1)
                outside = np.ones(n_t, dtype=bool)
                outside[max(start - margin, 0):min(end + margin, n_t)] = False
                quiet = np.abs(fb[outside])
                f_noise = 1.4826 * float(np.median(quiet)) if quiet.size else 0.0
                if f_noise > 0 and _db(peak_abs / f_noise) < min_force_snr_db:
                    findings.append((
                        "weak hit",
                        f"weak hit (no clear force pulse: peak {_db(peak_abs / f_noise):.0f} dB "
                        "above the force noise)",
                    ))
                else:
                    pulse_start = start
                    level = pulse_end_fraction * peak_abs
                    t_on = _crossing_time(t, fb, start, start + 1, level) if start < peak \
                        else float(t[start])
                    t_off = _crossing_time(t, fb, end - 1, end, level) if end < n_t \
                        else float(t[-1])
                    pulse_s = t_off - t_on
                    kind = "second excursion"
                    if quiet.size:
                        k = int(np.argmax(np.abs(fb) * outside))
                        dh_ratio = float(abs(fb[k]) / peak_abs)
                        dh_delay = float(t[k] - t[peak])
                    hump = _second_hump(fb[start:end], peak - start,
                                        double_hit_level * peak_abs)
                    if hump is not None and not (dh_ratio > double_hit_level):
                        kind = "merged second tap"
                        dh_ratio = float(abs(fb[start + hump]) / peak_abs)
                        dh_delay = float(t[start + hump] - t[peak])
                    if dh_ratio > double_hit_level:
                        when = "later" if dh_delay > 0 else "earlier"
                        findings.append((
                            "double hit",
                            f"double hit ({kind} {100 * dh_ratio:.0f} % of peak, "
                            f"{1e3 * abs(dh_delay):.1f} ms {when})",
                        ))
                    # force spectrum of the force window (pulse plus margin)
                    seg = fb[start:min(end + margin, n_t)]
                    n_fft = 1 << int(math.ceil(math.log2(max(n_t, 16 * seg.size, 16))))
                    mag = np.abs(np.fft.rfft(seg, n_fft))
                    freqs = np.fft.rfftfreq(n_fft, 1.0 / fs)
                    bandwidth = _drop_frequency(mag, freqs, max_rolloff_db)
                    if band_ is not None:
                        lv = _spectrum_levels(mag, freqs, *band_)
                        with np.errstate(divide="ignore"):
                            rolloff = float(_db(lv.max() / lv.min()) if lv.min() > 0
                                            else math.inf)
                        if rolloff > max_rolloff_db:
                            findings.append((
                                "soft tip",
                                f"soft tip (force spectrum drops {rolloff:.0f} dB across "
                                f"{band_[0]:g}-{band_[1]:g} Hz; use a harder tip)",
                            ))
                    if f_fs is not None and peak_abs < min_force_range * f_fs:
                        findings.append((
                            "weak hit",
                            f"weak hit (peak force {100 * peak_abs / f_fs:.1f} % of full scale)",
                        ))
            if f_clip:
                clipped_names.append("force")

        # ---- response channels
        if pulse_start is not None:
            pre = np.arange(n_t) < max(pulse_start - 1, 0)
            post_from = pulse_start
        else:
            pre = t < 0
            post_from = int(np.searchsorted(t, 0.0)) if pre.any() else 0
        use_pre = int(pre.sum()) >= min_noise_samples
        dead_names, low_snr, not_decayed = [], [], []
        for ic, ch in enumerate(channels):
            x = resp[ih, ic]
            if np.ptp(x) == 0:
                ch_dead[ih, ic] = True
                dead_names.append(ch)
                continue
            if ch_fs is not None:
                ch_clip[ih, ic] = int(np.count_nonzero(np.abs(x) >= clip_level * ch_fs[ic]))
            else:
                ch_clip[ih, ic] = _flat_top_samples(x, int(flat_run))
            if ch_clip[ih, ic]:
                clipped_names.append(ch)
            if use_pre:
                base = float(np.mean(x[pre]))
                noise = float(np.std(x[pre]))
            else:
                base = float(np.mean(x[-n_tail:]))
                noise = _second_difference_sigma(x[-n_tail:])
            xb = x - base
            peak_x = float(np.max(np.abs(xb[post_from:]))) if post_from < n_t else _NAN
            ch_snr[ih, ic] = _db(peak_x / noise) if noise > 0 else math.inf
            end_rms = float(np.sqrt(np.mean(xb[-n_end:] ** 2)))
            ch_end[ih, ic] = _db(end_rms / peak_x) if peak_x > 0 else _NAN
            if ch_snr[ih, ic] < min_snr_db:
                low_snr.append(f"{ch} {ch_snr[ih, ic]:.0f} dB")
            if ch_end[ih, ic] > max_end_level_db and (
                    noise == 0 or _db(end_rms / noise) > end_noise_margin_db):
                not_decayed.append(f"{ch} {ch_end[ih, ic]:.0f} dB")
        live = ~ch_dead[ih]
        snr = float(np.min(ch_snr[ih, live])) if live.any() else _NAN
        end_db = float(np.max(ch_end[ih, live])) if live.any() else _NAN

        if clipped_names:
            findings.append(("clipping", f"clipping on {_names(clipped_names)}"))
        if low_snr:
            findings.append(("low snr", f"low snr ({_names(low_snr)})"))
        if not_decayed:
            findings.append((
                "not decayed",
                f"not decayed by record end ({_names(not_decayed)} re peak): leakage risk, "
                "use a longer record or an exponential window",
            ))
        if dead_names:
            word = "channel" if len(dead_names) == 1 else "channels"
            findings.append(("dead channel", f"dead {word} {_names(dead_names)}"))

        reasons = [p for name, p in findings if name in reject_set]
        warns = [p for name, p in findings if name not in reject_set] + notes
        decision = ""
        if hit in user:
            if user[hit]:
                decision = "accepted"
                if reasons:
                    warns.insert(0, "accepted by user despite: " + ", ".join(reasons))
                reasons = []
            else:
                decision = "rejected"
                reasons.insert(0, "rejected by user")
        accepted = not reasons

        hv["accepted"].append(accepted)
        hv["reason"].append(_join(reasons))
        hv["warnings"].append(_join(warns))
        hv["user_decision"].append(decision)
        hv["peak_force"].append(peak_force)
        hv["pulse_duration_s"].append(pulse_s)
        hv["double_hit_ratio"].append(dh_ratio)
        hv["double_hit_delay_s"].append(dh_delay)
        hv["force_rolloff_db"].append(rolloff)
        hv["force_bandwidth_hz"].append(bandwidth)
        hv["force_clipped_samples"].append(f_clip)
        hv["clipped_samples"].append(max([f_clip, *ch_clip[ih].tolist()]))
        hv["clipped_channels"].append(_names(clipped_names))
        hv["dead_channels"].append(_names(dead_names))
        hv["snr_db"].append(snr)
        hv["end_level_db"].append(end_db)
        hv["noise_source"].append("pre-trigger" if use_pre else "record tail")

    f_units = str(records["force"].attrs.get("units", "")) if with_force else ""
    units = {
        "peak_force": f_units, "pulse_duration_s": "s", "double_hit_delay_s": "s",
        "force_rolloff_db": "dB", "force_bandwidth_hz": "Hz", "snr_db": "dB",
        "end_level_db": "dB", "double_hit_ratio": "1",
    }
    data_vars: dict[str, Any] = {}
    for name, values in hv.items():
        if name in ("accepted",):
            arr = np.array(values, dtype=bool)
        elif name in ("force_clipped_samples", "clipped_samples"):
            arr = np.array(values, dtype=np.int64)
        elif isinstance(values[0], str):
            arr = np.array(values, dtype=object)
        else:
            arr = np.array(values, dtype=float)
        attrs = {"units": units[name]} if name in units else {}
        data_vars[name] = ("hit", arr, attrs)
    data_vars["channel_snr_db"] = (("hit", "channel"), ch_snr, {"units": "dB"})
    data_vars["channel_end_level_db"] = (("hit", "channel"), ch_end, {"units": "dB"})
    data_vars["channel_clipped_samples"] = (("hit", "channel"), ch_clip)
    data_vars["channel_dead"] = (("hit", "channel"), ch_dead)
    attrs = {
        "reject": ", ".join(sorted(reject_set, key=CHECK_NAMES.index)),
        "band_hz": "" if band_ is None else f"{band_[0]:g}-{band_[1]:g}",
        "pulse_end_fraction": float(pulse_end_fraction),
        "double_hit_level": float(double_hit_level),
        "double_hit_margin": float(double_hit_margin),
        "clip_level": float(clip_level),
        "flat_run": int(flat_run),
        "min_force_range": float(min_force_range),
        "min_force_snr_db": float(min_force_snr_db),
        "max_rolloff_db": float(max_rolloff_db),
        "min_snr_db": float(min_snr_db),
        "max_end_level_db": float(max_end_level_db),
        "end_window": float(end_window),
        "end_noise_margin_db": float(end_noise_margin_db),
        "min_noise_samples": int(min_noise_samples),
    }
    return xr.Dataset(
        data_vars,
        coords={"hit": np.array(hits, dtype=np.int64),
                "channel": np.array(channels, dtype=object)},
        attrs=attrs,
    )


# --------------------------------------------------------------------------- report


def _fmt(value: Any, spec: str) -> str:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if np.isnan(v):
        return "-"
    if np.isinf(v):
        return "inf" if v > 0 else "-inf"
    return format(v, spec)


def format_hit_report(checks: xr.Dataset, source: str | None = None) -> str:
    """Plain-text table of :func:`check_hits` results, one line per hit, plus a summary.

    Parameters
    ----------
    checks : xarray.Dataset
        The result of :func:`check_hits`.
    source : str, optional
        Where the records came from, printed on the first line.

    Returns
    -------
    str
        Aligned columns (hit, accepted yes/no, peak force, pulse duration, second
        excursion, clipped samples, SNR, force roll-off, end level, reason / warnings)
        with units in the header, and a last line such as "4 of 6 hits accepted".

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> t = np.arange(-64, 1984) / 2048.0
    >>> x = np.exp(-20 * t) * np.sin(2 * np.pi * 100 * t) * (t >= 0)
    >>> rng = np.random.default_rng(1)
    >>> ds = records_from_arrays(x + 1e-5 * rng.standard_normal(t.size), 2048.0, t0=t[0])
    >>> print(format_hit_report(check_hits(ds)).splitlines()[-1])
    1 of 1 hits accepted
    """
    if not isinstance(checks, xr.Dataset) or "accepted" not in checks.data_vars:
        raise ModalnbError(
            "format_hit_report expects the Dataset returned by check_hits (with 'accepted')."
        )
    f_units = checks["peak_force"].attrs.get("units", "") if "peak_force" in checks else ""
    cols = [  # header, variable, format, scale
        (f"peak force [{f_units}]" if f_units else "peak force", "peak_force", ".4g", 1.0),
        ("pulse [ms]", "pulse_duration_s", ".3g", 1e3),
        ("2nd hit [%]", "double_hit_ratio", ".1f", 100.0),
        ("clipped [samples]", "clipped_samples", "d", 1),
        ("SNR [dB]", "snr_db", ".1f", 1.0),
        ("roll-off [dB]", "force_rolloff_db", ".1f", 1.0),
        ("end [dB]", "end_level_db", ".1f", 1.0),
    ]
    rows: list[list[str]] = []
    for i, hit in enumerate(checks["hit"].values):
        row = []
        for _, var, spec, scale in cols:
            value = checks[var].values[i]
            row.append(str(int(value)) if spec == "d" else _fmt(scale * float(value), spec))
        ok = bool(checks["accepted"].values[i])
        notes = []
        if str(checks["reason"].values[i]):
            notes.append("rejected: " + str(checks["reason"].values[i]))
        if str(checks["warnings"].values[i]):
            notes.append("warnings: " + str(checks["warnings"].values[i]))
        rows.append([str(int(hit)), "yes" if ok else "no", *row, " | ".join(notes)])
    header = ["hit", "accepted", *(c[0] for c in cols), "reason / warnings"]
    widths = [max(len(header[j]), *(len(r[j]) for r in rows)) for j in range(len(header) - 1)]
    lines = []
    if source:
        lines.append(f"hit checks for {source}")
    band = checks.attrs.get("band_hz", "")
    if band:
        lines.append(f"band of interest {band} Hz")

    def line(cells: list[str]) -> str:
        left = [cells[0].rjust(widths[0]), cells[1].ljust(widths[1])]
        rest = [c.rjust(w) for c, w in zip(cells[2:-1], widths[2:], strict=True)]
        return "  ".join([*left, *rest, cells[-1]]).rstrip()

    lines.append(line(header))
    lines.append(line(["-" * w for w in widths] + ["-" * len(header[-1])]))
    lines.extend(line(r) for r in rows)
    n_ok = int(np.count_nonzero(checks["accepted"].values))
    lines.append(f"{n_ok} of {len(rows)} hits accepted")
    return "\n".join(lines)
