"""The moving shape view: each mode's shape animated on the structure's geometry (offline HTML).

What the view shows (modalnb's own design):

* the undeformed structure as grey dashed lines, the nodes as small grey dots;
* the deformed structure over one cycle of the chosen mode (raspberry lines and nodes,
  :data:`modalnb._display.PALETTE`), every node labelled with its name; nodes the shape
  does not reach stay grey and still; nodes modalnb had to place (no position given) are
  named under the figure;
* controls under the figure: the mode, play/pause, the amplitude (0 to 3 times the
  default, whose largest motion is 15 % of the structure's span) and the phase shown.

Two forms:

* :func:`shape_view_figure` -- a plotly figure with the cycle as plotly frames and
  plotly's own play/pause buttons and phase slider (for ``fig.show()`` in a notebook);
* :func:`shape_view_html` / :func:`shape_section_html` -- an HTML page or fragment with a
  small script of its own that moves the deformed traces (``Plotly.restyle``) at any
  amplitude, so the amplitude control needs no precomputed frames. The page embeds
  plotly.js once and works offline; the fragment expects the page to load plotly.js once
  (``include_plotlyjs=True`` for the first plotly figure of the page).

Plotly is imported inside the functions only. Every text from the data (node names, mode
labels) is HTML-escaped.
"""

from __future__ import annotations

import html
import json
import os
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._display import PALETTE
from .._files import atomic_write_text
from ..geometry import Geometry, default_scale, node_motion, structure_geometry
from ._rows import CAUTION

__all__ = ["shape_view_figure", "shape_view_html", "shape_section_html", "write_shape_views",
           "SHAPE_VIEW_FILE", "FRAMES_PER_CYCLE"]

#: File written by :func:`write_shape_views`.
SHAPE_VIEW_FILE = "shape_view.html"
#: Frames of one cycle (plotly frames of :func:`shape_view_figure`; steps of the page's player).
FRAMES_PER_CYCLE = 24
#: Largest amplitude of the page's control, times the default scale.
MAX_AMPLITUDE = 3.0

#: Trace order of :func:`base_traces`: the deformed lines and nodes (what moves).
TRACE_DEFORMED_LINES = 2
TRACE_DEFORMED_NODES = 3


def _e(x: Any) -> str:
    return html.escape(str(x), quote=True)


def line_coordinates(g: Geometry, pos: np.ndarray) -> tuple[list[Any], list[Any], list[Any]]:
    """Line coordinates at positions `pos` with ``None`` between lines (one trace for every
    line; also used by the modal-table panel's moving view)."""
    xs: list[Any] = []
    ys: list[Any] = []
    zs: list[Any] = []
    for a, b in g.line_index():
        for arr, k in ((xs, 0), (ys, 1), (zs, 2)):
            arr += [float(pos[a, k]), float(pos[b, k]), None]
    return xs, ys, zs


def _modes(table: xr.Dataset, modes: Any) -> list[int]:
    have = [int(m) for m in table["mode"].values]
    if modes is None:
        return have
    return [int(m) for m in np.atleast_1d(modes) if int(m) in have]


def _mode_label(table: xr.Dataset, mode: int) -> str:
    k = [int(m) for m in table["mode"].values].index(mode)
    f = float(table["frequency_hz"].values[k]) if "frequency_hz" in table else float("nan")
    if not np.isfinite(f):
        return f"mode {mode}"
    from .._numbers import format_quantity

    return f"mode {mode} · {format_quantity(f, 'frequency_hz')}"


def scene_camera(g: Geometry) -> dict[str, Any]:
    """Look at a flat structure face on (along its thinnest axis, a little from above and
    the side); else plotly's usual three-quarter view."""
    size = np.ptp(g.xyz, axis=0) if len(g.nodes) else np.ones(3)
    thin = int(np.argmin(size))
    if size[thin] > 0.1 * size.max():
        return {"eye": {"x": 1.25, "y": -1.25, "z": 0.9}}
    eye = np.full(3, 0.35)
    eye[thin] = -1.9 if thin == 1 else 1.9
    if thin != 2:
        eye[2] = 0.5
    return {"eye": {"x": float(eye[0]), "y": float(eye[1]), "z": float(eye[2])}}


