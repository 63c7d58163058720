"""The one number formatter: numbers shown to people, written as an engineer writes them.

Every number modalnb shows on a screen (the notebook panels, the terminal table, the HTML
report) goes through this module; the files (CSV, netCDF, JSON) keep full precision and
never do.

Two entry points:

* :func:`format_with_uncertainty` -- a value with its standard uncertainty, rounded as
  JCGM 100:2008 (GUM), *Evaluation of measurement data -- Guide to the expression of
  uncertainty in measurement*, 7.2.6 says: the uncertainty to at most two significant
  digits, the value to the same decimal place. An uncertainty of 100 or more (after
  rounding) is shown in the next larger SI unit (Hz -> kHz, ms -> s) where the unit has one.
* :func:`format_quantity` -- a value of a known kind (time, dB, frequency, damping, ...)
  with digits that suit the kind (times to the sample step, dB to 0.1, ...).

Rules kept by both: no scientific e-notation ever (``Decimal`` fixed-point output), at most
6 significant digits unless a stated uncertainty justifies more, ``-0`` shown as ``0``, NaN
as ``n/a``. Rounding is half away from zero on the shortest decimal form of the float
(``repr``), so ``0.35`` rounds as the decimal 0.35 that a person reads, not as its binary
neighbour.

Pure standard library (``decimal``, ``math``); imports nothing of modalnb above the base.
"""

from __future__ import annotations

import math
from decimal import ROUND_HALF_UP, Decimal

from ._errors import OptionError

__all__ = [
    "KINDS",
    "MAX_DIGITS",
    "format_with_uncertainty",
    "split_with_uncertainty",
    "format_quantity",
    "split_quantity",
    "gum_round",
]

#: Most significant digits of a number shown without an uncertainty that justifies more.
MAX_DIGITS = 6

#: What :func:`format_quantity` knows, each with its unit and its digits (see there).
KINDS = ("time", "db", "frequency_hz", "damping_pct", "ratio", "amplitude", "phase_deg",
         "percent", "count")

NA = "n/a"

# SI prefixes, smallest to largest; "u" is read as micro but written as "µ"
_PREFIXES = ("p", "n", "µ", "m", "", "k", "M", "G", "T")
#: units whose SI prefix may be changed (no "g": in vibration work it is also the unit of
#: acceleration, 9.806 65 m/s², which has no "kg")
_PREFIXABLE = ("Hz", "s", "m", "N", "Pa", "V", "A", "W", "J")


def _dec(x: float) -> Decimal:
    """The shortest decimal that reads back as `x` (what ``repr`` prints)."""
    return Decimal(repr(float(x)))


def _fixed(d: Decimal) -> str:
    """`d` in fixed-point notation (never e-notation), ``-0`` written ``0``."""
    text = format(d, "f")
    if text.startswith("-") and not any(c in "123456789" for c in text):
        text = text[1:]
    return text


def _split_unit(unit: str) -> tuple[int, str] | None:
    """(prefix index, base) of an SI unit we may re-prefix, else None."""
    if unit in _PREFIXABLE:
        return _PREFIXES.index(""), unit
    if len(unit) >= 2 and unit[1:] in _PREFIXABLE:
        p = "µ" if unit[0] == "u" else unit[0]
        if p in _PREFIXES and p != "":
            return _PREFIXES.index(p), unit[1:]
    return None


def _larger_unit(unit: str) -> str | None:
    """The unit 1000 times `unit` (``Hz`` -> ``kHz``, ``ms`` -> ``s``), or None."""
    parts = _split_unit(unit)
    if parts is None or parts[0] + 1 >= len(_PREFIXES):
        return None
    return _PREFIXES[parts[0] + 1] + parts[1]


