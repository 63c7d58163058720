"""The command-line contract (issues 2 and 4): exit codes, one-line errors, files, replay."""

from __future__ import annotations

import csv
import json
import subprocess
import sys

import numpy as np
import pytest

from modalnb import demo
from modalnb.cli import main
from modalnb.export import HIT_COLUMNS, MODE_COLUMNS, SHAPE_COLUMNS


@pytest.fixture(scope="module")
def demo_file(tmp_path_factory):
    from modalnb.io import save_records

    path = tmp_path_factory.mktemp("rec") / "boom.nc"
    save_records(demo.load_demo(), path)
    return path


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_check_prints_report_with_the_demo_truth(demo_file, capsys):
    assert main(["check", str(demo_file)]) == 0
    out = capsys.readouterr().out
    truth = demo.load_demo_truth()["generator"]["settings"]
    bad = {truth["double_hit"], truth["clipped_hit"]}
    lines = {int(line.split()[0]): line.split()[1] for line in out.splitlines() if line[:3].strip().isdigit()}
    # the generator's own record of which hits are bad (outside the checks) is the reference
    assert {h for h, acc in lines.items() if acc == "no"} == bad


def _write(path, data):
    path.write_bytes(data)
    return path


@pytest.mark.parametrize(
    ("make", "match"),
    [
        (lambda p: p / "absent.nc", "absent.nc"),
        (lambda p: _write(p / "empty.csv", b""), "empty.csv"),
        (lambda p: _write(p / "junk.nc", b"\x89HDF\r\n\x1a\nnot really"), "junk.nc"),
        (lambda p: _write(p / "notes.docx", b"x"), "notes.docx"),
    ],
)
def test_bad_input_one_line_no_traceback(tmp_path, make, match):
    path = make(tmp_path)
    proc = subprocess.run([sys.executable, "-m", "modalnb.cli", "check", str(path)],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert match in lines[0] and "Traceback" not in proc.stderr
    assert lines[0].startswith("modalnb: error: ")


def test_debug_flag_shows_traceback(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "modalnb.cli", "--debug", "check", str(tmp_path / "x.nc")],
                          capture_output=True, text=True)
    assert proc.returncode != 0 and "Traceback" in proc.stderr


def _numbers(rows, cols):
    return np.array([[float(r[c]) for c in cols] for r in rows])


@pytest.fixture(scope="module")
def fitted(demo_file, tmp_path_factory):
    out = tmp_path_factory.mktemp("fit") / "out"
    assert main(["fit", str(demo_file), "--out", str(out), "--quiet"]) == 0
    return out


def test_fit_writes_the_contract(fitted):
    names = {p.name for p in fitted.iterdir()}
    assert {"modes.csv", "shapes.csv", "hits.csv", "modes.nc", "modes.json", "recipe.json", "report.html"} <= names
    with open(fitted / "modes.csv", newline="") as fh:
        header = next(csv.reader(fh))
    assert tuple(header[:6]) == MODE_COLUMNS
    with open(fitted / "shapes.csv", newline="") as fh:
        assert tuple(next(csv.reader(fh))[:4]) == SHAPE_COLUMNS
    hits = _rows(fitted / "hits.csv")
    assert tuple(hits[0])[:5] == HIT_COLUMNS
    assert {r["accepted"] for r in hits} <= {"true", "false"}
    assert not any(p.name.endswith(".tmp") for p in fitted.iterdir())


def test_recipe_replay_identical_and_edit_changes_exactly_that(demo_file, fitted, tmp_path):
    out2 = tmp_path / "replay"
    assert main(["fit", str(demo_file), "--out", str(out2), "--recipe", str(fitted / "recipe.json"), "--quiet"]) == 0
    cols = ["frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std"]
    a, b = _numbers(_rows(fitted / "modes.csv"), cols), _numbers(_rows(out2 / "modes.csv"), cols)
    np.testing.assert_allclose(b, a, rtol=1e-12, atol=0)
    assert [r["regime"] for r in _rows(out2 / "modes.csv")] == [r["regime"] for r in _rows(fitted / "modes.csv")]
    # a colleague rejects one more hit in the recipe: exactly that decision changes
    recipe = json.loads((fitted / "recipe.json").read_text())
    first_ok = next(r["hit"] for r in _rows(fitted / "hits.csv") if r["accepted"] == "true")
    recipe["hit_overrides"] = {**recipe["hit_overrides"], first_ok: False}
    edited = tmp_path / "edited.json"
    edited.write_text(json.dumps(recipe))
    out3 = tmp_path / "edited"
    assert main(["fit", str(demo_file), "--out", str(out3), "--recipe", str(edited), "--quiet"]) == 0
    before = {r["hit"]: r["accepted"] for r in _rows(fitted / "hits.csv")}
    after = {r["hit"]: r["accepted"] for r in _rows(out3 / "hits.csv")}
    assert {h for h in before if before[h] != after[h]} == {first_ok}
    assert after[first_ok] == "false"
    assert json.loads((out3 / "recipe.json").read_text())["hit_overrides"][first_ok] is False


def test_fit_bad_band_one_line(demo_file, tmp_path, capsys):
    assert main(["fit", str(demo_file), "--out", str(tmp_path / "o"), "--band", "500", "100", "--quiet"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "band" in err[0]


def test_fit_title_block_options_land_in_recipe_and_report(demo_file, tmp_path):
    out = tmp_path / "titled"
    assert main(["fit", str(demo_file), "--out", str(out), "--quiet", "--title", "Heron boom, bench",
                 "--analyst", "J. Tester", "--notes", "steel tip"]) == 0
    recipe = json.loads((out / "recipe.json").read_text())
    assert (recipe["title"], recipe["analyst"], recipe["notes"]) == ("Heron boom, bench", "J. Tester", "steel tip")
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "<title>Heron boom, bench</title>" in page
    assert "<th scope=row>Analyst</th><td>J. Tester</td>" in page
    assert f"<th scope=row>Records</th><td>{demo_file}</td>" in page
    digest = recipe["records_checksum"].split(":")[1]
    assert f"sha256:{digest[:12]}</td>" in page
    # the replay of that recipe keeps the title block
    again = tmp_path / "again"
    assert main(["fit", str(demo_file), "--out", str(again), "--quiet", "--recipe", str(out / "recipe.json")]) == 0
    assert json.loads((again / "recipe.json").read_text())["analyst"] == "J. Tester"
