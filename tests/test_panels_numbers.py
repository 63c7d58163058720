"""Headless tests of what the panels show (issue 13): numbers as an engineer writes them, the
hit decision in each hit's row, the square MAC over the accepted hits, the stabilisation
legend's classes and counts.

Expected texts are rounded here by the tests' own GUM 7.2.6 lines (gum_rounding.gum_pm) and :func:`_places`
(JCGM 100:2008, GUM 7.2.6: the standard uncertainty to two significant digits, the value to
the same decimal place; times to the sample step; dB to 0.1 dB, common practice), never by
modalnb._numbers. The demo truth (demo_truth.json: hit 4 double hit) names the hit the checks
reject. MAC(a, a) = 1 (Allemang & Brown 1982).
"""

from __future__ import annotations

import math
import re
from decimal import ROUND_HALF_UP, Decimal
from html.parser import HTMLParser

import numpy as np
import pytest
from gum_rounding import gum_pm

from modalnb.demo import load_demo, load_demo_truth
from modalnb.widgets import analysis_desk
from modalnb.widgets.modes import STAB_CLASSES


@pytest.fixture(scope="module")
def desk(tmp_path_factory):
    d = analysis_desk(load_demo(), recipe_path=tmp_path_factory.mktemp("nums") / "demo.recipe.json")
    yield d
    d.close()


def _round(x: float, exp: int) -> Decimal:
    return Decimal(repr(float(x))).quantize(Decimal(1).scaleb(exp), rounding=ROUND_HALF_UP)


def _places(value: float, decimals: int) -> str:
    return str(_round(value, -decimals))


def _cells(html: str, cls: str) -> list[str]:
    return re.findall(rf'class="{cls}">([^<]*)<', html)


class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self._style = False

    def handle_starttag(self, tag, attrs):
        self._style = tag == "style"

    def handle_endtag(self, tag):
        self._style = False

    def handle_data(self, data):
        if not self._style:
            self.parts.append(data)


def _text(widget) -> str:
    """Every text the widget tree shows (HTML widgets' text without styles, descriptions)."""
    import ipywidgets as w

    out, todo = [], [widget]
    while todo:
        x = todo.pop()
        if isinstance(x, w.HTML):
            p = _Text()
            p.feed(x.value)
            out.append(" ".join(p.parts))
        if getattr(x, "description", ""):
            out.append(x.description)
        todo.extend(getattr(x, "children", ()))
    return "\n".join(out)


def test_modal_table_writes_value_and_u_as_gum_7_2_6(desk):
    a, p = desk.analysis, desk.table
    r = a.result
    f = _cells(p.modes.value, r"modalnb-mode-\d+-frequency_hz")
    z = _cells(p.modes.value, r"modalnb-mode-\d+-damping_pct")
    assert len(f) == len(z) == r.sizes["mode"] > 0
    for k in range(r.sizes["mode"]):
        assert f[k] == gum_pm(r["frequency_hz"].values[k], r["frequency_hz_std"].values[k])
        # damping ratio in per cent: the ratio and its u times 100
        assert z[k] == gum_pm(r["damping_ratio"].values[k], r["damping_ratio_std"].values[k], scale=100)
    # the time window panel's damping table shows the same texts
    wz = _cells(desk.window.damping.value, r"modalnb-damp-\d+-damping_pct")
    assert wz == z


def test_hit_table_times_to_the_sample_step_and_db_to_a_tenth(desk):
    a, p = desk.analysis, desk.hits
    c = a.checks
    step_ms = 1e3 / a.sample_rate
    decimals = math.ceil(-math.log10(step_ms))  # 10**-d <= step: neighbouring samples apart
    html = p.rows_html()
    for i, h in enumerate(c["hit"].values.tolist()):
        pulse = float(c["pulse_duration_s"].values[i]) * 1e3
        if not np.isnan(pulse):
            assert _cells(html, f"modalnb-hitrow-{h}-pulse_duration_s") == [_places(pulse, decimals)]
        assert _cells(html, f"modalnb-hitrow-{h}-snr_db") == [_places(c["snr_db"].values[i], 1)]
        assert _cells(html, f"modalnb-hitrow-{h}-end_level_db") == [
            _places(c["end_level_db"].values[i], 1)]


def test_no_e_notation_and_no_long_floats_in_any_panel(desk):
    assert len(desk.panels) == 5  # every panel built (the desk keeps its five tabs)
    text = _text(desk.widget)
    assert re.findall(r"\d[eE][-+]?\d", text) == []
    # issue 13's raw floats: never more than 6 significant digits without an uncertainty
    # that justifies them (the only long numbers allowed are "value ± u" pairs)
    for num in re.findall(r"(?<![\d.])\d+\.\d{7,}(?!\s*±)", text):
        pytest.fail(f"long float shown: {num}")


