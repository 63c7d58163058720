"""The HTML report: one analysis as a self-contained, offline test document.

The page is made of :data:`SECTIONS`, each an ``(id, title, function)``; ``function(ctx)``
returns the section's HTML fragment from a :class:`ReportContext` (records, table, hit
checks, recipe, fitted model). In order: the title block (what was analysed, when, by whom,
with which modalnb and which records), the caution, the modal table, the damping
cross-checks, the poles set aside, the mode shapes (one small table per mode), the hit
decisions, the figures, the FRFs with coherence (records with force), the moving shape view,
then any ``extra_sections`` and, last, the recipe pretty-printed.

Wiring in another section takes one line, either as an entry of :data:`SECTIONS`::

    ("frf", "Frequency response", lambda ctx: frf_section_html(ctx.records, ctx.result)),

or per call, ``report_html(..., extra_sections=[frf_section_html])``: an extra section is a
``(title, html_fragment)`` pair or a callable ``fn(records, result)`` returning a fragment
or a ``(title, fragment)`` pair. A fragment's plotly figures must not carry plotly.js
(``include_plotlyjs=False``): the page embeds it once, in its head.

Every number goes through the one formatter (:mod:`modalnb._numbers`): values with their
standard uncertainty as ``value ± u`` rounded as JCGM 100:2008 (GUM) 7.2.6 says, damping
in per cent, no e-notation; the files keep full precision. Every text that comes from a
file (channel names, reasons, titles, notes) is HTML-escaped. Colours and the mode-line
style come from :data:`modalnb._display.PALETTE`, shared with the notebook widgets. The
page fits a 1,280 px window (tables wrap, figures follow the page width) and has a print
stylesheet (A4 or Letter: page margins in mm, no table row or figure split across pages).

Plotly is imported inside the functions, so importing this module keeps the headless core
free of plotting code.
"""

from __future__ import annotations

import datetime as _dt
import html
import json
import math
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._display import PALETTE, decimate_for_display
from .._errors import ModalnbError, RecipeError
from .._files import atomic_write_text
from .._numbers import format_quantity, format_with_uncertainty
from ..recipe import Recipe, package_version
from ._aside import ASIDE_TITLE, aside_rows
from ._cells import damping_cell, is_number, number_cell, pm_cell
from ._rows import CAUTION, _value, hits_rows

__all__ = ["SECTIONS", "ReportContext", "write_report", "report_html", "checksum_short"]

#: An extra section: (title, HTML fragment), or fn(records, result) -> fragment or (title, fragment).
ExtraSection = tuple[str, str] | Callable[..., Any]


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def checksum_short(checksum: str | None) -> str:
    """A records checksum as the title block shows it: the algorithm and 12 hex digits.

    Examples
    --------
    >>> checksum_short("sha256:3d0db8de7f8cc33998bcc8556ffb8aad")
    'sha256:3d0db8de7f8c'
    >>> checksum_short(None)
    'not recorded'
    """
    if not checksum:
        return "not recorded"
    algo, _, digest = str(checksum).rpartition(":")
    return f"{algo}:{digest[:12]}" if algo else digest[:12]


@dataclass
class ReportContext:
    """What every section function reads (built once by :func:`report_html`)."""

    records: xr.Dataset
    result: xr.Dataset
    checks: xr.Dataset | None
    model: xr.DataArray | None
    recipe: Recipe | None
    heading: str
    analysed_at: str
    geometry: Any = None  # a modalnb.geometry.Geometry for the moving shape view

    def var(self, name: str, k: int) -> Any:
        """Per-mode value `name` of mode position `k` (None when the table lacks it)."""
        return _value(self.result[name].values[k]) if name in self.result else None

    @property
    def n_modes(self) -> int:
        return int(self.result.sizes.get("mode", 0))

    @property
    def channels(self) -> list[str]:
        return [str(c) for c in self.result["channel"].values] if "channel" in self.result.coords \
            else [str(c) for c in self.records["channel"].values]


# -- building blocks -------------------------------------------------------------------------