def scene_ranges(g: Geometry, reach: np.ndarray) -> tuple[dict[str, Any], dict[str, float]]:
    """Fixed axis ranges (the view does not jump while the shape moves): the nodes plus the
    largest motion along each axis (at least 5 % of the span), equal metres per axis."""
    reach = np.maximum(np.asarray(reach, float) * np.ones(3), 0.05 * g.span)
    lo, hi = g.xyz.min(axis=0) - reach, g.xyz.max(axis=0) + reach
    size = np.maximum(hi - lo, 1e-9)
    ratio = size / size.max()
    axes = {f"{c}axis": {"range": [float(lo[i]), float(hi[i])], "title": f"{c} [m]",
                         "autorange": False}
            for i, c in enumerate("xyz")}
    return axes, {c: float(ratio[i]) for i, c in enumerate("xyz")}


def base_traces(g: Geometry, measured: np.ndarray, pos: np.ndarray) -> list[Any]:
    """The view's four traces (undeformed lines, still nodes, deformed lines, deformed nodes),
    shared with the modal-table panel so the notebook and the page look alike."""
    import plotly.graph_objects as go

    labels = [_e(n) for n in g.nodes]
    ux, uy, uz = line_coordinates(g, g.xyz)
    dx, dy, dz = line_coordinates(g, pos)
    still = ~measured
    return [
        go.Scatter3d(x=ux, y=uy, z=uz, mode="lines", name="undeformed", hoverinfo="skip",
                     line={"color": PALETTE.rejected, "width": 3, "dash": "dash"}),
        go.Scatter3d(x=g.xyz[still, 0], y=g.xyz[still, 1], z=g.xyz[still, 2], mode="markers+text",
                     name="no shape value (still)", text=[labels[i] for i in np.flatnonzero(still)],
                     textfont={"color": PALETTE.rejected, "size": 10},
                     marker={"color": PALETTE.rejected, "size": 3}),
        go.Scatter3d(x=dx, y=dy, z=dz, mode="lines", name="deformed", hoverinfo="skip",
                     line={"color": PALETTE.mode, "width": 6}),
        go.Scatter3d(x=pos[measured, 0], y=pos[measured, 1], z=pos[measured, 2],
                     mode="markers+text", name="nodes", text=[labels[i] for i in np.flatnonzero(measured)],
                     textfont={"color": PALETTE.text, "size": 10},
                     marker={"color": PALETTE.mode, "size": 4}),
    ]


def _prepare(table: xr.Dataset, records: xr.Dataset | None, geometry: Geometry | None,
             warn: bool = True) -> Geometry:
    return structure_geometry(table, geometry=geometry, records=records, warn=warn)


