"""Two notebooks on one recipe, and provenance of a replay (issue 10, "Nothing lost").

The expected merges are the rule of a three-way merge written out by hand (a change made
on one side only is kept; the same choice changed on both sides is a conflict that is
reported), as version-control systems merge text (common practice), not values from
our code.
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap
import warnings

import pytest
from _guard_support import HANG_GUARD_S, run_cli, small_records, stderr_lines

from modalnb import Analysis, Recipe, fit_modes, load_recipe, records_checksum, run_recipe
from modalnb._errors import OtherRecordsWarning, RecipeConflictWarning
from modalnb.io import save_records
from modalnb.recipe import merge_recipes, recipe_for


# --- the merge rule --------------------------------------------------------------------------
def test_merge_keeps_unrelated_changes_of_both_sides():
    base = Recipe(hit_overrides={1: True}, add_modes=[40.0])
    ours = Recipe(hit_overrides={1: True, 3: False}, add_modes=[40.0, 90.0])
    theirs = Recipe(hit_overrides={}, window=(0.1, 1.0), add_modes=[], n_modes=2)
    merged, conflicts = merge_recipes(base, ours, theirs)
    assert conflicts == []
    # ours added hit 3 and 90 Hz; theirs removed hit 1 and 40 Hz, set window and n_modes
    assert merged.hit_overrides == {3: False}
    assert merged.add_modes == [90.0]
    assert merged.window == (0.1, 1.0) and merged.n_modes == 2


def test_merge_reports_the_same_choice_changed_on_both_sides():
    base = Recipe()
    merged, conflicts = merge_recipes(base, Recipe(hit_overrides={3: True}, n_modes=2),
                                      Recipe(hit_overrides={3: False}, n_modes=4))
    assert merged.hit_overrides == {3: True} and merged.n_modes == 2  # ours wins, and says so
    assert sorted(conflicts) == ["hit 3: here accept, elsewhere reject", "n_modes: here 2, elsewhere 4"]


# --- two Analysis objects in one process ------------------------------------------------
@pytest.fixture()
def records_file(tmp_path):
    return save_records(small_records(), tmp_path / "tap.nc")


def test_two_analyses_on_one_recipe_keep_both_choices(records_file):
    a = Analysis.open(records_file, fit=False)
    b = Analysis.open(records_file, fit=False)
    assert a.recipe_path == b.recipe_path
    assert a.set_hit(2, False)                 # notebook A rejects hit 2
    assert b.set_window(0.05, 1.5)             # notebook B, which never saw that, sets a window
    saved = load_recipe(a.recipe_path)
    assert saved.hit_overrides == {2: False} and saved.window == (0.05, 1.5)
    # B's table includes A's choice (its fit used the merged recipe)
    assert b.recipe == saved and not bool(b.checks["accepted"].sel(hit=2))
    assert b.warning and "another session" in b.warning
    assert a.set_n_modes(1)                    # A, in turn, keeps B's window
    saved = load_recipe(a.recipe_path)
    assert (saved.hit_overrides, saved.window, saved.n_modes) == ({2: False}, (0.05, 1.5), 1)


def test_two_analyses_changing_the_same_choice_warn(records_file):
    a = Analysis.open(records_file, fit=False)
    b = Analysis.open(records_file, fit=False)
    assert a.set_hit(2, False)
    with pytest.warns(RecipeConflictWarning) as caught:
        assert b.set_hit(2, True)
    assert len(caught) == 1
    msg = str(caught[0].message)
    assert "\n" not in msg and "hit 2: here accept, elsewhere reject" in msg
    assert load_recipe(a.recipe_path).hit_overrides == {2: True}


# --- two processes ---------------------------------------------------------------------------
_NOTEBOOK = textwrap.dedent("""
    import sys, warnings
    warnings.simplefilter("default")
    from modalnb import Analysis
    a = Analysis.open(sys.argv[1], fit=False)
    print("open", flush=True)
    for line in sys.stdin:
        cmd = line.split()
        if cmd[0] == "hit":
            ok = a.set_hit(int(cmd[1]), cmd[2] == "accept")
        elif cmd[0] == "window":
            ok = a.set_window(float(cmd[1]), float(cmd[2]))
        print("ok" if ok else "failed " + str(a.error), flush=True)
