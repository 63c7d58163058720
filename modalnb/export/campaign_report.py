"""Offline HTML report of a test campaign (``campaign.html``; plotly embedded once).

Plotly is imported inside the functions, so importing this module keeps the headless core
free of plotting code. Every text from a file (set labels, statuses, label columns) is
HTML-escaped.
"""

from __future__ import annotations

import html
import math
import os
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._display import PALETTE
from .._files import atomic_write_text
from ._rows import CAUTION

__all__ = ["campaign_html", "write_campaign_report", "label_axis"]


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _round(x: Any, digits: int = 4) -> str:
    """As an engineer writes it: 4 significant digits, blank for NaN."""
    if isinstance(x, (float, np.floating)):
        return "" if math.isnan(float(x)) else f"{float(x):.{digits}g}"
    return str(x)


def label_axis(ds: xr.Dataset, label: str | None = None) -> tuple[str, np.ndarray]:
    """The label the tracked modes are drawn against: `label`, else the first numeric
    manifest label, else the set's position in the manifest.

    Examples
    --------
    >>> ds = xr.Dataset(coords={"set": ["a", "b"], "temperature_c": ("set", [20.0, 30.0])})
    >>> label_axis(ds)[0]
    'temperature_c'
    """
    names = [c for c in ds.coords if c not in ("set", "mode") and ds[c].dims == ("set",)]
    if label is not None and label in names:
        return label, np.asarray(ds[label].values)
    for c in names:
        if np.issubdtype(ds[c].dtype, np.number):
            return c, np.asarray(ds[c].values)
    return "set number", np.arange(1, ds.sizes.get("set", 0) + 1)


def _figures(ds: xr.Dataset, label: str | None) -> list[Any]:
    import plotly.graph_objects as go
    from plotly.subplots import make_subplots

    name, x = label_axis(ds, label)
    sets = [str(s) for s in ds["set"].values.tolist()]
    figs = []
    for j, m in enumerate(ds["mode"].values.tolist()):
        fig = make_subplots(rows=1, cols=2, subplot_titles=(
            f"mode {m}: natural frequency [Hz]", f"mode {m}: damping ratio [%]"))
        for col, (var, scale) in enumerate((("frequency_hz", 1.0), ("damping_ratio", 100.0)), start=1):
            y = scale * np.asarray(ds[var].values[:, j], float)
            err = scale * np.asarray(ds[f"{var}_std"].values[:, j], float)
            status = [str(s) for s in ds["mode_status"].values[:, j]]
            colour = [PALETTE.error if s != "ok" else PALETTE.measured for s in status]
            fig.add_trace(go.Scatter(
                x=x, y=y, mode="markers", error_y={"type": "data", "array": err, "visible": True},
                text=[f"{_e(s)}: {_e(st)}" for s, st in zip(sets, status, strict=True)],
                hoverinfo="text+x+y", marker={"color": colour},
                name=var, showlegend=False), row=1, col=col)
            fig.update_xaxes(title_text=_e(name), row=1, col=col)
        fig.update_layout(height=330, margin={"t": 40, "b": 40})
        figs.append(fig)
    return figs


