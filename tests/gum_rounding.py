"""The GUM 7.2.6 rounding written independently of modalnb._numbers, for the tests.

JCGM 100:2008 (GUM), 7.2.6: quote the standard uncertainty to at most two significant
digits and round the estimate to the same decimal place (its example: y = 10.057 62 Ω,
u = 27 mΩ -> 10.058 Ω). Rounded to the nearest, halves away from zero, on the decimal a
person reads (``repr`` of the float).
"""

from __future__ import annotations

from decimal import ROUND_HALF_UP, Decimal


def gum_pm(value: float, u: float, scale: float = 1.0) -> str:
    """``"value ± u"`` rounded per GUM 7.2.6 (u > 0, finite; u after rounding < 100)."""
    v = Decimal(repr(float(value))) * Decimal(repr(float(scale)))
    w = Decimal(repr(float(u))) * Decimal(repr(float(scale)))
    first = w.adjusted()  # power of ten of u's first significant digit
    place = Decimal(10) ** (first - 1)
    r = w.quantize(place, rounding=ROUND_HALF_UP)
    if r.adjusted() > first:  # 0.0996 -> 0.100: two digits are 0.10
        place = Decimal(10) ** first
        r = w.quantize(place, rounding=ROUND_HALF_UP)
    assert r < 100, "this helper keeps the unit; larger uncertainties change it"
    return f"{v.quantize(place, rounding=ROUND_HALF_UP):f} ± {r:f}"


def test_gum_pm_own_examples():
    # GUM 7.2.6's own example, and one that rounds u up into the next decade
    assert gum_pm(10.05762, 0.027) == "10.058 ± 0.027"
    assert gum_pm(1.23456, 0.0996) == "1.23 ± 0.10"
    assert gum_pm(0.0150, 4.6e-6, scale=100) == "1.50000 ± 0.00046"
