"""What the notebook widgets and the HTML report share about drawing: one palette, one
display decimation, the dB helpers.

Pure numpy, no plotting library: the widgets (:mod:`modalnb.widgets`) and the report
(:mod:`modalnb.export.report`) both take their colours and their reduced traces from here, so a
measured trace looks the same, and keeps the same peaks, on a screen and in a report.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._errors import ModalnbError

__all__ = ["Palette", "PALETTE", "MAX_POINTS", "decimate_for_display", "envelope_db", "to_db"]


@dataclass(frozen=True)
class Palette:
    """modalnb's own colours, one name per role; explained in every figure's legend.

    Examples
    --------
    >>> PALETTE.measured
    '#3f5166'
    """

    measured: str = "#3f5166"  #: slate: measured data
    model: str = "#e08a00"  #: amber: fitted model
    residual: str = "#17917f"  #: teal: residual (measured - model)
    mode: str = "#b8336a"  #: raspberry: fitted / found modes
    accepted: str = "#2f74b5"  #: blue: hits used in the fit
    rejected: str = "#9aa3ab"  #: grey: hits left out
    stable: str = "#2f8f4e"  #: green: pole stable across model orders
    once: str = "#cfd4d8"  #: light grey: pole new at its order (nothing to compare with)
    #: stabilisation chart, poles not stable, by the first test they fail between orders
    unstable_frequency: str = "#a7b0b8"  #: grey: no pole of the order below within 1 % in frequency
    unstable_damping: str = "#d9a441"  #: ochre: frequency agrees, damping does not
    unstable_energy: str = "#8fb8de"  #: pale blue: frequency and damping agree, energy under the limit
    unstable_shape: str = "#7fbf8f"  #: pale green: all but the shape (MAC) agree
    window: str = "rgba(80, 140, 220, 0.18)"  #: pale blue band: fit window / band
    error: str = "#b3261e"  #: one-line errors, the safety caution's rule
    caution: str = "#fbf1f0"  #: background of the safety caution
    warning: str = "#8a5a00"  #: notes and warnings
    text: str = "#1d2730"  #: body text
    note: str = "#46535e"  #: explanatory notes under tables
    label_bg: str = "rgba(255, 255, 255, 0.85)"  #: background of labels drawn over a plot
    grid: str = "#d5dbe0"  #: table rules
    header: str = "#eef2f5"  #: table headings, code background
    #: one colour per channel (or per hit) when several are overlaid; cycles
    series: tuple[str, ...] = ("#3f5166", "#e08a00", "#17917f", "#b8336a", "#2f74b5",
                               "#7a5aa6", "#8c6d1f", "#c2410c", "#4d7c0f", "#64748b")
    #: MAC heatmaps: 0 (white-ish) to 1 (deep blue)
    mac_scale: tuple[tuple[float, str], ...] = ((0.0, "#f6f8fa"), (1.0, "#1f4e79"))

    @property
    def mode_line(self) -> dict[str, object]:
        """The line style of a fitted mode's frequency on every spectrum (widgets, report).

        Examples
        --------
        >>> PALETTE.mode_line["dash"]
        'dash'
        """
        return {"color": self.mode, "width": 1, "dash": "dash"}


#: The palette every figure and page of modalnb uses.
PALETTE = Palette()


#: Most points sent per trace (what a screen a few thousand pixels wide can show).
MAX_POINTS = 2000


def _check_pair(t: np.ndarray, y: np.ndarray) -> None:
    if t.ndim != 1 or y.shape != t.shape:
        raise ModalnbError(
            f"display trace: x and y must be 1-D and of one length, were {t.shape} and {y.shape}.")


def _buckets(size: int, n: int) -> tuple[int, int]:
    """(number of buckets, samples per bucket) so that buckets * k >= size."""
    buckets = max(1, min(n, size))
    return buckets, -(-size // buckets)


def decimate_for_display(t: np.ndarray, y: np.ndarray,
                         max_points: int = MAX_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """At most `max_points` points of a trace, keeping every local extreme a screen shows.

    The trace is cut into ``max_points // 2`` buckets of equal length; each bucket keeps
    its minimum and its maximum, in time order (min/max decimation, common practice for
    drawing long signals: every peak survives, unlike taking every k-th sample). A trace
    that already fits is returned unchanged. The full data stays with the caller.

    Parameters
    ----------
    t, y : array_like
        1-D, one length: x values (time or frequency) and the trace.
    max_points : int
        Most points returned (>= 2).

    Returns
    -------
    t, y : numpy.ndarray
        The kept points, x increasing as in the input.

    Examples
    --------
    >>> t = np.arange(10000.0); y = np.sin(t)
    >>> tt, yy = decimate_for_display(t, y, 200)
    >>> len(tt) <= 200, bool(yy.max() == y.max()), bool(yy.min() == y.min())
    (True, True, True)
    """
    t, y = np.asarray(t), np.asarray(y)
    _check_pair(t, y)
    size = y.size
    if size <= max_points:
        return t, y
    buckets, k = _buckets(size, max(1, int(max_points) // 2))
    pad = buckets * k - size
    yy = np.concatenate([y, np.full(pad, y[-1])]).reshape(buckets, k)
    base = np.arange(buckets) * k
    lo = np.minimum(base + np.argmin(yy, axis=1), size - 1)
    hi = np.minimum(base + np.argmax(yy, axis=1), size - 1)
    idx = np.unique(np.concatenate([lo, hi]))
    return t[idx], y[idx]


def to_db(x: np.ndarray) -> np.ndarray:
    """``20 log10 |x|``, with zeros shown at -6000 dB rather than as -inf.

    Examples
    --------
    >>> to_db(np.array([1.0, 0.1, -10.0]))
    array([  0., -20.,  20.])
    """
    x = np.abs(np.asarray(x, float))
    return 20 * np.log10(np.maximum(x, 1e-300))


def envelope_db(t: np.ndarray, y: np.ndarray,
                buckets: int = 800) -> tuple[np.ndarray, np.ndarray]:
    """Peak ``|y|`` per bucket in dB, at the bucket's middle time.

    On this view an exponential decay ``A exp(-sigma t)`` is a straight line of slope
    ``-20 sigma / ln 10`` dB/s, so a log-amplitude plot shows where a ring-down sinks into
    noise.

    Examples
    --------
    >>> t = np.arange(4000) / 1000.0
    >>> tt, db = envelope_db(t, np.exp(-t) * np.cos(2 * np.pi * 50 * t), 40)
    >>> len(tt), bool(np.all(np.diff(db) < 0))
    (40, True)
    """
    t, y = np.asarray(t), np.abs(np.asarray(y, float))
    _check_pair(t, y)
    if y.size == 0:
        return t, y
    nb, k = _buckets(y.size, int(buckets))
    pad = nb * k - y.size
    peak = np.concatenate([y, np.zeros(pad)]).reshape(nb, k).max(axis=1)
    filled = np.minimum(np.arange(nb) * k, y.size - 1)
    last = np.minimum(filled + k - 1, y.size - 1)
    keep = np.arange(nb) * k < y.size  # buckets made only of padding are dropped
    mid = (filled + last) // 2
    return t[mid[keep]], to_db(peak[keep])
