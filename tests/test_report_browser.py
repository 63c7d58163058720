"""The HTML report: every text escaped, plotly.js embedded exactly once, and the page opens
offline in headless Chromium (driven by Playwright).

Playwright is a test dependency (imported directly: missing, this module fails). Without
``chromium`` on PATH the Chromium check is skipped, unless ``MODALNB_REQUIRE_BROWSER=1``.
"""

from __future__ import annotations

import os
import tempfile

import numpy as np
import pytest
import xarray as xr
from offline_browser import offline_page
from plotly.offline import get_plotlyjs

from modalnb import records_from_arrays
from modalnb._display import PALETTE
from modalnb.export import report_html
from modalnb.testing.synth import free_decay

EVIL = "<script>alert(1)</script>"


def _case():
    fs = 1024.0
    t = -0.05 + np.arange(1024) / fs
    resp = np.stack([free_decay(t, 40.0, 0.02, a) for a in (1.0, -0.5, 0.3)])
    ds = records_from_arrays(resp[None], fs, channels=["tip", "mid", EVIL], t0=-0.05,
                             force=np.where((t >= 0) & (t < 0.002), np.sin(np.pi * t / 0.002), 0.0))
    result = xr.Dataset(
        {
            "frequency_hz": ("mode", [40.0]), "damping_ratio": ("mode", [0.02]),
            "frequency_hz_std": ("mode", [0.01]), "damping_ratio_std": ("mode", [1e-4]),
            "regime": ("mode", ["underdamped"]), "status": ("mode", ["ok"]),
            "shape_amplitude": (("mode", "channel"), [[1.0, 0.5, 0.3]]),
            "shape_phase_deg": (("mode", "channel"), [[0.0, 180.0, 0.0]]),
            "hit_accepted": ("hit", [True]), "hit_reason": ("hit", [""]),
        },
        coords={"mode": [1], "channel": ds["channel"].values, "hit": [1]},
    )
    model = ds["response"].sel(time=slice(0.0, None)) * 0.98
    return ds, result, model


def test_report_escapes_text():
    ds, result, model = _case()
    page = report_html(ds, result, model=model, title=f"bay 3 {EVIL}")
    assert EVIL not in page  # never raw in the page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "not a certification" in page
    # the library is embedded exactly once: plotly's own bundle text, found one time
    assert page.count(get_plotlyjs()) == 1
    assert page.count("plotly.js v") == 1  # its banner comment: no second, other copy
    assert PALETTE.measured in page and PALETTE.model in page  # the shared palette


@pytest.mark.browser
def test_report_renders_offline_in_chromium():
    ds, result, model = _case()
    tmp = tempfile.mkdtemp()
    path = os.path.join(tmp, "report.html")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(report_html(ds, result, model=model, title="offline check"))
    with offline_page("file://" + path, wait_for=".js-plotly-plot .main-svg") as op:
        page = op.page
        n_plots = page.locator(".js-plotly-plot").count()
        n_lines = page.locator(".js-plotly-plot path.js-line").count()
        cell = page.locator("table.shapes td", has_text="alert(1)").first.inner_text()
        page.screenshot(path=os.path.join(tmp, "report.png"), full_page=False)
    assert op.external == []  # works offline: no request left the file
    assert op.dialogs == [] and op.errors == []  # the channel name did not run as script
    assert n_plots >= 3 and n_lines >= 3  # spectra, force and traces drawn with data
    assert cell == EVIL  # shown as text
