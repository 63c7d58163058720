"""Cramér–Rao lower bounds for damped sinusoids in white Gaussian noise.

The benchmark compares estimators with these bounds: an unbiased estimator of a
natural frequency or damping ratio cannot have a smaller variance than the bound for
the exact record it sees.

Model (real data, channels ``c``, modes ``k``, times ``t_n`` in seconds)::

    x_c(t_n) = sum_k A_ck exp(-sigma_k t_n) cos(omega_dk t_n + phi_ck) + w_c(t_n)

with shared poles ``(sigma_k, omega_dk)`` (decay rate in 1/s, damped angular frequency in
rad/s), per-channel amplitude ``A_ck`` and phase ``phi_ck``, and independent Gaussian
noise of standard deviation ``sigma_c`` (optionally time-dependent, see
``window_tau_s``).

Two routes are offered:

* :func:`crlb_modes` -- the exact bound from the numerical Fisher information
  (Jacobian by central differences, ``FIM = sum_c J_c^T J_c / sigma_c^2``), the general
  recipe of Kay (1993, *Fundamentals of Statistical Signal Processing: Estimation
  Theory*, ch. 3), converted to ``(f_n, zeta)`` by the delta method
  (``G FIM^-1 G^T``). Valid for any number of modes and channels and any record length.
* :func:`crlb_closed_form` -- the approximate closed form for one real damped sinusoid
  with the sums ``S_k = sum_n n^k exp(-2 alpha n)`` (double-frequency terms dropped, so
  it needs ``omega`` away from 0 and pi and several cycles), and
  :func:`damping_std_long_record`, its long-record, light-damping limit
  ``std(zeta) ~ 4 zeta^(3/2) sqrt(omega_n dt) sigma / A``. Closed forms for the real
  damped case are also published by Yao & Pandit (1995, IEEE Trans. Signal Process.
  43(4):878-885).

In the undamped limit the bound on the frequency of a real sinusoid is
``24 sigma^2 / (A^2 N (N^2 - 1))`` (rad/sample)^2 with ``var w = sigma^2`` (Kay 1993); the
complex-signal form of Rife & Boorstyn (1974, IEEE Trans. Inf. Theory 20(5):591-598),
``12 sigma_c^2 / (b^2 N (N^2 - 1))`` with ``sigma_c^2`` the per-component noise variance,
is the same result in the complex convention.

Pure numpy; nothing here imports scipy, ipywidgets or plotly.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import EstimationError

__all__ = [
    "ModeBounds",
    "crlb_modes",
    "crlb_closed_form",
    "sk_sums",
    "damping_std_long_record",
    "combine_channel_bounds",
]


@dataclass(frozen=True)
class ModeBounds:
    """Cramér–Rao bounds (standard deviations) for the modes of one record set.

    Attributes
    ----------
    frequency_hz_std, damping_ratio_std : ndarray, shape (M,)
        Square roots of the bounds on the undamped natural frequency (Hz) and the
        damping ratio of each mode.
    decay_rate_std, damped_angular_frequency_std : ndarray, shape (M,)
        Square roots of the bounds on ``sigma_k`` (1/s) and ``omega_dk`` (rad/s).
    covariance : ndarray, shape (2M, 2M)
        Bound on the covariance of ``(f_1, zeta_1, f_2, zeta_2, ...)``.
    fisher : ndarray, shape (P, P)
        Fisher information over the parameters named in `parameter_names`.
    parameter_names : tuple of str
        ``sigma_k``, ``omega_k`` (poles) then ``A_c_k``, ``phi_c_k`` per channel.
    """

    frequency_hz_std: np.ndarray
    damping_ratio_std: np.ndarray
    decay_rate_std: np.ndarray
    damped_angular_frequency_std: np.ndarray
    covariance: np.ndarray
    fisher: np.ndarray
    parameter_names: tuple[str, ...]


def _as_1d(name: str, value: Any) -> np.ndarray:
    try:
        arr = np.atleast_1d(np.asarray(value, dtype=float))
    except (TypeError, ValueError):
        raise EstimationError(f"`{name}` must be numbers, was {value!r}.") from None
    if arr.ndim != 1:
        raise EstimationError(f"`{name}` must be a scalar or 1-D, has shape {arr.shape}.")
    if not np.all(np.isfinite(arr)):
        raise EstimationError(f"`{name}` has NaN or Inf values: {arr.tolist()}.")
    return arr


def _per_channel(name: str, value: Any, n_modes: int) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise EstimationError(f"`{name}` must be numbers, was {value!r}.") from None
    if arr.ndim == 0:
        arr = np.full((1, n_modes), float(arr))
    elif arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != n_modes:
        raise EstimationError(
            f"`{name}` must have shape (channel, mode) with {n_modes} mode(s), has shape "
            f"{np.shape(value)}. Hint: pass one row per channel."
        )
    if not np.all(np.isfinite(arr)):
        raise EstimationError(f"`{name}` has NaN or Inf values.")
    return arr


def _channel_model(
    poles: np.ndarray, amp: np.ndarray, phase: np.ndarray, t: np.ndarray
) -> np.ndarray:
    """One channel: poles (M, 2) = (sigma, omega_d), amp and phase (M,), t (N,)."""
    sig = poles[:, 0:1]
    om = poles[:, 1:2]
    return np.sum(amp[:, None] * np.exp(-sig * t) * np.cos(om * t + phase[:, None]), axis=0)


def _channel_jacobian(
    poles: np.ndarray, amp: np.ndarray, phase: np.ndarray, t: np.ndarray, rel_step: float
) -> np.ndarray:
    """Central-difference Jacobian (N, 4M) over (sigma_k, omega_k)_k then (A_k, phi_k)_k."""
    m = poles.shape[0]
    theta = np.concatenate([poles.ravel(), np.column_stack([amp, phase]).ravel()])
    # typical scales so that a zero parameter (undamped mode, zero phase) still gets a step
    om_scale = np.repeat(np.abs(poles[:, 1]), 2)
    a_scale = max(float(np.max(np.abs(amp))), 1e-300)
    scale = np.concatenate([om_scale, np.tile([a_scale, 1.0], m)])
    steps = rel_step * np.maximum(np.abs(theta), scale)

    def unpack(th: np.ndarray) -> np.ndarray:
        p = th[: 2 * m].reshape(m, 2)
        ap = th[2 * m :].reshape(m, 2)
        return _channel_model(p, ap[:, 0], ap[:, 1], t)

    jac = np.empty((t.size, theta.size))
    for i, h in enumerate(steps):
        up = theta.copy()
        dn = theta.copy()
        up[i] += h
        dn[i] -= h
        jac[:, i] = (unpack(up) - unpack(dn)) / (2 * h)
    return jac


def crlb_modes(
    time: Any,
    frequency_hz: Any,
    damping_ratio: Any,
    amplitude: Any = 1.0,
    phase_rad: Any = 0.0,
    noise_std: Any = 1.0,
    *,
    window_tau_s: float | None = None,
    window_start_s: float | None = None,
    noise_windowed: bool = True,
    rel_step: float = 1e-6,
) -> ModeBounds:
    """Exact Cramér–Rao bound on (f_n, zeta) of damped modes with shared poles.

    Builds the noiseless model of the module docstring, its Jacobian by central
    differences and the Fisher information ``FIM = sum_c J_c^T W_c J_c`` with
    ``W_c = diag(1 / var_c(t_n))`` (Kay 1993, eq. 3.31 for Gaussian noise [from memory]).
    The bound on ``(sigma_k, omega_dk)`` is the matching block of ``FIM^-1`` (the
    amplitudes and phases are nuisance parameters); it is carried to
    ``f_n = |s|/2pi`` and ``zeta = sigma/|s|`` by the delta method. Several hits of one
    record set are just more channels here (each with its own amplitude and phase).

    Parameters
    ----------
    time : array_like, shape (N,)
        Sample times in seconds, counted from the start of the free decay.
    frequency_hz, damping_ratio : float or array_like, shape (M,)
        Undamped natural frequency (Hz) and damping ratio (0 <= zeta < 1) of each mode.
    amplitude, phase_rad : float or array_like, shape (M,) or (C, M)
        ``A_ck`` and ``phi_ck`` (one row per channel or hit).
    noise_std : float or array_like, shape (C,) or (C, N)
        Noise standard deviation per channel, or per channel and sample.
    window_tau_s : float, optional
        Time constant of an exponential window ``w(t) = exp(-(t - t_w)/tau)``
        (``w = 1`` before ``t_w``) applied to the record. The model becomes ``w x``; with
        ``noise_windowed=True`` (the measured noise is windowed too) its variance is
        ``sigma_c^2 w^2``, a weighted FIM. That FIM equals the unwindowed one: a known,
        invertible weighting neither adds nor removes information (samples where ``w``
        underflows to 0 are lost). With ``noise_windowed=False`` (noise added after the
        window) the variance stays ``sigma_c^2`` and the bound grows.
    window_start_s : float, optional
        ``t_w``; default ``time[0]``.
    noise_windowed : bool
        See `window_tau_s`.
    rel_step : float
        Relative step of the central differences. 1e-6 is near ``eps^(1/3)``, which
        balances truncation and rounding error of a central difference (Press et al.
        2007, *Numerical Recipes*, 3rd ed., sect. 5.7; from memory).

    Returns
    -------
    ModeBounds

    Raises
    ------
    EstimationError
        On bad shapes or values, or when a mode has zero amplitude in every channel
        (its bound is infinite).

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(1024) / 1024.0
    >>> b = crlb_modes(t, 61.3, 0.012, amplitude=1.0, noise_std=0.01)
    >>> bool(0 < b.damping_ratio_std[0] < 1e-3)
    True
    """
    t = _as_1d("time", time)
    f, z = _check_modes(frequency_hz, damping_ratio)
    amp, ph = _check_channels(amplitude, phase_rad, f.size)
    sd = _noise_matrix(noise_std, amp.shape[0], t.size)
    if not rel_step > 0:
        raise EstimationError(f"`rel_step` must be positive, was {rel_step!r}.")
    weight = _window_weight(t, window_tau_s, window_start_s)

    wn = 2 * np.pi * f
    sigma = z * wn
    wd = wn * np.sqrt(1 - z * z)
    poles = np.column_stack([sigma, wd])
    fim = _fisher(poles, amp, ph, t, sd, weight, window_tau_s is not None and noise_windowed, rel_step)
    pole_cov = _pole_covariance(fim, amp, f)
    cov = _delta_method(pole_cov, sigma, wd, wn)
    var_p = np.diag(pole_cov)
    var = np.diag(cov)
    return ModeBounds(
        frequency_hz_std=np.sqrt(var[0::2]),
        damping_ratio_std=np.sqrt(var[1::2]),
        decay_rate_std=np.sqrt(var_p[0::2]),
        damped_angular_frequency_std=np.sqrt(var_p[1::2]),
        covariance=cov,
        fisher=fim,
        parameter_names=_parameter_names(f.size, amp.shape[0]),
    )


# --- the steps of crlb_modes ------------------------------------------------------------
def _check_modes(frequency_hz: Any, damping_ratio: Any) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies and damping ratios as equal-length 1-D arrays, underdamped modes only."""
    f = _as_1d("frequency_hz", frequency_hz)
    z = _as_1d("damping_ratio", damping_ratio)
    if z.size == 1 and f.size > 1:
        z = np.full(f.size, z[0])
    if f.size != z.size:
        raise EstimationError(
            f"`frequency_hz` has {f.size} value(s) but `damping_ratio` has {z.size}."
        )
    if np.any(f <= 0):
        raise EstimationError(f"`frequency_hz` must be positive, was {f.tolist()}.")
    if np.any((z < 0) | (z >= 1)):
        raise EstimationError(
            f"`damping_ratio` must be in [0, 1) (oscillating modes), was {z.tolist()}. "
            "Hint: this bound covers underdamped modes only."
        )
    return f, z


