"""The modal table as rows: the one flattening shared by every export (files, report).

Column order is the contract other tools rely on; see :mod:`modalnb.export`.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import numpy as np
import xarray as xr

__all__ = [
    "MODE_COLUMNS",
    "SHAPE_COLUMNS",
    "HIT_COLUMNS",
    "CAUTION",
    "modes_rows",
    "shapes_rows",
    "hits_rows",
]

MODE_COLUMNS = ("mode", "frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std", "regime")
SHAPE_COLUMNS = ("mode", "channel", "amplitude", "phase_deg")
HIT_COLUMNS = ("hit", "accepted", "reason", "warnings")

#: The caution carried by every report and export.
CAUTION = (
    "These modal parameters are estimates for engineering judgement, not a certification "
    "of a structure's safety; defer to local codes and standards and to licensed engineers."
)

_SHAPE_RENAME = {"shape_amplitude": "amplitude", "shape_phase_deg": "phase_deg"}


def _value(x: Any) -> Any:
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, bytes):
        x = x.decode()
    return x


def _csv_cell(x: Any) -> str:
    x = _value(x)
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        return "nan" if math.isnan(x) else repr(x)  # repr round-trips a float exactly
    return str(x)


def _rows(ds: xr.Dataset, dims: tuple[str, ...], first: Iterable[str], rename: dict[str, str]) -> list[dict[str, Any]]:
    names = [n for n, v in ds.data_vars.items() if tuple(v.dims) == dims]
    cols = {rename.get(n, n): n for n in names}
    order = [c for c in first if c not in dims]
    order += sorted(c for c in cols if c not in order)
    values = {c: ds.variables[cols[c]].values for c in order if c in cols}  # each array once
    rows = []
    index = [ds[d].values for d in dims]
    for idx in np.ndindex(*(len(i) for i in index)):
        row: dict[str, Any] = {d: _value(index[k][idx[k]]) for k, d in enumerate(dims)}
        for c, v in values.items():
            row[c] = _value(v[idx])
        rows.append(row)
    return rows


def modes_rows(result: xr.Dataset) -> list[dict[str, Any]]:
    """One dict per mode, columns in the order of ``modes.csv``."""
    return _rows(result, ("mode",), MODE_COLUMNS, {})


def shapes_rows(result: xr.Dataset) -> list[dict[str, Any]]:
    """One dict per (mode, channel), columns in the order of ``shapes.csv``."""
    return _rows(result, ("mode", "channel"), SHAPE_COLUMNS, _SHAPE_RENAME)


def hits_rows(result: xr.Dataset, checks: xr.Dataset | None = None) -> list[dict[str, Any]]:
    """One dict per hit: ``hit, accepted, reason, warnings``.

    ``accepted``/``reason`` are the decisions the fit used (``hit_accepted``,
    ``hit_reason`` of the result); ``warnings`` come from the hit checks.
    """
    rows = []
    warn = {}
    if checks is not None and "warnings" in checks:
        warn = {int(h): str(w) for h, w in zip(checks["hit"].values, checks["warnings"].values, strict=True)}
    if "hit_warnings" in result:
        warn = {int(h): str(w) for h, w in zip(result["hit"].values, result["hit_warnings"].values, strict=True)}
    for h, a, r in zip(result["hit"].values, result["hit_accepted"].values, result["hit_reason"].values, strict=True):
        rows.append({"hit": int(h), "accepted": bool(a), "reason": str(r), "warnings": warn.get(int(h), "")})
    return rows


def _json_safe(x: Any) -> Any:
    x = _value(x)
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, dict):
        return {str(k): _json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_json_safe(v) for v in x]
    if isinstance(x, np.ndarray):
        return [_json_safe(v) for v in x.tolist()]
    return x
