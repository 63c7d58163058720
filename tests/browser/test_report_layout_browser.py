"""The report in a real browser (Debian Chromium through Playwright): no sideways scrolling
at a 1,280 px window, nor at the width of an A4 page in print media; offline; the cells a
person reads are the table's numbers rounded as GUM 7.2.6 says (rounded here,
tests/gum_rounding.py).

Needs no JupyterLab: the page is a file. Without ``chromium`` on PATH these are skipped,
unless ``MODALNB_REQUIRE_BROWSER=1``.
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

import pytest
from playwright import sync_api

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/: gum_rounding
from gum_rounding import gum_pm  # noqa: E402

from modalnb.demo import load_demo  # noqa: E402
from modalnb.export import write_report  # noqa: E402
from modalnb.pipeline import run_recipe  # noqa: E402
from modalnb.recipe import Recipe, recipe_for  # noqa: E402

pytestmark = pytest.mark.browser

CHROMIUM = shutil.which("chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--disable-dev-shm-usage"]
#: A4 is 210 mm wide; less the report's print margins (12 mm each side, its @page rule)
#: that is 186 mm: 703 CSS px at 96 px per inch (CSS: 1 in = 96 px = 25.4 mm). Letter
#: (8.5 in) leaves more.
A4_PX = int(186 / 25.4 * 96)


def _chromium_or_skip() -> None:
    if CHROMIUM is None:
        if os.environ.get("MODALNB_REQUIRE_BROWSER") == "1":
            pytest.fail("MODALNB_REQUIRE_BROWSER=1 but no `chromium` on PATH (apt-get install chromium)")
        pytest.skip("no `chromium` on PATH (Debian package chromium); browser checks skipped")


@pytest.fixture(scope="module")
def reports():
    """The demo's report, and one with long texts everywhere a user can put them."""
    _chromium_or_skip()
    ds = load_demo()
    folder = Path(tempfile.mkdtemp())
    plain = recipe_for(ds, Recipe(title="Heron boom, bench tap test", analyst="J. Tester",
                                  source="demo_campaign.nc"))
    result, checks = run_recipe(ds, plain)
    write_report(ds, result, checks, folder / "demo.html", recipe=plain)
    token = "x" * 300  # one unbreakable word, as a pasted path or hash would be
    long_ds = ds.assign_coords(channel=[f"boom-{i}-accelerometer-on-the-upper-flange-{token[:60]}"
                                        for i in range(ds.sizes["channel"])])
    wordy = recipe_for(long_ds, Recipe(title="A long structure name " * 8, analyst="Analyst " * 10,
                                       notes=f"Notes {token} " + "and more words " * 40,
                                       source=f"/data/campaigns/{token}/records.nc"))
    r2, c2 = run_recipe(long_ds, wordy)
    write_report(long_ds, r2, c2, folder / "wordy.html", recipe=wordy)
    return {"demo": (folder / "demo.html", result), "wordy": (folder / "wordy.html", r2)}


def _open(path: Path, width: int, media: str = "screen"):
    external: list[str] = []
    p = sync_api.sync_playwright().start()
    ctx = p.chromium.launch_persistent_context(tempfile.mkdtemp(), executable_path=CHROMIUM,
                                               headless=True, args=ARGS,
                                               viewport={"width": width, "height": 900})

    def route(r):
        if r.request.url.startswith("file://"):
            r.continue_()
        else:
            external.append(r.request.url)
            r.abort()

    ctx.route("**/*", route)
    page = ctx.new_page()
    page.emulate_media(media=media)
    page.goto(path.as_uri())
    page.wait_for_selector(".js-plotly-plot .main-svg", timeout=60000)
    return p, ctx, page, external


@pytest.mark.parametrize("name", ["demo", "wordy"])
def test_report_fits_a_1280_px_window(reports, name):
    path, _ = reports[name]
    p, ctx, page, external = _open(path, 1280)
    try:
        width = page.evaluate("document.documentElement.scrollWidth")
        widest = page.evaluate("Math.max(...[...document.querySelectorAll('table,pre,.figure')]"
                               ".map(e => e.getBoundingClientRect().right))")
        n_plots = page.locator(".js-plotly-plot").count()
    finally:
        ctx.close()
        p.stop()
    assert external == []  # offline
    assert width <= 1280, width  # no sideways scrolling
    assert widest <= 1280, widest
    assert n_plots >= 3


def test_report_fits_an_a4_page_in_print_media(reports):
    path, _ = reports["wordy"]
    p, ctx, page, _ = _open(path, A4_PX, media="print")
    try:
        width = page.evaluate("document.documentElement.scrollWidth")
        pdf = page.pdf(format="A4")
        letter = page.pdf(format="Letter")
    finally:
        ctx.close()
        p.stop()
    assert width <= A4_PX, width
    assert pdf[:5] == b"%PDF-" and letter[:5] == b"%PDF-"


def test_report_cells_in_the_browser_are_the_numbers_rounded(reports):
    path, result = reports["demo"]
    p, ctx, page, _ = _open(path, 1280)
    try:
        cells = page.locator("table.modes tbody tr").evaluate_all(
            "rows => rows.map(r => [...r.cells].map(c => c.innerText.trim()))")
        title = page.locator("table.titleblock").inner_text()
    finally:
        ctx.close()
        p.stop()
    assert len(cells) == result.sizes["mode"]
    for k, row in enumerate(cells):
        assert row[1] == gum_pm(float(result["frequency_hz"][k]), float(result["frequency_hz_std"][k]))
        assert row[2] == gum_pm(float(result["damping_ratio"][k]), float(result["damping_ratio_std"][k]),
                                scale=100)
    assert "Heron boom, bench tap test" in title and "J. Tester" in title