def _table(head: Sequence[str], rows: Sequence[Sequence[str]], css: str, *,
           numeric: Sequence[int] = (), words: Sequence[int] = (),
           caption: str | None = None) -> str:
    """An HTML table; every cell escaped; `numeric` columns right-aligned and unbroken,
    `words` columns broken only between words (other cells anywhere, to fit the page)."""
    num, wrd = set(numeric), set(words)

    def cls(i: int) -> str:
        return " class=num" if i in num else (" class=word" if i in wrd else "")

    cap = f"<caption>{_e(caption)}</caption>" if caption else ""
    th = "".join(f'<th{" class=num" if i in num else ""}>{_e(h)}</th>' for i, h in enumerate(head))
    body = "".join(
        "<tr>" + "".join(f"<td{cls(i)}>{_e(c)}</td>" for i, c in enumerate(r)) + "</tr>"
        for r in rows)
    return f'<table class="{css}">{cap}<thead><tr>{th}</tr></thead><tbody>{body}</tbody></table>'


def _text(x: Any) -> str:
    x = _value(x)
    return "-" if x is None or x == "" else str(x)


def _figure_html(fig: Any) -> str:
    return fig.to_html(full_html=False, include_plotlyjs=False, default_width="100%",
                       config={"displaylogo": False, "responsive": True})


# -- sections ---------------------------------------------------------------------------------

def _title_block(ctx: ReportContext) -> str:
    r = ctx.recipe
    checksum = (r.records_checksum if r else None) or ctx.result.attrs.get("input_checksum")
    rows = [
        ("Structure / test", (r.title if r and r.title else "not given")),
        ("Analysis date", ctx.analysed_at),
        ("Analyst", (r.analyst if r and r.analyst else "not given")),
        ("Records", (r.source if r and r.source else str(ctx.records.attrs.get("source", "not given")))),
        ("Records checksum", checksum_short(checksum)),
        ("modalnb version", package_version()),
    ]
    if r and r.replayed_on_checksum:
        rows.append(("Replayed on records", checksum_short(r.replayed_on_checksum)
                     + " (other records than the recipe was made on: the table may differ)"))
    if r and r.created_with and r.created_with != f"modalnb {package_version()}":
        rows.append(("Recipe written by", r.created_with))
    rows.append(("Notes", (r.notes if r and r.notes else "none")))
    body = "".join(f"<tr><th scope=row>{_e(k)}</th><td>{_e(v)}</td></tr>" for k, v in rows)
    return f'<table class="titleblock"><tbody>{body}</tbody></table>'


def _caution(ctx: ReportContext) -> str:
    return f'<p class="caution"><b>Caution.</b> {_e(CAUTION)}</p>'


def _modal_table(ctx: ReportContext) -> str:
    if ctx.n_modes == 0:
        return "<p><i>No modes in the table.</i></p>"
    head = ["Mode", "Natural frequency f_n [Hz]", "Damping ratio ζ [%]", "Quality factor Q",
            "Damped frequency f_d [Hz]", "Regime", "Status"]
    rows = []
    for k in range(ctx.n_modes):
        z = ctx.var("damping_ratio", k)
        q = ctx.var("q_factor", k)
        if q is None and is_number(z) and z > 0:
            q = 1 / (2 * z)
        rows.append([
            _text(ctx.result["mode"].values[k]),
            pm_cell(ctx.var("frequency_hz", k), ctx.var("frequency_hz_std", k), "Hz"),
            pm_cell(z, ctx.var("damping_ratio_std", k), "%", scale=100),
            number_cell(q, "ratio"),
            number_cell(ctx.var("damped_frequency_hz", k), "frequency_hz"),
            _text(ctx.var("regime", k)), _text(ctx.var("status", k)),
        ])
    note = ("<p class=note>Each value with its standard uncertainty (one standard deviation of "
            "the fit, coverage factor 1), rounded as JCGM 100:2008 (GUM) 7.2.6 says: the "
            "uncertainty to two significant digits, the value to the same decimal place.</p>")
    return _table(head, rows, "modes", numeric=(1, 2, 3, 4), words=(0, 5, 6)) + note


_XCHECKS = (("xcheck_log_decrement_damping", "Log decrement ζ [%]", "log_decrement"),
            ("xcheck_half_power_damping", "Half-power bandwidth ζ [%]", "half_power"),
            ("xcheck_hilbert_damping", "Hilbert envelope ζ [%]", "hilbert"))


