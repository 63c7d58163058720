"""Panel 3, modes: the spectrum summed over channels with the found modes marked, the
poles-versus-order (stabilisation) chart when the engine provides it, the band, the number
of modes, and adding / dropping a mode by frequency."""

from __future__ import annotations

from typing import Any

import ipywidgets as w
import numpy as np

from .._display import PALETTE, decimate_for_display
from .._utils import default_band
from ..session import Analysis
from ._base import Panel, esc, fig_box, figure

__all__ = ["ModesPanel"]

#: Most modes offered in the "modes" count menu (beyond that, "automatic").
MAX_MODE_CHOICE = 20
#: Found-mode markers sit this factor above the spectrum, so they do not hide its peak.
MARKER_LIFT = 1.3


class ModesPanel(Panel):
    """Mode finding: summed spectrum with found modes, stabilisation chart, band, count."""

    key = "modes"
    css = "modalnb-modes"
    title = "Modes"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        nyq = a.sample_rate / 2
        band = self._band()
        self._syncing = False
        self.band = w.FloatRangeSlider(value=band, min=0.0, max=nyq, step=1.0, readout_format=".0f",
                                       continuous_update=False, description="band [Hz]",
                                       layout=w.Layout(width="95%"))
        self.band.add_class("modalnb-band-slider")
        self.band.observe(self._on_band, "value")
        self.auto_band = w.Button(description="automatic band")
        self.auto_band.on_click(lambda _b: self.analysis.set_band(None))
        self.n_modes = w.Dropdown(
            options=[("automatic", 0)] + [(str(i), i) for i in range(1, MAX_MODE_CHOICE + 1)],
            value=self._n_modes_choice(), description="modes")
        self.n_modes.add_class("modalnb-n-modes")
        self.n_modes.observe(self._on_n_modes, "value")
        self.fig = figure(340, xaxis_title="frequency [Hz]", yaxis_type="log", dragmode="select",
                          title="spectrum summed over channels; ▼ found modes (drag a box: band)")
        self.fig.add_scatter(x=[], y=[], mode="lines", line={"color": PALETTE.measured, "width": 1},
                             name="|X| summed over channels, mean over used hits")
        self.fig.add_scatter(x=[], y=[], mode="markers+text", name="found mode",
                             marker={"symbol": "triangle-down", "size": 12, "color": PALETTE.mode},
                             textposition="top center")
        self.fig.data[0].on_selection(self._on_select)
        self.fig.layout.shapes = [dict(type="rect", xref="x", yref="paper", x0=band[0], x1=band[1],
                                       y0=0, y1=1, fillcolor=PALETTE.window, line={"width": 0},
                                       layer="below")]
        self.stab = figure(300, xaxis_title="frequency [Hz]", yaxis_title="model order",
                           title="poles versus model order")
        self.stab.add_scatter(x=[], y=[], mode="markers", name="pole seen once",
                              marker={"symbol": "circle-open", "color": PALETTE.once, "size": 6})
        self.stab.add_scatter(x=[], y=[], mode="markers", name="stable in frequency and damping",
                              marker={"symbol": "diamond-open", "color": PALETTE.stable, "size": 7})
        self.stab.add_scatter(x=[], y=[], mode="markers",
                              name="stable in frequency, damping and shape (MAC ≥ 0.9)",
                              marker={"symbol": "diamond", "color": PALETTE.stable, "size": 8})
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

    def _band(self) -> tuple[float, float]:
        """The band in use: the recipe's, or :func:`modalnb._utils.default_band`."""
        a = self.analysis
        return tuple(a.recipe.band) if a.recipe.band else default_band(a.sample_rate)

    def _n_modes_choice(self) -> int:
        n = self.analysis.recipe.n_modes or 0
        return n if n <= MAX_MODE_CHOICE else 0

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
        fx, fy = decimate_for_display(f, mag)
        r = a.result
        band = self._band()
        self._syncing = True
        try:
            self.band.value = (max(band[0], 0.0), min(band[1], self.band.max))
            self.n_modes.value = self._n_modes_choice()
        finally:
            self._syncing = False
        with self.fig.batch_update():
            self.fig.data[0].x, self.fig.data[0].y = fx, fy
            if r is not None and r.sizes.get("mode", 0):
                fk = r["frequency_hz"].values
                self.fig.data[1].x, self.fig.data[1].y = fk, np.interp(fk, f, mag) * MARKER_LIFT
                self.fig.data[1].text = [f"{int(m)}" for m in r["mode"].values]
            else:
                self.fig.data[1].x, self.fig.data[1].y = [], []
            self.fig.layout.shapes[0].x0, self.fig.layout.shapes[0].x1 = band
        self._show_edits()
        self._draw_stabilisation()

    def _show_edits(self) -> None:
        rec = self.analysis.recipe
        parts = []
        if rec.add_modes:
            parts.append("added: " + ", ".join(f"{f:g} Hz" for f in rec.add_modes))
        if rec.drop_modes:
            parts.append("dropped: " + ", ".join(f"{f:g} Hz" for f in rec.drop_modes))
        self.edits.value = ("<i>mode edits (in the recipe) — " + esc("; ".join(parts)) + "</i>"
                            if parts else "")

    def _draw_stabilisation(self) -> None:
        a = self.analysis
        r = a.result
        st = a.stabilisation_table()
        with self.stab.batch_update():
            if st is None:
                for tr in self.stab.data:
                    tr.x = tr.y = []
                self.stab_note.value = "<i>This estimation engine gives no poles-versus-order data.</i>"
                return
            order = np.asarray(st["order"].values, float)
            freq = np.asarray(st["frequency_hz"].values, float)
            stable = np.asarray(st["stable"].values, bool)
            zeta = (np.asarray(st["damping_ratio"].values, float) if "damping_ratio" in st
                    else np.full(freq.size, np.nan))
            mac = np.asarray(st["mac"].values, float) if "mac" in st else np.full(freq.size, np.nan)
            shape_ok = (np.asarray(st["stable_shape"].values, bool) if "stable_shape" in st
                        else np.zeros(freq.size, bool))
            hover = ("f_n %{x:.5g} Hz, order %{y}<br>ζ %{customdata[0]:.3g} %"
                     "<br>MAC with the previous order %{customdata[1]}<extra></extra>")
            for tr, sel in zip(self.stab.data, (~stable, stable & ~shape_ok, shape_ok), strict=True):
                tr.x, tr.y = freq[sel], order[sel]
                tr.customdata = [[float(z), "–" if np.isnan(v) else f"{v:.3f}"]
                                 for z, v in zip(100 * zeta[sel], mac[sel], strict=True)]
                tr.hovertemplate = hover
            # the fitted modes as dashed lines: columns of stable poles should line up
            fk = r["frequency_hz"].values if r is not None and r.sizes.get("mode", 0) else []
            self.stab.layout.shapes = [
                dict(type="line", xref="x", yref="paper", x0=float(f0), x1=float(f0), y0=0, y1=1,
                     line={"color": PALETTE.mode, "width": 1, "dash": "dash"}) for f0 in fk]
            self.stab_note.value = ("<i>dashed: fitted modes. Lower orders are the narrow "
                                    "sub-band pencils, higher orders the wide-band one. Stable: a "
                                    "pole of the previous order within 1 % in frequency and 5 % "
                                    "in damping ratio, with energy above the noise; filled "
                                    "diamonds also keep their shape (MAC ≥ 0.9).</i>")