def test_window_boxes_in_ms_to_the_sample_step(desk):
    a, p = desk.analysis, desk.window
    t0, t1 = a.fit_window()
    decimals = math.ceil(-math.log10(1e3 / a.sample_rate))
    assert p.start.description == "start [ms]" and p.end.description == "end [ms]"
    assert p.start.value == pytest.approx(float(_places(t0 * 1e3, decimals)), abs=1e-12)
    assert p.end.value == pytest.approx(float(_places(t1 * 1e3, decimals)), abs=1e-12)
    p.end.value = 650.0  # ms
    assert a.recipe.window[1] == pytest.approx(0.65, abs=1e-12)
    assert p.slider.value[1] == pytest.approx(0.65, abs=1e-12)
    p.auto.click()
    assert a.recipe.window is None


def test_hit_toggle_sits_in_its_row_and_decides(desk):
    a, p = desk.analysis, desk.hits
    from modalnb.widgets.hits import COLUMNS

    keys = [k for k, *_ in COLUMNS]
    col = keys.index("user_decision")
    grid = p.table.children
    for row, h in enumerate(a.hits, start=1):  # row 0: the headings
        assert grid[row * len(keys) + col] is p.toggles[h]
        assert f"modalnb-hit-toggle-{h}" in p.toggles[h]._dom_classes
        assert f"modalnb-hitrow-{h}-hit" in grid[row * len(keys)].value  # same row: same hit
    double = load_demo_truth()["double_hit"]["hit"]
    assert double not in a.accepted_hits()  # the checks reject the double hit
    assert p.toggles[double].value == "auto"  # "your decision": none yet, shown as auto
    p.toggles[double].value = "accept"  # your decision wins
    assert double in a.accepted_hits() and a.recipe.hit_overrides == {double: True}
    assert _cells(p.rows_html(), f"modalnb-hitrow-{double}-accepted") == ["yes"]
    p.toggles[1].value = "reject"
    assert 1 not in a.accepted_hits()
    p.toggles[double].value = "auto"
    p.toggles[1].value = "auto"
    assert a.recipe.hit_overrides == {}
    # no toggle text cut: three short words, the long form in the tooltips
    assert all(len(o) <= 6 for o in p.toggles[1].options) and len(p.toggles[1].tooltips) == 3


def test_hit_mac_is_square_over_the_accepted_hits(desk):
    a, p = desk.analysis, desk.table
    for reject in (None, 2):
        if reject is not None:
            desk.hits.toggles[reject].value = "reject"
        used = a.accepted_hits()
        tr = p.hitmac_fig.data[0]
        z = np.asarray(tr.z)
        labels = [f"hit {h}" for h in used]
        assert z.shape == (len(used), len(used))
        assert list(tr.x) == labels and list(tr.y) == labels
        assert list(p.hitmac_fig.layout.xaxis.categoryarray) == labels
        np.testing.assert_allclose(np.diag(z), 1.0, atol=1e-12)  # MAC(a, a) = 1
        assert p.hitmac_fig.layout.yaxis.scaleanchor == "x"  # square cells
        assert p.mac_fig.layout.yaxis.scaleanchor == "x"
    desk.hits.toggles[2].value = "auto"


def test_stabilisation_legend_names_classes_with_counts(desk):
    a, p = desk.analysis, desk.modes
    st = a.stabilisation_table()
    flags = dict(zip(st["match"].attrs["flag_meanings"].split(),
                     np.asarray(st["match"].attrs["flag_values"]).tolist(), strict=True))
    names = {tr.meta: tr.name for tr in p.stab.data}
    assert set(names) == {c[0] for c in STAB_CLASSES} == set(flags)
    total = 0
    for meaning, label, *_ in STAB_CLASSES:
        n = int(np.sum(st["match"].values == flags[meaning]))
        total += n
        assert names[meaning] == f"{label} ({n})"
        tr = next(t for t in p.stab.data if t.meta == meaning)
        assert len(tr.x) == n
    assert total == st.sizes["pole"]
    # the stable class is the engine's stable_shape; stable + shape are its `stable`
    assert names["stable"] == f"stable ({int(st['stable_shape'].sum())})"
    counts = [int(x) for x in _cells(p.stab_note.value, r"modalnb-stab-\d+-count")]
    assert sum(counts) == st.sizes["pole"]
    # the demo's case in issue 13: most non-stable poles fail on damping or energy, not
    # "seen once"
    assert counts[[c[0] for c in STAB_CLASSES].index("damping")] > 0
    assert counts[[c[0] for c in STAB_CLASSES].index("energy")] > 0