def shape_view_figure(table: xr.Dataset, mode: int, *, geometry: Geometry | None = None,
                      records: xr.Dataset | None = None, scale: float | None = None,
                      n_frames: int = FRAMES_PER_CYCLE) -> Any:
    """One mode moving on the structure: a plotly figure with one cycle as plotly frames.

    Plotly's own play/pause buttons and a phase slider drive the frames (``fig.show()``
    in a notebook, or ``fig.write_html``). The amplitude is fixed at `scale`.

    Parameters
    ----------
    table : xarray.Dataset
        Modal table (node shapes, else channel shapes; :func:`modalnb.geometry.node_motion`).
    mode : int
        Mode label.
    geometry : Geometry, optional
        The user's geometry table (:func:`modalnb.geometry.read_geometry`).
    records : xarray.Dataset, optional
        The record set (sensor positions, hit nodes).
    scale : float, optional
        Metres per unit shape amplitude; default the largest motion 15 % of the span.
    n_frames : int
        Frames of one cycle.

    Returns
    -------
    plotly.graph_objects.Figure

    Examples
    --------
    >>> from modalnb import fit_modes
    >>> from modalnb.demo import load_demo
    >>> ds = load_demo()
    >>> fig = shape_view_figure(fit_modes(ds, band=(10, 1500)), 1, records=ds)
    >>> len(fig.frames), len(fig.data)
    (24, 4)
    """
    import plotly.graph_objects as go

    g = _prepare(table, records, geometry)
    motion, measured = node_motion(g, table, mode)
    s = default_scale(g, motion) if scale is None else float(scale)
    axes, ratio = scene_ranges(g, s * np.max(np.abs(motion), axis=0, initial=0.0))
    phases = 2 * np.pi * np.arange(n_frames) / n_frames
    frames = []
    for k, th in enumerate(phases):
        pos = g.xyz + s * (motion * np.exp(1j * th)).real
        dx, dy, dz = line_coordinates(g, pos)
        frames.append(go.Frame(name=f"{k}", traces=[TRACE_DEFORMED_LINES, TRACE_DEFORMED_NODES], data=[
            go.Scatter3d(x=dx, y=dy, z=dz),
            go.Scatter3d(x=pos[measured, 0], y=pos[measured, 1], z=pos[measured, 2])]))
    fig = go.Figure(data=base_traces(g, measured, g.xyz + s * motion.real), frames=frames)
    step = {"frame": {"duration": 60, "redraw": True}, "transition": {"duration": 0}, "mode": "immediate"}
    fig.update_layout(
        title=_e(_mode_label(table, mode)), height=520, margin={"l": 0, "r": 0, "t": 40, "b": 0},
        scene={**axes, "aspectmode": "manual", "aspectratio": ratio, "camera": scene_camera(g)},
        legend={"orientation": "h"},
        updatemenus=[{"type": "buttons", "showactive": False, "x": 0.0, "y": 0.0, "xanchor": "left",
                      "buttons": [{"label": "play", "method": "animate", "args": [None, {**step, "fromcurrent": True}]},
                                  {"label": "pause", "method": "animate",
                                   "args": [[None], {"frame": {"duration": 0, "redraw": False}, "mode": "immediate"}]}]}],
        sliders=[{"currentvalue": {"prefix": "phase "}, "x": 0.15, "len": 0.85, "steps": [
            {"label": f"{round(np.degrees(th))}°", "method": "animate", "args": [[f"{k}"], step]}
            for k, th in enumerate(phases)]}])
    return fig


def _view_data(g: Geometry, table: xr.Dataset, modes: list[int]) -> dict[str, Any]:
    """What the page's player needs: positions, lines, each mode's complex motion."""
    out: dict[str, Any] = {"xyz": np.round(g.xyz, 9).tolist(), "lines": g.line_index().tolist(),
                           "labels": [_e(n) for n in g.nodes], "modes": []}
    for m in modes:
        motion, measured = node_motion(g, table, m)
        out["modes"].append({"mode": m, "label": _mode_label(table, m),
                             "re": np.round(motion.real, 9).tolist(), "im": np.round(motion.imag, 9).tolist(),
                             "measured": measured.tolist(), "scale": default_scale(g, motion)})
    return out


_PLAYER_JS = """
(function () {
  var D = __DATA__, id = "__ID__", N = __FRAMES__, tick = 60;
  var root = document.getElementById(id + "-box");
  var sel = root.querySelector(".modalnb-shape-mode"), btn = root.querySelector(".modalnb-shape-play");
  var amp = root.querySelector(".modalnb-shape-amplitude"), phaseOut = root.querySelector(".modalnb-shape-phase");
  var ampOut = root.querySelector(".modalnb-shape-amplitude-value");
  var state = {mode: 0, k: 0, playing: true, timer: null};
  function positions(m, th, s) {
    var c = Math.cos(th), sn = Math.sin(th), p = [];
    for (var i = 0; i < D.xyz.length; i++) {
      var q = [];
      for (var a = 0; a < 3; a++) q.push(D.xyz[i][a] + s * (m.re[i][a] * c - m.im[i][a] * sn));
      p.push(q);
    }
    return p;
  }
  function draw() {
    var gd = document.getElementById(id);
    var m = D.modes[state.mode], th = 2 * Math.PI * state.k / N, s = m.scale * parseFloat(amp.value);
    var p = positions(m, th, s), lx = [], ly = [], lz = [], nx = [], ny = [], nz = [], txt = [];
    D.lines.forEach(function (ln) {
      lx.push(p[ln[0]][0], p[ln[1]][0], null); ly.push(p[ln[0]][1], p[ln[1]][1], null);
      lz.push(p[ln[0]][2], p[ln[1]][2], null);
    });
    for (var i = 0; i < p.length; i++) if (m.measured[i]) { nx.push(p[i][0]); ny.push(p[i][1]); nz.push(p[i][2]); }
    Plotly.restyle(gd, {x: [lx, nx], y: [ly, ny], z: [lz, nz]}, [__LINES__, __NODES__]);
    phaseOut.textContent = Math.round(360 * state.k / N) + "\\u00b0";
    ampOut.textContent = parseFloat(amp.value).toFixed(2) + "\\u00d7";
    root.setAttribute("data-frame", String(state.k));
  }
  function step() { state.k = (state.k + 1) % N; draw(); }
  function play(on) {
    state.playing = on; btn.textContent = on ? "pause" : "play";
    if (state.timer) { clearInterval(state.timer); state.timer = null; }
    if (on) state.timer = setInterval(step, tick);
    root.setAttribute("data-playing", on ? "yes" : "no");
  }
  function start() {
    var gd = document.getElementById(id);
    if (!window.Plotly || !gd || !gd.data) { return setTimeout(start, 50); }
    sel.addEventListener("change", function () {
      state.mode = parseInt(sel.value, 10);
      var m = D.modes[state.mode], g = document.getElementById(id);
      var still = [], moving = [];
      for (var i = 0; i < D.xyz.length; i++) (m.measured[i] ? moving : still).push(i);
      function col(idx, a) { return idx.map(function (i) { return D.xyz[i][a]; }); }
      function names(idx) { return idx.map(function (i) { return D.labels[i]; }); }
      Plotly.restyle(g, {x: [col(still, 0)], y: [col(still, 1)], z: [col(still, 2)],
                         text: [names(still)]}, [1]);
      Plotly.restyle(g, {text: [names(moving)]}, [__NODES__]);
      Plotly.relayout(g, {"title.text": m.label});
      draw();
    });
    btn.addEventListener("click", function () { play(!state.playing); });
    amp.addEventListener("input", draw);
    root.setAttribute("data-ready", "yes");
    draw(); play(true);
  }
  start();
})();
"""


