"""Small shared helpers: did-you-mean hints, argument checks, the band rule."""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable
from typing import Any

from ._errors import ModalnbError


def natural_key(name: str) -> list[Any]:
    """Sort key that puts 'n2' before 'n10' (digit runs compare as numbers).

    Examples
    --------
    >>> sorted(["n10", "n2", "m1"], key=natural_key)
    ['m1', 'n2', 'n10']
    """
    return [int(p) if p.isdigit() else p for p in re.split(r"(\d+)", name)]


def did_you_mean(name: str, options: Iterable[str]) -> str:
    """Return ``" Did you mean 'x'?"`` for the closest of `options`, or ``""``.

    Examples
    --------
    >>> did_you_mean("forse", ["force", "response"])
    " Did you mean 'force'?"
    """
    match = difflib.get_close_matches(str(name), [str(o) for o in options], n=1)
    return f" Did you mean {match[0]!r}?" if match else ""


def check_fraction(name: str, value: float, *, low: float = 0.0, high: float = 1.0) -> float:
    """Return `value` as float if ``low < value <= high``, else raise ``ModalnbError``.

    Examples
    --------
    >>> check_fraction("trigger", 0.1)
    0.1
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ModalnbError(f"`{name}` must be a number, was {value!r}.") from None
    if not (low < v <= high):
        raise ModalnbError(f"`{name}` must be in ({low}, {high}], was {value!r}.")
    return v


def check_positive(name: str, value: float) -> float:
    """Return `value` as float if it is finite and > 0, else raise ``ModalnbError``.

    Examples
    --------
    >>> check_positive("sample_rate", 2048)
    2048.0
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ModalnbError(f"`{name}` must be a positive number, was {value!r}.") from None
    if not (v > 0 and v < float("inf")):
        raise ModalnbError(f"`{name}` must be a positive finite number, was {value!r}.")
    return v


def frequency_list(name: str, value: object, error: type[ModalnbError] = ModalnbError) -> list[float]:
    """Sorted positive, finite frequencies (Hz) from `value`; None gives ``[]``.

    Raises `error` with a one-line message that starts with `name` otherwise.

    Examples
    --------
    >>> frequency_list("`add_modes`", [90, 40.5])
    [40.5, 90.0]
    """
    if value is None:
        return []
    if isinstance(value, (str, bytes)):  # not a list of digits
        raise error(f"{name} must be a list of frequencies in Hz, was {value!r}.")
    try:
        out = sorted(float(v) for v in (value if isinstance(value, Iterable) else [value]))
    except (TypeError, ValueError):
        raise error(f"{name} must be a list of frequencies in Hz, was {value!r}.") from None
    if any(not 0 < f < float("inf") for f in out):
        raise error(f"{name} frequencies must be positive and finite, was {value!r}.")
    return out


#: Highest analysed frequency as a fraction of the sample rate. Anti-alias filters of
#: acquisition systems roll off between about 0.40 fs and 0.5 fs, so above 0.45 fs a
#: record's content is filter response, not structure (common practice).
BAND_LIMIT_FRACTION = 0.45


def default_band(sample_rate: float) -> tuple[float, float]:
    """The band used when none is chosen: 0 Hz to ``BAND_LIMIT_FRACTION * sample_rate``.

    Examples
    --------
    >>> default_band(1000.0)
    (0.0, 450.0)
    """
    return 0.0, BAND_LIMIT_FRACTION * float(sample_rate)


def check_band(
    band: object,
    sample_rate: float | None = None,
    *,
    error: type[ModalnbError] = ModalnbError,
    source: str | None = None,
) -> tuple[float, float] | None:
    """Validate a frequency band ``(low, high)`` in Hz; None passes through.

    The one band rule of modalnb: two finite numbers with ``0 <= low < high``, and, when
    `sample_rate` is given, ``high`` at most the Nyquist frequency. Raises `error` with a
    one-line message (prefixed with `source`, a file or recipe name, when given).

    Examples
    --------
    >>> check_band([10, 500], 2048.0)
    (10.0, 500.0)
    >>> check_band(None) is None
    True
    """
    if band is None:
        return None
    where = f"{source}: " if source else ""
    try:
        if isinstance(band, (str, bytes)):  # "12" is not the pair (1, 2)
            raise TypeError
        lo, hi = (float(b) for b in band)  # type: ignore[union-attr]
    except (TypeError, ValueError):
        raise error(
            f"{where}`band` must be a pair (low, high) of frequencies in Hz, was {band!r}."
        ) from None
    if not (0.0 <= lo < hi < float("inf")):
        raise error(f"{where}`band` must satisfy 0 <= low < high (finite), was {band!r}.")
    if sample_rate is not None:
        nyquist = 0.5 * float(sample_rate)
        if hi > nyquist * (1 + 1e-9):
            raise error(
                f"{where}band upper edge {hi:g} Hz is above the Nyquist frequency {nyquist:g} Hz "
                "of the records. Hint: lower the band's upper edge."
            )
    return lo, hi
