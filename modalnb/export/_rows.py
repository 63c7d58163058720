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
    "NODE_SHAPE_COLUMNS",
    "node_shapes_rows",
]

MODE_COLUMNS = ("mode", "frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std", "regime")
SHAPE_COLUMNS = ("mode", "channel", "amplitude", "phase_deg")
HIT_COLUMNS = ("hit", "accepted", "reason", "warnings", "notes")
NODE_SHAPE_COLUMNS = ("mode", "node", "node_name", "direction", "role", "amplitude", "phase_deg",
                      "mass_normalised_kg^-1/2")

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


_NODE_RENAME = {"node_shape_amplitude": "amplitude", "node_shape_phase_deg": "phase_deg",
                "node_shape_mass_normalised": "mass_normalised_kg^-1/2"}


def node_shapes_rows(result: xr.Dataset) -> list[dict[str, Any]]:
    """One dict per (mode, node) of the shapes over nodes, columns in the order of
    ``node_shapes.csv`` (none when the table has no shapes over nodes)."""
    if "node_shape_amplitude" not in result.data_vars:
        return []
    nodes = [str(n) for n in result["node"].values.tolist()]
    per_node = {col: ([_value(v) for v in result[coord].values] if coord in result.coords
                      else [""] * len(nodes))
                for col, coord in (("node_name", "node_name"), ("direction", "node_direction"),
                                   ("role", "node_role"))}
    index = {n: j for j, n in enumerate(nodes)}
    out = []
    for row in _rows(result, ("mode", "node"), NODE_SHAPE_COLUMNS, _NODE_RENAME):
        j = index[str(row["node"])]
        out.append({"mode": row.pop("mode"), "node": row.pop("node"),
                    **{col: values[j] for col, values in per_node.items()}, **row})
    return out


def hits_rows(result: xr.Dataset, checks: xr.Dataset | None = None) -> list[dict[str, Any]]:
    """One dict per hit: ``hit, accepted, reason, warnings, notes``.

    ``accepted``/``reason`` are the decisions the fit used (``hit_accepted``,
    ``hit_reason`` of the result); ``warnings`` and ``notes`` (advisories that neither
    reject nor warn) come from the hit checks.
    """
    rows = []

    def column(name: str) -> dict[int, str]:
        out: dict[int, str] = {}
        if checks is not None and name in checks:
            out = {int(h): str(w) for h, w in zip(checks["hit"].values, checks[name].values, strict=True)}
        if f"hit_{name}" in result:
            out = {int(h): str(w) for h, w in zip(result["hit"].values, result[f"hit_{name}"].values,
                                                  strict=True)}
        return out

    warn, notes = column("warnings"), column("notes")
    for h, a, r in zip(result["hit"].values, result["hit_accepted"].values, result["hit_reason"].values, strict=True):
        rows.append({"hit": int(h), "accepted": bool(a), "reason": str(r), "warnings": warn.get(int(h), ""),
                     "notes": notes.get(int(h), "")})
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
