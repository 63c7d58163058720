"""Error and warning classes of modalnb.

Every problem with the user's input is reported as one of these, with a one-line
message that names the file, variable, channel or hit concerned, what is wrong and a
hint on how to fix it. Warnings are one line too (:class:`ModalnbWarning`).
"""

from __future__ import annotations

from collections.abc import Mapping

__all__ = ["ModalnbError", "RecordError", "RecordFileNotFoundError", "EstimationError",
           "NoAcceptedHitsError", "RecipeError", "RecipeFileNotFoundError", "OptionError",
           "SetupError", "ModalnbWarning", "RecipeAutosaveWarning", "RecipeConflictWarning",
           "OtherRecordsWarning"]


def one_line(message: object) -> str:
    """`message` as one line (runs of white space, newlines included, become one space).

    Examples
    --------
    >>> one_line("a\\n  b")
    'a b'
    """
    return " ".join(str(message).split())


class ModalnbError(ValueError):
    """Base class of every error modalnb raises for bad input (a ``ValueError``)."""

    def __init__(self, message: str):
        # keep it one line: the CLI prints exactly this
        super().__init__(one_line(message))


class RecordError(ModalnbError):
    """A record set (or the file it came from) is not usable as given."""


class RecordFileNotFoundError(RecordError, FileNotFoundError):
    """A record file does not exist."""


class EstimationError(ModalnbError):
    """Mode estimation cannot proceed with the given records and settings."""


class NoAcceptedHitsError(EstimationError):
    """Every hit is rejected, so there is nothing to fit.

    ``rejected_by`` maps what rejected the hits (a check's name, or ``"the user"``) to
    the number of hits it rejected, so a caller (the CLI) can say how to override it in
    its own terms.
    """

    def __init__(self, message: str, rejected_by: Mapping[str, int] | None = None,
                 n_hits: int = 0):
        super().__init__(message)
        self.rejected_by = dict(rejected_by or {})
        self.n_hits = int(n_hits)


class RecipeError(ModalnbError):
    """A recipe (file or object) cannot be read, or does not fit the records."""


class RecipeFileNotFoundError(RecipeError, FileNotFoundError):
    """A recipe file does not exist."""


class OptionError(ModalnbError):
    """An option (keyword argument) is unknown or has a value of the wrong type or range."""


class SetupError(ModalnbError):
    """Several setups (record sets) cannot be fitted or glued together as given."""


class ModalnbWarning(UserWarning):
    """Base class of modalnb's warnings (one-line messages)."""


class RecipeAutosaveWarning(ModalnbWarning):
    """The recipe cannot be autosaved where it was meant to go (choices stay in memory)."""


class RecipeConflictWarning(ModalnbWarning):
    """Another session changed the same choice in the recipe file; this session's won."""


class OtherRecordsWarning(ModalnbWarning):
    """A recipe is replayed on records other than those it was made on (checksums differ)."""
