"""Measured and synthesised FRFs against the analytic FRF of a lumped chain.

Physics: a 2-DOF chain ``M x'' + C x' + K x = f`` (non-proportional damping: a local
damper at DOF 1), struck at one DOF by a half-sine force of 10 ms (20 samples at
2048 Hz), integrated by ``scipy.integrate.solve_ivp`` (DOP853, rtol 1e-10) piecewise
over the pulse and the ring-down; the response is the acceleration
``x'' = M^-1 (f - C x' - K x)``. 8 s records ring down to below 1e-3 of their peak.

Truth (outside modalnb): the receptance ``H_d(w) = (K - w^2 M + i w C)^-1`` and the
accelerance ``H_a = (i w)^2 H_d`` (any structural dynamics text, e.g. Ewins 2000, *Modal
Testing*, ch. 2; from memory); with an exponential window ``e^(-t/tau)`` on the
response, the Laplace shift ``e^(-t/tau) h(t) <-> H(s + 1/tau)`` evaluated at ``s = i w``.
Coherence with noise on the response only: ``gamma^2 = S / (1 + S)``, ``S = |H F|^2 /
E|N|^2`` per frequency bin (Bendat & Piersol 2010, *Random Data*, 4th ed., ch. 6; from
memory).

Where the comparisons hold: the DFT of a sampled half-sine differs from its Fourier
integral by about ``x^2 / 3``, ``x = pi / (2 * samples per pulse)`` (rectangle rule of
``sin``: 0.2 % here, our own arithmetic), so the measured FRF is compared with a 1 %
tolerance, only where the force spectrum is within 10 dB of its peak (below 1 / T_c:
the half-sine's -10 dB point is at f T_c = 1.02, ../METHODS table) and with an absolute
floor of 0.1 % of the peak at antiresonances.
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr
from scipy.integrate import solve_ivp

import modalnb

FS = 2048.0
PRE = 128
N = 16384
TC = 0.01
M2 = np.diag([1.0, 0.8])
K2 = 4e4 * np.array([[2.0, -1.0], [-1.0, 1.0]])
C2 = 1e-4 * K2 + 0.3 * M2
C2[0, 0] += 1.0  # local damper: complex modes
MINV = np.linalg.inv(M2)
T = (np.arange(N) - PRE) / FS


def half_sine(t, amp=1.0, tc=TC):
    return np.where((t >= 0) & (t <= tc), amp * np.sin(np.pi * np.clip(t, 0, tc) / tc), 0.0)


def struck(drive, amp=100.0):
    """Acceleration (dof, time) and force (time) of one hit at DOF `drive` (solve_ivp)."""
    n = M2.shape[0]
    e = np.zeros(n)
    e[drive] = 1.0

    def rhs(t, z, forced):
        x, v = z[:n], z[n:]
        f = e * half_sine(t, amp) if forced else 0.0
        return np.r_[v, MINV @ (f - C2 @ v - K2 @ x)]

    z = np.zeros((2 * n, T.size))
    pulse = (T >= 0) & (T <= TC)
    after = T > TC
    kw = dict(rtol=1e-10, atol=1e-14, method="DOP853")
    s1 = solve_ivp(rhs, (0.0, TC), np.zeros(2 * n), t_eval=np.r_[T[pulse], TC], args=(True,),
                   max_step=TC / 40, **kw)
    s2 = solve_ivp(rhs, (TC, T[-1]), s1.y[:, -1], t_eval=T[after], args=(False,), **kw)
    assert s1.success and s2.success
    z[:, pulse], z[:, after] = s1.y[:, :-1], s2.y  # s1's last column: the state at TC
    force = half_sine(T, amp)
    acc = MINV @ (e[:, None] * force[None] - C2 @ z[n:] - K2 @ z[:n])
    return acc, force


def records(hits, *, noise=0.0, force_noise=0.0, seed=0, tau=None):
    """A record set of hits ``[(drive, amp), ...]``, with excitation coords."""
    rng = np.random.default_rng(seed)
    cache = {}
    resp, force = [], []
    for drive, amp in hits:
        if drive not in cache:
            cache[drive] = struck(drive, 1.0)  # linear: scale one simulation per DOF
        a, f = cache[drive]
        resp.append(a * amp + noise * rng.standard_normal(a.shape))
        force.append(f * amp + force_noise * rng.standard_normal(f.shape))
    resp = np.array(resp)
    if tau is not None:
        resp = resp * np.where(T >= 0, np.exp(-np.clip(T, 0, None) / tau), 1.0)
    ds = modalnb.records_from_arrays(
        resp, FS, force=np.array(force), t0=T[0], channels=["a1", "a2"], node=["m1", "m2"],
        direction=["+Z", "+Z"], attrs=None if tau is None else {"exponential_window_tau_s": tau})
    return ds.assign_coords(
        excitation_node=("hit", np.array([f"m{d + 1}" for d, _ in hits], dtype=object)),
        excitation_direction=("hit", np.array(["+Z"] * len(hits), dtype=object)))


def accelerance(f_hz, shift=0.0):
    """Analytic accelerance (frequency, response dof, drive dof) at s = i w + shift."""
    s = 2j * np.pi * np.asarray(f_hz) + shift
    return np.array([si**2 * np.linalg.inv(K2 + si**2 * M2 + si * C2) for si in s])


def truth_modes():
    from scipy.linalg import eig

    n = M2.shape[0]
    a = np.block([[np.zeros((n, n)), np.eye(n)], [-MINV @ K2, -MINV @ C2]])
    lam = eig(a)[0]
    lam = lam[lam.imag > 0]
    lam = lam[np.argsort(np.abs(lam))]
    return np.abs(lam) / (2 * np.pi), -lam.real / np.abs(lam)


def assert_close_where_forced(measured, analytic, level_db, f, rtol=0.01):
    band = (level_db > -10) & (f > 2.0)
    assert band.sum() > 300
    err = np.abs(measured[band] - analytic[band])
    floor = 1e-3 * np.abs(analytic[band]).max()
    assert np.all(err <= rtol * np.abs(analytic[band]) + floor), float(
        np.max(err / (np.abs(analytic[band]) + floor / rtol)))


@pytest.fixture(scope="module")
def roving():
    # two excitation points, two hits each at different force levels
    return records([(0, 80.0), (0, 120.0), (1, 60.0), (1, 150.0)])


@pytest.mark.parametrize("estimator", ["H1", "H2"])
def test_noise_free_frf_matches_the_analytic_accelerance(roving, estimator):
    ds = modalnb.frf(roving, estimator=estimator)
    assert tuple(ds["frf"].dims) == ("excitation", "channel", "frequency")
    assert ds["excitation"].values.tolist() == ["m1+Z", "m2+Z"]
    assert ds["n_hits"].values.tolist() == [2, 2]
    assert ds["frf"].attrs["units"] == "(m/s^2)/(N)"
    f = ds["frequency"].values
    np.testing.assert_allclose(f[1], FS / N)  # rfft grid in Hz
    truth = accelerance(f)  # (f, response, drive)
    for e, drive in enumerate([0, 1]):
        level = ds["force_level_db"].values[e]
        for c in range(2):
            assert_close_where_forced(ds["frf"].values[e, c], truth[:, c, drive], level, f)
    # reciprocity of the truth shows in the measurement: H_12 = H_21 (Maxwell-Betti)
    band = (ds["force_level_db"].values[0] > -10) & (f > 2)
    h12, h21 = ds["frf"].values[1, 0, band], ds["frf"].values[0, 1, band]
    assert np.max(np.abs(h12 - h21)) < 0.01 * np.max(np.abs(h12))


def test_nfft_pads_with_zeros_onto_a_finer_grid(roving):
    ds = modalnb.frf(roving, nfft=2 * N)
    f = ds["frequency"].values
    assert f.size == N + 1 and np.isclose(f[1], FS / (2 * N))
    truth = accelerance(f)
    assert_close_where_forced(ds["frf"].values[0, 1], truth[:, 1, 0], ds["force_level_db"].values[0], f)


def test_accept_leaves_out_a_mislabelled_hit():
    # hit 3 says m1 but was struck at m2: accepted, it spoils the m1 FRF; rejected, it does not
    rec = records([(0, 100.0), (0, 90.0), (1, 100.0)])
    rec = rec.assign_coords(excitation_node=("hit", np.array(["m1", "m1", "m1"], dtype=object)))
    f = np.fft.rfftfreq(N, 1 / FS)
    truth = accelerance(f)[:, 0, 0]
    spoiled = modalnb.frf(rec)
    clean = modalnb.frf(rec, accept=[True, True, False])
    assert clean["n_hits"].item() == 2 and spoiled["n_hits"].item() == 3
    level = clean["force_level_db"].values[0]
    assert_close_where_forced(clean["frf"].values[0, 0], truth, level, f)
    band = (level > -10) & (f > 2)
    assert np.max(np.abs(spoiled["frf"].values[0, 0, band] - truth[band])) > 0.1 * np.max(np.abs(truth[band]))
    # the decisions of a table (hit_accepted over hit) are taken as they are
    table = xr.Dataset({"hit_accepted": ("hit", [True, True, False])}, coords={"hit": [1, 2, 3]})
    np.testing.assert_array_equal(modalnb.frf(rec, accept=table)["frf"].values, clean["frf"].values)
    np.testing.assert_array_equal(modalnb.frf(rec, accept={1: True, 2: True, 3: False})["frf"].values,
                                  clean["frf"].values)


def test_coherence_near_one_at_high_snr_and_falling_where_noise_dominates():
    sigma = 0.5  # m/s^2 on the response; the peak acceleration is about 90 m/s^2
    n_hits = 8
    rec = records([(0, 100.0)] * n_hits, noise=sigma, seed=3)
    ds = modalnb.frf(rec)
    f = ds["frequency"].values
    coh = ds["coherence"].values[0]
    # expected per-bin SNR: |H F|^2 over the noise's E|N_k|^2 = N sigma^2 (white noise, rfft)
    force = rec["force"].values[0] * 1.0
    spec_f = np.fft.rfft(force)
    snr = np.abs(accelerance(f)[:, :, 0].T * spec_f[None, :]) ** 2 / (N * sigma**2)
    expected = snr / (1 + snr)
    fn, _ = truth_modes()
    for c in range(2):
        near = np.zeros(f.size, bool)
        for fr in fn:
            near |= np.abs(f - fr) < 1.0
        assert expected[c, near].min() > 0.999  # high SNR at the resonances ...
        assert coh[c, near].min() > 0.99         # ... and coherence near 1 there
        low = expected[c] < 0.05                 # noise dominates (force-spectrum zeros, high f)
        assert low.sum() > 500
        assert np.mean(coh[c, low]) < 0.3        # coherence falls (estimate of 0 with 8 hits: ~1/8)
        assert np.mean(coh[c, expected[c] > 0.99]) > 0.98
    assert ds.attrs["coherence_note"] == ""
    # one hit: coherence is 1 by construction, and the result says it says nothing
    one = modalnb.frf(rec, accept=[True] + [False] * (n_hits - 1))
    np.testing.assert_allclose(one["coherence"].values, 1.0, atol=1e-9)
    assert "one hit" in one.attrs["coherence_note"]


def test_force_window_removes_force_noise_outside_the_pulse():
    # white noise on the force record over all 8 s: without the window it adds to G_ff at
    # every frequency and biases H1 low; the window keeps only the 10 ms pulse
    rec = records([(0, 100.0)] * 4, force_noise=2.0, seed=5)
    f = np.fft.rfftfreq(N, 1 / FS)
    truth = accelerance(f)[:, 1, 0]
    raw = modalnb.frf(rec)
    win = modalnb.frf(rec, force_window=True)
    band = (win["force_level_db"].values[0] > -10) & (f > 2)
    err_raw = np.median(np.abs(raw["frf"].values[0, 1, band] / truth[band] - 1))
    err_win = np.median(np.abs(win["frf"].values[0, 1, band] / truth[band] - 1))
    assert err_win < 0.01 < err_raw
    assert "pulse kept" in win.attrs["force_window"]


def _near_modes(f, fn, zeta, k=3.0):
    near = np.zeros(f.size, bool)
    for fr, z in zip(fn, zeta, strict=True):
        near |= np.abs(f - fr) < k * z * fr
    return near


def test_synthesised_frf_of_a_fit_matches_the_analytic_near_resonances():
    rec = records([(0, 100.0)])
    table = modalnb.fit_modes(rec, accept=[True])
    fn, zeta = truth_modes()
    np.testing.assert_allclose(table["frequency_hz"].values, fn, rtol=1e-5)
    f = np.linspace(5.0, 100.0, 4000)
    syn = modalnb.synthesise_frf(table, f, excitation="m1+Z")
    assert syn["excitation"].values.tolist() == ["m1+Z"]
    assert syn["frf"].attrs["units"] == "(m/s^2)/(N)"
    truth = accelerance(f)[:, :, 0]
    near = _near_modes(f, fn, zeta)
    # cross point: the modal sum is the whole accelerance ((M^-1)_21 = 0 for lumped masses)
    h = syn["frf"].values[0, 1]
    assert np.max(np.abs(h[near] / truth[near, 1] - 1)) < 0.01
    # driving point: the modal sum is the accelerance less its constant (M^-1)_11 (docstring)
    h = syn["frf"].values[0, 0]
    ref = truth[:, 0] - MINV[0, 0]
    assert np.max(np.abs(h[near] / ref[near] - 1)) < 0.01
    # and the measured FRF of the same record agrees with the synthesis near resonances
    meas = modalnb.frf(rec)
    g = meas["frequency"].values
    syn_g = modalnb.synthesise_frf(table, meas, excitation="m1+Z")["frf"].values[0, 1]
    sel = _near_modes(g, fn, zeta)
    assert np.max(np.abs(syn_g[sel] / meas["frf"].values[0, 1, sel] - 1)) < 0.01


def test_exponential_window_labelled_and_matched_by_the_synthesis():
    tau = 2.0  # 1/tau = 0.5 1/s against the modes' own decay rates of 1.2 and 6.1 1/s
    rec = records([(0, 100.0)], tau=tau)
    meas = modalnb.frf(rec)
    assert meas.attrs["windowed_records"].startswith("yes")
    assert meas.attrs["exponential_window_tau_s"] == tau
    assert modalnb.frf(records([(0, 100.0)])).attrs["windowed_records"] == "no"
    f = meas["frequency"].values
    windowed_truth = accelerance(f, shift=1.0 / tau)[:, :, 0]
    level = meas["force_level_db"].values[0]
    # the force is not windowed: F_w / F over the 10 ms pulse is about 1 - T_c/(2 tau) = 0.25 %
    for c in range(2):
        assert_close_where_forced(meas["frf"].values[0, c], windowed_truth[:, c], level, f, rtol=0.015)
    fn, zeta = truth_modes()
    near = _near_modes(f, fn, zeta)
    plain = accelerance(f)[:, 1, 0]
    peak = int(np.argmin(np.abs(f - fn[0])))  # the window's damping matters at resonance
    assert abs(meas["frf"].values[0, 1, peak] / plain[peak] - 1) > 0.2
    table = modalnb.fit_modes(rec, accept=[True])
    np.testing.assert_allclose(table["damping_ratio"].values, zeta, rtol=1e-3)  # window undone
    syn = modalnb.synthesise_frf(table, meas, excitation="m1+Z")
    assert syn.attrs["windowed_records"].startswith("yes")
    h = syn["frf"].values[0, 1]
    assert np.max(np.abs(h[near] / meas["frf"].values[0, 1, near] - 1)) < 0.015
    # windowed=False: the structure's own FRF
    bare = modalnb.synthesise_frf(table, meas, excitation="m1+Z", windowed=False)["frf"].values[0, 1]
    assert np.max(np.abs(bare[near] / plain[near] - 1)) < 0.015


def test_write_frf_opens_in_a_plain_netcdf_reader(tmp_path, roving):
    netCDF4 = pytest.importorskip("netCDF4")
    ds = modalnb.frf(roving)
    path = modalnb.write_frf(ds, tmp_path / "frf.nc")
    with netCDF4.Dataset(path) as nc:  # the netCDF-C library's reader, not xarray
        re, im = nc["frf_real"][:], nc["frf_imag"][:]
        assert tuple(nc["frf_real"].dimensions) == ("excitation", "channel", "frequency")
        assert list(nc["excitation"][:]) == ["m1+Z", "m2+Z"]
        coh = nc["coherence"][:]
    np.testing.assert_array_equal(np.asarray(re) + 1j * np.asarray(im), ds["frf"].values)
    np.testing.assert_array_equal(np.asarray(coh), ds["coherence"].values)
    assert not list(tmp_path.glob(".*tmp"))  # atomic: no temporary file left


def _one_line(exc):
    msg = str(exc.value)
    assert "\n" not in msg
    return msg


def test_one_line_errors(roving):
    no_force = roving.drop_vars("force")
    with pytest.raises(modalnb.RecordError) as exc:
        modalnb.frf(no_force)
    assert "'force'" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, estimator="H3")
    assert "known: H1, H2" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, estimator="H_1")
    assert "Did you mean 'H1'?" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, nfft=1024)
    assert "nfft" in _one_line(exc) and "16384" in str(exc.value)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, nfft=2.5)
    assert "nfft" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, force_window=-0.1)
    assert "force_window" in _one_line(exc)
    flat = roving.copy(deep=True)
    flat["force"][2] = 0.0
    with pytest.raises(modalnb.RecordError) as exc:
        modalnb.frf(flat)
    assert "hit 3" in _one_line(exc)
    modalnb.frf(flat, accept=[True, True, False, True])  # rejected, it is fine
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, accept={1: False})
    assert "hit 2" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.frf(roving, accept=[False] * 4)
    assert "rejected" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.synthesise_frf(xr.Dataset({"frequency_hz": ("mode", [1.0])}), [1.0])
    assert "'damping_ratio'" in _one_line(exc)
    unforced = xr.Dataset(
        {"frequency_hz": ("mode", [10.0]), "damping_ratio": ("mode", [0.01]),
         "residue_real": (("mode", "channel"), [[1.0]], {"units": "m/s^2"}),
         "residue_imag": (("mode", "channel"), [[0.0]], {"units": "m/s^2"})},
        coords={"channel": ["a1"]})
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.synthesise_frf(unforced, [10.0])
    assert "per unit force" in _one_line(exc)
    with pytest.raises(modalnb.ModalnbError) as exc:
        modalnb.write_frf(modalnb.frf(roving), "/tmp/frf.csv")
    assert ".nc" in _one_line(exc)
