"""Table cells for people (terminal table, HTML report): every number through
:mod:`modalnb._numbers`, so a value and its uncertainty are rounded as JCGM 100:2008 (GUM)
7.2.6 says and no cell holds e-notation. The files keep full precision (:mod:`._rows`).
"""

from __future__ import annotations

import math
from typing import Any

from .._numbers import NA, format_quantity, split_with_uncertainty

__all__ = ["pm_cell", "damping_cell", "number_cell", "is_number"]


def is_number(x: Any) -> bool:
    """True for a real number (not a bool, not text)."""
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def pm_cell(value: Any, u: Any, unit: str, *, scale: float = 1.0) -> str:
    """``"value ± u"`` in `unit` (the column's), rounded per GUM 7.2.6.

    The unit is written in the cell only when the uncertainty moved the numbers to a larger
    one (``"12.35 ± 0.15 kHz"`` in a column headed ``[Hz]``). A missing uncertainty gives the
    value alone to at most 6 significant digits, ``"(u n/a)"`` after it.

    Examples
    --------
    >>> pm_cell(32.61508823, 0.00015056, "Hz")
    '32.61509 ± 0.00015'
    >>> pm_cell(0.014998527, 4.6026e-06, "%", scale=100)
    '1.49985 ± 0.00046'
    >>> pm_cell(12345.678, 153.0, "Hz")
    '12.35 ± 0.15 kHz'
    """
    if not is_number(value):
        return "-" if value in (None, "") else str(value)
    v = float(value) * scale
    uu = float(u) * scale if is_number(u) else math.nan
    v_text, u_text, shown = split_with_uncertainty(v, uu, unit=unit)
    if v_text == NA:
        return NA
    tail = f" {shown}" if shown != unit else ""
    if u_text in (NA, "∞", "0") or v_text in ("∞", "-∞"):
        note = {NA: "u n/a", "∞": "u unbounded", "0": "u = 0"}.get(u_text, "u n/a")
        return f"{v_text}{tail} ({note})"
    return f"{v_text} ± {u_text}{tail}"


def damping_cell(ratio: Any) -> str:
    """A damping ratio as a bare number in per cent, 3 significant digits (common practice).

    Examples
    --------
    >>> damping_cell(0.0150432)
    '1.50'
    """
    if not is_number(ratio):
        return "-" if ratio in (None, "") else str(ratio)
    return format_quantity(float(ratio), "damping_pct", unit=False)


def number_cell(x: Any, kind: str) -> str:
    """A bare number of a :data:`modalnb._numbers.KINDS` kind (the heading carries the unit).

    Examples
    --------
    >>> number_cell(33.3366, "ratio"), number_cell(-12.345, "phase_deg")
    ('33.3', '-12.3')
    """
    if not is_number(x):
        return "-" if x in (None, "") else str(x)
    return format_quantity(float(x), kind, unit=False)
