"""`fit_modes` and the `ModeFit` estimator: records in, modal table out."""

from __future__ import annotations

import json
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from .._errors import EstimationError
from .._pulse import contact_end, pulse_bounds
from .._utils import frequency_list
from ..records import get_sample_rate, has_force, validate_records
from ._basis import is_near_critical, pole_of, residues_from_coefficients
from ._core import ASKED_TOL, CoreResult, compress, fit_core, significance_threshold
from ._varpro import Problem, levenberg_marquardt, natural_with_cov

#: Least pre-trigger samples per hit for a noise estimate (common practice).
MIN_NOISE_SAMPLES = 32


@dataclass
class _Prepared:
    hits: np.ndarray  # all hit labels
    accepted: np.ndarray  # bool per hit
    reasons: list[str]
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


def _accept_decisions(records: xr.Dataset, accept: Any) -> tuple[np.ndarray, list[str]]:
    hits = np.asarray(records["hit"].values)
    if isinstance(accept, Mapping) and set(hits.tolist()) <= set(accept):
        # every hit decided by the caller (the pipeline's case): no checks needed
        acc = np.array([bool(accept[h]) for h in hits.tolist()])
    elif accept is None or isinstance(accept, Mapping):
        from ..checks import check_hits

        chk = check_hits(records)
        acc = np.asarray(chk["accepted"].values, bool)
        reasons = [str(r) for r in np.asarray(chk["reason"].values).tolist()]
        if accept is None:
            return acc, reasons
        # a mapping overrides the automatic decisions of the hits it names
        for key, val in accept.items():
            where = np.nonzero(hits == key)[0]
            if where.size == 0:
                raise EstimationError(
                    f"`accept` names hit {key!r}, which is not in the records (hits "
                    f"{hits.tolist()})."
                )
            i = int(where[0])
            if bool(val) != acc[i] or not reasons[i]:
                reasons[i] = "accepted (by the caller)" if val else "rejected (by the caller)"
            acc[i] = bool(val)
        return acc, reasons
    else:
        acc = np.asarray(list(accept) if not isinstance(accept, np.ndarray) else accept)
        if acc.shape != hits.shape or acc.dtype.kind not in "bi":
            raise EstimationError(
                f"`accept` must be a mapping hit -> bool or {hits.size} booleans, got {accept!r}."
            )
        acc = acc.astype(bool)
    reasons = ["accepted (by the caller)" if a else "rejected (by the caller)" for a in acc]
    return acc, reasons


