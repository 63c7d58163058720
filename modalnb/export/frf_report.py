"""The report's FRF section: measured against model FRF (magnitude, phase) and coherence.

:func:`frf_section_html` gives one self-contained HTML fragment (a heading, a short
explanation, one figure per excitation point and channel) for the offline report. The
figures need plotly.js on the page, which the report embeds once
(``include_plotlyjs`` of its first figure); the fragment never embeds it. Colours come
from :data:`modalnb._display.PALETTE`, as in the notebook panels. Numbers shown go
through :mod:`modalnb._numbers`.

plotly is imported inside the function only (the export layer stays importable without
it).
"""

from __future__ import annotations

import html
from typing import Any

import numpy as np
import xarray as xr

from .._display import PALETTE, decimate_for_display, to_db
from .._errors import ModalnbError
from .._numbers import format_quantity
from ..frf_compare import compare_frf

__all__ = ["frf_section_html", "REPORT_POINTS"]

#: Most points per trace in the report (several figures per page; the notebook keeps more).
REPORT_POINTS = 800


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def _index(y: np.ndarray, n: int) -> np.ndarray:
    finite = np.where(np.isfinite(y), y, np.nanmin(y) if np.isfinite(y).any() else 0.0)
    idx, _ = decimate_for_display(np.arange(y.size), finite, n)
    return np.asarray(idx, int)


def _figure(both: xr.Dataset, e: int, c: int, band: list[float] | None) -> Any:
    import plotly.graph_objects as go
    from plotly.subplots import make_subplots

    f = both["frequency"].values
    h = both["frf"].values[e, c]
    g = both["model_frf"].values[e, c]
    coh = both["coherence"].values[e, c]
    mag = np.where(np.isfinite(h), to_db(np.abs(h)), np.nan)
    idx = _index(mag, REPORT_POINTS)
    fig = make_subplots(rows=3, cols=1, shared_xaxes=True, vertical_spacing=0.06,
                        row_heights=[0.45, 0.3, 0.25])
    series = (("measured", h, mag, PALETTE.measured, 1),
              ("model", g, np.where(np.isfinite(g), to_db(np.abs(g)), np.nan), PALETTE.model, 1),
              ("measured phase", h, np.degrees(np.angle(h)), PALETTE.measured, 2),
              ("model phase", g, np.degrees(np.angle(g)), PALETTE.model, 2))
    for name, src, y, colour, row in series:
        y = np.where(np.isfinite(src), y, np.nan)
        fig.add_trace(go.Scatter(x=f[idx], y=y[idx], mode="lines", name=name,
                                 showlegend=row == 1, line={"color": colour, "width": 1}),
                      row=row, col=1)
        # plotly reads names as its own markup; these are our own words, nothing from a file
    cidx = _index(coh, REPORT_POINTS)
    fig.add_trace(go.Scatter(x=f[cidx], y=coh[cidx], mode="lines", name="coherence",
                             line={"color": PALETTE.residual, "width": 1}), row=3, col=1)
    units = str(both["frf"].attrs.get("units", ""))
    fig.update_yaxes(title_text=f"dB re 1 {_e(units)}", row=1, col=1)
    fig.update_yaxes(title_text="phase [°]", range=[-185, 185], row=2, col=1)
    fig.update_yaxes(title_text="coherence", range=[0, 1.05], row=3, col=1)
    fig.update_xaxes(title_text="frequency [Hz]", row=3, col=1)
    if band:
        fig.update_xaxes(range=band)
    exc, ch = str(both["excitation"].values[e]), str(both["channel"].values[c])
    fig.update_layout(height=560, template="plotly_white", colorway=list(PALETTE.series),
                      margin={"l": 60, "r": 20, "t": 50, "b": 40},
                      legend={"orientation": "h", "y": 1.08},
                      title=f"{_e(both.attrs.get('estimator', 'H1'))} {_e(exc)} → {_e(ch)}")
    return fig


def frf_section_html(records: xr.Dataset, result: xr.Dataset) -> str:
    """The report's FRF section as one HTML fragment.

    For every excitation point and channel: the measured FRF (:func:`modalnb.frf`, H1
    over the hits the table accepted) and the modal model's FRF
    (:func:`modalnb.synthesise_frf`), magnitude in dB and phase, with the coherence below
    (Bendat & Piersol 2010, *Random Data*). Exponentially windowed records are labelled
    (the model then carries the window's damping). Records without force give a short
    paragraph saying so instead of figures.

    Parameters
    ----------
    records : xarray.Dataset
        The record set the table was fitted on.
    result : xarray.Dataset
        Its :func:`modalnb.fit_modes` table.

    Returns
    -------
    str
        A ``<section class="modalnb-frf-section">`` holding one ``<div
        class="modalnb-frf-plot">`` per (excitation, channel); plotly.js is not embedded.

    Examples
    --------
    >>> from modalnb.demo import load_demo                  # doctest: +SKIP
    >>> import modalnb                                      # doctest: +SKIP
    >>> ds = load_demo()                                    # doctest: +SKIP
    >>> part = frf_section_html(ds, modalnb.fit_modes(ds))  # doctest: +SKIP
    >>> part.count('class="modalnb-frf-plot"')              # doctest: +SKIP
    6
    """
    head = "<h2>FRFs: measured against the modal model, and coherence</h2>"
    try:
        both = compare_frf(records, result)
    except ModalnbError as exc:
        return (f'<section class="modalnb-frf-section">{head}<p class="modalnb-frf-none">'
                f"No FRF: {_e(' '.join(str(exc).split()))}</p></section>")
    band = result.attrs.get("band")
    band = ([float(np.ravel(band)[0]), float(np.ravel(band)[1])]
            if band is not None and np.size(band) == 2 else None)
    hits = ", ".join(
        f"{_e(x)}: {format_quantity(int(n), 'count')} hit(s)"
        for x, n in zip(both["excitation"].values, both["n_hits"].values, strict=True))
    notes = [f"Estimator: {_e(both.attrs['label'])}, one transform per hit over the whole "
             f"record, averaged over the accepted hits ({hits}); frequency step "
             f"{format_quantity(float(both.attrs['frequency_step_hz']), 'frequency_hz')}."]
    if both.attrs.get("model_note", "none") != "none":
        notes.append(f"Model: {_e(both.attrs['model_note'])}.")
    if both.attrs.get("model_left_out", "none") != "none":
        notes.append(f"Not in the model: {_e(both.attrs['model_left_out'])}.")
    if str(both.attrs.get("coherence_note", "")).strip():
        notes.append(f"{_e(both.attrs['coherence_note'])}.")
    parts = [f'<section class="modalnb-frf-section">{head}',
             "<p>Where the model follows the measured FRF around each peak, the table describes "
             "the structure in the band; between and beyond the peaks the model holds the fitted "
             "modes only (no terms for modes outside the band, no mass line at a driving point), "
             "so it may depart from the measurement there. A coherence well below 1 marks "
             "frequencies where the hits disagree (noise, a bad hit) and the measured FRF is not "
             "to be trusted.</p>",
             *(f"<p class='modalnb-frf-note'>{n}</p>" for n in notes)]
    for e, exc in enumerate(both["excitation"].values):
        for c, ch in enumerate(both["channel"].values):
            fig = _figure(both, e, c, band)
            parts.append(f'<div class="modalnb-frf-plot" data-excitation="{_e(exc)}" '
                         f'data-channel="{_e(ch)}">'
                         + fig.to_html(full_html=False, include_plotlyjs=False,
                                       config={"displaylogo": False})
                         + "</div>")
    parts.append("</section>")
    return "\n".join(parts)
