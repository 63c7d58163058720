"""Fitted-model traces from a modal table: the poles of the table, amplitudes by least squares.

Used by the HTML report and the notebook panels to draw measured against model; headless.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from .._errors import EstimationError

__all__ = ["model_poles", "refit_model", "model_traces"]


def model_poles(result: xr.Dataset) -> np.ndarray:
    """Continuous-time poles (rad/s) of the result's modes (lambda = -zeta w + j w sqrt(1-zeta^2))."""
    fn = np.asarray(result["frequency_hz"].values, float)
    z = np.asarray(result["damping_ratio"].values, float)
    w = 2 * np.pi * fn
    return -z * w + 1j * w * np.sqrt(np.clip(1 - z**2, 0.0, None))


def refit_model(
    t: np.ndarray, y: np.ndarray, poles: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares model of signals `y` (P, N) at times `t` (N,) with the given poles.

    With the poles fixed, a sum of decaying sinusoids (plus a constant offset) is linear
    in its amplitudes, so they follow from one linear least-squares solve (the inner step
    of variable projection, Golub & Pereyra 1973). Under- and overdamped poles alike: an
    underdamped pole gives the columns ``e^(-sigma t) cos(wd t)`` and ``... sin``; a pole
    with no imaginary part gives ``e^(-sigma t)`` and ``t e^(-sigma t)``.

    Returns
    -------
    model : ndarray (P, N)
    coefficients : ndarray (P, n_columns)

    Examples
    --------
    >>> t = np.arange(400) / 400.0
    >>> y = np.exp(-2 * t) * np.cos(2 * np.pi * 20 * t)
    >>> lam = np.array([-2 + 2j * np.pi * 20])
    >>> m, _ = refit_model(t, y[None], lam)
    >>> bool(np.allclose(m[0], y))
    True
    """
    t = np.asarray(t, float)
    tt = t - t[0]
    cols = [np.ones_like(tt)]
    for lam in np.asarray(poles, complex):
        if not np.isfinite(lam):
            continue
        env = np.exp(lam.real * tt)
        if abs(lam.imag) > 0:
            cols += [env * np.cos(lam.imag * tt), env * np.sin(lam.imag * tt)]
        else:
            cols += [env, tt * env]
    basis = np.stack(cols, axis=1)
    scale = np.linalg.norm(basis, axis=0)
    scale[scale == 0] = 1.0
    coef, *_ = np.linalg.lstsq(basis / scale, np.asarray(y, float).T, rcond=None)
    coef = coef / scale[:, None]
    return (basis @ coef).T, coef.T


def model_traces(records: xr.Dataset, result: xr.Dataset) -> xr.DataArray:
    """Model of every hit and channel in the result's fit window, from the result's poles.

    The poles are those of the table; the amplitudes (and a constant offset) are solved
    per signal by linear least squares (:func:`refit_model`). Where the records carry an
    acquisition exponential window (``exponential_window_tau_s``) and the table was
    corrected for it, the poles are shifted back by ``-1/tau`` (exact for t >= 0), so the
    model is drawn over the data as recorded.

    Parameters
    ----------
    records : xarray.Dataset
        The record set the table was fitted on.
    result : xarray.Dataset
        A :func:`modalnb.fit_modes` table (needs ``frequency_hz``, ``damping_ratio`` and the
        ``window`` attribute).

    Returns
    -------
    xarray.DataArray
        ``model(hit, channel, time)`` over the window's samples, in response units.

    Examples
    --------
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.testing.synth import free_decay
    >>> t = np.arange(1024) / 1024.0
    >>> ds = records_from_arrays(free_decay(t, 30.0, 0.02), 1024.0)
    >>> table = xr.Dataset({"frequency_hz": ("mode", [30.0]), "damping_ratio": ("mode", [0.02])},
    ...                    attrs={"window": [0.0, 1.0]})
    >>> m = model_traces(ds, table)
    >>> bool(np.allclose(m.isel(hit=0, channel=0), ds["response"].isel(hit=0, channel=0), atol=1e-9))
    True
    """
    w = np.ravel(result.attrs.get("window", []))
    if w.size != 2:
        raise EstimationError("the table has no `window` attribute (t0, t1): cannot rebuild the model.")
    t = np.asarray(records["time"].values, float)
    sel = (t >= float(w[0]) - 1e-12) & (t <= float(w[1]) + 1e-12)
    if sel.sum() < 2:
        raise EstimationError(f"the table's window {float(w[0]):g}..{float(w[1]):g} s holds no samples of these records.")
    poles = model_poles(result)
    tau = float(result.attrs.get("exponential_window_tau_s", -1.0))
    if tau > 0 and "exponential_window_tau_s" in records.attrs:
        poles = poles - 1.0 / tau
    y = np.asarray(records["response"].values, float)[:, :, sel]
    n_hit, n_ch, n = y.shape
    m, _ = refit_model(t[sel], y.reshape(-1, n), poles)
    return xr.DataArray(
        m.reshape(n_hit, n_ch, n), dims=("hit", "channel", "time"),
        coords={"hit": records["hit"].values, "channel": records["channel"].values, "time": t[sel]},
        name="model", attrs={"units": records["response"].attrs.get("units", "")},
    )
