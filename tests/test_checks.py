"""Tests of modalnb.checks (hit checks and the hit report).

The records are built here from closed forms: a half-sine hammer pulse (the usual
idealisation of an elastic impact, e.g. Goldsmith, Impact, 1960 [from memory]; its
spectrum is derived in `closed_form_half_sine`) and the impulse response of a viscously damped single-degree-of-freedom oscillator,
x(t) = A exp(-zeta wn t) sin(wd t), wd = wn sqrt(1 - zeta^2) (any vibration textbook, e.g.
Inman, Engineering Vibration, ch. 1 [from memory]). The "truth" each check is compared
with is what the scenario was built with (delay, ratio, noise level, clip level) or a
closed form evaluated independently (half-sine spectrum, verified here with
scipy.integrate.quad).
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from modalnb._errors import ModalnbError, RecordError
from modalnb.checks import CHECK_NAMES, check_hits, format_hit_report
from modalnb.records import records_from_arrays

FS = 10240.0
T0 = -0.02  # 20 ms pre-trigger
N = 5324  # about 0.5 s after the trigger
TC = 1e-3  # 1 ms pulse: about 10 samples across it (common practice)
MODES = ((120.0, 0.03, 1.0), (410.0, 0.01, 0.5))  # (fn Hz, zeta, amplitude)


def _time(n: int = N, t0: float = T0, fs: float = FS) -> np.ndarray:
    return t0 + np.arange(n) / fs


def half_sine(t: np.ndarray, start: float, tc: float, peak: float = 1.0) -> np.ndarray:
    """Half-sine hammer pulse of duration tc starting at `start`: peak sin(pi (t - start) / tc)."""
    u = (t - start) / tc
    return np.where((u >= 0) & (u <= 1), peak * np.sin(np.pi * np.clip(u, 0, 1)), 0.0)


def impulse_response(t: np.ndarray, start: float, modes=MODES, scale: float = 1.0) -> np.ndarray:
    """Sum of SDOF impulse responses A exp(-zeta wn t) sin(wd t), zero before `start`."""
    tau = t - start
    x = np.zeros_like(t)
    for fn, zeta, amp in modes:
        wn = 2 * np.pi * fn
        wd = wn * np.sqrt(1 - zeta**2)
        x += amp * np.exp(-zeta * wn * np.clip(tau, 0, None)) * np.sin(wd * np.clip(tau, 0, None))
    return scale * np.where(tau >= 0, x, 0.0)


def make_hits(
    *,
    n_hits: int = 1,
    seed: int = 0,
    force_noise: float = 0.005,
    resp_noise: float = 0.002,
    second: tuple[float, float] | None = None,
    tc: float = TC,
    modes=MODES,
    n: int = N,
    t0: float = T0,
    fs: float = FS,
    n_channels: int = 2,
    with_force: bool = True,
    attrs: dict | None = None,
):
    """Records of `n_hits` identical-in-law hits; `second` = (delay s, ratio) double hit.

    Noise levels are fractions of the peak force (force) and of the response peak.
    """
    rng = np.random.default_rng(seed)
    t = _time(n, t0, fs)
    f1 = half_sine(t, 0.0, tc)
    x1 = impulse_response(t, 0.0, modes)
    if second is not None:
        delay, ratio = second
        f1 = f1 + half_sine(t, delay, tc, ratio)
        x1 = x1 + impulse_response(t, delay, modes, ratio)
    shapes = np.array([1.0, -0.6, 0.35, 0.8])[:n_channels]
    x_peak = np.max(np.abs(x1))
    resp = np.empty((n_hits, n_channels, n))
    force = np.empty((n_hits, n))
    for h in range(n_hits):
        force[h] = f1 + force_noise * rng.standard_normal(n)
        for c in range(n_channels):
            resp[h, c] = shapes[c] * x1 + resp_noise * x_peak * rng.standard_normal(n)
    return records_from_arrays(
        resp, fs, force=force if with_force else None, t0=t0, attrs=attrs
    ), x_peak


def closed_form_half_sine(f: np.ndarray, tc: float) -> np.ndarray:
    """|F(f)| of a unit-peak half-sine of duration tc, derived here.

    With a = pi / tc and s = 2j pi f, the Laplace integral of a sine (any table of
    transforms) gives int_0^tc sin(a t) exp(-s t) dt = [a - exp(-s tc) (s sin(a tc)
    + a cos(a tc))] / (s^2 + a^2) = a (1 + exp(-s tc)) / (a^2 - (2 pi f)^2), as a tc = pi.
    |1 + exp(-2j pi f tc)| = 2 |cos(pi f tc)| and a / (a^2 - (2 pi f)^2) =
    (tc / pi) / (1 - (2 f tc)^2), so |F(f)| = (2 tc / pi) |cos(pi f tc)| / |1 - (2 f tc)^2|
    (checked against quadrature in `test_half_sine_closed_form_verified_by_quadrature`).
    """
    u = 2 * np.asarray(f, dtype=float) * tc
    with np.errstate(divide="ignore", invalid="ignore"):
        mag = (2 * tc / np.pi) * np.abs(np.cos(np.pi * f * tc)) / np.abs(1 - u**2)
    # removable singularity at f tc = 1/2: the limit is tc/2
    return np.where(np.isclose(u, 1.0), tc / 2, mag)


# ------------------------------------------------------------------ double hits


@pytest.mark.parametrize("delay", [2e-3, 3e-3, 5e-3, 10e-3, 20e-3, 30e-3])
@pytest.mark.parametrize("ratio", [0.15, 0.3, 0.5, 0.8])
def test_double_hit_detected_across_delays_and_ratios(delay, ratio):
    ds, _ = make_hits(second=(delay, ratio), seed=int(1e4 * delay + 100 * ratio))
    out = check_hits(ds)
    # truth: the scenario's second pulse (peak ratio and peak-to-peak delay by construction)
    assert not bool(out["accepted"].item())
    assert str(out["reason"].item()).startswith("double hit")
    assert abs(float(out["double_hit_ratio"].item()) - ratio) < 0.03  # force noise 0.5 % of peak
    assert abs(float(out["double_hit_delay_s"].item()) - delay) < 2 / FS


@pytest.mark.parametrize("delay", [0.8e-3, 0.9e-3])
@pytest.mark.parametrize("ratio", [0.3, 0.5, 0.8])
def test_merged_double_tap_found_as_second_hump(delay, ratio):
    # taps 0.8-0.9 Tc apart: the pulses overlap, so the force never falls to 2 % between
    # them; f(t) = h(t) + a h(t - delay) has a valley between two humps (construction)
    ds, _ = make_hits(second=(delay, ratio), seed=int(1e5 * delay + 10 * ratio))
    out = check_hits(ds)
    assert not bool(out["accepted"].item())
    assert str(out["reason"].item()).startswith("double hit (merged second tap")
    # second peak at delay + Tc/2, where the first half-sine is already zero: height = a;
    # 10 samples per pulse miss the hump top by up to 1 - cos(pi/10) of a (sampling)
    assert float(out["double_hit_ratio"].item()) == pytest.approx(ratio, abs=0.05 * ratio + 0.01)
    assert abs(float(out["double_hit_delay_s"].item()) - delay) < 1.5 / FS


def test_double_hit_with_stronger_second_tap_found_before_the_peak():
    # a weak first tap (40 % of the second) 8 ms before the main one (construction)
    t = _time()
    f = 0.4 * half_sine(t, 0.0, TC) + half_sine(t, 8e-3, TC)
    x = 0.4 * impulse_response(t, 0.0) + impulse_response(t, 8e-3)
    rng = np.random.default_rng(5)
    ds = records_from_arrays(x + 1e-3 * rng.standard_normal(t.size), FS,
                             force=f + 2e-3 * rng.standard_normal(t.size), t0=T0)
    out = check_hits(ds)
    assert not bool(out["accepted"].item())
    assert abs(float(out["double_hit_ratio"].item()) - 0.4) < 0.03
    assert abs(float(out["double_hit_delay_s"].item()) + 8e-3) < 2 / FS
    assert "earlier" in str(out["reason"].item())


@pytest.mark.parametrize("force_noise,resp_noise", [(0.001, 0.001), (0.01, 0.01), (0.01, 0.001)])
def test_clean_hits_with_noise_are_not_flagged(force_noise, resp_noise):
    # 40 seeds per noise level; force noise 0.1-1 % of the peak (common practice for a
    # hammer with a 24-bit converter, ours)
    ds, _ = make_hits(n_hits=40, seed=11, force_noise=force_noise, resp_noise=resp_noise)
    out = check_hits(ds, band=(0.0, 800.0))
    assert out["accepted"].values.all(), out["reason"].values
    assert all(w == "" for w in out["warnings"].values), set(out["warnings"].values)
    # largest excursion outside the pulse is noise: a few sigma, far below 10 %
    assert np.all(out["double_hit_ratio"].values < 6 * force_noise + 1e-3)


@pytest.mark.parametrize("fs", [FS, 51200.0])
def test_pulse_duration_matches_half_sine_crossings(fs):
    # A half-sine exceeds a fraction p of its peak for Tc (1 - 2 asin(p) / pi)
    # (elementary trigonometry); p = 0.02 is the pulse bound. The sampled pulse has a
    # kink at each end, so the interpolated crossings are good to about one sample.
    ds, _ = make_hits(force_noise=0.0, resp_noise=0.001, tc=2e-3, fs=fs, n=int(0.3 * fs))
    out = check_hits(ds)
    expected = 2e-3 * (1 - 2 * np.arcsin(0.02) / np.pi)
    assert float(out["pulse_duration_s"].item()) == pytest.approx(expected, abs=1.0 / fs)
    assert float(out["peak_force"].item()) == pytest.approx(1.0, abs=0.01)  # sampled near peak


def test_noise_only_force_is_a_weak_hit_not_a_double_hit():
    # no pulse at all: force is white noise (construction); must not be called a double hit
    ds, _ = make_hits(force_noise=0.01)
    noisy = ds.copy(deep=True)
    rng = np.random.default_rng(3)
    noisy["force"].values[:] = 0.01 * rng.standard_normal(noisy["force"].shape)
    out = check_hits(noisy)
    assert bool(out["accepted"].item())
    assert "double hit" not in str(out["warnings"].item())
    assert "weak hit (no clear force pulse" in str(out["warnings"].item())
    assert np.isnan(float(out["double_hit_ratio"].item()))


def test_force_range_used_is_a_note_not_a_warning():
    # peak force 1.0 on a 50.0 full scale: 2 %, below the documented 10 % (common
    # practice): a note, not a warning; 1.0 on 5.0 is 20 %, above it: nothing
    for full, low in ((50.0, True), (5.0, False)):
        ds, _ = make_hits(attrs={"force_full_scale": full})
        out = check_hits(ds)
        assert bool(out["accepted"].item())
        assert "weak hit" not in str(out["warnings"].item())
        assert ("peak force 2.0 % of the force range" in str(out["notes"].item())) == low
        assert float(out["force_range_used"].item()) == pytest.approx(1.0 / full, rel=0.02)
    ds, _ = make_hits(attrs={"force_full_scale": 50.0})
    assert bool(check_hits(ds, reject=("weak hit",))["accepted"].item())  # a note never rejects


def _expected_band_snr_db(sigma: float, length: int = 64, fs: float = FS, tc: float = TC) -> float:
    """In-band energy of the pulse window over that of white noise of the same length.

    White noise of variance sigma^2 gives E|X_k|^2 = L sigma^2 in every rfft bin of a
    length-L rectangular window (Parseval); the half-sine's DFT is fs F(f_k) with F its
    continuous transform (closed_form_half_sine, derived above; aliasing of its 1/f^2
    tail neglected); the window holds pulse plus noise. Band: 0 to 0.45 fs (the band rule).
    """
    f = np.fft.rfftfreq(length, 1 / fs)
    f = f[f <= 0.45 * fs]
    noise = length * sigma**2 * f.size
    pulse = float(np.sum((fs * closed_form_half_sine(f, tc)) ** 2))
    return 10 * np.log10((pulse + noise) / noise)


@pytest.mark.parametrize("sigma, weak", [(0.005, False), (0.05, True)])
def test_weak_hit_judges_the_in_band_signal_to_noise(sigma, weak):
    # a 1 ms half-sine (about 10 samples) in white force noise: the pulse window is
    # widened to the documented 64 samples; sigma 0.005 gives about 36 dB in band, sigma
    # 0.05 about 17 dB, under the 20 dB threshold (common practice), while its time-domain
    # peak (26 dB) still makes a clear pulse
    ds, _ = make_hits(n_hits=3, seed=30, force_noise=sigma)
    out = check_hits(ds)
    expected = _expected_band_snr_db(sigma)
    assert np.all(np.abs(out["force_band_snr_db"].values - expected) < 1.0), \
        (out["force_band_snr_db"].values, expected)
    assert np.all(np.isfinite(out["pulse_duration_s"].values))  # clear pulses
    for w in out["warnings"].values:
        assert ("weak hit (in-band force" in str(w)) == weak
    # a warning by default, never a reason (at sigma 0.05 noise peaks of 23 % make the
    # double-hit check reject: that check's rule, not this one's)
    assert not any("weak hit" in str(r) for r in out["reason"].values)


def test_demo_hits_carry_no_weak_hit_warning():
    # the demo's hits ring 60 dB above the response noise and are struck cleanly; two use
    # under 10 % of the force range: a note, never a "weak hit" warning
    from modalnb.demo import load_demo

    out = check_hits(load_demo())
    assert not any("weak hit" in str(w) for w in out["warnings"].values)
    assert np.all(out["force_band_snr_db"].values > 20.0)
    notes = [str(n) for n in out["notes"].values]
    assert sum("of the force range" in n for n in notes) == 2


def test_dead_force_record_is_no_pulse_and_rejected():
    # issue 10: a flat force record (unplugged sensor) holds no hammer pulse: rejected by
    # default with the reason; a warning only when "no pulse" is not in `reject`
    ds, _ = make_hits()
    ds = ds.copy(deep=True)
    ds["force"].values[:] = 0.0
    out = check_hits(ds)
    assert not bool(out["accepted"].item())
    assert str(out["reason"].item()).startswith("no pulse (force record flat")
    assert bool(out["force_flat"].item())
    assert np.isnan(float(out["double_hit_ratio"].item()))
    warned = check_hits(ds, reject=("double hit", "clipping"))
    assert bool(warned["accepted"].item())
    assert "no pulse" in str(warned["warnings"].item())


# ------------------------------------------------------------------ clipping


def test_clipping_detected_with_full_scale_attr_and_coord():
    ds, x_peak = make_hits(n_hits=3, seed=2)
    fs_level = 1.2 * x_peak  # ADC full scale (construction); hits 1 and 3 stay below it
    clipped = ds.copy(deep=True)
    # hit 2 is twice as hard and saturates the ADC on ch1 (peak 2 x_peak) and ch2 (1.2 x_peak)
    clipped["response"].values[1] = np.clip(2 * clipped["response"].values[1], -fs_level, fs_level)
    clipped.attrs["full_scale"] = fs_level
    out = check_hits(clipped)
    # samples at >= 99 % of full scale are clipped (the documented clip_level)
    assert out["accepted"].values.tolist() == [True, False, True]
    assert int(out["channel_clipped_samples"].sel(hit=2, channel="ch1")) > 0
    assert str(out["reason"].sel(hit=2).item()) == "clipping on ch1, ch2"
    assert out["clipped_samples"].values[[0, 2]].tolist() == [0, 0]
    # per-channel coord: ch2 (shape 0.6, peak 0.6 x_peak) under a full scale it never reaches
    per_ch = ds.assign_coords(full_scale=("channel", [0.7 * x_peak, 0.59 * x_peak]))
    per_ch["response"].values[:, 0] = np.clip(per_ch["response"].values[:, 0],
                                              -0.7 * x_peak, 0.7 * x_peak)
    out2 = check_hits(per_ch)
    assert not out2["accepted"].values.any()
    assert all(s == "ch1, ch2" for s in out2["clipped_channels"].values)
    # a full scale well above the peaks: nothing flagged (construction)
    roomy = ds.assign_coords(full_scale=("channel", [2 * x_peak, 2 * x_peak]))
    assert check_hits(roomy)["accepted"].values.all()


def test_force_clipping_with_force_full_scale():
    ds, _ = make_hits(n_hits=2, seed=4)
    ds = ds.copy(deep=True)
    ds["force"].values[0] = np.clip(ds["force"].values[0], None, 0.8)
    ds.attrs["force_full_scale"] = 0.8
    out = check_hits(ds)
    assert out["accepted"].values.tolist() == [False, False]  # hit 2 peaks at 1.0 > 0.8 too
    assert int(out["force_clipped_samples"].sel(hit=1)) >= 3
    assert "force" in str(out["clipped_channels"].sel(hit=1).item())
    ds.attrs["force_full_scale"] = 5.0
    out = check_hits(ds)
    assert int(out["force_clipped_samples"].sel(hit=2)) == 0
    # peak force 1.0 of 5.0 full scale: 20 %, above the documented 10 % weak-hit floor
    assert "weak hit" not in str(out["warnings"].sel(hit=2).item())


@pytest.mark.parametrize("level", [0.3, 0.6, 0.9])
def test_clipping_detected_without_full_scale_from_flat_tops(level):
    # np.clip produces runs of equal extreme samples (as a saturated converter does)
    ds, x_peak = make_hits(n_hits=2, seed=7)
    ds = ds.copy(deep=True)
    ds["response"].values[0, 1] = np.clip(ds["response"].values[0, 1],
                                          -level * 0.6 * x_peak, level * 0.6 * x_peak)
    ds["force"].values[1] = np.clip(ds["force"].values[1], -level, level)
    out = check_hits(ds)
    assert out["accepted"].values.tolist() == [False, False]
    assert str(out["clipped_channels"].sel(hit=1).item()) == "ch2"
    assert str(out["clipped_channels"].sel(hit=2).item()) == "force"
    assert int(out["channel_clipped_samples"].sel(hit=1, channel="ch1")) == 0


def test_noise_free_force_with_zero_baseline_is_not_a_flat_top():
    # exact zeros outside the pulse are a quiet baseline, not a clipped extreme
    ds, _ = make_hits(force_noise=0.0)
    out = check_hits(ds)
    assert bool(out["accepted"].item())
    assert int(out["force_clipped_samples"].item()) == 0


# ------------------------------------------------------------------ dead channels


def test_dead_channels_warned_not_crashed():
    ds, _ = make_hits(n_hits=2, n_channels=4, seed=8)
    ds = ds.copy(deep=True)
    ds["response"].values[:, 2] = 0.0
    ds["response"].values[1, 3] = 0.25  # constant: a stuck channel
    out = check_hits(ds)
    assert out["accepted"].values.all()
    assert str(out["dead_channels"].sel(hit=1).item()) == "ch3"
    assert str(out["dead_channels"].sel(hit=2).item()) == "ch3, ch4"
    assert "dead channel ch3" in str(out["warnings"].sel(hit=1).item())
    assert "dead channels ch3, ch4" in str(out["warnings"].sel(hit=2).item())
    assert bool(out["channel_dead"].sel(hit=2, channel="ch4"))
    assert np.isnan(float(out["channel_snr_db"].sel(hit=1, channel="ch3")))
    assert np.isfinite(float(out["snr_db"].sel(hit=2)))
    # all channels dead: still no crash, NaN measures
    ds["response"].values[:] = 0.0
    out = check_hits(ds)
    assert np.isnan(out["snr_db"].values).all()
    assert all("dead channels ch1, ch2, ch3, ch4" in w for w in out["warnings"].values)


# ------------------------------------------------------------------ overrides and policy


def test_overrides_win_and_are_recorded():
    clean, _ = make_hits(n_hits=1, seed=9)
    double, _ = make_hits(n_hits=1, seed=10, second=(6e-3, 0.5))
    import xarray as xr

    ds = xr.concat([clean, double.assign_coords(hit=[2])], dim="hit")
    auto = check_hits(ds)
    assert auto["accepted"].values.tolist() == [True, False]
    out = check_hits(ds, overrides={1: False, 2: True})
    assert out["accepted"].values.tolist() == [False, True]
    assert str(out["reason"].sel(hit=1).item()) == "rejected by user"
    assert str(out["warnings"].sel(hit=2).item()).startswith("accepted by user despite: double hit")
    assert out["user_decision"].values.tolist() == ["rejected", "accepted"]
    # string labels (as a CLI would pass them) are accepted
    assert check_hits(ds, overrides={"2": True})["accepted"].values.tolist() == [True, True]


def test_unknown_override_label_errors_with_labels():
    ds, _ = make_hits(n_hits=3)
    with pytest.raises(RecordError, match=r"unknown hit 7.*\[1, 2, 3\]"):
        check_hits(ds, overrides={7: True})
    with pytest.raises(RecordError, match=r"hit 2 must be True .* was 'yes'"):
        check_hits(ds, overrides={2: "yes"})


def test_reject_policy_is_data():
    double, _ = make_hits(second=(6e-3, 0.5))
    out = check_hits(double, reject=())
    assert bool(out["accepted"].item())
    assert str(out["warnings"].item()).startswith("double hit")
    noisy, _ = make_hits(resp_noise=0.1)
    assert bool(check_hits(noisy)["accepted"].item())
    out = check_hits(noisy, reject=("double hit", "clipping", "low snr"))
    assert not bool(out["accepted"].item())
    assert str(out["reason"].item()).startswith("low snr")
    with pytest.raises(ModalnbError, match=r"unknown check 'double hits'.*Did you mean 'double hit'"):
        check_hits(double, reject=("double hits",))
    assert set(CHECK_NAMES) >= {"double hit", "clipping", "low snr", "soft tip", "not decayed"}


# ------------------------------------------------------------------ SNR


@pytest.mark.parametrize("t0", [T0, 0.0])
def test_low_snr_warned_and_measured(t0):
    # noise sigma 10 % of the response peak: SNR = 20 log10(peak / sigma) = 20 dB by
    # construction. The noisy record's peak is the clean peak plus at most about 4 sigma
    # (the largest of ~5000 Gaussian samples), 20 log10(1.4) = +2.9 dB, and the sigma
    # estimate from ~200-500 samples scatters by about 5 % (0.4 dB): 19.0 to 23.5 dB
    ds, x_peak = make_hits(resp_noise=0.1, n_channels=1, t0=t0, seed=12)
    out = check_hits(ds)
    snr = float(out["snr_db"].item())
    assert 19.0 < snr < 23.5
    assert "low snr (ch1" in str(out["warnings"].item())
    # without pre-trigger the floor comes from second differences of the tail, whose
    # variance is 6 sigma^2 for white noise (elementary)
    expected_source = "pre-trigger" if t0 < 0 else "record tail"
    assert str(out["noise_source"].item()) == expected_source


@pytest.mark.parametrize("t0", [T0, 0.0])
def test_snr_tracks_noise_level(t0):
    # 40 dB and 60 dB scenarios (sigma = 1 % and 0.1 % of the peak, construction); the
    # noise floor comes from ~200-500 samples (about 5 % scatter in sigma, 0.4 dB), and noise
    # on the peak sample adds up to ~0.3 dB at 40 dB: within 1.5 dB
    for seed in (13, 14, 15):
        for frac, db in ((0.01, 40.0), (0.001, 60.0)):
            ds, _ = make_hits(resp_noise=frac, n_channels=1, t0=t0, seed=seed)
            snr = float(check_hits(ds)["snr_db"].item())
            assert db - 1.5 < snr < db + 1.5, (frac, snr)


# ------------------------------------------------------------------ force spectrum


def test_half_sine_closed_form_verified_by_quadrature():
    # |F(f)| = (2Tc/pi)|cos(pi f Tc)|/|1-(2fTc)^2| against scipy.integrate.quad of
    # int_0^Tc sin(pi t/Tc) exp(-2j pi f t) dt (independent numerical integration)
    from scipy.integrate import quad

    tc = 1.7e-3
    for f in (0.0, 100.0, 294.117647, 500.0, 882.0, 1500.0, 4000.0):
        re = quad(lambda s, f=f: np.sin(np.pi * s / tc) * np.cos(2 * np.pi * f * s), 0, tc)[0]
        im = quad(lambda s, f=f: np.sin(np.pi * s / tc) * np.sin(2 * np.pi * f * s), 0, tc)[0]
        assert closed_form_half_sine(np.array(f), tc) == pytest.approx(np.hypot(re, im),
                                                                       rel=1e-7, abs=1e-12)
    # landmarks of the closed form, solved here with brentq: -3, -10, -20 dB at
    # f Tc = 0.59, 1.02, 1.30, first zero where cos(pi f Tc) = 0 past f Tc = 1/2: 1.5
    from scipy.optimize import brentq

    def level(u):
        return 20 * np.log10(closed_form_half_sine(np.array(u / tc), tc) / (2 * tc / np.pi))

    for db, u in ((-3, 0.59), (-10, 1.02), (-20, 1.30)):
        assert brentq(lambda v, d=db: level(v) - d, 0.1, 1.49) == pytest.approx(u, abs=0.01)
    assert closed_form_half_sine(np.array(1.5 / tc), tc) < 1e-12


@pytest.mark.parametrize("band", [(0.0, 400.0), (100.0, 600.0), (0.0, 700.0)])
def test_rolloff_matches_closed_form_half_sine(band):
    tc, fs = 2e-3, 51200.0
    ds, _ = make_hits(force_noise=0.0, resp_noise=0.001, tc=tc, fs=fs, n=8192, t0=-0.01)
    out = check_hits(ds, band=band)
    mag = closed_form_half_sine(np.array(band), tc)  # monotonic below f Tc = 1.5
    expected = 20 * np.log10(mag[0] / mag[1])
    assert float(out["force_rolloff_db"].item()) == pytest.approx(expected, abs=0.15)
    # the -20 dB frequency of the spectrum against the closed form's root
    from scipy.optimize import brentq

    f20 = brentq(lambda f: 20 * np.log10(closed_form_half_sine(np.array(f), tc)
                                         / (2 * tc / np.pi)) + 20, 1.0, 1.49 / tc)
    assert float(out["force_bandwidth_hz"].item()) == pytest.approx(f20, rel=0.01)
    # band (0, 700 Hz) is f Tc = 1.4: about 31 dB, more than 20 dB: soft tip
    soft = "soft tip" in str(out["warnings"].item())
    assert soft == (expected > 20.0)


def test_soft_tip_warned_for_band_far_above_inverse_pulse_duration():
    # 5 ms pulse: first spectral zero at 1.5 / Tc = 300 Hz (closed form); band up to 2 kHz
    ds, _ = make_hits(tc=5e-3, force_noise=0.002)
    out = check_hits(ds, band=(0.0, 2000.0))
    assert "soft tip" in str(out["warnings"].item())
    assert float(out["force_rolloff_db"].item()) > 20.0
    assert bool(out["accepted"].item())  # a warning by default, not a rejection
    # the same hit judged for a band the tip covers: at f Tc = 0.5 the closed form is its
    # removable singularity, limit tc / 2 (L'Hopital: cos(pi u / 2) / (1 - u^2) -> pi / 4 as
    # u = 2 f Tc -> 1), so the spectrum is 20 log10(pi / 4) = -2.10 dB re 0 Hz
    expected = -20 * np.log10(np.pi / 4)
    assert expected == pytest.approx(2.098, abs=1e-3)
    assert expected == pytest.approx(
        20 * np.log10((2 * 5e-3 / np.pi) / closed_form_half_sine(np.array(100.0), 5e-3)),
        abs=1e-9)
    out = check_hits(ds, band=(0.0, 100.0))
    assert "soft tip" not in str(out["warnings"].item())
    # force noise 0.2 % of the peak moves the measured level by a few hundredths of a dB
    assert float(out["force_rolloff_db"].item()) == pytest.approx(expected, abs=0.1)


# ------------------------------------------------------------------ decay by record end


@pytest.mark.parametrize("t0", [T0, 0.0])
def test_not_decayed_warned_with_suggestion(t0):
    # zeta = 0.2 %, 120 Hz: decay rate 1.51 /s, record ~0.5 s: the response is still at
    # ~exp(-1.51 * 0.49)/sqrt(2) of its peak in the last 5 % (RMS of a sinusoid is A/sqrt 2)
    modes = ((120.0, 0.002, 1.0),)
    ds, _ = make_hits(modes=modes, n_channels=1, t0=t0, resp_noise=0.002)
    out = check_hits(ds)
    w = str(out["warnings"].item())
    assert "not decayed" in w and "longer record" in w and "exponential window" in w
    t = ds["time"].values
    t_end = t[-int(round(0.05 * t.size)):]
    sigma = 0.002 * 2 * np.pi * 120.0
    expected = 20 * np.log10(np.sqrt(np.mean(np.exp(-2 * sigma * t_end))) / np.sqrt(2))
    assert float(out["end_level_db"].item()) == pytest.approx(expected, abs=0.5)


def test_decayed_response_in_noise_is_not_warned():
    # well decayed (MODES reach < -90 dB by the end); the end holds only noise at -40 dB
    ds, _ = make_hits(resp_noise=0.01, n_channels=1)
    out = check_hits(ds)
    assert "not decayed" not in str(out["warnings"].item())


@pytest.mark.parametrize("t0", [T0, 0.0])
def test_sensor_offset_is_not_taken_for_a_slow_decay(t0):
    # a constant offset of 5 % of the peak on a well-decayed record (construction)
    ds, x_peak = make_hits(n_channels=1, t0=t0)
    ds = ds.copy(deep=True)
    ds["response"].values += 0.05 * x_peak
    out = check_hits(ds)
    assert "not decayed" not in str(out["warnings"].item())
    assert float(out["end_level_db"].item()) < -45.0  # noise 0.2 % of peak: about -54 dB


# ------------------------------------------------------------------ without force


def test_without_force_record():
    ds, _ = make_hits(n_hits=2, with_force=False)
    out = check_hits(ds, band=(0.0, 500.0))
    assert out["accepted"].values.all()
    assert all(w == "no force record" for w in out["warnings"].values)
    for var in ("double_hit_ratio", "force_rolloff_db", "peak_force", "pulse_duration_s"):
        assert np.isnan(out[var].values).all(), var


# ------------------------------------------------------------------ bad input


def test_bad_input_errors():
    ds, _ = make_hits()
    with pytest.raises(RecordError, match="expected an xarray.Dataset"):
        check_hits({"response": 1})
    with pytest.raises(RecordError, match=r"rec.nc: band upper edge 6000 Hz is above the Nyquist"):
        check_hits(ds, band=(0, 6000), source="rec.nc")
    with pytest.raises(ModalnbError, match=r"`band` must be a pair"):
        check_hits(ds, band=300.0)
    with pytest.raises(ModalnbError, match=r"`band` must satisfy"):
        check_hits(ds, band=(500.0, 100.0))
    with pytest.raises(ModalnbError, match=r"`clip_level` must be in"):
        check_hits(ds, clip_level=1.5)
    with pytest.raises(ModalnbError, match="expects the Dataset returned by check_hits"):
        format_hit_report(ds)


# ------------------------------------------------------------------ report


def test_report_table_and_summary():
    clean, _ = make_hits(n_hits=2, seed=20)
    double, _ = make_hits(n_hits=1, seed=21, second=(10e-3, 0.4))
    import xarray as xr

    ds = xr.concat([clean, double.assign_coords(hit=[3])], dim="hit")
    text = format_hit_report(check_hits(ds, band=(0.0, 800.0)), source="bench.nc")
    lines = text.splitlines()
    assert lines[0] == "hit checks for bench.nc"
    assert lines[-1] == "2 of 3 hits accepted"  # two clean hits and one double (construction)
    header = next(line for line in lines if "accepted" in line and "SNR" in line)
    for unit in ("peak force [N]", "pulse [ms]", "SNR [dB]", "roll-off [dB]"):
        assert unit in header
    rows = [line for line in lines if line.strip()[:1].isdigit() and "hits accepted" not in line]
    assert len(rows) == 3
    col = header.index("accepted")
    assert [r[col:col + 3].strip() for r in rows] == ["yes", "yes", "no"]
    assert "rejected: double hit" in rows[2]
    # the pulse column is in ms: the scenario's 1 ms half-sine (construction) measures
    # Tc (1 - 2 asin(0.02) / pi) = 0.987 ms, give or take a sample (0.1 ms)
    p_end = header.index("pulse [ms]") + len("pulse [ms]")
    pulses = [float(r[:p_end].split()[-1]) for r in rows]
    expected = 1.0 * (1 - 2 * np.arcsin(0.02) / np.pi)  # 0.987 ms
    assert all(abs(p - expected) <= 0.1 for p in pulses), pulses
    # columns aligned: the SNR column ends at the same place on every row
    end = header.index("SNR [dB]") + len("SNR [dB]")
    assert all(r[end - 1] != " " and r[end] == " " for r in rows)


def test_result_round_trips_through_netcdf(tmp_path):
    import xarray as xr

    ds, _ = make_hits(n_hits=2)
    out = check_hits(ds, band=(0, 800))
    path = tmp_path / "checks.nc"
    out.to_netcdf(path, engine="h5netcdf")
    back = xr.open_dataset(path, engine="h5netcdf").load()
    assert back["accepted"].values.tolist() == out["accepted"].values.tolist()
    assert back["reason"].values.tolist() == out["reason"].values.tolist()


def test_checks_import_no_widget_stack():
    code = ("import sys, modalnb.checks; "
            "bad = [m for m in ('ipywidgets', 'plotly') if m in sys.modules]; "
            "sys.exit(1 if bad else 0)")
    assert subprocess.run([sys.executable, "-c", code]).returncode == 0


# ------------------------------------------------------------------ second taps: below the
# level, and without a force record


def test_second_tap_below_the_level_is_measured_not_flagged():
    # a second half-sine 3 % of the peak, 10 ms later, in force noise 0.1 % of the peak
    # (construction): 30 noise sigma, so it is found and measured, but it is below the
    # documented 10 % double-hit level, so the hit stays accepted without a finding
    ds, _ = make_hits(n_hits=5, seed=40, second=(10e-3, 0.03), force_noise=0.001)
    out = check_hits(ds)
    assert out["accepted"].values.all()
    assert not any("double hit" in r + w for r, w in zip(out["reason"].values,
                                                         out["warnings"].values, strict=True))
    # the largest excursion is the second tap's peak: 0.03 give or take a few noise sigma
    np.testing.assert_allclose(out["double_hit_ratio"].values, 0.03, atol=0.005)
    np.testing.assert_allclose(out["double_hit_delay_s"].values, 10e-3, atol=1.5 / FS)


def _two_taps_no_force(delay, ratio, *, noise, seed, n_hits=1):
    """Response only: x(t) = h(t) + ratio h(t - delay), written out from its closed form.

    h(t) = sum_k A_k exp(-zeta_k wn_k t) sin(wd_k t) for t >= 0 (0 before), wd = wn
    sqrt(1 - zeta^2): the impulse response of viscously damped modes (e.g. Inman,
    Engineering Vibration, ch. 1 [from memory]); two channels with shapes 1 and -0.6.
    """
    t = T0 + np.arange(N) / FS
    x = np.zeros(N)
    for fn, zeta, amp in MODES:
        wn = 2 * np.pi * fn
        wd = wn * np.sqrt(1 - zeta**2)
        for t_tap, a in ((0.0, 1.0), (delay, ratio)):
            tau = np.clip(t - t_tap, 0.0, None)
            x += np.where(t >= t_tap, a * amp * np.exp(-zeta * wn * tau) * np.sin(wd * tau), 0.0)
    rng = np.random.default_rng(seed)
    peak = np.max(np.abs(x))
    resp = np.stack([[s * x + noise * peak * rng.standard_normal(N) for s in (1.0, -0.6)]
                     for _ in range(n_hits)])
    return records_from_arrays(resp, FS, t0=T0)


@pytest.mark.parametrize(("delay", "ratio"), [(6e-3, 0.5), (10e-3, 0.3), (20e-3, 0.15)])
def test_double_hit_found_without_a_force_record(delay, ratio):
    ds = _two_taps_no_force(delay, ratio, noise=0.002, seed=int(1e4 * delay))
    out = check_hits(ds)
    # truth: the second tap's strength and delay by construction
    assert not bool(out["accepted"].item())
    reason = str(out["reason"].item())
    assert reason.startswith("double hit (second excitation in the ch1 response"), reason
    assert reason.endswith("ms later)")
    assert float(out["double_hit_ratio"].item()) == pytest.approx(ratio, abs=0.15 * ratio)
    assert float(out["double_hit_delay_s"].item()) == pytest.approx(delay, abs=1.5 / FS)
    assert str(out["warnings"].item()) == "no force record"


def test_second_tap_below_the_level_without_force_is_not_flagged():
    # 3 % second tap (construction), below the documented 10 % level: measured, accepted
    ds = _two_taps_no_force(10e-3, 0.03, noise=0.002, seed=41, n_hits=4)
    out = check_hits(ds)
    assert out["accepted"].values.all()
    assert all(w == "no force record" for w in out["warnings"].values)
    np.testing.assert_allclose(out["double_hit_ratio"].values, 0.03, atol=0.01)


@pytest.mark.parametrize("noise", [0.002, 0.01])
def test_clean_hits_without_force_are_not_double_hits(noise):
    ds = _two_taps_no_force(10e-3, 0.0, noise=noise, seed=42, n_hits=20)
    out = check_hits(ds)
    assert out["accepted"].values.all(), out["reason"].values
    ratios = out["double_hit_ratio"].values
    assert np.all(np.isnan(ratios) | (ratios < 0.10))


def test_local_peaks_agree_with_scipy_peak_prominences():
    # independent reference: scipy.signal.find_peaks and peak_prominences, on sequences
    # with plateaus (values rounded to a few levels)
    from scipy.signal import find_peaks, peak_prominences

    from modalnb.checks.double_hit import local_peaks

    rng = np.random.default_rng(43)
    for _ in range(200):
        x = np.round(rng.random(int(rng.integers(3, 40))) * 5) / 5
        idx, prom = local_peaks(x)
        ref, _ = find_peaks(x)
        assert idx.tolist() == ref.tolist()
        if ref.size:
            np.testing.assert_allclose(prom, peak_prominences(x, ref)[0], rtol=0, atol=1e-12)


# ------------------------------------------------------------------ the force spectrum shown


def test_force_spectrum_is_the_one_the_soft_tip_check_judges():
    from modalnb.checks import force_spectrum

    tc, fs = 2e-3, 51200.0
    ds, _ = make_hits(force_noise=0.0, resp_noise=0.001, tc=tc, fs=fs, n=8192, t0=-0.01)
    freq, level = force_spectrum(ds, 1)
    assert freq[0] == 0.0 and level[0] == 0.0 and freq[-1] == pytest.approx(fs / 2)
    # against the closed form of a half-sine (derived in closed_form_half_sine), in dB re
    # 0 Hz, below its first zero
    f = np.array([100.0, 250.0, 400.0, 600.0])
    expected = 20 * np.log10(closed_form_half_sine(f, tc) / (2 * tc / np.pi))
    np.testing.assert_allclose(np.interp(f, freq, level), expected, atol=0.15)
    # f Tc = 1/2: 20 log10(pi / 4) = -2.10 dB (the limit tc / 2 of the closed form)
    assert np.interp(0.5 / tc, freq, level) == pytest.approx(20 * np.log10(np.pi / 4), abs=0.05)
    # the check's numbers come from this spectrum: bandwidth at its -20 dB crossing, and
    # the roll-off across (0, 400 Hz) its spread there (monotonic below f Tc = 1.5)
    out = check_hits(ds, band=(0.0, 400.0))
    first = int(np.flatnonzero(level <= -20.0)[0])
    assert freq[first - 1] <= float(out["force_bandwidth_hz"].item()) <= freq[first]
    assert float(out["force_rolloff_db"].item()) == pytest.approx(
        -np.interp(400.0, freq, level), abs=0.02)


def test_force_spectrum_errors_are_one_line():
    from modalnb.checks import force_spectrum

    ds, _ = make_hits(n_hits=2)
    with pytest.raises(RecordError, match=r"unknown hit 9; the hit labels are \[1, 2\]"):
        force_spectrum(ds, 9)
    no_force, _ = make_hits(with_force=False)
    with pytest.raises(RecordError, match="hit 1: no force record"):
        force_spectrum(no_force, 1)


def test_unknown_threshold_is_a_one_line_error_with_a_hint():
    ds, _ = make_hits()
    with pytest.raises(ModalnbError, match=r"unknown threshold `clip_levle`\. Did you mean "
                                           r"'clip_level'\?") as err:
        check_hits(ds, clip_levle=0.9)
    assert "\n" not in str(err.value)
    with pytest.raises(ModalnbError, match="unknown threshold `no_such`"):
        check_hits(ds, no_such=1)
    with pytest.raises(ModalnbError, match=r"`flat_run` must be an integer >= 2"):
        check_hits(ds, flat_run=1)


def test_check_hits_does_not_import_scipy_signal():
    # the checks are numpy only (the package docstring says so): a first check_hits call
    # must not pull in scipy.signal, whose import dominated the command line's cold start
    code = ("import sys, numpy as np\n"
            "from modalnb.checks import check_hits\n"
            "from modalnb.records import records_from_arrays\n"
            "t = np.arange(-64, 1984) / 2048.0\n"
            "f = np.where((t >= 0) & (t < 2e-3), np.sin(np.pi * t / 2e-3), 0.0)\n"
            "x = np.exp(-20 * t) * np.sin(2 * np.pi * 100 * t) * (t >= 0)\n"
            "x = x + 1e-4 * np.random.default_rng(0).standard_normal(t.size)\n"
            "check_hits(records_from_arrays(x, 2048.0, force=f, t0=t[0]), band=(0, 500))\n"
            "check_hits(records_from_arrays(x, 2048.0, t0=t[0]))\n"
            "print(','.join(m for m in ('scipy.signal', 'plotly', 'ipywidgets') if m in sys.modules))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_demo_decisions_match_the_generator_truth():
    # the demo generator records which hit bounced and which overloaded (its own truth
    # file, written from the physics it simulated, not from the checks)
    from modalnb import demo

    truth = demo.load_demo_truth()
    out = check_hits(demo.load_demo())
    rejected = {int(h): str(r) for h, r, ok in zip(out["hit"].values, out["reason"].values,
                                                  out["accepted"].values, strict=True) if not ok}
    assert set(rejected) == {truth["double_hit"]["hit"], truth["clipped_hit"]["hit"]}
    assert rejected[truth["double_hit"]["hit"]].startswith("double hit")
    assert rejected[truth["clipped_hit"]["hit"]].startswith("clipping")
    dh = out.sel(hit=truth["double_hit"]["hit"])
    assert float(dh["double_hit_ratio"]) == pytest.approx(
        truth["double_hit"]["second_to_first_peak_ratio"], abs=0.03)
    assert float(dh["double_hit_delay_s"]) == pytest.approx(truth["double_hit"]["delay_s"],
                                                            abs=2 / demo.load_demo().attrs["sample_rate"])


@pytest.mark.parametrize("pre_trigger", [0, 200])
def test_noise_free_single_decay_is_not_a_double_hit(pre_trigger):
    # truth: one impulse response h(t) = exp(-zeta wn t) sin(wd t) (a single tap, written
    # out here), noise free, no force record; with no pre-trigger the tap sits at the
    # record's first sample. Rounding residue of the predictor must not pass for a tap.
    import numpy as np

    from modalnb import check_hits, records_from_arrays

    fs = 1024.0
    t = np.arange(-pre_trigger, 2048) / fs
    wn, zeta = 2 * np.pi * 40.0, 0.008
    x = np.where(t >= 0, np.exp(-zeta * wn * t) * np.sin(wn * np.sqrt(1 - zeta**2) * t), 0.0)
    ds = records_from_arrays(x, fs, t0=float(t[0]))
    chk = check_hits(ds)
    assert "double hit" not in str(chk["reason"].values[0])
    assert bool(chk["accepted"].values[0])
