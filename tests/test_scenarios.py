"""The scenario generator against outside truth.

* responses: ``scipy.integrate.solve_ivp`` of ``M x'' + C x' + K x = f`` (the half-sine
  force integrated directly, tight tolerances) on a 4-mass chain;
* eigen-solution: identities of the state-space eigenproblem (Tisseur & Meerbergen 2001,
  SIAM Review 43(2):235-286; from memory): ``A v = lambda v``, ``w^H A = lambda w^H``,
  left/right bi-orthogonality ``w_r^H v_s = 0`` (r != s), and for proportional damping
  the undamped frequencies ``sqrt(eig(K, M))`` with ``zeta = a/(2 w) + b w/2``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.linalg import eigh

from modalnb.testing.scenarios import QUICK_SUITE, SUITE, Scenario, campaign, chain_model

SMALL = Scenario(n_masses=4, n_channels=4, n_hits=2, f_top_hz=600.0, sample_rate=4096.0,
                 n_samples=2048, pretrigger_s=0.005, contact_s=0.5e-3, snr_db=200.0,
                 ground_damper=0.05, seed=3)


def _solve_ivp_acceleration(sc: Scenario, t: np.ndarray, level: float) -> np.ndarray:
    mdl = chain_model(sc)
    M, C, K = mdl.M, mdl.C, mdl.K
    n = M.shape[0]
    mi = np.linalg.inv(M)
    hit = sc.n_masses - 1
    tc = sc.contact_s

    def force(s: float) -> np.ndarray:
        f = np.zeros(n)
        if 0 <= s <= tc:
            f[hit] = level * np.sin(np.pi * s / tc)
        return f

    def rhs(s: float, z: np.ndarray) -> np.ndarray:
        x, v = z[:n], z[n:]
        return np.concatenate([v, mi @ (force(s) - C @ v - K @ x)])

    tp = t[t >= 0]
    # integrate the contact first (short steps), then the free decay
    s1 = solve_ivp(rhs, (0, tc), np.zeros(2 * n), rtol=1e-11, atol=1e-14, max_step=tc / 50)
    s2 = solve_ivp(rhs, (tc, tp[-1]), s1.y[:, -1], t_eval=tp[tp >= tc], rtol=1e-11, atol=1e-14,
                   method="DOP853")
    z = s2.y
    acc = mi @ (-C @ z[n:] - K @ z[:n])
    out = np.zeros((n, t.size))
    out[:, np.flatnonzero(t >= tc)] = acc
    return out


def test_response_matches_solve_ivp_after_the_pulse() -> None:
    # every mode of SMALL is below the band top (600 Hz chain, fs 4096): nothing filtered,
    # so the modal superposition must equal direct integration of M x'' + C x' + K x = f
    rec, truth = campaign(SMALL)
    assert truth["all_frequency_hz"].max() < SMALL.band[1]
    t = rec["time"].values
    force = rec["force"].values
    level = float(force[0].max())  # peak of the (nearly noise-free, 60 dB) half-sine
    ref = _solve_ivp_acceleration(SMALL, t, 1.0)
    got = rec["response"].values[0]
    after = t >= SMALL.contact_s
    scale = np.abs(ref[:, after]).max()
    level_true = got[:, after].ravel() @ ref[:, after].ravel() / (ref[:, after] ** 2).sum()
    assert level_true == pytest.approx(level, rel=5e-3)  # the force record's own peak
    np.testing.assert_allclose(got[:, after], level_true * ref[:, after], atol=1e-6 * scale * level)
    # before the trigger: nothing but (here negligible) noise
    assert np.abs(got[:, t < 0]).max() < 1e-6 * scale * level


def test_residues_give_the_free_decay() -> None:
    # after the pulse the acceleration is sum_r 2 Re(R_r exp(lambda_r t)) (truth["residue"])
    rec, truth = campaign(SMALL)
    t = rec["time"].values
    after = t >= SMALL.contact_s
    model = 2 * np.real(truth["residue"][1] @ np.exp(np.outer(truth["eigenvalues"], t[after])))
    y = rec["response"].values[1][:, after]
    np.testing.assert_allclose(y, model, atol=1e-7 * np.abs(model).max())


def test_eigen_solution_identities() -> None:
    mdl = chain_model(SMALL)
    A = mdl.state_matrix()
    lam, v, w = mdl.eigenvalues, mdl.right, mdl.left
    np.testing.assert_allclose(A @ v, v * lam, atol=1e-8 * np.abs(lam).max())
    np.testing.assert_allclose(w.conj().T @ A, lam[:, None] * w.conj().T, atol=1e-8 * np.abs(lam).max())
    g = w.conj().T @ v
    off = g - np.diag(np.diag(g))
    assert np.abs(off).max() < 1e-8 * np.abs(np.diag(g)).min()
    # state-space structure: the velocity half of v is lambda times the displacement half
    n = mdl.M.shape[0]
    np.testing.assert_allclose(v[n:], v[:n] * lam, atol=1e-9 * np.abs(v[n:]).max())
    # the matrices themselves: symmetric, K and M positive definite
    for m in (mdl.M, mdl.C, mdl.K):
        np.testing.assert_allclose(m, m.T)
    assert np.linalg.eigvalsh(mdl.K).min() > 0 and np.linalg.eigvalsh(mdl.M).min() > 0


def test_proportional_damping_matches_the_undamped_problem() -> None:
    # C = aM + bK: the modes are real (the undamped ones), w_n = sqrt(eig(K, M)),
    # zeta = a/(2 w) + b w/2 (Chopra 2012, *Dynamics of Structures*, sect. 11.4; from memory)
    sc = Scenario(n_masses=6, f_top_hz=800.0, damping_ratio=0.02, seed=2)
    mdl = chain_model(sc)
    w2, phi = eigh(mdl.K, mdl.M)
    w = np.sqrt(w2)
    a, b = mdl.extra["rayleigh"]
    np.testing.assert_allclose(2 * np.pi * mdl.frequency_hz, w, rtol=1e-10)
    np.testing.assert_allclose(mdl.damping_ratio, a / (2 * w) + b * w / 2, rtol=1e-8)
    # shapes: real up to one complex factor, equal to the undamped ones (MAC = 1)
    sh = mdl.shapes
    np.testing.assert_allclose(np.abs(sh.imag).max(), 0, atol=1e-9)
    mac = np.abs(np.sum(sh.conj() * phi, 0)) ** 2 / (np.sum(np.abs(sh) ** 2, 0) * np.sum(phi**2, 0))
    np.testing.assert_allclose(mac, 1, atol=1e-10)
    # the first and the last in-band mode carry exactly the requested damping
    assert mdl.damping_ratio[0] == pytest.approx(0.02, rel=1e-9)


def test_ground_damper_makes_complex_modes() -> None:
    # non-proportional damping: at least one shape is not real up to a common factor
    mdl = chain_model(SMALL)
    sh = mdl.shapes
    assert np.abs(sh.imag).max() > 1e-3


def test_band_and_anti_alias_cut() -> None:
    # modes above the band top are absent from the record: the spectrum above the cut
    # holds only noise, and truth lists only in-band modes
    sc = Scenario(n_masses=16, n_channels=16, n_hits=2, f_top_hz=3000.0, snr_db=300.0, seed=4)
    rec, truth = campaign(sc)
    assert truth["all_frequency_hz"].max() > sc.band[1] > truth["frequency_hz"].max()
    y = rec["response"].values[0, -1]
    t = rec["time"].values
    y = y[t >= 2 * sc.contact_s]
    p = np.abs(np.fft.rfft(y * np.hanning(y.size))) ** 2
    f = np.fft.rfftfreq(y.size, 1 / sc.sample_rate)
    above = f > sc.band[1] + 100
    assert p[above].max() < 1e-6 * p.max()


def test_snr_hits_and_window() -> None:
    sc = Scenario(n_masses=5, n_channels=6, n_hits=3, f_top_hz=900.0, snr_db=30.0,
                  window_tau_s=0.2, seed=5)
    rec, truth = campaign(sc)
    assert dict(rec.sizes) == {"hit": 3, "channel": 6, "time": sc.n_samples}
    assert rec.attrs["exponential_window_tau_s"] == 0.2
    t = rec["time"].values
    assert t[0] == pytest.approx(-sc.pretrigger_s, abs=1 / sc.sample_rate)  # on the sample grid
    pre = rec["response"].values[:, :, t < 0]  # the window is 1 there: pure noise
    np.testing.assert_allclose(pre.std(-1), truth["noise_std"], rtol=0.25)
    # force levels differ between hits
    peaks = rec["force"].values.max(-1)
    assert np.ptp(peaks) > 0.05 * peaks.mean()


def test_seeded_and_suite_documented() -> None:
    a, _ = campaign(SMALL)
    b, _ = campaign(SMALL)
    np.testing.assert_array_equal(a["response"].values, b["response"].values)
    names = [s.name for s in SUITE]
    assert len(set(names)) == len(names)
    assert {s.name for s in QUICK_SUITE} <= set(names)
    assert min(s.n_masses for s in SUITE) == 4 and max(s.n_masses for s in SUITE) == 40
    assert any(s.ground_damper for s in SUITE) and any(s.close_modes for s in SUITE)
    assert any(s.window_tau_s for s in SUITE)


def test_channel_masses_pick_the_sensors() -> None:
    # sensors on masses 1 and 3 of the SMALL chain: the channels are exactly the
    # solve_ivp accelerations of those masses (same reference as above)
    sc = Scenario(**{**SMALL.as_dict(), "channel_masses": (1, 3)})
    rec, truth = campaign(sc)
    assert rec.sizes["channel"] == 2 and truth["masses"].tolist() == [1, 3]
    t = rec["time"].values
    after = t >= sc.contact_s
    ref = _solve_ivp_acceleration(sc, t, 1.0)[[1, 3]][:, after]
    got = rec["response"].values[0][:, after]
    level = got.ravel() @ ref.ravel() / (ref**2).sum()
    np.testing.assert_allclose(got, level * ref, atol=1e-6 * np.abs(level * ref).max())
    from modalnb._errors import ModalnbError

    with pytest.raises(ModalnbError, match="channel_masses"):
        campaign(Scenario(**{**SMALL.as_dict(), "channel_masses": (7,)}))
