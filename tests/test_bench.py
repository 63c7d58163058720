"""Benchmark machinery: the reference methods on easy modes, and a tiny smoke run.

No timing is asserted here (speed lives in the benchmark's own output, as ratios).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from modalnb._errors import ModalnbError
from modalnb.bench import curve_fit_modes, fft_halfpower, format_bench, run_bench, write_bench_json
from modalnb.synth import free_decay

FS = 1024.0


def test_half_power_on_a_long_clean_record() -> None:
    # Half-power bandwidth zeta ~ (f2 - f1)/(2 f_n) (METHODS §1; exact relation
    # (f2^2 - f1^2)/(4 f_n^2) = zeta sqrt(1 - zeta^2) for |H|^2), and with >= 6 time
    # constants in the record the truncation bias is gone (Trethewey & Cafeo 1992, IJAEMA
    # 7(2):129-149, as quoted in METHODS §4). 4 s at zeta = 2 %, 50 Hz = 25 time constants.
    t = np.arange(int(4 * FS)) / FS
    x = free_decay(t, 50.0, 0.02, 1.0, 0.3)
    f, z = fft_halfpower(x[None], FS, [(40.0, 60.0)])
    # peak of the response spectrum is within zeta^2 of f_n (common practice)
    assert f[0] == pytest.approx(50.0, rel=2 * 0.02**2)
    assert z[0] == pytest.approx(0.02, rel=0.03)


def test_half_power_two_separated_modes_and_window_correction() -> None:
    t = np.arange(int(4 * FS)) / FS
    x = free_decay(t, [50.0, 130.0], [0.02, 0.01], [1.0, 0.5], [0.3, -0.5])
    f, z = fft_halfpower(x[None], FS, [(30.0, 90.0), (90.0, 200.0)])
    np.testing.assert_allclose(f, [50.0, 130.0], rtol=1e-3)
    np.testing.assert_allclose(z, [0.02, 0.01], rtol=0.05)
    # exponential window exp(-t/tau) adds 1/(tau w_n) to zeta (light-damping form of the
    # exact pole shift, METHODS §4; Fladung, IMAC, windows for impact testing)
    tau = 1.0
    f_w, z_w = fft_halfpower(
        (x * np.exp(-t / tau))[None], FS, [(30.0, 90.0), (90.0, 200.0)], window_tau_s=tau
    )
    np.testing.assert_allclose(z_w, [0.02, 0.01], rtol=0.08)


def test_curve_fit_recovers_an_easy_mode() -> None:
    # truth: the closed-form free decay (METHODS §1) in light noise (SNR 40 dB)
    rng = np.random.default_rng(3)
    t = np.arange(1024) / FS
    x = free_decay(t, 61.3, 0.012, 1.0, 0.4)
    y = x + 0.002 * rng.standard_normal(t.size)
    f, z = curve_fit_modes(y[None], FS, [(30.0, 100.0)])
    assert f[0] == pytest.approx(61.3, rel=2e-3)
    assert z[0] == pytest.approx(0.012, rel=0.05)


def test_curve_fit_undoes_an_exponential_window_exactly() -> None:
    # exact pole shift lambda_true = lambda_meas + 1/tau (METHODS §4)
    t = np.arange(1024) / FS
    x = free_decay(t, 61.3, 0.012, 1.0, 0.4) * np.exp(-t / 0.3)
    f, z = curve_fit_modes(x[None], FS, [(30.0, 100.0)], window_tau_s=0.3)
    assert z[0] == pytest.approx(0.012, rel=0.05)


def test_reference_methods_report_nan_for_an_empty_band() -> None:
    t = np.arange(1024) / FS
    x = free_decay(t, 61.3, 0.012)
    f, z = fft_halfpower(x[None], FS, [(300.0, 300.5)])
    assert np.isnan(f[0]) and np.isnan(z[0])


@pytest.fixture(scope="module")
def smoke() -> tuple[dict, list]:
    calls: list = []
    res = run_bench(quick=True, trials=2, seed=5, progress=lambda d, n, s: calls.append((d, n)))
    return res, calls


def test_smoke_run_structure(smoke, tmp_path) -> None:
    res, calls = smoke
    assert sorted(res) == ["accuracy", "meta", "speed", "targets"]
    cases = [(c["case"], c["snr_db"]) for c in res["accuracy"]]
    assert cases == [("single", s) for s in (10, 20, 30, 40)] + [
        ("single_windowed", s) for s in (10, 20, 30, 40)
    ] + [("close", 30), ("three_mode", 30)]
    for c in res["accuracy"]:
        m = len(c["frequency_hz"])
        for meth in ("fft_halfpower", "curve_fit"):
            for qty in ("frequency_hz", "damping_ratio"):
                assert len(c["methods"][meth][qty]["ratio"]) == m
                assert all(b > 0 for b in c["methods"][meth][qty]["crlb_std"])
    assert calls[-1][0] == calls[-1][1]  # progress reached its total
    # JSON-safe and written atomically
    path = write_bench_json(res, tmp_path / "bench.json")
    assert json.loads(path.read_text()) == res
    assert [p.name for p in tmp_path.iterdir()] == ["bench.json"]
    text = format_bench(res)
    for name in ("single_windowed", "close", "three_mode", "refit", "target"):
        assert name in text


def test_smoke_run_baselines_recover_the_easy_mode(smoke) -> None:
    # at 40 dB the single mode is easy: both engineer's methods land within a few
    # percent (FFT half-power on 4.6 time constants has a truncation bias of about 5 %,
    # METHODS §4; the band-pass of curve_fit adds a small bias, common practice)
    res, _ = smoke
    case = next(c for c in res["accuracy"] if c["case"] == "single" and c["snr_db"] == 40)
    for meth in ("fft_halfpower", "curve_fit"):
        f_err = case["methods"][meth]["frequency_hz"]["rmse"][0]
        z_err = case["methods"][meth]["damping_ratio"]["rmse"][0]
        assert f_err < 0.01 * 61.3
        assert z_err < 0.1 * 0.012


def test_too_few_trials_is_an_error() -> None:
    with pytest.raises(ModalnbError, match="trials"):
        run_bench(quick=True, trials=1)


def test_smoke_run_modalnb_recovers_the_easy_mode(smoke) -> None:
    # the engine on the 40 dB single mode: error within a few bound widths
    # (Cramér–Rao bound from modalnb.crlb, itself checked in test_crlb.py against Kay 1993)
    res, _ = smoke
    case = next(c for c in res["accuracy"] if c["case"] == "single" and c["snr_db"] == 40)
    m = case["methods"]["modalnb"]
    if m is None:
        pytest.skip("modalnb.estimate.fit_modes is not importable")
    assert m["frequency_hz"]["failed_fraction"][0] == 0
    assert m["frequency_hz"]["ratio"][0] < 5
    assert m["damping_ratio"]["ratio"][0] < 5
