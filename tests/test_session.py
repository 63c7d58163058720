"""Tests of modalnb.session.Analysis (the headless state behind the notebook panels).

What is checked against what:

* replay contract (issue 5 §1, §3): the state's result equals ``run_recipe(records,
  recipe)`` of its own recipe to 1e-12, after every kind of change and after re-opening
  (the two share the fitting layer, so this checks the state's recipe bookkeeping; the
  independent replays, a hand-written recipe and fresh processes, are in
  tests/test_replay_independent.py);
* autosave: the file on disk, read back by :func:`modalnb.recipe.load_recipe`, is the
  state's recipe; a failed refit leaves result, recipe and file untouched;
* the demo campaign's truth (modalnb/data/demo_truth.json, generated from an FE model by
  modalnb.demo): mode 1 within the reported uncertainty ;
* MAC (Allemang & Brown 1982) and the fixed-pole least-squares model against closed forms.

The state is driven by the real estimator (``modalnb.ModeFit``) on the demo campaign.
"""

from __future__ import annotations

import csv
import json
import subprocess
import sys

import numpy as np
import pytest

import modalnb.session as session_mod
from modalnb._errors import ModalnbError
from modalnb.demo import load_demo, load_demo_truth
from modalnb.estimate import mac
from modalnb.estimate._model import refit_model
from modalnb.io import save_records
from modalnb.pipeline import run_recipe
from modalnb.recipe import Recipe, load_recipe
from modalnb.session import Analysis, default_recipe_path


@pytest.fixture(scope="module")
def demo():
    return load_demo()


def assert_same_result(a, b):
    """Every numeric variable equal to 1e-12 (relative), every text variable equal."""
    assert set(a.data_vars) == set(b.data_vars)
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if np.issubdtype(x.dtype, np.number) and x.dtype != bool:
            np.testing.assert_allclose(x, y, rtol=1e-12, atol=0, err_msg=name)
        else:
            assert x.tolist() == y.tolist(), name


def test_replay_equals_run_recipe(demo, tmp_path):
    recipe = Recipe(window=(0.01, 1.2), hit_overrides={4: True})
    a = Analysis(demo, recipe, recipe_path=tmp_path / "r.json")
    ref, checks = run_recipe(demo, a.recipe)  # contract: the headless path (issue 5 §1)
    assert a.error is None
    assert_same_result(a.result, ref)
    assert a.checks["accepted"].values.tolist() == checks["accepted"].values.tolist()


def test_window_change_updates_recipe_file_and_result(demo, tmp_path):
    path = tmp_path / "tap.recipe.json"
    a = Analysis(demo, recipe_path=path)
    before = a.result["damping_ratio"].values.copy()
    assert a.set_window(0.02, 0.6)
    assert a.recipe.window == (0.02, 0.6)
    assert load_recipe(path) == a.recipe  # autosaved, read back by the recipe reader
    assert a.fit_window() == (0.02, 0.6)
    # a window change alone is the estimator's fast refit (a preview): it converges to the
    # replay's optimum (far inside the reported uncertainty), and a full refit is the replay
    ref = run_recipe(demo, a.recipe)[0]
    assert a.preview
    np.testing.assert_allclose(a.result["frequency_hz"].values, ref["frequency_hz"].values, rtol=1e-6)
    np.testing.assert_allclose(a.result["damping_ratio"].values, ref["damping_ratio"].values, rtol=1e-4)
    assert a.refit() and not a.preview
    assert_same_result(a.result, ref)
    # a shorter window of a damped record gives a different damping estimate
    assert not np.allclose(a.result["damping_ratio"].values[: before.size], before[: a.result.sizes["mode"]],
                           rtol=1e-9)


def test_failed_refit_keeps_previous_result(demo, tmp_path):
    path = tmp_path / "r.json"
    a = Analysis(demo, recipe_path=path)
    good, recipe, text = a.result, a.recipe, path.read_text()
    events = []
    a.subscribe(lambda ev, s: events.append(ev))
    assert a.set_window(0.01, 0.0105) is False  # a few samples: no fit possible
    assert a.result is good and a.recipe == recipe
    assert path.read_text() == text
    assert a.error and "\n" not in a.error
    assert events == ["busy", "error"]
    assert a.set_window(0.01, 1.0)  # the next good choice clears the error
    assert a.error is None and events[-1] == "result"


def test_bad_window_values_are_one_line_errors(demo):
    a = Analysis(demo)
    assert a.set_window(0.5, 0.1) is False  # low >= high: refused by the recipe
    assert "low < high" in a.error and "\n" not in a.error
    assert a.set_band("ten", 100.0) is False and "must be a pair (low, high)" in a.error