def _section(g: Geometry, table: xr.Dataset, modes: list[int], include_plotlyjs: bool | str,
             div_id: str) -> str:
    import plotly.graph_objects as go

    data = _view_data(g, table, modes)
    first = data["modes"][0]
    motion = np.array(first["re"]) + 1j * np.array(first["im"])
    measured = np.array(first["measured"], bool)
    def peak(m: dict[str, Any]) -> np.ndarray:
        mo = np.abs(np.array(m["re"]) + 1j * np.array(m["im"])).reshape(-1, 3)
        return np.max(mo, axis=0, initial=0.0) * float(m["scale"])

    reach = MAX_AMPLITUDE * np.max([peak(m) for m in data["modes"]], axis=0)
    axes, ratio = scene_ranges(g, reach)
    fig = go.Figure(data=base_traces(g, measured, g.xyz + first["scale"] * motion.real))
    fig.update_layout(title=_e(first["label"]), height=540, margin={"l": 0, "r": 0, "t": 40, "b": 0},
                      scene={**axes, "aspectmode": "manual", "aspectratio": ratio, "camera": scene_camera(g)},
                      legend={"orientation": "h"}, uirevision="keep")
    plot = fig.to_html(full_html=False, include_plotlyjs=include_plotlyjs, div_id=div_id,
                       config={"displaylogo": False})
    options = "".join(f'<option value="{i}">{_e(m["label"])}</option>' for i, m in enumerate(data["modes"]))
    placed = (f'<p class="modalnb-shape-placed" style="color:{PALETTE.warning}">Placed by modalnb on a '
              f"straight line (no position given): {_e(', '.join(g.placed))}.</p>" if g.placed else "")
    js = (_PLAYER_JS.replace("__DATA__", json.dumps(data).replace("</", "<\\/"))
          .replace("__ID__", div_id).replace("__FRAMES__", str(FRAMES_PER_CYCLE))
          .replace("__LINES__", str(TRACE_DEFORMED_LINES)).replace("__NODES__", str(TRACE_DEFORMED_NODES)))
    return (
        f'<section class="modalnb-shape-view" id="{div_id}-box" data-ready="no">'
        "<h2>Mode shapes on the structure</h2>"
        "<p>Grey dashed: the structure at rest. Coloured: the mode's shape over one cycle "
        "(each shape value along its node's direction; largest value 1). The amplitude is "
        "exaggerated for viewing; it is not a measured displacement.</p>"
        f"{placed}"
        f'<div class="modalnb-shape-controls" style="display:flex;gap:1em;align-items:center;'
        f'background:{PALETTE.header};padding:.4em .8em">'
        f'<label>mode <select class="modalnb-shape-mode">{options}</select></label>'
        '<button type="button" class="modalnb-shape-play">pause</button>'
        f'<label>amplitude <input type="range" class="modalnb-shape-amplitude" min="0" '
        f'max="{MAX_AMPLITUDE:g}" step="0.05" value="1"> <span class="modalnb-shape-amplitude-value">'
        '1.00×</span></label>'
        'phase <span class="modalnb-shape-phase">0°</span></div>'
        f"{plot}<script>{js}</script></section>"
    )


