"""Long records: zoom band-splitting with decimation before the pencil and the pole fit.

A record of ``N`` samples at ``fs`` holding lightly damped modes is fitted band by band.
Each sub-band ``[lo, hi)`` of the searched range is moved next to 0 Hz and resampled at a
rate a few times its width (zoom analysis: complex demodulation to the band, anti-alias
low-pass, decimation; Randall 1987, *Frequency Analysis*, 3rd ed., Brüel & Kjær, ch. 3
"zoom FFT"). Here the three steps are one exact operation on the spectrum of the whole
(zero-padded) record: the bins of the band, tapered by a raised cosine over a margin on
each side (the low-pass), are shifted by a whole number of bins (the demodulation) and
transformed back at a short length (the decimation), which gives a real signal of the
band's poles, each moved down in frequency by the same shift and with its decay rate
unchanged (the same zoom as the pencil's sub-bands, :mod:`._pencil`). Poles are fitted
per band by :func:`._core.fit_core` (pencil, variable projection, pruning), and mapped
back: ``sigma`` unchanged, the damped frequency plus the shift.

Why it is linear in the record length and finite for Q ~ 1e4 at kHz:

* each band holds a few modes and ``N fs_band / fs`` samples, so the fits' cost sums to
  a constant times ``N`` (one FFT of the record, ``O(N log N)``, is the rest);
* the pencil of a band sees only the part of the record that holds the ring-down (until
  the band's envelope reaches the noise, at most :data:`PENCIL_MAX_S`), so its Hankel
  matrices do not grow with the record;
* in the band the damped frequency is a few times the band width, not ~1e4 s^-1, so the
  decay rate ``sigma ~ 1 s^-1`` and the frequency sit at comparable scales in the
  solver's parameters (the poles are parametrised relative to the band);
* poles too heavily damped for a band (half-power bandwidth above a quarter of the band
  width, :data:`HEAVY_FRACTION`) come from a full-rate fit of the record's head, the
  wide-band pass of :mod:`._pencil`.

Residues are not taken from the bands: the engine solves them per channel, in the
original units, by linear least squares at the mapped poles over the whole record (they
are linear, so that costs one pass). The pole covariance is block diagonal over bands
(poles of different bands are further apart than the margin, far more than ``1/T``, so
their cross terms vanish), each block the band fit's ``s^2 (J^T J)^-1`` with ``s^2``
scaled to a white-noise equivalent (the band's noise is white only over the taper's pass
band: ``s^2 / f`` with ``f`` the fraction of the band's Nyquist range the taper covers).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._errors import EstimationError
from ._basis import basis_matrix, natural
from ._core import (
    ASKED_TOL,
    MAX_COMPONENTS,
    W_SCALE_FRACTION,
    CoreResult,
    _rss_increase,
    fit_core,
)
from ._pencil import TWO_PI, PencilOutput, band_taper, find_poles, initial_modes
from ._significance import significance_threshold
from ._varpro import Problem, levenberg_marquardt, natural_with_cov

#: Records longer than this many samples are fitted band by band (below it the full-rate
#: fit is fast and exact; 2**15 samples is 0.7 s at 44.1 kHz; common practice).
LONG_RECORD_SAMPLES = 2**15

#: ... and so are records of more than 2**13 samples whose analysed band is narrower than
#: this fraction of the Nyquist range (a zoom on a narrow band; common practice).
NARROW_BAND_SAMPLES = 2**13
NARROW_BAND_FRACTION = 0.25

#: Sub-band width (Hz) at least this, and at least 12 pencil sub-bands' width (the
#: pencil splits each band further for its own resolution); common practice.
MIN_BAND_HZ = 200.0

#: Raised-cosine margin on each side of a band, as a fraction of its width: the taper's
#: time spread is about 1/margin, the samples of that spread are left out at both ends.
MARGIN_FRACTION = 0.25

#: In the band signal the band sits between a guard of half a width above 0 Hz and one
#: below the band's Nyquist frequency: the band rate is about 5 widths.
GUARD_FRACTION = 0.5

#: The pencil of a band sees at most this many seconds (resolution 1/T = 0.4 Hz, under
#: half the split of a 0.1 % doublet at 1 kHz; the pencil resolves below 1/T at a good
#: signal-to-noise ratio, and the variable projection then uses the whole ring-down).
PENCIL_MAX_S = 2.5

#: Samples left out at each end of a band signal, in units of 1/margin: the raised-cosine
#: edge spreads the record's abrupt start (and end) over a few 1/margin (its time response
#: falls off as 1/t^3; common practice). A pole that decays faster than this left-out
#: start (sigma > 1/skip) is fitted on the record's head at the full rate instead, and so
#: is any pole whose half-power bandwidth would not fit a band.
SKIP_MARGINS = 3.0

#: Fewest samples of the record's head fitted at the full rate for heavily damped poles
#: (at least 4 of the bands' left-out starts).
HEAD_SAMPLES = 4096

#: Band poles of two neighbouring bands within this many decay rates (or 1e-6 of the
#: frequency) are one pole seen twice at the shared edge.
EDGE_DUPLICATE_SIGMAS = 2.0

#: Levenberg-Marquardt steps before the pencil's weak poles are pruned in a band.
QUICK_LM_ITER = 8

#: Samples per chunk when the full-length basis is applied (bounds the memory).
CHUNK = 2**16


def use_bands(n_samples: int, fs: float, band: tuple[float, float] | None) -> bool:
    """True when a window of `n_samples` is fitted band by band (:func:`fit_poles_banded`).

    Examples
    --------
    >>> use_bands(4096, 4096.0, None), use_bands(2**16, 51200.0, None)
    (False, True)
    >>> use_bands(10000, 44100.0, (1000.0, 3000.0))
    True
    """
    if n_samples > LONG_RECORD_SAMPLES:
        return True
    if band is not None and n_samples > NARROW_BAND_SAMPLES:
        return (float(band[1]) - float(band[0])) < NARROW_BAND_FRACTION * 0.5 * float(fs)
    return False


@dataclass
class _Band:
    lo: float  # core of the band (Hz)
    hi: float
    shift_hz: float  # original frequency = band frequency + shift
    fs_b: float
    t: np.ndarray  # times of the band samples (s, from the window start)
    sig: np.ndarray  # (r, n_b) real
    frac: float  # the taper's share of the band Nyquist range (white-noise equivalent)
    margin: float  # Hz each side
    skip_s: float  # left out at each end (the taper's time spread)
    lines: bool  # a periodogram line of the band's core stands above the noise

    @property
    def heavy_sigma(self) -> float:
        """Decay rates from this up decay within the left-out start: fitted on the head."""
        return 1.0 / self.skip_s


def _bands_of(spec: np.ndarray, nfft: int, n: int, fs: float, f_lo: float, f_hi: float,
              width: float) -> list[_Band]:
    """Zoomed band signals of the real signals whose rfft (length `nfft`) is `spec`."""
    df = fs / nfft
    n_b = max(1, int(np.ceil((f_hi - f_lo) / width)))
    width = (f_hi - f_lo) / n_b
    margin = MARGIN_FRACTION * width
    guard = GUARD_FRACTION * width
    freqs = np.arange(spec.shape[1]) * df
    t_len = n / fs
    # periodogram of each signal over its noise level (the median of its periodogram over
    # the searched range, ln 2 times the mean for white noise), the largest over signals; a
    # band none of whose lines exceeds ln(K) + 3 (K lines x signals searched: the largest of
    # K unit exponentials exceeds it with probability about e^-3; common practice) holds no
    # pole the pencil would accept, and is skipped
    rng_idx = np.nonzero((freqs >= f_lo) & (freqs <= f_hi))[0]
    pw = np.abs(spec[:, rng_idx]) ** 2
    level = np.median(pw, axis=1) / np.log(2.0)
    pw /= np.where(level > 0, level, 1.0)[:, None]
    loud = np.zeros(spec.shape[1], bool)
    k_all = pw.shape[1]
    for blk in (1, 8, 64, 512):  # a damped line spreads over many lines: block means too
        nb = k_all // blk
        if nb < 1:
            break
        means = pw[:, : nb * blk].reshape(pw.shape[0], nb, blk).mean(axis=2).max(axis=0)
        lim = _mean_limit(blk, np.log(max(nb * pw.shape[0], 2)) + 3.0)
        hot = np.repeat(means > lim, blk)
        loud[rng_idx[: hot.size]] |= hot
    del pw
    out = []
    from scipy.fft import irfft, next_fast_len

    for b in range(n_b):
        lo, hi = f_lo + b * width, f_lo + (b + 1) * width
        s_lo, s_hi = max(lo - margin, 0.0), min(hi + margin, 0.5 * fs)
        idx = np.nonzero((freqs >= s_lo) & (freqs <= s_hi))[0]
        if idx.size < 8:
            continue
        f_sel = freqs[idx]
        taper = band_taper(f_sel, lo, hi, margin)
        k_shift = max(int(idx[0]) - int(round(guard / df)), 0)
        pos_max = int(idx[-1]) - k_shift
        n_base = next_fast_len(2 * (pos_max + int(round(guard / df))) + 2)
        half = np.zeros((spec.shape[0], n_base // 2 + 1), complex)
        half[:, idx - k_shift] = spec[:, idx] * taper
        sig = irfft(half, n_base, axis=1) * (n_base / nfft)
        fs_b = n_base * df
        n_keep = int(np.floor(t_len * fs_b))
        skip = int(np.ceil(SKIP_MARGINS * fs_b / margin))  # the taper's time spread
        if n_keep - 2 * skip < 48:
            continue
        sig = np.ascontiguousarray(sig[:, skip : n_keep - skip])
        t = (skip + np.arange(sig.shape[1])) / fs_b
        frac = float(np.sum(taper**2) * df / (0.5 * fs_b))
        core = (f_sel >= lo) & (f_sel < hi)
        lines = bool(core.any() and loud[idx[core]].any())
        out.append(_Band(lo, hi, k_shift * df, fs_b, t, sig, frac, margin, skip / fs_b, lines))
    return out


def _mean_limit(blk: int, c: float) -> float:
    """x > 1 with ``blk (x - 1 - ln x) = c``: the mean of `blk` unit exponentials exceeds
    it with probability at most ``e^-c`` (the Chernoff bound of a Gamma(blk) mean)."""
    lo, hi = 1.0, 2.0 + 2.0 * c / blk + c
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if blk * (mid - 1.0 - np.log(mid)) < c:
            lo = mid
        else:
            hi = mid
    return hi


def _last_ringing_block(sig: np.ndarray, nb: int = 32) -> tuple[int, int]:
    """Block length and index of the last of `nb` blocks whose energy is above four times
    the floor (the median of the quietest quarter: twice its RMS); -1 when none is."""
    blk = sig.shape[1] // nb
    if blk < 1:
        return blk, -1
    e = np.sum(sig[:, : blk * nb].reshape(sig.shape[0], nb, blk) ** 2, axis=(0, 2))
    floor = float(np.median(np.sort(e)[: max(nb // 4, 1)]))
    above = np.nonzero(e > 4.0 * floor)[0]
    return blk, int(above[-1]) if above.size else -1


def _pencil_length(sig: np.ndarray, fs_b: float) -> int:
    """Samples of the band signal that hold the ring-down: until the envelope (RMS in 32
    blocks) falls to twice the floor of the last blocks, at most :data:`PENCIL_MAX_S`."""
    cap = min(sig.shape[1], int(PENCIL_MAX_S * fs_b))
    blk, last = _last_ringing_block(sig)
    if blk < 8:
        return cap
    if last < 0:
        return min(cap, 8 * blk)
    return int(min(cap, max((last + 2) * blk, 8 * blk, 256)))


def _compress_centred(y: np.ndarray, r: int) -> np.ndarray:
    """Leading principal-component signals of `y` (P, N) about each signal's mean, as
    :func:`._core.compress` of ``y - mean`` but without a centred copy of `y`."""
    mu = y.mean(axis=1, keepdims=True)
    if y.shape[0] <= r:
        return y - mu
    gram = y @ y.T - y.shape[1] * (mu @ mu.T)
    w, v = np.linalg.eigh(gram)
    top = v[:, np.argsort(w)[::-1][:r]]
    return top.T @ y - top.T @ mu


def _decay_length(sig: np.ndarray) -> int:
    """Samples of the band signal until its envelope (RMS in 32 blocks) has fallen to the
    noise floor (twice the floor's RMS), plus two blocks: later samples hold noise only
    and add nothing to the poles but cost."""
    n = sig.shape[1]
    blk, last = _last_ringing_block(sig)
    if blk < 64 or last < 0:
        return n
    return int(min(n, max((last + 3) * blk, 8 * blk)))


def _to_band(sigma: float, u: float, shift_hz: float) -> tuple[float, float]:
    wd = np.sqrt(max(u, 0.0)) - TWO_PI * shift_hz
    return sigma, wd * abs(wd)


def _gram_rss(y: np.ndarray, t: np.ndarray, sigma: np.ndarray, u: np.ndarray) -> float:
    """RSS of the signals `y` (P, N) at the poles, through the normal equations in chunks
    (the full basis of a long record is never held at once)."""
    m = sigma.size
    k = 2 * m + 1
    gram = np.zeros((k, k))
    rhs = np.zeros((k, y.shape[0]))
    yy = 0.0
    for s in range(0, t.size, CHUNK):
        sl = slice(s, min(s + CHUNK, t.size))
        phi = basis_matrix(t[sl], sigma, u, 1)
        gram += phi.T @ phi
        rhs += phi.T @ y[:, sl].T
        yy += float(np.sum(y[:, sl] ** 2))
    d = np.sqrt(np.where(np.diag(gram) > 0, np.diag(gram), 1.0))
    g = gram / np.outer(d, d)
    try:
        coef = np.linalg.solve(g, rhs / d[:, None])
    except np.linalg.LinAlgError:
        coef = np.linalg.lstsq(g, rhs / d[:, None], rcond=None)[0]
    return max(yy - float(np.sum(coef * (rhs / d[:, None]))), 0.0)


def noise_from_spectrum(spec: np.ndarray, n: int, df: float, f_lo: float, f_hi: float) -> np.ndarray:
    """White-noise standard deviation per signal from the median of its periodogram over
    ``[f_lo, f_hi]``: for white noise of variance s^2, ``|X_k|^2 / N`` is exponentially
    distributed with mean s^2, whose median is ``ln 2`` s^2 (any statistics text; from
    memory). Lightly damped modes occupy few lines of a long record, so the median is the
    noise (common practice)."""
    k0, k1 = int(f_lo / df), int(np.ceil(f_hi / df)) + 1
    p = np.abs(spec[:, k0:k1]) ** 2 / n
    return np.sqrt(np.median(p, axis=1) / np.log(2.0))


def fit_poles_banded(
    y: np.ndarray, t: np.ndarray, fs: float, band: tuple[float, float], *,
    x0: np.ndarray | None = None, max_order: int | None = None,
    protect_hz: np.ndarray | None = None,
) -> CoreResult:
    """Shared poles of the weighted signals `y` (P, N), fitted band by band.

    Parameters
    ----------
    y : ndarray
        Weighted signals (unit noise), times `t` (s) from the window start.
    fs : float
        Sample rate (Hz).
    band : (float, float)
        Searched range (Hz); poles outside it are not fitted (the band filters them out).
    x0 : ndarray, optional
        Packed poles of an earlier fit (:class:`._varpro.Problem` with the full-rate scale):
        each band starts from its own (a refit; the pencils are skipped).
    max_order, protect_hz
        As :func:`._core.fit_core`.

    Returns
    -------
    CoreResult
        As :func:`._core.fit_core`; ``prob`` is the full-length problem of the compressed
        signals (residues and refits use it), ``minimizer`` None, ``pencil`` the bands'
        stabilisation rows (pass = band number) and candidates, mapped back.

    Examples
    --------
    >>> from modalnb.testing.synth import free_decay
    >>> fs = 20000.0
    >>> t = np.arange(2**16) / fs
    >>> rng = np.random.default_rng(0)
    >>> x = free_decay(t, [1500.0, 1501.5], [1e-4, 1.2e-4], [1.0, 0.6])
    >>> y = (x + 1e-3 * rng.standard_normal(t.size))[None, :] / 1e-3
    >>> core = fit_poles_banded(y, t, fs, (1000.0, 2000.0))
    >>> np.round(np.sort(core.fn), 2).tolist()
    [1500.0, 1501.5]
    """
    from scipy.fft import next_fast_len, rfft

    p, n = y.shape
    f_lo, f_hi = float(band[0]), float(band[1])
    pad = max(0.02 * (f_hi - f_lo), 4.0 * fs / n)
    f_lo, f_hi = max(f_lo - pad, 0.0), min(f_hi + pad, 0.5 * fs * 0.98)
    yc = _compress_centred(y, MAX_COMPONENTS)
    nfft = next_fast_len(2 * n)
    spec = rfft(yc, nfft, axis=1)
    t_len = n / fs
    # the pencil of a band sees at most PENCIL_MAX_S; its own sub-bands are ~225/T wide
    width = max(MIN_BAND_HZ, 12 * 360.0 / (1.6 * min(t_len, PENCIL_MAX_S)))
    width = min(width, f_hi - f_lo)
    bands = _bands_of(spec, nfft, n, fs, f_lo, f_hi, width)
    del spec
    w_scale = 2 * np.pi * fs / W_SCALE_FRACTION
    full = Problem(np.ascontiguousarray(yc.T), np.asarray(t, float), w_scale, 1)
    x0_sig, x0_u = (full.unpack(x0) if x0 is not None else (np.zeros(0), np.zeros(0)))
    sig_l, u_l, cov_l, sg_l, src_l, depth_l = [], [], [], [], [], []
    head_n = HEAD_SAMPLES
    pencil = PencilOutput()
    heavy_sigma = None
    for ib, b in enumerate(bands):
        heavy = b.heavy_sigma
        heavy_sigma = heavy if heavy_sigma is None else min(heavy_sigma, heavy)
        head_n = max(head_n, int(np.ceil(4.0 * b.skip_s * fs)))
        prob_scale = 2 * np.pi * b.fs_b / W_SCALE_FRACTION
        in_core = []
        if x0 is not None:
            for s_k, u_k in zip(x0_sig, x0_u, strict=True):
                fd = np.sqrt(u_k) / TWO_PI if u_k > 0 else -1.0
                if b.lo - b.margin <= fd < b.hi + b.margin:
                    in_core.append(_to_band(s_k, u_k, b.shift_hz))
        elif not b.lines:
            continue  # nothing in the band's periodogram stands above the noise
        else:
            n_p = _pencil_length(b.sig, b.fs_b)
            out = find_poles(b.sig[:, :n_p], b.fs_b, 0.5 * b.fs_b * 0.98, max_order=max_order)
            for row in out.rows:
                lam = complex(-row[4] * row[3] * TWO_PI, row[2] * TWO_PI)
                lam += 1j * TWO_PI * b.shift_hz
                fn, zz = abs(lam) / TWO_PI, -lam.real / abs(lam)
                pencil.rows.append((ib + 1, row[1], lam.imag / TWO_PI, fn, zz, *row[5:]))
            # every pole of the band and its margins starts the fit (a pole in a margin
            # that is left out would bias its neighbours); only the core's are kept
            cands = [c for c in out.candidates if -c.lam.real < heavy
                     and b.lo - b.margin <= c.lam.imag / TWO_PI + b.shift_hz < b.hi + b.margin]
            in_core = initial_modes(cands, b.fs_b)
            for c in cands:
                if b.lo <= c.lam.imag / TWO_PI + b.shift_hz < b.hi:
                    pencil.candidates.append(
                        type(c)(c.lam + 1j * TWO_PI * b.shift_hz, c.significance, c.source))
        in_core = [m for m in in_core if m[1] > 0]
        if not in_core:
            continue
        bp = Problem(np.zeros((1, 1)), b.t, prob_scale, 1)
        xb = bp.pack(np.array([m[0] for m in in_core]), np.array([m[1] for m in in_core]))
        if x0 is None and len(in_core) > 1:
            # pruned on the samples the pencil saw (they resolved its poles)
            xb = _quick_prune(Problem(np.ascontiguousarray(b.sig[:, :n_p].T), b.t[:n_p],
                                      prob_scale, 1), xb, b.frac)
        n_d = _decay_length(b.sig)
        cb = _band_fit(b, n_d, xb, _band_hz(protect_hz, b))
        if cb is None:
            continue  # nothing above the noise in this band
        for k in range(cb.sigma.size):
            s_k, ub = float(cb.sigma[k]), float(cb.u[k])
            if ub <= 0 or not np.isfinite(s_k):
                continue
            wd_b = np.sqrt(ub)
            wd = wd_b + TWO_PI * b.shift_hz
            # the core, and its margins: a pole at the shared edge of two bands
            # is kept by both, and the one deeper inside its band wins (_edge_unique)
            depth = min(wd / TWO_PI - b.lo, b.hi - wd / TWO_PI)
            if depth < -b.margin or s_k >= heavy:
                continue
            # packed band parameters -> packed full-rate parameters
            a = np.diag([cb.prob.w_scale / w_scale,
                         (wd / wd_b) * (cb.prob.w_scale / w_scale) ** 2])
            c = cb.cov[2 * k : 2 * k + 2, 2 * k : 2 * k + 2] / b.frac
            sig_l.append(s_k)
            u_l.append(wd * wd)
            cov_l.append(a @ c @ a.T)
            sg_l.append(float(cb.significance[k]) * b.frac)
            src_l.append(ib)
            depth_l.append(depth)
    # ---- heavily damped poles: the record's head at the full rate
    if heavy_sigma is not None:
        nh = min(n, head_n)
        x_head = None
        if x0 is not None:
            keep = [i for i in range(x0_sig.size) if x0_sig[i] >= heavy_sigma or x0_u[i] <= 0]
            if keep:
                x_head = full.pack(x0_sig[keep], x0_u[keep])
        if x0 is None or x_head is not None:
            try:
                with np.errstate(over="ignore", under="ignore", invalid="ignore"):
                    ch = fit_core(yc[:, :nh], t[:nh] - t[0], fs, f_max=f_hi, x0=x_head,
                                  max_order=max_order, polish=False, protect_hz=protect_hz)
            except EstimationError:
                ch = None
            if ch is not None:
                for k in range(ch.sigma.size):
                    s_k, u_k = float(ch.sigma[k]), float(ch.u[k])
                    wn, _ = natural(s_k, u_k)
                    if not (s_k >= heavy_sigma or u_k <= 0) or not np.isfinite(wn):
                        continue
                    if not (f_lo <= wn / TWO_PI <= f_hi or u_k <= 0):
                        continue
                    sig_l.append(s_k)
                    u_l.append(u_k)
                    # same sample rate, so the same parameter scale as the full problem
                    cov_l.append(ch.cov[2 * k : 2 * k + 2, 2 * k : 2 * k + 2])
                    sg_l.append(float(ch.significance[k]))
                    src_l.append(-1)
                    depth_l.append(-np.inf)
                if x0 is None and ch.pencil is not None:
                    pencil.rows += [r for r in ch.pencil.rows if r[0] == 0]
    if not sig_l:
        raise EstimationError(
            "no mode found above the noise in the searched band. Hint: check the window "
            "(it should hold the ring-down), the band, or the hit selection."
        )
    sigma, u = np.array(sig_l), np.array(u_l)
    keep = _edge_unique(sigma, u, np.array(sg_l), np.array(src_l), np.array(depth_l))
    sigma, u = sigma[keep], u[keep]
    order = np.argsort(u)
    idx = np.nonzero(keep)[0][order]
    sigma, u = sigma[order], u[order]
    m = sigma.size
    cov = np.zeros((2 * m, 2 * m))
    for j, i in enumerate(idx):
        cov[2 * j : 2 * j + 2, 2 * j : 2 * j + 2] = cov_l[i]
    signif = np.array(sg_l)[idx]
    x = full.pack(sigma, u)
    rss = _gram_rss(y, np.asarray(t, float), sigma, u)
    n_tot = y.size
    n_lin = p * (x.size + 1)
    s2 = rss / max(n_tot - n_lin - x.size, 1)
    fn, zeta, fn_std, zeta_std = natural_with_cov(full, x, cov)
    return CoreResult(x=x, prob=full, cov=cov, fn=fn, zeta=zeta, fn_std=fn_std,
                      zeta_std=zeta_std, sigma=sigma, u=u, significance=signif, s2=s2,
                      rss=rss, n_tot=n_tot, minimizer=None,
                      pencil=pencil if x0 is None else None)


def _band_fit(b: _Band, n_d: int, xb: np.ndarray,
              protect: np.ndarray | None) -> CoreResult | None:
    """:func:`._core.fit_core` on a band (its first `n_d` samples), then without the modes
    whose likelihood-ratio statistic is below the noise significance limit once the
    band's noise variance is taken at its white-noise equivalent (``s^2 / frac``: the
    fit's own test sees the band's noise only where the taper passes it, so it would keep
    noise poles about 1/frac times too easily). None when nothing is left."""
    for _ in range(2):
        try:
            with np.errstate(over="ignore", under="ignore", invalid="ignore"):
                cb = fit_core(b.sig[:, :n_d], b.t[:n_d], b.fs_b, f_max=0.5 * b.fs_b, x0=xb,
                              polish=False, protect_hz=protect)
        except EstimationError:
            return None
        with np.errstate(over="ignore", under="ignore", invalid="ignore"):
            lr = _rss_increase(cb.prob, cb.x) * b.frac / max(cb.s2, 1e-300)
        keep = lr >= significance_threshold(cb.prob.data_t.shape[1])
        if protect is not None:
            fd = np.sqrt(np.abs(cb.u)) / TWO_PI
            keep |= np.array([np.any(np.abs(f - protect) < ASKED_TOL * (protect + b.shift_hz))
                              for f in fd])
        if keep.all():
            return cb
        if not keep.any():
            return None
        xb = cb.x[np.repeat(keep, 2)]
    return cb


def _quick_prune(prob: Problem, x: np.ndarray, frac: float) -> np.ndarray:
    """The pencil's start, after a few Levenberg-Marquardt steps, without the modes whose
    likelihood-ratio statistic stays below the noise significance limit.

    The pencil of a band with strong lines offers many weak poles that only absorb its own
    truncation; :func:`._core.fit_core` would drop them too, one full refinement per round
    (the cost grows with the square of the modes); here they go after one short round.
    """
    with np.errstate(over="ignore", under="ignore", invalid="ignore"):
        x, _ = levenberg_marquardt(prob, x, max_iter=QUICK_LM_ITER)
        sigma, u = prob.unpack(x)
        ok = (sigma > 0) & (u > 0) & np.isfinite(sigma) & np.isfinite(u)
        if not ok.all():
            x = x[np.repeat(ok, 2)]
        if x.size <= 2:
            return x
        n, p = prob.data_t.shape
        rss = float(np.sum(prob.residual(x) ** 2))
        s2 = rss / max(n * p - p * (x.size + prob.n_extra) - x.size, 1) / frac
        lr = _rss_increase(prob, x) / max(s2, 1e-300)
    keep = lr >= significance_threshold(p)
    if not keep.any():
        keep = lr == lr.max()
    return x[np.repeat(keep, 2)]


def _band_hz(protect_hz: np.ndarray | None, b: _Band) -> np.ndarray | None:
    """Frequencies the user asked for, in the band's frame (those inside it)."""
    if protect_hz is None or not len(protect_hz):
        return None
    f = np.asarray(protect_hz, float)
    f = f[(f >= b.lo) & (f < b.hi)] - b.shift_hz
    return f if f.size else None