def test_reject_and_accept_hits_go_into_recipe(demo, tmp_path):
    a = Analysis(demo, recipe_path=tmp_path / "r.json")
    auto = dict(zip(a.checks["hit"].values.tolist(), a.checks["accepted"].values.tolist(), strict=True))
    # the demo truth says hit 4 is a double hit and hit 6 clips (demo_truth.json)
    truth = load_demo_truth()
    assert auto[truth["double_hit"]["hit"]] is False and auto[truth["clipped_hit"]["hit"]] is False
    n_before = len(a.accepted_hits())
    assert a.set_hit(2, False)
    assert a.recipe.hit_overrides == {2: False}
    assert len(a.accepted_hits()) == n_before - 1
    assert a.result["hit_accepted"].sel(hit=2).item() is False
    assert load_recipe(tmp_path / "r.json").hit_overrides == {2: False}
    assert a.set_hit(2, None)
    assert a.recipe.hit_overrides == {}
    assert len(a.accepted_hits()) == n_before
    assert a.set_hit(99, True) is False and "hit 99" in a.error


def test_band_and_modes_and_reset(demo):
    a = Analysis(demo)
    assert a.set_band(20.0, 400.0)
    f = a.result["frequency_hz"].values
    assert np.all((f >= 20.0) & (f <= 400.0))  # only modes inside the band (issue 3 §1)
    assert a.set_n_modes(1) and a.result.sizes["mode"] == 1
    assert a.reset()
    assert a.recipe.band is None and a.recipe.n_modes is None


def test_add_and_drop_modes_go_into_recipe_and_replay(demo, tmp_path):
    a = Analysis(demo, recipe_path=tmp_path / "r.json")
    assert a.drop_mode(205.0)  # demo truth: mode 2 at 204.4 Hz
    assert a.recipe.drop_modes == [205.0] and a.result.sizes["mode"] == 3
    assert_same_result(a.result, run_recipe(demo, a.recipe)[0])
    assert load_recipe(tmp_path / "r.json").drop_modes == [205.0]
    assert a.add_mode(205.0)  # adding where a drop was replaces the drop
    assert a.recipe.drop_modes == [] and a.recipe.add_modes == [205.0]
    assert a.result.sizes["mode"] == 4  # the mode is there already: no duplicate
    assert a.add_mode("ninety") is False and "\n" not in a.error and "between 0 and" in a.error
    assert a.clear_mode_edits() and a.recipe.add_modes == [] == a.recipe.drop_modes


def test_open_restores_choices_after_restart(demo, tmp_path):
    path = save_records(demo, tmp_path / "tap.nc")
    a = Analysis.open(path)
    assert a.recipe_path == default_recipe_path(path) == tmp_path / "tap.recipe.json"
    a.set_window(0.015, 0.9)
    a.set_hit(3, False)
    table = a.result
    del a  # "kernel restart": a new state from the files only
    b = Analysis.open(path)
    assert b.recipe.window == (0.015, 0.9) and b.recipe.hit_overrides == {3: False}
    assert_same_result(b.result, table)


def test_open_warns_on_other_records(demo, tmp_path):
    recipe = Recipe(records_checksum="sha256:" + "0" * 64)
    a = Analysis(demo, recipe, fit=False)
    assert a.warning and "other records" in a.warning


def test_subscribe_and_unsubscribe(demo):
    a = Analysis(demo, fit=False)
    seen = []
    stop = a.subscribe(lambda ev, s: seen.append((ev, s.busy)))
    assert a.refit()
    assert seen == [("busy", "fitting modes"), ("result", None)]
    stop()
    a.refit()
    assert len(seen) == 2


def test_export_files_hold_the_result(demo, tmp_path):
    a = Analysis(demo)
    files = a.export(tmp_path / "out")
    for name in ("modes.csv", "shapes.csv", "hits.csv", "modes.nc", "modes.json", "recipe.json", "report.html"):
        assert files[name].is_file(), name
    with open(files["modes.csv"], newline="") as fh:  # read back with the stdlib csv reader
        rows = list(csv.DictReader(fh))
    np.testing.assert_allclose([float(r["frequency_hz"]) for r in rows], a.result["frequency_hz"].values,
                               rtol=1e-12)
    assert json.loads(files["recipe.json"].read_text())["window"] == (
        list(a.recipe.window) if a.recipe.window else None)
    with pytest.raises(ModalnbError, match="recipe path"):
        a.save_recipe()


def test_mac_closed_forms():
    rng = np.random.default_rng(7)
    v = rng.normal(size=6) + 1j * rng.normal(size=6)
    # MAC definition (Allemang & Brown 1982): invariant to complex scaling, 0 for orthogonal
    assert mac(v, (2 - 3j) * v) == pytest.approx(1.0, abs=1e-12)
    assert mac([1, 1j], [1, -1j]) == pytest.approx(0.0, abs=1e-15)  # a^H b = 1 + (-j)(-j) = 0
    # |a.b|^2/(|a|^2|b|^2) for real vectors is cos^2 of the angle between them: 45 deg -> 0.5
    assert mac([1, 0], [1, 1]) == pytest.approx(0.5, abs=1e-15)


