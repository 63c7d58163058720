"""The analysis recipe: versioned, human-readable, never misread (issue 4 §1)."""

from __future__ import annotations

import json

import pytest

from modalnb.recipe import RECIPE_VERSION, Recipe, RecipeError, load_recipe, save_recipe


def test_round_trip_file(tmp_path):
    r = Recipe(band=(5.0, 900.0), window=(0.01, 1.5), n_modes=4, hit_overrides={3: False, 5: True},
               check_thresholds={"double_hit_level": 0.2}, source="bay3.nc", notes="left bracket")
    p = save_recipe(r, tmp_path / "recipe.json")
    back = load_recipe(p)
    assert back == r
    data = json.loads(p.read_text())
    assert list(data)[:2] == ["format", "version"] and data["version"] == RECIPE_VERSION
    assert data["hit_overrides"] == {"3": False, "5": True}  # JSON keys are text; labels come back as int
    assert back.hit_overrides == {3: False, 5: True}


def test_save_is_atomic_and_leaves_no_temp(tmp_path):
    p = tmp_path / "recipe.json"
    save_recipe(Recipe(n_modes=2), p)
    save_recipe(Recipe(n_modes=3), p)
    assert load_recipe(p).n_modes == 3
    assert [q.name for q in tmp_path.iterdir()] == ["recipe.json"]


@pytest.mark.parametrize(
    ("data", "match"),
    [
        ({"format": "modalnb-recipe", "version": RECIPE_VERSION + 1}, r"written by a newer modalnb"),
        ({"format": "modalnb-recipe", "version": 0}, r"not a known version"),
        ({"format": "something-else", "version": 1}, r"not a modalnb recipe"),
        ({"format": "modalnb-recipe", "version": "1"}, r"'version' must be an integer"),
        ({"format": "modalnb-recipe", "version": 1, "bands": [1, 2]}, r"unknown recipe key 'bands'.*Did you mean 'band'"),
        ({"format": "modalnb-recipe", "version": 1, "band": [200, 100]}, r"low < high"),
        ({"format": "modalnb-recipe", "version": 1, "n_modes": 0}, r"positive integer"),
        ({"format": "modalnb-recipe", "version": 1, "hit_overrides": {"x": True}}, r"hit labels"),
        ({"format": "modalnb-recipe", "version": 1, "hit_overrides": {"2": "no"}}, r"true or false"),
        ([1, 2], r"must be a JSON object"),
    ],
)
def test_refused_never_misread(tmp_path, data, match):
    p = tmp_path / "r.json"
    p.write_text(json.dumps(data))
    with pytest.raises(RecipeError, match=match) as info:
        load_recipe(p)
    assert str(info.value).startswith(str(p)) and "\n" not in str(info.value)


def test_bad_json_and_missing_file(tmp_path):
    p = tmp_path / "r.json"
    p.write_text("{not json")
    with pytest.raises(RecipeError, match=r"not valid JSON .* line 1"):
        load_recipe(p)
    with pytest.raises(FileNotFoundError):
        load_recipe(tmp_path / "absent.json")


def test_fit_modes_replays_a_recipe_file(tmp_path):
    # fit_modes(records, recipe=FILE) against a direct engine call with the same choices
    # (modalnb.estimate.SharedPoleFit: no recipe, no hit checks), not against run_recipe
    import numpy as np

    from modalnb import EstimationError, fit_modes
    from modalnb.estimate import SharedPoleFit
    from modalnb.records import records_from_arrays
    from modalnb.testing.synth import free_decay

    fs = 1024.0
    t = np.arange(2048) / fs
    rng = np.random.default_rng(5)
    # closed-form free decays (modalnb.testing.synth.free_decay): 25 Hz / 2 %, 3 hits, 2 channels
    clean = np.stack([free_decay(t, 25.0, 0.02, a) for a in (1.0, -0.5)])
    ds = records_from_arrays(np.stack([clean * g for g in (1.0, 0.9, 1.2)])
                             + 1e-3 * rng.standard_normal((3, 2, t.size)), fs)
    recipe = Recipe(window=(0.05, 1.5), hit_overrides={2: False}, check_thresholds={"reject": []})
    path = save_recipe(recipe, tmp_path / "r.json")
    table = fit_modes(ds, recipe=path)
    # no check rejects (reject=[]), the override rejects hit 2
    ref = SharedPoleFit(window=(0.05, 1.5), accept=[True, False, True]).fit(ds).result_
    for name in ("frequency_hz", "damping_ratio", "frequency_hz_std", "shape_amplitude",
                 "residue_real", "hit_residue_imag"):
        np.testing.assert_array_equal(table[name].values, ref[name].values, err_msg=name)
    assert table["hit_accepted"].values.tolist() == [True, False, True]
    # truth 25 Hz (closed form): within 5 reported standard uncertainties and 0.1 %
    f, s = table["frequency_hz"].values[0], table["frequency_hz_std"].values[0]
    assert abs(f - 25.0) < 5 * s + 1e-6 and abs(f - 25.0) < 0.025
    assert Recipe.from_json(table.attrs["recipe"]) == recipe
    with pytest.raises(EstimationError, match="either recipe= or band"):
        fit_modes(ds, band=(1.0, 100.0), recipe=recipe)


def test_version_1_recipe_still_reads(tmp_path):
    # a version-1 file as modalnb 0.1.0 wrote it (its keys, no title/analyst): read as is,
    # written back in the current version with the two new fields empty
    v1 = {"format": "modalnb-recipe", "version": 1, "band": [10.0, 900.0], "window": None,
          "n_modes": 3, "add_modes": [], "drop_modes": [], "hit_overrides": {"4": True},
          "check_thresholds": {}, "correct_exponential_window": True,
          "records_checksum": "sha256:" + "ab" * 32, "replayed_on_checksum": None,
          "source": "bay3.nc", "notes": "left bracket", "created_with": "modalnb 0.1.0"}
    p = tmp_path / "v1.json"
    p.write_text(json.dumps(v1))
    r = load_recipe(p)
    assert (r.band, r.n_modes, r.hit_overrides, r.notes) == ((10.0, 900.0), 3, {4: True}, "left bracket")
    assert (r.title, r.analyst) == ("", "")
    out = json.loads(r.to_json())
    assert out["version"] == RECIPE_VERSION == 2
    assert out["title"] == "" and out["analyst"] == ""


def test_title_block_fields_round_trip_and_are_strict(tmp_path):
    r = Recipe(title="Bay 3 footbridge, deck", analyst="A. Tester", notes="wet deck")
    back = load_recipe(save_recipe(r, tmp_path / "r.json"))
    assert (back.title, back.analyst, back.notes) == ("Bay 3 footbridge, deck", "A. Tester", "wet deck")
    with pytest.raises(RecipeError, match=r"recipe `analyst` must be text"):
        Recipe(analyst=3)
    p = tmp_path / "v1_with_title.json"
    p.write_text(json.dumps({"format": "modalnb-recipe", "version": 1, "title": "x"}))
    with pytest.raises(RecipeError, match=r"'title' is not a version-1 key \(added in version 2\)"):
        load_recipe(p)
