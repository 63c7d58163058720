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
from ._base import NONE, Panel, esc, fig_box, figure, number
from .frf_views import CoherenceView

__all__ = ["HitPanel"]

#: Force pulse view: 2 ms before to 10 ms after the trigger (a hammer pulse lasts about
#: 0.1 to 5 ms; common practice).
PULSE_VIEW_S = (-0.002, 0.01)
#: Points per response trace in the overview (several traces share one small figure).
OVERVIEW_POINTS = 1200


#: The hit table's columns: (key, heading, tooltip of the heading). The decision toggle
#: is the "your decision" column.
COLUMNS = (
    ("hit", "hit", "hit number"),
    ("accepted", "used", "used in the fit: the checks' decision, or yours when you made one"),
    ("user_decision", "your decision", "auto: the checks decide; accept / reject: your "
     "decision wins and goes into the recipe"),
    ("reason", "reason", "why the checks left the hit out"),
    ("warnings", "warnings", "what the checks noted without leaving the hit out"),
    ("peak_force", "peak force", "peak of the force minus its median"),
    ("pulse_duration_s", "pulse [ms]", "duration of the hammer pulse, to the sample step"),
    ("double_hit_ratio", "2nd / 1st", "second force peak over the first (a double hit)"),
    ("snr_db", "SNR [dB]", "signal-to-noise ratio of the response, worst channel"),
    ("end_level_db", "end [dB]", "response level at the end of the record, re its peak"),
    ("clipped_samples", "clipped", "samples at the converter's limit"),
)
#: Column widths of the grid (the text columns share what is left; cells wrap, never cut).
GRID_COLUMNS = ("36px 40px 236px minmax(110px, 2fr) minmax(110px, 2fr) "
                "repeat(6, minmax(54px, 1fr))")