def _cross_checks(ctx: ReportContext) -> str:
    present = [x for x in _XCHECKS if x[0] in ctx.result]
    if not present or ctx.n_modes == 0:
        return "<p><i>No cross-checks in this table.</i></p>"
    head = ["Mode", "Fit ζ [%]", *(x[1] for x in present), "Note"]
    rows = [[_text(ctx.result["mode"].values[k]), damping_cell(ctx.var("damping_ratio", k)),
             *(damping_cell(ctx.var(x[0], k)) for x in present), _text(ctx.var("xcheck_note", k))]
            for k in range(ctx.n_modes)]
    out = _table(head, rows, "xchecks", numeric=tuple(range(1, len(present) + 2)),
                 words=(0, len(present) + 2))
    biases = ctx.result.attrs.get("cross_check_biases")
    if isinstance(biases, str):
        try:
            biases = json.loads(biases)
        except json.JSONDecodeError:
            biases = None
    if isinstance(biases, dict):
        names = {x[2]: x[1].removesuffix(" ζ [%]") for x in _XCHECKS}
        items = "".join(f"<li><b>{_e(names.get(k, k))}</b>: {_e(v)}</li>" for k, v in biases.items())
        out += ("<p class=note>Single-mode estimates from the band-passed data, to compare "
                f"with the fit's damping; their known biases:</p><ul class=note>{items}</ul>")
    return out


def _aside(ctx: ReportContext) -> str:
    rows = aside_rows(ctx.result)
    if not rows:
        return "<p><i>None: every fitted pole is a mode of the table.</i></p>"
    strongest = None
    if "mode_energy" in ctx.result and ctx.n_modes:
        e = np.asarray(ctx.result["mode_energy"].values, float)
        strongest = float(np.nanmax(e)) if np.isfinite(e).any() else None
    head = ["Pole", "Frequency [Hz]", "Damping ratio ζ [%]",
            "Energy [% of strongest mode]" if strongest else "Energy", "Reason"]
    body = []
    for r in rows:
        en = r.get("energy")
        en_text = (number_cell(en / strongest, "percent") if strongest and is_number(en)
                   else number_cell(en, "ratio"))
        body.append([_text(r["pole"]), pm_cell(r["frequency_hz"], r["frequency_hz_std"], "Hz"),
                     damping_cell(r["damping_ratio"]), en_text, _text(r["reason"])])
    return ("<p class=note>Fitted poles that are residual terms of the model, not modes (they "
            "absorb the force pulse, an offset, out-of-band modes or noise; they stay in the "
            "model so the modes' numbers do not change), each with the reason.</p>"
            + _table(head, body, "aside", numeric=(1, 2, 3), words=(0,)))


def _shapes(ctx: ReportContext) -> str:
    if ctx.n_modes == 0 or "shape_amplitude" not in ctx.result:
        return "<p><i>No mode shapes in this table.</i></p>"
    amp = np.asarray(ctx.result["shape_amplitude"].values, float)
    phase = np.asarray(ctx.result["shape_phase_deg"].values, float) \
        if "shape_phase_deg" in ctx.result else np.full_like(amp, np.nan)
    coords = ctx.result.coords
    extra = [c for c in ("node", "direction") if c in coords and coords[c].dims == ("channel",)]
    blocks = []
    for k in range(ctx.n_modes):
        cap = _mode_caption(ctx, k)
        rows = []
        for c, ch in enumerate(ctx.channels):
            rows.append([ch, *(_text(coords[x].values[c]) for x in extra),
                         number_cell(amp[k, c], "amplitude"), number_cell(phase[k, c], "phase_deg")])
        head = ["Channel", *(x.capitalize() for x in extra), "Amplitude", "Phase [°]"]
        n = len(head)
        blocks.append(_table(head, rows, "shapes", numeric=(n - 2, n - 1), caption=cap))
    return ("<p class=note>Amplitude normalised to 1 on the largest channel, phase in degrees "
            "relative to it; sensor direction signs removed.</p>"
            f'<div class="shape-grid">{"".join(blocks)}</div>')


def _mode_caption(ctx: ReportContext, k: int) -> str:
    """``Mode 2: f_n = 32.61509 ± 0.00015 Hz`` (GUM 7.2.6 through the one formatter)."""
    f, u = ctx.var("frequency_hz", k), ctx.var("frequency_hz_std", k)
    text = format_with_uncertainty(float(f), float(u) if is_number(u) else math.nan, unit="Hz") \
        if is_number(f) else "-"
    return f"Mode {_text(ctx.result['mode'].values[k])}: f_n = {text}"