def _check_channels(amplitude: Any, phase_rad: Any, n_modes: int) -> tuple[np.ndarray, np.ndarray]:
    """Amplitudes and phases as (channel, mode) arrays of one shape."""
    amp = _per_channel("amplitude", amplitude, n_modes)
    ph = _per_channel("phase_rad", phase_rad, n_modes)
    if ph.shape[0] == 1 and amp.shape[0] > 1:
        ph = np.repeat(ph, amp.shape[0], axis=0)
    if amp.shape[0] == 1 and ph.shape[0] > 1:
        amp = np.repeat(amp, ph.shape[0], axis=0)
    if amp.shape != ph.shape:
        raise EstimationError(f"`amplitude` has shape {amp.shape} but `phase_rad` has {ph.shape}.")
    return amp, ph


def _noise_matrix(noise_std: Any, n_ch: int, n_samples: int) -> np.ndarray:
    """Noise standard deviation as a (channel, time) array."""
    try:
        sd = np.broadcast_to(
            np.asarray(noise_std, dtype=float).reshape(
                (n_ch, 1) if np.ndim(noise_std) == 1 else np.shape(noise_std)
            ),
            (n_ch, n_samples),
        )
    except (TypeError, ValueError):
        raise EstimationError(
            f"`noise_std` must be a scalar, one value per channel ({n_ch}) or shape "
            f"({n_ch}, {n_samples}); has shape {np.shape(noise_std)}."
        ) from None
    if not np.all(np.isfinite(sd)) or np.any(sd <= 0):
        raise EstimationError("`noise_std` must be positive and finite everywhere.")
    return sd