def _prepare(records: xr.Dataset, window: Any, accept: Any) -> _Prepared:
    records = validate_records(records)
    fs = get_sample_rate(records)
    t = np.asarray(records["time"].values, float)
    hits = np.asarray(records["hit"].values)
    acc, reasons = _accept_decisions(records, accept)
    if not acc.any():
        raise EstimationError(
            f"all {hits.size} hits are rejected ({reasons[0]}); nothing to fit. Hint: pass "
            "accept= to override the hit checks, or record new hits."
        )
    acc_idx = np.nonzero(acc)[0]
    resp = np.asarray(records["response"].values, float)
    pulse_start = None
    if has_force(records):
        force = np.asarray(records["force"].values, float)
        bounds = [pulse_bounds(force[h], t) for h in acc_idx]
        # after the last contact of every accepted hit (a double hit that the user
        # accepted contributes free decay only after its second tap)
        i_default = max(contact_end(force[h], t) for h in acc_idx)
        pulse_start = min(b[0] for b in bounds)
    else:
        nonneg = np.nonzero(t >= 0)[0]
        i_default = int(nonneg[0]) if nonneg.size else 0
    if window is None:
        i0, i1 = i_default, t.size
    else:
        try:
            w0, w1 = (float(v) for v in window)
        except (TypeError, ValueError):
            raise EstimationError(f"`window` must be (t0, t1) in seconds, got {window!r}.") from None
        if not (w1 > w0):
            raise EstimationError(f"`window` must have t0 < t1, got {window!r}.")
        i0 = int(np.searchsorted(t, w0 - 1e-9 / fs))
        i1 = int(np.searchsorted(t, w1 + 1e-9 / fs, side="right"))
    if i1 - i0 < 16:
        raise EstimationError(
            f"window {t[min(i0, t.size - 1)]:.6g}..{t[max(i1 - 1, 0)]:.6g} s holds {max(i1 - i0, 0)} "
            "samples; at least 16 are needed. Hint: widen the window."
        )
    t_win = t[i0:i1]
    data = resp[acc_idx][:, :, i0:i1].copy()
    tau = records.attrs.get("exponential_window_tau_s")
    tau = float(tau) if tau is not None else None
    if tau is not None:
        # the recorded response for t >= 0 is w(t) (x + noise) with w = exp(-t/tau): undo it
        gain = np.where(t_win >= 0, np.exp(np.clip(t_win, 0, None) / tau), 1.0)
        data *= gain
    channels = np.asarray(records["channel"].values)
    live = np.ptp(data, axis=(0, 2)) > 0
    if not live.any():
        raise EstimationError(
            "every channel is constant (dead) in the window for the accepted hits. Hint: check "
            "the sensors or the window."
        )
    # noise level per channel from the pre-trigger samples where there are enough
    pre_end = np.searchsorted(t, 0.0)
    if pulse_start is not None:
        pre_end = min(pre_end, max(pulse_start - 2, 0))
    noise_from = "window RMS (no pre-trigger noise)"
    weight = np.zeros(channels.size)
    if pre_end >= MIN_NOISE_SAMPLES:
        pre = resp[acc_idx][:, :, :pre_end]
        pre = pre - pre.mean(axis=2, keepdims=True)
        sig = np.sqrt(np.mean(pre**2, axis=(0, 2)))
        if np.all(sig[live] > 0):
            weight[live] = 1.0 / sig[live]
            noise_from = "pre-trigger samples"
    if noise_from != "pre-trigger samples":
        rms = np.sqrt(np.mean((data - data.mean(axis=2, keepdims=True)) ** 2, axis=(0, 2)))
        weight[live] = 1.0 / rms[live]
    return _Prepared(
        hits=hits, accepted=acc, reasons=reasons, acc_idx=acc_idx, channels=channels, live=live,
        t_win=t_win, i0=i0, i1=i1, data=data, weight=weight, noise_from=noise_from, fs=fs, tau=tau,
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
        e = min(e + 2, t.size)
        out[i] = np.sum(force[h, s:e] * np.exp(-lam * t[s:e])) / prep.fs
    return out


def _stabilisation(core: CoreResult) -> xr.Dataset:
    rows = core.pencil.rows if core.pencil is not None else []
    arr = np.array(rows, dtype=float).reshape(-1, 7)
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
        },
        attrs={"description": "poles versus pencil order; pass 0 is the wide-band pass, "
               "passes 1.. the sub-bands; stable = a pole of the previous order within 1 % in "
               "natural frequency and 5 % in damping ratio (common practice), and energy "
               "above the candidate significance limit"},
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


