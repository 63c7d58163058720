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
    import anywidget
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
from .._numbers import split_quantity, split_with_uncertainty
from ..session import Analysis

__all__ = ["Panel", "esc", "fmt", "number", "with_u", "figure", "stacked_figure", "mac_heatmap", "fig_box", "table_html",
           "mode_rows", "mode_cells", "PANEL_STYLE", "side_by_side"]

#: What a cell shows for a number that is not there (NaN, None).
NONE = "–"

#: The unit and the factor of the kinds :func:`with_u` takes (the value's unit in -> shown).
_U_KINDS = {"frequency_hz": (1.0, "Hz"), "damping_pct": (100.0, "%"), "time": (1e3, "ms"),
            "db": (1.0, "dB"), "ratio": (1.0, "")}


def _missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return math.isnan(float(value))
    except (TypeError, ValueError):
        return False


def _join(text: str, unit: str, heading_unit: str | None) -> str:
    if not unit or unit == heading_unit:
        return text
    return f"{text}{unit}" if unit == "°" else f"{text} {unit}"


def number(value: Any, kind: str, *, step: float | None = None, u: float | None = None,
           unit: str | None = None) -> str:
    """A number of a known kind as text, through :func:`modalnb._numbers.split_quantity`.

    Not escaped (:func:`table_html` escapes its cells). `unit` is the unit the column
    heading states: the cell leaves it out when the number is written in it (and keeps
    its own unit when the number needed another, e.g. ``s`` where the heading says
    ``ms``); None writes the unit.

    Examples
    --------
    >>> number(0.000732421875, "time", step=1 / 4096, unit="ms")
    '0.7'
    >>> number(60.0844, "db"), number(float("nan"), "db"), number(1.5, "time", unit="ms")
    ('60.1 dB', '–', '1.5 s')
    """
    if _missing(value):
        return NONE
    text, u_nit = split_quantity(float(value), kind, step=step, u=u)
    return _join(text, u_nit, unit)


def with_u(value: Any, u: Any, kind: str = "frequency_hz", *, unit: str | None = None) -> str:
    """A value and its standard uncertainty as ``"value ± u"``, rounded as GUM 7.2.6 says.

    JCGM 100:2008 7.2.6: the uncertainty to at most two significant digits, the value to
    the same decimal place (:func:`modalnb._numbers.split_with_uncertainty`). `kind` gives
    the unit: ``frequency_hz`` (Hz in, Hz shown), ``damping_pct`` (a ratio in, % shown),
    ``time`` (s in, ms shown), ``db``, ``ratio``. `unit` as in :func:`number`. Without an
    uncertainty (NaN) the value is written alone with ``(u n/a)``.

    Examples
    --------
    >>> with_u(572.3123456, 0.0183, unit="Hz")
    '572.312 ± 0.018'
    >>> with_u(0.0150, 0.000046, "damping_pct")
    '1.5000 ± 0.0046 %'
    >>> with_u(12345.678, 153.0, unit="Hz")  # u >= 100: the larger unit, named in the cell
    '12.35 ± 0.15 kHz'
    >>> with_u(572.3, float("inf"), unit="Hz"), with_u(572.3, 0.0, unit="Hz")
    ('572.3 (u unbounded)', '572.3 (u = 0)')
    """
    if _missing(value):
        return NONE
    scale, base = _U_KINDS[kind]
    if _missing(u):
        text, u_nit = split_quantity(float(value) * scale, "frequency_hz")
        return _join(text, base, unit) + " (u n/a)"
    v_text, u_text, u_nit = split_with_uncertainty(float(value) * scale, float(u) * scale,
                                                   unit=base)
    if u_text in ("∞", "0"):  # as the report writes it (export._cells.pm_cell)
        return _join(v_text, u_nit, unit) + (" (u unbounded)" if u_text == "∞" else " (u = 0)")
    return _join(f"{v_text} ± {u_text}", u_nit, unit)


#: The panels' own CSS: figures take their box's width (plotly autosizes to it); labels
#: and buttons are never cut by the widgets' fixed description width.
PANEL_STYLE = (
    "<style>"
    ".modalnb-figure{width:100%;min-width:0}"
    ".modalnb-figure>*{flex:1 1 auto;width:100%;min-width:0}"
    ".modalnb-side>.modalnb-figure{flex:1 1 0%}"
    ".modalnb-panel .widget-label-basic,.modalnb-panel .widget-label{overflow:visible}"
    ".modalnb-hit-grid>.widget-html .widget-html-content{line-height:1.25;white-space:normal}"
    ".modalnb-hit-grid{font-size:12px;align-items:center}"
    f".modalnb-hit-grid .modalnb-hit-head{{background:{PALETTE.header};font-weight:600}}"
    "</style>"
)