def _window_weight(
    t: np.ndarray, window_tau_s: float | None, window_start_s: float | None
) -> np.ndarray:
    """Exponential window ``exp(-(t - t_w)/tau)`` (1 before ``t_w``), or ones."""
    if window_tau_s is None:
        return np.ones_like(t)
    if not (np.isfinite(window_tau_s) and window_tau_s > 0):
        raise EstimationError(f"`window_tau_s` must be positive, was {window_tau_s!r}.")
    t_w = float(t[0]) if window_start_s is None else float(window_start_s)
    return np.exp(-np.clip(t - t_w, 0.0, None) / window_tau_s)


def _fisher(
    poles: np.ndarray,
    amp: np.ndarray,
    ph: np.ndarray,
    t: np.ndarray,
    sd: np.ndarray,
    weight: np.ndarray,
    noise_windowed: bool,
    rel_step: float,
) -> np.ndarray:
    """``FIM = sum_c J_c^T W_c J_c`` over the shared poles and each channel's (A, phi).

    The model of channel ``c`` is ``weight * x_c``; its noise standard deviation is
    ``sd_c * weight`` when the noise is windowed too, else ``sd_c``. Samples where the
    weight underflows to 0 carry no information and are left out.
    """
    m, n_ch = poles.shape[0], amp.shape[0]
    n_par = 2 * m + 2 * m * n_ch
    fim = np.zeros((n_par, n_par))
    keep = weight > 0
    for c in range(n_ch):
        jac = _channel_jacobian(poles, amp[c], ph[c], t, rel_step) * weight[:, None]
        std = sd[c] * weight if noise_windowed else sd[c]
        white = jac[keep] / std[keep, None]
        idx = np.concatenate([np.arange(2 * m), 2 * m + 2 * m * c + np.arange(2 * m)])
        fim[np.ix_(idx, idx)] += white.T @ white
    return fim


