"""The parts every hit check is made of: thresholds, output variables, outcomes.

A check is a :class:`Check`: a name (as used in ``reject`` and at the start of its
phrases), a function ``run(hit, thresholds) -> Outcome`` that measures one analysed hit
(:class:`modalnb.checks._hit.Hit`), the keyword thresholds it reads, and the output
variables it fills. The composer (:mod:`modalnb.checks._compose`) turns these into the
keyword arguments, validation, attrs and variables of :func:`modalnb.checks.check_hits`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .._errors import ModalnbError
from .._utils import check_fraction

NAN = float("nan")


def db(ratio: float) -> float:
    """``20 log10(ratio)``, with 0 -> -inf and NaN kept.

    Examples
    --------
    >>> db(10.0), db(0.0)
    (20.0, -inf)
    """
    if not np.isfinite(ratio):
        return float(ratio) if not np.isnan(ratio) else NAN
    if ratio <= 0:
        return -math.inf
    return 20.0 * math.log10(ratio)


def names(items: list[str]) -> str:
    """Items joined with ", " (channel lists in phrases and variables)."""
    return ", ".join(items)


@dataclass(frozen=True)
class Threshold:
    """One keyword threshold of a check: its default, meaning and source.

    `kind` is ``"fraction"`` (a number in (0, 1]), ``"number"`` (any finite number) or
    ``"count"`` (an integer at least `minimum`).
    """

    name: str
    default: float | int
    doc: str
    kind: str = "number"
    minimum: int = 1

    def validate(self, value: Any) -> float | int:
        """The value as stored in the attrs, or a one-line ``ModalnbError``.

        Examples
        --------
        >>> Threshold("flat_run", 3, "run length", kind="count", minimum=2).validate(4)
        4
        """
        if self.kind == "fraction":
            return check_fraction(self.name, value)
        if self.kind == "count":
            ok = isinstance(value, (int, np.integer)) and not isinstance(value, bool) \
                or (isinstance(value, float) and value.is_integer())
            if not ok or int(value) < self.minimum:
                raise ModalnbError(
                    f"`{self.name}` must be an integer >= {self.minimum}, was {value!r}."
                )
            return int(value)
        try:
            v = float(value)
        except (TypeError, ValueError):
            raise ModalnbError(f"`{self.name}` must be a number, was {value!r}.") from None
        if math.isnan(v):
            raise ModalnbError(f"`{self.name}` must be a number, was {value!r}.")
        return v


@dataclass(frozen=True)
class Variable:
    """One output variable: name, kind (float, int, bool, str), units, dims, meaning.

    ``units`` may contain ``{force}``, replaced by the force record's units; None means
    no ``units`` attr.
    """

    name: str
    kind: str
    doc: str
    units: str | None = None
    per_channel: bool = False


@dataclass
class Outcome:
    """What a check found on one hit: its variables' values and its phrases.

    `values` maps variable names to a scalar (per hit) or an array over channels;
    `findings` are lower-case phrases starting with the check's name, empty when the
    hit passes; `notes` are advisories that neither reject nor warn (the hit's ``notes``).
    """

    values: dict[str, Any] = field(default_factory=dict)
    findings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


@dataclass(frozen=True)
class Check:
    """A hit check: name, measure (``run``), thresholds and output variables."""

    name: str
    run: Callable[[Any, Mapping[str, Any]], Outcome]  # (checks._hit.Hit, thresholds)
    thresholds: tuple[Threshold, ...] = ()
    variables: tuple[Variable, ...] = ()