def _node_shapes(ctx: ReportContext) -> str:
    """Shapes over nodes (roving hammer, several setups): one table per mode, with the
    driving-point scaling when the table has it; empty for a table without them."""
    r = ctx.result
    if ctx.n_modes == 0 or "node_shape_amplitude" not in r:
        return ""
    amp = np.asarray(r["node_shape_amplitude"].values, float)
    phase = np.asarray(r["node_shape_phase_deg"].values, float)
    scaled = np.asarray(r["node_shape_mass_normalised"].values, float) \
        if "node_shape_mass_normalised" in r else np.full_like(amp, np.nan)
    names = [_text(n) for n in (r["node_name"].values if "node_name" in r.coords else r["node"].values)]
    dirs = [_text(d) for d in r["node_direction"].values] if "node_direction" in r.coords else [""] * len(names)
    roles = [_text(x) for x in r["node_role"].values] if "node_role" in r.coords else [""] * len(names)
    blocks = []
    for k in range(ctx.n_modes):
        cap = _mode_caption(ctx, k)
        mass, mpc, status = ctx.var("modal_mass_kg", k), ctx.var("node_shape_mpc", k), ctx.var("node_shape_status", k)
        if is_number(mass) and np.isfinite(mass):
            cap += f"; modal mass {format_quantity(float(mass), 'amplitude', unit=False)} kg"
        if is_number(mpc) and np.isfinite(mpc):
            cap += f"; MPC {format_quantity(float(mpc), 'ratio', unit=False)}"
        if status and str(status) != "ok":
            cap += f"; {_text(status)}"
        rows = [[n, d, ro, number_cell(amp[k, j], "amplitude"), number_cell(phase[k, j], "phase_deg"),
                 number_cell(scaled[k, j], "amplitude")]
                for j, (n, d, ro) in enumerate(zip(names, dirs, roles, strict=True))]
        head = ["Node", "Direction", "Role", "Amplitude", "Phase [°]", "Scaled [kg^-1/2]"]
        blocks.append(_table(head, rows, "node-shapes", numeric=(3, 4, 5), words=(2,), caption=cap))
    return ("<p class=note>Shapes over the structure's nodes from every hit's residues "
            "(roving hammer or several setups): amplitude normalised to 1 on the largest node, "
            "phase relative to it, direction signs applied; scaled: mass-normalised through "
            "the driving point (blank without one).</p>"
            f'<div class="shape-grid">{"".join(blocks)}</div>')


def _hits(ctx: ReportContext) -> str:
    rows = hits_rows(ctx.result, ctx.checks)
    ch = ctx.checks
    by_hit: dict[int, dict[str, Any]] = {}
    if ch is not None:
        for i, h in enumerate(ch["hit"].values):
            by_hit[int(h)] = {n: _value(ch[n].values[i]) for n in
                              ("user_decision", "peak_force", "pulse_duration_s", "snr_db", "notes")
                              if n in ch and ch[n].dims == ("hit",)}
    force_units = str(ctx.records["force"].attrs.get("units", "")) if "force" in ctx.records else ""
    step = 1.0 / float(ctx.records.attrs["sample_rate"]) if "sample_rate" in ctx.records.attrs else None
    head = ["Hit", "Used in fit", "Decision by", f"Peak force [{force_units or '-'}]",
            "Pulse [ms]", "Response SNR [dB]", "Reason", "Warnings", "Notes"]
    body = []
    for r in rows:
        m = by_hit.get(r["hit"], {})
        decision = m.get("user_decision") or ""
        dur = m.get("pulse_duration_s")
        dur_text = "-"
        if is_number(dur) and np.isfinite(dur):  # pulses are far below 1 s: ms, as the heading says
            dur_text = format_quantity(float(dur), "time", step=step, unit=False)
        body.append([
            str(r["hit"]), "yes" if r["accepted"] else "no",
            f"you ({decision})" if decision else "checks",
            number_cell(m.get("peak_force"), "ratio") if is_number(m.get("peak_force")) else "-",
            dur_text,
            number_cell(m.get("snr_db"), "db") if is_number(m.get("snr_db")) else "-",
            _text(r["reason"]), _text(r["warnings"]), _text(m.get("notes", r.get("notes", ""))),
        ])
    n_used = sum(1 for r in rows if r["accepted"])
    return (f"<p>{n_used} of {len(rows)} hits used in the fit.</p>"
            + _table(head, body, "hits", numeric=(3, 4, 5), words=(0, 1, 2)))


