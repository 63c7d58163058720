"""Array-level engine: signals in, shared poles with covariance out.

Steps (documented in :func:`modalnb.fit_modes`): compress the stacked signals to
their leading principal components (the shared poles live in the row space), find
candidate poles with band-split matrix pencils, refine them by variable projection,
drop modes that carry no more energy than noise would, and compute the covariance.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import EstimationError
from ._basis import natural
from ._pencil import PencilOutput, find_poles, initial_modes
from ._select import ASKED_TOL, ENERGY_FACTOR, frequency_std_limit
from ._significance import significance_threshold
from ._varpro import (
    Problem,
    Refinement,
    covariance,
    levenberg_marquardt,
    natural_with_cov,
    refine,
)

#: Pole parameters are scaled by ``2 pi fs / 10`` (the angular frequency of a mode at a
#: tenth of the sample rate) so that sigma and u are of order one for the solver; any
#: scale of that order works (a conditioning choice, common practice).
W_SCALE_FRACTION = 10.0

#: Rounds of "refine, drop invalid or insignificant modes, refine again" that drop modes;
#: 12 covers the few spurious modes of an over-specified pencil (common practice; a fit
#: that needs more keeps what it has).
MAX_PRUNE_ROUNDS = 12

#: Levenberg-Marquardt iterations between two looks at the modes (validity, duplicates,
#: significance): a mode that is going to be dropped is dropped before the others have
#: converged around it, so no round spends long on a model it will change.
ROUND_ITER = 12

#: The first round of a warm start (refit from the previous poles) is shorter: from the
#: previous optimum a well-determined model converges in one to four iterations, so a
#: round still running after this many is usually iterating on a mode the new window
#: no longer determines; the look at the modes drops it before LM spends a full round on
#: it (a model that passes the look just iterates on, at the cost of one look).
WARM_ROUND_ITER = 4

#: Convergence of a warm start (a refit, a fast preview): Levenberg-Marquardt stops when
#: no pole parameter's Gauss-Newton step reaches this fraction of its standard deviation
#: (:func:`._varpro.step_in_std`). The relative offset (an RMS over all parameters) is
#: dominated by a mode near the noise limit, which converges slowly (linearly) while the
#: well-determined modes moved by less than 1e-3 of a standard deviation after one or two
#: iterations; 0.05 is far below one standard deviation (common practice for a
#: statistical stopping rule; the cold fit keeps the relative offset alone).
WARM_STD_TOL = 0.05

#: Convergence of a cold fit once some poles are clearly not modes: Levenberg-Marquardt
#: stops when no parameter of the other poles has a Gauss-Newton step of this fraction
#: of its standard deviation (the joint step, so how the set-aside poles would still move
#: is accounted for). Poles that the table will set aside as residual terms (too weak or
#: frequency not determined, :mod:`._select`) wander slowly through the noise for dozens
#: of iterations while the modes moved by less than 1 % of a standard deviation (bias
#: that small adds 1e-4 of the variance: far inside the accuracy targets).
COLD_STD_TOL = 0.01

#: A pole is "clearly not a mode" (its convergence is not waited for) when its energy is
#: below the table's energy limit (``ENERGY_FACTOR`` times the significance limit) by
#: this factor, or its frequency standard deviation exceeds the table's limit
#: (:func:`._select.frequency_std_limit`) by this factor: a margin so that no pole near
#: a limit is left unconverged (common practice).
CLEARLY_NOT_A_MODE = 3.0

#: The same for a warm start (a refit, a fast preview), without a margin: a pole the
#: table would set aside at the look is not waited for (its decision may flip in a fresh
#: fit, which a refit's documentation allows).
WARM_NOT_A_MODE = 1.0

#: Most iterations on one set of modes, and over the whole prune loop: the loop's cost is
#: bounded whatever the data (a misfit window that drops one mode per round ends after at
#: most this many normal-matrix builds); a fit stopped by a budget says so in
#: ``CoreResult.converged`` (common practice: a well-posed fit converges in a few dozen).
MAX_MODEL_ITER = 60
MAX_TOTAL_ITER = 180

#: Most residual evaluations of the final refinement: from a converged start it needs two
#: or three on every campaign of the bench suite; a start that has not converged (data the
#: model does not fit) would spend ten per parameter without improving the fit.
MAX_REFINE_NFEV = 20

#: Two fitted poles closer than this fraction of their magnitude are one pole found twice
#: (1e-4 is far below any resolvable split, 1/(fs T) of a record, and far above rounding).
DUPLICATE_POLE_TOL = 1e-4

#: Damping ratio of a user-seeded pole: sigma = zeta w and u = wd^2 = w^2 (1 - zeta^2), so
#: its natural frequency is the frequency asked for; 1 % is typical of lightly damped
#: structures (common practice) and the refinement moves it to the fitted value.
SEED_DAMPING = 0.01

#: Most principal components kept for the fit (the signal rank is 2 per mode).
MAX_COMPONENTS = 32


@dataclass
class CoreResult:
    x: np.ndarray  # packed (sigma, u) per mode
    prob: Problem  # compressed problem (for refits)
    cov: np.ndarray
    fn: np.ndarray
    zeta: np.ndarray
    fn_std: np.ndarray
    zeta_std: np.ndarray
    sigma: np.ndarray
    u: np.ndarray
    significance: np.ndarray
    s2: float
    rss: float
    n_tot: int
    minimizer: Any
    pencil: PencilOutput | None
    #: False when the prune loop ended on an iteration budget, not on convergence
    converged: bool = True
    #: prune-loop rounds and LM iterations spent (for budgets and reports)
    rounds: int = 0
    iterations: int = 0


def compress(y: np.ndarray, max_components: int = MAX_COMPONENTS) -> np.ndarray:
    """Leading principal-component signals (r, N) of `y` (P, N): ``U_r^T y``."""
    p = y.shape[0]
    if p <= max_components:
        return y
    gram = y @ y.T
    w, v = np.linalg.eigh(gram)
    top = v[:, np.argsort(w)[::-1][:max_components]]
    return top.T @ y


def _mode_stats(prob: Problem, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fitted energy of each mode and the increase of the (compressed) RSS without it.

    The increase is the one when the mode's two columns are left out and the other poles
    are kept: the likelihood-ratio statistic of the mode (times s^2); unlike the mode's
    own fitted energy it stays small for pairs of spurious modes that cancel each other.
    It comes exactly from the full fit, without refitting: leaving out a block ``k`` of
    regressors raises the RSS by ``b_k^T V_kk^-1 b_k`` per signal, with ``b_k`` the block's
    coefficients and ``V = (Phi^T Phi)^-1`` (the extra sum of squares of a subset of
    coefficients; Seber & Lee 2003, Linear Regression Analysis, 2nd ed., Wiley, sec. 4.5).
    """
    phi = prob.basis(x)
    d = prob.data_t
    q, rr = np.linalg.qr(phi)
    m = x.size // 2
    try:
        from scipy.linalg import solve_triangular

        rinv = solve_triangular(rr, np.eye(rr.shape[0]))
        if not np.all(np.isfinite(rinv)):
            raise np.linalg.LinAlgError
    except (np.linalg.LinAlgError, ValueError):
        return _mode_stats_direct(prob, x)
    coef = rinv @ (q.T @ d)
    v = rinv @ rinv.T
    energy = np.empty(m)
    lr = np.empty(m)
    for k in range(m):
        blk = slice(2 * k, 2 * k + 2)
        part = phi[:, blk] @ coef[blk]
        energy[k] = float(np.sum(part**2))
        try:
            lr[k] = float(np.sum(coef[blk] * np.linalg.solve(v[blk, blk], coef[blk])))
        except np.linalg.LinAlgError:
            lr[k] = 0.0
    return energy, np.maximum(lr, 0.0)