def esc(x: Any) -> str:
    """`x` as text, HTML-escaped (``&<>"'``): what a page shows, never markup.

    Examples
    --------
    >>> esc("<b>tip</b> & 'root'")
    '&lt;b&gt;tip&lt;/b&gt; &amp; &#x27;root&#x27;'
    """
    return html.escape(str(x), quote=True)


def fmt(x: Any) -> str:
    """A table cell as an engineer writes it (6 significant digits, yes/no, – for none), escaped.

    Text is escaped as it is; a float is written to at most 6 significant digits through
    :mod:`modalnb._numbers` (never in e-notation). Panels format their numbers with
    :func:`number` / :func:`with_u` first, so a float here is a fallback.

    Examples
    --------
    >>> fmt(572.31234567), fmt(True), fmt(float("nan")), fmt("<i>")
    ('572.312', 'yes', '–', '&lt;i&gt;')
    """
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (float, np.floating)):  # no e-notation: through modalnb._numbers
        return NONE if math.isnan(float(x)) else split_quantity(float(x), "frequency_hz")[0]
    return esc(x)


#: Legends sit at the foot of the figure (horizontal, wrapping), below the x-axis title and
#: never over the plot title; :data:`LEGEND_MARGIN` px at the bottom leave them room.
LEGEND_BELOW = {"orientation": "h", "x": 0, "xanchor": "left", "yref": "container", "y": 0.0,
                "yanchor": "bottom"}
LEGEND_MARGIN = 96


def figure(height: int = 320, **layout: Any) -> go.FigureWidget:
    """An empty FigureWidget in modalnb's look: palette colours for overlaid traces, the
    title at the top left, the legend below the plot, the width of its box (autosize)."""
    fig = go.FigureWidget()
    title = layout.pop("title", None)
    fig.update_layout(height=height, margin={"l": 60, "r": 20, "t": 40, "b": LEGEND_MARGIN},
                      template="plotly_white", legend=LEGEND_BELOW, autosize=True,
                      colorway=list(PALETTE.series), **layout)
    if title is not None:
        fig.update_layout(title={"text": title, "x": 0.01, "xanchor": "left", "font": {"size": 14}})
    return fig


def mac_heatmap(fig: go.FigureWidget) -> None:
    """A MAC heat map with square cells (y scaled to x), the first row at the top."""
    fig.add_heatmap(z=[[0]], zmin=0, zmax=1, colorscale=[list(s) for s in PALETTE.mac_scale],
                    colorbar={"title": "MAC", "thickness": 12}, texttemplate="%{z:.2f}",
                    xgap=1, ygap=1)
    fig.update_layout(xaxis={"type": "category", "constrain": "domain"},
                      yaxis={"type": "category", "scaleanchor": "x", "scaleratio": 1,
                             "constrain": "domain", "autorange": "reversed"},
                      margin={"l": 60, "r": 10, "t": 40, "b": 40})


def stacked_figure(titles: tuple[str, ...], traces: Any, height: int, *,
                   spacing: float = 0.1, shared_xaxes: bool = False) -> go.FigureWidget:
    """Subplots one above the other in modalnb's look (legend below, autosized to its box),
    with empty line traces ``(name, colour, row, in_legend)`` to be filled by the view.

    Examples
    --------
    >>> fig = stacked_figure(("a", "b"), [("x", PALETTE.measured, 1, True)], 300)
    >>> len(fig.data), fig.layout.height
    (1, 300)
    """
    from plotly.subplots import make_subplots

    fig = go.FigureWidget(make_subplots(rows=len(titles), cols=1, vertical_spacing=spacing,
                                        shared_xaxes=shared_xaxes, subplot_titles=titles))
    fig.update_layout(height=height, template="plotly_white", autosize=True,
                      margin={"l": 60, "r": 20, "t": 40, "b": LEGEND_MARGIN}, legend=LEGEND_BELOW)
    for name, colour, row, legend in traces:
        fig.add_scatter(x=[], y=[], mode="lines", name=name, showlegend=legend,
                        line={"color": colour, "width": 1}, row=row, col=1)
    return fig


