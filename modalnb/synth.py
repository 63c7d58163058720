"""Moved to modalnb.testing.synth (this alias is removed after the current refactor)."""

from .testing.synth import add_noise, free_decay, snr_db

__all__ = ["free_decay", "add_noise", "snr_db"]