def shape_section_html(records: xr.Dataset | None, result: xr.Dataset,
                       geometry: Geometry | None = None, include_plotlyjs: bool | str = False,
                       *, modes: Any = None, div_id: str = "modalnb-shape-view") -> str:
    """The moving shape view as one self-contained HTML fragment (a ``<section>``).

    For a report page: with ``include_plotlyjs=False`` the page must load plotly.js
    itself, once (the fragment's script waits for it); ``True`` embeds it here.

    Parameters
    ----------
    records : xarray.Dataset or None
        The record set (sensor positions, hit nodes).
    result : xarray.Dataset
        The modal table.
    geometry : Geometry, optional
        The user's geometry table.
    include_plotlyjs : bool or str
        Passed to plotly's ``to_html``.
    modes : sequence of int, optional
        Modes offered (default all).
    div_id : str
        Id of the figure's div (the controls box is ``<div_id>-box``).

    Returns
    -------
    str
        ``""`` when the table has no mode.

    Examples
    --------
    >>> from modalnb import fit_modes
    >>> from modalnb.demo import load_demo
    >>> ds = load_demo()
    >>> part = shape_section_html(ds, fit_modes(ds, band=(10, 1500)))
    >>> part.startswith('<section class="modalnb-shape-view"'), "modalnb-shape-play" in part
    (True, True)
    """
    if not result.sizes.get("mode", 0):
        return ""
    g = _prepare(result, records, geometry)
    chosen = _modes(result, modes)
    if not chosen:
        return ""
    return _section(g, result, chosen, include_plotlyjs, str(div_id))


def shape_view_html(records: xr.Dataset | None, result: xr.Dataset, geometry: Geometry | None = None,
                    *, title: str = "modalnb mode shapes", modes: Any = None) -> str:
    """A complete offline page with the moving shape view (plotly.js embedded once).

    Examples
    --------
    >>> from modalnb import fit_modes
    >>> from modalnb.demo import load_demo
    >>> ds = load_demo()
    >>> page = shape_view_html(ds, fit_modes(ds, band=(10, 1500)), title="boom <1>")
    >>> page.startswith("<!DOCTYPE html>"), "<title>boom &lt;1&gt;</title>" in page
    (True, True)
    """
    body = shape_section_html(records, result, geometry, include_plotlyjs=True, modes=modes)
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{_e(title)}</title></head><body style=\"font-family:system-ui,sans-serif;"
            f"color:{PALETTE.text};max-width:1100px;margin:1.5em auto\">\n<h1>{_e(title)}</h1>\n"
            f'<p style="border-left:5px solid {PALETTE.error};background:{PALETTE.caution};'
            f'padding:.6em 1em"><b>Caution.</b> {_e(CAUTION)}</p>\n'
            f"{body or '<p><i>no modes in the table</i></p>'}\n</body></html>\n")


def write_shape_views(records: xr.Dataset | None, result: xr.Dataset,
                      folder: str | os.PathLike[str], geometry: Geometry | None = None,
                      **kwargs: Any) -> dict[str, Path]:
    """Write the moving shape view (every mode, one page) into `folder`, atomically.

    Returns ``{"shape_view": path}`` (:data:`SHAPE_VIEW_FILE`).

    Examples
    --------
    >>> import tempfile
    >>> from modalnb import fit_modes
    >>> from modalnb.demo import load_demo
    >>> ds = load_demo()
    >>> out = write_shape_views(ds, fit_modes(ds, band=(10, 1500)), tempfile.mkdtemp())
    >>> out["shape_view"].name
    'shape_view.html'
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    path = atomic_write_text(folder / SHAPE_VIEW_FILE, shape_view_html(records, result, geometry, **kwargs))
    return {"shape_view": path}
