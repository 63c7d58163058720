"""Soft tip: does the force spectrum cover the band of interest?

Measure
    The amplitude spectrum of the force window -- the force minus its median, kept from
    the pulse start to `double_hit_margin` pulse durations after its end and zero
    elsewhere (a force window: Fladung, "Windows used for impact testing", Proc. IMAC
    [from memory]) -- zero-padded to a power of two at least 16 times the window and at
    least the record (:func:`force_spectrum` gives it, in dB re its 0 Hz value).

    ``force_rolloff_db`` is the ratio, in dB, of the largest to the smallest magnitude
    inside `band` (edges linearly interpolated); ``force_bandwidth_hz`` is the lowest
    frequency where the spectrum has fallen `max_rolloff_db` below its 0 Hz value
    (interpolated in dB), reported with or without a band.

Threshold
    `max_rolloff_db` = 20 dB across the band (common practice: 10-20 dB, quoted in
    instrument manuals and tutorials). A warning by default ("use a harder tip"): modes
    where the force has little energy are poorly excited, not wrong.

For reference, a half-sine pulse of duration T_c has ``|F(f)| = (2 T_c / pi) |cos(pi f
T_c)| / |1 - (2 f T_c)^2|`` times its peak, which is 20 dB down at about f T_c = 1.30
and has its first zero at f T_c = 1.5.

Only a hit with a clear force pulse is judged, and the roll-off only with a `band`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import xarray as xr

from .._errors import RecordError
from ..records import get_sample_rate, validate_records
from ._base import NAN, Check, Outcome, Threshold, Variable, db
from ._hit import THRESHOLDS as HIT_THRESHOLDS
from ._hit import ForcePulse, Hit, force_pulse

NAME = "soft tip"


def window_spectrum(pulse: ForcePulse, sample_rate: float) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies (Hz) and magnitudes of the force window's zero-padded FFT."""
    n_t = pulse.centred.size
    seg = pulse.centred[pulse.start:min(pulse.end + pulse.margin, n_t)]
    n_fft = 1 << int(math.ceil(math.log2(max(n_t, 16 * seg.size, 16))))
    mag = np.abs(np.fft.rfft(seg, n_fft))
    return np.fft.rfftfreq(n_fft, 1.0 / sample_rate), mag


def _band_levels(mag: np.ndarray, freqs: np.ndarray, lo: float, hi: float) -> np.ndarray:
    inside = mag[(freqs > lo) & (freqs < hi)]
    edges = np.interp([lo, hi], freqs, mag)
    return np.concatenate((edges, inside))


def drop_frequency(mag: np.ndarray, freqs: np.ndarray, drop_db: float) -> float:
    """Lowest frequency where `mag` has fallen `drop_db` below its value at 0 Hz.

    Interpolated in dB between the two bins around the crossing; NaN when it never falls
    that far (or the 0 Hz value is not positive).

    Examples
    --------
    >>> import numpy as np
    >>> drop_frequency(np.array([1.0, 0.1, 0.01]), np.array([0.0, 1.0, 2.0]), 30.0)
    1.5
    """
    ref = mag[0]
    if not ref > 0:
        return NAN
    target = ref * 10.0 ** (-drop_db / 20.0)
    below = np.flatnonzero(mag <= target)
    if below.size == 0:
        return NAN
    k = int(below[0])
    if k == 0:
        return 0.0
    with np.errstate(divide="ignore"):
        a, b = 20 * np.log10(mag[k - 1]), 20 * np.log10(mag[k])
    g = 20 * math.log10(target)
    if not np.isfinite(b) or a == b:
        return float(freqs[k])
    return float(freqs[k - 1] + (a - g) / (a - b) * (freqs[k] - freqs[k - 1]))


