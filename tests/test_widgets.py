"""Headless tests of the notebook panels: set widget values / call the handlers plotly would
call, then assert on the analysis state, the recipe on disk and the tables shown.

Sources of the expected values: the recipe file read back by modalnb.recipe.load_recipe;
the demo truth (demo_truth.json: hit 4 double hit, hit 6 clipped); the MAC definition
(Allemang & Brown 1982: 1 on the diagonal); the stdlib csv reader for exported files.
The real engine (``modalnb.estimate.ModeFit``) drives the state. ipywidgets, plotly and
anywidget are hard dependencies: imported directly, so a missing one fails this module.
"""

from __future__ import annotations

import csv
import html
import re
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import anywidget
import ipywidgets as w
import numpy as np
import plotly.graph_objects as go
import pytest

from modalnb._display import MAX_POINTS, PALETTE, decimate_for_display
from modalnb.demo import load_demo, load_demo_truth
from modalnb.recipe import Recipe, load_recipe
from modalnb.session import Analysis
from modalnb.widgets import Desk, HitPanel, WindowPanel, analysis_desk

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def desk(tmp_path_factory):
    path = tmp_path_factory.mktemp("desk") / "demo.recipe.json"
    d = analysis_desk(load_demo(), recipe_path=path)
    yield d
    d.close()


def _cells(html: str, cls: str) -> list[str]:
    return re.findall(rf'class="{cls}">([^<]*)<', html)


def test_window_slider_refits_and_moves_shading(desk):
    a, p = desk.analysis, desk.window
    damping_before = p.damping.value
    p.slider.value = (0.02, 0.7)
    assert a.recipe.window == (0.02, 0.7)
    assert load_recipe(a.recipe_path).window == (0.02, 0.7)  # autosaved
    assert (p.start.value, p.end.value) == (20.0, 700.0)  # boxes follow the slider, in ms
    shape = p.fig.layout.shapes[0]
    assert (shape.x0, shape.x1) == (0.02, 0.7)  # shaded window moved
    assert p.damping.value != damping_before  # fitted damping shown changed


def test_window_boxes_drive_slider(desk):
    a, p = desk.analysis, desk.window
    p.start.value = 30.0  # ms
    assert a.recipe.window[0] == 0.03 and p.slider.value[0] == 0.03


def test_window_box_order_error_is_shown_not_fitted(desk):
    a, p = desk.analysis, desk.window
    before = a.recipe
    p.end.value = 10.0  # ms, before the start
    assert a.recipe == before
    assert "modalnb-error" in p.status.value and "low &lt; high" in p.status.value
    # boxes back to the window in use (in ms)
    assert (p.start.value / 1e3, p.end.value / 1e3) == pytest.approx(before.window, abs=1e-12)


def test_failed_refit_shows_one_line_error_and_keeps_table(desk):
    a, p = desk.analysis, desk.window
    table_before = desk.table.modes.value
    window_before = a.recipe.window
    p.slider.value = (0.5, 0.5005)  # two samples: no fit
    assert a.recipe.window == window_before
    assert "modalnb-error" in p.status.value and "\n" not in a.error
    assert p.slider.value == window_before  # controls back to the window in use
    assert desk.table.modes.value == table_before
    p.slider.value = (0.02, 0.9)
    assert a.error is None and "modalnb-error" not in p.status.value


def test_box_select_sets_window(desk):
    a, p = desk.analysis, desk.window
    # what plotly calls on a box selection: (trace, points, selector with xrange)
    p._on_select(p.fig.data[0], None, SimpleNamespace(xrange=(0.025, 0.8)))
    assert a.recipe.window == (0.025, 0.8)
    assert p.slider.value == (0.025, 0.8)


