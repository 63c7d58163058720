"""The engine's stabilisation ``match`` flag against the chart's rule, recomputed here from
the table's own columns: each pole against the nearest pole (in natural frequency) of the
order below in its pencil; within 1 % in frequency and 5 % in damping ratio (common practice
for stabilisation charts); shape MAC >= 0.9 (common practice; MAC of Allemang & Brown 1982).
"""

from __future__ import annotations

import numpy as np
import pytest

from modalnb.demo import load_demo
from modalnb.fitting import ModeFit


@pytest.fixture(scope="module")
def st():
    return ModeFit().fit(load_demo()).stabilisation_


def test_match_flag_follows_the_stabilisation_rule(st):
    flag = dict(zip(st["match"].attrs["flag_meanings"].split(),
                    np.asarray(st["match"].attrs["flag_values"]).tolist(), strict=True))
    passes = st["pencil_pass"].values
    order = st["order"].values
    fn = st["frequency_hz"].values
    zeta = st["damping_ratio"].values
    stable = st["stable"].values
    mac = st["mac"].values
    got = st["match"].values
    checked = 0
    for p in np.unique(passes):
        orders = np.unique(order[passes == p])
        for k, m in enumerate(orders):
            idx = np.nonzero((passes == p) & (order == m))[0]
            prev = np.nonzero((passes == p) & (order == orders[k - 1]))[0] if k else []
            for i in idx:
                if len(prev) == 0:
                    want = "new"
                else:
                    j = prev[np.argmin(np.abs(fn[prev] - fn[i]))]
                    if abs(fn[j] - fn[i]) > 0.01 * fn[i]:
                        want = "frequency"
                    elif abs(zeta[j] - zeta[i]) > 0.05 * max(zeta[i], 1e-4):
                        want = "damping"
                    elif not stable[i]:  # frequency and damping agree: the energy limit
                        want = "energy"
                    else:
                        want = "stable" if mac[i] >= 0.9 else "shape"
                assert got[i] == flag[want], (p, m, fn[i], want, got[i])
                checked += 1
    assert checked == st.sizes["pole"] > 100


def test_match_flag_agrees_with_stable_columns(st):
    flag = dict(zip(st["match"].attrs["flag_meanings"].split(),
                    np.asarray(st["match"].attrs["flag_values"]).tolist(), strict=True))
    m = st["match"].values
    np.testing.assert_array_equal(np.isin(m, [flag["stable"], flag["shape"]]), st["stable"].values)
    np.testing.assert_array_equal(m == flag["stable"], st["stable_shape"].values)


def test_band_by_band_rows_carry_the_flag_through():
    # a long record is fitted band by band (estimate/_bands.py): its rows, mapped back to
    # absolute frequency, keep each band pencil's flag, consistent with their `stable`
    from modalnb.estimate._bands import fit_poles_banded
    from modalnb.estimate._pencil import MATCH_SHAPE, MATCH_STABLE
    from modalnb.testing.synth import free_decay

    fs = 20000.0
    t = np.arange(2**16) / fs
    rng = np.random.default_rng(0)
    x = free_decay(t, [1500.0, 1501.5], [1e-4, 1.2e-4], [1.0, 0.6])
    y = (x + 1e-3 * rng.standard_normal(t.size))[None, :] / 1e-3
    rows = fit_poles_banded(y, t, fs, (1000.0, 2000.0)).pencil.rows
    assert rows and all(len(r) == 9 for r in rows)
    match = np.array([r[8] for r in rows])
    stable = np.array([r[5] for r in rows], bool)
    np.testing.assert_array_equal(np.isin(match, [MATCH_SHAPE, MATCH_STABLE]), stable)
    assert stable.any() and not stable.all()
