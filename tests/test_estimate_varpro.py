"""Inner algebra of the variable-projection fit, against references written out here.

Variable projection (Golub & Pereyra 1973, "The differentiation of pseudo-inverses and
nonlinear least squares problems whose variables separate", SIAM J. Numer. Anal.
10(2):413-432): for nonlinear parameters theta the residual is ``r(theta) = y -
Phi(theta) c(theta)`` with ``c`` the linear least-squares coefficients. Here ``Phi``
holds, per mode with decay rate ``sigma`` and ``u = wd^2``, the free-vibration columns
``exp(-sigma t) cos(wd t)`` and ``exp(-sigma t) sin(wd t)`` (or cosh/sinh for ``u < 0``),
plus an offset column; the projected residual does not depend on how those columns are
scaled, only on their span. ``r`` is computed in this file with ``numpy.linalg.lstsq``
and differentiated by central differences: the reference for Kaufman's (1975, BIT
15:49-57) Jacobian, explicit and as normal equations, which the engine forms in closed
form. The engine's own packing of the parameters, documented in ``Problem`` (``x[0::2] =
sigma / w_scale``, ``x[1::2] = u / w_scale^2``), is the one private detail used.
"""

from __future__ import annotations

import numpy as np
import pytest
from reference_models import free_decay

from modalnb.estimate._basis import mode_columns, mode_columns_du
from modalnb.estimate._varpro import Problem


def _columns(t, sigma, u):
    """The two free-vibration columns of one mode, written out (any scaling spans the same)."""
    e = np.exp(-sigma * t)
    if u > 0:
        w = np.sqrt(u)
        return e * np.cos(w * t), e * np.sin(w * t) / w
    w = np.sqrt(-u)
    return e * np.cosh(w * t), e * np.sinh(w * t) / w


def _projected_residual(x, t, y, w_scale):
    """``y - Phi (Phi^+ y)`` for signals y (N, P), flattened row-major like the engine's."""
    sigma, u = x[0::2] * w_scale, x[1::2] * w_scale**2
    cols = [c for s, v in zip(sigma, u, strict=True) for c in _columns(t, s, v)]
    phi = np.column_stack([*cols, np.ones_like(t)])
    coef, *_ = np.linalg.lstsq(phi, y, rcond=None)
    return (y - phi @ coef).ravel()


def _fd_jacobian(x, t, y, w_scale):
    cols = []
    for i in range(x.size):
        h = 1e-6 * abs(x[i])
        xp, xm = x.copy(), x.copy()
        xp[i] += h
        xm[i] -= h
        cols.append((_projected_residual(xp, t, y, w_scale) - _projected_residual(xm, t, y, w_scale))
                    / (2 * h))
    return np.stack(cols, axis=1)


def _clean_problem(fs, n, fn, zeta, n_sig, seed):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / fs
    y = np.stack([free_decay(t, fn, zeta, a) for a in rng.normal(size=(n_sig, len(fn)))]).T
    wn = 2 * np.pi * np.asarray(fn)
    z = np.asarray(zeta)
    sigma, u = z * wn, (wn * np.sqrt(1 - z**2)) ** 2
    w_scale = 2 * np.pi * 300.0
    x = np.empty(2 * len(fn))
    x[0::2], x[1::2] = sigma / w_scale, u / w_scale**2
    # a point next to the optimum: Kaufman's form drops the second Golub-Pereyra term, so it
    # equals the exact Jacobian only where the residual vanishes
    x *= 1 + 1e-6
    return Problem(np.ascontiguousarray(y), t, w_scale, 1), x, t, np.ascontiguousarray(y)


def test_residual_matches_the_written_out_projection():
    prob, x, t, y = _clean_problem(3000.0, 3000, [30.0, 70.0, 71.5], [0.01, 0.02, 0.01], 4, 3)
    noisy = y + 0.01 * np.random.default_rng(0).standard_normal(y.shape)
    prob = Problem(np.ascontiguousarray(noisy), t, prob.w_scale, 1)
    np.testing.assert_allclose(prob.residual(x), _projected_residual(x, t, noisy, prob.w_scale),
                               rtol=1e-7, atol=1e-10)


def test_normal_equations_match_a_finite_difference_jacobian():
    # two close modes and one apart, four signals sharing the poles
    prob, x, t, y = _clean_problem(3000.0, 3000, [30.0, 70.0, 71.5], [0.01, 0.02, 0.01], 4, 3)
    jtj, g = prob.kaufman_normal(x)
    j = _fd_jacobian(x, t, y, prob.w_scale)
    r = _projected_residual(x, t, y, prob.w_scale)
    np.testing.assert_allclose(jtj, j.T @ j, rtol=1e-4, atol=1e-6 * np.abs(jtj).max())
    np.testing.assert_allclose(g, j.T @ r, rtol=1e-3, atol=1e-3 * np.abs(g).max())


