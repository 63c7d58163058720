"""Non-parametric cross-checks of each fitted mode, each labelled with its known bias."""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import xarray as xr

from .._errors import EstimationError
from .._noise import unit_scale

BIAS = {
    "log_decrement": "peaks of the band-passed mode; biased by neighbouring modes, noise and "
                     "offset (exact only for one clean mode)",
    "half_power": "zero-padded FFT -3 dB bandwidth; truncation bias (overestimates when the "
                  "window holds < 6 time constants, floor 0.443/(fn T))",
    "hilbert": "Hilbert envelope slope of the band-passed mode; biased low in noise",
}


def _signals(records: xr.Dataset, result: xr.Dataset) -> Any:
    """A function of a channel index giving the window of `result` on the first accepted
    hit's channel (the acquisition's exponential window undone, unit peak, zero mean) and
    the sample rate; the window and hit are found once for all channels."""
    t = np.asarray(records["time"].values, float)
    w0, w1 = result.attrs["window"]
    sel = (t >= w0 - 1e-12) & (t <= w1 + 1e-12)
    acc = np.asarray(result["hit_accepted"].values, bool)
    h = int(np.nonzero(acc)[0][0])
    resp = records["response"].values
    tau = records.attrs.get("exponential_window_tau_s")
    fs = 1.0 / float(np.median(np.diff(t)))
    tw = t[sel]
    gain = None if tau is None else np.exp(np.clip(tw, 0, None) / float(tau))

    def one(channel_index: int) -> tuple[np.ndarray, float]:
        x = np.asarray(resp[h, channel_index], float)[sel]
        if gain is not None:
            x = np.where(tw >= 0, x * gain, x)
        return _unit(x), fs

    return one


def _unit(x: np.ndarray) -> np.ndarray:
    # unit peak (every method here is scale-free): any units, no overflow in the squares
    x = x * unit_scale(x)
    x = x - x.mean()
    peak = float(np.max(np.abs(x))) if x.size else 0.0
    return x / peak if peak > 0 else x


#: Windows longer than this are cross-checked on a zoom of each mode's band (complex
#: demodulation, low-pass and decimation through the record's spectrum; Randall 1987,
#: *Frequency Analysis*, 3rd ed., Brüel & Kjær, ch. 3) instead of full-rate filters and
#: transforms: the cost per mode no longer grows with the record.
ZOOM_SAMPLES = 2**16

#: The zoomed band: the mode's band (fd +- half width), a raised-cosine margin of a
#: quarter of its width on each side, and guards of half its width to 0 Hz and to the
#: zoomed Nyquist frequency; the samples of the margin's time spread (3 / margin seconds)
#: are left out at both ends (as in :mod:`._bands`).
ZOOM_MARGIN = 0.25
ZOOM_GUARD = 0.5
ZOOM_SKIP_MARGINS = 3.0


def _spectrum(x: np.ndarray) -> np.ndarray:
    from scipy.fft import next_fast_len, rfft

    return rfft(x, next_fast_len(2 * x.size))


