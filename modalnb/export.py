"""Exports of the modal table: CSV, netCDF, JSON, and the terminal table.

Files written by :func:`write_modal_table` (the contract other tools rely on):

* ``modes.csv``  — ``mode,frequency_hz,damping_ratio,frequency_hz_std,damping_ratio_std,regime``,
  then every other per-mode quantity;
* ``shapes.csv`` — ``mode,channel,amplitude,phase_deg``, then the other per-(mode, channel)
  quantities;
* ``hits.csv``   — ``hit,accepted,reason,warnings`` (``accepted`` is ``true``/``false``);
* ``modes.nc`` (the result Dataset), ``modes.json`` (everything above), ``recipe.json``.

All files of one call are first written to temporary files in the output folder and then
renamed into place, so an existing folder is updated, never left half-written.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from collections.abc import Iterable
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._files import staged_files
from .recipe import Recipe

__all__ = [
    "MODE_COLUMNS",
    "SHAPE_COLUMNS",
    "HIT_COLUMNS",
    "CAUTION",
    "modes_rows",
    "shapes_rows",
    "hits_rows",
    "write_modal_table",
    "format_modal_table",
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
    names = [n for n in ds.data_vars if tuple(ds[n].dims) == dims]
    cols = {rename.get(n, n): n for n in names}
    order = [c for c in first if c not in dims]
    order += sorted(c for c in cols if c not in order)
    rows = []
    index = [ds[d].values for d in dims]
    for idx in np.ndindex(*(len(i) for i in index)):
        row: dict[str, Any] = {d: _value(index[k][idx[k]]) for k, d in enumerate(dims)}
        for c in order:
            if c in cols:
                row[c] = _value(ds[cols[c]].values[idx])
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


def _csv_text(rows: list[dict[str, Any]], columns: list[str]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    for row in rows:
        w.writerow([_csv_cell(row.get(c, "")) for c in columns])
    return buf.getvalue()


def _columns(rows: list[dict[str, Any]], first: tuple[str, ...]) -> list[str]:
    cols = list(first)
    for row in rows:
        for c in row:
            if c not in cols:
                cols.append(c)
    return cols


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


def _netcdf_ready(result: xr.Dataset) -> xr.Dataset:
    out = result.copy()
    attrs = {}
    for k, v in out.attrs.items():
        if isinstance(v, (str, int, float, np.integer, np.floating)) and not isinstance(v, bool):
            attrs[k] = v
        else:
            attrs[k] = json.dumps(_json_safe(v))
    out.attrs = attrs
    for name in list(out.variables):
        out[name].attrs = {k: (v if isinstance(v, (str, int, float)) and not isinstance(v, bool) else json.dumps(_json_safe(v)))
                           for k, v in out[name].attrs.items()}
    return out


def write_modal_table(
    result: xr.Dataset,
    out_dir: str | os.PathLike[str],
    *,
    recipe: Recipe | None = None,
    checks: xr.Dataset | None = None,
) -> dict[str, Path]:
    """Write the modal table files into `out_dir` (created if needed), all or nothing.

    Parameters
    ----------
    result : xarray.Dataset
        The output of :func:`modalnb.fit_modes`.
    out_dir : path
        Output folder; existing files of the same names are replaced only once every new
        file has been written completely.
    recipe : Recipe, optional
        Written as ``recipe.json``; default the recipe the table carries
        (``result.attrs["recipe"]``, set by :func:`modalnb.fit_modes`), if any.
    checks : xarray.Dataset, optional
        Output of :func:`modalnb.check_hits`, for the ``warnings`` column.

    Returns
    -------
    dict
        File kind -> path written.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    m_rows, s_rows, h_rows = modes_rows(result), shapes_rows(result), hits_rows(result, checks)
    texts = {
        "modes.csv": _csv_text(m_rows, _columns(m_rows, MODE_COLUMNS)),
        "shapes.csv": _csv_text(s_rows, _columns(s_rows, SHAPE_COLUMNS)),
        "hits.csv": _csv_text(h_rows, list(HIT_COLUMNS)),
        "modes.json": json.dumps(
            _json_safe(
                {
                    "caution": CAUTION,
                    "attrs": dict(result.attrs),
                    "modes": m_rows,
                    "shapes": s_rows,
                    "hits": h_rows,
                }
            ),
            indent=2,
        )
        + "\n",
    }
    if recipe is None and isinstance(result.attrs.get("recipe"), str):
        recipe = Recipe.from_json(result.attrs["recipe"])
    if recipe is not None:
        texts["recipe.json"] = recipe.to_json()
    with staged_files(out) as stage:
        for name, text in texts.items():
            stage(name).write_bytes(text.encode("utf-8"))
        _netcdf_ready(result).to_netcdf(stage("modes.nc"), engine="h5netcdf")
    return {name: out / name for name in [*texts, "modes.nc"]}


def format_modal_table(result: xr.Dataset) -> str:
    """The modal table as aligned text with units in the header (for the terminal).

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"frequency_hz": ("mode", [12.5]), "frequency_hz_std": ("mode", [0.01]),
    ...                  "damping_ratio": ("mode", [0.012]), "damping_ratio_std": ("mode", [0.0004]),
    ...                  "regime": ("mode", ["underdamped"]), "status": ("mode", ["ok"])},
    ...                 coords={"mode": [1]})
    >>> print(format_modal_table(ds).splitlines()[0])
    mode  f_n [Hz]  ± [Hz]  zeta [%]  ± [%]  Q [-]  regime       status
    """
    header = ["mode", "f_n [Hz]", "± [Hz]", "zeta [%]", "± [%]", "Q [-]", "regime", "status"]
    rows = []
    for k in range(result.sizes.get("mode", 0)):
        def g(name: str, scale: float = 1.0, fmt: str = "{:.4g}", k: int = k) -> str:
            if name not in result:
                return "-"
            v = _value(result[name].values[k])
            if isinstance(v, float):
                return "nan" if math.isnan(v) else fmt.format(v * scale)
            return str(v)

        q = "-"
        if "damping_ratio" in result:
            z = float(result["damping_ratio"].values[k])
            q = f"{1 / (2 * z):.4g}" if z > 0 else "nan"
        if "q_factor" in result:
            q = g("q_factor")
        rows.append([
            str(_value(result["mode"].values[k])),
            g("frequency_hz", fmt="{:.6g}"),
            g("frequency_hz_std", fmt="{:.2g}"),
            g("damping_ratio", 100, "{:.4g}"),
            g("damping_ratio_std", 100, "{:.2g}"),
            q,
            g("regime"),
            g("status"),
        ])
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)).rstrip()]
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() for r in rows]
    return "\n".join(lines)
