"""The engine's estimator: a record set and explicit hit decisions in, modal table out.

:class:`SharedPoleFit` is the estimation engine. It never runs hit checks and knows
nothing of recipes: the caller says which hits to use (``accept``). Users call the layer
above it instead:

* :func:`modalnb.fit_modes`: one scripted fit (hit checks, engine, cross-checks, recipe);
* :class:`modalnb.ModeFit`: the same table, kept for repeated refits (widgets, sliders);
* :func:`modalnb.run_recipe`: reproducible replay of a saved recipe (the CLI's path).
"""

from __future__ import annotations

import json
import warnings
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from .._errors import EstimationError
from .._noise import MIN_NOISE_SAMPLES, dead_channels, noise_end, noise_sigma, rms, unit_scale
from .._pulse import contact_end, holds_pulse, pulse_bounds
from .._utils import check_band, default_band, frequency_list
from ..records import get_sample_rate, has_force, records_checksum, validate_records
from ._bands import fit_banded, scatter_banded, use_bands
from ._basis import is_near_critical, pole_of, residues_from_coefficients
from ._convert import modal_conversions
from ._core import ASKED_TOL, CoreResult, compress, fit_core
from ._pencil import (
    MATCH_DAMPING,
    MATCH_ENERGY,
    MATCH_FREQUENCY,
    MATCH_NEW,
    MATCH_SHAPE,
    MATCH_STABLE,
    STABLE_MAC,
)
from ._select import WEAK_FACTOR, _select_modes, fit_quality
from ._significance import significance_threshold
from ._varpro import Problem, natural_with_cov, one_step

#: Fewest window samples: a pencil needs a Hankel matrix of several rows and columns per
#: mode, and a covariance needs residual degrees of freedom (common practice).
MIN_WINDOW_SAMPLES = 16

#: A damping ratio within 0.02 of 1 (or two standard uncertainties, if more) is
#: reported as critical: the repeated-pole basis is used there (common practice).
CRITICAL_TOL = 0.02

#: Fewer oscillation cycles than this in the window make the estimates uncertain (a
#: warning, common practice).
MIN_CYCLES = 3.0

#: Samples kept after the pulse end for the force spectrum integral (the pulse's falling
#: edge reaches zero a sample or two after the 2 % level of ``pulse_bounds``).
FORCE_TAIL_SAMPLES = 2

#: Status notes that make a mode's uncertainty unusable (the status does not start "ok").
_BAD_NOTES = ("covariance", "damping poorly", "all residues", "weak", "model does not fit")


@dataclass
class _Prepared:
    hits: np.ndarray  # all hit labels
    accepted: np.ndarray  # bool per hit
    acc_idx: np.ndarray
    channels: np.ndarray
    live: np.ndarray  # bool per channel (not dead)
    t_win: np.ndarray  # absolute times of the window samples
    i0: int
    i1: int
    data: np.ndarray  # (H_acc, C, N) un-windowed response in the window
    weight: np.ndarray  # per channel
    noise_from: str
    fs: float
    tau: float | None
    with_force: bool = True  # some accepted hit's force record holds a pulse
    scale: np.ndarray | None = None  # per channel: data = original * scale (powers of two)


def accept_decisions(records: xr.Dataset, accept: Any) -> np.ndarray:
    """One bool per hit from the caller's decisions (the engine runs no hit checks).

    None uses every hit; a mapping must decide every hit; a sequence gives one bool per
    hit. Raises a one-line :class:`EstimationError` otherwise.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> ds = records_from_arrays(np.zeros((2, 1, 32)), 64.0)
    >>> accept_decisions(ds, [True, False]).tolist()
    [True, False]
    """
    hits = np.asarray(records["hit"].values)
    if accept is None:
        return np.ones(hits.size, bool)
    if isinstance(accept, Mapping):
        labels = hits.tolist()
        unknown = [k for k in accept if k not in labels]
        if unknown:
            raise EstimationError(
                f"`accept` names hit {unknown[0]!r}, which is not in the records (hits {labels})."
            )
        missing = [h for h in labels if h not in accept]
        if missing:
            raise EstimationError(
                f"`accept` decides no hit {missing[0]!r}: the engine needs a decision for every "
                "hit. Hint: use modalnb.fit_modes or modalnb.ModeFit, which run the hit checks "
                "for the hits you leave out."
            )
        return np.array([bool(accept[h]) for h in labels])
    acc = np.asarray(list(accept) if not isinstance(accept, np.ndarray) else accept)
    if acc.shape != hits.shape or acc.dtype.kind not in "bi":
        raise EstimationError(
            f"`accept` must be a mapping hit -> bool or {hits.size} booleans, got {accept!r}."
        )
    return acc.astype(bool)


def _window_indices(t: np.ndarray, fs: float, window: Any, i_default: int) -> tuple[int, int]:
    if window is None:
        i0, i1 = i_default, t.size
    else:
        try:
            w0, w1 = (float(v) for v in window)
        except (TypeError, ValueError):
            raise EstimationError(f"`window` must be (t0, t1) in seconds, got {window!r}.") from None
        if not (w1 > w0):
            raise EstimationError(f"`window` must have t0 < t1, got {window!r}.")
        # a sample within a nanosample of an edge belongs to the window (rounding of times)
        i0 = int(np.searchsorted(t, w0 - 1e-9 / fs))
        i1 = int(np.searchsorted(t, w1 + 1e-9 / fs, side="right"))
    if i1 - i0 < MIN_WINDOW_SAMPLES:
        raise EstimationError(
            f"window {t[min(i0, t.size - 1)]:.6g}..{t[max(i1 - 1, 0)]:.6g} s holds {max(i1 - i0, 0)} "
            f"samples; at least {MIN_WINDOW_SAMPLES} are needed. Hint: widen the window."
        )
    return i0, i1