class HitPanel(Panel):
    """Hit review: each hit's force pulse and spectrum, response overview, flags, decisions.

    The hit table is a grid with one row per hit; the decision toggle (auto / accept /
    reject) sits in the hit's row, in the "your decision" column. Each cell carries the
    class ``modalnb-hitrow-<hit>-<key>``, each toggle ``modalnb-hit-toggle-<hit>``.
    """

    key = "hits"
    css = "modalnb-hits"
    title = "Hits"
    _CHOICES = (("auto", None), ("accept", True), ("reject", False))
    _TIPS = ("automatic: the checks decide", "accept: use this hit whatever the checks say",
             "reject: leave this hit out whatever the checks say")

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        self.count = w.HTML()
        self.count.add_class("modalnb-hit-count")
        self.toggles: dict[int, w.ToggleButtons] = {}
        self.cells: dict[tuple[int, str], w.HTML] = {}
        grid: list[w.Widget] = []
        for _key, head, tip in COLUMNS:
            cell = w.HTML(f'<span title="{esc(tip)}">{esc(head)}</span>')
            cell.add_class("modalnb-hit-head")
            grid.append(cell)
        for h in a.hits:
            for key, _head, _tip in COLUMNS:
                if key == "user_decision":
                    tb = w.ToggleButtons(options=[c[0] for c in self._CHOICES], value="auto",
                                         tooltips=list(self._TIPS),
                                         style={"button_width": "74px"},
                                         layout=w.Layout(width="auto"))
                    tb.add_class(f"modalnb-hit-toggle-{h}")
                    tb.add_class("modalnb-hit-toggle")
                    tb.add_class(f"modalnb-hitrow-{h}-user_decision")
                    tb.observe(lambda ch, h=h: self._decide(h, ch["new"]), "value")
                    self.toggles[h] = tb
                    grid.append(tb)
                    continue
                cell = w.HTML(layout=w.Layout(min_width="0"))
                self.cells[(h, key)] = cell
                grid.append(cell)
        self.table = w.GridBox(grid, layout=w.Layout(
            grid_template_columns=GRID_COLUMNS, grid_gap="2px 6px", width="100%"))
        self.table.add_class("modalnb-hit-table")
        self.table.add_class("modalnb-hit-grid")
        self.show_hit = w.Dropdown(options=a.hits, value=a.hits[0], description="show hit",
                                   tooltip="the hit drawn below",
                                   style={"description_width": "initial"},
                                   layout=w.Layout(width="160px"))
        self.show_hit.add_class("modalnb-hit-choice")
        self.show_hit.observe(lambda ch: self._draw_hit(), "value")
        self.force_fig = go.FigureWidget(make_subplots(
            rows=1, cols=2, subplot_titles=("hammer force (pulse)", "force spectrum")))
        self.force_fig.update_layout(height=300, margin={"l": 60, "r": 20, "t": 40, "b": 40},
                                     template="plotly_white", showlegend=False, autosize=True)
        for col in (1, 2):
            self.force_fig.add_scatter(x=[], y=[], mode="lines", line={"color": PALETTE.measured},
                                       row=1, col=col)
        self.force_fig.update_xaxes(title_text="time [ms]", row=1, col=1)
        self.force_fig.update_xaxes(title_text="frequency [Hz]", row=1, col=2)
        self.force_fig.update_yaxes(title_text="dB re peak", row=1, col=2)
        self.resp_fig = figure(300, title="responses of this hit (all channels)",
                               xaxis_title="time [s]")
        for ch in a.channels:  # plotly reads names as its own markup: escape them
            self.resp_fig.add_scatter(x=[], y=[], mode="lines", name=esc(ch), line={"width": 1})
        self._busy = False
        self.coherence = CoherenceView(a)  # coherence of the accepted hits (frf_views)
        self.views.append(self.coherence)
        self._finish([
            w.HTML("<b>Hit review.</b> Automatic flags, the measures behind them, and your "
                   "decision per hit (your decision wins and goes into the recipe)."),
            self.count, self.table, self.show_hit,
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
        for i, h in enumerate(c["hit"].values.tolist()):
            for key, text in self._row_text(c, i).items():
                if (h, key) in self.cells:
                    self.cells[(h, key)].value = (f'<span class="modalnb-hitrow-{h}-{key}">'
                                                  f"{esc(text)}</span>")
        self._busy = True
        try:
            for h, tb in self.toggles.items():
                o = a.recipe.hit_overrides.get(h)
                tb.value = "auto" if o is None else ("accept" if o else "reject")
        finally:
            self._busy = False
        self._draw_hit()

    def _row_text(self, c, i: int) -> dict[str, str]:
        """The cells of one hit's row as text: numbers through modalnb._numbers."""
        def val(name: str) -> float | str | None:
            if name not in c:
                return None
            v = c[name].values[i]
            return v.item() if hasattr(v, "item") else v

        a = self.analysis
        units = str(a.records["force"].attrs.get("units", "")) if "force" in a.records else ""
        peak = number(val("peak_force"), "amplitude")
        clipped = val("clipped_samples")
        return {
            "hit": str(int(c["hit"].values[i])),
            "accepted": "yes" if bool(c["accepted"].values[i]) else "no",
            "reason": str(val("reason") or ""), "warnings": str(val("warnings") or ""),
            "peak_force": peak if peak == NONE or not units else f"{peak} {units}",
            "pulse_duration_s": number(val("pulse_duration_s"), "time", step=1 / a.sample_rate,
                                       unit="ms"),
            "double_hit_ratio": number(val("double_hit_ratio"), "ratio"),
            "snr_db": number(val("snr_db"), "db", unit="dB"),
            "end_level_db": number(val("end_level_db"), "db", unit="dB"),
            "clipped_samples": NONE if clipped is None else number(clipped, "count"),
        }

    def rows_html(self) -> str:
        """The hit table's cells as one HTML text (what the rows show; for tests and search)."""
        return "".join(self.cells[k].value for k in sorted(self.cells))

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
            # the hit and its use in the first subplot's title (no figure title over them)
            self.force_fig.layout.annotations[0].text = (
                f"hammer force, hit {h} ({'used' if accepted else 'not used'})")
        y = a.records["response"].sel(hit=h).values
        with self.resp_fig.batch_update():
            for c, tr in enumerate(self.resp_fig.data):
                tr.x, tr.y = decimate_for_display(t, y[c], OVERVIEW_POINTS)