def soft_tip(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Force roll-off and bandwidth of one hit and the soft-tip finding."""
    out = Outcome({"force_rolloff_db": NAN, "force_bandwidth_hz": NAN})
    p = hit.clear_pulse
    if p is None:
        return out
    freqs, mag = window_spectrum(p, hit.sample_rate)
    out.values["force_bandwidth_hz"] = drop_frequency(mag, freqs, th["max_rolloff_db"])
    if hit.band is not None:
        lv = _band_levels(mag, freqs, *hit.band)
        rolloff = float(db(lv.max() / lv.min()) if lv.min() > 0 else math.inf)
        out.values["force_rolloff_db"] = rolloff
        if rolloff > th["max_rolloff_db"]:
            lo, hi = hit.band
            out.findings.append(
                f"soft tip (force spectrum drops {rolloff:.0f} dB across {lo:g}-{hi:g} Hz; "
                "use a harder tip)"
            )
    return out


def force_spectrum(
    records: xr.Dataset,
    hit: int,
    *,
    pulse_end_fraction: float = 0.02,
    double_hit_margin: float = 0.5,
) -> tuple[np.ndarray, np.ndarray]:
    """The force spectrum the soft-tip check judges, for one hit.

    Parameters
    ----------
    records : xarray.Dataset
        A record set with a ``force`` variable (validated first).
    hit : int
        The hit label.
    pulse_end_fraction, double_hit_margin : float
        As in :func:`modalnb.checks.check_hits` (they bound the force window); pass the
        values given there to get the very numbers it judged.

    Returns
    -------
    freq_hz : ndarray
        Frequencies from 0 Hz to Nyquist.
    level_db : ndarray
        ``20 log10(|F(f)| / |F(0)|)``: the magnitude of the force window's spectrum in dB
        re its 0 Hz value (0 dB at 0 Hz; -inf where it is exactly zero). The check's
        ``force_rolloff_db`` is the spread of these levels inside the band, and
        ``force_bandwidth_hz`` the first frequency where they reach ``-max_rolloff_db``.

    Raises
    ------
    RecordError
        Invalid records, an unknown hit, no force record or a flat force record.

    Examples
    --------
    A half-sine pulse of duration T_c = 1 ms: its spectrum is ``(2 T_c / pi) |cos(pi f
    T_c)| / |1 - (2 f T_c)^2|`` times the peak, so at f = 500 Hz (f T_c = 1/2, the
    removable singularity, where the limit is T_c / 2) the level is
    20 log10(pi / 4) = -2.10 dB:

    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> fs = 100000.0
    >>> t = np.arange(-500, 20000) / fs
    >>> f = np.where((t >= 0) & (t <= 1e-3), np.sin(np.pi * t / 1e-3), 0.0)
    >>> ds = records_from_arrays(np.exp(-30 * t) * (t >= 0), fs, force=f, t0=t[0])
    >>> freq, level = force_spectrum(ds, 1)
    >>> round(float(np.interp(500.0, freq, level)), 2)
    -2.1
    """
    validate_records(records)
    labels = [int(h) for h in records["hit"].values]
    try:
        index = labels.index(int(hit))
    except (TypeError, ValueError):
        raise RecordError(f"unknown hit {hit!r}; the hit labels are {labels}.") from None
    if "force" not in records.data_vars:
        raise RecordError(f"hit {hit}: no force record, so no force spectrum.")
    given = {"pulse_end_fraction": pulse_end_fraction, "double_hit_margin": double_hit_margin}
    th: dict[str, Any] = {t.name: t.validate(given.get(t.name, t.default))
                          for t in HIT_THRESHOLDS}
    th["min_force_snr_db"] = -math.inf  # the spectrum is defined whatever the force noise
    t = np.asarray(records["time"].values, dtype=float)
    pulse = force_pulse(np.asarray(records["force"].values[index], dtype=float), t, th)
    if pulse is None:
        raise RecordError(f"hit {hit}: dead force record (all samples equal), no spectrum.")
    freqs, mag = window_spectrum(pulse, get_sample_rate(records))
    with np.errstate(divide="ignore", invalid="ignore"):
        level = 20.0 * np.log10(mag / mag[0])
    return freqs, level


CHECK = Check(
    name=NAME,
    run=soft_tip,
    thresholds=(
        Threshold("max_rolloff_db", 20.0,
                  "with `band`, a force spectrum dropping more than this across the band "
                  "warns 'soft tip'; also the drop that defines force_bandwidth_hz "
                  "(common practice 10-20 dB)"),
    ),
    variables=(
        Variable("force_rolloff_db", "float",
                 "largest over smallest force spectrum magnitude inside the band; NaN "
                 "without a band", units="dB"),
        Variable("force_bandwidth_hz", "float",
                 "lowest frequency where the force spectrum is max_rolloff_db below its "
                 "0 Hz value", units="Hz"),
    ),
)