def _figures_section(ctx: ReportContext) -> str:
    figs = _figures(ctx.records, ctx.result, ctx.model)
    return "".join(f'<div class="figure">{_figure_html(f)}</div>' for f in figs)


def _recipe(ctx: ReportContext) -> str:
    parts = []
    if ctx.recipe is not None:
        parts.append("<p class=note>Every choice behind this table (replay it with "
                     "<code>modalnb fit RECORDS --recipe recipe.json --out FOLDER</code>):</p>"
                     f'<pre class="json">{_e(ctx.recipe.to_json())}</pre>')
    else:
        parts.append("<p><i>No recipe with this table.</i></p>")
    settings = ctx.result.attrs.get("settings")
    if isinstance(settings, str):
        try:
            settings = json.loads(settings)
        except json.JSONDecodeError:
            pass
    if settings:
        text = json.dumps(settings, indent=2, default=str) if not isinstance(settings, str) else settings
        parts.append("<details><summary>Settings the fit used (automatic choices "
                     f'resolved)</summary><pre class="json">{_e(text)}</pre></details>')
    return "".join(parts)


def _frf_section(ctx: ReportContext) -> str:
    """Measured against model FRFs and coherence (:mod:`.frf_report`); empty without force."""
    if "force" not in ctx.records:
        return ""
    from .frf_report import frf_section_html

    return frf_section_html(ctx.records, ctx.result)


def _shape_view_section(ctx: ReportContext) -> str:
    """The moving shape view on the structure's geometry (:mod:`.shape_view`)."""
    import warnings

    from .._errors import ModalnbWarning
    from .shape_view import shape_section_html

    with warnings.catch_warnings():
        # nodes without a position are placed on a line; the view names them itself
        warnings.simplefilter("ignore", ModalnbWarning)
        try:
            return shape_section_html(ctx.records, ctx.result, ctx.geometry)
        except ModalnbError as exc:
            return f"<p class=note>No moving shape view: {_e(' '.join(str(exc).split()))}</p>"


#: The report's sections, in page order: (id, title, fn(ctx) -> HTML fragment).
SECTIONS: list[tuple[str, str, Callable[[ReportContext], str]]] = [
    ("analysis", "What was analysed", _title_block),
    ("caution", "", _caution),
    ("modes", "Modal table", _modal_table),
    ("cross-checks", "Damping cross-checks", _cross_checks),
    ("aside", ASIDE_TITLE, _aside),
    ("shapes", "Mode shapes", _shapes),
    ("node-shapes", "Shapes over nodes", _node_shapes),
    ("hits", "Hit decisions", _hits),
    ("figures", "Figures", _figures_section),
    ("frf", "", _frf_section),
    ("shape-view", "", _shape_view_section),
]

#: The last section, after any extra ones.
RECIPE_SECTION: tuple[str, str, Callable[[ReportContext], str]] = ("recipe", "Recipe", _recipe)


# -- figures ----------------------------------------------------------------------------------

def _label_rows(freqs: Sequence[float], span: float, min_gap: float = 0.07) -> list[int]:
    """Row (0, 1, 2, ...) of each mode label so that labels on one row are at least
    `min_gap` of the axis `span` apart (frequencies in any order).

    Examples
    --------
    >>> _label_rows([100.0, 105.0, 500.0, 110.0], 1000.0)
    [0, 1, 0, 2]
    """
    rows = [0] * len(freqs)
    last: list[float] = []  # per row, the last label's x
    for i in sorted(range(len(freqs)), key=lambda j: freqs[j]):
        for r, x in enumerate(last):
            if freqs[i] - x >= min_gap * span:
                rows[i], last[r] = r, freqs[i]
                break
        else:
            rows[i] = len(last)
            last.append(freqs[i])
    return rows


