"""The modal-table panel's moving shape view (widgets.shape_motion), headless.

Hand values: node position + scale * amplitude * cos(phase_deg + theta) along the node's
axis, computed here from the table's own amplitude and phase columns with numpy.
"""

from __future__ import annotations

import html

import numpy as np
import pytest
import xarray as xr

from modalnb.demo import load_demo
from modalnb.export.shape_view import FRAMES_PER_CYCLE
from modalnb.geometry import Geometry
from modalnb.session import Analysis
from modalnb.widgets import analysis_desk
from modalnb.widgets.shape_motion import ShapeMotion

EVIL = "<script>alert(1)</script>"


def test_phase_and_amplitude_move_the_nodes_by_hand():
    table = xr.Dataset(
        {"shape_amplitude": (("mode", "channel"), [[1.0, 0.4]]),
         "shape_phase_deg": (("mode", "channel"), [[0.0, 180.0]])},
        coords={"mode": [1], "channel": ["a", "b"], "node": ("channel", ["p", EVIL]),
                "direction": ("channel", ["+Z", "-X"])})
    g = Geometry(("p", EVIL), np.array([[0.0, 0, 0], [2.0, 0, 0]]), (("p", EVIL),))
    view = ShapeMotion(g)
    view.show(table, 1)
    s = 0.15 * 2.0 / 1.0  # default scale: largest motion 15 % of the 2 m span
    for k in (0, 6, 9):
        view.phase.value = k
        view.amplitude.value = 2.0
        th = 2 * np.pi * k / FRAMES_PER_CYCLE
        nodes = view.fig.data[3]
        assert nodes.z[0] == pytest.approx(2.0 * s * 1.0 * np.cos(th), abs=1e-12)  # p along Z
        assert nodes.x[1] == pytest.approx(2.0 + 2.0 * s * 0.4 * np.cos(np.pi + th), abs=1e-12)
        assert list(view.fig.data[2].x)[:2] == [pytest.approx(nodes.x[0]), pytest.approx(nodes.x[1])]
    assert list(view.fig.data[3].text) == ["p", html.escape(EVIL)]  # plotly text escaped
    assert view.fig.data[0].line.dash == "dash"  # the undeformed structure
    view.close()


def test_desk_passes_the_geometry_to_the_table_panel(tmp_path):
    ds = load_demo()
    nodes = [str(n) for n in ds["node"].values]
    # the user's table puts the boom's nodes on a vertical line (x = 0, z = position)
    g = Geometry(tuple(nodes), np.column_stack([np.zeros(len(nodes)), np.zeros(len(nodes)),
                                                 ds["x"].values]),
                 tuple(zip(nodes[:-1], nodes[1:], strict=True)))
    desk = analysis_desk(Analysis(ds, recipe_path=tmp_path / "d.recipe.json"), geometry=g)
    p = desk.table
    assert p.motion.user_geometry is g
    np.testing.assert_allclose(p.shape_fig.data[0].z[:2], ds["x"].values[:2])  # undeformed lines
    assert "placed" not in p.motion.note.value
    desk.close()