def _edge_unique(sigma: np.ndarray, u: np.ndarray, signif: np.ndarray, src: np.ndarray,
                 depth: np.ndarray) -> np.ndarray:
    """Leave out one of two poles from different fits that are one pole: two band poles
    within :data:`EDGE_DUPLICATE_SIGMAS` decay rates (or 1e-6 relative), the one nearer
    its band's edge; a band pole and a head pole within a quarter decay rate, the weaker."""
    keep = np.ones(sigma.size, bool)
    wd = np.sqrt(np.abs(u)) * np.sign(u)
    for i in range(sigma.size):
        for j in range(i):
            if not (keep[i] and keep[j]) or src[i] == src[j]:
                continue
            both_bands = src[i] >= 0 and src[j] >= 0
            s_max = max(sigma[i], sigma[j])
            tol = max((EDGE_DUPLICATE_SIGMAS if both_bands else 0.25) * s_max, 1e-6 * abs(wd[i]))
            if abs(wd[i] - wd[j]) < tol:
                if both_bands:
                    keep[i if depth[i] < depth[j] else j] = False
                else:
                    keep[i if signif[i] < signif[j] else j] = False
    return keep


def fit_banded(prep: object, band: tuple[float, float], asked: np.ndarray,
               x0: np.ndarray | None, max_order: int | None) -> tuple[CoreResult, np.ndarray]:
    """The engine's pole fit of a long record (``SharedPoleFit._fit_poles``'s band path).

    `prep` is the engine's prepared window (``data`` (hit, channel, time), ``live``,
    ``weight``, ``noise_from``, ``t_win``, ``fs``). Without pre-trigger noise, each channel
    is weighted by its noise floor from the median of its periodogram over the band
    (:func:`noise_from_spectrum`) instead of the window RMS (which, on a long ring-down, is
    the signal's). Returns the core result and the channel weights used.
    """
    data, live, fs = prep.data, prep.live, float(prep.fs)
    weight = np.asarray(prep.weight, float).copy()
    n = data.shape[-1]
    lo, hi = float(band[0]), float(band[1])
    if prep.noise_from != "pre-trigger samples":
        from scipy.fft import rfft

        sig = np.zeros(data.shape[1])
        for c in np.nonzero(live)[0]:
            # one channel at a time (hits pooled): the memory stays at one channel's FFTs
            x = data[:, c, :] - data[:, c, :].mean(axis=-1, keepdims=True)
            s = noise_from_spectrum(rfft(x, axis=-1), n, fs / n, lo, hi)
            sig[c] = float(np.sqrt(np.mean(s**2)))
        ok = live & (sig > 0)
        weight[ok] = 1.0 / sig[ok]
        prep.noise_from = "periodogram median in the band (long record, no pre-trigger noise)"
    # stacked weighted signals, built hit by hit into one array (no full-size temporaries)
    n_live = int(live.sum())
    y = np.empty((data.shape[0] * n_live, n))
    for h in range(data.shape[0]):
        np.multiply(data[h, live, :], weight[live][:, None], out=y[h * n_live : (h + 1) * n_live])
    t_rel = prep.t_win - prep.t_win[0]
    core = fit_poles_banded(y, t_rel, fs, (lo, hi), x0=x0, max_order=max_order,
                            protect_hz=asked if asked.size else None)
    return core, weight


