"""The poles set aside (residual terms of the model, not modes) as rows, for every export.

The engine keeps in its model every pole the data need, but only the poles an engineer
can sign off are modes (:mod:`modalnb.estimate._select` gives the rules); the others are
listed here with the reason, never in the modal table. Columns of ``poles_set_aside.csv``:
``pole,frequency_hz,damping_ratio,frequency_hz_std,energy,reason``.
"""

from __future__ import annotations

from typing import Any

import xarray as xr

from ._rows import _value

__all__ = ["ASIDE_COLUMNS", "ASIDE_TITLE", "aside_rows"]

ASIDE_COLUMNS = ("pole", "frequency_hz", "damping_ratio", "frequency_hz_std", "energy", "reason")

#: The heading of the table wherever it is shown.
ASIDE_TITLE = "Poles set aside (not modes)"

_SOURCE = {"frequency_hz": "aside_frequency_hz", "damping_ratio": "aside_damping_ratio",
           "frequency_hz_std": "aside_frequency_hz_std", "energy": "aside_energy",
           "reason": "aside_reason"}


def aside_rows(result: xr.Dataset) -> list[dict[str, Any]]:
    """One dict per pole set aside (empty for a table without them), numbered from 1.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"aside_frequency_hz": ("aside_pole", [812.5]),
    ...                  "aside_reason": ("aside_pole", ["too weak"])})
    >>> aside_rows(ds)[0]["pole"], aside_rows(ds)[0]["reason"]
    (1, 'too weak')
    """
    n = result.sizes.get("aside_pole", 0)
    rows = []
    for k in range(n):
        row: dict[str, Any] = {"pole": k + 1}
        for col, var in _SOURCE.items():
            row[col] = _value(result[var].values[k]) if var in result else ""
        rows.append(row)
    return rows
