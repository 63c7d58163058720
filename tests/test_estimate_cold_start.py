"""The fitting path does not import lmfit (slow: lmfit.confidence pulls in scipy.stats);
lmfit is still what reports the final refinement, built when asked."""

from __future__ import annotations

import subprocess
import sys

import numpy as np

_FIT_SMALL_RECORD = """
import sys
import numpy as np
import modalnb
from modalnb.estimate import SharedPoleFit

fs = 2048.0
t = np.arange(2048) / fs
x = np.exp(-0.01 * 2 * np.pi * 50.0 * t) * np.sin(2 * np.pi * 50.0 * t)
x = x + 1e-4 * np.random.default_rng(0).standard_normal(t.size)
rec = modalnb.records_from_arrays(x, fs)
eng = SharedPoleFit(accept=[True]).fit(rec)
after_engine = sorted(m for m in ("lmfit", "scipy.stats") if m in sys.modules)
fit = modalnb.ModeFit(accept=[True]).fit(rec)
after_modefit = sorted(m for m in ("lmfit",) if m in sys.modules)
print(repr((after_engine, after_modefit, float(fit.result_["frequency_hz"][0]))))
report = fit.fit_report()
print(repr(("lmfit" in sys.modules, "m1_sigma" in report, "m1_u" in report)))
"""


def test_fit_does_not_import_lmfit_and_fit_report_still_works():
    out = subprocess.run([sys.executable, "-c", _FIT_SMALL_RECORD], capture_output=True,
                         text=True, check=True)
    first, second = (eval(line) for line in out.stdout.strip().splitlines())  # noqa: S307
    after_engine, after_modefit, f1 = first
    # the engine needs neither lmfit nor scipy.stats; ModeFit (which adds the
    # cross-checks) does not need lmfit
    assert after_engine == [], after_engine
    assert after_modefit == [], after_modefit
    # the decay is synthesised at 50 Hz natural frequency (zeta 0.01): fn = 50 Hz
    assert abs(f1 - 50.0) < 0.01
    # fit_report() imports lmfit then and reports the poles m<k>_sigma, m<k>_u
    assert second == (True, True, True)


def test_direct_least_squares_matches_lmfit_minimize():
    """Independent reference: lmfit.minimize(method="least_squares") from the same start,
    with the same Jacobian and tolerances, lands on the same point as the direct scipy
    call the engine makes (lmfit hands unbounded parameters to scipy unchanged)."""
    import lmfit

    from modalnb.estimate._varpro import LSQ_TOL, Problem, refine

    fs = 1024.0
    t = np.arange(1024) / fs
    rng = np.random.default_rng(1)
    # two damped modes, 30 Hz (zeta 0.02) and 70 Hz (zeta 0.01), plus white noise
    y = (np.exp(-0.02 * 2 * np.pi * 30 * t) * np.cos(2 * np.pi * 30 * t)
         + 0.5 * np.exp(-0.01 * 2 * np.pi * 70 * t) * np.sin(2 * np.pi * 70 * t)
         + 1e-3 * rng.standard_normal(t.size))
    prob = Problem(np.ascontiguousarray(y[:, None]), t, 2 * np.pi * 100.0)
    x0 = prob.pack([3.5, 4.6], [(2 * np.pi * 30.3) ** 2, (2 * np.pi * 69.6) ** 2])
    ref = refine(prob, x0, max_nfev=50)

    params = lmfit.Parameters()
    for k in range(2):
        params.add(f"m{k + 1}_sigma", value=float(x0[2 * k]))
        params.add(f"m{k + 1}_u", value=float(x0[2 * k + 1]))
    names = list(params)

    def vec(p: lmfit.Parameters) -> np.ndarray:
        return np.array([p[n].value for n in names])

    res = lmfit.minimize(lambda p: prob.residual(vec(p)), params, method="least_squares",
                         Dfun=lambda p: prob.kaufman_jacobian(vec(p)), x_scale="jac",
                         max_nfev=50, ftol=LSQ_TOL, xtol=LSQ_TOL, gtol=LSQ_TOL)
    np.testing.assert_allclose(ref.x, vec(res.params), rtol=1e-12, atol=0)
    lazy = ref.minimizer_result()
    np.testing.assert_allclose(vec(lazy.params), ref.x, rtol=1e-12, atol=0)
    assert lazy.nfev == res.nfev and ref.scipy_result.nfev == res.least_squares_nfev
    # and the fit moved: the truth (30 Hz, 70 Hz) is recovered to 0.05 %
    sigma, u = prob.unpack(ref.x)
    fn = np.sqrt(sigma**2 + u) / (2 * np.pi)
    np.testing.assert_allclose(np.sort(fn), [30.0, 70.0], rtol=5e-4)


def test_refine_stops_at_the_budget_like_lmfit():
    """With a budget too small to converge, lmfit aborts at the evaluation past the budget
    and keeps that point; the direct call does the same (same point as lmfit's)."""
    import lmfit

    from modalnb.estimate._varpro import LSQ_TOL, Problem, refine

    t = np.arange(512) / 512.0
    y = np.exp(-2.0 * t) * np.cos(2 * np.pi * 20.0 * t)
    prob = Problem(np.ascontiguousarray(y[:, None]), t, 2 * np.pi * 100.0)
    x0 = prob.pack([0.5], [(2 * np.pi * 21.0) ** 2])
    ref = refine(prob, x0, max_nfev=2)
    params = lmfit.Parameters()
    params.add("m1_sigma", value=float(x0[0]))
    params.add("m1_u", value=float(x0[1]))
    res = lmfit.minimize(
        lambda p: prob.residual(np.array([p["m1_sigma"].value, p["m1_u"].value])), params,
        method="least_squares",
        Dfun=lambda p: prob.kaufman_jacobian(np.array([p["m1_sigma"].value, p["m1_u"].value])),
        x_scale="jac", max_nfev=2, ftol=LSQ_TOL, xtol=LSQ_TOL, gtol=LSQ_TOL)
    assert ref.aborted and res.aborted
    np.testing.assert_allclose(ref.x, [res.params["m1_sigma"].value, res.params["m1_u"].value],
                               rtol=1e-12, atol=0)
