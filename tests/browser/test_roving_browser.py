"""The roving-hammer notebook in a real browser: JupyterLab + Playwright + Chromium.

Run all; in the modal-table tab the moving shape view is drawn on the frame's geometry
table (27 nodes, the undeformed structure grey dashed); Play moves the shape (the drawn
node positions change, the kernel's phase follows); pause stops it; the amplitude slider
scales the motion. No request leaves 127.0.0.1, no error output.
"""

from __future__ import annotations

import json
import time

import pytest
from lab_notebook import notebook_page

pytestmark = pytest.mark.browser

GD = "document.querySelector('.modalnb-shape-figure .js-plotly-plot')"


@pytest.fixture(scope="module")
def nb(lab, browser):
    yield from notebook_page(lab, browser, "roving_hammer.ipynb", "roving")


def test_the_shape_moves_on_the_frame(nb, shoot):
    shoot(nb.page)
    nb.run_all()
    nb.tab("Modal table")
    nb.page.wait_for_function(f"() => {{ const g = {GD}; return !!(g && g.data && g.data.length >= 4); }}",
                              timeout=60_000)
    undeformed = nb.page.evaluate(f"() => {GD}.data[0]")
    assert undeformed["line"]["dash"] == "dash"
    assert len([v for v in undeformed["x"] if v is not None]) == 2 * 26  # the 26 lines of the table
    nb.page.wait_for_selector(".modalnb-shape-figure .gl-container canvas, .modalnb-shape-figure canvas",
                              timeout=30_000)

    def nodes_z() -> list[float]:
        return nb.page.evaluate(f"() => Array.from({GD}.data[3].z)")

    z0 = nodes_z()
    nb.page.locator(".modalnb-shape-play button").first.click()  # play
    nb.page.wait_for_function(
        f"(z0) => {{ const z = Array.from({GD}.data[3].z); return z.some((v, i) => Math.abs(v - z0[i]) > 1e-9); }}",
        arg=z0, timeout=30_000)
    phase_running = nb.py("print(desk.table.motion.phase.value)").strip()
    nb.page.locator(".modalnb-shape-play button").nth(1).click()  # pause
    time.sleep(0.5)
    k1 = nb.py("print(desk.table.motion.phase.value)").strip()
    time.sleep(0.6)
    k2 = nb.py("print(desk.table.motion.phase.value)").strip()
    assert k1 == k2  # paused
    assert phase_running.isdigit()
    # amplitude 2x at a phase where the beam moves (frame 2: cos 30 deg): the drawn motion
    # (from the rest position) doubles
    nb.py("desk.table.motion.phase.value = 2")
    time.sleep(0.5)
    rest = nb.py("import json; g = desk.table.motion.geometry; m = desk.table.motion._measured; "
                 "print(json.dumps(g.xyz[m, 2].tolist()))")
    rest_z = json.loads(rest)
    before = nodes_z()
    nb.py("desk.table.motion.amplitude.value = 2 * desk.table.motion.amplitude.value")
    nb.page.wait_for_function(
        f"(b) => {{ const z = Array.from({GD}.data[3].z); return z.some((v, i) => Math.abs(v - b[i]) > 1e-9); }}",
        arg=before, timeout=30_000)
    after = nodes_z()
    moved = [(b - r, a - r) for b, a, r in zip(before, after, rest_z, strict=True) if abs(b - r) > 1e-6]
    assert moved and all(abs(a - 2 * b) < 1e-6 * max(1.0, abs(b)) for b, a in moved)
    assert nb.errors() == []
    assert nb.page.context.modalnb_external == []
