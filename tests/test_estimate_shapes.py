"""MAC, MPC and damping conversions against hand-computable cases and published formulas."""

from __future__ import annotations

import numpy as np
import pytest

from modalnb._errors import EstimationError
from modalnb.estimate import mac, mac_matrix, modal_conversions, mpc


def test_mac_hand_cases():
    rng = np.random.default_rng(0)
    a = rng.standard_normal(6) + 1j * rng.standard_normal(6)
    # MAC is invariant to complex scaling (Allemang & Brown 1982): = 1 exactly
    assert mac(a, (2 - 3j) * a) == pytest.approx(1.0, abs=1e-12)
    # orthogonal vectors: 0 (by hand)
    assert mac([1, 0, 0], [0, 1j, 0]) == 0.0
    # conjugate transpose: [1, j] vs [1, -j] are orthogonal under a^H b = 1 - 1 = 0
    assert mac([1, 1j], [1, -1j]) == pytest.approx(0.0, abs=1e-15)
    # by hand: |a^H b|^2/(|a|^2 |b|^2) for a = [1, 1], b = [1, 0] is 1/2
    assert mac([1, 1], [1, 0]) == pytest.approx(0.5)
    m = mac_matrix(np.array([[1, 0], [0, 1], [0, 0]], complex))
    np.testing.assert_allclose(m, np.eye(2))
    with pytest.raises(EstimationError, match="length"):
        mac([1, 2], [1, 2, 3])


def test_mpc_hand_cases():
    # real vector: monophase, MPC = 1 (Pappa, Elliott & Schenk 1993)
    assert mpc([1.0, -2.0, 0.5]) == pytest.approx(1.0)
    # any real vector times a complex scalar is still monophase
    assert mpc((1 + 2j) * np.array([1.0, -2.0, 0.5])) == pytest.approx(1.0)
    # [1, j]: circular scatter, |phi^T phi|^2 = |1 - 1|^2 = 0
    assert mpc([1, 1j]) == pytest.approx(0.0, abs=1e-15)
    # uncentred moments: [1, 1 + j] is not collinear (METHODS §6); by hand
    # phi^T phi = 1 + 2j, |.|^2 = 5; phi^H phi = 3 -> 5/9
    assert mpc([1, 1 + 1j]) == pytest.approx(5 / 9)


def test_conversions_formulas():
    fn, zeta, m = 25.0, 0.02, 3.0
    d = modal_conversions(fn, zeta, mass=m)
    wn = 2 * np.pi * fn
    # METHODS §1: k = m wn^2, c = 2 zeta sqrt(k m), c_c = 2 sqrt(k m)
    assert d["stiffness"] == pytest.approx(m * wn**2)
    assert d["critical_damping"] == pytest.approx(2 * np.sqrt(d["stiffness"] * m))
    assert d["damping_coefficient"] == pytest.approx(2 * zeta * m * wn)
    # T60 relation zeta = 1.0995/(fn T60) and dB/s relation zeta = D/(54.58 fn) (METHODS §1)
    assert zeta == pytest.approx(1.0995 / (fn * d["t60_s"]), rel=1e-4)
    assert zeta == pytest.approx(d["decay_rate_db_per_s"] / (54.58 * fn), rel=1e-4)
    # energy decays at twice the amplitude rate (METHODS §1)
    assert d["energy_decay_rate_per_s"] == pytest.approx(2 * zeta * wn)
    # exact log decrement and its inverse zeta = delta / sqrt(4 pi^2 + delta^2) (METHODS §1)
    delta = d["log_decrement"]
    assert delta / np.sqrt(4 * np.pi**2 + delta**2) == pytest.approx(zeta)
    # half-power relation (METHODS §1): (f2^2 - f1^2)/(4 fn^2) = zeta sqrt(1 - zeta^2), with
    # w1,2^2 = wn^2 (1 - 2 zeta^2 -+ 2 zeta sqrt(1 - zeta^2)) the -3 dB points of |H|^2
    # of the displacement FRF 1/(wn^2 - w^2 + 2j zeta wn w); located numerically here
    w = np.linspace(0.5 * wn, 1.5 * wn, 400001)
    h2 = 1 / np.abs(wn**2 - w**2 + 2j * zeta * wn * w) ** 2
    above = w[h2 >= h2.max() / 2]
    f1, f2 = above[0] / (2 * np.pi), above[-1] / (2 * np.pi)
    assert (f2**2 - f1**2) / (4 * fn**2) == pytest.approx(zeta * np.sqrt(1 - zeta**2), rel=1e-3)
    assert d["q_factor"] == pytest.approx(1 / (2 * zeta))
    s = modal_conversions(fn, zeta, stiffness=d["stiffness"])
    assert s["mass"] == pytest.approx(m)
    over = modal_conversions(fn, 1.5)
    assert np.isnan(over["damped_frequency_hz"]) and np.isnan(over["log_decrement"])
    with pytest.raises(EstimationError):
        modal_conversions(fn, -0.1)


def test_accept_mapping_overrides_only_the_hits_it_names():
    # the demo truth (demo_truth.json): hit 4 is a double hit, hit 6 clips; both rejected by
    # the default checks. A mapping naming hit 4 accepts it and leaves hit 6 rejected.
    from modalnb import fit_modes
    from modalnb.demo import load_demo, load_demo_truth
    from modalnb.recipe import Recipe

    truth = load_demo_truth()
    dbl, clip = truth["double_hit"]["hit"], truth["clipped_hit"]["hit"]
    ds = load_demo().isel(channel=[0, 5])
    res = fit_modes(ds, accept={dbl: True}, band=(20.0, 300.0))
    acc = dict(zip(res["hit"].values.tolist(), res["hit_accepted"].values.tolist(), strict=True))
    assert acc[dbl] is True and acc[clip] is False
    assert sum(acc.values()) == ds.sizes["hit"] - 1
    # the table carries the recipe that replays the call: the caller's decision an override,
    # the other hits left to the same hit checks
    rec = Recipe.from_json(res.attrs["recipe"])
    assert rec.hit_overrides == {dbl: True} and rec.band == (20.0, 300.0)
    # the default window then starts after the double hit's second tap (truth: delay_s),
    # so only free decay is fitted: exactly the two true modes in the band, near their values
    assert res.attrs["window"][0] > truth["double_hit"]["delay_s"]
    f_true = [m["frequency_hz"] for m in truth["modes"] if 20.0 < m["frequency_hz"] < 300.0]
    np.testing.assert_allclose(res["frequency_hz"].values, f_true, rtol=1e-4)
