"""Adding a mode the automatic search missed, and dropping one from the table (issue 5 §1.3).

Truth: closed-form free decays ``A exp(-zeta wn t) cos(wd t)`` written out in
tests/reference_models.py, and the demo campaign's FE truth (demo_truth.json).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from reference_models import free_decay

from modalnb import EstimationError, Recipe, fit_modes, records_from_arrays
from modalnb.demo import load_demo, load_demo_truth

FS = 2048.0


def _weak_second_mode(amplitude: float) -> object:
    t = np.arange(4096) / FS
    rng = np.random.default_rng(2)
    x = free_decay(t, [40.0, 90.0], [0.01, 0.01], [1.0, amplitude]) + 1e-3 * rng.standard_normal(t.size)
    return records_from_arrays(x, FS)


def test_added_mode_is_found_where_the_search_missed_it():
    rec = _weak_second_mode(1.2e-3)  # 90 Hz at about the noise amplitude
    auto = fit_modes(rec, accept=[True])
    assert auto.sizes["mode"] == 1  # the automatic search misses it (below its threshold)
    res = fit_modes(rec, accept=[True], add_modes=[91.0])  # the user's guess, 1 % off
    assert res.sizes["mode"] == 2
    f, s = res["frequency_hz"].values[1], res["frequency_hz_std"].values[1]
    assert abs(f - 90.0) < 3 * s  # the refined pole agrees with the truth within 3 sigma
    # and absolutely: the closed form's 90 Hz within 0.5 %; the mode starts at the noise
    # amplitude and lasts 1/sigma = 0.18 s (16 cycles), so no tighter bound is physical
    assert abs(f - 90.0) < 0.45
    assert "added by the user" in res["status"].values[1]
    assert "added by the user" not in res["status"].values[0]
    assert json.loads(res.attrs["settings"])["add_modes_not_found"] == []
    # the table's recipe replays the edit
    assert Recipe.from_json(res.attrs["recipe"]).add_modes == [91.0]


def test_drop_leaves_the_mode_out_of_the_table_but_in_the_model():
    ds = load_demo()
    truth = [m["frequency_hz"] for m in load_demo_truth()["modes"]]
    full = fit_modes(ds)
    res = fit_modes(ds, drop_modes=[575.0])  # near the third true mode (572.3 Hz)
    np.testing.assert_allclose(res["frequency_hz"].values, [truth[0], truth[1], truth[3]], rtol=1e-5)
    # still in the model: the other modes are the same numbers as without the drop
    np.testing.assert_allclose(res["frequency_hz"].values, full["frequency_hz"].values[[0, 1, 3]],
                               rtol=1e-12)
    with pytest.raises(EstimationError, match="no fitted mode near 800 Hz"):
        fit_modes(ds, drop_modes=[800.0])


def test_mode_edits_replay_through_a_hand_written_recipe(tmp_path):
    # the recipe file written by hand with the json module from the documented keys
    # (modalnb.Recipe: format, version, drop_modes), not by modalnb
    path = tmp_path / "by_hand.recipe.json"
    path.write_text(json.dumps({"format": "modalnb-recipe", "version": 1, "drop_modes": [204.0]}))
    ds = load_demo()
    replayed = fit_modes(ds, recipe=str(path))
    direct = fit_modes(ds, drop_modes=[204.0])  # the same choice as an argument
    truth = [m["frequency_hz"] for m in load_demo_truth()["modes"]]
    assert replayed.sizes["mode"] == 3
    # the mode near 204 Hz is gone; the others are the FE truth (demo_truth.json)
    np.testing.assert_allclose(replayed["frequency_hz"].values, [truth[0], truth[2], truth[3]],
                               rtol=1e-5)
    np.testing.assert_allclose(replayed["frequency_hz"].values, direct["frequency_hz"].values,
                               rtol=1e-12)


def test_bad_mode_edit_values_are_one_line_errors():
    from modalnb.recipe import RecipeError

    with pytest.raises(RecipeError, match="list of frequencies"):
        Recipe(add_modes=["near 90"])
    with pytest.raises(RecipeError, match="positive"):
        Recipe(drop_modes=[-3.0])
    with pytest.raises(EstimationError, match="frequencies in Hz"):
        fit_modes(_weak_second_mode(1e-3), accept=[True], add_modes=["x"])
