"""The modal table as files: CSV, netCDF and JSON (and the recipe beside them).

Files written by :func:`write_modal_table` (the contract other tools rely on):

* ``modes.csv``  — ``mode,frequency_hz,damping_ratio,frequency_hz_std,damping_ratio_std,regime``,
  then every other per-mode quantity;
* ``shapes.csv`` — ``mode,channel,amplitude,phase_deg``, then the other per-(mode, channel)
  quantities;
* ``hits.csv``   — ``hit,accepted,reason,warnings,notes`` (``accepted`` is ``true``/``false``;
  ``notes``: advisories that neither reject nor warn);
* ``node_shapes.csv`` — ``mode,node,node_name,direction,role,amplitude,phase_deg,
  mass_normalised_kg^-1/2``: the shapes over nodes of a roving-hammer or several-setup
  table (:mod:`modalnb.node_shapes`; always written, header only for a table without them);
* ``poles_set_aside.csv`` — ``pole,frequency_hz,damping_ratio,frequency_hz_std,energy,reason``:
  the fitted poles that are residual terms, not modes (always written; header only when
  there are none);
* ``modes.nc`` (the result Dataset), ``modes.json`` (everything above), ``recipe.json``;
* ``frf.nc`` when the records are given and carry the hammer force: measured FRF (H1),
  coherence and the table's model FRF, real and imaginary parts apart
  (:func:`modalnb.export.frf_file.write_table_frf`).

The folder is replaced as a whole (:func:`modalnb._files.replaced_folder`): the new set is
written into a sibling folder and exchanged with the old one in one step, so a reader sees
the complete old or the complete new set (files of the caller, ``extra_files``, such as
the HTML report, belong to the same set); the user's own files in the folder are kept.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._files import replaced_folder
from .._netcdf import netcdf4_engine
from ..recipe import Recipe
from ._aside import ASIDE_COLUMNS, aside_rows
from ._rows import (
    CAUTION,
    HIT_COLUMNS,
    MODE_COLUMNS,
    NODE_SHAPE_COLUMNS,
    SHAPE_COLUMNS,
    _csv_cell,
    _json_safe,
    hits_rows,
    modes_rows,
    node_shapes_rows,
    shapes_rows,
)

__all__ = ["write_modal_table"]


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
    extra_files: Mapping[str, Callable[[Path], object]] | None = None,
    records: xr.Dataset | None = None,
    durable: bool = True,
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
    extra_files : mapping of file name to writer, optional
        More files of the same set: ``writer(path)`` writes the file at `path` in the
        staging folder (e.g. ``{"report.html": lambda p: write_report(ds, result, None, p)}``),
        after the table's own files (in the order given).
    records : xarray.Dataset, optional
        The record set of the table: when it carries ``force``, ``frf.nc`` is written too
        (without force there is no FRF and no ``frf.nc``).
    durable : bool
        Flush the files to disk before the folder is replaced (default). False for a
        caller that keeps checksums of the files and writes a set again when they do not
        match (:func:`modalnb.fit_campaign`'s set folders).

    Returns
    -------
    dict
        File kind -> path written.
    """
    out = Path(out_dir)
    m_rows, s_rows, h_rows = modes_rows(result), shapes_rows(result), hits_rows(result, checks)
    n_rows = node_shapes_rows(result)
    texts = {
        "modes.csv": _csv_text(m_rows, _columns(m_rows, MODE_COLUMNS)),
        "shapes.csv": _csv_text(s_rows, _columns(s_rows, SHAPE_COLUMNS)),
        "hits.csv": _csv_text(h_rows, list(HIT_COLUMNS)),
        "node_shapes.csv": _csv_text(n_rows, _columns(n_rows, NODE_SHAPE_COLUMNS)),
        "poles_set_aside.csv": _csv_text(aside_rows(result), list(ASIDE_COLUMNS)),
        "modes.json": json.dumps(
            _json_safe(
                {
                    "caution": CAUTION,
                    "attrs": dict(result.attrs),
                    "modes": m_rows,
                    "shapes": s_rows,
                    "hits": h_rows,
                    "node_shapes": n_rows,
                    "poles_set_aside": aside_rows(result),
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
    extra = dict(extra_files or {})
    if records is not None and "force" in records.data_vars and "frf.nc" not in extra:
        from .frf_file import write_table_frf

        extra["frf.nc"] = lambda path: write_table_frf(records, result, path)
    with replaced_folder(out, sync=durable) as stage:
        for name, text in texts.items():
            (stage / name).write_bytes(text.encode("utf-8"))
        _netcdf_ready(result).to_netcdf(stage / "modes.nc", engine=netcdf4_engine())
        for name, write in extra.items():
            write(stage / name)
    return {name: out / name for name in [*texts, "modes.nc", *extra]}