def _layout(fig: Any, title: str, height: int) -> None:
    """Title at the top left, legend in one row under the plot: the two never meet."""
    fig.update_layout(title={"text": title, "x": 0, "xanchor": "left", "font": {"size": 15}},
                      height=height, margin={"t": 60, "l": 70, "r": 20, "b": 90},
                      legend={"orientation": "h", "x": 0, "y": -0.18, "yanchor": "top"},
                      paper_bgcolor="white", plot_bgcolor="white",
                      font={"color": PALETTE.text}, colorway=list(PALETTE.series))
    fig.update_xaxes(gridcolor=PALETTE.grid, zeroline=False)
    fig.update_yaxes(gridcolor=PALETTE.grid, zeroline=False)


def _figures(records: xr.Dataset, result: xr.Dataset, model: xr.DataArray | None) -> list[Any]:
    import plotly.graph_objects as go
    from plotly.subplots import make_subplots

    figs = []
    time = records["time"].values
    hits = records["hit"].values
    accepted = dict(zip(result["hit"].values.tolist(), result["hit_accepted"].values.tolist(), strict=True))
    channels = [str(c) for c in records["channel"].values]
    # 1. spectrum summed over channels, modes marked (labels staggered so they never overlap)
    fs = float(records.attrs.get("sample_rate", 1 / np.median(np.diff(time))))
    use = time >= 0
    acc = [i for i, h in enumerate(hits) if accepted.get(int(h), True)] or list(range(len(hits)))
    spec = np.abs(np.fft.rfft(records["response"].values[acc][:, :, use], axis=-1)).mean(axis=0).sum(axis=0)
    freqs = np.fft.rfftfreq(int(use.sum()), 1 / fs)
    fx, fy = decimate_for_display(freqs, spec)
    fig = go.Figure(go.Scatter(x=fx, y=fy, mode="lines", line={"color": PALETTE.measured, "width": 1},
                               name="spectrum (sum of channels)"))
    f_modes = [float(f) for f in result["frequency_hz"].values.tolist()] if "frequency_hz" in result else []
    shown = [(k, f) for k, f in enumerate(f_modes) if np.isfinite(f)]
    rows = _label_rows([f for _, f in shown], float(freqs[-1]) if freqs.size else 1.0)
    n_rows = max(rows, default=0) + 1
    for (k, f), row in zip(shown, rows, strict=True):
        fig.add_vline(x=f, line=PALETTE.mode_line)
        fig.add_annotation(x=f, y=1 + 0.07 * (n_rows - 1 - row), yref="paper", yanchor="bottom",
                           text=f"mode {k + 1}", showarrow=False, font={"color": PALETTE.mode, "size": 11},
                           bgcolor=PALETTE.label_bg)
    if shown:  # a legend entry that says what the dashed lines are
        fig.add_trace(go.Scatter(x=[None], y=[None], mode="lines", line=PALETTE.mode_line,
                                 name="fitted mode (natural frequency)"))
    _layout(fig, "Response spectrum of the accepted hits", 420 + 20 * (n_rows - 1))
    fig.update_layout(margin={"t": 80 + 22 * (n_rows - 1)})
    fig.update_xaxes(title_text="frequency [Hz]")
    fig.update_yaxes(title_text=f"|X| [{records['response'].attrs.get('units', '')}·s]", type="log")
    figs.append(fig)
    # 2. force pulses per hit
    if "force" in records:
        fig = go.Figure()
        win = (time >= -0.001) & (time <= 0.008)  # the pulse and a second tap within 8 ms
        for i, h in enumerate(hits):
            ok = accepted.get(int(h), True)
            fig.add_trace(go.Scatter(
                x=time[win] * 1e3, y=records["force"].values[i, win], mode="lines",
                line={"width": 1.5 if ok else 1, "dash": "solid" if ok else "dot",
                      "color": PALETTE.series[i % len(PALETTE.series)] if ok else PALETTE.rejected},
                name=f"hit {int(h)}" + ("" if ok else " (not used)")))
        _layout(fig, "Hammer force per hit", 380)
        fig.update_xaxes(title_text="time [ms]")
        fig.update_yaxes(title_text=f"force [{records['force'].attrs.get('units', '')}]")
        figs.append(fig)
    # 3. measured vs model and residual, first accepted hit, every channel
    i0 = acc[0]
    n_ch = len(channels)
    fig = make_subplots(rows=n_ch, cols=1, shared_xaxes=True, vertical_spacing=0.03,
                        subplot_titles=[c if len(c) <= 60 else c[:59] + "…" for c in channels])
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
                                     name="residual (measured - model)", legendgroup="r", showlegend=c == 0),
                          row=c + 1, col=1)
    units = str(records["response"].attrs.get("units", ""))
    _layout(fig, f"Hit {int(hits[i0])}: measured, fitted model and residual, per channel"
            + (f" [{units}]" if units else ""),
            max(420, 150 * n_ch + 140))
    fig.update_layout(legend={"y": -40 / max(420, 150 * n_ch + 140)})
    fig.update_xaxes(title_text="time [s]", row=n_ch, col=1)
    figs.append(fig)
    return figs


