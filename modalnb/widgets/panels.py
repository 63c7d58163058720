"""The five panels over one :class:`~modalnb.session.Analysis`, each usable alone.

* :class:`HitPanel` — force pulse and its spectrum per hit, response overview, the
  automatic flags with reasons and measures, accept / reject / automatic per hit;
* :class:`WindowPanel` — ring-down of a channel (or all overlaid) with the fit window
  shaded; range slider and two number boxes bound both ways; box-select on the plot;
  log-amplitude view; live refit;
* :class:`ModesPanel` — spectrum summed over channels with the found modes marked, the
  poles-versus-order chart when the engine provides it, band and number of modes;
* :class:`FitPanel` — measured vs model per channel, residual trace and spectrum,
  per-channel quality numbers, the cross-checks the engine reports;
* :class:`TablePanel` — the modal table, shapes, MAC between modes and between hits,
  shape plot (3-D from the node coordinates when present), exports and "save recipe".
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import ipywidgets as w
import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from ..session import Analysis
from ._base import (
    ACCEPTED,
    MEASURED,
    MODE,
    MODEL,
    NEW,
    REJECTED,
    RESIDUAL,
    STABLE,
    WINDOW,
    Panel,
    decimate,
    esc,
    fig_box,
    figure,
    table_html,
)

__all__ = ["HitPanel", "WindowPanel", "ModesPanel", "FitPanel", "TablePanel"]


def _db(x: np.ndarray) -> np.ndarray:
    x = np.abs(np.asarray(x, float))
    return 20 * np.log10(np.maximum(x, 1e-300))


def _mode_rows(a: Analysis) -> list[dict[str, Any]]:
    r = a.result
    if r is None:
        return []
    rows = []
    for k, m in enumerate(r["mode"].values.tolist()):
        row = {"mode": int(m)}
        for name in ("frequency_hz", "frequency_hz_std", "damping_ratio", "damping_ratio_std",
                     "regime", "q_factor", "status"):
            if name in r:
                v = r[name].values[k]
                row[name] = v.item() if hasattr(v, "item") else v
        rows.append(row)
    return rows


# ====================================================================== 1. hits
class HitPanel(Panel):
    """Hit review: each hit's force pulse and spectrum, response overview, flags, decisions."""

    css = "modalnb-hits"
    title = "Hits"
    _CHOICES = (("automatic", None), ("accept", True), ("reject", False))

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        self.count = w.HTML()
        self.count.add_class("modalnb-hit-count")
        self.table = w.HTML()
        self.table.add_class("modalnb-hit-table")
        self.toggles: dict[int, w.ToggleButtons] = {}
        rows = []
        for h in a.hits:
            tb = w.ToggleButtons(options=[c[0] for c in self._CHOICES], value="automatic",
                                 style={"button_width": "80px"})
            tb.add_class(f"modalnb-hit-toggle-{h}")
            tb.observe(lambda ch, h=h: self._decide(h, ch["new"]), "value")
            self.toggles[h] = tb
            rows.append(w.HBox([w.Label(f"hit {h}", layout=w.Layout(width="60px")), tb]))
        self.show_hit = w.Dropdown(options=a.hits, value=a.hits[0], description="show hit")
        self.show_hit.add_class("modalnb-hit-choice")
        self.show_hit.observe(lambda ch: self._draw_hit(), "value")
        self.force_fig = go.FigureWidget(make_subplots(
            rows=1, cols=2, subplot_titles=("hammer force (pulse)", "force spectrum")))
        self.force_fig.update_layout(height=300, margin={"l": 60, "r": 20, "t": 40, "b": 40},
                                     template="plotly_white", showlegend=False)
        self.force_fig.add_scatter(x=[], y=[], mode="lines", line={"color": MEASURED}, row=1, col=1)
        self.force_fig.add_scatter(x=[], y=[], mode="lines", line={"color": MEASURED}, row=1, col=2)
        self.force_fig.update_xaxes(title_text="time [ms]", row=1, col=1)
        self.force_fig.update_xaxes(title_text="frequency [Hz]", row=1, col=2)
        self.force_fig.update_yaxes(title_text="dB re peak", row=1, col=2)
        self.resp_fig = figure(260, title="responses of this hit (all channels)",
                               xaxis_title="time [s]")
        for ch in a.channels:
            self.resp_fig.add_scatter(x=[], y=[], mode="lines", name=ch, line={"width": 1})
        self._busy = False
        self._finish([
            w.HTML("<b>Hit review.</b> Automatic flags, the measures behind them, and your "
                   "decision per hit (your decision wins and goes into the recipe)."),
            self.count, self.table, w.VBox(rows), self.show_hit,
            fig_box(self.force_fig, "modalnb-force-figure"),
            fig_box(self.resp_fig, "modalnb-response-figure"),
        ])

    def _decide(self, hit: int, choice: str) -> None:
        if self._busy:
            return
        value = dict(self._CHOICES)[choice]
        if not self.analysis.set_hit(hit, value):
            self.refresh()  # back to what the state holds

    def refresh(self) -> None:
        a = self.analysis
        c = a.checks
        if c is None:
            return
        acc = a.accepted_hits()
        self.count.value = (f'<span class="modalnb-hit-count-value">{len(acc)}</span> of '
                            f"{len(a.hits)} hits accepted")
        rows = []
        for i, h in enumerate(c["hit"].values.tolist()):
            row = {"hit": h, "accepted": bool(c["accepted"].values[i])}
            for name in ("user_decision", "reason", "warnings", "peak_force", "pulse_duration_s",
                         "double_hit_ratio", "snr_db", "end_level_db", "clipped_samples"):
                if name in c:
                    v = c[name].values[i]
                    row[name] = v.item() if hasattr(v, "item") else v
            if "pulse_duration_s" in row:
                row["pulse_duration_s"] = float(row["pulse_duration_s"]) * 1e3
            rows.append(row)
        self.table.value = table_html(rows, [
            ("hit", "hit"), ("accepted", "used"), ("user_decision", "your decision"),
            ("reason", "reason"), ("warnings", "warnings"), ("peak_force", "peak force"),
            ("pulse_duration_s", "pulse [ms]"), ("double_hit_ratio", "2nd/1st peak"),
            ("snr_db", "SNR [dB]"), ("end_level_db", "end level [dB]"),
            ("clipped_samples", "clipped samples")], "modalnb-hits-table", "modalnb-hitrow")
        self._busy = True
        try:
            for h, tb in self.toggles.items():
                o = a.recipe.hit_overrides.get(h)
                tb.value = "automatic" if o is None else ("accept" if o else "reject")
        finally:
            self._busy = False
        self._draw_hit()

    def _draw_hit(self) -> None:
        a = self.analysis
        h = int(self.show_hit.value)
        t = a.records["time"].values
        accepted = h in a.accepted_hits()
        colour = ACCEPTED if accepted else REJECTED
        with self.force_fig.batch_update():
            if "force" in a.records:
                f = a.records["force"].sel(hit=h).values
                win = (t >= -0.002) & (t <= 0.01)
                self.force_fig.data[0].x = t[win] * 1e3
                self.force_fig.data[0].y = f[win]
                self.force_fig.data[0].line.color = colour
                spec = np.abs(np.fft.rfft(f))
                fr = np.fft.rfftfreq(f.size, 1 / a.sample_rate)
                fx, fy = decimate(fr, _db(spec / max(spec.max(), 1e-300)))
                self.force_fig.data[1].x, self.force_fig.data[1].y = fx, fy
                self.force_fig.data[1].line.color = colour
            self.force_fig.layout.title = f"hit {h} ({'used' if accepted else 'not used'})"
        y = a.records["response"].sel(hit=h).values
        with self.resp_fig.batch_update():
            for c, tr in enumerate(self.resp_fig.data):
                tt, yy = decimate(t, y[c], 1200)
                tr.x, tr.y = tt, yy