def _noise_weights(
    resp: np.ndarray, acc_idx: np.ndarray, t: np.ndarray, pulse_start: int | None,
    data: np.ndarray, live: np.ndarray,
) -> tuple[np.ndarray, str]:
    """Channel weights 1/noise from the pre-trigger samples (:mod:`modalnb._noise`), or
    1/RMS of the window when there are too few of them."""
    pre_end = noise_end(t, pulse_start)
    weight = np.zeros(live.size)
    if pre_end >= MIN_NOISE_SAMPLES:
        sig = noise_sigma(resp[acc_idx][:, :, :pre_end], axis=(0, 2))
        if np.all(sig[live] > 0):
            weight[live] = 1.0 / sig[live]
            return weight, "pre-trigger samples"
    rms = noise_sigma(data, axis=(0, 2))
    weight[live] = 1.0 / rms[live]
    return weight, "window RMS (no pre-trigger noise)"


def _prepare(records: xr.Dataset, window: Any, accept: Any) -> _Prepared:
    records = validate_records(records)
    fs = get_sample_rate(records)
    t = np.asarray(records["time"].values, float)
    hits = np.asarray(records["hit"].values)
    acc = accept_decisions(records, accept)
    if not acc.any():
        raise EstimationError(
            f"all {hits.size} hits are rejected; nothing to fit. Hint: accept at least one "
            "hit, or record new hits."
        )
    acc_idx = np.nonzero(acc)[0]
    resp = np.asarray(records["response"].values, float)
    # each channel at unit peak (a power of two, exact) before any arithmetic that can
    # overflow or underflow; the residues are divided by it again (original units)
    scale = unit_scale(resp[acc_idx], axis=(0, 2)).reshape(-1)
    resp = resp * scale[None, :, None]
    pulse_start = None
    nonneg = np.nonzero(t >= 0)[0]
    i_default = int(nonneg[0]) if nonneg.size else 0
    # only hits whose force record holds a pulse bound the window (a flat force: none)
    force = np.asarray(records["force"].values, float) if has_force(records) else None
    pulsed = [h for h in acc_idx if force is not None and holds_pulse(force[h])]
    if pulsed:
        bounds = [pulse_bounds(force[h], t) for h in pulsed]
        # after the last contact of every accepted hit (a double hit that the user
        # accepted contributes free decay only after its second tap), never before t = 0
        i_default = max(i_default, *(contact_end(force[h], t) for h in pulsed))
        pulse_start = min(b[0] for b in bounds)
    i0, i1 = _window_indices(t, fs, window, i_default)
    t_win = t[i0:i1]
    data = resp[acc_idx][:, :, i0:i1].copy()
    tau = records.attrs.get("exponential_window_tau_s")
    tau = float(tau) if tau is not None else None
    if tau is not None:
        # the recorded response for t >= 0 is w(t) (x + noise) with w = exp(-t/tau): undo it
        gain = np.where(t_win >= 0, np.exp(np.clip(t_win, 0, None) / tau), 1.0)
        data *= gain
    channels = np.asarray(records["channel"].values)
    live = ~dead_channels(data)
    if not live.any():
        raise EstimationError(
            "every channel is constant (dead) in the window for the accepted hits. Hint: check "
            "the sensors or the window."
        )
    weight, noise_from = _noise_weights(resp, acc_idx, t, pulse_start, data, live)
    return _Prepared(
        hits=hits, accepted=acc, acc_idx=acc_idx, channels=channels, live=live, t_win=t_win,
        i0=i0, i1=i1, data=data, weight=weight, noise_from=noise_from, fs=fs, tau=tau,
        with_force=bool(pulsed), scale=scale,
    )


def _stack(prep: _Prepared, weight: np.ndarray) -> np.ndarray:
    d = prep.data[:, prep.live, :] * weight[prep.live][None, :, None]
    return d.reshape(-1, d.shape[-1])


def _force_spectrum(records: xr.Dataset, prep: _Prepared, lam: complex) -> np.ndarray:
    """F(lambda) = sum_n f[n] exp(-lambda t_n) dt over the pulse of each accepted hit."""
    t = np.asarray(records["time"].values, float)
    force = np.asarray(records["force"].values, float)
    out = np.empty(prep.acc_idx.size, complex)
    for i, h in enumerate(prep.acc_idx):
        s, _, e = pulse_bounds(force[h], t)
        e = min(e + FORCE_TAIL_SAMPLES, t.size)
        out[i] = np.sum(force[h, s:e] * np.exp(-lam * t[s:e])) / prep.fs
    return out