def _parameter_names(n_modes: int, n_ch: int) -> tuple[str, ...]:
    """Names of the FIM's parameters: the poles, then (A, phi) per channel and mode."""
    names = [f"{p}_{k + 1}" for k in range(n_modes) for p in ("sigma", "omega")]
    names += [
        f"{p}_{c + 1}_{k + 1}" for c in range(n_ch) for k in range(n_modes) for p in ("A", "phi")
    ]
    return tuple(names)


def _pole_covariance(fim: np.ndarray, amp: np.ndarray, f: np.ndarray) -> np.ndarray:
    """The (sigma, omega_d) block of ``FIM^-1``, amplitudes and phases as nuisance parameters.

    A phase is not identifiable where its amplitude is zero: that parameter is dropped. The
    inverse is taken of the FIM scaled to unit diagonal (a Jacobi preconditioner; the
    parameters differ in scale by many decades).
    """
    n_ch, m = amp.shape
    dead = np.all(amp == 0, axis=0)
    if dead.any():
        k = int(np.argmax(dead))
        raise EstimationError(
            f"mode {k + 1} ({f[k]:g} Hz) has zero amplitude in every channel, so its bound "
            "is infinite. Hint: drop that mode or give it a non-zero amplitude."
        )
    free = np.ones(fim.shape[0], dtype=bool)
    for c, k in zip(*np.nonzero(amp == 0), strict=True):
        free[2 * m + 2 * m * c + 2 * k + 1] = False
    sub = fim[np.ix_(free, free)]
    d = np.sqrt(np.diag(sub))
    if np.any(d == 0):
        raise EstimationError("the Fisher information is singular (a parameter has no effect).")
    try:
        cov_sub = np.linalg.inv(sub / np.outer(d, d)) / np.outer(d, d)
    except np.linalg.LinAlgError:
        raise EstimationError(
            "the Fisher information is singular; the modes are not identifiable from this "
            "record (e.g. two modes with the same pole)."
        ) from None
    return cov_sub[: 2 * m, : 2 * m]


def _delta_method(
    pole_cov: np.ndarray, sigma: np.ndarray, wd: np.ndarray, wn: np.ndarray
) -> np.ndarray:
    """Carry the pole covariance to ``(f_n, zeta)``: ``G C G^T`` with G the Jacobian of
    ``f_n = |s| / 2 pi``, ``zeta = sigma / |s|`` at ``|s| = sqrt(sigma^2 + omega_d^2)``."""
    m = sigma.size
    g = np.zeros((2 * m, 2 * m))
    for k in range(m):
        s, w, n = sigma[k], wd[k], wn[k]
        g[2 * k, 2 * k : 2 * k + 2] = [s / (2 * np.pi * n), w / (2 * np.pi * n)]
        g[2 * k + 1, 2 * k : 2 * k + 2] = [w * w / n**3, -s * w / n**3]
    return g @ pole_cov @ g.T