# ====================================================================== 2. window
class WindowPanel(Panel):
    """Fit-window choice on the ring-down, with live refit."""

    css = "modalnb-window"
    title = "Time window"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        t = a.records["time"].values
        self._t = t
        step = max(round(1.0 / a.sample_rate, 6), 1e-6)
        t0, t1 = a.fit_window()
        self.slider = w.FloatRangeSlider(value=(t0, t1), min=float(t[0]), max=float(t[-1]),
                                         step=step, readout_format=".4f", continuous_update=False,
                                         description="window [s]", layout=w.Layout(width="95%"))
        self.slider.add_class("modalnb-window-slider")
        self.start = w.FloatText(value=t0, description="start [s]", step=0.001)
        self.start.add_class("modalnb-window-start")
        self.end = w.FloatText(value=t1, description="end [s]", step=0.001)
        self.end.add_class("modalnb-window-end")
        self.auto = w.Button(description="automatic window")
        self.auto.add_class("modalnb-window-auto")
        self.auto.on_click(lambda _b: self.analysis.set_window(None))
        self.channel = w.Dropdown(options=["all channels", *a.channels], value="all channels",
                                  description="channel")
        self.hit = w.Dropdown(options=a.hits, value=(a.accepted_hits() or a.hits)[0],
                              description="hit")
        self.log = w.Checkbox(value=False, description="log amplitude (decay = straight line)")
        self.log.add_class("modalnb-window-log")
        self.damping = w.HTML()
        self.damping.add_class("modalnb-window-damping")
        for ctl in (self.channel, self.hit, self.log):
            ctl.observe(lambda ch: self._draw_traces(), "value")
        self._syncing = False
        self.slider.observe(self._on_slider, "value")
        self.start.observe(self._on_box, "value")
        self.end.observe(self._on_box, "value")
        self.fig = figure(360, xaxis_title="time [s]", dragmode="select",
                          title="ring-down; shaded: fit window (drag a box to choose one)")
        self.fig.layout.shapes = [dict(type="rect", xref="x", yref="paper", x0=t0, x1=t1, y0=0,
                                       y1=1, fillcolor=WINDOW, line={"width": 0}, layer="below")]
        self._finish([
            w.HTML("<b>Fit window.</b> Only data inside the window is fitted. Start after the "
                   "hammer pulse; end before the ring-down sinks into noise."),
            self.slider, w.HBox([self.start, self.end, self.auto]),
            w.HBox([self.hit, self.channel, self.log]),
            fig_box(self.fig, "modalnb-window-figure"), self.damping,
        ])
        self._draw_traces()

    # controls -> state
    def _on_slider(self, change: dict[str, Any]) -> None:
        if self._syncing:
            return
        lo, hi = change["new"]
        self._set_controls(lo, hi)
        self.analysis.set_window(lo, hi)

    def _on_box(self, _change: dict[str, Any]) -> None:
        if self._syncing:
            return
        lo, hi = float(self.start.value), float(self.end.value)
        if lo < hi:
            self._set_controls(lo, hi)
        self.analysis.set_window(lo, hi)  # the state refuses lo >= hi with a one-line error

    def _on_select(self, _trace: Any, _points: Any, selector: Any) -> None:
        xr_ = getattr(selector, "xrange", None)
        if xr_ and xr_[1] > xr_[0]:
            self._set_controls(*xr_)
            self.analysis.set_window(float(xr_[0]), float(xr_[1]))

    def _set_controls(self, lo: float, hi: float) -> None:
        self._syncing = True
        try:
            lo, hi = max(float(lo), self.slider.min), min(float(hi), self.slider.max)
            self.slider.value = (lo, hi)
            self.start.value, self.end.value = lo, hi
        finally:
            self._syncing = False

    # state -> view
    def refresh(self) -> None:
        t0, t1 = self.analysis.fit_window()
        self._set_controls(t0, t1)
        with self.fig.batch_update():
            self.fig.layout.shapes[0].x0 = t0
            self.fig.layout.shapes[0].x1 = t1
        rows = _mode_rows(self.analysis)
        self.damping.value = table_html(rows, [
            ("mode", "mode"), ("frequency_hz", "f [Hz]"), ("damping_ratio", "damping ratio"),
            ("damping_ratio_std", "± std")], "modalnb-damping-table", "modalnb-damp")

    def _on_event(self, event: str, analysis: Analysis) -> None:
        super()._on_event(event, analysis)
        if event == "error":  # controls back to the window of the result still shown
            self._set_controls(*analysis.fit_window())

    def _draw_traces(self) -> None:
        a = self.analysis
        h = int(self.hit.value)
        y = a.records["response"].sel(hit=h).values
        names = a.channels if self.channel.value == "all channels" else [self.channel.value]
        idx = [a.channels.index(n) for n in names]
        with self.fig.batch_update():
            self.fig.data = []
            for i in idx:
                if self.log.value:
                    tt, yy = _envelope_db(self._t, y[i])
                else:
                    tt, yy = decimate(self._t, y[i])
                self.fig.add_scatter(x=tt, y=yy, mode="lines", name=a.channels[i], line={"width": 1})
            self.fig.layout.yaxis.title = "dB re 1 " + esc(a.records["response"].attrs.get("units", "")) \
                if self.log.value else esc(a.records["response"].attrs.get("units", "response"))
        for tr in self.fig.data:
            tr.on_selection(self._on_select)


