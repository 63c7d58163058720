"""fit_modes against physics computed independently of the estimator.

Truth: M x'' + C x' + K x = f(t) integrated by scipy.integrate.solve_ivp (rtol 1e-10)
under a half-sine hammer force; poles and complex shapes from scipy.linalg.eig of the
state matrix [[0, I], [-M^-1 K, -M^-1 C]]. The response is measured as acceleration.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference_models import eig_truth as _truth
from reference_models import state_matrix as _state_matrix
from scipy.integrate import solve_ivp

import modalnb

FS = 2048.0


def _mac(a, b):
    """|a^H b|^2 / ((a^H a)(b^H b)) (Allemang & Brown 1982, 1st IMAC), written out."""
    return abs(np.vdot(a, b)) ** 2 / (np.vdot(a, a).real * np.vdot(b, b).real)


def _simulate(m, c, k, amps, drive=0, t_pulse=1e-3, n=4096, pre=64, noise=0.0, seed=0,
              late=None):
    """Acceleration records of hits of force amplitude `amps` at DOF `drive` (solve_ivp)."""
    dof = m.shape[0]
    a_mat = _state_matrix(m, c, k)
    minv = np.linalg.inv(m)
    t = (np.arange(n) - pre) / FS
    rng = np.random.default_rng(seed)
    resp, force = [], []
    for amp in amps:
        def f_of(tt, amp=amp):
            return amp * np.sin(np.pi * tt / t_pulse) if 0 <= tt <= t_pulse else 0.0

        def rhs(tt, z, f_of=f_of):
            b = np.zeros(2 * dof)
            b[dof:] = minv[:, drive] * f_of(tt)
            return a_mat @ z + b

        t_pos = t[t >= 0]
        # integrate the pulse with small steps, then the free decay from its end state
        in_pulse = t_pos <= t_pulse
        s1 = solve_ivp(rhs, (0, t_pulse), np.zeros(2 * dof), t_eval=t_pos[in_pulse],
                       rtol=1e-10, atol=1e-14, max_step=t_pulse / 16, method="DOP853")
        s1b = solve_ivp(rhs, (0, t_pulse), np.zeros(2 * dof), rtol=1e-10, atol=1e-14,
                        max_step=t_pulse / 16, method="DOP853")
        s2 = solve_ivp(rhs, (t_pulse, t_pos[-1]), s1b.y[:, -1], t_eval=t_pos[~in_pulse],
                       rtol=1e-10, atol=1e-14, method="DOP853")
        z = np.concatenate([s1.y, s2.y], axis=1)
        fv = np.array([f_of(tt) for tt in t_pos])
        acc = a_mat[dof:] @ z + minv[:, [drive]] * fv[None, :]
        full = np.zeros((dof, n))
        full[:, t >= 0] = acc
        if late is not None:
            t_late, size = late
            full += size * np.exp(-((t - t_late) / 2e-3) ** 2)[None, :]
        scale = np.sqrt(np.mean(full**2, axis=1, keepdims=True))
        full += noise * scale * rng.standard_normal(full.shape)
        resp.append(full)
        ff = np.zeros(n)
        ff[t >= 0] = fv
        force.append(ff)
    return modalnb.records_from_arrays(np.array(resp), FS, force=np.array(force), t0=t[0],
                               channels=[f"dof{i + 1}" for i in range(dof)])


M3 = np.diag([1.0, 1.5, 0.8])
K3 = 1e5 * np.array([[2.0, -1.0, 0.0], [-1.0, 2.0, -1.0], [0.0, -1.0, 1.2]])


@pytest.mark.parametrize("proportional", [True, False])
def test_three_dof_modes_and_shapes(proportional):
    if proportional:
        c = 2e-4 * K3 + 1.0 * M3  # Rayleigh damping: real modes
    else:
        c = 2e-4 * K3 + 1.0 * M3
        c[0, 0] += 12.0  # a local damper: complex (non-proportional) modes
    fn, zeta, shapes = _truth(M3, c, K3)
    rec = _simulate(M3, c, K3, [100.0, 250.0, 60.0], noise=1e-3)
    res = modalnb.fit_modes(rec, accept=[True, True, True])
    assert res.sizes["mode"] == 3
    # truth: scipy.linalg.eig of the state matrix
    np.testing.assert_allclose(res["frequency_hz"].values, fn, rtol=1e-4)
    np.testing.assert_allclose(res["damping_ratio"].values, zeta, rtol=2e-3)
    for i in range(3):
        est = res["residue_real"].values[i] + 1j * res["residue_imag"].values[i]
        # acceleration residues are lambda^2 x displacement residues: a common factor per mode
        assert _mac(est, shapes[:, i]) > 0.999  # complex MAC (Allemang & Brown 1982), numpy
    if not proportional:
        # the local damper makes at least one shape visibly complex (scipy eig truth)
        ph = np.angle(shapes / shapes[0])
        assert np.max(np.abs(np.sin(ph))) > 0.01


def test_force_normalised_residues_agree_across_hits():
    c = 2e-4 * K3 + 1.0 * M3
    fn, zeta, _ = _truth(M3, c, K3)
    rec = _simulate(M3, c, K3, [50.0, 200.0, 400.0], noise=1e-3, seed=3)
    res = modalnb.fit_modes(rec, accept=[True, True, True])
    np.testing.assert_allclose(res["frequency_hz"].values, fn, rtol=1e-4)  # scipy eig truth
    r = res["hit_residue_real"].values + 1j * res["hit_residue_imag"].values  # (mode, hit, ch)
    # linear system (homogeneity): the response per unit force, hence a residue divided by
    # the force impulse, does not depend on the force level (Ewins 2000, Modal Testing:
    # Theory, Practice and Application, ch. 1; from memory)
    spread = np.abs(r - r.mean(axis=1, keepdims=True)).max(axis=1)
    assert np.all(spread <= 2e-3 * np.abs(r).max(axis=1))
    # raw residues would differ by the force ratio 8; the normalised ones agree, and the
    # channel residue is the same value
    ch = res["residue_real"].values + 1j * res["residue_imag"].values
    np.testing.assert_allclose(ch, r.mean(axis=1), rtol=3e-3, atol=1e-6 * np.abs(ch).max())
    # hit-to-hit scatter of f: of the order of the reported std, and small against f itself
    assert np.all(res["frequency_hz_scatter"].values < 10 * res["frequency_hz_std"].values + 1e-3)
    assert np.all(res["frequency_hz_scatter"].values < 1e-4 * fn)


def test_window_excludes_late_disturbance():
    c = 2e-4 * K3 + 1.0 * M3
    fn, zeta, _ = _truth(M3, c, K3)
    rec = _simulate(M3, c, K3, [100.0], noise=1e-3, late=(1.6, 50.0))
    t = rec["time"].values
    res = modalnb.fit_modes(rec, window=(0.002, 1.4), accept=[True])
    np.testing.assert_allclose(res["frequency_hz"].values, fn, rtol=1e-4)  # scipy eig truth
    np.testing.assert_allclose(res["damping_ratio"].values, zeta, rtol=5e-3)
    assert res.attrs["window"][1] <= 1.4 and t[-1] > 1.6
