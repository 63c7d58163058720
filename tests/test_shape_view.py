"""The moving shape view: frames against hand-computed positions, escaping, plotly.js once,
offline playback in headless Chromium (play/pause, mode, amplitude).

Hand values: a node at (1, 0, 0) moving along +Z with amplitude 1 at 90 degrees, scale
0.5 m: at phase theta its z is 0.5 cos(theta + 90 deg) = -0.5 sin(theta).
"""

from __future__ import annotations

import json
import os
import re
import tempfile
import time

import numpy as np
import pytest
import xarray as xr
from offline_browser import offline_page
from plotly.offline import get_plotlyjs

from modalnb.export.shape_view import (
    FRAMES_PER_CYCLE,
    shape_section_html,
    shape_view_figure,
    shape_view_html,
)
from modalnb.geometry import Geometry, NodesPlacedWarning

EVIL = "<img src=x onerror=alert(1)>"


def _table():
    return xr.Dataset(
        {"node_shape_amplitude": (("mode", "node"), [[1.0, 0.5, 0.0], [0.2, np.nan, 1.0]]),
         "node_shape_phase_deg": (("mode", "node"), [[90.0, 0.0, 0.0], [0.0, 180.0, 0.0]]),
         "frequency_hz": ("mode", [12.5, 40.0])},
        coords={"mode": [1, 2], "node": ["B", "C", EVIL],
                "node_direction": ("node", ["+Z", "+X", "+Z"])})


def _geometry():
    return Geometry(("A", "B", "C", EVIL), np.array([[0.0, 0, 0], [1.0, 0, 0], [1.0, 0, 1.0],
                                                      [0.0, 0, 1.0]]),
                    (("A", "B"), ("B", "C"), ("C", EVIL)))


def test_frames_follow_one_cycle_by_hand():
    fig = shape_view_figure(_table(), 1, geometry=_geometry(), scale=0.5, n_frames=8)
    assert len(fig.frames) == 8
    for k, frame in enumerate(fig.frames):
        theta = 2 * np.pi * k / 8
        nodes = frame.data[1]  # the deformed nodes: B, C, EVIL (A has no shape value)
        assert nodes.z[0] == pytest.approx(-0.5 * np.sin(theta), abs=1e-12)  # B
        assert nodes.x[1] == pytest.approx(1.0 + 0.25 * np.cos(theta), abs=1e-12)  # C along +X
        assert nodes.z[1] == pytest.approx(1.0, abs=1e-12)
    # the undeformed structure: grey dashed, every line, None between lines
    base = fig.data[0]
    assert base.line.dash == "dash" and list(base.x) == [0.0, 1.0, None, 1.0, 1.0, None, 1.0, 0.0, None]
    assert fig.layout.updatemenus[0].buttons[0].label == "play"


def test_section_embeds_plotly_only_when_asked_and_escapes_names():
    part = shape_section_html(None, _table(), _geometry())
    assert get_plotlyjs() not in part
    assert EVIL not in part and "&lt;img src=x onerror=alert(1)&gt;" in part
    page = shape_view_html(None, _table(), _geometry(), title=EVIL)
    assert page.count(get_plotlyjs()) == 1
    assert EVIL not in page
    data = json.loads(re.search(r"var D = (\{.*?\}), id = ", page).group(1))
    # mode 2 at node B: amplitude 0.2 at 0 degrees along +Z; C has no value (NaN): still
    assert data["modes"][1]["re"][1] == pytest.approx([0.0, 0.0, 0.2])
    assert data["modes"][1]["measured"] == [False, True, False, True]
    assert data["modes"][0]["measured"] == [False, True, True, True]


def test_hit_nodes_without_position_are_named_under_the_view():
    g = Geometry(("B",), np.zeros((1, 3)))
    with pytest.warns(NodesPlacedWarning):
        part = shape_section_html(None, _table(), g)
    placed = re.search(r'class="modalnb-shape-placed"[^>]*>(.*?)</p>', part).group(1)
    assert "C" in placed and "&lt;img src=x onerror=alert(1)&gt;" in placed


@pytest.mark.browser
def test_view_plays_pauses_and_rescales_offline_in_chromium():
    tmp = tempfile.mkdtemp()
    path = os.path.join(tmp, "shape_view.html")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(shape_view_html(None, _table(), _geometry()))
    with offline_page("file://" + path, wait_for='section[data-ready="yes"]') as op:
        page = op.page

        def node_b_z() -> float:
            return page.evaluate("document.getElementById('modalnb-shape-view').data[3].z[0]")

        frames = set()
        for _ in range(10):
            frames.add(page.get_attribute("section", "data-frame"))
            time.sleep(0.05)
        assert len(frames) > 2  # playing: the frame moves on
        page.click(".modalnb-shape-play")
        assert page.get_attribute("section", "data-playing") == "no"
        k = int(page.get_attribute("section", "data-frame"))
        time.sleep(0.3)
        assert int(page.get_attribute("section", "data-frame")) == k  # paused
        theta = 2 * np.pi * k / FRAMES_PER_CYCLE
        z1 = node_b_z()
        page.fill(".modalnb-shape-amplitude", "2")
        page.dispatch_event(".modalnb-shape-amplitude", "input")
        z2 = node_b_z()
        page.select_option(".modalnb-shape-mode", "1")
        title = page.evaluate("document.getElementById('modalnb-shape-view').layout.title.text")
        still = page.evaluate("Array.from(document.getElementById('modalnb-shape-view').data[1].text)")
        moving = page.evaluate("Array.from(document.getElementById('modalnb-shape-view').data[3].text)")
    assert op.external == [] and op.dialogs == [] and op.errors == []
    # node B: z = s Re(e^{j(90 deg + theta)}) = -s sin(theta); doubling the amplitude doubles it
    assert z2 == pytest.approx(2 * z1, rel=1e-9, abs=1e-12)
    if abs(np.sin(theta)) > 1e-6:
        assert np.sign(z1) == -np.sign(np.sin(theta))
    assert "mode 2" in title
    assert still == ["A", "C"] and moving == ["B", "&lt;img src=x onerror=alert(1)&gt;"]  # mode 2: C still