def fig_box(fig: go.FigureWidget, css: str) -> w.Box:
    """FigureWidget ignores ``add_class``: wrap it in a Box that carries the class.

    The box takes the panel's width and the figure fills it (see :data:`PANEL_STYLE`):
    plotly autosizes a figure without a set width to its element."""
    box = w.Box([fig], layout=w.Layout(width="100%", min_width="0"))
    box.add_class(css)
    box.add_class("modalnb-figure")
    _fit_width_once_drawn(fig)
    return box


class _Sizer(anywidget.AnyWidget):
    """An invisible widget that keeps a panel's figures as wide as their boxes.

    Every plotly figure of the page resizes itself to its element on a window ``resize``
    event (plotly's FigureWidget listens to it), but the notebook sends none when a panel
    is laid out, when a tab is shown or when the notebook area changes width. This widget
    watches its panel with a ``ResizeObserver`` and sends one (debounced) ``resize`` event
    after its size changes.
    """

    _esm = """
    function render({ el }) {
      let timer = null;
      const kick = () => { clearTimeout(timer);
        timer = setTimeout(() => window.dispatchEvent(new Event('resize')), 120); };
      const seen = new ResizeObserver(kick);
      let tries = 0;
      const watch = () => {
        const panel = el.closest('.modalnb-panel');
        if (panel) { seen.observe(panel); } else if (tries++ < 100) { setTimeout(watch, 100); }
      };
      watch();
      return () => { clearTimeout(timer); seen.disconnect(); };
    }
    export default { render };
    """


#: Re-measures asked of a figure after its first draws (see :func:`_fit_width_once_drawn`).
_WIDTH_NUDGES = 4


def _fit_width_once_drawn(fig: go.FigureWidget) -> None:
    """Ask the browser to size the figure to its box once it is drawn.

    plotly.js sizes a figure without a set width to its element when it first draws it,
    but the notebook draws a new widget before its box has its width (it then falls back to
    700 px) and sends no resize afterwards. A drawn figure tells the kernel its traces
    (``_js2py_traceDeltas``, after its first draw and after each restyle); the first such
    messages get a relayout ``autosize: true`` back, which makes plotly.js measure the
    element again, now in place (a relayout sends no trace message: no loop).
    """
    left = [_WIDTH_NUDGES]

    def on_drawn(change: dict[str, Any]) -> None:
        if left[0] > 0 and change.get("new"):
            left[0] -= 1
            fig._send_relayout_msg({"autosize": True})

    fig.observe(on_drawn, "_js2py_traceDeltas")


def side_by_side(*boxes: w.Widget) -> w.HBox:
    """Figure boxes next to each other, sharing the width equally."""
    row = w.HBox(list(boxes), layout=w.Layout(width="100%"))
    row.add_class("modalnb-side")
    return row


_TABLE_STYLE = (
    "<style>.modalnb-table{border-collapse:collapse;font-size:12px}"
    f".modalnb-table td,.modalnb-table th{{border:1px solid {PALETTE.grid};padding:2px 6px;"
    "text-align:right}"
    f".modalnb-table th{{background:{PALETTE.header}}}"
    ".modalnb-table td.modalnb-text{text-align:left}</style>"
)


def table_html(rows: list[dict[str, Any]], columns: list[tuple[str, str]], css: str,
               cell_class: str | None = None, text: tuple[str, ...] = ()) -> str:
    """An HTML table; every cell escaped; each cell gets class ``<cell_class>-<row>-<key>`` when asked.

    Numbers are right-aligned; the columns named in `text` (words) are left-aligned.

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
            if key in text:
                cls = cls[:-1] + ' modalnb-text"' if cls else ' class="modalnb-text"'
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


def mode_cells(a: Analysis) -> list[dict[str, Any]]:
    """:func:`mode_rows` as text an engineer writes: ``frequency_hz`` and ``damping_pct``
    as "value ± u" (GUM 7.2.6; Hz and % in the headings), Q to 3 significant digits."""
    out = []
    for r in mode_rows(a):
        out.append({
            "mode": r["mode"],
            "frequency_hz": with_u(r.get("frequency_hz"), r.get("frequency_hz_std"), unit="Hz"),
            "damping_pct": with_u(r.get("damping_ratio"), r.get("damping_ratio_std"),
                                  "damping_pct", unit="%"),
            "regime": r.get("regime", ""), "status": r.get("status", ""),
            "q_factor": number(r.get("q_factor"), "ratio"),
        })
    return out


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
        self.widget = w.VBox([w.HTML(PANEL_STYLE), _Sizer(), *children, self.status],
                             layout=w.Layout(width="100%"))
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
