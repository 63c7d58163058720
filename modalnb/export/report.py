"""Self-contained, offline HTML report of one analysis (plotly with the library embedded).

Plotly is imported inside the functions, so importing this module keeps the headless core
free of plotting code. Every text that comes from a file (channel names, reasons, titles)
is HTML-escaped before it reaches the page or a figure.
"""

from __future__ import annotations

import html
import math
import os
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._display import PALETTE, decimate_for_display
from .._errors import ModalnbError
from .._files import atomic_write_text
from ._aside import ASIDE_COLUMNS, ASIDE_TITLE, aside_rows
from ._rows import CAUTION, hits_rows, modes_rows

__all__ = ["write_report", "report_html"]

def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _fmt(x: Any) -> str:
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        return "nan" if math.isnan(x) else f"{x:.6g}"
    return str(x)


def _table(rows: list[dict[str, Any]], columns: list[str], css: str) -> str:
    head = "".join(f"<th>{_e(c)}</th>" for c in columns)
    body = "".join(
        "<tr>" + "".join(f"<td>{_e(_fmt(r.get(c, '')))}</td>" for c in columns) + "</tr>" for r in rows
    )
    return f'<table class="{css}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def _figures(records: xr.Dataset, result: xr.Dataset, model: xr.DataArray | None) -> list[Any]:
    import plotly.graph_objects as go
    from plotly.subplots import make_subplots

    figs = []
    time = records["time"].values
    hits = records["hit"].values
    accepted = dict(zip(result["hit"].values.tolist(), result["hit_accepted"].values.tolist(), strict=True))
    channels = [str(c) for c in records["channel"].values]
    # 1. spectra summed over channels, modes marked
    fs = float(records.attrs.get("sample_rate", 1 / np.median(np.diff(time))))
    use = time >= 0
    acc = [i for i, h in enumerate(hits) if accepted.get(int(h), True)] or list(range(len(hits)))
    spec = np.abs(np.fft.rfft(records["response"].values[acc][:, :, use], axis=-1)).mean(axis=0).sum(axis=0)
    freqs = np.fft.rfftfreq(int(use.sum()), 1 / fs)
    fx, fy = decimate_for_display(freqs, spec)
    fig = go.Figure(go.Scatter(x=fx, y=fy, mode="lines", line={"color": PALETTE.measured},
                               name="spectrum (sum of channels)"))
    for k, f in enumerate(result["frequency_hz"].values.tolist()):
        if np.isfinite(f):
            fig.add_vline(x=f, line={"color": PALETTE.mode, "dash": "dot"}, annotation_text=f"mode {k + 1}")
    fig.update_layout(title="Response spectrum, accepted hits (dotted: fitted modes)", xaxis_title="frequency [Hz]",
                      yaxis_title=f"|X| [{_e(records['response'].attrs.get('units', ''))}·s]", yaxis_type="log",
                      height=380, margin={"t": 50})
    figs.append(fig)
    # 2. force pulses per hit
    if "force" in records:
        fig = go.Figure(layout={"colorway": list(PALETTE.series)})
        win = (time >= -0.002) & (time <= 0.02)
        for i, h in enumerate(hits):
            fig.add_trace(go.Scatter(x=time[win] * 1e3, y=records["force"].values[i, win], mode="lines",
                                     name=f"hit {int(h)}" + ("" if accepted.get(int(h), True) else " (rejected)")))
        fig.update_layout(title="Hammer force per hit", xaxis_title="time [ms]",
                          yaxis_title=f"force [{_e(records['force'].attrs.get('units', ''))}]", height=340, margin={"t": 50})
        figs.append(fig)
    # 3. measured vs model and residual, first accepted hit, every channel
    i0 = acc[0]
    n_ch = len(channels)
    fig = make_subplots(rows=n_ch, cols=1, shared_xaxes=True, vertical_spacing=0.02,
                        subplot_titles=[_e(c) for c in channels])
    for c in range(n_ch):
        y = records["response"].values[i0, c]
        tt, yy = decimate_for_display(time, y)
        fig.add_trace(go.Scatter(x=tt, y=yy, mode="lines", line={"color": PALETTE.measured, "width": 1},
                                 name="measured", legendgroup="m", showlegend=c == 0), row=c + 1, col=1)
        if model is not None:
            m = model.isel(hit=i0, channel=c)
            mt = m["time"].values
            tt, yy = decimate_for_display(mt, m.values)
            fig.add_trace(go.Scatter(x=tt, y=yy, mode="lines", line={"color": PALETTE.model, "width": 1},
                                     name="fitted model", legendgroup="f", showlegend=c == 0), row=c + 1, col=1)
            sel = np.isin(time, mt)
            tt, yy = decimate_for_display(mt, y[sel] - m.values)
            fig.add_trace(go.Scatter(x=tt, y=yy, mode="lines", line={"color": PALETTE.residual, "width": 1},
                                     name="residual", legendgroup="r", showlegend=c == 0), row=c + 1, col=1)
    fig.update_layout(title=f"Hit {int(hits[i0])}: measured, fitted model and residual", height=max(400, 170 * n_ch),
                      margin={"t": 60})
    fig.update_xaxes(title_text="time [s]", row=n_ch, col=1)
    figs.append(fig)
    return figs