def _envelope_db(t: np.ndarray, y: np.ndarray, buckets: int = 800) -> tuple[np.ndarray, np.ndarray]:
    """Peak |y| per bucket in dB: an exponential decay is a straight line on this view."""
    n = y.size
    edges = np.linspace(0, n, min(buckets, n) + 1).astype(int)
    tt = np.array([t[(a + b) // 2] for a, b in zip(edges[:-1], edges[1:], strict=True) if b > a])
    yy = np.array([np.abs(y[a:b]).max() for a, b in zip(edges[:-1], edges[1:], strict=True) if b > a])
    return tt, _db(yy)


# ====================================================================== 3. modes
class ModesPanel(Panel):
    """Mode finding: summed spectrum with found modes, stabilisation chart, band, count."""

    css = "modalnb-modes"
    title = "Modes"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        nyq = a.sample_rate / 2
        band = a.recipe.band or (0.0, 0.45 * a.sample_rate)
        self._syncing = False
        self.band = w.FloatRangeSlider(value=band, min=0.0, max=nyq, step=1.0, readout_format=".0f",
                                       continuous_update=False, description="band [Hz]",
                                       layout=w.Layout(width="95%"))
        self.band.add_class("modalnb-band-slider")
        self.band.observe(self._on_band, "value")
        self.auto_band = w.Button(description="automatic band")
        self.auto_band.on_click(lambda _b: self.analysis.set_band(None))
        self.n_modes = w.Dropdown(options=[("automatic", 0)] + [(str(i), i) for i in range(1, 21)],
                                  value=a.recipe.n_modes or 0, description="modes")
        self.n_modes.add_class("modalnb-n-modes")
        self.n_modes.observe(self._on_n_modes, "value")
        self.fig = figure(340, xaxis_title="frequency [Hz]", yaxis_type="log", dragmode="select",
                          title="spectrum summed over channels; ▼ found modes (drag a box: band)")
        self.fig.add_scatter(x=[], y=[], mode="lines", line={"color": MEASURED, "width": 1},
                             name="|X| summed over channels, mean over used hits")
        self.fig.add_scatter(x=[], y=[], mode="markers+text", name="found mode",
                             marker={"symbol": "triangle-down", "size": 12, "color": MODE},
                             textposition="top center")
        self.fig.data[0].on_selection(self._on_select)
        self.fig.layout.shapes = [dict(type="rect", xref="x", yref="paper", x0=band[0], x1=band[1],
                                       y0=0, y1=1, fillcolor=WINDOW, line={"width": 0}, layer="below")]
        self.stab = figure(300, xaxis_title="frequency [Hz]", yaxis_title="model order",
                           title="poles versus model order")
        self.stab.add_scatter(x=[], y=[], mode="markers", name="pole seen once",
                              marker={"symbol": "circle-open", "color": NEW, "size": 6})
        self.stab.add_scatter(x=[], y=[], mode="markers", name="stable across orders",
                              marker={"symbol": "diamond", "color": STABLE, "size": 7})
        self.stab_note = w.HTML()
        # add or drop a mode by frequency: type it, or click on the spectrum to fill the box
        self.mode_freq = w.BoundedFloatText(value=0.0, min=0.0, max=nyq, step=0.1,
                                            description="mode at [Hz]")
        self.mode_freq.add_class("modalnb-mode-frequency")
        self.add_btn = w.Button(description="add a mode here", tooltip="seed a pole the search missed")
        self.add_btn.add_class("modalnb-add-mode")
        self.drop_btn = w.Button(description="drop the nearest mode", tooltip="leave it out of the table")
        self.drop_btn.add_class("modalnb-drop-mode")
        self.clear_btn = w.Button(description="undo mode edits")
        self.add_btn.on_click(lambda _b: self.analysis.add_mode(self.mode_freq.value))
        self.drop_btn.on_click(lambda _b: self.analysis.drop_mode(self.mode_freq.value))
        self.clear_btn.on_click(lambda _b: self.analysis.clear_mode_edits())
        self.edits = w.HTML()
        self.edits.add_class("modalnb-mode-edits")
        self.fig.data[0].on_click(self._on_click)
        self._finish([
            w.HTML("<b>Mode finding.</b> Choose the band and, if you like, how many modes to keep "
                   "(the strongest by energy). Click on the spectrum (or type) to pick a "
                   "frequency, then add a mode the search missed or drop one from the table."),
            self.band, w.HBox([self.auto_band, self.n_modes]),
            w.HBox([self.mode_freq, self.add_btn, self.drop_btn, self.clear_btn]), self.edits,
            fig_box(self.fig, "modalnb-spectrum-figure"),
            fig_box(self.stab, "modalnb-stability-figure"), self.stab_note,
        ])

    def _on_band(self, change: dict[str, Any]) -> None:
        if not self._syncing:
            lo, hi = change["new"]
            self.analysis.set_band(lo, hi)

    def _on_n_modes(self, change: dict[str, Any]) -> None:
        if not self._syncing:
            self.analysis.set_n_modes(change["new"] or None)

    def _on_select(self, _trace: Any, _points: Any, selector: Any) -> None:
        xr_ = getattr(selector, "xrange", None)
        if xr_ and xr_[1] > xr_[0]:
            self.analysis.set_band(max(float(xr_[0]), 0.0), float(xr_[1]))

    def _on_click(self, _trace: Any, points: Any, _state: Any = None) -> None:
        xs = list(getattr(points, "xs", []) or [])
        if xs:
            self.mode_freq.value = round(float(xs[0]), 2)

    def refresh(self) -> None:
        a = self.analysis
        f, mag = a.spectrum()
        fx, fy = decimate(f, mag)
        r = a.result
        band = a.recipe.band or (0.0, 0.45 * a.sample_rate)
        self._syncing = True
        try:
            self.band.value = (max(band[0], 0.0), min(band[1], self.band.max))
            self.n_modes.value = a.recipe.n_modes or 0 if (a.recipe.n_modes or 0) <= 20 else 0
        finally:
            self._syncing = False
        with self.fig.batch_update():
            self.fig.data[0].x, self.fig.data[0].y = fx, fy
            if r is not None and r.sizes.get("mode", 0):
                fk = r["frequency_hz"].values
                yk = np.interp(fk, f, mag) * 1.3
                self.fig.data[1].x, self.fig.data[1].y = fk, yk
                self.fig.data[1].text = [f"{int(m)}" for m in r["mode"].values]
            else:
                self.fig.data[1].x, self.fig.data[1].y = [], []
            self.fig.layout.shapes[0].x0, self.fig.layout.shapes[0].x1 = band
        rec = a.recipe
        parts = []
        if rec.add_modes:
            parts.append("added: " + ", ".join(f"{f:g} Hz" for f in rec.add_modes))
        if rec.drop_modes:
            parts.append("dropped: " + ", ".join(f"{f:g} Hz" for f in rec.drop_modes))
        self.edits.value = ("<i>mode edits (in the recipe) — " + esc("; ".join(parts)) + "</i>") if parts else ""
        stab = a.stabilisation()
        with self.stab.batch_update():
            if stab is None:
                self.stab.data[0].x = self.stab.data[0].y = []
                self.stab.data[1].x = self.stab.data[1].y = []
                self.stab_note.value = "<i>This estimation engine gives no poles-versus-order data.</i>"
            else:
                order, freq, stable = stab
                self.stab.data[0].x, self.stab.data[0].y = freq[~stable], order[~stable]
                self.stab.data[1].x, self.stab.data[1].y = freq[stable], order[stable]
                # the fitted modes as dashed lines: columns of stable poles should line up
                fk = r["frequency_hz"].values if r is not None and r.sizes.get("mode", 0) else []
                self.stab.layout.shapes = [
                    dict(type="line", xref="x", yref="paper", x0=float(f0), x1=float(f0), y0=0, y1=1,
                         line={"color": MODE, "width": 1, "dash": "dash"}) for f0 in fk]
                self.stab_note.value = ("<i>dashed: fitted modes. Lower orders are the narrow "
                                        "sub-band pencils, higher orders the wide-band one.</i>")


# ====================================================================== 4. fit check
def _phase_text(deg: float) -> str:
    """Phase in whole degrees within (-180, 180]: -179.7 shows as +180, -0.2 as +0."""
    r = int(round(float(deg)))
    if r <= -180:
        r += 360
    return f"{r:+d}°"


_CROSS = ("log_dec", "half_power", "envelope", "hilbert")
_CROSS_LABELS = {"log_decrement": "δ (from the fit)",
                 "xcheck_log_decrement_damping": "ζ, log decrement",
                 "xcheck_half_power_damping": "ζ, half-power",
                 "xcheck_hilbert_damping": "ζ, Hilbert envelope"}


class FitPanel(Panel):
    """Fit inspection: measured vs model, residual trace and spectrum, quality, cross-checks."""

    css = "modalnb-fit"
    title = "Fit check"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        self.hit = w.Dropdown(options=a.hits, value=(a.accepted_hits() or a.hits)[0], description="hit")
        self.channel = w.Dropdown(options=a.channels, value=a.channels[-1], description="channel")
        self.hit.observe(lambda ch: self.refresh(), "value")
        self.channel.observe(lambda ch: self.refresh(), "value")
        self.fig = go.FigureWidget(make_subplots(
            rows=3, cols=1, vertical_spacing=0.13,
            subplot_titles=("measured and model in the fit window", "residual (measured − model)",
                            "spectra: measured and residual")))
        self.fig.update_layout(height=620, template="plotly_white",
                               margin={"l": 60, "r": 20, "t": 40, "b": 40},
                               legend={"orientation": "h", "y": 1.07})
        self.fig.add_scatter(x=[], y=[], mode="lines", name="measured", line={"color": MEASURED, "width": 1}, row=1, col=1)
        self.fig.add_scatter(x=[], y=[], mode="lines", name="model", line={"color": MODEL, "width": 1}, row=1, col=1)
        self.fig.add_scatter(x=[], y=[], mode="lines", name="residual", line={"color": RESIDUAL, "width": 1}, row=2, col=1)
        self.fig.add_scatter(x=[], y=[], mode="lines", name="measured spectrum", line={"color": MEASURED, "width": 1},
                             row=3, col=1, showlegend=False)
        self.fig.add_scatter(x=[], y=[], mode="lines", name="residual spectrum", line={"color": RESIDUAL, "width": 1},
                             row=3, col=1, showlegend=False)
        self.fig.update_xaxes(title_text="time [s]", row=2, col=1)
        self.fig.update_xaxes(title_text="frequency [Hz]", row=3, col=1)
        self.fig.update_yaxes(type="log", row=3, col=1)
        self.quality = w.HTML()
        self.quality.add_class("modalnb-fit-quality")
        self.cross = w.HTML()
        self.cross.add_class("modalnb-cross-checks")
        self._finish([
            w.HTML("<b>Fit check.</b> The model uses the fitted poles; a residual without "
                   "structure and a residual spectrum without peaks mean no mode was missed."),
            w.HBox([self.hit, self.channel]), fig_box(self.fig, "modalnb-fit-figure"),
            w.HBox([self.quality, self.cross]),
        ])

    def refresh(self) -> None:
        a = self.analysis
        if a.result is None:
            return
        h = int(self.hit.value)
        c = a.channels.index(self.channel.value)
        t, y, m = a.model(h)
        r = y - m
        fr = np.fft.rfftfreq(t.size, 1 / a.sample_rate)
        with self.fig.batch_update():
            for i, yy in enumerate((y[c], m[c], r[c])):
                tx, ty = decimate(t, yy)
                self.fig.data[i].x, self.fig.data[i].y = tx, ty
            spectra = [np.abs(np.fft.rfft(yy - yy.mean())) / t.size for yy in (y[c], r[c])]
            floor = 1e-6 * max(float(sp.max()) for sp in spectra) or 1e-300  # 120 dB below the peak
            for i, sp in enumerate(spectra):
                fx, fy = decimate(fr, sp)
                self.fig.data[3 + i].x, self.fig.data[3 + i].y = fx, np.maximum(fy, floor)
        self.quality.value = f"<b>fit quality, hit {h}</b>" + table_html(
            a.channel_quality(h), [("channel", "channel"), ("r_squared", "R²"),
                                   ("residual_rms", "residual RMS")], "modalnb-quality-table")
        res = a.cross_checks()
        names = [n for n in res.data_vars if res[n].dims == ("mode",) and any(k in n for k in _CROSS)]
        if names:
            rows = [{"mode": int(mm), **{n: res[n].values[k].item() for n in names}}
                    for k, mm in enumerate(res["mode"].values)]
            rows_f = [{**row, "damping_ratio": res["damping_ratio"].values[k].item()} for k, row in enumerate(rows)]
            bias = {n: str(res[n].attrs.get("bias", "")) for n in names}
            label = {n: _CROSS_LABELS.get(n, n.replace("_", " ")) for n in names}
            self.cross.value = "<b>cross-checks (each with its known bias)</b>" + table_html(
                rows_f, [("mode", "mode"), ("damping_ratio", "fitted ζ")] + [(n, label[n]) for n in names],
                "modalnb-cross-table") + "".join(
                f"<div class='modalnb-cross-bias'><i>{esc(label[n])}</i>: {esc(bias[n])}</div>"
                for n in names if bias[n])
        else:
            self.cross.value = "<i>The estimation engine reported no cross-checks.</i>"


# ====================================================================== 5. modal table
class TablePanel(Panel):
    """The modal table, shapes, MAC matrices, shape plot, exports and 'save recipe'."""

    css = "modalnb-table-panel"
    title = "Modal table"

    def __init__(self, analysis: Analysis, out_dir: str | Path | None = None) -> None:
        super().__init__(analysis)
        a = analysis
        if out_dir is None:
            base = a.recipe_path.parent if a.recipe_path is not None else Path.cwd()
            stem = a.recipe_path.name.removesuffix(".recipe.json") if a.recipe_path else "modalnb"
            out_dir = base / f"{stem}-modal-table"
        self.modes = w.HTML()
        self.modes.add_class("modalnb-modes-table")
        self.shapes = w.HTML()
        self.shapes.add_class("modalnb-shapes-table")
        self.mode = w.Dropdown(options=[1], value=1, description="mode")
        self.mode.observe(lambda ch: self._draw_mode(), "value")
        self.mac_fig = figure(330, title="MAC between modes")
        self.mac_fig.add_heatmap(z=[[0]], zmin=0, zmax=1, colorscale="Blues",
                                 colorbar={"title": "MAC"}, texttemplate="%{z:.2f}")
        self.hitmac_fig = figure(330, title="MAC between hits (per-hit residues)")
        self.hitmac_fig.add_heatmap(z=[[0]], zmin=0, zmax=1, colorscale="Blues",
                                    colorbar={"title": "MAC"}, texttemplate="%{z:.2f}")
        self.shape_fig = figure(360, title="mode shape")
        self.out_dir = w.Text(value=str(out_dir), description="folder", layout=w.Layout(width="60%"))
        self.out_dir.add_class("modalnb-export-dir")
        self.b_table = w.Button(description="table: CSV, netCDF, JSON", layout=w.Layout(width="220px"))
        self.b_table.add_class("modalnb-export-table")
        self.b_report = w.Button(description="HTML report")
        self.b_report.add_class("modalnb-export-report")
        self.b_recipe = w.Button(description="save recipe")
        self.b_recipe.add_class("modalnb-save-recipe")
        self.export_status = w.HTML()
        self.export_status.add_class("modalnb-export-status")
        self.b_table.on_click(lambda _b: self.export(table=True, report=False))
        self.b_report.on_click(lambda _b: self.export(table=False, report=True))
        self.b_recipe.on_click(lambda _b: self.save_recipe())
        self._finish([
            w.HTML("<b>Modal table.</b> Frequencies and damping ratios with their standard "
                   "uncertainties; shapes normalised to 1 on the largest channel."),
            self.modes, self.shapes,
            w.HBox([fig_box(self.mac_fig, "modalnb-mac-figure")]),
            self.mode, w.HBox([fig_box(self.hitmac_fig, "modalnb-hitmac-figure"),
                               fig_box(self.shape_fig, "modalnb-shape-figure")]),
            w.HBox([self.out_dir]), w.HBox([self.b_table, self.b_report, self.b_recipe]),
            self.export_status,
        ])

    def export(self, *, table: bool = True, report: bool = True) -> dict[str, Path]:
        self.export_status.value = "⏳ writing…"
        try:
            files = self.analysis.export(self.out_dir.value, table=table, report=report)
        except (ValueError, OSError) as exc:
            self.export_status.value = f'<span class="modalnb-error">⚠ {esc(" ".join(str(exc).split()))}</span>'
            return {}
        self.export_status.value = "wrote " + ", ".join(
            f'<code class="modalnb-written">{esc(p)}</code>' for p in files.values())
        return files

    def save_recipe(self) -> Path | None:
        a = self.analysis
        target = a.recipe_path or Path(self.out_dir.value) / "recipe.json"
        try:
            Path(target).parent.mkdir(parents=True, exist_ok=True)
            p = a.save_recipe(target)
        except (ValueError, OSError) as exc:
            self.export_status.value = f'<span class="modalnb-error">⚠ {esc(" ".join(str(exc).split()))}</span>'
            return None
        self.export_status.value = f'recipe saved: <code class="modalnb-written">{esc(p)}</code>'
        return p

    def refresh(self) -> None:
        a = self.analysis
        r = a.result
        if r is None:
            return
        rows = _mode_rows(a)
        used = a.accepted_hits()
        self.modes.value = (
            f'<div class="modalnb-table-hits">from <b class="modalnb-table-nhits">{len(used)}</b> of '
            f"{len(a.hits)} hits ({', '.join(map(str, used))})</div>"
        ) + table_html(rows, [
            ("mode", "mode"), ("frequency_hz", "natural frequency [Hz]"), ("frequency_hz_std", "± std [Hz]"),
            ("damping_ratio", "damping ratio"), ("damping_ratio_std", "± std"), ("regime", "regime"),
            ("q_factor", "Q"), ("status", "status")], "modalnb-mode-rows", "modalnb-mode")
        srows = []
        amp, ph = r["shape_amplitude"].values, r["shape_phase_deg"].values
        for c, ch in enumerate(a.channels):
            row = {"channel": ch}
            for k, mm in enumerate(r["mode"].values.tolist()):
                row[f"m{mm}"] = f"{amp[k, c]:.3f} ∠ {_phase_text(ph[k, c])}"
            srows.append(row)
        self.shapes.value = "<b>shapes: amplitude ∠ phase</b>" + table_html(
            srows, [("channel", "channel")] + [(f"m{mm}", f"mode {mm}") for mm in r["mode"].values.tolist()],
            "modalnb-shape-rows")
        labels = [f"mode {m}" for m in r["mode"].values.tolist()]
        with self.mac_fig.batch_update():
            self.mac_fig.data[0].z = a.mac_modes()
            self.mac_fig.data[0].x = labels
            self.mac_fig.data[0].y = labels
        modes = r["mode"].values.tolist()
        keep = self.mode.value if self.mode.value in modes else (modes[0] if modes else None)
        self.mode.unobserve_all("value")
        self.mode.options = modes or [1]
        if keep is not None:
            self.mode.value = keep
        self.mode.observe(lambda ch: self._draw_mode(), "value")
        self._draw_mode()

    def _draw_mode(self) -> None:
        a = self.analysis
        r = a.result
        if r is None or not r.sizes.get("mode", 0):
            return
        m = int(self.mode.value)
        if "hit_residue_real" in r:
            hits, mat = a.mac_hits(m)
            lab = [f"hit {h}" for h in hits]
            with self.hitmac_fig.batch_update():
                self.hitmac_fig.data[0].z, self.hitmac_fig.data[0].x, self.hitmac_fig.data[0].y = mat, lab, lab
                self.hitmac_fig.layout.title = f"MAC between hits, mode {m} (per-hit residues)"
        k = r["mode"].values.tolist().index(m)
        s = r["shape_amplitude"].values[k] * np.cos(np.deg2rad(r["shape_phase_deg"].values[k]))
        coords = a.records.coords
        three_d = all(n in coords for n in ("x", "y", "z"))
        with self.shape_fig.batch_update():
            self.shape_fig.data = []
            if three_d:
                x, y, z = (np.asarray(coords[n].values, float) for n in ("x", "y", "z"))
                span = max(np.ptp(x), np.ptp(y), np.ptp(z), 1e-9)
                d = 0.25 * span * s
                self.shape_fig.add_scatter3d(x=x, y=y, z=z, mode="markers", name="sensor positions",
                                             marker={"color": REJECTED, "size": 4})
                self.shape_fig.add_scatter3d(x=x, y=y, z=z + d, mode="lines+markers+text", name=f"mode {m} (along Z, scaled)",
                                             text=a.channels, marker={"color": MODE, "size": 5},
                                             line={"color": MODE})
                self.shape_fig.layout.title = f"mode {m} shape at the sensor positions (x, y, z)"
            else:
                self.shape_fig.add_scatter(x=a.channels, y=s, mode="lines+markers", name=f"mode {m}",
                                           marker={"color": MODE, "symbol": "diamond", "size": 9},
                                           line={"color": MODE})
                self.shape_fig.layout.title = f"mode {m} shape along channel order (amplitude × cos phase)"