def scatter_banded(prep: object, core: CoreResult, weight: np.ndarray,
                   band: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    """Per-hit scatter of a long record (``SharedPoleFit._per_hit_scatter``'s band path).

    Each accepted hit's signals are refitted band by band from the shared poles
    (:func:`fit_poles_banded` with ``x0``); a mode of the shared fit takes the hit's pole
    nearest in frequency (within a quarter of the mode's half-power bandwidth or 1e-4 of
    its frequency, else NaN for that hit). Returns the standard deviations (ddof = 1) over
    the hits of the natural frequency and the damping ratio.
    """
    live = prep.live
    t_rel = prep.t_win - prep.t_win[0]
    m = core.sigma.size
    fns = np.full((prep.acc_idx.size, m), np.nan)
    zs = np.full((prep.acc_idx.size, m), np.nan)
    for i in range(prep.acc_idx.size):
        y = prep.data[i][live] * weight[live][:, None]
        try:
            hit = fit_poles_banded(y, t_rel, float(prep.fs), band, x0=core.x)
        except EstimationError:
            continue
        for k in range(m):
            d = np.abs(hit.fn - core.fn[k])
            j = int(np.argmin(d)) if d.size else -1
            tol = max(0.25 * core.sigma[k] / np.pi, 1e-4 * core.fn[k])
            if j >= 0 and d[j] <= tol:
                fns[i, k], zs[i, k] = hit.fn[j], hit.zeta[j]
    with np.errstate(invalid="ignore", divide="ignore"):
        import warnings

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a mode no hit resolved: NaN
            return np.nanstd(fns, axis=0, ddof=1), np.nanstd(zs, axis=0, ddof=1)
