"""Not decayed: has the response died away by the end of the record?

Measure
    Per live channel, the RMS of the response (offset removed) over the last `end_window`
    of the record, in dB re the channel's peak (``channel_end_level_db``;
    ``end_level_db`` is the worst live channel). A ring-down cut off while still strong
    leaks in the spectrum.

Thresholds
    `max_end_level_db` = -40 dB, i.e. 1 % of the peak, the end level recommended for
    impact testing without a window by Fladung, "Windows used for impact testing", Proc.
    IMAC [from memory]; `end_window` = 0.05 of the record and `end_noise_margin_db` =
    6 dB (common practice, ours): a channel is flagged only if its end level is also more
    than that margin above its noise floor, so a record that ends in noise is not blamed.
    A warning by default, with the remedy (longer record or an exponential window).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from .._noise import rms as noise_rms
from ._base import NAN, Check, Outcome, Threshold, Variable, db, names
from ._hit import Hit

NAME = "not decayed"


def not_decayed(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Per-channel end level of one hit, its worst live channel, and the finding."""
    fl = hit.floors
    n_t = hit.time.size
    n_end = max(int(round(th["end_window"] * n_t)), min(8, n_t))  # at least 8 samples
    end = np.full(len(hit.channels), NAN)
    flagged: list[str] = []
    for c in np.flatnonzero(~hit.dead):
        rms = float(noise_rms(hit.response[c, -n_end:] - fl.baseline[c]))
        end[c] = db(rms / fl.peak[c]) if fl.peak[c] > 0 else NAN
        noise = fl.noise[c]
        if end[c] > th["max_end_level_db"] and (
                noise == 0 or db(rms / noise) > th["end_noise_margin_db"]):
            flagged.append(f"{hit.channels[c]} {end[c]:.0f} dB")
    live = ~hit.dead
    out = Outcome({
        "end_level_db": float(np.max(end[live])) if live.any() else NAN,
        "channel_end_level_db": end,
    })
    if flagged:
        out.findings.append(
            f"not decayed by record end ({names(flagged)} re peak): leakage risk, "
            "use a longer record or an exponential window"
        )
    return out


CHECK = Check(
    name=NAME,
    run=not_decayed,
    thresholds=(
        Threshold("max_end_level_db", -40.0,
                  "a response channel whose RMS over the last end_window of the record is "
                  "above this level re its peak (and more than end_noise_margin_db above "
                  "its noise floor) warns 'not decayed' (1 %: Fladung, 'Windows used for "
                  "impact testing', IMAC, from memory)"),
        Threshold("end_window", 0.05,
                  "fraction of the record, at its end, where the end level is measured "
                  "(common practice, ours)", kind="fraction"),
        Threshold("end_noise_margin_db", 6.0,
                  "see max_end_level_db (common practice, ours)"),
    ),
    variables=(
        Variable("end_level_db", "float", "worst live channel's end level", units="dB"),
        Variable("channel_end_level_db", "float",
                 "RMS over the record end re the peak, per channel", units="dB",
                 per_channel=True),
    ),
)