def test_log_view_and_decimation(desk):
    p = desk.window
    p.log.value = True
    for tr in p.fig.data:  # what the screen can show (BROWSER.md), never the raw 8192 samples
        assert 0 < len(tr.x) <= MAX_POINTS
    # a decaying ring-down: the dB envelope falls over the record
    y = np.asarray(p.fig.data[-1].y)
    assert y[: y.size // 10].max() > y[-y.size // 10:].max() + 20
    p.log.value = False
    p.channel.value = "boom-6"
    assert len(p.fig.data) == 1


def test_hit_toggles_go_into_recipe_and_tables(desk):
    a, p = desk.analysis, desk.hits
    truth = load_demo_truth()
    rows = p.rows_html()
    # automatic decisions of the demo's bad hits (truth: double hit 4, clipped hit 6)
    assert _cells(rows, f"modalnb-hitrow-{truth['double_hit']['hit']}-accepted") == ["no"]
    assert _cells(rows, f"modalnb-hitrow-{truth['clipped_hit']['hit']}-accepted") == ["no"]
    n = len(a.accepted_hits())
    table_before = desk.table.modes.value
    p.toggles[2].value = "reject"  # the toggle in hit 2's row
    assert a.recipe.hit_overrides == {2: False}
    assert load_recipe(a.recipe_path).hit_overrides == {2: False}
    assert re.search(r'modalnb-hit-count-value">(\d+)<', p.count.value).group(1) == str(n - 1)
    assert _cells(p.rows_html(), "modalnb-hitrow-2-accepted") == ["no"]
    assert desk.table.modes.value != table_before  # one hit fewer: a different table
    assert _cells(desk.table.modes.value, "modalnb-table-nhits") == [str(n - 1)]
    p.toggles[2].value = "auto"
    assert a.recipe.hit_overrides == {}
    assert len(a.accepted_hits()) == n


def test_band_and_mode_count(desk):
    a, p = desk.modes, desk.modes
    p.band.value = (20.0, 700.0)
    assert desk.analysis.recipe.band == (20.0, 700.0)
    f = np.asarray(p.fig.data[1].x)
    assert f.size and np.all((f >= 20) & (f <= 700))  # only modes inside the band are marked
    p.n_modes.value = 1
    assert desk.analysis.recipe.n_modes == 1 and len(p.fig.data[1].x) == 1
    p.n_modes.value = 0
    p.auto_band.click()
    assert desk.analysis.recipe.band is None and desk.analysis.recipe.n_modes is None
    # back to the documented default band: 0 to 0.45 fs (common practice, see modalnb._utils)
    fs = desk.analysis.sample_rate
    assert a.fig.layout.shapes[0].x0 == 0.0 and a.fig.layout.shapes[0].x1 == pytest.approx(0.45 * fs)
    assert p.band.value == pytest.approx((0.0, 0.45 * fs), abs=0.5)  # slider step is 1 Hz


def test_click_and_buttons_drop_and_restore_a_mode(desk):
    a, p = desk.analysis, desk.modes
    n_before = a.result.sizes["mode"]
    f3 = float(a.result["frequency_hz"].values[2])  # demo truth: mode 3 near 572.3 Hz
    # a click on the spectrum fills the box (plotly's click callback: points.xs)
    p._on_click(None, SimpleNamespace(xs=[f3 + 1.234]), None)
    assert p.mode_freq.value == pytest.approx(round(f3 + 1.234, 2))
    p.drop_btn.click()
    assert a.recipe.drop_modes == [p.mode_freq.value]
    assert load_recipe(a.recipe_path).drop_modes == a.recipe.drop_modes  # autosaved
    assert a.result.sizes["mode"] == n_before - 1 and len(p.fig.data[1].x) == n_before - 1
    assert "dropped" in p.edits.value
    p.clear_btn.click()
    assert a.recipe.drop_modes == [] and a.result.sizes["mode"] == n_before and p.edits.value == ""


def test_fit_panel_shows_model_and_quality(desk):
    p = desk.fit
    # the cross-checks beside the fit: one row per mode, three methods
    assert "cross-checks" in p.cross.value and "Hilbert envelope" in p.cross.value
    assert "biased low in noise" in p.cross.value  # each method with its known bias
    assert p.cross.value.count("<tr") == desk.analysis.result.sizes["mode"] + 1
    assert len(p.fig.data[0].x) > 10 and len(p.fig.data[1].x) > 10
    t0, t1 = desk.analysis.fit_window()
    assert min(p.fig.data[0].x) >= t0 - 1e-12 and max(p.fig.data[0].x) <= t1 + 1e-12
    assert len(_cells(p.quality.value, r"modalnb-quality-\d+-\w+")) == 3 * len(desk.analysis.channels)
    first = list(p.fig.data[0].y)
    p.channel.value = "boom-1"
    assert list(p.fig.data[0].y) != first


def test_table_mac_and_export(desk, tmp_path):
    a, p = desk.analysis, desk.table
    shown = [float(x.split("±")[0]) for x in _cells(p.modes.value, r"modalnb-mode-\d+-frequency_hz")]
    f_std = a.result["frequency_hz_std"].values  # rounded to the uncertainty's place (GUM 7.2.6)
    np.testing.assert_allclose(shown, a.result["frequency_hz"].values, atol=float(f_std.max()))
    np.testing.assert_allclose(np.diag(np.asarray(p.mac_fig.data[0].z)), 1.0, atol=1e-12)  # MAC(a, a) = 1
    z = np.asarray(p.hitmac_fig.data[0].z)
    assert z.shape == (len(a.accepted_hits()),) * 2
    p.out_dir.value = str(tmp_path / "out")
    p.b_table.click()
    p.b_report.click()
    with open(tmp_path / "out" / "modes.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    np.testing.assert_allclose([float(r["frequency_hz"]) for r in rows], a.result["frequency_hz"].values,
                               rtol=1e-12)
    assert (tmp_path / "out" / "report.html").stat().st_size > 100_000  # plotly.js embedded
    assert "modalnb-written" in p.export_status.value
    p.b_recipe.click()
    assert load_recipe(a.recipe_path) == a.recipe


def test_shape_plot_uses_node_coordinates(desk):
    p = desk.table
    nodes = p.shape_fig.data[3]  # the moving nodes (modalnb.export.shape_view.base_traces)
    assert nodes.type == "scatter3d"  # the demo has x, y, z per channel
    # the boom's sensors move along Z only: x stays at the records' x at every phase
    np.testing.assert_allclose(nodes.x, desk.analysis.records["x"].values)


def test_panels_work_alone(desk):
    a = Analysis(desk.analysis.records, fit=False)
    a.refit()
    hp = HitPanel(a)
    wp = WindowPanel(a)
    assert len(hp.toggles) == len(a.hits)
    assert wp.slider.value == a.fit_window()
    hp.close()
    wp.close()
    assert a._listeners == []


def test_hit_panel_draws_pulse_and_spectrum(desk):
    p = desk.hits
    p.show_hit.value = 3
    t_ms = np.asarray(p.force_fig.data[0].x)
    f = np.asarray(p.force_fig.data[0].y)
    peak = float(desk.analysis.checks["peak_force"].sel(hit=3))
    assert f.max() == pytest.approx(peak, rel=0.02)  # the pulse drawn is the one the checks measured
    assert t_ms.min() < 0 < t_ms.max()  # around the trigger, in ms
    spec_db = np.asarray(p.force_fig.data[1].y)
    assert spec_db.max() == pytest.approx(0.0, abs=1e-9)  # dB re its own peak
    assert len(p.resp_fig.data) == len(desk.analysis.channels)


def test_hit_panel_shows_the_force_spectrum_the_soft_tip_check_judged(desk):
    # issue 8 §3: one force spectrum. The check reports force_bandwidth_hz, the first
    # frequency where the spectrum is max_rolloff_db below its 0 Hz level; the curve drawn
    # must cross that level there (linear interpolation of the drawn points, 1 % in f).
    p = desk.hits
    chk = desk.analysis.checks
    drop = float(chk.attrs["max_rolloff_db"])
    for hit in (1, 2, 3):
        p.show_hit.value = hit
        f_hz = np.asarray(p.force_fig.data[1].x, float)
        level = np.asarray(p.force_fig.data[1].y, float)
        f_bw = float(chk["force_bandwidth_hz"].sel(hit=hit))
        assert level[0] == pytest.approx(0.0, abs=1e-9)  # dB re the 0 Hz level
        if np.isnan(f_bw):  # the check found no such drop up to Nyquist: neither may the curve
            assert level.min() > -drop
            continue
        below = np.nonzero(level <= -drop)[0]
        assert below.size, f"hit {hit}: the drawn spectrum never falls {drop} dB"
        i = int(below[0])
        f_cross = np.interp(-drop, [level[i], level[i - 1]], [f_hz[i], f_hz[i - 1]])
        assert f_cross == pytest.approx(f_bw, rel=0.01)


def test_status_shows_progress_during_refit(desk):
    seen = []
    stop = desk.analysis.subscribe(lambda ev, a: seen.append((ev, desk.window.status.value)))
    desk.analysis.refit()
    stop()
    # panels subscribed earlier than this listener, so their status was already updated
    assert seen[0][0] == "busy" and "modalnb-busy" in seen[0][1] and "fitting" in seen[0][1]
    assert seen[-1][0] == "result" and "modalnb-ok" in seen[-1][1]


def test_decimation_keeps_every_peak():
    rng = np.random.default_rng(3)
    t = np.arange(10007) / 4096.0
    y = rng.normal(size=t.size)
    n = 400
    tt, yy = decimate_for_display(t, y, n)
    assert len(tt) <= n and np.all(np.diff(tt) > 0)
    assert yy.max() == y.max() and yy.min() == y.min()  # extremes survive (the point of min/max)
    idx = np.searchsorted(t, tt)
    np.testing.assert_array_equal(t[idx], tt)  # only samples of the input, never invented points
    np.testing.assert_array_equal(y[idx], yy)
    # envelope property, checked sample by sample with a plain loop: every input sample lies
    # within the min..max of the kept points near it (a bucket is ceil(N / (n/2)) samples)
    k = -(-t.size // (n // 2))
    for i in range(0, t.size, 7):
        near = yy[np.abs(idx - i) <= 2 * k]
        assert near.min() <= y[i] <= near.max(), i
    short = np.arange(50.0)
    assert decimate_for_display(short, short)[0] is short  # already small enough: untouched


def test_widgets_and_report_share_one_palette_and_one_decimation():
    # one palette: no colour literal anywhere in the report or the widgets, only in _display
    hex_colour = re.compile(r"#[0-9a-fA-F]{6}\b|rgba?\(")
    for path in [ROOT / "modalnb" / "export" / "report.py", *sorted((ROOT / "modalnb" / "widgets").glob("*.py"))]:
        found = hex_colour.findall(path.read_text())
        assert found == [], f"{path.name} defines its own colours: {found}"
    assert "def decimate" not in (ROOT / "modalnb" / "export" / "report.py").read_text()
    for path in (ROOT / "modalnb" / "widgets").glob("*.py"):
        assert "def decimate" not in path.read_text(), path.name
        assert "0.45" not in path.read_text(), path.name  # the default band comes from _utils


def test_figures_use_the_palette(desk):
    fit = desk.fit
    assert [tr.line.color for tr in fit.fig.data] == [
        PALETTE.measured, PALETTE.model, PALETTE.residual, PALETTE.measured, PALETTE.residual]
    assert desk.modes.fig.data[1].marker.color == PALETTE.mode
    assert desk.window.fig.layout.shapes[0].fillcolor == PALETTE.window


def test_figurewidget_needs_anywidget_and_says_so():
    # plotly's FigureWidget is an anywidget.AnyWidget: the dependency is real
    assert issubclass(go.FigureWidget, anywidget.AnyWidget)
    assert isinstance(go.FigureWidget(), w.DOMWidget)
    # without anywidget, importing the widgets fails at once with a message naming it
    code = ("import sys; sys.modules['anywidget'] = None\n"
            "try:\n    import modalnb.widgets\nexcept ImportError as e:\n    print('IMPORTERROR', e)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                         check=True).stdout
    assert out.startswith("IMPORTERROR") and "pip install anywidget" in out, out


def test_desk_builds_a_panel_when_its_tab_opens(desk):
    d = Desk(desk.analysis)
    assert list(d._built) == ["hits"]  # only the first tab at start
    d.tabs.selected_index = 3
    assert "fit" in d._built and d._boxes[3].children == (d.fit.widget,)
    assert d.tabs.get_title(4).endswith("Modal table")
    d.close()


SCRIPT = "<script>alert(1)</script>"
QUOTES = "&<>\"'"


class _Page(HTMLParser):
    """What a browser makes of an HTML fragment: its tags and its text (stdlib parser)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)

    def handle_data(self, data):
        self.text.append(data)


def _page(fragment: str) -> _Page:
    p = _Page()
    p.feed(fragment)
    p.close()
    return p


def _html_values(widget) -> list[str]:
    out, todo = [], [widget]
    while todo:
        x = todo.pop()
        if isinstance(x, w.HTML):
            out.append(x.value)
        todo.extend(getattr(x, "children", ()))
    return out


@pytest.fixture(scope="module")
def hostile(tmp_path_factory):
    """The demo with two channels renamed to markup, each dead in one hit; a dead channel
    is set to reject its hit, so the hit's reason names the channel (modalnb.check_hits)."""
    ds = load_demo().copy(deep=True)
    names = [str(c) for c in ds["channel"].values]
    names[0], names[1] = SCRIPT, QUOTES
    ds = ds.assign_coords(channel=names)
    ds["response"][0, 0, :] = 0.0  # hit 1: channel SCRIPT dead (all samples equal)
    ds["response"][1, 1, :] = 0.0  # hit 2: channel QUOTES dead
    recipe = Recipe(check_thresholds={"reject": ["double hit", "clipping", "dead channel"]})
    a = Analysis(ds, recipe, recipe_path=tmp_path_factory.mktemp("hostile") / "x.recipe.json",
                 source=f"bay {SCRIPT}.nc")
    d = Desk(a)
    yield d
    d.close()


def test_hostile_names_and_reasons_are_shown_as_text(hostile):
    a = hostile.analysis
    reasons = [str(r) for r in a.checks["reason"].values]
    assert SCRIPT in reasons[0] and QUOTES in reasons[1]  # the hostile text did reach a reason
    panels = hostile.panels  # every panel built
    fragments = _html_values(hostile.widget)
    assert len(fragments) > 10
    shown = []
    for frag in fragments:
        page = _page(frag)
        assert "script" not in page.tags, frag[:200]  # never markup
        assert SCRIPT not in frag and QUOTES not in frag  # never raw in the page
        shown.append("".join(page.text))
    text = "\n".join(shown)
    # ... but shown to the reader as the very characters of the file (html.escape, decoded)
    assert html.escape(SCRIPT) in "".join(fragments)
    for where, frag in (("hit reasons", panels[0].rows_html()),
                        ("fit quality", panels[3].quality.value),
                        ("shape table", panels[4].shapes.value)):
        t = "".join(_page(frag).text)
        assert SCRIPT in t and QUOTES in t, where
    assert reasons[0] in "".join(_page(panels[0].rows_html()).text)  # the whole reason, as text
    assert f"bay {SCRIPT}.nc" in text  # the desk's header names the file, as text
    # plotly reads names as its own markup: the figures get the escaped names
    assert [tr.name for tr in panels[0].resp_fig.data][:2] == [html.escape(SCRIPT), html.escape(QUOTES)]
    assert [tr.name for tr in panels[1].fig.data][:2] == [html.escape(SCRIPT), html.escape(QUOTES)]
    # (the shape view labels nodes, not channels: its escaping is checked in
    # tests/test_shape_motion_widget.py)


def test_hostile_text_in_an_error_is_escaped(hostile):
    p = hostile.window
    p.end.value = p.start.value - 0.01  # refused with a one-line error in the status line
    frag = p.status.value
    assert "modalnb-error" in frag and "script" not in _page(frag).tags
    hostile.analysis.error = f"channel {SCRIPT} {QUOTES}"  # a message quoting a channel name
    p._show_status()
    frag = p.status.value
    assert SCRIPT not in frag and f"channel {SCRIPT} {QUOTES}" in "".join(_page(frag).text)
    hostile.analysis.error = None
