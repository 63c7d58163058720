"""The FRF views in a real browser: JupyterLab + Playwright + Chromium.

A small notebook written by the test (the demo analysis, its desk, and an analysis model
made of the demo's FE truth) is run; then: the coherence figure of the hits panel and the
measured / model FRF figure of the fit check are drawn with data, the pairing table and
MAC map of the modal table show model modes paired at MAC >= 0.99 (FE truth,
demo_truth.json), rejecting a hit redraws the coherence with one hit fewer. Throughout: no
request leaves 127.0.0.1 and no error output. Timings are printed, never asserted.
"""

from __future__ import annotations

import csv
import json
import re
import time

import numpy as np
import pytest
from lab_notebook import ALL_RUN, TIMEOUT, open_notebook, shut_down_sessions

from modalnb.demo import load_demo_truth

pytestmark = pytest.mark.browser


LINE_DRAWN = """([css, segments]) => [...document.querySelectorAll('.' + css + ' path.js-line')]
  .filter(p => (p.getAttribute('d') || '').split('L').length > segments).length"""

CELLS = [
    "from modalnb.demo import load_demo\n"
    "from modalnb.session import Analysis\n"
    "from modalnb.widgets import analysis_desk\n"
    "analysis = Analysis(load_demo())\n"
    "desk = analysis_desk(analysis)\n"
    "desk",
    "desk.table.pairing.set_model(('frf_model_modes.csv', 'frf_model_shapes.csv'))",
]


def _notebook(root) -> str:
    """Write the model CSVs (FE truth of the demo, modes renumbered 11.. in reverse) and
    the notebook into the lab's folder; return the notebook's name."""
    truth = load_demo_truth()
    with open(root / "frf_model_modes.csv", "w", newline="") as fm, \
            open(root / "frf_model_shapes.csv", "w", newline="") as fs:
        wm, ws = csv.writer(fm), csv.writer(fs)
        wm.writerow(["mode", "frequency_hz"])
        ws.writerow(["mode", "node", "direction", "value"])
        for j, m in enumerate(reversed(truth["modes"])):
            wm.writerow([11 + j, m["frequency_hz"]])
            for node, amp, ph in zip(truth["channel_nodes"], m["amplitude"], m["phase_deg"], strict=True):
                ws.writerow([11 + j, node, "+Z", amp * np.cos(np.radians(ph))])
    nb = {"cells": [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [],
                     "source": src} for src in CELLS],
          "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
          "nbformat": 4, "nbformat_minor": 5}
    (root / "frf_views.ipynb").write_text(json.dumps(nb))
    return "frf_views.ipynb"


@pytest.fixture(scope="module")
def page(lab, browser):
    name = _notebook(lab["root"])
    t0 = time.monotonic()
    pg = open_notebook(lab, browser, name, "frf-views")
    pg.evaluate("() => window.jupyterapp.commands.execute('notebook:run-all-cells')")
    pg.wait_for_function(ALL_RUN, timeout=TIMEOUT)
    pg.wait_for_selector(".modalnb-desk", timeout=TIMEOUT)
    print(f"[timing] page load + run all: {time.monotonic() - t0:.2f} s")
    yield pg
    shut_down_sessions(lab, name)
    pg.close()


def _tab(pg, name: str) -> None:
    pg.locator(".modalnb-desk-tabs .lm-TabBar-tab", has_text=name).click()


def _errors(pg) -> list[str]:
    return pg.evaluate("""() => [
      ...document.querySelectorAll('.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.stderr"]'),
      ...document.querySelectorAll('.modalnb-error, .modalnb-frf-error')].map(e => e.textContent)
      .concat(document.body.innerText.includes('Error displaying widget') ? ['widget error'] : [])""")


def _legend(pg, css: str) -> list[str]:
    return pg.evaluate(f"() => [...document.querySelectorAll('.{css} .legendtext')].map(e => e.textContent)")


def test_frf_views_render_and_follow_a_rejected_hit(page, shoot):
    shoot(page)
    _tab(page, "Hits")
    page.wait_for_function(LINE_DRAWN, arg=["modalnb-coherence-figure", 50], timeout=30_000)
    legend = _legend(page, "modalnb-coherence-figure")
    n = int(re.search(r"\((\d+) hits\)", " ".join(legend)).group(1))
    _tab(page, "Fit check")
    # measured and model magnitude and phase: four lines drawn
    page.wait_for_function(f"() => ({LINE_DRAWN})(['modalnb-frfcheck-figure', 50]) >= 4", timeout=30_000)
    assert {"measured", "model"} <= set(_legend(page, "modalnb-frfcheck-figure"))
    _tab(page, "Modal table")
    page.wait_for_selector(".modalnb-pairing-figure .heatmaplayer image, .modalnb-pairing-figure .hm",
                           timeout=30_000)
    table = page.locator(".modalnb-pairing-table").first
    macs = [float(t) for t in table.locator("td[class$='-mac']").all_text_contents()]
    models = [int(t) for t in table.locator("td[class$='-model']").all_text_contents()]
    tests = [int(t) for t in table.locator("td[class$='-test']").all_text_contents()]
    assert len(macs) == 4 and min(macs) >= 0.99  # the demo's FE truth as the model
    assert [m for _, m in sorted(zip(tests, models, strict=True))] == [14, 13, 12, 11]  # reversed
    # reject a hit: the coherence is drawn again from one hit fewer
    _tab(page, "Hits")
    t0 = time.monotonic()
    page.locator(".modalnb-hit-toggle-1 button", has_text="reject").click()
    page.wait_for_function(
        "(txt) => [...document.querySelectorAll('.modalnb-coherence-figure .legendtext')]"
        ".some(e => e.textContent.includes(txt))", arg=f"({n - 1} hits)", timeout=30_000)
    print(f"[timing] reject click to coherence redrawn: {time.monotonic() - t0:.2f} s")
    assert _errors(page) == []
    assert page.context.modalnb_external == []