# -- the page ---------------------------------------------------------------------------------

def _css() -> str:
    p = PALETTE
    return f"""
*{{box-sizing:border-box}}
body{{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;margin:0 auto;padding:1.2em 1.5em;
max-width:1180px;color:{p.text};line-height:1.4;overflow-wrap:break-word}}
h1{{font-size:1.6em;margin:.2em 0 .4em}}h2{{font-size:1.25em;margin:1.4em 0 .4em;
border-bottom:2px solid {p.grid};padding-bottom:.15em}}
table{{border-collapse:collapse;margin:.4em 0 1em;max-width:100%}}
td,th{{border:1px solid {p.grid};padding:.25em .55em;text-align:left;vertical-align:top}}
td{{overflow-wrap:anywhere}}td.word{{overflow-wrap:normal}}
th{{background:{p.header};font-weight:600}}
td.num,th.num{{text-align:right;font-variant-numeric:tabular-nums}}td.num{{white-space:nowrap}}
caption{{text-align:left;font-weight:600;padding:.2em 0}}
table.titleblock th{{width:12em}}table.titleblock{{min-width:60%}}table.titleblock td{{white-space:pre-line}}
table.hits{{width:100%}}table.hits td{{font-size:.93em}}
.shape-grid{{display:grid;grid-template-columns:repeat(auto-fill,minmax(min(100%,420px),1fr));gap:.2em 1.2em}}
.shape-grid>*{{min-width:0}}
.shape-grid table{{width:100%}}
.caution{{border-left:5px solid {p.error};background:{p.caution};padding:.6em 1em}}
.note{{color:{p.note};font-size:.92em}}ul.note{{margin-top:0}}
code{{background:{p.header};padding:0 .2em}}
pre.json{{background:{p.header};padding:.7em 1em;white-space:pre-wrap;overflow-wrap:anywhere;
font-size:.85em;max-width:100%}}
.figure{{width:100%;margin:.4em 0 1em;overflow:hidden}}
@media print{{
  @page{{margin:14mm 12mm}}
  body{{max-width:none;padding:0;font-size:10pt}}
  table{{font-size:8.5pt}}td,th{{padding:.2em .35em}}td.num{{white-space:normal}}
  h2{{break-after:avoid;page-break-after:avoid}}
  tr,caption,.figure,.caution,table.titleblock,.shape-grid table{{break-inside:avoid;page-break-inside:avoid}}
  thead{{display:table-header-group}}
  section#figures,section#recipe{{break-before:page;page-break-before:always}}
  .figure .js-plotly-plot,.figure .plot-container{{max-width:100%}}
  details{{display:block}}details>summary{{list-style:none}}
  a{{color:inherit;text-decoration:none}}
}}
"""


# Plotly keeps a figure's pixel width; before printing, let each figure follow the page
# width (Plotly.Plots.resize), and back after.
_PRINT_JS = """
(function(){function fit(){if(!window.Plotly)return;
document.querySelectorAll('.js-plotly-plot').forEach(function(p){Plotly.Plots.resize(p);});}
window.addEventListener('beforeprint',fit);window.addEventListener('afterprint',fit);})();
"""


def _extra(item: ExtraSection, records: xr.Dataset, result: xr.Dataset) -> tuple[str, str]:
    if callable(item):
        out = item(records, result)
    else:
        out = item
    if isinstance(out, tuple) and len(out) == 2:
        return str(out[0]), str(out[1])
    if isinstance(out, str):
        return "", out
    raise ModalnbError(f"report extra section must give an HTML fragment or (title, fragment), "
                       f"got {type(out).__name__}.")