def report_html(
    records: xr.Dataset,
    result: xr.Dataset,
    checks: xr.Dataset | None = None,
    *,
    model: xr.DataArray | None = None,
    title: str = "modalnb report",
) -> str:
    """The report as one HTML string (plotly.js embedded once; works offline).

    Parameters
    ----------
    records : xarray.Dataset
        The record set.
    result : xarray.Dataset
        Output of :func:`modalnb.fit_modes`.
    checks : xarray.Dataset, optional
        Output of :func:`modalnb.check_hits` (warnings column).
    model : xarray.DataArray, optional
        Fitted model over (hit, channel, time) in the fit window, drawn over the data.
        Default: rebuilt from the table's poles (:func:`modalnb.estimate.model_traces`).
    title : str
        Page title (escaped).

    Returns
    -------
    str
        A complete HTML page; it keeps the safety caution (estimates, not certification).

    Examples
    --------
    >>> from modalnb import fit_modes, records_from_arrays
    >>> t = np.arange(2048) / 1024.0
    >>> ds = records_from_arrays(np.exp(-2 * t) * np.sin(2 * np.pi * 40 * t), 1024.0)
    >>> page = report_html(ds, fit_modes(ds), title="bay <3>")
    >>> page.startswith("<!DOCTYPE html>"), "<title>bay &lt;3&gt;</title>" in page
    (True, True)
    """
    if model is None:
        from ..estimate import model_traces

        try:
            model = model_traces(records, result)
        except (ModalnbError, np.linalg.LinAlgError):
            model = None  # the report still shows the data, the table and the decisions
    figs = _figures(records, result, model)
    parts = []
    for i, fig in enumerate(figs):
        parts.append(fig.to_html(full_html=False, include_plotlyjs=(i == 0), config={"displaylogo": False}))
    m_rows = modes_rows(result)
    m_cols = [c for c in ("mode", "frequency_hz", "frequency_hz_std", "damping_ratio", "damping_ratio_std", "regime",
                          "q_factor", "damped_frequency_hz", "xcheck_log_decrement_damping",
                          "xcheck_half_power_damping", "xcheck_hilbert_damping", "status")
              if not m_rows or c in m_rows[0]]
    s_rows = []
    for k, mode in enumerate(result["mode"].values.tolist()):
        for c, ch in enumerate(result["channel"].values.tolist()):
            s_rows.append({"mode": mode, "channel": ch,
                           "amplitude": float(result["shape_amplitude"].values[k, c]),
                           "phase_deg": float(result["shape_phase_deg"].values[k, c])})
    h_rows = hits_rows(result, checks)
    attrs = {k: v for k, v in result.attrs.items() if k != "recipe"}
    pal = PALETTE
    css = f"""
body{{font-family:system-ui,sans-serif;margin:1.5em auto;max-width:1100px;color:{pal.text}}}
table{{border-collapse:collapse;margin:.6em 0 1.4em}}td,th{{border:1px solid {pal.grid};padding:.25em .6em;text-align:left}}
th{{background:{pal.header}}}.caution{{border-left:5px solid {pal.error};background:{pal.caution};padding:.6em 1em}}
code{{background:{pal.header};padding:0 .2em}}
"""
    body = [
        f"<h1>{_e(title)}</h1>",
        f'<p class="caution"><b>Caution.</b> {_e(CAUTION)}</p>',
        "<h2>Modal table</h2>",
        _table(m_rows, m_cols, "modes"),
        "<h2>Mode shapes</h2>",
        "<p>Amplitude normalised to 1 on the largest channel, phase in degrees relative to it; "
        "sensor direction signs removed.</p>",
        _table(s_rows, ["mode", "channel", "amplitude", "phase_deg"], "shapes"),
        f"<h2>{_e(ASIDE_TITLE)}</h2>",
        "<p>Fitted poles that are residual terms of the model, not modes (they absorb the "
        "force pulse, an offset, out-of-band modes or noise; they stay in the model so the "
        "modes' numbers do not change), each with the reason.</p>",
        _table(aside_rows(result), list(ASIDE_COLUMNS), "aside") if aside_rows(result)
        else "<p><i>none</i></p>",
        "<h2>Hit decisions</h2>",
        _table(h_rows, ["hit", "accepted", "reason", "warnings"], "hits"),
        "<h2>Figures</h2>",
        *parts,
        "<h2>Settings</h2>",
        f"<pre>{_e(attrs)}</pre>",
    ]
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        f"<title>{_e(title)}</title><style>{css}</style></head><body>\n"
        + "\n".join(body)
        + "\n</body></html>\n"
    )


def write_report(
    records: xr.Dataset,
    result: xr.Dataset,
    checks: xr.Dataset | None,
    path: str | os.PathLike[str],
    **kwargs: Any,
) -> Path:
    """Write :func:`report_html` to `path` atomically and return the path.

    Examples
    --------
    >>> import tempfile
    >>> from modalnb import fit_modes, records_from_arrays
    >>> t = np.arange(2048) / 1024.0
    >>> ds = records_from_arrays(np.exp(-2 * t) * np.sin(2 * np.pi * 40 * t), 1024.0)
    >>> out = write_report(ds, fit_modes(ds), None, Path(tempfile.mkdtemp()) / "report.html")
    >>> out.name, out.stat().st_size > 1_000_000  # plotly.js embedded: opens offline
    ('report.html', True)
    """
    return atomic_write_text(path, report_html(records, result, checks, **kwargs))
