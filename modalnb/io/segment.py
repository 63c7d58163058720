"""Cutting one continuous recording that holds several hits into a record set.

The steps, one function each: check the settings, check the signals, turn seconds into
samples, build the trigger signal, find the triggers (a level trigger with hold-off), cut
the records, build the record set.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from .._errors import ModalnbError, RecordError
from ..records import build_records

__all__ = ["segment_recording", "find_triggers"]


@dataclass(frozen=True)
class _Lengths:
    fs: float  # samples per second
    level_frac: float  # trigger level as a fraction of the peak
    n_rec: int  # samples per record
    n_pre: int  # pre-trigger samples
    n_hold: int  # samples after a trigger during which no new hit starts


def _lengths(
    sample_rate: float,
    record_s: float,
    trigger: float,
    pretrigger_s: float | None,
    holdoff_s: float | None,
) -> _Lengths:
    from .._utils import check_fraction, check_positive

    try:
        fs = check_positive("sample_rate", sample_rate)
        rec = check_positive("record_s", record_s)
        level_frac = check_fraction("trigger", trigger)
        pre = rec / 10.0 if pretrigger_s is None else float(pretrigger_s)
        hold = None if holdoff_s is None else check_positive("holdoff_s", holdoff_s)
    except ModalnbError as exc:
        raise RecordError(str(exc)) from None
    except (TypeError, ValueError):
        raise RecordError(f"`pretrigger_s` must be a number, was {pretrigger_s!r}.") from None
    n_rec = int(round(rec * fs))
    n_pre = int(round(pre * fs))
    if not 0 <= n_pre < n_rec:
        raise RecordError(
            f"`pretrigger_s`={pre:g} s must be >= 0 and shorter than `record_s`={rec:g} s."
        )
    n_hold = n_rec - n_pre if hold is None else max(1, int(round(hold * fs)))
    return _Lengths(fs, level_frac, n_rec, n_pre, n_hold)


def _signals(
    response: Any, force: Any, channels: Sequence[str] | None
) -> tuple[np.ndarray, np.ndarray | None, list[str]]:
    """Response (channel, time), force (time,) or None, channel names; all finite."""
    try:
        r = np.asarray(response, dtype=np.float64)
        f = None if force is None else np.asarray(force, dtype=np.float64)
    except (TypeError, ValueError):
        raise RecordError("`response` and `force` must be arrays of real numbers.") from None
    if r.ndim == 1:
        r = r[None, :]
    if r.ndim != 2 or r.shape[0] < 1:
        raise RecordError(f"`response` must have shape (channel, time), has {r.shape}.")
    n = r.shape[1]
    if f is not None and f.shape != (n,):
        raise RecordError(f"`force` must have shape (time,) = ({n},), has {f.shape}.")
    names = (
        [f"ch{i + 1}" for i in range(r.shape[0])]
        if channels is None
        else [str(c) for c in channels]
    )
    if len(names) != r.shape[0]:
        raise RecordError(f"{len(names)} channel names given for {r.shape[0]} response channels.")
    for i in range(r.shape[0]):
        if not np.all(np.isfinite(r[i])):
            j = int(np.argmax(~np.isfinite(r[i])))
            raise RecordError(f"`response` channel {names[i]!r} has a NaN or Inf at sample {j}.")
    if f is not None and not np.all(np.isfinite(f)):
        raise RecordError(f"`force` has a NaN or Inf at sample {int(np.argmax(~np.isfinite(f)))}.")
    return r, f, names


def find_triggers(
    signal: np.ndarray, level: float, *, n_pre: int, n_rec: int, n_hold: int
) -> tuple[list[int], list[int]]:
    """Rising crossings of `level` with hold-off: (complete records, cut-off records).

    A crossing starts a hit unless it falls within `n_hold` samples of the last accepted
    one; a hit whose record (`n_pre` samples before the crossing, `n_rec` in all) would
    run past either end of `signal` is returned in the second list.

    Examples
    --------
    >>> s = np.zeros(100)
    >>> s[[5, 40, 45, 95]] = 1.0
    >>> find_triggers(s, 0.5, n_pre=2, n_rec=20, n_hold=18)
    ([5, 40], [95])
    """
    above = signal >= level
    crossings = np.flatnonzero(above & np.r_[True, ~above[:-1]])
    triggers: list[int] = []
    dropped: list[int] = []
    next_ok = -1
    for c in crossings.tolist():
        if c < next_ok:
            continue
        next_ok = c + n_hold
        if c - n_pre < 0 or c - n_pre + n_rec > signal.size:
            dropped.append(c)
        else:
            triggers.append(c)
    return triggers, dropped


def _report_dropped(triggers: list[int], dropped: list[int], what: str) -> None:
    if dropped:
        warnings.warn(
            f"segment_recording: dropped {len(dropped)} incomplete record(s) cut off by the start "
            f"or end of the recording (trigger samples {dropped}).",
            UserWarning,
            stacklevel=3,
        )
    if not triggers:
        raise RecordError(
            f"no complete record: {len(dropped)} trigger(s) on the {what}, each too close to the "
            "start or end of the recording. Hint: shorten record_s or pretrigger_s."
        )


def segment_recording(
    response: Any,
    sample_rate: float,
    *,
    record_s: float,
    force: Any = None,
    channels: Sequence[str] | None = None,
    trigger: float = 0.1,
    pretrigger_s: float | None = None,
    units: str = "m/s^2",
    force_units: str = "N",
    holdoff_s: float | None = None,
) -> xr.Dataset:
    """Cut one continuous recording holding several hits into a record set.

    The trigger signal is ``|force|`` when `force` is given, else the largest ``|response|``
    across channels at each sample. A hit starts at a rising crossing of ``trigger`` times
    the trigger signal's overall peak (the usual level trigger of a data-acquisition
    front end; common practice). After an accepted trigger, crossings are ignored for
    `holdoff_s` (default: until the record has ended), so one hit gives one record and a
    second tap inside a record stays in it for the hit checks to judge. Each record spans
    `pretrigger_s` before the trigger sample and ``record_s - pretrigger_s`` from it;
    ``time`` is 0 at the trigger sample and negative in the pre-trigger. Records cut off
    by the start or end of the recording are dropped with a warning.

    Parameters
    ----------
    response : array_like
        Shape (channel, time), or (time,) for one channel.
    sample_rate : float
        Samples per second (Hz).
    record_s : float
        Length of each record in seconds, pre-trigger included.
    force : array_like, optional
        Force, shape (time,).
    channels : sequence of str, optional
        Channel names; default ``"ch1"``, ``"ch2"``, ...
    trigger : float
        Trigger level as a fraction of the peak, in (0, 1].
    pretrigger_s : float, optional
        Pre-trigger length in seconds; default a tenth of `record_s` (common practice).
    units, force_units : str
        Units of response and force.
    holdoff_s : float, optional
        Time after an accepted trigger during which no new hit starts; default
        ``record_s - pretrigger_s``.

    Returns
    -------
    xarray.Dataset
        A record set with hits 1..N. Attributes ``segment_trigger_samples`` (index of each
        hit's trigger sample in the recording), ``segment_trigger_level`` (in the trigger
        signal's units) and ``segment_dropped`` (number of incomplete records dropped).

    Raises
    ------
    RecordError
        Bad shapes or values, no trigger crossing, or no complete record.

    Examples
    --------
    >>> import numpy as np
    >>> fs = 1000.0
    >>> force = np.zeros(3000)
    >>> force[[500, 1700]] = 1.0
    >>> response = np.zeros((1, 3000))
    >>> ds = segment_recording(response, fs, force=force, record_s=0.5, pretrigger_s=0.05)
    >>> ds.attrs["segment_trigger_samples"].tolist()
    [500, 1700]
    """
    n = _lengths(sample_rate, record_s, trigger, pretrigger_s, holdoff_s)
    r, f, names = _signals(response, force, channels)
    signal = np.abs(f) if f is not None else np.max(np.abs(r), axis=0)
    peak = float(signal.max()) if signal.size else 0.0
    what = "force" if f is not None else "response"
    if not peak > 0:
        raise RecordError(f"the {what} is zero throughout: no hit to trigger on.")
    level = n.level_frac * peak
    triggers, dropped = find_triggers(
        signal, level, n_pre=n.n_pre, n_rec=n.n_rec, n_hold=n.n_hold
    )
    _report_dropped(triggers, dropped, what)
    cut = (np.asarray(triggers) - n.n_pre)[:, None] + np.arange(n.n_rec)[None, :]
    return build_records(
        np.transpose(r[:, cut], (1, 0, 2)),
        (np.arange(n.n_rec) - n.n_pre) / n.fs,
        channels=names,
        force=None if f is None else f[cut],
        units=units,
        force_units=force_units,
        attrs={
            "sample_rate": n.fs,
            "segment_trigger_samples": np.asarray(triggers, dtype=np.int64),
            "segment_trigger_level": level,
            "segment_dropped": len(dropped),
        },
        source="segment_recording",
    )
