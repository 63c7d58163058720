"""Panel 2, time window: the ring-down of a channel (or all overlaid) with the fit window
shaded; a range slider and two number boxes bound both ways; box-select on the plot; a
log-amplitude view; live refit."""

from __future__ import annotations

from typing import Any

import ipywidgets as w

from .._display import PALETTE, decimate_for_display, envelope_db
from ..session import Analysis
from ._base import Panel, esc, fig_box, figure, mode_rows, table_html

__all__ = ["WindowPanel"]


class WindowPanel(Panel):
    """Fit-window choice on the ring-down, with live refit."""

    key = "window"
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
                                       y1=1, fillcolor=PALETTE.window, line={"width": 0},
                                       layer="below")]
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
        self.damping.value = table_html(mode_rows(self.analysis), [
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
        units = esc(a.records["response"].attrs.get("units", ""))
        with self.fig.batch_update():
            self.fig.data = []
            for i in (a.channels.index(n) for n in names):
                view = envelope_db if self.log.value else decimate_for_display
                tt, yy = view(self._t, y[i])
                self.fig.add_scatter(x=tt, y=yy, mode="lines", name=esc(a.channels[i]),
                                     line={"width": 1})
            self.fig.layout.yaxis.title = f"dB re 1 {units}" if self.log.value else (units or "response")
        for tr in self.fig.data:
            tr.on_selection(self._on_select)
