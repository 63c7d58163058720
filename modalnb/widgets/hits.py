"""Panel 1, hits: each hit's force pulse and spectrum, the response overview, the automatic
flags with their reasons and measures, and accept / reject / automatic per hit."""

from __future__ import annotations

import ipywidgets as w
import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from .._display import PALETTE, decimate_for_display
from .._errors import ModalnbError
from ..checks import force_spectrum
from ..session import Analysis
from ._base import Panel, esc, fig_box, figure, table_html
from .frf_views import CoherenceView

__all__ = ["HitPanel"]

#: Force pulse view: 2 ms before to 10 ms after the trigger (a hammer pulse lasts about
#: 0.1 to 5 ms; common practice).
PULSE_VIEW_S = (-0.002, 0.01)
#: Points per response trace in the overview (several traces share one small figure).
OVERVIEW_POINTS = 1200


class HitPanel(Panel):
    """Hit review: each hit's force pulse and spectrum, response overview, flags, decisions."""

    key = "hits"
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
        for col in (1, 2):
            self.force_fig.add_scatter(x=[], y=[], mode="lines", line={"color": PALETTE.measured},
                                       row=1, col=col)
        self.force_fig.update_xaxes(title_text="time [ms]", row=1, col=1)
        self.force_fig.update_xaxes(title_text="frequency [Hz]", row=1, col=2)
        self.force_fig.update_yaxes(title_text="dB re peak", row=1, col=2)
        self.resp_fig = figure(260, title="responses of this hit (all channels)",
                               xaxis_title="time [s]")
        for ch in a.channels:  # plotly reads names as its own markup: escape them
            self.resp_fig.add_scatter(x=[], y=[], mode="lines", name=esc(ch), line={"width": 1})
        self._busy = False
        self.coherence = CoherenceView(a)  # coherence of the accepted hits (frf_views)
        self.views.append(self.coherence)
        self._finish([
            w.HTML("<b>Hit review.</b> Automatic flags, the measures behind them, and your "
                   "decision per hit (your decision wins and goes into the recipe)."),
            self.count, self.table, w.VBox(rows), self.show_hit,
            fig_box(self.force_fig, "modalnb-force-figure"),
            fig_box(self.resp_fig, "modalnb-response-figure"), self.coherence.widget,
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

    def _force_spectrum(self, hit: int) -> tuple[np.ndarray, np.ndarray]:
        """The force spectrum the soft-tip check judged (same window, same thresholds)."""
        a = self.analysis
        keys = ("pulse_end_fraction", "double_hit_margin")
        opts = {k: v for k, v in (a.recipe.check_thresholds or {}).items() if k in keys}
        try:
            fr, level = force_spectrum(a.records, hit, **opts)
        except ModalnbError:  # a flat force record: nothing to show
            return np.array([]), np.array([])
        finite = np.isfinite(level)
        floor = float(level[finite].min()) if finite.any() else -300.0
        return decimate_for_display(fr, np.where(finite, level, floor))

    def _draw_hit(self) -> None:
        a = self.analysis
        h = int(self.show_hit.value)
        t = a.records["time"].values
        accepted = h in a.accepted_hits()
        colour = PALETTE.accepted if accepted else PALETTE.rejected
        with self.force_fig.batch_update():
            if "force" in a.records:
                f = a.records["force"].sel(hit=h).values
                win = (t >= PULSE_VIEW_S[0]) & (t <= PULSE_VIEW_S[1])
                self.force_fig.data[0].x = t[win] * 1e3
                self.force_fig.data[0].y = f[win]
                self.force_fig.data[0].line.color = colour
                fx, fy = self._force_spectrum(h)
                self.force_fig.data[1].x, self.force_fig.data[1].y = fx, fy
                self.force_fig.data[1].line.color = colour
            self.force_fig.layout.title = f"hit {h} ({'used' if accepted else 'not used'})"
        y = a.records["response"].sel(hit=h).values
        with self.resp_fig.batch_update():
            for c, tr in enumerate(self.resp_fig.data):
                tr.x, tr.y = decimate_for_display(t, y[c], OVERVIEW_POINTS)
