"""Channels of extreme scale (issue 10): one channel x1e300 or x1e-300.

Two references outside the code under test:

* the closed form: each generated mode x(t) = exp(-sigma t) sin(w_d t) has natural
  frequency f_n = sqrt(w_d^2 + sigma^2) / (2 pi) and damping ratio
  zeta = sigma / sqrt(w_d^2 + sigma^2) (single-degree-of-freedom relations, e.g. Inman,
  Engineering Vibration, the underdamped response);
* linearity: a channel recorded in other units is the same signal times a constant, so
  poles, damping, signal-to-noise ratios and fit quality do not change, and that channel's
  residues scale by the constant (a metamorphic relation: the normal-scale table is the
  comparison, the units change is the test).

No numpy warning and no LAPACK message may reach the user's terminal (a fresh process
under ``-W error``, its stderr captured).
"""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from modalnb import check_hits, fit_modes
from modalnb.io import save_records
from modalnb.records import records_from_arrays

FS = 2048.0
MODES = ((11.0, 3.0), (30.0, 5.0))  # damped frequency (Hz), decay rate sigma (1/s)


def _records(response_scale: float = 1.0, force_scale: float = 1.0):
    t = np.arange(-256, 4096) / FS
    rng = np.random.default_rng(0)
    (f1, s1), (f2, s2) = MODES
    m1 = np.exp(-s1 * t) * np.sin(2 * np.pi * f1 * t)
    m2 = np.exp(-s2 * t) * np.sin(2 * np.pi * f2 * t)
    chans = [m1 + 0.5 * m2, m1 - 0.8 * m2, 0.3 * m1 + 0.2 * m2]
    x = np.stack([np.where(t >= 0, c, 0.0) for c in chans])
    resp = np.stack([x] * 3) + 1e-4 * rng.standard_normal((3, 3, t.size))
    resp[:, 0] *= response_scale
    f = np.where((t >= 0) & (t < 2e-3), np.sin(np.pi * t / 2e-3), 0.0)
    force = force_scale * (np.stack([f, 1.1 * f, 0.9 * f]) + 1e-5 * rng.standard_normal((3, t.size)))
    return records_from_arrays(resp, FS, force=force, t0=t[0])


@pytest.fixture(scope="module")
def normal():
    ds = _records()
    return check_hits(ds), fit_modes(ds)


def _truth():
    fn = [math.hypot(2 * np.pi * fd, s) / (2 * np.pi) for fd, s in MODES]
    zeta = [s / math.hypot(2 * np.pi * fd, s) for fd, s in MODES]
    return np.array(fn), np.array(zeta)


@pytest.mark.parametrize(("resp_scale", "force_scale"),
                         [(1e300, 1.0), (1e-300, 1.0), (1.0, 1e300), (1.0, 1e-300)])
def test_extreme_units_give_the_same_table(normal, resp_scale, force_scale):
    checks0, res0 = normal
    ds = _records(resp_scale, force_scale)
    checks = check_hits(ds)
    res = fit_modes(ds)
    # the closed form (independent truth) and the normal-scale table (linearity)
    fn, zeta = _truth()
    np.testing.assert_allclose(res["frequency_hz"].values, fn, rtol=1e-3)
    np.testing.assert_allclose(res["damping_ratio"].values, zeta, rtol=2e-2)
    np.testing.assert_allclose(res["frequency_hz"].values, res0["frequency_hz"].values, rtol=1e-8)
    np.testing.assert_allclose(res["damping_ratio"].values, res0["damping_ratio"].values, rtol=1e-7)
    # residues in the original units: channel 0 times resp_scale, all over force_scale
    unit = np.array([resp_scale, 1.0, 1.0]) / force_scale
    for part in ("residue_real", "residue_imag"):
        np.testing.assert_allclose(res[part].values / unit, res0[part].values, rtol=1e-6,
                                   atol=1e-9 * np.abs(res0[part].values).max())
    # normalised shapes once the units are taken out
    psi = (res["residue_real"].values + 1j * res["residue_imag"].values) / unit
    amp = np.abs(psi) / np.abs(psi).max(axis=1, keepdims=True)
    np.testing.assert_allclose(amp, res0["shape_amplitude"].values, rtol=1e-6, atol=1e-9)
    # signal-to-noise and fit quality are ratios: finite and unchanged
    assert np.all(np.isfinite(checks["channel_snr_db"].values))
    np.testing.assert_allclose(checks["channel_snr_db"].values, checks0["channel_snr_db"].values,
                               rtol=1e-9)
    assert list(checks["warnings"].values) == list(checks0["warnings"].values)
    assert list(checks["accepted"].values) == list(checks0["accepted"].values)
    np.testing.assert_allclose(res["fit_r2"].values, res0["fit_r2"].values, rtol=1e-9)
    # cross-checks run wherever they run at normal scale, and give finite values there
    for name in ("xcheck_log_decrement_damping", "xcheck_half_power_damping",
                 "xcheck_hilbert_damping"):
        ok0 = np.isfinite(res0[name].values)
        assert np.all(np.isfinite(res[name].values[ok0])), name
        assert np.all(np.abs(res[name].values[ok0] - zeta[ok0]) < 0.5 * zeta[ok0]), name
    assert all(s.startswith("ok") for s in res["status"].values)


