"""Shared pieces of the panels: palette, figure boxes, status line, panel base class."""

from __future__ import annotations

import html
import math
from typing import Any

import ipywidgets as w
import numpy as np
import plotly.graph_objects as go

from ..session import Analysis

# Our own palette (colour-blind-safe pairs), explained in every figure's legend.
MEASURED = "#3f5166"  # slate: measured data
MODEL = "#e08a00"  # amber: fitted model
RESIDUAL = "#17917f"  # teal: residual
WINDOW = "rgba(80, 140, 220, 0.18)"  # pale blue band: fit window
MODE = "#b8336a"  # raspberry: found modes
REJECTED = "#9aa3ab"  # grey: rejected hits
ACCEPTED = "#2c7fb8"  # blue: accepted hits
STABLE = "#1a9850"  # green: stable pole
NEW = "#d9d9d9"  # light grey: pole seen at one order only

#: Most points sent to the browser per trace (what a screen can show).
MAX_POINTS = 2000


def esc(x: Any) -> str:
    return html.escape(str(x), quote=True)


def fmt(x: Any, spec: str = ".6g") -> str:
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (float, np.floating)):
        return "–" if math.isnan(float(x)) else format(float(x), spec)
    return esc(x)


def decimate(t: np.ndarray, y: np.ndarray, n: int = MAX_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """Keep the min and max of each of ``n // 2`` equal buckets (what a screen can show).

    Vectorised form of :func:`modalnb.report.decimate_for_display` (same idea: every
    peak survives); at most `n` points.
    """
    t, y = np.asarray(t), np.asarray(y)
    size = y.size
    if size <= n:
        return t, y
    buckets = max(1, n // 2)
    k = -(-size // buckets)  # samples per bucket, rounded up
    pad = buckets * k - size
    yy = np.concatenate([y, np.full(pad, y[-1])]).reshape(buckets, k)
    base = np.arange(buckets) * k
    lo = np.minimum(base + np.argmin(yy, axis=1), size - 1)
    hi = np.minimum(base + np.argmax(yy, axis=1), size - 1)
    idx = np.unique(np.concatenate([lo, hi]))
    return t[idx], y[idx]


def figure(height: int = 320, **layout: Any) -> go.FigureWidget:
    fig = go.FigureWidget()
    fig.update_layout(height=height, margin={"l": 60, "r": 20, "t": 36, "b": 40},
                      template="plotly_white", legend={"orientation": "h", "y": 1.12}, **layout)
    return fig


def fig_box(fig: go.FigureWidget, css: str) -> w.Box:
    """FigureWidget ignores ``add_class``: wrap it in a Box that carries the class."""
    box = w.Box([fig], layout=w.Layout(width="100%"))
    box.add_class(css)
    box.add_class("modalnb-figure")
    return box


def table_html(rows: list[dict[str, Any]], columns: list[tuple[str, str]], css: str,
               cell_class: str | None = None) -> str:
    """An HTML table; each cell gets class ``<cell_class>-<row>-<column key>`` when asked."""
    head = "".join(f"<th>{esc(title)}</th>" for _, title in columns)
    body = []
    for i, r in enumerate(rows):
        cells = []
        for key, _ in columns:
            cls = f' class="{cell_class}-{i + 1}-{key}"' if cell_class else ""
            cells.append(f"<td{cls}>{fmt(r.get(key, ''))}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    style = ("<style>.modalnb-table{border-collapse:collapse;font-size:12px}"
             ".modalnb-table td,.modalnb-table th{border:1px solid #d5dbe0;padding:2px 6px;text-align:right}"
             ".modalnb-table th{background:#eef2f5}</style>")
    return (f'{style}<table class="modalnb-table {css}"><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table>")


class Panel:
    """Base of every panel: a view over one :class:`~modalnb.session.Analysis`.

    ``panel.widget`` is the ipywidgets box; the panel shows itself in a notebook. It
    subscribes to the analysis and redraws on every new result; a failed refit shows the
    one-line error in the panel's status line.
    """

    css = "modalnb-panel"
    title = "panel"

    def __init__(self, analysis: Analysis) -> None:
        self.analysis = analysis
        self.status = w.HTML()
        self.status.add_class("modalnb-status")
        self._unsubscribe = analysis.subscribe(self._on_event)

    def _finish(self, children: list[w.Widget]) -> None:
        self.widget = w.VBox([*children, self.status], layout=w.Layout(width="100%"))
        self.widget.add_class("modalnb-panel")
        self.widget.add_class(self.css)
        self._show_status()
        self.refresh()

    def _on_event(self, event: str, analysis: Analysis) -> None:
        self._show_status()
        if event == "result":
            self.refresh()

    def _show_status(self) -> None:
        a = self.analysis
        if a.busy:
            self.status.value = f'<span class="modalnb-busy">⏳ {esc(a.busy)}…</span>'
        elif a.error:
            self.status.value = f'<span class="modalnb-error" style="color:#b3261e">⚠ {esc(a.error)}</span>'
        elif a.warning:
            self.status.value = f'<span class="modalnb-warning" style="color:#8a5a00">note: {esc(a.warning)}</span>'
        else:
            n = 0 if a.result is None else a.result.sizes.get("mode", 0)
            self.status.value = f'<span class="modalnb-ok">{n} mode(s) fitted</span>'

    def refresh(self) -> None:  # pragma: no cover - every panel overrides it
        raise NotImplementedError

    def close(self) -> None:
        """Stop listening to the analysis and close the widgets."""
        self._unsubscribe()
        self.widget.close()

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        return self.widget._repr_mimebundle_(**kwargs)