def _table(rows: list[list[Any]], columns: list[str]) -> str:
    head = "".join(f"<th>{_e(c)}</th>" for c in columns)
    body = "".join("<tr>" + "".join(f"<td>{_e(_round(v))}</td>" for v in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def campaign_html(ds: xr.Dataset, *, title: str = "modalnb test campaign", label: str | None = None) -> str:
    """The campaign report as one HTML string (works offline).

    Each tracked mode's frequency and damping against a label with 1-sigma error bars, the
    sets that failed or are out of tolerance, every set's status and verdict, the caution.

    Examples
    --------
    >>> ds = xr.Dataset({"set_status": ("set", ["ok"]), "verdict": ("set", [""]),
    ...                  "extra_modes": ("set", [""]), "records": ("set", ["a.nc"]),
    ...                  "n_modes": ("set", [0])}, coords={"set": ["a"], "mode": np.arange(0)})
    >>> "not a certification" in campaign_html(ds)
    True
    """
    figs = _figures(ds, label) if ds.sizes.get("mode", 0) and "frequency_hz" in ds else []
    parts = [fig.to_html(full_html=False, include_plotlyjs=(i == 0), config={"displaylogo": False})
             for i, fig in enumerate(figs)]
    sets = [str(s) for s in ds["set"].values.tolist()]
    status = [str(s) for s in ds["set_status"].values]
    verdict = [str(v) for v in ds["verdict"].values]
    flagged = [[s, st, v] for s, st, v in zip(sets, status, verdict, strict=True)
               if st != "ok" or v.startswith("fail")]
    all_rows = [[s, ds["records"].values[i], status[i], verdict[i], int(ds["n_modes"].values[i]),
                 ds["extra_modes"].values[i]] for i, s in enumerate(sets)]
    ref_rows = []
    if "reference_frequency_hz" in ds:
        for j, m in enumerate(ds["mode"].values.tolist()):
            ref_rows.append([m, float(ds["reference_frequency_hz"].values[j]),
                             100 * float(ds["reference_damping_ratio"].values[j])])
    n_ok = sum(s == "ok" for s in status)
    n_fail_v = sum(v.startswith("fail") for v in verdict)
    pal = PALETTE
    css = f"""
body{{font-family:system-ui,sans-serif;margin:1.5em auto;max-width:1100px;color:{pal.text}}}
table{{border-collapse:collapse;margin:.6em 0 1.4em}}td,th{{border:1px solid {pal.grid};padding:.25em .6em;text-align:left}}
th{{background:{pal.header}}}.caution{{border-left:5px solid {pal.error};background:{pal.caution};padding:.6em 1em}}
"""
    body = [
        f"<h1>{_e(title)}</h1>",
        f'<p class="caution"><b>Caution.</b> {_e(CAUTION)} A verdict compares measured natural '
        "frequencies with a reference and tolerances you chose; it is a screening aid, not an "
        "acceptance decision.</p>",
        f"<p>{len(sets)} sets: {n_ok} fitted, {len(sets) - n_ok} failed"
        + (f", {n_fail_v} with a failing verdict" if any(verdict) else "")
        + f". Reference: {_e(ds.attrs.get('reference', ''))}.</p>",
        "<h2>Failed and out-of-tolerance sets</h2>",
        _table(flagged, ["set", "status", "verdict"]) if flagged else "<p>None.</p>",
        "<h2>Reference modes</h2>",
        _table(ref_rows, ["mode", "natural frequency [Hz]", "damping ratio [%]"]),
        "<h2>Tracked modes</h2>",
        "<p>Error bars: 1 standard deviation of the fit. Red: missing, out of tolerance or not fitted.</p>",
        *parts,
        "<h2>Every set</h2>",
        _table(all_rows, ["set", "records", "status", "verdict", "modes", "extra modes"]),
    ]
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_e(title)}</title><style>{css}</style></head><body>\n"
            + "\n".join(body) + "\n</body></html>\n")


def write_campaign_report(ds: xr.Dataset, path: str | os.PathLike[str], **kwargs: Any) -> Path:
    """Write :func:`campaign_html` to `path` atomically.

    Examples
    --------
    >>> import tempfile
    >>> ds = xr.Dataset({"set_status": ("set", ["ok"]), "verdict": ("set", [""]),
    ...                  "extra_modes": ("set", [""]), "records": ("set", ["a.nc"]),
    ...                  "n_modes": ("set", [0])}, coords={"set": ["a"], "mode": np.arange(0)})
    >>> write_campaign_report(ds, Path(tempfile.mkdtemp()) / "c.html").name
    'c.html'
    """
    return atomic_write_text(path, campaign_html(ds, **kwargs))
