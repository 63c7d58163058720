"""Clipping (overload): did the converter saturate on the force or a response channel?

Measure
    With a full scale (per-channel coord ``full_scale``, or attr ``full_scale``; attr
    ``force_full_scale`` for the force), the number of samples with
    ``|x| >= clip_level * full_scale``. Without one, the number of samples in runs of at
    least `flat_run` equal samples at the record's maximum or minimum (a saturated
    converter repeats its extreme code), counting only an extreme at least half the
    largest magnitude, so a one-sided pulse whose quiet baseline is exactly zero is not
    taken for a flat top. Dead channels are not counted.

Thresholds
    `clip_level` = 0.99 of full scale (common practice 0.95-0.99); `flat_run` = 3 samples
    (common practice 2-3). Rejects the hit by default: a clipped record is not the
    structure's response.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from ._base import Check, Outcome, Threshold, Variable, names
from ._hit import Hit

NAME = "clipping"


def flat_top_samples(x: np.ndarray, run: int) -> int:
    """Samples in runs of >= `run` consecutive samples equal to the record's max or min.

    Examples
    --------
    >>> import numpy as np
    >>> flat_top_samples(np.array([0.0, 0.5, 1.0, 1.0, 1.0, 0.4, -0.2]), 3)
    3
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


def _count(x: np.ndarray, full_scale: float | None, th: Mapping[str, Any]) -> int:
    if full_scale is not None:
        return int(np.count_nonzero(np.abs(x) >= th["clip_level"] * full_scale))
    return flat_top_samples(x, int(th["flat_run"]))


def clipping(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Clipped samples of the force and of each live channel, and the finding."""
    clipped: list[str] = []
    f_clip = 0
    if hit.force is not None:
        if hit.force_full_scale is not None or hit.pulse is not None:  # flat: no flat top
            f_clip = _count(hit.force, hit.force_full_scale, th)
        if f_clip:
            clipped.append("force")
    ch_clip = np.zeros(len(hit.channels), dtype=np.int64)
    for c in np.flatnonzero(~hit.dead):
        fs = None if hit.full_scale is None else float(hit.full_scale[c])
        ch_clip[c] = _count(hit.response[c], fs, th)
        if ch_clip[c]:
            clipped.append(hit.channels[c])
    out = Outcome({
        "force_clipped_samples": f_clip,
        "clipped_samples": int(max([f_clip, *ch_clip.tolist()])),
        "clipped_channels": names(clipped),
        "channel_clipped_samples": ch_clip,
    })
    if clipped:
        out.findings.append(f"clipping on {names(clipped)}")
    return out


CHECK = Check(
    name=NAME,
    run=clipping,
    thresholds=(
        Threshold("clip_level", 0.99,
                  "samples with |x| >= clip_level * full_scale are clipped (common practice "
                  "0.95-0.99)", kind="fraction"),
        Threshold("flat_run", 3,
                  "without a full scale, runs of at least this many equal samples at the "
                  "record's maximum or minimum are clipped (common practice 2-3)",
                  kind="count", minimum=2),
    ),
    variables=(
        Variable("force_clipped_samples", "int", "clipped force samples"),
        Variable("clipped_samples", "int", "clipped samples, worst of channels and force"),
        Variable("clipped_channels", "str", "clipped channels (and 'force'), comma-separated"),
        Variable("channel_clipped_samples", "int", "clipped samples per channel",
                 per_channel=True),
    ),
)
