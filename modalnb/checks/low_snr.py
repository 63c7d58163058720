"""Low SNR: does each response channel's ring-down stand clear of its noise floor?

Measure
    Per live channel, ``20 log10(peak / noise)``: the peak of the response (offset
    removed, from the pulse start on) over the noise floor (standard deviation of the
    noise-only samples before the pulse, or from second differences of the record tail
    when there are too few; see :mod:`modalnb.checks._hit`). ``snr_db`` is the worst live
    channel.

Threshold
    `min_snr_db` = 30 dB (common practice, ours). A warning by default: the estimates get
    wider uncertainties, which the engine reports.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from ._base import NAN, Check, Outcome, Threshold, Variable, db, names
from ._hit import Hit

NAME = "low snr"


def low_snr(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Per-channel SNR of one hit, its worst live channel, and the finding."""
    fl = hit.floors
    snr = np.full(len(hit.channels), NAN)
    low: list[str] = []
    for c in np.flatnonzero(~hit.dead):
        snr[c] = db(fl.peak[c] / fl.noise[c]) if fl.noise[c] > 0 else math.inf
        if snr[c] < th["min_snr_db"]:
            low.append(f"{hit.channels[c]} {snr[c]:.0f} dB")
    live = ~hit.dead
    out = Outcome({
        "snr_db": float(np.min(snr[live])) if live.any() else NAN,
        "channel_snr_db": snr,
    })
    if low:
        out.findings.append(f"low snr ({names(low)})")
    return out


CHECK = Check(
    name=NAME,
    run=low_snr,
    thresholds=(
        Threshold("min_snr_db", 30.0,
                  "a response channel whose ring-down peak is less than this many dB above "
                  "its noise floor warns 'low snr' (common practice, ours)"),
    ),
    variables=(
        Variable("snr_db", "float", "worst live channel's SNR", units="dB"),
        Variable("channel_snr_db", "float", "peak over noise floor per channel", units="dB",
                 per_channel=True),
    ),
)
