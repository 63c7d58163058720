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
from ._base import Panel, esc, fig_box, figure, number, table_html

__all__ = ["ModesPanel"]

#: Most modes offered in the "modes" count menu (beyond that, "automatic").
MAX_MODE_CHOICE = 20
#: Found-mode markers sit this factor above the spectrum, so they do not hide its peak.
MARKER_LIFT = 1.3

#: The stabilisation chart's classes, by the engine's ``match`` flag (the first test a pole
#: fails against the order below; ``flag_meanings`` of ``stabilisation_["match"]``), in the
#: legend's order: (flag meaning, legend label, what it means, marker, palette colour).
STAB_CLASSES = (
    ("stable", "stable", "a pole of the order below within 1 % in frequency and 5 % in "
     "damping ratio, energy above the noise limit, shape MAC ≥ 0.9", "diamond", "stable"),
    ("shape", "not stable: shape", "frequency, damping and energy agree, the shape does not "
     "(MAC < 0.9 with that pole)", "diamond-open", "unstable_shape"),
    ("energy", "not stable: energy", "frequency and damping agree, but the pole's energy is "
     "under the noise limit (a noise pole)", "circle-open", "unstable_energy"),
    ("damping", "not stable: damping", "a pole of the order below within 1 % in frequency, "
     "but not within 5 % in damping ratio", "x-thin-open", "unstable_damping"),
    ("frequency", "not stable: frequency", "no pole of the order below within 1 % in "
     "frequency", "circle-open", "unstable_frequency"),
    ("new", "new", "the first order of its pencil: nothing to compare with", "circle-open",
     "once"),
)


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
                                       tooltip="the frequency band searched for "
                                       "modes", style={"description_width": "initial"},
                                       layout=w.Layout(width="95%"))
        self.band.add_class("modalnb-band-slider")
        self.band.observe(self._on_band, "value")
        self.auto_band = w.Button(description="auto band", layout=w.Layout(width="auto"),
                                  tooltip="automatic band: from 0 Hz to the default upper "
                                  "limit (below the anti-alias filter)")
        self.auto_band.add_class("modalnb-auto-band")
        self.auto_band.on_click(lambda _b: self.analysis.set_band(None))
        self.n_modes = w.Dropdown(
            options=[("auto", 0)] + [(str(i), i) for i in range(1, MAX_MODE_CHOICE + 1)],
            value=self._n_modes_choice(), description="modes",
            tooltip="how many modes to keep, the strongest by energy (auto: "
            "every mode the search finds)", style={"description_width": "initial"},
            layout=w.Layout(width="auto"))
        self.n_modes.add_class("modalnb-n-modes")
        self.n_modes.observe(self._on_n_modes, "value")
        self.fig = figure(340, xaxis_title="frequency [Hz]", yaxis_type="log", dragmode="select",
                          title="spectrum summed over channels; ▼ found modes (drag a box: band)")
        self.fig.add_scatter(x=[], y=[], mode="lines", line={"color": PALETTE.measured, "width": 1},
                             name="|X| summed over channels (mean over used hits)")
        self.fig.add_scatter(x=[], y=[], mode="markers+text", name="found mode",
                             marker={"symbol": "triangle-down", "size": 12, "color": PALETTE.mode},
                             textposition="top center")
        self.fig.data[0].on_selection(self._on_select)
        self.fig.layout.shapes = [dict(type="rect", xref="x", yref="paper", x0=band[0], x1=band[1],
                                       y0=0, y1=1, fillcolor=PALETTE.window, line={"width": 0},
                                       layer="below")]
        self.stab = figure(380, xaxis_title="frequency [Hz]", yaxis_title="model order",
                           title="poles versus model order (stabilisation)")
        # drawn from the least to the most telling class, so stable poles sit on top
        for meaning, label, _what, symbol, colour in reversed(STAB_CLASSES):
            size = 8 if meaning == "stable" else 6
            self.stab.add_scatter(x=[], y=[], mode="markers", name=label, meta=meaning,
                                  marker={"symbol": symbol, "color": getattr(PALETTE, colour),
                                          "size": size})
        self.stab_note = w.HTML()
        self.stab_note.add_class("modalnb-stab-legend")
        # add or drop a mode by frequency: type it, or click on the spectrum to fill the box
        self.mode_freq = w.BoundedFloatText(value=0.0, min=0.0, max=nyq, step=0.1,
                                            description="f [Hz]",
                                            tooltip="frequency of the mode to add or "
                                            "drop (click on the spectrum to fill it in)",
                                            style={"description_width": "initial"},
                                            layout=w.Layout(width="160px"))
        self.mode_freq.add_class("modalnb-mode-frequency")
        auto = w.Layout(width="auto")
        self.add_btn = w.Button(description="add mode", layout=auto,
                                tooltip="add a mode here: seed a pole the search missed")
        self.add_btn.add_class("modalnb-add-mode")
        self.drop_btn = w.Button(description="drop nearest", layout=auto,
                                 tooltip="drop the nearest mode: leave it out of the table")
        self.drop_btn.add_class("modalnb-drop-mode")
        self.clear_btn = w.Button(description="undo edits", layout=auto,
                                  tooltip="undo every mode edit (added and dropped modes)")
        self.clear_btn.add_class("modalnb-undo-mode-edits")
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
            parts.append("added: " + ", ".join(number(f, "frequency_hz") for f in rec.add_modes))
        if rec.drop_modes:
            parts.append("dropped: " + ", ".join(number(f, "frequency_hz") for f in rec.drop_modes))
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
            zeta = (np.asarray(st["damping_ratio"].values, float) if "damping_ratio" in st
                    else np.full(freq.size, np.nan))
            mac = np.asarray(st["mac"].values, float) if "mac" in st else np.full(freq.size, np.nan)
            cls = _classes(st)
            hover = ("f_n %{x:.5g} Hz, order %{y}<br>ζ %{customdata[0]} %"
                     "<br>MAC with the order below %{customdata[1]}<extra></extra>")
            counts: dict[str, int] = {}
            for tr in self.stab.data:
                sel = cls == tr.meta
                counts[tr.meta] = int(sel.sum())
                tr.x, tr.y = freq[sel], order[sel]
                tr.name = f"{_label(tr.meta)} ({counts[tr.meta]})"
                tr.customdata = [[number(z, "damping_pct", unit="%"), number(v, "ratio")]
                                 for z, v in zip(zeta[sel], mac[sel], strict=True)]
                tr.hovertemplate = hover
            # the fitted modes as lines: columns of stable poles should line up
            fk = r["frequency_hz"].values if r is not None and r.sizes.get("mode", 0) else []
            self.stab.layout.shapes = [
                dict(type="line", xref="x", yref="paper", x0=float(f0), x1=float(f0), y0=0, y1=1,
                     line=PALETTE.mode_line) for f0 in fk]
        rows = [{"cls": label, "meaning": what, "count": number(counts.get(meaning, 0), "count")}
                for meaning, label, what, _s, _c in STAB_CLASSES]
        self.stab_note.value = (
            "<i>dotted: fitted modes. Lower orders are the narrow sub-band pencils, higher orders "
            "the wide-band one. Each pole is compared with the nearest pole of the order below "
            "(1 % and 5 % are common practice); a class names the first test it fails.</i>"
            + table_html(rows, [("cls", "class"), ("meaning", "meaning"), ("count", "poles")],
                         "modalnb-stab-classes", "modalnb-stab", text=("cls", "meaning")))


def _label(meaning: str) -> str:
    return next(c[1] for c in STAB_CLASSES if c[0] == meaning)


def _classes(st: Any) -> np.ndarray:
    """Each pole's class (a flag meaning of :data:`STAB_CLASSES`) from the engine's table.

    With the engine's ``match`` flag (CF ``flag_values`` / ``flag_meanings``); without it
    (an older engine) from ``stable`` / ``stable_shape`` alone, the rest as "frequency"."""
    n = st.sizes["pole"]
    if "match" in st:
        v = st["match"]
        meaning = dict(zip(np.asarray(v.attrs["flag_values"]).tolist(),
                           str(v.attrs["flag_meanings"]).split(), strict=True))
        return np.array([meaning[int(x)] for x in np.asarray(v.values)], dtype=object)
    stable = np.asarray(st["stable"].values, bool)
    shape = (np.asarray(st["stable_shape"].values, bool) if "stable_shape" in st
             else np.zeros(n, bool))
    return np.where(shape, "stable", np.where(stable, "shape", "frequency")).astype(object)