def _recipe_of(result: xr.Dataset, recipe: Recipe | None) -> Recipe | None:
    if recipe is not None:
        return recipe
    text = result.attrs.get("recipe")
    if isinstance(text, str):
        try:
            return Recipe.from_json(text)
        except RecipeError:
            return None
    return None


def report_html(
    records: xr.Dataset,
    result: xr.Dataset,
    checks: xr.Dataset | None = None,
    *,
    model: xr.DataArray | None = None,
    recipe: Recipe | None = None,
    title: str | None = None,
    extra_sections: Sequence[ExtraSection] | None = None,
    analysed_at: _dt.datetime | str | None = None,
    geometry: Any = None,
) -> str:
    """The report as one HTML page (plotly.js embedded once; works offline).

    Parameters
    ----------
    records : xarray.Dataset
        The record set.
    result : xarray.Dataset
        Output of :func:`modalnb.fit_modes`.
    checks : xarray.Dataset, optional
        Output of :func:`modalnb.check_hits` (decision by, warnings, notes, hit measures).
    model : xarray.DataArray, optional
        Fitted model over (hit, channel, time) in the fit window, drawn over the data.
        Default: rebuilt from the table's poles (:func:`modalnb.estimate.model_traces`).
    recipe : Recipe, optional
        The recipe behind the table (title block, last section). Default: the one the
        table carries (``result.attrs["recipe"]``).
    title : str, optional
        The page heading; default the recipe's ``title``, else "Modal analysis report".
    extra_sections : list, optional
        More sections, placed before the recipe: ``(title, html_fragment)`` pairs or
        callables ``fn(records, result)`` giving a fragment or a ``(title, fragment)``.
    analysed_at : datetime or str, optional
        The analysis date shown (ISO 8601); default now, in UTC, to the second.
    geometry : modalnb.geometry.Geometry, optional
        Node positions and lines for the moving shape view (default: the records' channel
        positions; nodes without one are placed on a line).

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
    from plotly.offline import get_plotlyjs

    if model is None:
        from ..estimate import model_traces

        try:
            model = model_traces(records, result)
        except (ModalnbError, np.linalg.LinAlgError):
            model = None  # the report still shows the data, the table and the decisions
    rec = _recipe_of(result, recipe)
    heading = title or (rec.title if rec and rec.title else "Modal analysis report")
    if analysed_at is None:
        analysed_at = _dt.datetime.now(_dt.UTC).replace(microsecond=0)
    when = analysed_at.isoformat() if isinstance(analysed_at, _dt.datetime) else str(analysed_at)
    ctx = ReportContext(records, result, checks, model, rec, heading, when, geometry)
    sections = [(sid, stitle, fn(ctx)) for sid, stitle, fn in SECTIONS]
    for i, item in enumerate(extra_sections or ()):
        stitle, frag = _extra(item, records, result)
        sections.append((f"extra-{i + 1}", stitle, frag))
    sid, stitle, fn = RECIPE_SECTION
    sections.append((sid, stitle, fn(ctx)))
    body = [f'<header><h1>{_e(heading)}</h1><p class="note">Modal analysis of impact-hammer '
            f"records with modalnb {_e(package_version())}.</p></header>"]
    for sid, stitle, frag in sections:
        if not frag:  # a section with nothing to say for this table (no force, no nodes)
            continue
        h2 = f"<h2>{_e(stitle)}</h2>" if stitle else ""
        body.append(f'<section id="{_e(sid)}">{h2}{frag}</section>')
    return (
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{_e(heading)}</title><style>{_css()}</style>"
        f'<script type="text/javascript">{get_plotlyjs()}</script></head><body>\n'
        + "\n".join(body)
        + f"\n<script>{_PRINT_JS}</script>\n</body></html>\n"
    )


def write_report(
    records: xr.Dataset,
    result: xr.Dataset,
    checks: xr.Dataset | None,
    path: str | os.PathLike[str],
    **kwargs: Any,
) -> Path:
    """Write :func:`report_html` to `path` atomically and return the path.

    Keyword arguments are those of :func:`report_html` (``recipe``, ``title``,
    ``extra_sections``, ...).

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