def _mode_stats_direct(prob: Problem, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_mode_stats` by refitting without each mode (for a rank-deficient basis)."""
    phi = prob.basis(x)
    d = prob.data_t
    base = float(np.sum(d**2))
    coef, *_ = np.linalg.lstsq(phi, d, rcond=None)

    def rss(cols: np.ndarray) -> float:
        q, _ = np.linalg.qr(cols)
        return base - float(np.sum((q.T @ d) ** 2))

    r0 = rss(phi)
    m = x.size // 2
    energy = np.empty(m)
    out = np.empty(m)
    for k in range(m):
        energy[k] = float(np.sum((phi[:, 2 * k : 2 * k + 2] @ coef[2 * k : 2 * k + 2]) ** 2))
        keep = np.ones(phi.shape[1], bool)
        keep[2 * k : 2 * k + 2] = False
        out[k] = rss(phi[:, keep]) - r0
    return energy, np.maximum(out, 0.0)


def _rss_increase(prob: Problem, x: np.ndarray) -> np.ndarray:
    """Increase of the (compressed) RSS when each mode is left out (:func:`_mode_stats`)."""
    return _mode_stats(prob, x)[1]


def full_rss(y_t: np.ndarray, prob: Problem, x: np.ndarray) -> float:
    """Residual sum of squares of the full (uncompressed) data (N, P) at `x`."""
    q, _ = np.linalg.qr(prob.basis(x))
    proj = q.T @ y_t
    return float(max(np.sum(y_t**2) - np.sum(proj**2), 0.0))


def _valid(prob: Problem, x: np.ndarray, fs: float) -> np.ndarray:
    sigma, u = prob.unpack(x)
    ok = np.ones(sigma.size, bool)
    for k in range(sigma.size):
        wn, z = natural(sigma[k], u[k])
        ok[k] = np.isfinite(wn) and sigma[k] > 0 and wn < np.pi * fs and z > 0
        if u[k] < 0 and sigma[k] - np.sqrt(-u[k]) <= 0:
            ok[k] = False
    return ok


def _not_clearly_aside(prob: Problem, x: np.ndarray, rss: float, n_tot: int, n_lin: int,
                       signif: np.ndarray, thr: float, t_len: float,
                       factor: float) -> np.ndarray | None:
    """Mask over the packed parameters of the poles that may be modes (None: all may be).

    A pole is clearly not a mode when its energy is below the table's limit by `factor`
    or its frequency standard deviation above the table's limit by `factor` (the rules
    of :func:`._select._select_modes`, with a margin).
    """
    cov = covariance(prob, x, rss, n_tot, n_lin)
    fn, _, fn_std, _ = natural_with_cov(prob, x, cov)
    e_min = ENERGY_FACTOR * thr
    aside = np.zeros(fn.size, bool)
    for k in range(fn.size):
        lim = frequency_std_limit(fn[k], t_len) if np.isfinite(fn[k]) else 0.0
        aside[k] = (signif[k] < e_min / factor
                    or not np.isfinite(fn_std[k]) or fn_std[k] > factor * lim)
    if not aside.any() or aside.all():
        return None
    return np.repeat(~aside, 2)


def fit_core(
    y: np.ndarray,
    t: np.ndarray,
    fs: float,
    *,
    f_max: float,
    x0: np.ndarray | None = None,
    max_order: int | None = None,
    n_extra: int = 1,
    max_nfev: int | None = None,
    polish: bool = True,
    seeds_hz: np.ndarray | None = None,
    protect_hz: np.ndarray | None = None,
    defer_polish: bool = False,
) -> CoreResult:
    """Shared poles of the weighted signals `y` (P, N) at times `t` from the window start.

    With `x0` (packed poles of an earlier fit) the pencil is skipped (fast refit). With
    ``polish=False`` the final least-squares pass (:func:`._varpro.refine`, whose
    :class:`._varpro.Refinement` is ``minimizer``) is skipped (a first pass that a
    reweighted second pass will polish); ``minimizer`` is then None. `seeds_hz` adds a starting pole (1 %
    damping) at each frequency not already within 1 % of a found one; a mode within 3 %
    of a frequency in `protect_hz` (``ASKED_TOL``) is never dropped as weak (the user
    asked for it). The final refinement runs only when the prune loop ended on its
    iteration budget: after convergence to Bates & Watts' relative offset
    (:data:`._varpro.RELATIVE_OFFSET_TOL`), or of every pole that may be a mode to
    :data:`COLD_STD_TOL` of its standard deviation (a warm start: :data:`WARM_STD_TOL`
    for every pole), and always with `defer_polish` (refits), the
    table keeps the Levenberg-Marquardt point and ``minimizer`` runs the refinement when
    its lmfit report is asked.
    """
    y_t_full = np.ascontiguousarray(y.T)
    d = compress(y, MAX_COMPONENTS if x0 is None else min(MAX_COMPONENTS, len(x0) + 4))
    r = d.shape[0]
    w_scale = 2 * np.pi * fs / W_SCALE_FRACTION
    prob = Problem(np.ascontiguousarray(d.T), t, w_scale, n_extra)
    pencil = None
    if x0 is None:
        pencil = find_poles(d, fs, f_max, max_order=max_order)
        modes = initial_modes(pencil.candidates, fs)
        if not modes:
            raise EstimationError(
                "no mode found above the noise in the searched band. Hint: check the "
                "window (it should hold the ring-down), the band, or the hit selection."
            )
        sig0 = [m[0] for m in modes]
        u0 = [m[1] for m in modes]
        for f in np.atleast_1d(seeds_hz) if seeds_hz is not None else []:
            w = 2 * np.pi * float(f)
            found = [natural(a, b)[0] for a, b in zip(sig0, u0, strict=True)]
            if any(abs(wf - w) < 0.01 * w for wf in found if np.isfinite(wf)):
                continue
            sig0.append(SEED_DAMPING * w)
            u0.append(w * w * (1 - SEED_DAMPING**2))
        x0 = prob.pack(np.array(sig0), np.array(u0))
    thr = significance_threshold(r)
    x = np.asarray(x0, float)
    res = None
    pruned = 0
    model_iter = 0
    total_iter = 0
    rounds = 0
    converged = False
    warm = pencil is None
    watch = None  # parameters whose convergence is waited for (None: all)
    t_len = float(t[-1] - t[0]) + 1.0 / fs
    while True:
        rounds += 1
        # a look at the modes every ROUND_ITER iterations (early rounds only need to
        # separate real modes from spurious ones); iterations are bounded per model and
        # over the whole loop
        round_iter = WARM_ROUND_ITER if warm and rounds == 1 else ROUND_ITER
        budget = min(round_iter, MAX_MODEL_ITER - model_iter, MAX_TOTAL_ITER - total_iter)
        if warm:
            std_tol = WARM_STD_TOL
        elif watch is not None:
            std_tol = COLD_STD_TOL
        else:
            std_tol = None
        x, its = levenberg_marquardt(prob, x, max_iter=max(budget, 0), std_tol=std_tol,
                                     watch=watch)
        model_iter += its
        total_iter += its
        stopped = its < budget  # on a convergence criterion, not on the budget
        ok = _valid(prob, x, fs)
        energy, lr = _mode_stats(prob, x)
        n_tot = y.size
        n_lin = y.shape[0] * (x.size + n_extra)
        rss = full_rss(y_t_full, prob, x)
        s2 = rss / max(n_tot - n_lin - x.size, 1)
        with np.errstate(over="ignore"):  # noise-free data: infinitely significant
            signif = energy / max(s2, 1e-300)
            lr = lr / max(s2, 1e-300)
        # duplicates: two modes converged onto one pole
        sigma, u = prob.unpack(x)
        dup = np.zeros(sigma.size, bool)
        for i in range(sigma.size):
            for j in range(i):
                if dup[j] or dup[i]:
                    continue
                li = complex(-sigma[i], np.sqrt(abs(u[i])))
                lj = complex(-sigma[j], np.sqrt(abs(u[j])))
                if abs(li - lj) < DUPLICATE_POLE_TOL * max(abs(li), abs(lj)):
                    dup[i if signif[i] < signif[j] else j] = True
        drop = ~ok | dup
        weak = lr < thr
        if protect_hz is not None and len(protect_hz):
            fn_now = np.array([natural(a, b)[0] for a, b in zip(sigma, u, strict=True)]) / (2 * np.pi)
            asked = np.array([np.any(np.abs(f - np.asarray(protect_hz)) < ASKED_TOL * np.asarray(protect_hz))
                              for f in fn_now])
            weak &= ~asked
        out_of_budget = total_iter >= MAX_TOTAL_ITER or pruned >= MAX_PRUNE_ROUNDS
        not_a_mode = WARM_NOT_A_MODE if warm else CLEARLY_NOT_A_MODE
        if not drop.any() and not weak.any():
            if stopped or model_iter >= MAX_MODEL_ITER or out_of_budget:
                converged = stopped
                break
            # the same modes, not converged yet: iterate on (the verdicts for the next round)
            watch = _not_clearly_aside(prob, x, rss, n_tot, n_lin, signif, thr, t_len, not_a_mode)
            continue
        if out_of_budget and not drop.any():
            break  # budget spent: keep what it has (converged stays False)
        # a pruned round follows unless the budget is spent (then the loop ends below)
        watch = None if out_of_budget else _not_clearly_aside(
            prob, x, rss, n_tot, n_lin, signif, thr, t_len, not_a_mode)
        if drop.any():
            keep = ~drop
        else:
            # drop every mode below the threshold at once (the strongest survives)
            keep = ~weak
            if not keep.any():
                keep = np.arange(lr.size) == int(np.argmax(lr))
                if lr.max() < thr:
                    keep[:] = False
        if not keep.any():
            raise EstimationError(
                "no mode found above the noise in the searched band. Hint: check the "
                "window (it should hold the ring-down), the band, or the hit selection."
            )
        idx = np.repeat(np.nonzero(keep)[0] * 2, 2) + np.tile([0, 1], int(keep.sum()))
        x = x[idx]
        if watch is not None:  # the look's verdicts on the poles kept
            watch = watch[idx]
            if watch.all() or not watch.any():
                watch = None
        pruned += 1
        model_iter = 0
        if out_of_budget:
            # modes removed after the budget: the statistics of the kept ones
            energy, _ = _mode_stats(prob, x)
            n_lin = y.shape[0] * (x.size + n_extra)
            rss = full_rss(y_t_full, prob, x)
            s2 = rss / max(n_tot - n_lin - x.size, 1)
            with np.errstate(over="ignore"):
                signif = energy / max(s2, 1e-300)
            break
    # final polish: scipy's least_squares (a converged start: few evaluations); users get
    # it as an lmfit result, built when asked. A deferred polish (refits) only records the
    # start: the table keeps the converged LM point, the refinement runs when asked.
    if polish and (defer_polish or converged):
        # converged to the relative offset, the refinement could move the poles by a
        # negligible fraction of a standard deviation only: it runs when its report is asked
        res = Refinement(prob, x.copy(), max_nfev or 10 * (x.size + 1), x.copy(), None, False,
                         deferred=True, reduced=True)
    elif polish:
        res = refine(prob, x, max_nfev=max_nfev or min(10 * (x.size + 1), MAX_REFINE_NFEV),
                     reduced=True)
        x_l = res.x
        if float(np.sum(prob.residual(x_l) ** 2)) <= float(np.sum(prob.residual(x) ** 2)):
            x = x_l
            rss = full_rss(y_t_full, prob, x)
            s2 = rss / max(n_tot - n_lin - x.size, 1)
    cov = covariance(prob, x, rss, n_tot, n_lin)
    fn, zeta, fn_std, zeta_std = natural_with_cov(prob, x, cov)
    sigma, u = prob.unpack(x)
    return CoreResult(
        x=x, prob=prob, cov=cov, fn=fn, zeta=zeta, fn_std=fn_std, zeta_std=zeta_std,
        sigma=sigma, u=u, significance=signif, s2=s2, rss=rss, n_tot=n_tot,
        minimizer=res, pencil=pencil, converged=converged, rounds=rounds,
        iterations=total_iter,
    )