def _stabilisation(core: CoreResult) -> xr.Dataset:
    rows = core.pencil.rows if core.pencil is not None else []
    arr = np.array(rows, dtype=float).reshape(-1, 9)
    codes = (MATCH_NEW, MATCH_FREQUENCY, MATCH_DAMPING, MATCH_ENERGY, MATCH_SHAPE, MATCH_STABLE)
    return xr.Dataset(
        {
            "pencil_pass": ("pole", arr[:, 0].astype(int)),
            "order": ("pole", arr[:, 1].astype(int)),
            "frequency_hz": ("pole", arr[:, 3], {"long_name": "natural frequency"}),
            "damped_frequency_hz": ("pole", arr[:, 2]),
            "damping_ratio": ("pole", arr[:, 4]),
            "stable": ("pole", arr[:, 5].astype(bool)),
            "significance": ("pole", arr[:, 6], {"long_name": "pole energy over the residual "
                                                 "variance of its order's fit (NaN in an order "
                                                 "without a stable pole)"}),
            "mac": ("pole", arr[:, 7], {"long_name": "MAC of the pole's shape with the matched "
                                        "pole of the previous order (Allemang & Brown 1982; "
                                        "NaN without a pole within 1 % in frequency)"}),
            "stable_shape": ("pole", arr[:, 5].astype(bool) & (arr[:, 7] >= STABLE_MAC), {
                "long_name": "stable in frequency, damping, energy and shape (MAC >= 0.9)"}),
            "match": ("pole", arr[:, 8].astype(np.int8), {
                "long_name": "why the pole is or is not stable: the first test it fails "
                             "against the previous order of its pencil",
                # CF conventions' flag attributes (flag_values / flag_meanings)
                "flag_values": np.array(codes, np.int8),
                "flag_meanings": "new frequency damping energy shape stable"}),
        },
        attrs={"description": "poles versus pencil order; pass 0 is the wide-band pass, "
               "passes 1.. the sub-bands; stable = a pole of the previous order within 1 % in "
               "natural frequency and 5 % in damping ratio (common practice), and energy "
               "above the candidate significance limit; stable_shape = stable and a shape MAC "
               ">= 0.9 with that pole (common practice); shapes are the pole's coefficients "
               "over the pass's leading signal components"},
    )


@contextmanager
def _blas_limit(n: int | None) -> Iterator[None]:
    """Limit the BLAS thread pools to `n` threads for the duration (None: leave them).

    The fit's matrices are tall and thin (samples x a few dozen columns); several BLAS
    threads gain little on them and lose much when the machine is busy (another kernel, a
    dask worker per core), so the default is one (``threadpoolctl``).
    """
    if n is None:
        yield
        return
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - threadpoolctl is a dependency
        yield
        return
    with threadpool_limits(limits=int(n), user_api="blas"):
        yield