def test_refit_model_recovers_closed_form_amplitudes():
    # closed form: x(t) = c + sum_k e^(-s_k t)(a_k cos wd_k t + b_k sin wd_k t); noise free,
    # the fixed-pole least-squares model must reproduce it (linear least squares is exact)
    t = np.arange(2000) / 2000.0
    lam = np.array([-3 + 2j * np.pi * 31, -8 + 2j * np.pi * 170])
    x = 0.2 + np.exp(-3 * t) * (1.0 * np.cos(2 * np.pi * 31 * t) - 0.4 * np.sin(2 * np.pi * 31 * t)) + \
        np.exp(-8 * t) * (0.3 * np.sin(2 * np.pi * 170 * t))
    m, coef = refit_model(t, x[None], lam)
    np.testing.assert_allclose(m[0], x, atol=1e-10)
    np.testing.assert_allclose(coef[0], [0.2, 1.0, -0.4, 0.0, 0.3], atol=1e-9)


def test_demo_mode1_matches_truth(demo):
    a = Analysis(demo)
    f_true = load_demo_truth()["modes"][0]["frequency_hz"]  # FE model value (demo_truth.json)
    f, s = a.result["frequency_hz"].values[0], a.result["frequency_hz_std"].values[0]
    assert abs(f - f_true) <= 3 * s + 1e-9  # within 3 reported standard uncertainties


def test_session_imports_no_widgets():
    code = ("import sys, modalnb.session\n"
            "print([m for m in ('ipywidgets', 'plotly', 'anywidget') if m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_window_change_uses_fast_refit_and_export_a_full_fit(demo, tmp_path, monkeypatch):
    calls = []
    cls = session_mod.ModeFit

    class Spy(cls):
        def fit(self, records):
            calls.append("fit")
            return super().fit(records)

        def refit(self, window=None, accept=None):
            calls.append("refit")
            return super().refit(window=window, accept=accept)

    monkeypatch.setattr(session_mod, "ModeFit", Spy)
    a = Analysis(demo)
    a.set_window(0.02, 0.9)  # the first explicit window: the estimator is kept from the start fit
    a.set_window(0.03, 0.9)
    assert calls == ["fit", "refit", "refit"] and a.preview
    a.set_hit(2, False)  # other hits: a full fit
    assert calls[-1] == "fit" and not a.preview
    a.set_window(0.04, 0.9)
    assert a.preview
    a.export(tmp_path / "out", report=False)
    assert not a.preview and calls[-1] == "fit"
    # what was exported is the replay of the recipe (issue 5 §3)
    assert_same_result(a.result, run_recipe(demo, a.recipe)[0])


def test_real_estimator_on_small_records():
    from modalnb.records import records_from_arrays
    from modalnb.testing.synth import free_decay

    # closed-form free decays, 40 Hz / 1 % and 90 Hz / 2 % (modalnb.testing.synth.free_decay)
    fs = 2048.0
    t = np.arange(4096) / fs
    rng = np.random.default_rng(11)
    x = np.stack([free_decay(t, [40.0, 90.0], [0.01, 0.02], [a, 0.5]) for a in (1.0, -0.7, 0.3)])
    hits = np.stack([x, 1.1 * x]) + 1e-3 * rng.standard_normal((2, *x.shape))
    a = Analysis(records_from_arrays(hits, fs), Recipe(check_thresholds={"reject": []}))
    assert a.error is None, a.error
    np.testing.assert_allclose(a.result["frequency_hz"].values, [40.0, 90.0], rtol=1e-3)
    np.testing.assert_allclose(a.result["damping_ratio"].values, [0.01, 0.02], rtol=0.05)
    order, freq, stable = a.stabilisation()
    assert order.size == freq.size == stable.size > 0 and stable.any()
    assert np.min(np.abs(freq[stable] - 40.0)) < 0.4  # a stable column at mode 1
    assert a.set_window(0.1, 1.5) and a.preview  # the engine's fast refit
    np.testing.assert_allclose(a.result["frequency_hz"].values, [40.0, 90.0], rtol=1e-3)


def test_export_title_block_is_kept_in_the_recipe(demo, tmp_path):
    a = Analysis(demo, recipe_path=tmp_path / "boom.recipe.json")
    files = a.export(tmp_path / "out", title="Heron boom", analyst="J. Tester", notes="dry")
    on_disk = json.loads((tmp_path / "boom.recipe.json").read_text())  # autosaved with the choices
    written = json.loads(files["recipe.json"].read_text())
    for data in (on_disk, written):
        assert (data["title"], data["analyst"], data["notes"]) == ("Heron boom", "J. Tester", "dry")
    page = files["report.html"].read_text(encoding="utf-8")
    assert "<h1>Heron boom</h1>" in page and "<td>J. Tester</td>" in page
    a.export(tmp_path / "out2", table=False)  # None keeps the recipe's
    assert "<h1>Heron boom</h1>" in (tmp_path / "out2" / "report.html").read_text(encoding="utf-8")