@pytest.mark.parametrize("scale", [1e300, 1e-300])
def test_no_warning_reaches_the_terminal(tmp_path, scale):
    path = save_records(_records(scale), tmp_path / "rec.nc")
    proc = subprocess.run(
        [sys.executable, "-W", "error", "-m", "modalnb.cli", "fit", str(path),
         "--out", str(tmp_path / "out"), "--quiet"],
        capture_output=True, text=True, timeout=600,  # a hang guard, not a speed check
    )
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    assert "DLASCL" not in proc.stdout


def test_noise_rms_is_scale_safe():
    """``rms(c x) = |c| rms(x)`` (homogeneity of a norm) where the naive form overflows
    (1e300^2) or underflows (1e-300^2) to 0."""
    from modalnb._noise import noise_sigma, rms

    x = np.random.default_rng(3).normal(0.0, 1.0, 5000)
    ref = float(np.sqrt(np.mean(x**2)))
    for c in (1e300, 1e-300, 1e-310):
        assert float(rms(c * x)) == pytest.approx(c * ref, rel=1e-12 if c > 1e-308 else 1e-3)
        assert float(noise_sigma(c * x)) == pytest.approx(c * np.std(x), rel=1e-12 if c > 1e-308 else 1e-3)


def _scaled(exponents, force_exponent):
    ds = _records()
    ds = ds.copy(deep=True)
    ds["response"].values *= (10.0 ** np.asarray(exponents, float))[None, :, None]
    ds["force"].values *= 10.0 ** force_exponent
    return ds


# ---------------------------------------------------------------- property tests (hypothesis)
_exps = st.lists(st.integers(-300, 300), min_size=3, max_size=3)

@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_exps, st.integers(-300, 300))
def test_check_hits_at_any_units_warns_nothing_and_agrees(exponents, force_exponent):
    """Any units per channel: the same decisions and SNR as at normal scale (linearity),
    and no numpy warning."""
    import warnings

    ref = check_hits(_records())
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = check_hits(_scaled(exponents, force_exponent))
    assert list(out["accepted"].values) == list(ref["accepted"].values)
    np.testing.assert_allclose(out["channel_snr_db"].values, ref["channel_snr_db"].values,
                               rtol=1e-9)

@settings(max_examples=4, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.integers(-150, 150), min_size=3, max_size=3), st.integers(-150, 150))
def test_fit_at_any_units_is_a_table_or_one_error(exponents, force_exponent):
    """Any units within double precision of each other: the same poles, or our one-line
    error; never a numpy warning or another exception."""
    import warnings

    from modalnb import ModalnbError

    fn, _ = _truth()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        try:
            res = fit_modes(_scaled(exponents, force_exponent))
        except ModalnbError as exc:
            assert "\n" not in str(exc)
            return
    np.testing.assert_allclose(res["frequency_hz"].values, fn, rtol=1e-3)