def sk_sums(n_samples: int, alpha: float, kmax: int = 2) -> np.ndarray:
    """The sums ``S_k = sum_{n=0}^{N-1} n^k exp(-2 alpha n)`` for ``k = 0..kmax``.

    Examples
    --------
    >>> sk_sums(4, 0.0).tolist()
    [4.0, 6.0, 14.0]
    """
    n = np.arange(int(n_samples), dtype=float)
    e = np.exp(-2.0 * float(alpha) * n)
    return np.array([np.sum(n**k * e) for k in range(kmax + 1)])


def crlb_closed_form(
    n_samples: int,
    sample_rate: float,
    frequency_hz: float,
    damping_ratio: float,
    amplitude: float,
    noise_std: float,
) -> tuple[float, float]:
    """Approximate bound on (f_n, zeta) for one real damped sinusoid, from the S_k sums.

    With ``alpha = sigma dt`` and ``omega = omega_d dt`` (per sample), dropping the
    double-frequency terms of the real-signal Fisher information gives
    ``var(alpha) ~ var(omega) ~ (2 sigma_w^2 / A^2) S_0 / (S_0 S_2 - S_1^2)`` with the two
    uncorrelated (the real-signal analogue of the complex result of Yao & Pandit 1995;
    for ``alpha = 0`` it is Kay's 1993 ``24 sigma^2 / (A^2 N (N^2 - 1))``). In physical
    units ``var(omega_n) = V`` and ``var(zeta) = V omega_d^2 / omega_n^4`` with
    ``V = var(omega) fs^2``.

    Parameters
    ----------
    n_samples : int
        Record length N (samples from the start of the decay).
    sample_rate : float
        Hz.
    frequency_hz, damping_ratio : float
        The mode.
    amplitude, noise_std : float
        ``A`` and the white-noise standard deviation.

    Returns
    -------
    (float, float)
        Standard deviations of f_n (Hz) and zeta.

    Examples
    --------
    >>> sf, sz = crlb_closed_form(1024, 1024.0, 61.3, 0.012, 1.0, 0.01)
    >>> bool(sf > 0 and sz > 0)
    True
    """
    fs = float(sample_rate)
    wn = 2 * np.pi * float(frequency_hz)
    z = float(damping_ratio)
    if not (0 <= z < 1):
        raise EstimationError(f"`damping_ratio` must be in [0, 1), was {damping_ratio!r}.")
    wd = wn * np.sqrt(1 - z * z)
    s0, s1, s2 = sk_sums(n_samples, z * wn / fs)
    var_per_sample = 2 * noise_std**2 / amplitude**2 * s0 / (s0 * s2 - s1 * s1)
    v = var_per_sample * fs * fs
    return float(np.sqrt(v) / (2 * np.pi)), float(np.sqrt(v) * wd / wn**2)


def damping_std_long_record(
    sample_rate: float,
    frequency_hz: float,
    damping_ratio: float,
    amplitude: float,
    noise_std: float,
) -> float:
    """Long-record, light-damping bound ``std(zeta) ~ 4 zeta^(3/2) sqrt(omega_n dt) sigma/A``.

    The limit ``N -> inf`` of :func:`crlb_closed_form` (``S_0/D -> (1-r)^3/r`` with
    ``r = exp(-2 alpha)``, so ``var(alpha) -> 16 alpha^3 sigma^2/A^2``) for ``zeta << 1``.
    It needs a record of many time constants (about 6 or more); use
    :func:`crlb_modes` otherwise.

    Examples
    --------
    >>> round(damping_std_long_record(1000.0, 10.0, 0.01, 1.0, 0.01), 8)
    1.003e-05
    """
    z = float(damping_ratio)
    wn_dt = 2 * np.pi * float(frequency_hz) / float(sample_rate)
    return float(4 * z**1.5 * np.sqrt(wn_dt) * float(noise_std) / float(amplitude))


def combine_channel_bounds(stds: Any) -> float:
    """Bound of a pole shared by several channels: ``1/CRLB = sum_c 1/CRLB_c``.

    Fisher information of independent records adds; for one shared pole whose
    per-channel bounds scale as ``sigma_c^2/A_c^2`` the combined bound is the
    "parallel sum" of the per-channel bounds.

    Examples
    --------
    >>> round(combine_channel_bounds([1.0, 1.0]), 6)
    0.707107
    """
    s = np.asarray(stds, dtype=float)
    return float(1.0 / np.sqrt(np.sum(1.0 / s**2)))
