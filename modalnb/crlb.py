"""Moved to modalnb.testing.crlb (this alias is removed after the current refactor)."""

from .testing.crlb import (
    ModeBounds,
    combine_channel_bounds,
    crlb_closed_form,
    crlb_modes,
    damping_std_long_record,
    sk_sums,
)

__all__ = [
    "ModeBounds",
    "crlb_modes",
    "crlb_closed_form",
    "sk_sums",
    "damping_std_long_record",
    "combine_channel_bounds",
]
