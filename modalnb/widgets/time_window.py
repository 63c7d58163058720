"""Panel 2, time window: the ring-down of a channel (or all overlaid) with the fit window
shaded; a range slider and two number boxes bound both ways; box-select on the plot; a
log-amplitude view; live refit."""

from __future__ import annotations

from typing import Any

import ipywidgets as w

from .._display import PALETTE, decimate_for_display, envelope_db
from .._numbers import _step_decimals
from ..session import Analysis
from ._base import Panel, esc, fig_box, figure, mode_cells, table_html

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
        self._dt = 1.0 / a.sample_rate
        # decimals of the sample step, in s (slider) and in ms (boxes): neighbouring samples
        # stay apart (modalnb._numbers' time rule)
        self._ms_decimals = _step_decimals(self._dt * 1e3)
        s_dec = _step_decimals(self._dt)
        t0, t1 = a.fit_window()
        self.slider = w.FloatRangeSlider(value=(t0, t1), min=float(t[0]), max=float(t[-1]),
                                         step=step, readout_format=f".{s_dec}f",
                                         continuous_update=False, description="window [s]",
                                         tooltip="fit window, start and end in "
                                         "seconds (drag either end)",
                                         style={"description_width": "initial"},
                                         layout=w.Layout(width="95%"))
        self.slider.add_class("modalnb-window-slider")
        box_style = {"description_width": "initial"}
        self.start = w.FloatText(value=self._ms(t0), description="start [ms]", step=self._ms_step(),
                                 tooltip="start of the fit window, in milliseconds",
                                 style=box_style, layout=w.Layout(width="170px"))
        self.start.add_class("modalnb-window-start")
        self.end = w.FloatText(value=self._ms(t1), description="end [ms]", step=self._ms_step(),
                               tooltip="end of the fit window, in milliseconds",
                               style=box_style, layout=w.Layout(width="170px"))
        self.end.add_class("modalnb-window-end")
        self.auto = w.Button(description="auto window", layout=w.Layout(width="auto"),
                             tooltip="automatic window: from the end of the hammer pulse to "
                             "where the ring-down reaches the noise")
        self.auto.add_class("modalnb-window-auto")
        self.auto.on_click(lambda _b: self.analysis.set_window(None))
        self.channel = w.Dropdown(options=["all channels", *a.channels], value="all channels",
                                  description="channel", style=box_style,
                                  layout=w.Layout(width="auto"))
        self.hit = w.Dropdown(options=a.hits, value=(a.accepted_hits() or a.hits)[0],
                              description="hit", style=box_style, layout=w.Layout(width="auto"))
        self.log = w.Checkbox(value=False, description="log view", indent=False,
                              tooltip="log amplitude: an exponential decay is a "
                              "straight line, and the noise floor shows where it ends",
                              layout=w.Layout(width="auto"))
        self.log.add_class("modalnb-window-log")
        self.damping = w.HTML()
        self.damping.add_class("modalnb-window-damping")
        for ctl in (self.channel, self.hit, self.log):
            ctl.observe(lambda ch: self._draw_traces(), "value")
        self._syncing = False
        self.slider.observe(self._on_slider, "value")
        self.start.observe(self._on_box, "value")
        self.end.observe(self._on_box, "value")
        self.fig = figure(380, xaxis_title="time [s]", dragmode="select",
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

    # the boxes show milliseconds, to the sample step (the window itself stays in seconds)
    def _ms(self, t: float) -> float:
        return round(float(t) * 1e3, self._ms_decimals)

    def _ms_step(self) -> float:
        return float(10.0 ** -self._ms_decimals)

    # controls -> state
    def _on_slider(self, change: dict[str, Any]) -> None:
        if self._syncing:
            return
        lo, hi = change["new"]
        self._set_controls(lo, hi)
        self.analysis.set_window(lo, hi)

    def _on_box(self, change: dict[str, Any]) -> None:
        if self._syncing:
            return
        # only the box typed in changes its end; the other keeps the window's own value
        lo, hi = self.analysis.fit_window()
        if change.get("owner") is self.start:
            lo = float(self.start.value) / 1e3
        else:
            hi = float(self.end.value) / 1e3
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
            self.start.value, self.end.value = self._ms(lo), self._ms(hi)
        finally:
            self._syncing = False

    # state -> view
    def refresh(self) -> None:
        t0, t1 = self.analysis.fit_window()
        self._set_controls(t0, t1)
        with self.fig.batch_update():
            self.fig.layout.shapes[0].x0 = t0
            self.fig.layout.shapes[0].x1 = t1
        self.damping.value = table_html(mode_cells(self.analysis), [
            ("mode", "mode"), ("frequency_hz", "f ± u [Hz]"), ("damping_pct", "ζ ± u [%]")],
            "modalnb-damping-table", "modalnb-damp")

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