def gum_round(u: float) -> tuple[Decimal, int]:
    """`u` rounded to two significant digits, and the decimal exponent of its last digit.

    GUM 7.2.6: "It usually suffices to quote u_c(y) and U ... to at most two significant
    digits". Rounding is to the nearest (half away from zero); GUM 7.2.6 allows rounding up
    but asks for common sense (its 28.05 kHz becomes 28 kHz), so we round to the nearest.

    Parameters
    ----------
    u : float
        A finite, positive uncertainty.

    Returns
    -------
    rounded : decimal.Decimal
        `u` to two significant digits.
    exponent : int
        The power of ten of its last kept digit (the value is rounded to the same place).

    Examples
    --------
    >>> gum_round(0.00035)
    (Decimal('0.00035'), -5)
    >>> gum_round(0.0996)  # rounds up to the next decade: still two digits, 0.10
    (Decimal('0.10'), -2)
    """
    d = _dec(abs(u))
    e = d.adjusted() - 1
    r = d.quantize(Decimal(1).scaleb(e), rounding=ROUND_HALF_UP)
    if r.adjusted() - 1 > e:  # 0.0996 -> 0.100: keep two digits, 0.10
        e += 1
        r = d.quantize(Decimal(1).scaleb(e), rounding=ROUND_HALF_UP)
    return r, e


def _sig(value: float, digits: int = MAX_DIGITS) -> str:
    """`value` to at most `digits` significant digits, trailing zeros kept (fixed point)."""
    d = _dec(value)
    if d == 0:
        return "0"
    q = d.quantize(Decimal(1).scaleb(d.adjusted() - digits + 1), rounding=ROUND_HALF_UP)
    if q.adjusted() != d.adjusted():  # 9.999995 -> 10.0000: drop the extra digit
        q = d.quantize(Decimal(1).scaleb(q.adjusted() - digits + 1), rounding=ROUND_HALF_UP)
    return _fixed(q)


def _trim(text: str) -> str:
    """Trailing zeros (and a bare decimal point) removed: ``12.500`` -> ``12.5``."""
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def split_with_uncertainty(value: float, u: float, *, unit: str = "") -> tuple[str, str, str]:
    """The parts of :func:`format_with_uncertainty`: (value text, uncertainty text, unit).

    For tables that show the value and its uncertainty in separate columns. The unit is
    the one both numbers are written in: `unit`, or a larger one when the rounded
    uncertainty is 100 or more (``Hz`` -> ``kHz``). An uncertainty that is NaN gives
    ``"n/a"``, one that is infinite ``"∞"``, and the value is then written to at most
    6 significant digits; an uncertainty of zero gives ``"0"`` and the same value digits.

    Examples
    --------
    >>> split_with_uncertainty(12345.678, 153.0, unit="Hz")
    ('12.35', '0.15', 'kHz')
    >>> split_with_uncertainty(0.5, float("nan"), unit="s")
    ('0.5', 'n/a', 's')
    """
    u = float(u)
    value = float(value)
    if not math.isnan(u) and u < 0:
        raise OptionError(f"an uncertainty must not be negative, was {u!r} (a standard uncertainty is >= 0).")
    if math.isnan(value):
        return NA, (NA if math.isnan(u) else _trim(_sig(u, 2))), unit
    if math.isinf(value):
        return ("-∞" if value < 0 else "∞"), NA, unit
    if math.isnan(u) or math.isinf(u) or u == 0:
        u_text = NA if math.isnan(u) else ("∞" if math.isinf(u) else "0")
        return _trim(_sig(value)), u_text, unit
    v = _dec(value)
    ud = _dec(u)
    while True:
        r, e = gum_round(float(ud))
        bigger = _larger_unit(unit) if r >= 100 else None
        if bigger is None:
            break
        unit, ud, v = bigger, ud.scaleb(-3), v.scaleb(-3)
    v_text = _fixed(v.quantize(Decimal(1).scaleb(e), rounding=ROUND_HALF_UP))
    return v_text, _fixed(r), unit


