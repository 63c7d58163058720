"""Error classes of modalnb.

Every problem with the user's input is reported as one of these, with a one-line
message that names the file, variable, channel or hit concerned, what is wrong and a
hint on how to fix it.
"""

from __future__ import annotations

__all__ = ["ModalnbError", "RecordError", "RecordFileNotFoundError", "EstimationError", "RecipeError"]


class ModalnbError(ValueError):
    """Base class of every error modalnb raises for bad input (a ``ValueError``)."""

    def __init__(self, message: str):
        # keep it one line: the CLI prints exactly this
        super().__init__(" ".join(str(message).split()))


class RecordError(ModalnbError):
    """A record set (or the file it came from) is not usable as given."""


class RecordFileNotFoundError(RecordError, FileNotFoundError):
    """A record file does not exist."""


class EstimationError(ModalnbError):
    """Mode estimation cannot proceed with the given records and settings."""


class RecipeError(ModalnbError):
    """A recipe (file or object) cannot be read, or does not fit the records."""
