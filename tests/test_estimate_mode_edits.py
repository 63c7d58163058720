"""Adding a mode the automatic search missed, and dropping one from the table (issue 5 §1.3).

Truth: closed-form free decays (modalnb.synth.free_decay) with known frequencies, and the
demo campaign's FE truth (demo_truth.json).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from modalnb import EstimationError, Recipe, fit_modes, run_recipe
from modalnb.demo import load_demo, load_demo_truth
from modalnb.records import records_from_arrays
from modalnb.synth import free_decay

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


def test_mode_edits_replay_through_the_recipe():
    ds = load_demo()
    recipe = Recipe(drop_modes=[204.0])
    a = run_recipe(ds, recipe)[0]
    b = fit_modes(ds, recipe=Recipe.from_json(recipe.to_json()))
    assert a.sizes["mode"] == 3
    np.testing.assert_allclose(a["frequency_hz"].values, b["frequency_hz"].values, rtol=1e-12)


def test_bad_mode_edit_values_are_one_line_errors():
    from modalnb.recipe import RecipeError

    with pytest.raises(RecipeError, match="list of frequencies"):
        Recipe(add_modes=["near 90"])
    with pytest.raises(RecipeError, match="positive"):
        Recipe(drop_modes=[-3.0])
    with pytest.raises(EstimationError, match="frequencies in Hz"):
        fit_modes(_weak_second_mode(1e-3), accept=[True], add_modes=["x"])
