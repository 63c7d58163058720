"""MAC, MPC and damping conversions against hand-computable cases and published formulas.

MAC: ``|a^H b|^2 / ((a^H a)(b^H b))`` (Allemang & Brown 1982, "A correlation coefficient
for modal vector analysis", 1st IMAC). MPC: a measure of how far a complex shape is from
a real (monophase) one (Pappa, Elliott & Schenk 1993, J. Guidance Control Dyn.
16(5):852-858); the engine documents the uncentred form ``|phi^T phi|^2 / (phi^H phi)^2``,
evaluated by hand below. Damping relations: wn = sqrt(k/m), c_c = 2 sqrt(k m),
zeta = c / c_c, envelope exp(-zeta wn t) (Thomson & Dahleh 1998, *Theory of Vibration
with Applications*, ch. 2; from memory); the numeric constants are re-derived in the test.
"""

from __future__ import annotations

import numpy as np
import pytest

from modalnb import EstimationError, Recipe, fit_modes, mac, mac_matrix, modal_conversions, mpc


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
    # uncentred moments: [1, 1 + j] is not collinear; by hand
    # phi^T phi = 1 + 2j, |.|^2 = 5; phi^H phi = 3 -> 5/9
    assert mpc([1, 1 + 1j]) == pytest.approx(5 / 9)


def test_conversions_formulas():
    fn, zeta, m = 25.0, 0.02, 3.0
    d = modal_conversions(fn, zeta, mass=m)
    wn = 2 * np.pi * fn
    # k = m wn^2, c = 2 zeta sqrt(k m), c_c = 2 sqrt(k m) (definitions, see above)
    assert d["stiffness"] == pytest.approx(m * wn**2)
    assert d["critical_damping"] == pytest.approx(2 * np.sqrt(d["stiffness"] * m))
    assert d["damping_coefficient"] == pytest.approx(2 * zeta * m * wn)
    # T60: the envelope exp(-zeta wn t) falls 60 dB (a factor 1000) in T60, so
    # zeta = ln(1000) / (2 pi fn T60) = 1.0994 / (fn T60)
    assert np.log(1e3) / (2 * np.pi) == pytest.approx(1.0994, abs=1e-4)
    assert zeta == pytest.approx(np.log(1e3) / (2 * np.pi * fn * d["t60_s"]), rel=1e-12)
    # dB/s: D = 20 log10(e) zeta wn, so zeta = D / (20 log10(e) 2 pi fn) = D / (54.575 fn)
    assert 20 * np.log10(np.e) * 2 * np.pi == pytest.approx(54.575, abs=1e-3)
    assert zeta == pytest.approx(d["decay_rate_db_per_s"] / (20 * np.log10(np.e) * 2 * np.pi * fn),
                                 rel=1e-12)
    # energy (amplitude squared) decays at twice the amplitude rate: 2 zeta wn
    assert d["energy_decay_rate_per_s"] == pytest.approx(2 * zeta * wn)
    # exact log decrement: ln of the ratio of the envelope exp(-zeta wn t) one damped period
    # 2 pi / (wn sqrt(1 - zeta^2)) apart, delta = 2 pi zeta / sqrt(1 - zeta^2); its inverse
    # zeta = delta / sqrt(4 pi^2 + delta^2)
    delta = d["log_decrement"]
    assert delta == pytest.approx(2 * np.pi * zeta / np.sqrt(1 - zeta**2), rel=1e-12)
    assert delta / np.sqrt(4 * np.pi**2 + delta**2) == pytest.approx(zeta)
    # half-power relation: (f2^2 - f1^2)/(4 fn^2) = zeta sqrt(1 - zeta^2), with
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
    from modalnb.demo import load_demo, load_demo_truth

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