class ModeFit:
    """Shared-pole modal estimator for a record set (scikit-learn style).

    Parameters are those of :func:`fit_modes`. After :meth:`fit`:

    * ``result_``: the modal table (see :func:`fit_modes`);
    * ``minimizer_result_``: the lmfit ``MinimizerResult`` of the final refinement
      (``fit_report()`` works; parameters ``m<k>_sigma``, ``m<k>_u`` are the packed
      poles of all fitted modes, in the order of ``fitted_modes_``);
    * ``stabilisation_``: poles versus order of the pencils, for a stabilisation chart.

    :meth:`refit` re-estimates after a change of window or hits starting from the poles
    already found (no pencil), which is what an interactive window slider needs.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.synth import free_decay
    >>> t = np.arange(2048) / 2048.0
    >>> x = free_decay(t, 50.0, 0.01) + 1e-4 * np.random.default_rng(0).standard_normal(2048)
    >>> fit = ModeFit(accept=[True]).fit(records_from_arrays(x, 2048.0))
    >>> round(float(fit.result_["frequency_hz"][0]), 2)
    50.0
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
        self.blas_threads = blas_threads
        self.add_modes = add_modes
        self.drop_modes = drop_modes
        self.band = band
        self.window = window
        self.n_modes = n_modes
        self.accept = accept
        self.max_order = max_order
        self.scatter = scatter

    # ------------------------------------------------------------------ public
    def fit(self, records: xr.Dataset) -> ModeFit:
        """Estimate the modes of `records`; returns self."""
        self._records = records
        self._run(records, self.window, self.accept, x0=None)
        return self

    def refit(
        self,
        window: tuple[float, float] | None = None,
        accept: Mapping[int, bool] | Sequence[bool] | None = None,
    ) -> xr.Dataset:
        """Re-estimate after a window (or hit) change, starting from the current poles.

        Returns the new ``result_``. Modes that vanish in the new window are dropped.
        """
        if not hasattr(self, "_x"):
            raise EstimationError("This ModeFit instance is not fitted yet. Call 'fit' first.")
        self.window = window
        if accept is not None:
            self.accept = accept
        self._run(self._records, window, self.accept, x0=self._x)
        return self.result_

    def fit_report(self) -> str:
        """lmfit's text report of the final refinement (``lmfit.fit_report``)."""
        import lmfit

        if not hasattr(self, "minimizer_result_"):
            raise EstimationError("This ModeFit instance is not fitted yet. Call 'fit' first.")
        return lmfit.fit_report(self.minimizer_result_)

    # ---------------------------------------------------------------- internals
    def _run(self, records: xr.Dataset, window: Any, accept: Any, x0: np.ndarray | None) -> None:
        with _blas_limit(self.blas_threads):
            self._run_unlimited(records, window, accept, x0)

    def _run_unlimited(
        self, records: xr.Dataset, window: Any, accept: Any, x0: np.ndarray | None
    ) -> None:
        fs = get_sample_rate(validate_records(records))
        band = self.band
        if band is not None:
            try:
                f_lo, f_hi = (float(v) for v in band)
            except (TypeError, ValueError):
                raise EstimationError(f"`band` must be (fmin, fmax) in Hz, got {band!r}.") from None
            if not (0 <= f_lo < f_hi):
                raise EstimationError(f"`band` must satisfy 0 <= fmin < fmax, got {band!r}.")
        else:
            f_lo, f_hi = 0.0, 0.45 * fs
        if self.n_modes is not None and (int(self.n_modes) != self.n_modes or self.n_modes < 1):
            raise EstimationError(f"`n_modes` must be a positive integer, got {self.n_modes!r}.")
        prep = _prepare(records, window, accept)
        t_rel = prep.t_win - prep.t_win[0]
        y = _stack(prep, prep.weight)
        f_search = 0.45 * fs
        n_live = int(prep.live.sum())
        reweight = prep.noise_from != "pre-trigger samples" and n_live > 1
        self._asked = asked = np.asarray(frequency_list("`add_modes`", self.add_modes, EstimationError))
        self._dropped = frequency_list("`drop_modes`", self.drop_modes, EstimationError)
        seeds = asked if x0 is None and asked.size else None
        core = fit_core(y, t_rel, fs, f_max=f_search, x0=x0, max_order=self.max_order,
                        polish=not reweight, seeds_hz=seeds, protect_hz=asked)
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
                            protect_hz=asked)
            core.pencil = pencil
            prep.noise_from = "residual RMS of a first fit"
        self._x = core.x
        self._core = core
        self._prep = prep
        self.minimizer_result_ = core.minimizer
        if core.pencil is not None:
            self.stabilisation_ = _stabilisation(core)
        elif not hasattr(self, "stabilisation_"):
            self.stabilisation_ = _stabilisation(core)
        self.result_ = self._assemble(records, prep, core, weight, (f_lo, f_hi), window)

    def _per_hit_scatter(self, prep: _Prepared, core: CoreResult, weight: np.ndarray):
        n_hit = prep.acc_idx.size
        m = core.sigma.size
        if not self.scatter or n_hit < 3:
            return np.full(m, np.nan), np.full(m, np.nan)
        t_rel = prep.t_win - prep.t_win[0]
        fns, zs = [], []
        for i in range(n_hit):
            d = prep.data[i][prep.live] * weight[prep.live][:, None]
            d = compress(d, min(d.shape[0], core.x.size + 4))
            prob = Problem(np.ascontiguousarray(d.T), t_rel, core.prob.w_scale, core.prob.n_extra)
            x, _ = levenberg_marquardt(prob, core.x, max_iter=8)
            fn, z, _, _ = natural_with_cov(prob, x, np.zeros((x.size, x.size)))
            fns.append(fn)
            zs.append(z)
        return np.nanstd(np.array(fns), axis=0, ddof=1), np.nanstd(np.array(zs), axis=0, ddof=1)

    def _assemble(
        self, records: xr.Dataset, prep: _Prepared, core: CoreResult, weight: np.ndarray,
        band: tuple[float, float], window: Any,
    ) -> xr.Dataset:
        from .. import __version__
        from ..records import records_checksum

        fs = prep.fs
        t_rel = prep.t_win - prep.t_win[0]
        t_w0 = float(prep.t_win[0])
        n_hit_acc, n_ch, n = prep.data.shape
        # residues per signal (unweighted data, least squares at the final poles)
        phi = core.prob.basis(core.x)
        flat = prep.data.transpose(2, 0, 1).reshape(n, -1)
        coef, *_ = np.linalg.lstsq(phi, flat, rcond=None)
        fitted = (phi @ coef).reshape(n, n_hit_acc, n_ch)
        resid = flat.reshape(n, n_hit_acc, n_ch) - fitted
        dm = flat.reshape(n, n_hit_acc, n_ch)
        dm = dm - dm.mean(axis=0, keepdims=True)
        tss = np.sum(dm**2, axis=(0, 1))
        rss_c = np.sum(resid**2, axis=(0, 1))
        fit_r2 = np.where(tss > 0, 1.0 - rss_c / np.where(tss > 0, tss, 1.0), 0.0)
        m_all = core.sigma.size
        energy = core.significance
        sel = [k for k in range(m_all) if band[0] <= core.fn[k] <= band[1]]
        if not sel:
            raise EstimationError(
                f"no mode found in the band {band[0]:g}..{band[1]:g} Hz (modes fitted at "
                f"{', '.join(f'{f:.4g}' for f in core.fn)} Hz). Hint: widen the band."
            )
        for f in self._dropped:
            # the user leaves the fitted mode nearest f out of the table (it stays in the model)
            near = min(sel, key=lambda k: abs(core.fn[k] - f)) if sel else None
            if near is None or abs(core.fn[near] - f) > max(0.05 * f, 1.0):
                raise EstimationError(
                    f"drop_modes: no fitted mode near {f:g} Hz (within 5 %; modes at "
                    f"{', '.join(f'{core.fn[k]:.4g}' for k in sorted(sel, key=lambda k: core.fn[k]))} Hz). "
                    f"Hint: remove {f:g} "
                    "from the dropped modes."
                )
            sel.remove(near)
        if not sel:
            raise EstimationError("every mode in the band was dropped (drop_modes). Hint: "
                                  "keep at least one.")
        if self.n_modes is not None:
            sel = sorted(sel, key=lambda k: -energy[k])[: int(self.n_modes)]
        sel = sorted(sel, key=lambda k: core.fn[k])
        asked = self._asked
        m = len(sel)
        scat_f, scat_z = self._per_hit_scatter(prep, core, weight)
        use_force = has_force(records)
        sign = np.ones(n_ch)
        if "direction" in records.coords:
            sign = np.array([-1.0 if str(d).strip().startswith("-") else 1.0
                             for d in records["direction"].values.tolist()])
        hit_res = np.full((m, prep.hits.size, n_ch), np.nan, complex)
        ch_res = np.zeros((m, n_ch), complex)
        shape_amp = np.zeros((m, n_ch))
        shape_ph = np.zeros((m, n_ch))
        status = []
        regime = []
        cols = {name: np.zeros(m) for name in (
            "frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std",
            "frequency_hz_scatter", "damping_ratio_scatter", "damped_frequency_hz",
            "q_factor", "loss_factor", "log_decrement", "decay_time_constant_s",
            "decay_rate_db_per_s", "mode_energy")}
        for i, k in enumerate(sel):
            sigma, u = float(core.sigma[k]), float(core.u[k])
            fn, z = float(core.fn[k]), float(core.zeta[k])
            fstd, zstd = float(core.fn_std[k]), float(core.zeta_std[k])
            notes: list[str] = []
            if abs(z - 1.0) <= max(0.02, 2 * zstd if np.isfinite(zstd) else 0.0):
                reg = "critical"
            else:
                reg = "underdamped" if z < 1 else "overdamped"
            regime.append(reg)
            a = coef[2 * k].reshape(n_hit_acc, n_ch)
            b = coef[2 * k + 1].reshape(n_hit_acc, n_ch)
            crit = is_near_critical(sigma, u)
            if crit:
                # (a + b t') e^{-sigma t'}, t' = t - t_w0: move the origin to t = 0
                g = np.exp(sigma * t_w0)
                a0, b0 = (a - b * t_w0) * g, b * g
                r = residues_from_coefficients(a0, b0, sigma, u)
                lam = complex(-sigma, 0.0)
            else:
                lam = pole_of(sigma, u)
                r = residues_from_coefficients(a, b, sigma, u) * np.exp(-lam * t_w0)
            if use_force:
                ftil = _force_spectrum(records, prep, lam)
                denom = np.sum(np.abs(ftil) ** 2)
                if denom > 0:
                    ch = np.sum(np.conj(ftil)[:, None] * r, axis=0) / denom
                    per_hit = r / np.where(ftil != 0, ftil, 1.0)[:, None]
                else:
                    ch, per_hit = r.mean(axis=0), r
                    notes.append("force spectrum zero at the pole: residues not force-normalised")
            else:
                ch, per_hit = r.mean(axis=0), r
            hit_res[i][prep.acc_idx] = per_hit
            ch_res[i] = ch
            psi = ch * sign
            ref = int(np.argmax(np.abs(psi)))
            if abs(psi[ref]) > 0:
                psin = psi / psi[ref]
                shape_amp[i] = np.abs(psin)
                ph = np.degrees(np.angle(psin))
                ph = np.where(ph <= -180.0 + 1e-9, 180.0, ph)
                shape_ph[i] = ph
            else:
                notes.append("all residues zero: shape undefined (amplitudes 0)")
            if reg == "underdamped":
                fd = fn * np.sqrt(1 - z * z)
                logdec = 2 * np.pi * z / np.sqrt(1 - z * z)
                cycles = fd * (t_rel[-1] + 1 / fs)
                if cycles < 3:
                    notes.append(f"window holds only {cycles:.1f} cycles: estimates uncertain")
            else:
                fd = logdec = float("nan")
                notes.append(f"{reg}: no oscillation, damped_frequency_hz and log_decrement undefined")
            if not (np.isfinite(fstd) and np.isfinite(zstd)):
                fstd = fstd if np.isfinite(fstd) else float("nan")
                notes.append("covariance singular: uncertainties undefined")
            elif zstd > 0.5 * z:
                notes.append("poorly determined: damping_ratio_std exceeds half the damping ratio")
            if asked.size and np.any(np.abs(fn - asked) < ASKED_TOL * asked):
                notes.append("added by the user (add_modes)")
                if energy[k] < significance_threshold(core.prob.data_t.shape[1]):
                    notes.append("below the noise significance: it may not be a mode")
            if not self.scatter:
                notes.append("scatter not computed (scatter=False)")
            elif n_hit_acc < 3:
                notes.append(f"scatter undefined: {n_hit_acc} accepted hit(s), 3 needed")
            status.append("; ".join(["ok", *notes]) if not any(
                s.startswith(("covariance", "poorly", "all residues")) for s in notes
            ) else "; ".join(notes))
            sig_d = z * 2 * np.pi * fn
            vals = dict(
                frequency_hz=fn, damping_ratio=z, frequency_hz_std=fstd, damping_ratio_std=zstd,
                frequency_hz_scatter=scat_f[k], damping_ratio_scatter=scat_z[k],
                damped_frequency_hz=fd, q_factor=1 / (2 * z), loss_factor=2 * z,
                log_decrement=logdec, decay_time_constant_s=1 / sig_d,
                decay_rate_db_per_s=20 / np.log(10) * sig_d, mode_energy=energy[k],
            )
            for key, v in vals.items():
                cols[key][i] = v
        # variables collected first and the Dataset built once (one merge, not one per variable)
        coords: dict[str, Any] = {"mode": np.arange(1, m + 1), "channel": prep.channels,
                                  "hit": prep.hits}
        for extra in ("node", "direction", "x", "y", "z"):
            if extra in records.coords:
                coords[extra] = ("channel", records[extra].values)
        dv: dict[str, Any] = {}
        units = {"frequency_hz": "Hz", "frequency_hz_std": "Hz", "frequency_hz_scatter": "Hz",
                 "damped_frequency_hz": "Hz", "decay_time_constant_s": "s",
                 "decay_rate_db_per_s": "dB/s"}
        for key, v in cols.items():
            dv[key] = ("mode", v, {"units": units.get(key, "1")})
        dv["mode_energy"][2]["description"] = "fitted energy over the noise variance"
        dv["regime"] = ("mode", np.array(regime, dtype=object))
        dv["status"] = ("mode", np.array(status, dtype=object))
        resp_units = str(records["response"].attrs.get("units", ""))
        r_units = f"{resp_units}/({records['force'].attrs.get('units', 'N')} s)" if use_force else resp_units
        dv["shape_amplitude"] = (("mode", "channel"), shape_amp)
        dv["shape_phase_deg"] = (("mode", "channel"), shape_ph, {"units": "deg"})
        dv["residue_real"] = (("mode", "channel"), ch_res.real, {"units": r_units})
        dv["residue_imag"] = (("mode", "channel"), ch_res.imag, {"units": r_units})
        dv["hit_residue_real"] = (("mode", "hit", "channel"), hit_res.real, {"units": r_units})
        dv["hit_residue_imag"] = (("mode", "hit", "channel"), hit_res.imag, {"units": r_units})
        dv["fit_r2"] = ("channel", fit_r2)
        dv["channel_note"] = ("channel", np.array(
            ["ok" if lv else "dead channel (constant in the window): left out of the pole fit"
             for lv in prep.live], dtype=object))
        dv["hit_accepted"] = ("hit", prep.accepted)
        dv["hit_reason"] = ("hit", np.array(prep.reasons, dtype=object))
        ds = xr.Dataset(dv, coords=coords)
        settings = {
            "band": [float(band[0]), float(band[1])],
            "window": [float(prep.t_win[0]), float(prep.t_win[-1])],
            "window_requested": None if window is None else [float(v) for v in window],
            "n_modes": None if self.n_modes is None else int(self.n_modes),
            "add_modes": asked.tolist(),
            "add_modes_not_found": [
                float(f) for f in asked if not np.any(np.abs(cols["frequency_hz"] - f) < ASKED_TOL * f)],
            "drop_modes": list(self._dropped),
            "max_order": self.max_order,
            "modes_fitted": int(m_all),
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
        ds.attrs = {
            "settings": json.dumps(settings),
            "band": settings["band"], "window": settings["window"],
            "n_modes": -1 if self.n_modes is None else int(self.n_modes),
            "exponential_window_tau_s": -1.0 if prep.tau is None else prep.tau,
            "modalnb_version": __version__,
            "input_checksum": records_checksum(records),
        }
        return ds


def fit_modes(
    records: xr.Dataset,
    band: tuple[float, float] | None = None,
    window: tuple[float, float] | None = None,
    n_modes: int | None = None,
    *,
    accept: Mapping[int, bool] | Sequence[bool] | None = None,
    max_order: int | None = None,
    scatter: bool = True,
    recipe: Any = None,
    blas_threads: int | None = 1,
    add_modes: Sequence[float] | None = None,
    drop_modes: Sequence[float] | None = None,
) -> xr.Dataset:
    """Natural frequencies, damping ratios and shapes of a record set, with uncertainties.

    One pole per mode for the whole record set: the poles are estimated jointly over
    all channels and accepted hits, the residues per channel and hit.

    Parameters
    ----------
    records : xarray.Dataset
        Record set (:mod:`modalnb.records`).
    band : (float, float), optional
        Only modes with natural frequency in (fmin, fmax) Hz are reported (all modes up to
        0.45 fs are fitted, so modes outside the band do not bias those inside).
    window : (float, float), optional
        Absolute times (s) of the samples used. Default: from the end of the last force
        contact (latest over accepted hits; after a double hit, its second tap) to the
        record end; without force from the first sample with t >= 0.
    n_modes : int, optional
        Report only the N strongest in-band modes (by fitted energy).
    accept : mapping or sequence of bool, optional
        Hit decisions; default exactly those of :func:`modalnb.checks.check_hits`. A
        mapping ``{hit: bool}`` overrides the automatic decision of the hits it names; a
        sequence gives one decision per hit (no checks run).
    max_order : int, optional
        Highest pencil order per sub-band (default 20).
    scatter : bool
        Compute the hit-to-hit scatter (per-hit pole refits) when >= 3 hits are accepted.
    add_modes : sequence of float, optional
        Frequencies (Hz) of modes the automatic search missed: each seeds a pole (1 %
        damping) that the fit refines and keeps (status "added by the user", with a warning
        when its energy is within noise).
    drop_modes : sequence of float, optional
        Frequencies (Hz) of fitted modes to leave out of the table (the nearest mode within
        5 %). The mode stays in the fitted model, so its neighbours are not biased.
    blas_threads : int or None
        BLAS threads during the fit (default 1: fastest on a busy machine and inside
        dask workers; None leaves the thread pools as they are).
    recipe : modalnb.Recipe or path, optional
        Replay an analysis recipe (a :class:`modalnb.Recipe` or its JSON file): hit checks
        with the recipe's thresholds and overrides, then this fit with its band, window and
        model order (:func:`modalnb.pipeline.run_recipe`; the same table as ``modalnb fit
        --recipe``). Then `band`, `window`, `n_modes` and `accept` must not be given.

    Returns
    -------
    xarray.Dataset
        Over ``mode``: ``frequency_hz``, ``damping_ratio``, their ``_std`` (1 sigma from the
        covariance of the projected Jacobian scaled by the residual variance) and
        ``_scatter`` (standard deviation of per-hit refits; NaN with a status note below 3
        accepted hits), ``regime``, ``status``, ``damped_frequency_hz``, ``q_factor``,
        ``loss_factor``, ``log_decrement``, ``decay_time_constant_s``,
        ``decay_rate_db_per_s``, ``mode_energy``. Over (mode, channel): ``shape_amplitude``,
        ``shape_phase_deg``, ``residue_real``/``residue_imag`` (per unit force, integrated
        force spectrum at the pole, where force exists). Over (mode, hit, channel):
        ``hit_residue_real``/``_imag`` (NaN for rejected hits). Over channel: ``fit_r2``,
        ``channel_note``. Over hit: ``hit_accepted``, ``hit_reason``. The damping
        cross-checks of :func:`modalnb.estimate.cross_checks` (``xcheck_*``, each with its
        known bias in the attrs).

    Notes
    -----
    1. Preparation: accepted hits, window, exponential window undone exactly, each channel
       weighted by 1/noise (pre-trigger) or by its residual RMS after a first fit; a
       constant offset per signal is a linear term, not a mode.
    2. Poles: the weighted signals are compressed to their leading principal components;
       candidates come from band-split matrix pencils (Hua & Sarkar 1990) swept over
       orders, kept when stable across orders and energetic (energy ranking).
    3. Refinement: variable projection (Golub & Pereyra 1973; shared poles over data
       sets, Golub & LeVeque 1979) with Kaufman's (1975) Jacobian, Levenberg-Marquardt
       then a final lmfit ``least_squares`` pass. A mode is (sigma, u = wd^2), continuous
       through critical damping (repeated-pole basis, Fermo et al. 2013); modes whose
       energy is within noise are dropped.
    4. Residue of an oscillating mode: ``x(t) = 2 Re(r exp(lambda t))`` with t = 0 the
       record origin; of an overdamped one the residue of the slower pole; of a critical
       one ``a + b/sigma`` of ``(a + b t) exp(-sigma t)``.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.synth import free_decay
    >>> t = np.arange(2048) / 2048.0
    >>> x = free_decay(t, [40.0, 90.0], [0.01, 0.02], [1.0, 0.5])
    >>> x = x + 1e-4 * np.random.default_rng(1).standard_normal(t.size)
    >>> res = fit_modes(records_from_arrays(x, 2048.0), accept=[True])
    >>> np.round(res["frequency_hz"].values, 2)
    array([40., 90.])
    """
    if recipe is not None:
        given = [name for name, v in (("band", band), ("window", window), ("n_modes", n_modes),
                                      ("accept", accept), ("add_modes", add_modes),
                                      ("drop_modes", drop_modes)) if v is not None]
        if given:
            raise EstimationError(
                f"fit_modes: pass either recipe= or {', '.join(given)}, not both (the recipe "
                "holds every choice). Hint: edit the recipe instead."
            )
        from ..pipeline import run_recipe
        from ..recipe import Recipe, load_recipe

        rec = recipe if isinstance(recipe, Recipe) else load_recipe(recipe)
        return run_recipe(records, rec)[0]
    est = ModeFit(band=band, window=window, n_modes=n_modes, accept=accept,
                  max_order=max_order, scatter=scatter, blas_threads=blas_threads,
                  add_modes=add_modes, drop_modes=drop_modes)
    from ._xcheck import with_cross_checks

    result = with_cross_checks(records, est.fit(records).result_)
    result.attrs["recipe"] = _recipe_of_call(records, band, window, n_modes, accept, result,
                                             add_modes, drop_modes)
    return result


def _recipe_of_call(records: xr.Dataset, band: Any, window: Any, n_modes: Any, accept: Any,
                    result: xr.Dataset, add_modes: Any = None, drop_modes: Any = None) -> str:
    """The recipe (JSON) that replays this call: its choices, hit decisions as overrides.

    With ``accept=None`` the decisions are those of the default hit checks, which a replay
    repeats, so no override is stored; an explicit `accept` becomes one override per hit.
    """
    from ..pipeline import recipe_for
    from ..recipe import Recipe

    overrides = {}
    if accept is not None:
        overrides = {int(h): bool(a) for h, a in zip(result["hit"].values,
                                                     result["hit_accepted"].values, strict=True)}
    rec = recipe_for(records, Recipe(
        band=None if band is None else tuple(band), window=None if window is None else tuple(window),
        n_modes=None if n_modes is None else int(n_modes), hit_overrides=overrides,
        add_modes=list(add_modes or []), drop_modes=list(drop_modes or []),
        source=str(records.attrs.get("source", "")) or None,
    ))
    return rec.to_json()