def _zoom(spec: np.ndarray, n: int, fs: float, fd: float,
          half_width: float) -> tuple[np.ndarray, float, float]:
    """The band fd +- half_width of the signal whose zero-padded rfft is `spec`, moved
    down by a whole number of lines and resampled: (signal, its rate, the shift in Hz)."""
    from scipy.fft import irfft, next_fast_len

    nfft = 2 * (spec.size - 1)
    df = fs / nfft
    width = 2.0 * half_width
    margin = ZOOM_MARGIN * width
    lo, hi = fd - half_width, fd + half_width
    k0 = max(int(np.floor((lo - margin) / df)), 1)
    k1 = min(int(np.ceil((hi + margin) / df)), spec.size - 1)
    if k1 - k0 < 8:
        raise ValueError("too few spectral lines near the mode")
    k = np.arange(k0, k1 + 1)
    f = k * df
    taper = np.ones(k.size)
    left, right = f < lo, f > hi
    taper[left] = 0.5 - 0.5 * np.cos(np.pi * np.clip(f[left] - (lo - margin), 0, None) / margin)
    taper[right] = 0.5 - 0.5 * np.cos(np.pi * np.clip((hi + margin) - f[right], 0, None) / margin)
    guard = max(int(round(ZOOM_GUARD * width / df)), 2)
    shift = max(k0 - guard, 0)
    n_z = next_fast_len(2 * (k1 - shift + guard) + 2)
    half = np.zeros(n_z // 2 + 1, complex)
    half[k - shift] = spec[k] * taper
    y = irfft(half, n_z) * (n_z / nfft)
    fs_z = n_z * df
    keep = int(np.floor(n / fs * fs_z))
    skip = int(np.ceil(ZOOM_SKIP_MARGINS * fs_z / margin))
    if keep - 2 * skip < 32:
        raise ValueError("window too short for the zoomed band to settle")
    return y[skip : keep - skip], fs_z, shift * df


def _bandpass_sos(lo: float, hi: float, fs: float) -> np.ndarray:
    """4th-order Butterworth band-pass as second-order sections, from its poles directly.

    The digital band-pass (``scipy.signal.butter``, bilinear transform) has its eight zeros
    at z = 1 and z = -1, four each, and four conjugate pole pairs: each section gets one
    pair and the zeros ``1 - z^-2``, the gain goes to the first section, the sections in
    ascending pole radius (the pairing of ``zpk2sos``, whose general zero-pole matching is
    about seven times the cost of the design and the refit's largest cross-check cost). The
    same transfer function; filtered signals agree with ``butter(..., output="sos")`` to
    rounding.
    """
    from scipy.signal import butter

    z, p, k = butter(4, [lo, hi], btype="bandpass", fs=fs, output="zpk")
    p = p[np.imag(p) > 0]
    if p.size != 4 or not np.allclose(np.sort(np.real(z)), [-1.0] * 4 + [1.0] * 4, atol=1e-9):
        return butter(4, [lo, hi], btype="bandpass", fs=fs, output="sos")
    p = p[np.argsort(np.abs(p))]
    sos = np.zeros((4, 6))
    sos[:, 0], sos[:, 2], sos[:, 3] = 1.0, -1.0, 1.0
    sos[:, 4] = -2.0 * p.real
    sos[:, 5] = np.abs(p) ** 2
    sos[0, :3] *= k
    return sos


def _bandpass(x: np.ndarray, fs: float, lo: float, hi: float) -> np.ndarray:
    """Zero-phase Butterworth band-pass; the ends where the filter rings are cut off.

    The record starts abruptly (strong other modes right after the hit), which excites
    the filter's own poles at the band edges; the samples until the filter's impulse
    response has fallen to 1e-3 of its peak are dropped at both ends (filtfilt runs both
    ways).
    """
    from scipy.signal import sosfilt

    lo = max(lo, 0.5 * fs / x.size * 4)
    hi = min(hi, 0.49 * fs)
    if not lo < hi:
        raise ValueError("empty pass band")
    sos = _bandpass_sos(lo, hi, fs)
    imp = np.zeros(min(x.size, int(fs * 40.0 / (hi - lo)) + 64))
    imp[0] = 1.0
    h = np.abs(sosfilt(sos, imp))
    settle = int(np.nonzero(h > 1e-3 * h.max())[0][-1]) + 1
    if 2 * settle >= x.size - 16:
        raise ValueError("window too short for the band-pass filter to settle")
    return _filtfilt(sos, x)[settle : x.size - settle]


def _filtfilt(sos: np.ndarray, x: np.ndarray) -> np.ndarray:
    """``scipy.signal.sosfiltfilt(sos, x)`` (odd extension of 3 x 9 samples, each pass
    started in the steady state of the edge sample) for the band-pass of
    :func:`_bandpass_sos`, whose sections all have the zeros ``1 - z^-2``: every section's
    gain at 0 Hz is zero, so only the first has a non-zero initial state (what
    ``scipy.signal.sosfilt_zi`` gives; its general per-section solves were a third of the
    band-pass cost). That state is ``lfilter_zi``'s 2 x 2 system solved in closed form.
    Other sections (the design's fallback): scipy's own.

    Examples
    --------
    >>> import numpy as np
    >>> from scipy.signal import sosfiltfilt
    >>> sos = _bandpass_sos(90.0, 110.0, 1000.0)
    >>> x = np.random.default_rng(1).standard_normal(500)
    >>> bool(np.allclose(_filtfilt(sos, x), sosfiltfilt(sos, x)))
    True
    """
    from scipy.signal import sosfilt, sosfiltfilt

    if not (np.all(sos[:, 1] == 0) and np.all(sos[:, 0] == -sos[:, 2])
            and np.all(sos[:, 3] == 1) and x.size > 27):
        return sosfiltfilt(sos, x)
    edge = 27  # scipy's default pad length: 3 x (2 x 4 sections + 1)
    ext = np.concatenate((2 * x[0] - x[edge:0:-1], x, 2 * x[-1] - x[-2 : -(edge + 2) : -1]))
    b0, b1, b2 = sos[0, :3]
    a1, a2 = sos[0, 4], sos[0, 5]
    c0, c1 = b1 - a1 * b0, b2 - a2 * b0  # lfilter_zi's right-hand side
    det = 1.0 + a1 + a2
    zi = np.zeros((sos.shape[0], 2))
    zi[0] = ((c0 + c1) / det, ((1.0 + a1) * c1 - a2 * c0) / det)
    y, _ = sosfilt(sos, ext, zi=zi * ext[0])
    y, _ = sosfilt(sos, y[::-1], zi=zi * y[-1])
    return y[::-1][edge:-edge]


def _log_decrement(y: np.ndarray, fs: float, fd: float, fd_true: float | None = None) -> float:
    """Damping ratio from the peaks of `y` (a mode at damped frequency `fd`); with
    `fd_true`, `y` is the mode moved down to `fd` (zoom), whose decay rate per second is
    the original's: ``delta = sigma / fd_true``."""
    from scipy.signal import find_peaks

    peaks, _ = find_peaks(y, distance=max(1, int(0.7 * fs / fd)))
    amp = y[peaks]
    good = amp > 0.05 * amp.max()
    first = np.nonzero(good)[0]
    if first.size < 3:
        raise ValueError("fewer than 3 usable peaks")
    idx = peaks[first[0] : first[-1] + 1]
    a = y[idx]
    keep = a > 0
    n_per = np.round((idx[keep] - idx[keep][0]) * fd / fs)
    slope = np.polyfit(n_per, np.log(a[keep]), 1)[0]
    delta = -slope
    if fd_true is not None:
        delta = delta * fd / fd_true  # per cycle of the zoomed mode -> per original cycle
    return float(delta / np.sqrt(4 * np.pi**2 + delta**2))


def _power_spectrum(x: np.ndarray, fs: float) -> tuple[np.ndarray, np.ndarray]:
    """Power spectrum of `x` zero-padded 8 times beyond a power of two, and its frequencies
    (what :func:`_half_power` reads; one per channel, shared by the modes it checks)."""
    nfft = 8 * int(2 ** np.ceil(np.log2(x.size)))
    return np.abs(np.fft.rfft(x, nfft)) ** 2, np.fft.rfftfreq(nfft, 1 / fs)


def _cached(powers: dict[int, tuple[np.ndarray, np.ndarray]], ch: int, x: np.ndarray,
            fs: float) -> tuple[np.ndarray, np.ndarray]:
    if ch not in powers:
        powers[ch] = _power_spectrum(x, fs)
    return powers[ch]


def _half_power(x: np.ndarray, fs: float, fd: float, half_width: float,
                shift_hz: float = 0.0,
                power: tuple[np.ndarray, np.ndarray] | None = None) -> float:
    spec, f = _power_spectrum(x, fs) if power is None else power
    near = (f > fd - half_width) & (f < fd + half_width)
    if near.sum() < 5:
        raise ValueError("too few spectral lines near the mode")
    i_pk = np.nonzero(near)[0][np.argmax(spec[near])]
    half = spec[i_pk] / 2
    lo = i_pk
    while lo > 0 and spec[lo] > half:
        lo -= 1
    hi = i_pk
    while hi < spec.size - 1 and spec[hi] > half:
        hi += 1
    if lo == 0 or hi == spec.size - 1:
        raise ValueError("no -3 dB points")
    f1 = np.interp(half, [spec[lo], spec[lo + 1]], [f[lo], f[lo + 1]])
    f2 = np.interp(half, [spec[hi], spec[hi - 1]], [f[hi], f[hi - 1]])
    return float((f2 - f1) / (2 * (f[i_pk] + shift_hz)))


def _envelope(y: np.ndarray) -> np.ndarray:
    """``|analytic signal|`` of `y` zero-padded to at least twice its length (the padding
    keeps the circular Hilbert transform from wrapping the decay's end onto its start).

    The analytic signal is the one of ``scipy.signal.hilbert`` (Marple 1999, "Computing
    the discrete-time analytic signal via FFT", IEEE Trans. Signal Process. 47(9)): the
    spectrum's positive frequencies doubled, the negative ones zeroed; here from a real FFT
    (half the work) at a fast FFT length (``scipy.fft.next_fast_len``; the padding beyond
    twice the length only lengthens the zeros), and only the first ``y.size`` samples.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(2000) / 1000.0
    >>> y = np.exp(-3.0 * t) * np.cos(2 * np.pi * 50.0 * t)
    >>> from scipy.signal import hilbert  # 4000 is a fast length: the same transform
    >>> bool(np.allclose(_envelope(y), np.abs(hilbert(y, 4000))[:2000]))
    True
    >>> bool(np.allclose(_envelope(y)[200:1800], np.exp(-3.0 * t[200:1800]), rtol=2e-2))
    True
    """
    from scipy.fft import ifft, next_fast_len, rfft

    n = y.size
    n_fft = next_fast_len(2 * n)
    spec = rfft(y, n_fft)
    full = np.zeros(n_fft, complex)
    half = n_fft // 2
    full[0] = spec[0]
    full[1 : (n_fft + 1) // 2] = 2.0 * spec[1 : (n_fft + 1) // 2]
    if n_fft % 2 == 0:
        full[half] = spec[half]
    return np.abs(ifft(full)[:n])


def _hilbert(y: np.ndarray, fs: float, fn: float) -> float:
    env = _envelope(y)
    n = y.size
    start = int(np.argmax(env[: max(n // 2, 1)]))
    # fit from the envelope's peak down to 5 % of it, or to three times the noise floor
    # (median envelope of the last fifth of the window) if that is higher
    floor = 3.0 * float(np.median(env[-max(n // 5, 1):]))
    level = max(0.05 * env[start], floor)
    below = np.nonzero(env[start:] < level)[0]
    stop = start + (int(below[0]) if below.size else n - start)
    if stop - start < 8:
        raise ValueError("envelope too short above the noise")
    tt = np.arange(start, stop) / fs
    w = env[start:stop] ** 2
    slope = np.polyfit(tt, np.log(env[start:stop]), 1, w=np.sqrt(w))[0]
    return float(-slope / (2 * np.pi * fn))


def cross_checks(records: xr.Dataset, result: xr.Dataset) -> xr.Dataset:
    """Damping of each mode by three non-parametric methods, beside the fitted value.

    On the first accepted hit, the channel where the mode is largest, over the window
    of `result` (a window of more than :data:`ZOOM_SAMPLES` samples: a zoom of the mode's
    band, so the cost per mode does not grow with the record): log decrement of the band-passed mode (exact form
    ``zeta = delta/sqrt(4 pi^2 + delta^2)``), half-power bandwidth of the zero-padded FFT,
    and the Hilbert-envelope slope (Feldman 2011). A method that cannot run gives NaN and
    a note; it never stops the caller. Each method's known bias is in the attrs.

    Returns
    -------
    xarray.Dataset
        Over ``mode``: ``xcheck_log_decrement_damping``, ``xcheck_half_power_damping``,
        ``xcheck_hilbert_damping``, ``xcheck_note`` (str).

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.testing.synth import free_decay
    >>> from modalnb.estimate import SharedPoleFit
    >>> t = np.arange(8192) / 2048.0
    >>> x = free_decay(t, 50.0, 0.01) + 1e-5 * np.random.default_rng(0).standard_normal(8192)
    >>> rec = records_from_arrays(x, 2048.0)
    >>> res = SharedPoleFit().fit(rec).result_
    >>> round(float(cross_checks(rec, res)["xcheck_log_decrement_damping"][0]), 3)
    0.01
    """
    if "frequency_hz" not in result or "shape_amplitude" not in result:
        raise EstimationError("`result` must be a modal table (modalnb.fit_modes or the engine's result_).")
    fns = np.asarray(result["frequency_hz"].values, float)
    zetas = np.asarray(result["damping_ratio"].values, float)
    m = fns.size
    out = {k: np.full(m, np.nan) for k in ("log_decrement", "half_power", "hilbert")}
    notes = []
    signals: dict[int, tuple[np.ndarray, float]] = {}
    spectra: dict[int, np.ndarray] = {}
    powers: dict[int, tuple[np.ndarray, np.ndarray]] = {}  # per channel, for the half-power
    signal_of = None
    for i in range(m):
        note = []
        fn, z = fns[i], zetas[i]
        if not z < 1:
            notes.append("no oscillation: cross-checks need an underdamped mode")
            continue
        fd = fn * np.sqrt(1 - z * z)
        others = np.delete(fns, i)
        gap = np.min(np.abs(others - fn)) if others.size else fn
        half_width = max(min(0.5 * gap, 0.5 * fn), 4 * z * fn)
        ch = int(np.argmax(result["shape_amplitude"].values[i]))
        if ch not in signals:
            if signal_of is None:
                signal_of = _signals(records, result)
            signals[ch] = signal_of(ch)
        x, fs = signals[ch]
        if x.size > ZOOM_SAMPLES:
            # a long record: the mode's band, zoomed (moved down and decimated), stands in
            # for both the band-passed and the raw signal (the same measures, at a rate of
            # a few band widths)
            if ch not in spectra:
                spectra[ch] = _spectrum(x)
            try:
                y, fs_z, shift = _zoom(spectra[ch], x.size, fs, fd, half_width)
            except ValueError as exc:
                note.append(f"zoom: {exc}")
                notes.append("; ".join(note))
                continue
            fd_z = fd - shift
            funs = (
                ("log_decrement",
                 lambda y=y, fs=fs_z, fz=fd_z, fd=fd: _log_decrement(y, fs, fz, fd)),
                ("half_power", lambda y=y, fs=fs_z, fz=fd_z, hw=half_width, sh=shift:
                 _half_power(y, fs, fz, hw, sh)),
                ("hilbert", lambda y=y, fs=fs_z, fn=fn: _hilbert(y, fs, fn)),
            )
        else:
            try:
                y = _bandpass(x, fs, fd - half_width, fd + half_width)
            except ValueError as exc:
                note.append(f"band-pass: {exc}")
                y = None
            funs = (
                ("log_decrement", lambda y=y, fs=fs, fd=fd: _log_decrement(y, fs, fd)),
                ("half_power", lambda x=x, fs=fs, fd=fd, hw=half_width, ch=ch:
                 _half_power(x, fs, fd, hw, power=_cached(powers, ch, x, fs))),
                ("hilbert", lambda y=y, fs=fs, fn=fn: _hilbert(y, fs, fn)),
            )
        for name, fun in funs:
            if y is None and name != "half_power":
                continue
            try:
                out[name][i] = fun()
            except (ValueError, IndexError, np.linalg.LinAlgError) as exc:
                note.append(f"{name}: {exc}")
        notes.append("; ".join(note) if note else "ok")
    dv: dict[str, Any] = {f"xcheck_{name}_damping": ("mode", v, {"bias": BIAS[name]})
                          for name, v in out.items()}
    dv["xcheck_note"] = ("mode", np.array(notes, dtype=object))
    return xr.Dataset(dv, coords={"mode": result["mode"].values},
                      attrs={"biases": json.dumps(BIAS)})



def with_cross_checks(records: xr.Dataset, result: xr.Dataset) -> xr.Dataset:
    """`result` with the :func:`cross_checks` variables added beside each mode.

    The one place the cross-checks join a table (the finisher of
    :mod:`modalnb.fitting` calls it for every public entry point); a table that has them
    is returned as it is.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.testing.synth import free_decay
    >>> from modalnb.estimate import SharedPoleFit
    >>> t = np.arange(4096) / 2048.0
    >>> rec = records_from_arrays(free_decay(t, 40.0, 0.02), 2048.0)
    >>> "xcheck_hilbert_damping" in with_cross_checks(rec, SharedPoleFit().fit(rec).result_)
    True
    """
    if "xcheck_note" in result:
        return result
    xc = cross_checks(records, result)
    out = result.assign({name: xc[name] for name in xc.data_vars})
    out.attrs["cross_check_biases"] = xc.attrs["biases"]
    return out
