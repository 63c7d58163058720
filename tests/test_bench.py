"""Benchmark machinery: the reference methods on easy modes, and a tiny smoke run.

No timing is asserted here (speed lives in the benchmark's own output, as ratios). The
smoke run uses 2 noise realisations per case: it checks the structure of the results
and per-trial errors, never an efficiency ratio (that needs hundreds of trials and is
what ``modalnb bench`` itself reports).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from modalnb._errors import ModalnbError
from modalnb.testing.bench import (
    accuracy_case,
    curve_fit_modes,
    fft_halfpower,
    format_bench,
    run_bench,
    write_bench_json,
)
from modalnb.testing.synth import free_decay

FS = 1024.0


def test_half_power_on_a_long_clean_record() -> None:
    # Half-power bandwidth: zeta ~ (f2 - f1)/(2 f_n) for light damping (Ewins 2000, *Modal
    # Testing: Theory, Practice and Application*, sect. 4.3; Chopra 2012, *Dynamics of
    # Structures*, sect. 3.2; both from memory). With >= 6 time constants in the record
    # the truncation bias is gone (Trethewey & Cafeo 1992, Int. J. Anal. Exp. Modal Anal.
    # 7(2):129-149, from memory). 4 s at zeta = 2 %, 50 Hz = 25 time constants.
    t = np.arange(int(4 * FS)) / FS
    x = free_decay(t, 50.0, 0.02, 1.0, 0.3)
    f, z = fft_halfpower(x[None], FS, [(40.0, 60.0)])
    # the spectral peak of a free decay sits near the damped frequency
    # f_n sqrt(1 - zeta^2) ~ f_n (1 - zeta^2/2), so within 2 zeta^2 of f_n
    assert f[0] == pytest.approx(50.0, rel=2 * 0.02**2)
    assert z[0] == pytest.approx(0.02, rel=0.03)


def test_half_power_two_separated_modes_and_window_correction() -> None:
    t = np.arange(int(4 * FS)) / FS
    x = free_decay(t, [50.0, 130.0], [0.02, 0.01], [1.0, 0.5], [0.3, -0.5])
    f, z = fft_halfpower(x[None], FS, [(30.0, 90.0), (90.0, 200.0)])
    np.testing.assert_allclose(f, [50.0, 130.0], rtol=1e-3)
    np.testing.assert_allclose(z, [0.02, 0.01], rtol=0.05)
    # An exponential window exp(-t/tau) turns exp(lambda t) into exp((lambda - 1/tau) t):
    # the decay rate grows by 1/tau, so zeta_measured ~ zeta + 1/(tau w_n) for light
    # damping (Fladung & Rost 1997, Mech. Syst. Signal Process. 11(1):23-36, from memory).
    tau = 1.0
    f_w, z_w = fft_halfpower(
        (x * np.exp(-t / tau))[None], FS, [(30.0, 90.0), (90.0, 200.0)], window_tau_s=tau
    )
    np.testing.assert_allclose(z_w, [0.02, 0.01], rtol=0.08)


def test_curve_fit_recovers_an_easy_mode() -> None:
    # truth: the closed-form free decay (checked against solve_ivp in test_synth.py) in
    # light noise (SNR 40 dB)
    rng = np.random.default_rng(3)
    t = np.arange(1024) / FS
    x = free_decay(t, 61.3, 0.012, 1.0, 0.4)
    y = x + 0.002 * rng.standard_normal(t.size)
    f, z = curve_fit_modes(y[None], FS, [(30.0, 100.0)])
    assert f[0] == pytest.approx(61.3, rel=2e-3)
    assert z[0] == pytest.approx(0.012, rel=0.05)


def test_curve_fit_undoes_an_exponential_window() -> None:
    # exact pole shift: lambda_true = lambda_measured + 1/tau (the window multiplies
    # exp(lambda t) by exp(-t/tau)); noise-free record. What is left is the band-pass
    # filter's own bias on a 4.6-time-constant record (about 0.2 % in zeta, 0.05 % in f
    # here), hence 0.5 % and 0.1 %: the window itself (1/(tau w_n) = 0.87 % of damping on
    # 1.2 % true, about a 70 % error if left in) is removed.
    t = np.arange(1024) / FS
    x = free_decay(t, 61.3, 0.012, 1.0, 0.4) * np.exp(-t / 0.3)
    f, z = curve_fit_modes(x[None], FS, [(30.0, 100.0)], window_tau_s=0.3)
    assert z[0] == pytest.approx(0.012, rel=0.005)
    assert f[0] == pytest.approx(61.3, rel=0.001)


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
        for meth in ("fft_halfpower", "curve_fit", "modalnb"):
            for qty in ("frequency_hz", "damping_ratio"):
                assert len(c["methods"][meth][qty]["ratio"]) == m
                assert all(b > 0 for b in c["methods"][meth][qty]["crlb_std"])
    assert res["speed"]["fit_modes_s"] > 0  # the engine ran (a broken engine raises)
    assert calls[-1][0] == calls[-1][1]  # progress reached its total
    # JSON-safe and written atomically
    path = write_bench_json(res, tmp_path / "bench.json")
    assert json.loads(path.read_text()) == res
    assert [p.name for p in tmp_path.iterdir()] == ["bench.json"]
    text = format_bench(res)
    for name in ("single_windowed", "close", "three_mode", "refit", "target"):
        assert name in text
    # 2 trials judge nothing: accuracy ratios are shown without PASS/FAIL marks
    accuracy_part = text.split("Speed (")[0]
    assert "not judged" in accuracy_part
    assert "PASS" not in accuracy_part and "FAIL" not in accuracy_part


def test_single_mode_at_40_db_every_trial_is_close_to_the_truth(smoke) -> None:
    # Per-trial errors of the 2 smoke trials at 40 dB (no efficiency claim). RMSE over 2
    # trials is at most sqrt(2) x the larger error, so a bound on it bounds each trial.
    # FFT half-power on 4.6 time constants has a truncation bias of a few % in zeta
    # (Trethewey & Cafeo 1992, from memory); the band-pass of curve_fit adds a small bias
    # (common practice); modalnb (the engine, matched to the true mode) must stay within
    # 5 Cramér–Rao widths in every trial (for an unbiased efficient estimator a 5-sigma
    # error has probability ~6e-7; the bound from modalnb.testing.crlb, itself checked in
    # test_crlb.py against formulas written there).
    res, _ = smoke
    case = next(c for c in res["accuracy"] if c["case"] == "single" and c["snr_db"] == 40)
    for meth in ("fft_halfpower", "curve_fit"):
        assert case["methods"][meth]["frequency_hz"]["rmse"][0] < 0.01 * 61.3
        assert case["methods"][meth]["damping_ratio"]["rmse"][0] < 0.1 * 0.012
    m = case["methods"]["modalnb"]
    assert m["frequency_hz"]["failed_fraction"][0] == 0
    assert m["frequency_hz"]["ratio"][0] < 5
    assert m["damping_ratio"]["ratio"][0] < 5


def test_accuracy_case_alone_matches_its_definition() -> None:
    # one case on its own: the documented summary fields, ratio = RMSE / sqrt(CRLB)
    r = accuracy_case("close", 30.0, trials=2, seed=1)
    assert r["frequency_hz"] == [60.0, 61.8] and r["trials"] == 2
    for meth in ("fft_halfpower", "curve_fit", "modalnb"):
        for qty in ("frequency_hz", "damping_ratio"):
            s = r["methods"][meth][qty]
            assert set(s) >= {"rmse", "crlb_std", "ratio", "bias", "failed_fraction"}
            np.testing.assert_allclose(
                np.array(s["ratio"], float), np.array(s["rmse"], float) / s["crlb_std"]
            )
    with pytest.raises(ModalnbError, match="unknown benchmark case"):
        accuracy_case("nope", 30.0, trials=2)


def test_too_few_trials_is_an_error() -> None:
    with pytest.raises(ModalnbError, match="trials"):
        run_bench(quick=True, trials=1)


def test_a_broken_engine_fails_the_benchmark(monkeypatch) -> None:
    # the benchmark must not report n/a columns when the engine does not import
    import builtins

    real_import = builtins.__import__

    def broken(name, globals=None, locals=None, fromlist=(), level=0):
        if (name.endswith("fitting") or name.endswith("estimate")) and fromlist and "fit_modes" in fromlist:
            raise ImportError("simulated broken engine")
        return real_import(name, globals, locals, fromlist, level)

    monkeypatch.setattr(builtins, "__import__", broken)
    with pytest.raises(ImportError, match="simulated broken engine"):
        accuracy_case("single", 40.0, trials=2)
