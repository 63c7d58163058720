"""Replays that do not go through the code they check (issue 8 §6, first bullet).

* A recipe written by hand with the :mod:`json` module from the documented keys
  (``modalnb.recipe``: ``format`` = "modalnb-recipe", ``version`` = 1, ``band``,
  ``window``, ``n_modes``, ``hit_overrides``, ...), replayed by :func:`modalnb.run_recipe`,
  against a direct call of the engine (:class:`modalnb.estimate.SharedPoleFit`) with the
  same choices and hit decisions taken from the demo's own truth file (the generator
  records which hit it clipped and which it struck twice), not from the hit checks.
* The notebook state's export, the export of a state re-opened in a new process (a
  kernel restart), and a headless replay of the autosaved ``<stem>.recipe.json`` in a third
  process: three fresh Python processes (subprocess, nothing shared), compared file by
  file (CSV and JSON text equal, netCDF values equal to the last bit).
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import xarray as xr

from modalnb import run_recipe
from modalnb.checks import check_hits
from modalnb.demo import load_demo, load_demo_truth
from modalnb.estimate import SharedPoleFit, cross_checks
from modalnb.recipe import load_recipe


@pytest.fixture(scope="module")
def demo():
    return load_demo()


def test_hand_written_recipe_equals_a_direct_engine_call(demo, tmp_path):
    truth = load_demo_truth()
    clipped = int(truth["clipped_hit"]["hit"])
    double = int(truth["double_hit"]["hit"])
    # the documented keys, written without modalnb
    path = tmp_path / "hand.recipe.json"
    path.write_text(json.dumps({
        "format": "modalnb-recipe",
        "version": 1,
        "band": [10.0, 1500.0],
        "window": [0.01, 1.5],
        "n_modes": 3,
        "hit_overrides": {str(double): True},  # keep the double hit (its second tap is early)
    }))
    table, checks = run_recipe(demo, load_recipe(path))

    hits = [int(h) for h in demo["hit"].values]
    accept = {h: h != clipped for h in hits}  # the generator's clipped hit is the one left out
    eng = SharedPoleFit(band=(10.0, 1500.0), window=(0.01, 1.5), n_modes=3, accept=accept).fit(demo)
    ref = eng.result_
    assert table["hit_accepted"].values.tolist() == [accept[h] for h in hits]
    for name in ref.data_vars:
        a, b = table[name].values, ref[name].values
        if a.dtype.kind in "fc":
            np.testing.assert_array_equal(a, b, err_msg=name)  # same computation: same bits
        else:
            assert a.tolist() == b.tolist(), name
    for key in ("band", "window", "settings"):
        assert np.all(np.asarray(table.attrs[key]) == np.asarray(ref.attrs[key])), key
    xc = cross_checks(demo, ref)
    for name in xc.data_vars:
        a, b = table[name].values, xc[name].values
        if a.dtype.kind == "f":
            np.testing.assert_array_equal(a, b, err_msg=name)
        else:
            assert a.tolist() == b.tolist(), name
    direct_checks = check_hits(demo, overrides={double: True})
    assert table["hit_reason"].values.tolist() == direct_checks["reason"].values.tolist()
    assert table["hit_warnings"].values.tolist() == direct_checks["warnings"].values.tolist()
    assert checks["accepted"].values.tolist() == direct_checks["accepted"].values.tolist()
    # the table carries the recipe it replays, key for key
    carried = json.loads(table.attrs["recipe"])
    for key, value in json.loads(path.read_text()).items():
        if key == "version":  # a version-1 file is read and carried in the current version
            assert value == 1 and carried[key] == 2, key
            continue
        assert carried[key] == value, key


def _run(code: str, cwd) -> str:
    out = subprocess.run([sys.executable, "-c", textwrap.dedent(code)], cwd=cwd,
                         capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr[-2000:]
    return out.stdout


def _same_files(a, b) -> None:
    names = sorted(p.name for p in a.iterdir())
    assert names == sorted(p.name for p in b.iterdir())
    assert {"modes.csv", "shapes.csv", "hits.csv", "modes.nc", "modes.json", "recipe.json",
            "frf.nc"} <= set(names)
    for name in names:
        if name.endswith(".nc"):
            with xr.open_dataset(a / name) as x, xr.open_dataset(b / name) as y:
                x.load()
                y.load()
            assert set(x.variables) == set(y.variables), name
            for var in x.variables:
                u, v = x[var].values, y[var].values
                if u.dtype.kind in "fc":
                    assert u.shape == v.shape and np.array_equal(u, v, equal_nan=True), var
                else:
                    assert u.tolist() == v.tolist(), var
            # list attributes (frf.nc: hits_used) come back as arrays: compare as lists
            assert ({k: np.asarray(v).tolist() for k, v in x.attrs.items()}
                    == {k: np.asarray(v).tolist() for k, v in y.attrs.items()}), name
        else:
            assert (a / name).read_text(encoding="utf-8") == (b / name).read_text(encoding="utf-8"), name


def test_state_export_restart_and_headless_replay_agree_file_by_file(demo, tmp_path):
    from modalnb.io import save_records

    records = tmp_path / "tap.nc"
    save_records(demo, records)
    # 1) a notebook session: choices, then the export (a preview refit is replaced by a full fit)
    out = _run(f"""
        import json
        from modalnb.session import Analysis
        a = Analysis.open({str(records)!r})
        assert a.set_hit(4, True), a.error
        assert a.set_window(0.02, 1.2), a.error
        assert a.preview
        a.export({str(tmp_path / "state")!r}, report=False)
        print(json.dumps({{"recipe_path": str(a.recipe_path)}}))
    """, tmp_path)
    recipe_path = tmp_path / json.loads(out.strip().splitlines()[-1])["recipe_path"]
    assert recipe_path.name == "tap.recipe.json"
    saved = json.loads(recipe_path.read_text())
    assert saved["window"] == [0.02, 1.2] and saved["hit_overrides"] == {"4": True}
    # 2) a kernel restart: a new process opens the same records and finds the choices again
    out = _run(f"""
        import json
        from modalnb.session import Analysis
        a = Analysis.open({str(records)!r})
        print(json.dumps({{"window": list(a.recipe.window), "overrides": a.recipe.hit_overrides,
                          "error": a.error, "preview": a.preview}}))
        a.export({str(tmp_path / "restart")!r}, report=False)
    """, tmp_path)
    restored = json.loads(out.strip().splitlines()[-1])
    assert restored == {"window": [0.02, 1.2], "overrides": {"4": True}, "error": None,
                        "preview": False}
    # 3) a headless replay of the autosaved recipe on the records, in a third process
    _run(f"""
        from modalnb.io import open_records
        from modalnb.recipe import load_recipe
        from modalnb.pipeline import run_recipe
        from modalnb.export import write_modal_table
        recipe = load_recipe({str(recipe_path)!r})
        rec = open_records({str(records)!r})
        table, checks = run_recipe(rec, recipe)
        # records given: frf.nc too, as the session's export writes it
        write_modal_table(table, {str(tmp_path / "replay")!r}, recipe=recipe, checks=checks,
                          records=rec)
    """, tmp_path)
    _same_files(tmp_path / "state", tmp_path / "replay")
    _same_files(tmp_path / "restart", tmp_path / "replay")
    modes = (tmp_path / "replay" / "modes.csv").read_text().splitlines()
    assert modes[0].startswith("mode,frequency_hz,damping_ratio") and len(modes) >= 3
