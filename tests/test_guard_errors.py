"""Bad recipes, options and outputs end in one line (issue 10, "Crashes instead of one line").

Each test reproduces one probe of the issue; the expected outcome is the issue's wording
(a ModalnbError subclass, one line naming the field, a did-you-mean, exit code 2).
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path

import pytest
from _guard_support import run_cli, small_records, stderr_lines

import modalnb
from modalnb import (
    Analysis,
    ModalnbError,
    OptionError,
    Recipe,
    RecipeError,
    RecipeFileNotFoundError,
    check_hits,
    fit_modes,
    load_recipe,
)
from modalnb._errors import RecipeAutosaveWarning
from modalnb.io import save_records


def _recipe_file(tmp_path: Path, body: str) -> Path:
    p = tmp_path / "r.recipe.json"
    p.write_text('{"format": "modalnb-recipe", "version": 1, ' + body + "}")
    return p


@pytest.fixture(scope="module")
def records():
    return small_records()


@pytest.fixture()
def records_file(tmp_path, records):
    return save_records(records, tmp_path / "tap.nc")


# --- check_thresholds in recipes and in check_hits --------------------------------------
def test_recipe_threshold_of_wrong_type_is_one_line_recipe_error(tmp_path):
    p = _recipe_file(tmp_path, '"check_thresholds": {"double_hit_level": "high"}')
    with pytest.raises(RecipeError) as info:
        load_recipe(p)
    msg = str(info.value)
    assert "\n" not in msg and str(p) in msg and "double_hit_level" in msg and "'high'" in msg


def test_recipe_unknown_threshold_has_did_you_mean(tmp_path):
    p = _recipe_file(tmp_path, '"check_thresholds": {"clip_levl": 0.9}')
    with pytest.raises(RecipeError, match=r"unknown threshold 'clip_levl'\. Did you mean 'clip_level'\?"):
        load_recipe(p)
    with pytest.raises(RecipeError, match="check_thresholds"):
        Recipe(check_thresholds={"double_hit_level": True})  # a bool is not a level


def test_check_hits_unknown_keyword_is_option_error(records):
    with pytest.raises(OptionError, match="no_such") as info:
        check_hits(records, no_such=1)
    assert isinstance(info.value, ModalnbError) and "\n" not in str(info.value)
    with pytest.raises(OptionError, match="Did you mean 'double_hit_level'"):
        check_hits(records, double_hit_levl=0.2)
    with pytest.raises(OptionError, match="double_hit_level.*'high'"):
        check_hits(records, double_hit_level="high")
    with pytest.raises(OptionError, match="overrides"):
        check_hits(records, overrides=[1, 2])


def test_cli_bad_threshold_in_recipe_exit_2_one_line(tmp_path, records_file):
    p = _recipe_file(tmp_path, '"check_thresholds": {"double_hit_level": "high"}')
    proc = run_cli("fit", str(records_file), "--recipe", str(p), "--out", str(tmp_path / "o"),
                   cwd=tmp_path)
    lines = stderr_lines(proc)
    assert proc.returncode == 2
    assert lines[-1].startswith("modalnb: error:") and "double_hit_level" in lines[-1]
    assert "Traceback" not in proc.stderr and not (tmp_path / "o").exists()


# --- outputs checked before the work ------------------------------------------------------
def test_cli_out_is_an_existing_file_is_refused_before_reading(tmp_path, records_file):
    target = tmp_path / "taken.txt"
    target.write_text("mine")
    proc = run_cli("fit", str(records_file), "--out", str(target), cwd=tmp_path)
    assert proc.returncode == 2
    # exactly one line: no progress line ("reading records..."), so no work was done
    assert stderr_lines(proc) == [f"modalnb: error: --out {target}: is an existing file, not a "
                                  "folder. Hint: give a folder name (created if missing)."]
    assert target.read_text() == "mine"
    proc = run_cli("fit", str(records_file), "--out", str(target / "sub"), cwd=tmp_path)
    assert proc.returncode == 2 and len(stderr_lines(proc)) == 1


# --- recipe paths that cannot be read or written --------------------------------------------
def test_open_with_a_folder_in_the_recipe_place_opens_and_offers_a_path(tmp_path, records_file):
    (tmp_path / "tap.recipe.json").mkdir()
    with pytest.warns(RecipeAutosaveWarning) as caught:
        a = Analysis.open(records_file, fit=False)
    msg = str(caught[0].message)
    assert "\n" not in msg and "folder" in msg and "autosave_to" in msg
    assert a.recipe_path is None and a.warning == msg
    other = tmp_path / "elsewhere.recipe.json"
    assert a.autosave_to(other) == other
    assert load_recipe(other) == a.recipe and a.recipe_path == other


def test_open_with_an_unreadable_recipe_opens_without_autosave(tmp_path, records_file, monkeypatch):
    # tests may run as root, who reads everything: the permission is simulated (os.access)
    import os

    import modalnb.session as session

    path = tmp_path / "tap.recipe.json"
    path.write_text(Recipe(n_modes=1).to_json())
    real = os.access
    monkeypatch.setattr(session.os, "access",
                        lambda p, mode: False if Path(p) == path and mode & os.R_OK else real(p, mode))
    with pytest.warns(RecipeAutosaveWarning, match="cannot be read"):
        a = Analysis.open(records_file, fit=False)
    assert a.recipe_path is None and a.recipe.n_modes is None  # not read, not overwritten
    assert load_recipe(path).n_modes == 1


def test_a_recipe_that_cannot_be_written_does_not_stop_the_analysis(tmp_path, records_file,
                                                                     monkeypatch):
    import modalnb.session as session

    a = Analysis.open(records_file, fit=False)
    assert a.recipe_path == tmp_path / "tap.recipe.json"

    def refuse(path, text):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(session, "atomic_write_text", refuse)
    with pytest.warns(RecipeAutosaveWarning, match="cannot be written"):
        assert a.set_n_modes(1)
    assert a.result is not None and a.recipe.n_modes == 1 and a.recipe_path is None


# --- non-finite numbers ---------------------------------------------------------------------
@pytest.mark.parametrize("body", ['"window": [0.01, 1e400]', '"window": [0.01, Infinity]',
                                  '"band": [NaN, 10]', '"check_thresholds": {"min_snr_db": -1e999}',
                                  '"add_modes": [1e400]'])
def test_non_finite_recipe_values_are_one_line_errors(tmp_path, body):
    p = _recipe_file(tmp_path, body)
    with pytest.raises(RecipeError) as info:
        load_recipe(p)
    assert "\n" not in str(info.value) and str(p) in str(info.value)


def test_recipes_are_strict_json():
    r = Recipe(window=(0.01, 1.0))
    object.__setattr__(r, "window", (0.01, float("inf")))  # bypassing the checks on purpose
    with pytest.raises(RecipeError, match="non-finite"):
        r.to_json()
    # the standard library's strict parser (no NaN/Infinity) reads what is written
    json.loads(Recipe(window=(0.01, 1.0)).to_json(),
               parse_constant=lambda c: pytest.fail(f"{c} in a recipe"))


# --- missing recipe, --modes 2.5, errors naming the records --------------------------------
def test_missing_recipe_file_is_both_modalnb_and_file_not_found_error(tmp_path, records):
    for call in (lambda: load_recipe(tmp_path / "no.json"),
                 lambda: fit_modes(records, recipe=tmp_path / "no.json"),
                 lambda: modalnb.ModeFit.from_recipe(tmp_path / "no.json")):
        with pytest.raises(RecipeFileNotFoundError) as info:
            call()
        assert isinstance(info.value, FileNotFoundError) and isinstance(info.value, ModalnbError)
        assert "no.json" in str(info.value)


def test_cli_bad_option_value_is_one_line(tmp_path, records_file):
    proc = run_cli("fit", str(records_file), "--modes", "2.5", "--out", str(tmp_path / "o"),
                   cwd=tmp_path)
    assert proc.returncode == 2
    assert stderr_lines(proc) == ["modalnb fit: error: argument --modes: invalid int value: "
                                  "'2.5' (see modalnb fit --help)"]
    proc = run_cli("fit", str(records_file), "--threshold", "clip_level", "--out",
                   str(tmp_path / "o"), cwd=tmp_path)
    assert proc.returncode == 2 and len(stderr_lines(proc)) == 1 and "NAME=VALUE" in proc.stderr


def test_cli_estimation_error_names_the_records_file(tmp_path, records_file):
    # a window that holds no samples of the records (they end at 1.75 s)
    proc = run_cli("fit", str(records_file), "--window", "5", "6", "--out", str(tmp_path / "o"),
                   "--quiet", cwd=tmp_path)
    lines = stderr_lines(proc)
    assert proc.returncode == 2 and len(lines) == 1
    assert lines[0].startswith(f"modalnb: error: {records_file}: ")


def test_cli_every_hit_rejected_names_the_check_and_a_cli_option(tmp_path, records_file):
    # clip_level 0.01: every response exceeds 1 % of the full scale (2; peaks near 1.1),
    # so the clipping check rejects every hit (clipping.py: |x| >= clip_level * full scale)
    proc = run_cli("fit", str(records_file), "--threshold", "clip_level=0.01", "--out",
                   str(tmp_path / "o"), "--quiet", cwd=tmp_path)
    lines = stderr_lines(proc)
    assert proc.returncode == 2 and len(lines) == 1, proc.stderr
    assert "clipping" in lines[0] and "--accept-hit" in lines[0] and "--threshold clip_level=" in lines[0]
    assert "accept=" not in lines[0] and "caller" not in lines[0]
    # the way out it names works: accepting one hit gives a table
    proc = run_cli("fit", str(records_file), "--threshold", "clip_level=0.01", "--accept-hit", "1",
                   "--out", str(tmp_path / "o"), "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    saved = load_recipe(tmp_path / "o" / "recipe.json")
    assert saved.hit_overrides == {1: True} and saved.check_thresholds == {"clip_level": 0.01}


def test_api_every_hit_rejected_names_the_check(records):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(modalnb.NoAcceptedHitsError, match=r"clipping: 3 hits") as info:
            fit_modes(records, check_thresholds={"clip_level": 0.01})
    assert info.value.rejected_by == {"clipping": 3} and "check_thresholds" in str(info.value)


def test_open_with_a_broken_recipe_opens_and_leaves_it_alone(tmp_path, records_file):
    path = tmp_path / "tap.recipe.json"
    path.write_text('{"format": "modalnb-recipe", "version": 1, "window": [0.01, 1e400]}')
    with pytest.warns(RecipeAutosaveWarning, match="finite") as caught:
        a = Analysis.open(records_file, fit=False)
    assert "\n" not in str(caught[0].message) and a.recipe_path is None
    assert a.set_n_modes(1)
    assert "1e400" in path.read_text()  # the user's file is never overwritten


@pytest.mark.parametrize("body", ['"window": "12"', '"band": "19"', '"add_modes": "42"',
                                  '"hit_overrides": [1, 2]', '"notes": 5', '"source": ["a"]'])
def test_recipe_values_of_the_wrong_shape_are_refused_not_reinterpreted(tmp_path, body):
    # a text of digits is not a list of numbers (it used to be read digit by digit)
    with pytest.raises(RecipeError) as info:
        load_recipe(_recipe_file(tmp_path, body))
    assert "\n" not in str(info.value)