def format_with_uncertainty(value: float, u: float, *, unit: str = "", style: str = "pm") -> str:
    """A value with its standard uncertainty, rounded as GUM 7.2.6 says.

    The uncertainty is rounded to at most two significant digits and the value to the same
    decimal place (JCGM 100:2008, 7.2.6: "if y = 10.057 62 Ω with u_c(y) = 27 mΩ, y should
    be rounded to 10.058 Ω"). An uncertainty of 100 or more after rounding is written in
    the next larger SI unit (Hz -> kHz -> MHz, ms -> s); units without one (%, dB, °, none)
    keep the unit and an integer uncertainty. No e-notation.

    Parameters
    ----------
    value : float
        The estimate, in `unit`.
    u : float
        Its standard uncertainty, in `unit` (>= 0; NaN: not estimated; inf: unbounded).
    unit : str
        Unit symbol appended after a space (``"Hz"``, ``"%"``, ...); ``""`` for none.
    style : {"pm", "concise"}
        ``"pm"``: ``"12.346 ± 0.012 Hz"`` (the form the report and the panels use);
        ``"concise"``: ``"12.346(12) Hz"``, the uncertainty in units of the value's last
        digits (GUM 7.2.2, form 2).

    Returns
    -------
    str
        E.g. ``"10.058 ± 0.027 Ω"``; ``"12.3457 Hz (u n/a)"`` when `u` is NaN.

    Examples
    --------
    >>> format_with_uncertainty(10.05762, 0.027, unit="Ω")  # GUM 7.2.6's own example
    '10.058 ± 0.027 Ω'
    >>> format_with_uncertainty(100.02147, 0.00035, unit="g", style="concise")
    '100.02147(35) g'
    >>> format_with_uncertainty(1.5, 0.00046, unit="%")
    '1.50000 ± 0.00046 %'
    >>> format_with_uncertainty(12345.678, 153.0, unit="Hz")
    '12.35 ± 0.15 kHz'
    """
    if style not in ("pm", "concise"):
        raise OptionError(f"`style` must be 'pm' or 'concise', was {style!r}.")
    v_text, u_text, unit = split_with_uncertainty(value, u, unit=unit)
    tail = f" {unit}" if unit else ""
    if u_text in (NA, "∞", "0") or v_text in (NA, "∞", "-∞"):
        note = {NA: "u n/a", "∞": "u unbounded", "0": "u = 0"}.get(u_text, "u n/a")
        return f"{v_text}{tail} ({note})"
    if style == "pm":
        return f"{v_text} ± {u_text}{tail}"
    # concise: the uncertainty's digits at the value's last places, or the uncertainty as
    # written when it reaches the decimal point (GUM 7.2.2 form 2: "100.021 47(35) g")
    r = Decimal(u_text)
    if "." in u_text and r < 1:
        digits = u_text.replace(".", "").lstrip("0")
    else:
        digits = u_text
    return f"{v_text}({digits}){tail}"


# -- quantities of a known kind ------------------------------------------------------------

#: unit appended by default, per kind
_UNITS = {"time": "s", "db": "dB", "frequency_hz": "Hz", "damping_pct": "%", "ratio": "",
          "amplitude": "", "phase_deg": "°", "percent": "%", "count": ""}


def _places(x: float, decimals: int) -> str:
    """`x` to `decimals` places, but never more than :data:`MAX_DIGITS` significant digits."""
    d = _dec(x)
    if d != 0 and d.adjusted() + decimals + 1 > MAX_DIGITS:
        return _sig(x)
    return _fixed(d.quantize(Decimal(1).scaleb(-decimals), rounding=ROUND_HALF_UP))


def _step_decimals(step: float) -> int:
    """Decimals that tell neighbouring samples `step` apart: 10**-d <= step."""
    return max(0, math.ceil(-math.log10(step) - 1e-12))