""")


def _notebook(path):
    return subprocess.Popen([sys.executable, "-c", _NOTEBOOK, str(path)], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _say(proc, line):
    proc.stdin.write(line + "\n")
    proc.stdin.flush()
    return proc.stdout.readline().strip()


def test_two_processes_on_one_recipe_lose_no_choice(records_file):
    a, b = _notebook(records_file), _notebook(records_file)
    try:
        assert a.stdout.readline().strip() == "open" and b.stdout.readline().strip() == "open"
        assert _say(a, "hit 2 reject") == "ok"
        assert _say(b, "window 0.05 1.5") == "ok"
        saved = load_recipe(records_file.with_name("tap.recipe.json"))
        assert saved.hit_overrides == {2: False} and saved.window == (0.05, 1.5)
        # the same choice from both: the later writer says so, in one line
        assert _say(a, "hit 3 reject") == "ok"
        assert _say(b, "hit 3 accept") == "ok"
    finally:
        _, err_a = a.communicate(timeout=HANG_GUARD_S)
        _, err_b = b.communicate(timeout=HANG_GUARD_S)
    assert a.returncode == 0 and b.returncode == 0, err_a + err_b
    conflict = [line for line in err_b.splitlines() if "RecipeConflictWarning" in line]
    assert len(conflict) == 1 and "hit 3: here accept, elsewhere reject" in conflict[0]
    assert "RecipeConflictWarning" not in err_a
    saved = load_recipe(records_file.with_name("tap.recipe.json"))
    assert saved.hit_overrides == {2: False, 3: True} and saved.window == (0.05, 1.5)


# --- provenance of a replay ------------------------------------------------------------------
def test_replay_on_other_records_keeps_the_recipe_checksum_and_warns(tmp_path):
    made_on, other = small_records(seed=0), small_records(seed=1)
    own, new = records_checksum(made_on), records_checksum(other)
    assert own != new
    recipe = recipe_for(made_on, Recipe(n_modes=1))
    assert recipe.records_checksum == own and recipe.replayed_on_checksum is None

    replay = recipe_for(other, recipe)
    assert replay.records_checksum == own and replay.replayed_on_checksum == new

    for call in (lambda: run_recipe(other, recipe)[0], lambda: fit_modes(other, recipe=recipe)):
        with pytest.warns(OtherRecordsWarning, match="made on other records"):
            table = call()
        stored = Recipe.from_json(table.attrs["recipe"])
        assert stored.records_checksum == own and stored.replayed_on_checksum == new

    with pytest.warns(OtherRecordsWarning) as caught:
        a = Analysis(other, recipe)
    assert len(caught) == 1  # said once, not again by each fit
    assert a.recipe.records_checksum == own and a.recipe.replayed_on_checksum == new
    # on its own records: no warning, no mark
    with warnings.catch_warnings():
        warnings.simplefilter("error", OtherRecordsWarning)
        table, _ = run_recipe(made_on, recipe)
    assert Recipe.from_json(table.attrs["recipe"]).replayed_on_checksum is None


def test_cli_replay_on_other_records_keeps_provenance(tmp_path):
    made_on = save_records(small_records(seed=0), tmp_path / "a.nc")
    other = save_records(small_records(seed=1), tmp_path / "b.nc")
    proc = run_cli("fit", str(made_on), "--modes", "1", "--out", str(tmp_path / "oa"), "--quiet",
                   cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    recipe_path = tmp_path / "oa" / "recipe.json"
    proc = run_cli("fit", str(other), "--recipe", str(recipe_path), "--out", str(tmp_path / "ob"),
                   "--quiet", cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    warned = [line for line in stderr_lines(proc) if "other records" in line]
    assert len(warned) == 1 and warned[0].startswith("modalnb: warning:")
    first = json.loads(recipe_path.read_text())
    second = json.loads((tmp_path / "ob" / "recipe.json").read_text())
    assert second["records_checksum"] == first["records_checksum"]
    assert second["replayed_on_checksum"] == records_checksum(small_records(seed=1))
