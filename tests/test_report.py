"""The HTML report as a deliverable: its cells against the table's raw numbers rounded here
(GUM 7.2.6, tests/gum_rounding.py, not modalnb._numbers), the title block, no e-notation,
one shape table per mode, the sections' order, the recipe at the end.

Tables are read back with Python's own html.parser (an independent reader).
"""

from __future__ import annotations

import datetime as dt
import json
import math
import re
from decimal import Decimal
from html.parser import HTMLParser

import numpy as np
import pytest
import xarray as xr
from gum_rounding import gum_pm

import modalnb
from modalnb.demo import load_demo
from modalnb.export import report_html
from modalnb.export.report import _figures
from modalnb.pipeline import run_recipe
from modalnb.recipe import Recipe, recipe_for

E_NOTATION = re.compile(r"\d[eE][+-]?\d")


class Tables(HTMLParser):
    """Every <table>: its class, caption and rows of cell texts (entities decoded)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: list[dict] = []
        self.sections: list[str] = []
        self._cell: list[str] | None = None
        self._caption: list[str] | None = None
        self._pre: list[str] | None = None
        self.pres: list[str] = []
        self._depth = 0  # <section> nesting: a fragment may bring sections of its own

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "section":
            if self._depth == 0:  # the page's own sections only
                self.sections.append(a.get("id", ""))
            self._depth += 1
        elif tag == "table":
            self.tables.append({"class": a.get("class", ""), "caption": "", "rows": [],
                                "section": self.sections[-1] if self.sections else ""})
        elif tag == "tr" and self.tables:
            self.tables[-1]["rows"].append([])
        elif tag in ("td", "th") and self.tables:
            self._cell = []
        elif tag == "caption":
            self._caption = []
        elif tag == "pre":
            self._pre = []

    def handle_endtag(self, tag):
        if tag == "section":
            self._depth -= 1
        elif tag in ("td", "th") and self._cell is not None:
            self.tables[-1]["rows"][-1].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "caption" and self._caption is not None:
            self.tables[-1]["caption"] = "".join(self._caption).strip()
            self._caption = None
        elif tag == "pre" and self._pre is not None:
            self.pres.append("".join(self._pre))
            self._pre = None

    def handle_data(self, data):
        for buf in (self._cell, self._caption, self._pre):
            if buf is not None:
                buf.append(data)

    def of(self, css: str) -> list[dict]:
        return [t for t in self.tables if t["class"] == css]


@pytest.fixture(scope="module")
def demo_report():
    ds = load_demo()
    recipe = recipe_for(ds, Recipe(title="Heron boom <bench> tap test", analyst="J. Tester",
                                   notes="Six accelerometers; steel tip & soft pad.",
                                   source="demo_campaign.nc"))
    result, checks = run_recipe(ds, recipe)
    page = report_html(ds, result, checks, recipe=recipe)
    parser = Tables()
    parser.feed(page)
    return ds, result, checks, recipe, page, parser


def _sig3(x: float) -> float:
    """`x` to 3 significant digits (Decimal, half away from zero), written here."""
    d = Decimal(repr(float(x)))
    return float(d.quantize(Decimal(10) ** (d.adjusted() - 2), rounding="ROUND_HALF_UP"))


def test_modal_table_cells_are_the_table_numbers_rounded_per_gum(demo_report):
    _, result, _, _, _, p = demo_report
    (table,) = p.of("modes")
    head, *rows = table["rows"]
    assert head[:3] == ["Mode", "Natural frequency f_n [Hz]", "Damping ratio ζ [%]"]
    assert "Regime" in head and "Status" in head
    assert len(rows) == result.sizes["mode"] == 4  # the demo's four modes (demo_truth.json)
    for k, row in enumerate(rows):
        f, uf = float(result["frequency_hz"][k]), float(result["frequency_hz_std"][k])
        z, uz = float(result["damping_ratio"][k]), float(result["damping_ratio_std"][k])
        assert row[1] == gum_pm(f, uf)
        assert row[2] == gum_pm(z, uz, scale=100)  # a ratio shown in per cent
        assert row[head.index("Regime")] == str(result["regime"].values[k])
        assert float(row[head.index("Quality factor Q")]) == _sig3(float(result["q_factor"][k]))
    # by hand for mode 1 (demo: 32.615 Hz, u 0.00015 Hz): five decimals, u two digits
    assert re.fullmatch(r"32\.615\d\d ± 0\.000\d\d", rows[0][1])


def test_title_block_says_what_when_who_which_version_and_records(demo_report):
    _, result, _, recipe, page, p = demo_report
    (block,) = p.of("titleblock")
    fields = dict(block["rows"])
    assert fields["Structure / test"] == "Heron boom <bench> tap test"  # escaped, shown as text
    assert "Heron boom &lt;bench&gt; tap test" in page and "<bench>" not in page
    assert fields["Analyst"] == "J. Tester"
    assert fields["Notes"] == "Six accelerometers; steel tip & soft pad."
    assert fields["modalnb version"] == modalnb.__version__
    assert fields["Records"] == "demo_campaign.nc"
    digest = recipe.records_checksum.split(":")[1]
    assert fields["Records checksum"] == "sha256:" + digest[:12]
    when = dt.datetime.fromisoformat(fields["Analysis date"])  # ISO 8601
    assert when.tzinfo is not None
    assert abs((dt.datetime.now(dt.UTC) - when).total_seconds()) < 600
    assert "not a certification" in page and "licensed engineers" in page


def test_no_e_notation_in_any_table_cell(demo_report):
    *_, p = demo_report
    cells = [c for t in p.tables for r in t["rows"] for c in r]
    assert len(cells) > 150
    assert [c for c in cells if E_NOTATION.search(c)] == []


def test_cross_checks_and_shapes_in_their_own_tables(demo_report):
    _, result, _, _, _, p = demo_report
    (xc,) = p.of("xchecks")
    head, *rows = xc["rows"]
    assert head[0] == "Mode" and "Log decrement ζ [%]" in head
    col = head.index("Log decrement ζ [%]")
    for k, row in enumerate(rows):
        assert float(row[col]) == _sig3(100 * float(result["xcheck_log_decrement_damping"][k]))
    shapes = p.of("shapes")
    assert len(shapes) == result.sizes["mode"]  # one table per mode
    channels = [str(c) for c in result["channel"].values]
    for k, t in enumerate(shapes):
        head, *rows = t["rows"]
        assert t["caption"].startswith(f"Mode {k + 1}: f_n = ")
        assert [r[0] for r in rows] == channels
        a_col, p_col = head.index("Amplitude"), head.index("Phase [°]")
        for c, row in enumerate(rows):
            assert float(row[a_col]) == _sig3(float(result["shape_amplitude"][k, c]))
            assert abs(float(row[p_col]) - float(result["shape_phase_deg"][k, c])) <= 0.05 + 1e-9


def test_hit_decisions_with_reasons_and_notes(demo_report):
    _, result, checks, _, _, p = demo_report
    (hits,) = p.of("hits")
    head, *rows = hits["rows"]
    assert [int(r[0]) for r in rows] == [int(h) for h in result["hit"].values]
    used = {int(r[0]): r[head.index("Used in fit")] for r in rows}
    assert used == {int(h): ("yes" if a else "no") for h, a in
                    zip(result["hit"].values, result["hit_accepted"].values, strict=True)}
    reason = {int(r[0]): r[head.index("Reason")] for r in rows}
    assert reason[4].startswith("double hit") and reason[6].startswith("clipping")  # demo_truth.json
    notes = " ".join(r[head.index("Notes")] for r in rows)
    assert "of the force range" in notes  # a note, not a warning
    assert all("weak hit" not in r[head.index("Warnings")] for r in rows)


def test_sections_in_order_and_recipe_pretty_printed_last(demo_report):
    *_, recipe, page, p = demo_report
    ids = [s for s in p.sections]
    # written out, not taken from SECTIONS; the demo is not a roving-hammer test: no shapes
    # over nodes
    assert ids == ["analysis", "caution", "modes", "cross-checks", "aside", "shapes", "hits",
                   "figures", "frf", "shape-view", "recipe"]
    data = json.loads(p.pres[0])  # indented JSON, reads back as the recipe
    assert data == recipe.to_dict()
    assert "\n  \"band\": null" in p.pres[0]


def test_extra_sections_by_one_line_each():
    ds = load_demo()
    result, checks = run_recipe(ds, recipe_for(ds))

    def frf_like(records: xr.Dataset, res: xr.Dataset) -> tuple[str, str]:
        return "Frequency response", f"<p>{records.sizes['hit']} hits, {res.sizes['mode']} modes</p>"

    page = report_html(ds, result, checks, extra_sections=[("Site notes", "<p>windy</p>"), frf_like])
    p = Tables()
    p.feed(page)
    assert p.sections[-3:] == ["extra-1", "extra-2", "recipe"]
    assert "<h2>Site notes</h2><p>windy</p>" in page
    assert "<h2>Frequency response</h2><p>8 hits, 4 modes</p>" in page


def test_mode_labels_on_the_spectrum_never_overlap():
    # four modes, three within 8 Hz of one another on a 0-460 Hz axis: labels that share a
    # height must stand at least 7 % of the axis apart (about the width of "mode 1")
    fs = 1024.0
    t = np.arange(1024) / fs
    from modalnb import records_from_arrays

    ds = records_from_arrays(np.exp(-2 * t) * np.sin(2 * np.pi * 100 * t), fs)
    freqs = [100.0, 104.0, 108.0, 300.0]
    res = xr.Dataset({"frequency_hz": ("mode", freqs), "hit_accepted": ("hit", [True])},
                     coords={"mode": [1, 2, 3, 4], "hit": ds["hit"].values})
    fig = _figures(ds, res, None)[0]
    notes = [(a.x, a.y) for a in fig.layout.annotations if str(a.text).startswith("mode")]
    assert sorted(x for x, _ in notes) == freqs
    span = fs / 2
    for i, (x1, y1) in enumerate(notes):
        for x2, y2 in notes[i + 1:]:
            assert y1 != y2 or abs(x1 - x2) >= 0.07 * span


def test_extreme_numbers_keep_fixed_point():
    # a very small damping uncertainty and a frequency uncertainty above 100 Hz (shown in kHz)
    fs = 1024.0
    t = np.arange(1024) / fs
    from modalnb import records_from_arrays

    ds = records_from_arrays(np.exp(-2 * t) * np.sin(2 * np.pi * 40 * t), fs)
    res = xr.Dataset({
        "frequency_hz": ("mode", [40.0, 12345.678]), "frequency_hz_std": ("mode", [4.6e-7, 153.0]),
        "damping_ratio": ("mode", [0.0150561, 0.2]), "damping_ratio_std": ("mode", [4.60263e-9, 0.01]),
        "regime": ("mode", ["underdamped"] * 2), "status": ("mode", ["ok"] * 2),
        "hit_accepted": ("hit", [True]), "hit_reason": ("hit", [""])},
        coords={"mode": [1, 2], "hit": ds["hit"].values, "channel": ds["channel"].values})
    p = Tables()
    p.feed(report_html(ds, res, model=None, analysed_at="2026-01-02T03:04:05+00:00"))
    (table,) = p.of("modes")
    rows = table["rows"][1:]
    assert rows[0][1] == gum_pm(40.0, 4.6e-7)
    assert rows[1][1] == "12.35 ± 0.15 kHz"  # by hand: u = 153 Hz -> 0.15 kHz, value to 0.01 kHz
    assert rows[0][2] == gum_pm(0.0150561, 4.60263e-9, scale=100)
    assert not any(E_NOTATION.search(c) for r in rows for c in r)
    assert math.isclose(float(rows[0][2].split(" ± ")[0]), 1.50561, rel_tol=1e-9)
    assert dict(p.of("titleblock")[0]["rows"])["Analysis date"] == "2026-01-02T03:04:05+00:00"


def test_hit_decision_by_the_user_is_shown_as_theirs():
    # demo_truth.json: hit 4 is the double hit; the user accepts it and rejects hit 2
    ds = load_demo()
    recipe = recipe_for(ds, Recipe(hit_overrides={4: True, 2: False}))
    result, checks = run_recipe(ds, recipe)
    p = Tables()
    p.feed(report_html(ds, result, checks))
    head, *rows = p.of("hits")[0]["rows"]
    by = {int(r[0]): r[head.index("Decision by")] for r in rows}
    used = {int(r[0]): r[head.index("Used in fit")] for r in rows}
    assert by[4] == "you (accepted)" and used[4] == "yes"
    assert by[2] == "you (rejected)" and used[2] == "no"
    assert by[1] == "checks"
    assert {int(r[0]): r[head.index("Reason")] for r in rows}[2] == "rejected by user"