def split_quantity(value: float, kind: str, *, step: float | None = None,
                   u: float | None = None) -> tuple[str, str]:
    """The parts of :func:`format_quantity`: (number text, unit).

    For table cells whose heading carries the unit. See :func:`format_quantity` for the
    kinds, `step` and `u`.

    Examples
    --------
    >>> split_quantity(0.000732421875, "time", step=1 / 4096)
    ('0.7', 'ms')
    >>> split_quantity(0.0150, "damping_pct", u=0.0000046)
    ('1.50000', '%')
    """
    if kind not in _UNITS:
        from ._utils import did_you_mean

        raise OptionError(f"unknown quantity kind {kind!r}; kinds are {', '.join(KINDS)}"
                          f"{did_you_mean(kind, KINDS)}.")
    value = float(value)
    unit = _UNITS[kind]
    if kind == "time":  # ms below one second, else s
        scale, unit = (1e3, "ms") if abs(value) < 1 else (1.0, "s")
        value *= scale
        step = None if step is None else float(step) * scale
        u = None if u is None else float(u) * scale
    elif kind in ("damping_pct", "percent"):  # a fraction in, per cent out
        value *= 100
        u = None if u is None else float(u) * 100
    if math.isnan(value):
        return NA, unit
    if math.isinf(value):
        return ("-∞" if value < 0 else "∞"), unit
    if u is not None and math.isfinite(float(u)) and float(u) > 0:
        v_text, _, unit = split_with_uncertainty(value, float(u), unit=unit)
        return v_text, unit
    if step is not None:
        step = float(step)
        if not (math.isfinite(step) and step > 0):
            raise OptionError(f"`step` must be a positive number, was {step!r}.")
        return _places(value, _step_decimals(step)), unit
    if kind == "count":
        return str(int(round(value))), unit
    if kind == "db":
        return _places(value, 1), unit  # 0.1 dB: common practice
    if kind in ("phase_deg", "percent"):
        return _places(value, 1), unit  # 0.1 ° / 0.1 %: common practice
    if kind in ("damping_pct", "ratio", "amplitude"):
        return _sig(value, 3), unit  # three significant digits: common practice
    if kind == "time":
        return _trim(_sig(value, 4)), unit  # no sample step given: 4 significant digits
    return _trim(_sig(value)), unit  # frequency_hz: at most 6 significant digits


def format_quantity(value: float, kind: str, *, step: float | None = None,
                    u: float | None = None, unit: bool = True) -> str:
    """A number of a known kind, with the digits an engineer would write.

    Kinds (and what they take):

    ``time``
        seconds in; written in ms below 1 s, else in s; to the sample `step` when given
        (neighbouring samples stay apart: ``10**-d <= step``), else 4 significant digits.
    ``db``
        decibels, to 0.1 dB (common practice).
    ``frequency_hz``
        hertz, at most 6 significant digits (trailing zeros dropped), or to `step` (the
        frequency resolution) when given.
    ``damping_pct``
        a damping *ratio* in (0.015), written in per cent to 3 significant digits
        (``"1.50 %"``; common practice).
    ``ratio``, ``amplitude``
        dimensionless or in the record's unit, 3 significant digits (common practice).
    ``phase_deg``
        degrees, to 0.1° (common practice).
    ``percent``
        a *fraction* in (0.05), written in per cent to 0.1 % (``"5.0 %"``).
    ``count``
        a whole number.

    With a standard uncertainty `u` (in the unit of `value` as given: seconds, a ratio,
    ...), the number is rounded to the uncertainty's place by the GUM 7.2.6 rule instead
    (see :func:`format_with_uncertainty`, which writes both).

    Parameters
    ----------
    value : float
        The number, in the unit the kind takes.
    kind : str
        One of :data:`KINDS`.
    step : float, optional
        The resolution (sample step for ``time``, in seconds).
    u : float, optional
        A standard uncertainty that fixes the decimal place.
    unit : bool
        Append the unit (``"0.7 ms"``); False gives the bare number for a cell whose
        heading says the unit (use :func:`split_quantity` when the unit may change, as
        ``time`` does).

    Examples
    --------
    >>> format_quantity(0.000732421875, "time", step=1 / 4096)
    '0.7 ms'
    >>> format_quantity(60.0844, "db")
    '60.1 dB'
    >>> format_quantity(0.015, "damping_pct")
    '1.50 %'
    >>> format_quantity(0.05, "percent")
    '5.0 %'
    >>> format_quantity(4.60263e-06, "amplitude")
    '0.00000460'
    """
    text, u_nit = split_quantity(value, kind, step=step, u=u)
    if not unit or not u_nit or text == NA:
        return text
    return f"{text}°" if u_nit == "°" else f"{text} {u_nit}"
