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
from ._significance import significance_threshold
from ._varpro import Problem, covariance, levenberg_marquardt, natural_with_cov, refine

#: A fitted mode within this fraction of a frequency the user added is that added mode:
#: a user reads a peak off a spectrum plot to a few per cent; 3 % is tighter than the 5 %
#: of ``drop_modes`` because an added seed moves little while it converges, while a mode to
#: drop is named from a table or chart after the fact (common practice).
ASKED_TOL = 0.03

#: Pole parameters are scaled by ``2 pi fs / 10`` (the angular frequency of a mode at a
#: tenth of the sample rate) so that sigma and u are of order one for the solver; any
#: scale of that order works (a conditioning choice, common practice).
W_SCALE_FRACTION = 10.0

#: Rounds of "refine, drop invalid or insignificant modes, refine again". Each round drops
#: at least one mode or stops; 12 covers the few spurious modes of an over-specified
#: pencil (common practice; a fit that needs more keeps what it has).
MAX_PRUNE_ROUNDS = 12

#: Levenberg-Marquardt iterations over all prune rounds together (four full rounds of 60):
#: a fit that converges needs one or two rounds; data the model does not fit (a second tap
#: in the window) otherwise drop one mode per round at 60 iterations each. The budget bounds
#: the time; such a fit ends with the status "model does not fit" (common practice).
MAX_PRUNE_ITERATIONS = 240

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


def compress(y: np.ndarray, max_components: int = MAX_COMPONENTS) -> np.ndarray:
    """Leading principal-component signals (r, N) of `y` (P, N): ``U_r^T y``."""
    p = y.shape[0]
    if p <= max_components:
        return y
    gram = y @ y.T
    w, v = np.linalg.eigh(gram)
    top = v[:, np.argsort(w)[::-1][:max_components]]
    return top.T @ y


def _mode_energy(prob: Problem, x: np.ndarray) -> np.ndarray:
    phi = prob.basis(x)
    coef, *_ = np.linalg.lstsq(phi, prob.data_t, rcond=None)
    m = x.size // 2
    e = np.empty(m)
    for k in range(m):
        part = phi[:, 2 * k : 2 * k + 2] @ coef[2 * k : 2 * k + 2]
        e[k] = float(np.sum(part**2))
    return e


def _rss_increase(prob: Problem, x: np.ndarray) -> np.ndarray:
    """Increase of the (compressed) RSS when each mode is left out, poles of the others fixed.

    This is the likelihood-ratio statistic of the mode (times s^2); unlike the mode's own
    fitted energy it stays small for pairs of spurious modes that cancel each other.
    """
    phi = prob.basis(x)
    d = prob.data_t
    base = float(np.sum(d**2))

    def rss(cols: np.ndarray) -> float:
        q, _ = np.linalg.qr(cols)
        return base - float(np.sum((q.T @ d) ** 2))

    r0 = rss(phi)
    m = x.size // 2
    out = np.empty(m)
    for k in range(m):
        keep = np.ones(phi.shape[1], bool)
        keep[2 * k : 2 * k + 2] = False
        out[k] = rss(phi[:, keep]) - r0
    return np.maximum(out, 0.0)


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
) -> CoreResult:
    """Shared poles of the weighted signals `y` (P, N) at times `t` from the window start.

    With `x0` (packed poles of an earlier fit) the pencil is skipped (fast refit). With
    ``polish=False`` the final least-squares pass (:func:`._varpro.refine`, whose
    :class:`._varpro.Refinement` is ``minimizer``) is skipped (a first pass that a
    reweighted second pass will polish); ``minimizer`` is then None. `seeds_hz` adds a starting pole (1 %
    damping) at each frequency not already within 1 % of a found one; a mode within 3 %
    of a frequency in `protect_hz` (``ASKED_TOL``) is never dropped as weak (the user
    asked for it).
    """
    y_t_full = np.ascontiguousarray(y.T)
    d = compress(y, MAX_COMPONENTS if x0 is None else min(MAX_COMPONENTS, len(x0) + 4))
    r = d.shape[0]
    w_scale = 2 * np.pi * fs / W_SCALE_FRACTION
    prob = Problem(np.ascontiguousarray(d.T), t, w_scale, n_extra)
    pencil = None
    x0_given = x0
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
    budget = MAX_PRUNE_ITERATIONS
    for rnd in range(MAX_PRUNE_ROUNDS):
        # early rounds only need to separate real modes from spurious ones
        x, used = levenberg_marquardt(
            prob, x, max_iter=max(min(12 if rnd == 0 and x0_given is None else 60, budget), 1))
        budget -= used
        ok = _valid(prob, x, fs)
        energy = _mode_energy(prob, x)
        n_tot = y.size
        n_lin = y.shape[0] * (x.size + n_extra)
        rss = full_rss(y_t_full, prob, x)
        s2 = rss / max(n_tot - n_lin - x.size, 1)
        signif = energy / max(s2, 1e-300)
        lr = _rss_increase(prob, x) / max(s2, 1e-300)
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
        if not drop.any() and not weak.any():
            break
        if budget <= 0 and not drop.any():
            break  # the iteration budget is spent: keep the valid modes as they are
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
    # final polish: scipy's least_squares (a converged start: few evaluations); users get
    # it as an lmfit result, built when asked
    if polish:
        res = refine(prob, x, max_nfev=max_nfev or min(10 * (x.size + 1), MAX_REFINE_NFEV))
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
        minimizer=res, pencil=pencil,
    )
