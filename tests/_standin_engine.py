"""A crude stand-in for ``modalnb.estimate.fit_modes``, used by the session/widget tests
only while the real engine is not importable (``engine()`` returns the real one when it is).

It is NOT an estimator anyone should use: FFT peaks of the summed spectrum, damping from
the half-power bandwidth (zeta = df / (2 f), METHODS.md §1), residues by linear least
squares with those poles. Its only job is to return the ``fit_modes`` layout (issue 3 §1)
so that the state machinery (recipe, autosave, errors, callbacks) can be exercised.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from modalnb._errors import EstimationError
from modalnb.session import refit_model


def standin_fit_modes(records, band=None, window=None, n_modes=None, *, accept=None,
                      correct_exponential_window=True, **_ignored):
    from scipy.signal import find_peaks

    t = records["time"].values
    fs = float(records.attrs["sample_rate"])
    hits = [int(h) for h in records["hit"].values]
    accept = accept or {}
    acc = [h for h in hits if accept.get(h, True)]
    if not acc:
        raise EstimationError("every hit is rejected. Hint: accept at least one hit.")
    t0, t1 = window if window is not None else (0.005, float(t[-1]))
    sel = (t >= t0) & (t <= t1)
    if sel.sum() < 64:
        raise EstimationError(f"window {t0:g}-{t1:g} s holds {int(sel.sum())} samples, fewer than 64.")
    y = records["response"].sel(hit=acc).values[:, :, sel]
    nfft = 2 * int(sel.sum())
    spec = np.abs(np.fft.rfft(y, n=nfft, axis=-1)).sum(axis=(0, 1))
    f = np.fft.rfftfreq(nfft, 1 / fs)
    lo, hi = band if band is not None else (0.0, 0.45 * fs)
    inband = (f >= lo) & (f <= hi)
    peaks, _ = find_peaks(np.where(inband, spec, 0), prominence=0.02 * spec[inband].max())
    if peaks.size == 0:
        raise EstimationError("no mode found in the band.")
    order = np.argsort(spec[peaks])[::-1][: (n_modes or 6)]
    peaks = np.sort(peaks[order])
    fn, zeta = [], []
    for p in peaks:
        half = spec[p] / np.sqrt(2)
        a = p
        while a > 0 and spec[a] > half:
            a -= 1
        b = p
        while b < spec.size - 1 and spec[b] > half:
            b += 1
        fn.append(f[p])
        zeta.append(max((f[b] - f[a]) / (2 * f[p]), 1e-4))
    fn, zeta = np.array(fn), np.array(zeta)
    w = 2 * np.pi * fn
    lam = -zeta * w + 1j * w * np.sqrt(1 - zeta**2)
    n_m, n_c = fn.size, records.sizes["channel"]
    hr = np.zeros((n_m, len(hits), n_c), complex)
    for ih, h in enumerate(hits):
        _, coef = refit_model(t[sel], records["response"].sel(hit=h).values[:, sel], lam)
        for k in range(n_m):
            hr[k, ih] = (coef[:, 1 + 2 * k] - 1j * coef[:, 2 + 2 * k]) / 2
    res = hr[:, [hits.index(h) for h in acc]].mean(axis=1)
    ref = np.argmax(np.abs(res), axis=1)
    shape = res / res[np.arange(n_m), ref][:, None]
    mode = np.arange(1, n_m + 1)
    return xr.Dataset(
        {
            "frequency_hz": ("mode", fn), "damping_ratio": ("mode", zeta),
            "frequency_hz_std": ("mode", np.full(n_m, fs / nfft / np.sqrt(12))),  # bin quantisation
            "damping_ratio_std": ("mode", zeta * 0.05),
            "regime": ("mode", ["underdamped"] * n_m), "status": ("mode", ["ok"] * n_m),
            "q_factor": ("mode", 1 / (2 * zeta)),
            "shape_amplitude": (("mode", "channel"), np.abs(shape)),
            "shape_phase_deg": (("mode", "channel"), np.angle(shape, deg=True)),
            "residue_real": (("mode", "channel"), res.real),
            "residue_imag": (("mode", "channel"), res.imag),
            "hit_residue_real": (("mode", "hit", "channel"), hr.real),
            "hit_residue_imag": (("mode", "hit", "channel"), hr.imag),
            "hit_accepted": ("hit", [h in acc for h in hits]),
        },
        coords={"mode": mode, "hit": hits, "channel": records["channel"].values},
        attrs={"engine": "test stand-in"},
    )


def engine():
    """The real ``fit_modes`` when importable, else the stand-in (and a flag)."""
    try:
        from modalnb.estimate import fit_modes  # noqa: F401
    except ImportError:
        return standin_fit_modes, False
    return fit_modes, True
