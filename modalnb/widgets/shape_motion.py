"""The moving shape view of the modal-table panel: a FigureWidget and its controls.

The same picture as the report's view (:mod:`modalnb.export.shape_view`): the undeformed
structure grey dashed, the mode's shape moving over one cycle, every node labelled. The
controls are ipywidgets: a ``Play`` (the browser steps the phase, looping), the phase
slider it drives, and the amplitude (times the default, whose largest motion is 15 % of
the structure's span). Positions come from the user's geometry table, else from the
records' ``x, y, z``; nodes with neither are placed on a line (named under the figure).
"""

from __future__ import annotations

from typing import Any

import ipywidgets as w
import numpy as np
import xarray as xr

from .._display import PALETTE
from ..export.shape_view import (
    FRAMES_PER_CYCLE,
    MAX_AMPLITUDE,
    TRACE_DEFORMED_LINES,
    TRACE_DEFORMED_NODES,
    base_traces,
    line_coordinates,
    scene_camera,
    scene_ranges,
)
from ..geometry import Geometry, GeometryError, default_scale, node_motion, structure_geometry
from ._base import esc, fig_box, figure

__all__ = ["ShapeMotion"]


class ShapeMotion:
    """A mode's shape moving on the structure, for a panel.

    Parameters
    ----------
    geometry : Geometry, optional
        The user's geometry table (:func:`modalnb.geometry.read_geometry`).
    height : int
        Figure height (px).

    Attributes
    ----------
    fig : plotly.graph_objects.FigureWidget
        Traces in the order of :func:`modalnb.export.shape_view.base_traces`.
    play, phase, amplitude : ipywidgets
        The controls (``phase`` counts frames of one cycle, ``FRAMES_PER_CYCLE``).
    widget : ipywidgets.VBox
    """

    def __init__(self, geometry: Geometry | None = None, *, height: int = 420) -> None:
        self.user_geometry = geometry
        self.fig = figure(height, title="mode shape")
        self.play = w.Play(value=0, min=0, max=FRAMES_PER_CYCLE - 1, step=1, interval=80,
                           repeat=True, description="play")
        self.play.add_class("modalnb-shape-play")
        self.phase = w.IntSlider(value=0, min=0, max=FRAMES_PER_CYCLE - 1, description="phase",
                                 readout=False, continuous_update=True)
        self.phase.add_class("modalnb-shape-phase")
        w.jslink((self.play, "value"), (self.phase, "value"))
        self.amplitude = w.FloatSlider(value=1.0, min=0.0, max=MAX_AMPLITUDE, step=0.05,
                                       description="amplitude", readout_format=".2f")
        self.amplitude.add_class("modalnb-shape-amplitude")
        self.note = w.HTML()
        self.note.add_class("modalnb-shape-note")
        self.phase.observe(lambda _ch: self._move(), "value")
        self.amplitude.observe(lambda _ch: self._move(), "value")
        self.geometry: Geometry | None = None
        self._motion = np.zeros((0, 3), complex)
        self._measured = np.zeros(0, bool)
        self._scale = 1.0
        self.widget = w.VBox([fig_box(self.fig, "modalnb-shape-figure"),
                              w.HBox([self.play, self.phase, self.amplitude]), self.note])

    def show(self, table: xr.Dataset, mode: int, records: xr.Dataset | None = None) -> None:
        """Draw `mode` of `table` (node shapes, else channel shapes) on the structure."""
        try:
            g = structure_geometry(table, geometry=self.user_geometry, records=records, warn=False)
            motion, measured = node_motion(g, table, mode)
        except GeometryError as exc:
            self.note.value = (f'<span class="modalnb-error" style="color:{PALETTE.error}">'
                               f"⚠ {esc(exc)}</span>")
            return
        self.geometry, self._motion, self._measured = g, motion, measured
        self._scale = default_scale(g, motion)
        axes, ratio = scene_ranges(g, MAX_AMPLITUDE * self._scale
                                   * np.max(np.abs(motion), axis=0, initial=0.0))
        where = "node shapes" if "node_shape_amplitude" in table else "channel shapes at their nodes"
        with self.fig.batch_update():
            self.fig.data = []
            self.fig.add_traces(base_traces(g, measured, self._positions()))
            self.fig.layout.scene = {**axes, "aspectmode": "manual", "aspectratio": ratio,
                                     "camera": scene_camera(g)}
            self.fig.layout.title = f"mode {int(mode)} shape on the structure ({where})"
        notes = []
        if g.placed:
            notes.append(f"placed by modalnb on a straight line (no position given): "
                         f"{esc(', '.join(g.placed))}")
        if not measured.any():
            notes.append("the shape reaches none of the nodes")
        self.note.value = (f'<span class="modalnb-warning" style="color:{PALETTE.warning}">'
                           f"{'; '.join(notes)}</span>" if notes else "")

    def _positions(self) -> np.ndarray:
        g = self.geometry
        if g is None:
            return np.zeros((0, 3))
        theta = 2 * np.pi * int(self.phase.value) / FRAMES_PER_CYCLE
        s = self._scale * float(self.amplitude.value)
        return g.xyz + s * (self._motion * np.exp(1j * theta)).real

    def _move(self) -> None:
        g = self.geometry
        if g is None or len(self.fig.data) <= TRACE_DEFORMED_NODES:
            return
        pos = self._positions()
        lx, ly, lz = line_coordinates(g, pos)
        m = self._measured
        with self.fig.batch_update():
            lines, nodes = self.fig.data[TRACE_DEFORMED_LINES], self.fig.data[TRACE_DEFORMED_NODES]
            lines.x, lines.y, lines.z = lx, ly, lz
            nodes.x, nodes.y, nodes.z = pos[m, 0], pos[m, 1], pos[m, 2]

    def close(self) -> None:
        """Close the widgets."""
        self.widget.close()

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        return self.widget._repr_mimebundle_(**kwargs)
