"""One modal table (issue 8 §2): fit_modes, ModeFit, run_recipe and the notebook state give
the same variables and the same numbers for the same choices.

Besides the equality of the four, each table is checked for the variables whose absence
was the defect (``hit_warnings`` in ``fit_modes``, the ``xcheck_*`` cross-checks in
``ModeFit``), and the synthetic case against its closed-form truth (two modes at 40 Hz /
1 % and 90 Hz / 2 %, ``modalnb.testing.synth.free_decay``: x(t) = sum A e^{-zeta w t} cos(wd t)).
"""

from __future__ import annotations

import numpy as np
import pytest

from modalnb import ModeFit, Recipe, fit_modes, records_from_arrays, run_recipe
from modalnb.demo import load_demo
from modalnb.session import Analysis
from modalnb.testing.synth import free_decay

NEEDED = {"hit_accepted", "hit_reason", "hit_warnings", "xcheck_log_decrement_damping",
          "xcheck_half_power_damping", "xcheck_hilbert_damping", "xcheck_note",
          "frequency_hz", "damping_ratio", "frequency_hz_std", "shape_amplitude"}


def assert_same_table(a, b, label):
    assert set(a.data_vars) == set(b.data_vars), label
    assert NEEDED <= set(a.data_vars), label
    for name in a.data_vars:
        x, y = a[name].values, b[name].values
        if x.dtype.kind in "fc":
            assert x.shape == y.shape and np.array_equal(x, y, equal_nan=True), f"{label}: {name}"
        else:
            assert x.tolist() == y.tolist(), f"{label}: {name}"
    for key in ("band", "window", "settings", "input_checksum", "modalnb_version"):
        assert np.all(np.asarray(a.attrs[key]) == np.asarray(b.attrs[key])), f"{label}: {key}"


def four_tables(records, recipe: Recipe, **choices):
    direct = fit_modes(records, **choices)
    est = ModeFit(**choices).fit(records).result_
    replay = run_recipe(records, recipe)[0]
    state = Analysis(records, recipe).result
    return direct, est, replay, state


def test_demo_campaign_one_table():
    ds = load_demo()
    tables = four_tables(ds, Recipe(n_modes=3), n_modes=3)
    for label, t in zip(("ModeFit", "run_recipe", "Analysis"), tables[1:], strict=True):
        assert_same_table(tables[0], t, label)
    # the demo's clipped hit (6) and double hit (4) are rejected by the checks, with reasons
    acc = dict(zip(tables[0]["hit"].values.tolist(), tables[0]["hit_accepted"].values.tolist(),
                   strict=True))
    assert not acc[4] and not acc[6] and sum(acc.values()) == len(acc) - 2


def test_small_synthetic_record_one_table():
    fs = 2048.0
    t = np.arange(4096) / fs
    rng = np.random.default_rng(5)
    x = np.stack([free_decay(t, [40.0, 90.0], [0.01, 0.02], [a, 0.5]) for a in (1.0, -0.6)])
    hits = np.stack([x, 0.9 * x, 1.2 * x]) + 1e-3 * rng.standard_normal((3, *x.shape))
    rec = records_from_arrays(hits, fs)
    choices = {"band": (20.0, 200.0), "accept": [True, True, True]}
    recipe = Recipe(band=(20.0, 200.0), hit_overrides={1: True, 2: True, 3: True})
    tables = four_tables(rec, recipe, **choices)
    for label, tb in zip(("ModeFit", "run_recipe", "Analysis"), tables[1:], strict=True):
        assert_same_table(tables[0], tb, label)
    np.testing.assert_allclose(tables[0]["frequency_hz"].values, [40.0, 90.0], rtol=1e-3)
    np.testing.assert_allclose(tables[0]["damping_ratio"].values, [0.01, 0.02], rtol=0.05)
    # the recipe the direct call carries replays it
    assert_same_table(tables[0], fit_modes(rec, recipe=Recipe.from_json(tables[0].attrs["recipe"])),
                      "replay of attrs['recipe']")


def test_refit_keeps_the_constructor_window_and_the_table_layout():
    fs = 2048.0
    t = np.arange(4096) / fs
    x = free_decay(t, [40.0, 90.0], [0.01, 0.02]) + 1e-4 * np.random.default_rng(2).standard_normal(t.size)
    rec = records_from_arrays(x, fs)
    est = ModeFit(window=(0.0, 1.9), accept=[True])
    with pytest.raises(Exception, match="This ModeFit instance is not fitted yet. Call 'fit'"):
        est.refit(window=(0.1, 1.0))
    first = est.fit(rec).result_
    assert est.window_ == (0.0, 1.89990234375)  # last sample at or before 1.9 s: 3891 / 2048
    new = est.refit(window=(0.25, 1.5))
    assert est.window == (0.0, 1.9)  # the constructor parameter stays (scikit-learn convention)
    assert est.window_ == (0.25, 1.5) and list(new.attrs["window"]) == [0.25, 1.5]
    assert set(new.data_vars) == set(first.data_vars)
    assert json_window(new) == [0.25, 1.5]
    np.testing.assert_allclose(new["frequency_hz"].values, [40.0, 90.0], rtol=1e-3)


def json_window(table):
    import json

    return json.loads(table.attrs["recipe"])["window"]
