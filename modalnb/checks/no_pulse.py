"""No pulse: does the force record hold a hammer pulse at all?

Measure
    Whether the hit's force record is flat: every sample equal (all zeros or a constant
    offset), :func:`modalnb._pulse.holds_pulse`. That is an unplugged, switched-off or
    stuck force sensor (or a trigger without a blow): there is no input to normalise the
    response by, no pulse to start the free decay after, and the record before the
    trigger cannot be told from the ring-down. Records without a force variable are not
    judged here (they are fitted as free decays; see the note "no force record").

Threshold
    None. Rejects the hit by default (``DEFAULT_REJECT``): the force channel is the one
    thing an impact test cannot do without (common practice: check the force signal
    before anything else).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from .._pulse import holds_pulse
from ._base import Check, Outcome, Variable
from ._hit import Hit

NAME = "no pulse"


def no_pulse(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Whether the hit's force record is flat, and the finding."""
    flat = hit.force is not None and not holds_pulse(hit.force)
    out = Outcome({"force_flat": flat})
    if flat:
        out.findings.append("no pulse (force record flat: no hammer pulse; check the force "
                            "sensor and its cable)")
    return out


CHECK = Check(
    name=NAME,
    run=no_pulse,
    variables=(
        Variable("force_flat", "bool",
                 "the force record is flat (every sample equal): no hammer pulse"),
    ),
)
