"""Dead channel: does every response channel carry a signal?

Measure
    A channel is dead when all its samples are equal (a flat line: unplugged, stuck or
    saturated from the start): :func:`modalnb._noise.dead_channels`, the same rule the
    engine uses to leave a channel out. Its other measures are NaN and it is left out of
    the worst-channel values.

Threshold
    None. A warning naming the channel, never an error: the other channels are still
    usable.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from ._base import Check, Outcome, Variable, names
from ._hit import Hit

NAME = "dead channel"


def dead_channel(hit: Hit, th: Mapping[str, Any]) -> Outcome:
    """Dead channels of one hit and the finding."""
    dead = [ch for ch, d in zip(hit.channels, hit.dead, strict=True) if d]
    out = Outcome({"dead_channels": names(dead), "channel_dead": hit.dead.copy()})
    if dead:
        word = "channel" if len(dead) == 1 else "channels"
        out.findings.append(f"dead {word} {names(dead)}")
    return out


CHECK = Check(
    name=NAME,
    run=dead_channel,
    variables=(
        Variable("dead_channels", "str", "dead channels, comma-separated"),
        Variable("channel_dead", "bool", "channel is a flat line", per_channel=True),
    ),
)
