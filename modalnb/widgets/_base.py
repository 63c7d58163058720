"""What every panel shares: the panel base class, figure boxes, HTML tables, escaping.

Colours and display decimation are not here: they live in :mod:`modalnb._display`, shared
with the HTML report.
"""

from __future__ import annotations

import html
import math
from typing import Any

# plotly's FigureWidget (every figure of the panels) is an ``anywidget.AnyWidget`` since
# plotly 6, but plotly does not declare the dependency: without anywidget the figures
# cannot exist. Import it here, so a missing anywidget is one clear error at import time.
try:
    import anywidget  # noqa: F401
except ImportError as exc:  # pragma: no cover - depends on the environment
    raise ImportError(
        "modalnb.widgets needs the `anywidget` package: plotly's FigureWidget, which draws "
        "every figure of the panels, is built on it (plotly does not install it). "
        "Install it with `pip install anywidget`."
    ) from exc
import ipywidgets as w
import numpy as np
import plotly.graph_objects as go

from .._display import PALETTE
from ..session import Analysis

__all__ = ["Panel", "esc", "fmt", "figure", "fig_box", "table_html", "mode_rows"]


def esc(x: Any) -> str:
    """`x` as text, HTML-escaped (``&<>"'``): what a page shows, never markup.

    Examples
    --------
    >>> esc("<b>tip</b> & 'root'")
    '&lt;b&gt;tip&lt;/b&gt; &amp; &#x27;root&#x27;'
    """
    return html.escape(str(x), quote=True)


def fmt(x: Any, spec: str = ".6g") -> str:
    """A table cell as an engineer writes it (6 significant digits, yes/no, – for none), escaped.

    Examples
    --------
    >>> fmt(572.31234567), fmt(True), fmt(float("nan")), fmt("<i>")
    ('572.312', 'yes', '–', '&lt;i&gt;')
    """
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (float, np.floating)):
        return "–" if math.isnan(float(x)) else format(float(x), spec)
    return esc(x)


def figure(height: int = 320, **layout: Any) -> go.FigureWidget:
    """An empty FigureWidget in modalnb's look (palette colours for overlaid traces)."""
    fig = go.FigureWidget()
    fig.update_layout(height=height, margin={"l": 60, "r": 20, "t": 36, "b": 40},
                      template="plotly_white", legend={"orientation": "h", "y": 1.12},
                      colorway=list(PALETTE.series), **layout)
    return fig


def fig_box(fig: go.FigureWidget, css: str) -> w.Box:
    """FigureWidget ignores ``add_class``: wrap it in a Box that carries the class."""
    box = w.Box([fig], layout=w.Layout(width="100%"))
    box.add_class(css)
    box.add_class("modalnb-figure")
    return box


_TABLE_STYLE = (
    "<style>.modalnb-table{border-collapse:collapse;font-size:12px}"
    f".modalnb-table td,.modalnb-table th{{border:1px solid {PALETTE.grid};padding:2px 6px;"
    "text-align:right}"
    f".modalnb-table th{{background:{PALETTE.header}}}</style>"
)


def table_html(rows: list[dict[str, Any]], columns: list[tuple[str, str]], css: str,
               cell_class: str | None = None) -> str:
    """An HTML table; every cell escaped; each cell gets class ``<cell_class>-<row>-<key>`` when asked.

    Examples
    --------
    >>> "&lt;script&gt;" in table_html([{"ch": "<script>"}], [("ch", "channel")], "t")
    True
    """
    head = "".join(f"<th>{esc(title)}</th>" for _, title in columns)
    body = []
    for i, r in enumerate(rows):
        cells = []
        for key, _ in columns:
            cls = f' class="{esc(cell_class)}-{i + 1}-{esc(key)}"' if cell_class else ""
            cells.append(f"<td{cls}>{fmt(r.get(key, ''))}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return (f'{_TABLE_STYLE}<table class="modalnb-table {esc(css)}"><thead><tr>{head}</tr></thead>'
            f"<tbody>{''.join(body)}</tbody></table>")


def mode_rows(a: Analysis) -> list[dict[str, Any]]:
    """One dict per fitted mode (frequency, damping, their std, regime, Q, status)."""
    r = a.result
    if r is None:
        return []
    rows = []
    for k, m in enumerate(r["mode"].values.tolist()):
        row: dict[str, Any] = {"mode": int(m)}
        for name in ("frequency_hz", "frequency_hz_std", "damping_ratio", "damping_ratio_std",
                     "regime", "q_factor", "status"):
            if name in r:
                v = r[name].values[k]
                row[name] = v.item() if hasattr(v, "item") else v
        rows.append(row)
    return rows


class Panel:
    """Base of every panel: a view over one :class:`~modalnb.session.Analysis`.

    ``panel.widget`` is the ipywidgets box; the panel shows itself in a notebook. It
    subscribes to the analysis and redraws on every new result; a failed refit shows the
    one-line error in the panel's status line.

    A subclass sets ``key`` (its attribute on the desk), ``title`` (its tab), ``css`` (the
    class of its box), builds its widgets in ``__init__``, calls ``self._finish(children)``
    and implements ``refresh()`` (state -> view).
    """

    key = "panel"
    css = "modalnb-panel"
    title = "panel"

    def __init__(self, analysis: Analysis) -> None:
        self.analysis = analysis
        self.status = w.HTML()
        self.status.add_class("modalnb-status")
        self._unsubscribe = analysis.subscribe(self._on_event)
        #: views inside the panel that listen to the analysis themselves (closed with it)
        self.views: list[Any] = []

    @classmethod
    def for_desk(cls, analysis: Analysis, **options: Any) -> Panel:
        """Build the panel for a desk; `options` are the desk's (a panel takes what it needs)."""
        return cls(analysis)

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
            self.status.value = (f'<span class="modalnb-error" style="color:{PALETTE.error}">'
                                 f"⚠ {esc(a.error)}</span>")
        elif a.warning:
            self.status.value = (f'<span class="modalnb-warning" style="color:{PALETTE.warning}">'
                                 f"note: {esc(a.warning)}</span>")
        else:
            n = 0 if a.result is None else a.result.sizes.get("mode", 0)
            self.status.value = f'<span class="modalnb-ok">{n} mode(s) fitted</span>'

    def refresh(self) -> None:  # pragma: no cover - every panel overrides it
        raise NotImplementedError

    def close(self) -> None:
        """Stop listening to the analysis and close the widgets."""
        self._unsubscribe()
        for view in self.views:
            view.close()
        self.widget.close()

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        return self.widget._repr_mimebundle_(**kwargs)
