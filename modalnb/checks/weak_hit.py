"""Weak hit: is the hammer blow strong enough to measure?

Measures
    The force signal-to-noise ratio: the peak force (force minus its median) over the
    force noise (scaled median absolute deviation outside the pulse, see
    :mod:`modalnb.checks._hit`), in dB. Below `min_force_snr_db` there is no clear force
    pulse: the pulse measures (duration, double hit, spectrum) are then NaN.

    With a force full scale (attr ``force_full_scale``, the ADC range in force units),
    the peak force as a fraction of it.

Thresholds
    `min_force_snr_db` = 20 dB (common practice, ours); `min_force_range` = 0.10 of the
    force full scale (common practice: a blow that uses a tenth of the range wastes the
    converter's resolution). A warning by default.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from ._base import Check, Outcome, Threshold
from ._hit import Hit

NAME = "weak hit"


def weak_hit(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Weak-hit findings of one hit (no variables of its own: see ``peak_force``)."""
    out = Outcome()
    p = hit.pulse
    if p is None:
        return out
    if not p.clear:
        out.findings.append(
            f"weak hit (no clear force pulse: peak {p.snr_db:.0f} dB above the force noise)"
        )
    elif hit.force_full_scale is not None \
            and p.peak_force < th["min_force_range"] * hit.force_full_scale:
        out.findings.append(
            f"weak hit (peak force {100 * p.peak_force / hit.force_full_scale:.1f} % of "
            "full scale)"
        )
    return out


CHECK = Check(
    name=NAME,
    run=weak_hit,
    thresholds=(
        Threshold("min_force_range", 0.10,
                  "with force_full_scale, a peak force below this fraction of it is a weak "
                  "hit (common practice)"),
        Threshold("min_force_snr_db", 20.0,
                  "a force peak less than this many dB above the force noise is a weak hit "
                  "with no clear pulse; the pulse measures are then NaN (common practice, "
                  "ours)"),
    ),
)