def test_explicit_kaufman_jacobian_matches_finite_differences():
    # the Jacobian handed to lmfit, column by column
    prob, x, t, y = _clean_problem(2000.0, 2000, [25.0, 60.0], [0.02, 0.01], 3, 4)
    jk = prob.kaufman_jacobian(x)
    j = _fd_jacobian(x, t, y, prob.w_scale)
    np.testing.assert_allclose(jk, j, rtol=1e-3, atol=1e-4 * np.abs(j).max())


def _check_columns(u):
    t = np.linspace(0.0, 0.5, 200)
    sigma = 3.0
    c, s = mode_columns(t, sigma, u)
    dc, ds = mode_columns_du(t, sigma, u, c, s)
    e = np.exp(-sigma * t)
    if abs(u) > 1.0:
        # central differences of the written-out columns
        h = 1e-6 * abs(u)
        cp, sp = _columns(t, sigma, u + h)
        cm, sm = _columns(t, sigma, u - h)
        ref_dc, ref_ds = (cp - cm) / (2 * h), (sp - sm) / (2 * h)
        tol = {"rtol": 1e-5, "atol": 1e-9}
    else:
        # near u = 0: cos(sqrt(u) t) = sum_k (-u t^2)^k / (2k)! and sin(sqrt(u) t)/sqrt(u) =
        # t sum_k (-u t^2)^k / (2k+1)! (Taylor series of entire functions; the same for
        # cosh/sinh when u < 0), differentiated term by term; 12 terms are exact here
        k = np.arange(1, 13)[:, None]
        fact = np.cumprod(np.arange(1, 27, dtype=float))  # fact[n - 1] = n!
        term = k * (-1.0) ** k * u ** (k - 1) * t[None, :] ** (2 * k)
        ref_dc = e * np.sum(term / fact[2 * k - 1], axis=0)
        ref_ds = e * t * np.sum(term / fact[2 * k], axis=0)
        tol = {"rtol": 1e-9, "atol": 1e-15}
    np.testing.assert_allclose(dc, ref_dc, **tol)
    np.testing.assert_allclose(ds, ref_ds, **tol)
    # the closed forms written out above; near u = 0 cos(sqrt(u) t) = 1 - u t^2/2 + ...
    ref_c, ref_s = _columns(t, sigma, u)
    np.testing.assert_allclose(c, ref_c, rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(s, ref_s, rtol=1e-12, atol=1e-14)


@pytest.mark.parametrize("u", [4000.0, -40.0])  # oscillating, overdamped
def test_basis_and_its_u_derivative_match_the_closed_forms(u):
    _check_columns(u)


@pytest.mark.parametrize("u", [1e-7, -1e-7])  # both sides of critical, series branch
def test_basis_near_critical_matches_the_series_of_the_closed_forms(u):
    _check_columns(u)


def test_explicit_kaufman_jacobian_near_critical_damping():
    # a critically damped decay (A + B t) exp(-wn t) (repeated real root), two signals
    fs, wn = 1000.0, 2 * np.pi * 10.0
    t = np.arange(1000) / fs
    y = np.ascontiguousarray(np.stack([(1.0 + 40.0 * t) * np.exp(-wn * t),
                                       (0.5 - 20.0 * t) * np.exp(-wn * t)]).T)
    w_scale = 2 * np.pi * 300.0
    x = np.array([wn * (1 + 1e-6) / w_scale, 1e-5 / w_scale**2])  # u = 1e-5 (rad/s)^2
    prob = Problem(y, t, w_scale, 1)
    jk = prob.kaufman_jacobian(x)
    j = np.empty_like(jk)
    for i, h in enumerate((1e-6 * x[0], 0.25 * x[1])):  # stay on one side of u = 0
        xp, xm = x.copy(), x.copy()
        xp[i] += h
        xm[i] -= h
        j[:, i] = (_projected_residual(xp, t, y, w_scale) - _projected_residual(xm, t, y, w_scale)) / (2 * h)
    np.testing.assert_allclose(jk, j, rtol=1e-3, atol=1e-4 * np.abs(j).max())


def test_rss_increase_of_each_mode_matches_a_refit_without_it():
    """The prune statistic (extra sum of squares of a block of coefficients, Seber & Lee
    2003, sec. 4.5) against its definition: least squares with the mode's two columns
    removed (numpy.linalg.lstsq on the columns written out here), minus the full RSS."""
    from modalnb.estimate._core import _mode_stats

    prob, x, t, y = _clean_problem(3000.0, 3000, [30.0, 70.0, 71.5], [0.01, 0.02, 0.01], 4, 3)
    noisy = y + 0.01 * np.random.default_rng(1).standard_normal(y.shape)
    prob = Problem(np.ascontiguousarray(noisy), t, prob.w_scale, 1)
    sigma, u = x[0::2] * prob.w_scale, x[1::2] * prob.w_scale**2
    blocks = [np.column_stack(_columns(t, s, v)) for s, v in zip(sigma, u, strict=True)]

    def rss(cols):
        phi = np.column_stack([*cols, np.ones_like(t)])
        coef, *_ = np.linalg.lstsq(phi, noisy, rcond=None)
        return float(np.sum((noisy - phi @ coef) ** 2))

    full = rss(blocks)
    expected = [rss(blocks[:k] + blocks[k + 1:]) - full for k in range(len(blocks))]
    _, lr = _mode_stats(prob, x)
    np.testing.assert_allclose(lr, expected, rtol=1e-6)


def test_one_gauss_newton_step_lands_near_the_least_squares_poles():
    """The per-hit scatter's linearised update: from a start 1e-4 off, one step of
    ``-(J^T J)^-1 J^T r`` (J by central differences of the residual written out here)
    and the engine's one_step agree, and both land far closer to the true poles."""
    from modalnb.estimate._varpro import one_step

    prob, x, t, y = _clean_problem(3000.0, 3000, [30.0, 70.0], [0.01, 0.02], 3, 5)
    x_true = x / (1 + 1e-6)
    x0 = x_true * (1 + 1e-4)
    j = _fd_jacobian(x0, t, y, prob.w_scale)
    r = _projected_residual(x0, t, y, prob.w_scale)
    ref = x0 - np.linalg.solve(j.T @ j, j.T @ r)
    got = one_step(prob, x0)
    np.testing.assert_allclose(got, ref, rtol=1e-6)
    assert np.max(np.abs(got / x_true - 1)) < 1e-5  # at least ten times closer


# --- speed paths (issue 9, sect. 2): each against an independent reference ----------------
def test_reduced_refinement_takes_the_full_problems_steps() -> None:
    # the Gram form (Problem.reduced) has the cost, gradient and normal matrix of the full
    # projected residual, so scipy's trf takes the same steps: the same point as the full
    # (N P, n) problem, also when stopped at the budget (two modes, 30 and 70 Hz, 3 signals)
    from modalnb.estimate._varpro import Problem, refine

    fs = 1024.0
    t = np.arange(1024) / fs
    rng = np.random.default_rng(1)
    y = (np.exp(-0.02 * 2 * np.pi * 30 * t) * np.cos(2 * np.pi * 30 * t)
         + 0.5 * np.exp(-0.01 * 2 * np.pi * 70 * t) * np.sin(2 * np.pi * 70 * t)
         + 1e-3 * rng.standard_normal((3, t.size)))
    prob = Problem(np.ascontiguousarray(y.T), t, 2 * np.pi * 100.0)
    x0 = prob.pack([3.5, 4.6], [(2 * np.pi * 30.3) ** 2, (2 * np.pi * 69.6) ** 2])
    for budget in (3, 50):
        full, red = refine(prob, x0, budget), refine(prob, x0, budget, reduced=True)
        np.testing.assert_allclose(red.x, full.x, rtol=1e-9)
        assert red.aborted == full.aborted
    r, jac = prob.reduced(x0)
    rf, jf = prob.residual(x0), prob.kaufman_jacobian(x0)
    np.testing.assert_allclose(r @ r, rf @ rf, rtol=1e-10)
    np.testing.assert_allclose(jac.T @ r, jf.T @ rf, rtol=1e-7, atol=1e-9 * np.abs(jf.T @ rf).max())
    np.testing.assert_allclose(jac.T @ jac, jf.T @ jf, rtol=1e-8, atol=1e-10 * np.abs(jf.T @ jf).max())


def test_cholesky_qr_against_householder() -> None:
    # thin_qr against numpy's Householder QR (LAPACK geqrf): the same projector Q Q^T and
    # |R| to rounding on a basis of damped modes; an ill-conditioned basis (two equal
    # columns up to 1e-9) goes to Householder
    from modalnb.estimate._basis import basis_matrix
    from modalnb.estimate._varpro import thin_qr

    t = np.arange(4000) / 4096.0
    phi = basis_matrix(t, np.array([3.0, 8.0, 20.0]), (2 * np.pi * np.array([90.0, 400.0, 1300.0])) ** 2)
    q, r = thin_qr(phi)
    q0, r0 = np.linalg.qr(phi)
    np.testing.assert_allclose(q.T @ q, np.eye(q.shape[1]), atol=1e-13)
    np.testing.assert_allclose(q @ q.T @ phi[:, 0], q0 @ q0.T @ phi[:, 0], atol=1e-13)
    np.testing.assert_allclose(np.abs(r), np.abs(r0), rtol=1e-10, atol=1e-12 * np.abs(r0).max())
    bad = np.column_stack([phi[:, 0], phi[:, 0] * (1 + 1e-9), phi[:, 1]])
    qb, rb = thin_qr(bad)
    np.testing.assert_allclose(qb @ rb, bad, atol=1e-12)
    np.testing.assert_allclose(qb.T @ qb, np.eye(3), atol=1e-12)


def test_block_basis_against_direct_evaluation() -> None:
    # the equally-spaced-grid basis (block products of complex exponentials) against
    # exp * cos and exp * sin evaluated per mode (mode_columns), oscillating and overdamped
    from modalnb.estimate._basis import basis_matrix, mode_columns

    t = 0.25 + np.arange(5000) / 4096.0
    sigma = np.array([2.0, 30.0, 80.0])
    u = np.array([(2 * np.pi * 1700.0) ** 2, (2 * np.pi * 55.0) ** 2, -400.0])
    phi = basis_matrix(t, sigma, u)
    for k in range(3):
        c, s = mode_columns(t, sigma[k], u[k])
        np.testing.assert_allclose(phi[:, 2 * k], c, atol=1e-12)
        np.testing.assert_allclose(phi[:, 2 * k + 1], s, atol=1e-12 * np.abs(s).max())


def test_cross_check_band_pass_is_scipys_butterworth() -> None:
    # the band-pass sections built from the poles against scipy.signal.butter(output="sos"):
    # the same frequency response (sosfreqz) and the same filtered signal to rounding
    from scipy.signal import butter, sosfiltfilt, sosfreqz

    from modalnb.estimate._xcheck import _bandpass_sos

    fs = 4096.0
    x = np.random.default_rng(3).standard_normal(4096)
    for lo, hi in ((100.0, 140.0), (10.0, 30.0), (1500.0, 1800.0)):
        ref = butter(4, [lo, hi], btype="bandpass", fs=fs, output="sos")
        ours = _bandpass_sos(lo, hi, fs)
        _, h0 = sosfreqz(ref, worN=2048, fs=fs)
        _, h1 = sosfreqz(ours, worN=2048, fs=fs)
        np.testing.assert_allclose(h1, h0, atol=1e-10)
        y0, y1 = sosfiltfilt(ref, x), sosfiltfilt(ours, x)
        np.testing.assert_allclose(y1, y0, atol=1e-9 * np.abs(y0).max())


def test_step_in_std_matches_a_finite_difference_gauss_newton_step():
    """step_in_std against a Gauss-Newton step and covariance built independently from a
    central finite-difference Jacobian of the projected residual (noise-free-ish data:
    Kaufman's Jacobian is then the full one to first order; Golub & Pereyra 1973)."""
    from modalnb.estimate._varpro import Problem, step_in_std

    rng = np.random.default_rng(3)
    fs = 1000.0
    t = np.arange(2000) / fs
    y = np.exp(-3.0 * t) * np.cos(2 * np.pi * 40.0 * t) + 1e-3 * rng.standard_normal(t.size)
    prob = Problem(np.ascontiguousarray(y[:, None]), t, 2 * np.pi * fs / 10)
    x = prob.pack([3.05], [(2 * np.pi * 40.02) ** 2])
    r = prob.residual(x)
    jac = np.empty((r.size, x.size))
    for j in range(x.size):
        h = 1e-6 * max(abs(x[j]), 1e-3)
        xp, xm = x.copy(), x.copy()
        xp[j] += h
        xm[j] -= h
        jac[:, j] = (prob.residual(xp) - prob.residual(xm)) / (2 * h)
    jtj = jac.T @ jac
    dx = -np.linalg.solve(jtj, jac.T @ r)
    n_dof = r.size - 1 * (x.size + prob.n_extra) - x.size
    std = np.sqrt(np.diag(np.linalg.inv(jtj)) * float(r @ r) / n_dof)
    expected = float(np.max(np.abs(dx) / std))
    jtj_k, g_k = prob.kaufman_normal(x, r)
    got = step_in_std(prob, jtj_k, g_k, float(r @ r))
    assert expected > 1.0  # the start is several standard deviations off
    assert got == pytest.approx(expected, rel=0.05)
    # the mask keeps only the watched parameters
    only_u = step_in_std(prob, jtj_k, g_k, float(r @ r), np.array([False, True]))
    assert only_u == pytest.approx(float(np.abs(dx[1]) / std[1]), rel=0.05)