# ---------------------------------------------------------------- table steps
def _lsq_at_poles(core: CoreResult, rhs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(Phi, coefficients)``: least squares of `rhs` (N, K) on the basis at the final
    poles, through the basis's QR (the fit's own factorisation, computed once for the
    table's steps); the SVD-based ``lstsq`` where the basis is not finite or near rank
    deficient (its minimum-norm solution)."""
    phi, q, rr = core.prob._factor(core.x)
    if q is not None:
        dr = np.abs(np.diag(rr))
        if dr.size and dr.min() > 1e-10 * dr.max():
            from scipy.linalg import solve_triangular

            return phi, solve_triangular(rr, q.T @ rhs, check_finite=False)
    return phi, np.linalg.lstsq(phi, rhs, rcond=None)[0]


def _residue_fit(prep: _Prepared, core: CoreResult) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Linear coefficients of every signal (unweighted data, least squares at the final
    poles), R^2 per channel and the residual RMS per channel.

    One QR factorisation of the basis serves every channel, taken one at a time, so the
    working memory is the basis plus one channel's hits (not several copies of the whole
    record set: long records). A basis too ill-conditioned for a triangular solve falls
    back to a minimum-norm least squares over all signals at once.
    """
    n_hit_acc, n_ch, n = prep.data.shape
    phi, q, rr = core.prob._factor(core.x)  # the fit's own QR of the basis
    dr = np.abs(np.diag(rr)) if q is not None else np.zeros(0)
    if dr.size == 0 or dr.min() <= 1e-10 * dr.max():
        return _residue_fit_lstsq(prep, phi)
    from scipy.linalg import solve_triangular

    coef = np.empty((phi.shape[1], n_hit_acc * n_ch))
    r_sig, r_res = np.empty(n_ch), np.empty(n_ch)
    for c in range(n_ch):
        blk = prep.data[:, c, :].T  # (n, hits)
        proj = q.T @ blk
        coef[:, c::n_ch] = solve_triangular(rr, proj, check_finite=False)
        # R^2 = 1 - (RMS residual / RMS signal)^2: a ratio of scale-safe RMS values
        r_res[c] = rms(blk - q @ proj)
        r_sig[c] = rms(blk - blk.mean(axis=0, keepdims=True))
    fit_r2 = np.where(r_sig > 0, 1.0 - (r_res / np.where(r_sig > 0, r_sig, 1.0)) ** 2, 0.0)
    return coef, fit_r2, r_res


def _residue_fit_lstsq(prep: _Prepared, phi: np.ndarray
                       ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`_residue_fit` by one minimum-norm least squares (a rank-deficient basis)."""
    n_hit_acc, n_ch, n = prep.data.shape
    flat = prep.data.transpose(2, 0, 1).reshape(n, -1)
    coef, *_ = np.linalg.lstsq(phi, flat, rcond=None)
    resid = flat.reshape(n, n_hit_acc, n_ch) - (phi @ coef).reshape(n, n_hit_acc, n_ch)
    dm = flat.reshape(n, n_hit_acc, n_ch)
    dm = dm - dm.mean(axis=0, keepdims=True)
    r_sig, r_res = rms(dm, axis=(0, 1)), rms(resid, axis=(0, 1))
    fit_r2 = np.where(r_sig > 0, 1.0 - (r_res / np.where(r_sig > 0, r_sig, 1.0)) ** 2, 0.0)
    return coef, fit_r2, r_res


def _fit_quality(prep: _Prepared, core: CoreResult, resid_rms: np.ndarray
                 ) -> tuple[np.ndarray, dict[str, Any]]:
    """Residual RMS over the pre-trigger noise per channel (NaN without pre-trigger noise
    or for a dead channel) and the whole fit's quality (:func:`._select.fit_quality`)."""
    noise_known = prep.noise_from == "pre-trigger samples"
    ratio = np.full(prep.live.size, np.nan)
    if noise_known:
        ratio[prep.live] = resid_rms[prep.live] * prep.weight[prep.live]
    d = core.prob.data_t
    phi, c = _lsq_at_poles(core, d)
    quality = fit_quality(ratio[prep.live], noise_known, d - phi @ c)
    return ratio, quality


def _aside_variables(core: CoreResult, aside: list[tuple[int, str]]) -> dict[str, Any]:
    """The poles set aside (residual terms kept in the model, not modes), dim ``aside_pole``."""
    idx = [k for k, _ in aside]
    reason = np.array([r for _, r in aside], dtype=object)

    def take(a: np.ndarray) -> np.ndarray:
        return np.asarray(a, float)[idx] if idx else np.zeros(0)

    return {
        "aside_frequency_hz": ("aside_pole", take(core.fn), {"units": "Hz"}),
        "aside_damping_ratio": ("aside_pole", take(core.zeta), {"units": "1"}),
        "aside_frequency_hz_std": ("aside_pole", take(core.fn_std), {"units": "Hz"}),
        "aside_energy": ("aside_pole", take(core.significance), {
            "units": "1", "description": "fitted energy over the noise variance"}),
        "aside_reason": ("aside_pole", reason, {
            "description": "why the pole is a residual term of the model, not a mode"}),
    }


def _regime(z: float, zstd: float) -> str:
    if abs(z - 1.0) <= max(CRITICAL_TOL, 2 * zstd if np.isfinite(zstd) else 0.0):
        return "critical"
    return "underdamped" if z < 1 else "overdamped"


def _record_residues(core: CoreResult, coef: np.ndarray, k: int, t_w0: float,
                     shape: tuple[int, int]) -> tuple[np.ndarray, complex]:
    """Residues (accepted hit, channel) of mode `k` with t = 0 the record origin, and its pole."""
    sigma, u = float(core.sigma[k]), float(core.u[k])
    a = coef[2 * k].reshape(shape)
    b = coef[2 * k + 1].reshape(shape)
    if is_near_critical(sigma, u):
        # (a + b t') e^{-sigma t'}, t' = t - t_w0: move the origin to t = 0
        g = np.exp(sigma * t_w0)
        a0, b0 = (a - b * t_w0) * g, b * g
        return residues_from_coefficients(a0, b0, sigma, u), complex(-sigma, 0.0)
    lam = pole_of(sigma, u)
    return residues_from_coefficients(a, b, sigma, u) * np.exp(-lam * t_w0), lam


def _force_normalise(records: xr.Dataset, prep: _Prepared, r: np.ndarray, lam: complex,
                     use_force: bool, notes: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Channel residues (least squares over hits) and per-hit residues, per unit force."""
    if not use_force:
        return r.mean(axis=0), r
    ftil = _force_spectrum(records, prep, lam)
    g = float(unit_scale(np.abs(ftil)).item())  # at unit peak: any force units
    denom = np.sum(np.abs(ftil * g) ** 2)
    if denom > 0:
        with np.errstate(over="ignore"):  # a ratio beyond double precision: noted
            ch = np.sum(np.conj(ftil * g)[:, None] * r, axis=0) / denom * g
            per_hit = r / np.where(ftil != 0, ftil, 1.0)[:, None]
        if not (np.all(np.isfinite(ch)) and np.all(np.isfinite(per_hit))):
            raise EstimationError(
                "the residues per unit force exceed double precision (about 1e308) in these "
                "units. Hint: record the response or the force in other units.")
        return ch, per_hit
    notes.append("force spectrum zero at the pole: residues not force-normalised")
    return r.mean(axis=0), r


def _shape_of(ch: np.ndarray, sign: np.ndarray, notes: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Amplitude and phase (deg, in (-180, 180]) normalised to the largest component."""
    psi = ch * sign
    ref = int(np.argmax(np.abs(psi)))
    if abs(psi[ref]) > 0:
        psin = psi / psi[ref]
        ph = np.degrees(np.angle(psin))
        return np.abs(psin), np.where(ph <= -180.0 + 1e-9, 180.0, ph)
    notes.append("all residues zero: shape undefined (amplitudes 0)")
    return np.zeros(ch.size), np.zeros(ch.size)


def _damping_measures(fn: float, z: float, regime: str) -> dict[str, float]:
    """The damping measures of the table through :func:`modal_conversions`."""
    keys = ("damped_frequency_hz", "q_factor", "loss_factor", "log_decrement",
            "decay_time_constant_s", "decay_rate_db_per_s")
    try:
        conv = modal_conversions(fn, z)
    except EstimationError:  # a non-positive or undefined pole: no measures
        return dict.fromkeys(keys, float("nan"))
    out = {key: conv[key] for key in keys}
    if regime != "underdamped":
        out["damped_frequency_hz"] = out["log_decrement"] = float("nan")
    return out


def _status(notes: list[str]) -> str:
    if any(s.startswith(_BAD_NOTES) for s in notes):
        return "; ".join(notes)
    return "; ".join(["ok", *notes])


_UNITS = {"frequency_hz": "Hz", "frequency_hz_std": "Hz", "frequency_hz_scatter": "Hz",
          "damped_frequency_hz": "Hz", "decay_time_constant_s": "s",
          "decay_rate_db_per_s": "dB/s"}

_MODE_COLUMNS = ("frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std",
                 "frequency_hz_scatter", "damping_ratio_scatter", "damped_frequency_hz",
                 "q_factor", "loss_factor", "log_decrement", "decay_time_constant_s",
                 "decay_rate_db_per_s", "mode_energy")


class SharedPoleFit:
    """The estimation engine: shared-pole modal fit of a record set with given hit decisions.

    This is the engine under :func:`modalnb.fit_modes` and :class:`modalnb.ModeFit`; it
    runs no hit checks (``accept`` says which hits to use; None uses every hit) and
    attaches neither hit reasons, cross-checks nor a recipe. Use it directly for
    benchmarks and tests of the estimator itself; users want :class:`modalnb.ModeFit`.

    Parameters
    ----------
    band, window, n_modes, max_order, scatter, blas_threads, add_modes, drop_modes
        As in :func:`modalnb.fit_modes`.
    accept : mapping or sequence of bool, optional
        A decision for every hit: a mapping ``{hit: bool}`` naming every hit, or one bool
        per hit. None: every hit is used.

    Attributes
    ----------
    result_ : xarray.Dataset
        The engine's modal table (the variables of :func:`modalnb.fit_modes` but the
        hit-check and cross-check ones).
    window_ : (float, float)
        Times (s) of the first and last sample the last fit or refit used.
    accept_ : ndarray of bool
        The hit decisions the last fit or refit used.
    minimizer_result_ : lmfit.MinimizerResult or None
        The final refinement (scipy's trust-region reflective ``least_squares``: Branch,
        Coleman & Li 1999, SIAM J. Sci. Comput. 21(1)) as an lmfit result (Newville et al.
        2014, LMFIT), built the first time it is read (lmfit is imported only then; after a
        converged Levenberg-Marquardt it starts from the table's poles and runs then;
        ``fit_report()`` works; parameters
        ``m<k>_sigma``, ``m<k>_u`` are the packed poles of every fitted mode, including
        those outside the band or dropped from the table).
    stabilisation_ : xarray.Dataset
        Poles versus order of the pencils, for a stabilisation chart.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.testing.synth import free_decay
    >>> t = np.arange(2048) / 2048.0
    >>> x = free_decay(t, 50.0, 0.01) + 1e-4 * np.random.default_rng(0).standard_normal(2048)
    >>> eng = SharedPoleFit(accept=[True]).fit(records_from_arrays(x, 2048.0))
    >>> round(float(eng.result_["frequency_hz"][0]), 2), eng.window_
    (50.0, (0.0, 0.99951171875))
    """

    def __init__(
        self,
        *,
        band: tuple[float, float] | None = None,
        window: tuple[float, float] | None = None,
        n_modes: int | None = None,
        accept: Mapping[int, bool] | Sequence[bool] | None = None,
        max_order: int | None = None,
        scatter: bool = True,
        blas_threads: int | None = 1,
        add_modes: Sequence[float] | None = None,
        drop_modes: Sequence[float] | None = None,
    ):
        self.band = band
        self.window = window
        self.n_modes = n_modes
        self.accept = accept
        self.max_order = max_order
        self.scatter = scatter
        self.blas_threads = blas_threads
        self.add_modes = add_modes
        self.drop_modes = drop_modes

    def _records_checksum(self, records: xr.Dataset) -> str:
        if getattr(self, "_checksum", None) is None or records is not self._records:
            self._checksum = records_checksum(records)
        return self._checksum

    # ------------------------------------------------------------------ public
    def fit(self, records: xr.Dataset) -> SharedPoleFit:
        """Estimate the modes of `records` with the constructor's choices; returns self."""
        self._records = records
        self._checksum = None  # of these records, computed once (refits reuse it)
        self._run(records, self.window, self.accept, x0=None)
        return self

    def refit(
        self,
        window: tuple[float, float] | None = None,
        accept: Mapping[int, bool] | Sequence[bool] | None = None,
    ) -> xr.Dataset:
        """Re-estimate in `window` (None: automatic) starting from the current poles.

        `accept` (None: the decisions of the last fit) changes the hits used. The
        constructor's parameters are left as they are; the window and decisions used go
        to ``window_`` and ``accept_``. Returns the new ``result_``; modes that vanish in
        the new window are dropped.
        """
        self._check_fitted()
        self._run(self._records, window, self.accept_ if accept is None else accept, x0=self._x)
        return self.result_

    @property
    def minimizer_result_(self) -> Any:
        """The final refinement as an ``lmfit.MinimizerResult`` (None without one)."""
        try:
            ref = self._refinement
        except AttributeError:
            raise AttributeError(
                f"{type(self).__name__!r} has no 'minimizer_result_' before 'fit'"
            ) from None
        return None if ref is None else ref.minimizer_result()

    def fit_report(self) -> str:
        """lmfit's text report of the final refinement (``lmfit.fit_report``)."""
        self._check_fitted()
        import lmfit

        return lmfit.fit_report(self.minimizer_result_)

    def _check_fitted(self) -> None:
        if not hasattr(self, "result_"):
            raise EstimationError(
                f"This {type(self).__name__} instance is not fitted yet. Call 'fit' with the "
                "records before using this method."
            )

    # ---------------------------------------------------------------- internals
    def _run(self, records: xr.Dataset, window: Any, accept: Any, x0: np.ndarray | None) -> None:
        with _blas_limit(self.blas_threads):
            self._run_unlimited(records, window, accept, x0)

    def _choices(self, fs: float) -> tuple[tuple[float, float], np.ndarray, list[float]]:
        band = check_band(self.band, fs, error=EstimationError) or default_band(fs)
        if self.n_modes is not None and (int(self.n_modes) != self.n_modes or self.n_modes < 1):
            raise EstimationError(f"`n_modes` must be a positive integer, got {self.n_modes!r}.")
        asked = np.asarray(frequency_list("`add_modes`", self.add_modes, EstimationError))
        dropped = frequency_list("`drop_modes`", self.drop_modes, EstimationError)
        return band, asked, dropped

    def _run_unlimited(
        self, records: xr.Dataset, window: Any, accept: Any, x0: np.ndarray | None
    ) -> None:
        fs = get_sample_rate(validate_records(records))
        band, asked, dropped = self._choices(fs)
        prep = _prepare(records, window, accept)
        core, weight = self._fit_poles(prep, asked, x0)
        self._x = core.x
        self._refinement = core.minimizer
        if core.pencil is not None or not hasattr(self, "stabilisation_"):
            self.stabilisation_ = _stabilisation(core)
        self.result_ = self._assemble(records, prep, core, weight, band, window, asked, dropped)
        self.window_ = (float(prep.t_win[0]), float(prep.t_win[-1]))
        self.accept_ = prep.accepted.copy()

    def _fit_poles(self, prep: _Prepared, asked: np.ndarray,
                   x0: np.ndarray | None) -> tuple[CoreResult, np.ndarray]:
        """Shared poles of the weighted signals; without a pre-trigger noise floor, a first
        fit, then each channel reweighted by its residual RMS and refined."""
        fs = prep.fs
        if use_bands(prep.t_win.size, fs, self.band):  # a long record: zoom bands (_bands.py)
            return fit_banded(prep, self._choices(fs)[0], asked, x0, self.max_order)
        t_rel = prep.t_win - prep.t_win[0]
        y = _stack(prep, prep.weight)
        f_search = default_band(fs)[1]
        n_live = int(prep.live.sum())
        reweight = prep.noise_from != "pre-trigger samples" and n_live > 1
        seeds = asked if x0 is None and asked.size else None
        refit = x0 is not None  # a warm start: the final refinement is deferred
        core = fit_core(y, t_rel, fs, f_max=f_search, x0=x0, max_order=self.max_order,
                        polish=not reweight, seeds_hz=seeds, protect_hz=asked,
                        defer_polish=refit)
        weight = prep.weight
        if reweight:
            # reweight each channel by its residual RMS and refine (equal noise after weighting)
            coef = core.prob.coefficients(core.x, np.ascontiguousarray(y.T))
            res = y.T - core.prob.basis(core.x) @ coef
            res = res.T.reshape(prep.acc_idx.size, n_live, -1)
            rms = np.sqrt(np.mean(res**2, axis=(0, 2)))
            weight = weight.copy()
            weight[prep.live] = weight[prep.live] / np.where(rms > 0, rms, 1.0)
            pencil = core.pencil
            y = _stack(prep, weight)
            core = fit_core(y, t_rel, fs, f_max=f_search, x0=core.x, max_order=self.max_order,
                            protect_hz=asked, defer_polish=refit)
            core.pencil = pencil
            prep.noise_from = "residual RMS of a first fit"
        return core, weight

    def _per_hit_scatter(
        self, prep: _Prepared, core: CoreResult, weight: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray]:
        """Standard deviation over accepted hits of per-hit pole estimates (NaN below 3 hits).

        Each hit's poles are one Gauss-Newton step from the shared poles on that hit's
        signals alone (Kaufman's normal equations of :mod:`._varpro`): the linearised pole
        update ``dx = -(J^T J)^-1 J^T r``. From a consistent start one Newton-type step is
        first-order equivalent to the full per-hit minimiser (the one-step estimator, Le Cam
        1956, "On the asymptotic theory of estimation and testing hypotheses", Proc. Third
        Berkeley Symp. 1; Bickel 1975, "One-step Huber estimates in the linear model",
        JASA 70), so the scatter costs one normal-matrix build per hit instead of a fit.
        """
        n_hit = prep.acc_idx.size
        m = core.sigma.size
        if not self.scatter or n_hit < 3:
            return np.full(m, np.nan), np.full(m, np.nan)
        if use_bands(prep.t_win.size, prep.fs, self.band):  # a long record: per-hit band refits
            return scatter_banded(prep, core, weight, self._choices(prep.fs)[0])
        t_rel = prep.t_win - prep.t_win[0]
        fns, zs = [], []
        first: Problem | None = None
        for i in range(n_hit):
            d = prep.data[i][prep.live] * weight[prep.live][:, None]
            d = compress(d, min(d.shape[0], core.x.size + 4))
            prob = Problem(np.ascontiguousarray(d.T), t_rel, core.prob.w_scale, core.prob.n_extra)
            if first is None:
                first = prob
            else:  # the basis and its derivatives at the shared poles: computed once
                prob.share_factors(first)
            x = one_step(prob, core.x)
            fn, z, _, _ = natural_with_cov(prob, x, np.zeros((x.size, x.size)))
            fns.append(fn)
            zs.append(z)
        with np.errstate(invalid="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a mode with < 2 finite hits
            return (np.nanstd(np.array(fns), axis=0, ddof=1),
                    np.nanstd(np.array(zs), axis=0, ddof=1))

    def _assemble(
        self, records: xr.Dataset, prep: _Prepared, core: CoreResult, weight: np.ndarray,
        band: tuple[float, float], window: Any, asked: np.ndarray, dropped: list[float],
    ) -> xr.Dataset:
        """The engine's table: per-mode values, shapes, residues, per-channel fit quality."""
        n_ch = prep.data.shape[1]
        coef, fit_r2, resid_rms = _residue_fit(prep, core)
        t_len = float(prep.t_win[-1] - prep.t_win[0]) + 1.0 / prep.fs
        sel, aside = _select_modes(core, band, dropped, self.n_modes, t_len, prep.fs, asked)
        noise_ratio, quality = _fit_quality(prep, core, resid_rms)
        scat_f, scat_z = self._per_hit_scatter(prep, core, weight)
        use_force = has_force(records) and prep.with_force
        sign = np.ones(n_ch)
        if "direction" in records.coords:
            sign = np.array([-1.0 if str(d).strip().startswith("-") else 1.0
                             for d in records["direction"].values.tolist()])
        m = len(sel)
        cols = {name: np.zeros(m) for name in _MODE_COLUMNS}
        per_mode: dict[str, Any] = {
            "hit_res": np.full((m, prep.hits.size, n_ch), np.nan, complex),
            "ch_res": np.zeros((m, n_ch), complex), "shape_amp": np.zeros((m, n_ch)),
            "shape_ph": np.zeros((m, n_ch)), "status": [], "regime": [],
            "fit_note": quality["note"],
        }
        for i, k in enumerate(sel):
            self._mode_row(i, k, records, prep, core, coef, asked, use_force, sign,
                           (scat_f, scat_z), cols, per_mode)
        extra = _aside_variables(core, aside)
        extra["residual_noise_ratio"] = ("channel", noise_ratio, {
            "description": "residual RMS over the pre-trigger noise (NaN without pre-trigger "
                           "noise); about 1 when the model fits"})
        ds = self._dataset(records, prep, cols, per_mode, fit_r2, use_force, extra)
        settings = self._settings(prep, core, band, window, asked, dropped, cols)
        settings["fit_quality"] = {k: v for k, v in quality.items() if k != "note"}
        settings["fit_quality"]["note"] = quality["note"] or "ok"
        settings["poles_set_aside"] = len(aside)
        ds.attrs = {
            "settings": json.dumps(settings),
            "band": settings["band"], "window": settings["window"],
            "n_modes": -1 if self.n_modes is None else int(self.n_modes),
            "exponential_window_tau_s": -1.0 if prep.tau is None else prep.tau,
            "input_checksum": self._records_checksum(records),
        }
        return ds

    def _mode_row(
        self, i: int, k: int, records: xr.Dataset, prep: _Prepared, core: CoreResult,
        coef: np.ndarray, asked: np.ndarray, use_force: bool, sign: np.ndarray,
        scatter: tuple[np.ndarray, np.ndarray], cols: dict[str, np.ndarray],
        per_mode: dict[str, Any],
    ) -> None:
        """Fill row `i` of the table with fitted mode `k`: values, residues, shape, status."""
        n_hit_acc, n_ch, _ = prep.data.shape
        t_rel = prep.t_win - prep.t_win[0]
        fn, z = float(core.fn[k]), float(core.zeta[k])
        fstd, zstd = float(core.fn_std[k]), float(core.zeta_std[k])
        notes: list[str] = []
        reg = _regime(z, zstd)
        per_mode["regime"].append(reg)
        r, lam = _record_residues(core, coef, k, float(prep.t_win[0]), (n_hit_acc, n_ch))
        if prep.scale is not None:
            r = r / prep.scale[None, :]  # back to the original units
        ch, per_hit = _force_normalise(records, prep, r, lam, use_force, notes)
        per_mode["hit_res"][i][prep.acc_idx] = per_hit
        per_mode["ch_res"][i] = ch
        per_mode["shape_amp"][i], per_mode["shape_ph"][i] = _shape_of(ch, sign, notes)
        measures = _damping_measures(fn, z, reg)
        if reg == "underdamped":
            cycles = measures["damped_frequency_hz"] * (t_rel[-1] + 1 / prep.fs)
            if cycles < MIN_CYCLES:
                notes.append(f"window holds only {cycles:.1f} cycles: estimates uncertain")
        else:
            notes.append(f"{reg}: no oscillation, damped_frequency_hz and log_decrement undefined")
        if not (np.isfinite(fstd) and np.isfinite(zstd)):
            fstd = fstd if np.isfinite(fstd) else float("nan")
            notes.append("covariance singular: uncertainties undefined")
        elif zstd > 0.5 * z:
            notes.append("damping poorly determined: damping_ratio_std exceeds half the "
                         "damping ratio")
        thr = significance_threshold(core.prob.data_t.shape[1])
        if core.significance[k] < WEAK_FACTOR * thr:
            notes.append(f"weak: energy {core.significance[k]:.3g} within 20 dB of the noise "
                         f"significance limit {thr:.3g}")
        if per_mode["fit_note"]:
            notes.append(per_mode["fit_note"])
        if asked.size and np.any(np.abs(fn - asked) < ASKED_TOL * asked):
            notes.append("added by the user (add_modes)")
            if core.significance[k] < significance_threshold(core.prob.data_t.shape[1]):
                notes.append("below the noise significance: it may not be a mode")
        if not self.scatter:
            notes.append("scatter not computed (scatter=False)")
        elif n_hit_acc < 3:
            notes.append(f"scatter undefined: {n_hit_acc} accepted hit(s), 3 needed")
        per_mode["status"].append(_status(notes))
        vals = dict(
            frequency_hz=fn, damping_ratio=z, frequency_hz_std=fstd, damping_ratio_std=zstd,
            frequency_hz_scatter=scatter[0][k], damping_ratio_scatter=scatter[1][k],
            mode_energy=core.significance[k], **measures,
        )
        for key, v in vals.items():
            cols[key][i] = v

    @staticmethod
    def _dataset(records: xr.Dataset, prep: _Prepared, cols: dict[str, np.ndarray],
                 per_mode: dict[str, Any], fit_r2: np.ndarray, use_force: bool,
                 more: dict[str, Any]) -> xr.Dataset:
        # variables collected first and the Dataset built once (one merge, not one per variable)
        m = len(per_mode["status"])
        coords: dict[str, Any] = {"mode": np.arange(1, m + 1), "channel": prep.channels,
                                  "hit": prep.hits}
        for extra in ("node", "direction", "x", "y", "z"):
            if extra in records.coords:
                coords[extra] = ("channel", records[extra].values)
        dv: dict[str, Any] = {}
        for key, v in cols.items():
            dv[key] = ("mode", v, {"units": _UNITS.get(key, "1")})
        dv["mode_energy"][2]["description"] = "fitted energy over the noise variance"
        dv["regime"] = ("mode", np.array(per_mode["regime"], dtype=object))
        dv["status"] = ("mode", np.array(per_mode["status"], dtype=object))
        resp_units = str(records["response"].attrs.get("units", ""))
        r_units = (f"{resp_units}/({records['force'].attrs.get('units', 'N')} s)" if use_force
                   else resp_units)
        ch_res, hit_res = per_mode["ch_res"], per_mode["hit_res"]
        dv["shape_amplitude"] = (("mode", "channel"), per_mode["shape_amp"])
        dv["shape_phase_deg"] = (("mode", "channel"), per_mode["shape_ph"], {"units": "deg"})
        dv["residue_real"] = (("mode", "channel"), ch_res.real, {"units": r_units})
        dv["residue_imag"] = (("mode", "channel"), ch_res.imag, {"units": r_units})
        dv["hit_residue_real"] = (("mode", "hit", "channel"), hit_res.real, {"units": r_units})
        dv["hit_residue_imag"] = (("mode", "hit", "channel"), hit_res.imag, {"units": r_units})
        dv["fit_r2"] = ("channel", fit_r2)
        dv["channel_note"] = ("channel", np.array(
            ["ok" if lv else "dead channel (constant in the window): left out of the pole fit"
             for lv in prep.live], dtype=object))
        dv["hit_accepted"] = ("hit", prep.accepted)
        dv.update(more)
        return xr.Dataset(dv, coords=coords)

    def _settings(self, prep: _Prepared, core: CoreResult, band: tuple[float, float],
                  window: Any, asked: np.ndarray, dropped: list[float],
                  cols: dict[str, np.ndarray]) -> dict[str, Any]:
        """The choices and outcomes of the fit, for ``attrs["settings"]`` (JSON)."""
        return {
            "band": [float(band[0]), float(band[1])],
            "window": [float(prep.t_win[0]), float(prep.t_win[-1])],
            "window_requested": None if window is None else [float(v) for v in window],
            "n_modes": None if self.n_modes is None else int(self.n_modes),
            "add_modes": asked.tolist(),
            "add_modes_not_found": [
                float(f) for f in asked if not np.any(np.abs(cols["frequency_hz"] - f) < ASKED_TOL * f)],
            "drop_modes": list(dropped),
            "max_order": self.max_order,
            "modes_fitted": int(core.sigma.size),
            "hits_used": [int(h) for h in prep.hits[prep.acc_idx]],
            "noise_weighting": prep.noise_from,
            "offset": "constant term per signal (not a mode)",
            "exponential_window_tau_s": prep.tau,
            "exponential_window_correction": (
                None if prep.tau is None else
                "response for t >= 0 multiplied by exp(t/tau) before fitting "
                "(exact pole shift lambda_true = lambda_measured + 1/tau)"),
            "residual_variance_weighted": float(core.s2),
            "method": "band-split multi-signal matrix pencil (Hua & Sarkar 1990) + variable "
                      "projection (Golub & Pereyra 1973) with shared poles",
        }
