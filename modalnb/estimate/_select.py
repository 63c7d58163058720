"""Which fitted poles are modes: the rules that keep a pole out of the modal table.

The refinement fits every pole the data need (:mod:`._core`); not every one of them is a
mode an engineer can sign off. A pole that is not a mode stays in the model as a
*residual term* (so the other modes' numbers do not change) and is listed, with its
reason, in the table of poles set aside (``aside_*`` variables of the result). The rules,
checked in this order:

1. **outside the band** the user analyses (the pole is fitted, the band says it is not
   wanted);
2. **dropped by the user** (``drop_modes``: the fitted pole nearest each frequency);
3. **frequency not determined**: its frequency standard uncertainty exceeds
   ``min(1 % of f_n, 1/T)`` (T the window length). ``1/T`` is the frequency resolution of
   the window (Rayleigh: two lines closer than 1/T cannot be told apart by a Fourier
   transform of it, e.g. Harris 1978, "On the use of windows for harmonic analysis with the
   discrete Fourier transform", Proc. IEEE 66(1); from memory); 1 % is the tolerance within
   which engineers pair modes between two tests or with a model (common practice). A pole
   whose frequency the data locate worse than both is not a mode of the structure but a
   term that absorbs what the model lacks (the force pulse, an offset, an out-of-band mode,
   leakage). A pole with a well-determined frequency but a rough damping stays a mode (its
   status says "damping poorly determined");
4. **too weak**: energy below ``ENERGY_FACTOR`` (10) times the noise significance limit of
   :func:`._significance.significance_threshold` (10 dB above the limit that already
   decides whether the pole is fitted at all: common practice);
5. **a strong neighbour's leakage**: within ``LEAKAGE_BANDWIDTHS`` (2) half-power
   bandwidths ``2 zeta f_n`` (floored at 1/T) of a mode ``LEAKAGE_RATIO`` (1e4, 40 dB)
   times stronger in energy: the small pole then models the mismatch of the strong mode's
   decay (non-exponential decay, nonlinearity, drift), not a second mode (common
   practice);
6. **beyond n_modes**: the caller asked for the `n_modes` strongest.

Modes the user added (``add_modes``) are exempt from rules 3-5 (the user asked for them;
their status says when they are weak).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from .._errors import EstimationError
from ._significance import significance_threshold

#: A fitted mode within this fraction of a frequency the user added is that added mode:
#: a user reads a peak off a spectrum plot to a few per cent; 3 % is tighter than the 5 %
#: of ``drop_modes`` because an added seed moves little while it converges, while a mode to
#: drop is named from a table or chart after the fact (common practice).
ASKED_TOL = 0.03

#: A mode's energy must exceed this many times the noise significance limit (10 dB).
ENERGY_FACTOR = 10.0
#: A pole within this many half-power bandwidths of a much stronger mode is its leakage.
LEAKAGE_BANDWIDTHS = 2.0
#: ... where "much stronger" is this energy ratio (40 dB).
LEAKAGE_RATIO = 1e4
#: The relative frequency uncertainty limit (1 %), beside the window resolution 1/T.
FREQUENCY_STD_FRACTION = 0.01

#: A mode to drop is the fitted mode nearest the frequency given, within 5 % of it or
#: 1 Hz, whichever is larger: a user names it from a table or chart, and 1 Hz is the
#: frequency resolution 1/T of a one-second record, below which low modes cannot be told
#: apart by eye (common practice).
DROP_TOL = 0.05
DROP_FLOOR_HZ = 1.0


def frequency_std_limit(fn: float, t_len: float) -> float:
    """Largest frequency standard uncertainty (Hz) of a mode: ``min(1 % f_n, 1/T)``.

    Examples
    --------
    >>> frequency_std_limit(50.0, 1.0), frequency_std_limit(500.0, 1.0)
    (0.5, 1.0)
    """
    return float(min(FREQUENCY_STD_FRACTION * abs(fn), 1.0 / t_len))


def _fmt_list(core: Any, idx: Sequence[int]) -> str:
    return ", ".join(f"{core.fn[k]:.4g}" for k in sorted(idx, key=lambda k: core.fn[k]))


def _select_modes(
    core: Any, band: tuple[float, float], dropped: Sequence[float], n_modes: int | None,
    t_len: float, fs: float, asked: np.ndarray,
) -> tuple[list[int], list[tuple[int, str]]]:
    """Split the fitted poles of `core` into modes and residual terms.

    Parameters
    ----------
    core : CoreResult
        The refined poles (``fn``, ``zeta``, ``fn_std``, ``significance``, ``prob``).
    band : (float, float)
        The analysed band (Hz).
    dropped : sequence of float
        Frequencies of ``drop_modes``.
    n_modes : int or None
        Keep at most this many modes (the strongest).
    t_len : float
        Window length T (s).
    fs : float
        Sample rate (Hz); with `t_len` it sets the resolution floor.
    asked : ndarray
        Frequencies of ``add_modes`` (exempt from the determination rules).

    Returns
    -------
    sel : list of int
        Indices of the modes, ascending in natural frequency.
    aside : list of (int, str)
        Index and reason of every pole set aside, ascending in natural frequency.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> import numpy as np
    >>> core = SimpleNamespace(fn=np.array([50.0, 51.0, 900.0]), zeta=np.array([0.01] * 3),
    ...                        fn_std=np.array([0.01, 3.0, 0.1]),
    ...                        significance=np.array([1e6, 1e5, 1e6]),
    ...                        prob=SimpleNamespace(data_t=np.zeros((10, 1))))
    >>> sel, aside = _select_modes(core, (5.0, 500.0), [], None, 1.0, 2048.0, np.array([]))
    >>> sel, [k for k, _ in aside]
    ([0], [1, 2])
    """
    n = int(np.size(core.fn))
    fn = np.asarray(core.fn, float)
    res_hz = 1.0 / max(float(t_len), 1.0 / fs)
    aside: dict[int, str] = {}
    sel = [k for k in range(n) if band[0] <= fn[k] <= band[1]]
    for k in range(n):
        if k not in sel:
            aside[k] = f"outside the band {band[0]:g}..{band[1]:g} Hz"
    if not sel:
        raise EstimationError(
            f"no mode found in the band {band[0]:g}..{band[1]:g} Hz (modes fitted at "
            f"{_fmt_list(core, range(n))} Hz). Hint: widen the band."
        )
    for f in dropped:
        # the user leaves the fitted mode nearest f out of the table (it stays in the model)
        near = min(sel, key=lambda k: abs(fn[k] - f)) if sel else None
        if near is None or abs(fn[near] - f) > max(DROP_TOL * f, DROP_FLOOR_HZ):
            raise EstimationError(
                f"drop_modes: no fitted mode near {f:g} Hz (within 5 %; modes at "
                f"{_fmt_list(core, sel)} Hz). Hint: remove {f:g} from the dropped modes."
            )
        sel.remove(near)
        aside[near] = f"dropped by the user (drop_modes {f:g} Hz)"
    if not sel:
        raise EstimationError("every mode in the band was dropped (drop_modes). Hint: "
                              "keep at least one.")
    asked = np.asarray(asked, float)

    def is_asked(k: int) -> bool:
        return bool(asked.size and np.any(np.abs(fn[k] - asked) < ASKED_TOL * asked))

    energy = np.asarray(core.significance, float)
    e_min = ENERGY_FACTOR * significance_threshold(core.prob.data_t.shape[1])
    candidates = list(sel)
    for k in candidates:
        if is_asked(k):
            continue
        lim = frequency_std_limit(fn[k], t_len)
        fstd = float(core.fn_std[k])
        if not np.isfinite(fstd) or fstd > lim:
            aside[k] = (f"frequency not determined: std {fstd:.2g} Hz > {lim:.2g} Hz "
                        "(min of 1 % of f_n and 1/T)")
        elif energy[k] < e_min:
            aside[k] = (f"too weak: energy {energy[k]:.3g} < {ENERGY_FACTOR:g} x the noise "
                        f"significance limit ({e_min:.3g})")
    for k in candidates:
        if k in aside or is_asked(k):
            continue
        for j in candidates:
            if j == k or j in aside or energy[j] < LEAKAGE_RATIO * energy[k]:
                continue
            bw = max(2.0 * abs(float(core.zeta[j])) * fn[j], res_hz)
            if abs(fn[k] - fn[j]) <= LEAKAGE_BANDWIDTHS * bw:
                aside[k] = (f"leakage of the mode at {fn[j]:.5g} Hz: within "
                            f"{LEAKAGE_BANDWIDTHS:g} half-power bandwidths and "
                            f"{10 * np.log10(energy[j] / max(energy[k], 1e-300)):.0f} dB weaker")
                break
    sel = [k for k in candidates if k not in aside]
    if not sel:
        raise EstimationError(
            f"no fitted pole in the band {band[0]:g}..{band[1]:g} Hz is a determined mode "
            f"(poles at {_fmt_list(core, candidates)} Hz: "
            + "; ".join(f"{fn[k]:.4g} Hz {aside[k]}" for k in candidates)
            + "). Hint: check the window (it should hold the ring-down) and the band."
        )
    if n_modes is not None and len(sel) > int(n_modes):
        strongest = sorted(sel, key=lambda k: -energy[k])
        for k in strongest[int(n_modes):]:
            aside[k] = f"beyond n_modes = {int(n_modes)} (the strongest kept)"
        sel = strongest[: int(n_modes)]
    sel = sorted(sel, key=lambda k: fn[k])
    return sel, sorted(aside.items(), key=lambda kv: fn[kv[0]])


# ------------------------------------------------------------------ does the model fit?
#: The residual RMS may exceed the pre-trigger noise by this factor before the model is
#: said not to fit (common practice: 1.5 x is 3.5 dB, well above the few per cent by which
#: noise estimated from a short pre-trigger scatters, and well below a missing mode).
MISFIT_NOISE_RATIO = 1.5
#: Order of the linear predictor that tests the residual for structure (common practice:
#: 20 lags cover ten oscillation cycles of any leftover mode resolved in the window).
AR_ORDER = 20
#: Share of the residual variance an order-20 linear predictor may explain before the
#: residual counts as structured (white noise gives about AR_ORDER / N; common practice).
MISFIT_PREDICTABLE = 0.5
#: Energy within this factor (20 dB) of the limit ENERGY_FACTOR x significance: "weak".
WEAK_FACTOR = 100.0


def predictable_fraction(resid: np.ndarray, order: int = AR_ORDER) -> float:
    """Share of the variance of `resid` (N, P) that a linear predictor of `order` explains.

    One predictor for all P columns from their summed autocorrelation (Yule-Walker
    equations, solved by Levinson-Durbin recursion through
    :func:`scipy.linalg.solve_toeplitz`; Box & Jenkins 1970, *Time Series Analysis:
    Forecasting and Control*, ch. 3; from memory): ``1 - sigma_e^2 / r(0)`` with
    ``sigma_e^2 = r(0) - a . r(1..p)`` the one-step prediction error variance. White noise
    gives about ``order / N``; a residual holding an unmodelled decay gives nearly 1.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> round(predictable_fraction(rng.standard_normal((4096, 2))), 2)
    0.0
    >>> t = np.arange(4096) / 4096
    >>> predictable_fraction(np.sin(2 * np.pi * 100 * t)[:, None]) > 0.99
    True
    """
    from scipy.linalg import solve_toeplitz

    r = np.asarray(resid, float)
    if r.ndim == 1:
        r = r[:, None]
    n = r.shape[0]
    p = int(min(order, max(n // 4, 1)))
    r = r - r.mean(axis=0, keepdims=True)
    nfft = int(2 ** np.ceil(np.log2(2 * n)))
    spec = np.fft.rfft(r, nfft, axis=0)
    acf = np.fft.irfft(np.sum(np.abs(spec) ** 2, axis=1), nfft)[: p + 1] / n
    if not acf[0] > 0:
        return 0.0
    try:
        a = solve_toeplitz(acf[:p], acf[1 : p + 1])
    except np.linalg.LinAlgError:
        return 1.0  # a singular autocorrelation: the residual is fully predictable
    err = acf[0] - float(np.dot(a, acf[1 : p + 1]))
    return float(np.clip(1.0 - err / acf[0], 0.0, 1.0))


def fit_quality(resid_weighted: np.ndarray, noise_known: bool,
                compressed_resid: np.ndarray) -> dict[str, Any]:
    """Whether the model fits: residual over noise, and the residual's predictable share.

    Parameters
    ----------
    resid_weighted : ndarray
        Residual per channel (C,) RMS of the noise-weighted data (1 = noise level).
    noise_known : bool
        The weights come from pre-trigger noise (else the RMS test is not possible).
    compressed_resid : ndarray
        Residual (N, r) of the fitted leading signal components.

    Returns
    -------
    dict
        ``residual_noise_ratio`` (pooled over channels; None without pre-trigger noise),
        ``residual_predictable_fraction``, the limits and ``model_fits``, and ``note``
        (empty when the model fits).

    Examples
    --------
    >>> import numpy as np
    >>> q = fit_quality(np.array([1.0, 1.1]), True,
    ...                 np.random.default_rng(1).standard_normal((2048, 3)))
    >>> q["model_fits"], q["note"]
    (True, '')
    """
    pooled = float(np.sqrt(np.mean(np.square(resid_weighted)))) if noise_known else None
    pred = predictable_fraction(compressed_resid)
    why = []
    if pooled is not None and pooled > MISFIT_NOISE_RATIO:
        why.append(f"residual RMS {pooled:.2g} x the pre-trigger noise (limit "
                   f"{MISFIT_NOISE_RATIO:g})")
    if pred > MISFIT_PREDICTABLE:
        why.append(f"{100 * pred:.0f} % of the residual is predictable by an order-{AR_ORDER} "
                   f"linear predictor (limit {100 * MISFIT_PREDICTABLE:.0f} %)")
    return {
        "residual_noise_ratio": pooled,
        "residual_noise_ratio_limit": MISFIT_NOISE_RATIO,
        "residual_predictable_fraction": pred,
        "residual_predictable_limit": MISFIT_PREDICTABLE,
        "predictor_order": AR_ORDER,
        "model_fits": not why,
        "note": ("model does not fit: " + "; ".join(why) +
                 " (a second tap, a window before the decay, or a nonlinear structure?)")
        if why else "",
    }
