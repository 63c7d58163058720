"""Conversions between modal damping measures (single-degree-of-freedom formulas)."""

from __future__ import annotations

import numpy as np

from .._errors import EstimationError

#: 20 log10(e): dB per neper.
DB_PER_NEPER = 20.0 / np.log(10.0)


def modal_conversions(
    frequency_hz: float,
    damping_ratio: float,
    mass: float | None = None,
    stiffness: float | None = None,
) -> dict[str, float]:
    """Damping measures of one mode from its natural frequency and damping ratio.

    Formulas (single degree of freedom): ``sigma = zeta wn`` (amplitude decay rate),
    damped frequency ``fn sqrt(1 - zeta^2)`` (NaN for zeta >= 1), ``Q = 1/(2 zeta)``, loss
    factor ``eta = 2 zeta`` (equivalent at resonance), exact log decrement
    ``delta = 2 pi zeta / sqrt(1 - zeta^2)`` (NaN for zeta >= 1), decay time constant
    ``1/sigma``, energy decay rate ``2 sigma`` (energy ~ amplitude squared), decay rate in
    dB/s ``20 log10(e) sigma``, ``T60 = ln(1000)/sigma``. With a modal `mass` m (kg) or
    `stiffness` k (N/m): ``k = m wn^2`` (or ``m = k / wn^2``), damping coefficient
    ``c = 2 zeta sqrt(k m)`` and critical damping ``c_c = 2 sqrt(k m)``.

    Examples
    --------
    >>> d = modal_conversions(10.0, 0.01, mass=2.0)
    >>> round(d["q_factor"], 6), round(d["stiffness"], 3)
    (50.0, 7895.684)
    """
    try:
        fn = float(frequency_hz)
        z = float(damping_ratio)
    except (TypeError, ValueError):
        raise EstimationError("`frequency_hz` and `damping_ratio` must be numbers.") from None
    if not (np.isfinite(fn) and fn > 0 and np.isfinite(z) and z > 0):
        raise EstimationError(
            f"need a positive frequency and damping ratio, got {frequency_hz!r}, {damping_ratio!r}."
        )
    wn = 2 * np.pi * fn
    sigma = z * wn
    under = z < 1
    out = {
        "frequency_hz": fn,
        "damping_ratio": z,
        "damped_frequency_hz": fn * np.sqrt(1 - z * z) if under else float("nan"),
        "q_factor": 1.0 / (2 * z),
        "loss_factor": 2 * z,
        "log_decrement": 2 * np.pi * z / np.sqrt(1 - z * z) if under else float("nan"),
        "decay_rate_per_s": sigma,
        "decay_time_constant_s": 1.0 / sigma,
        "energy_decay_rate_per_s": 2 * sigma,
        "decay_rate_db_per_s": DB_PER_NEPER * sigma,
        "t60_s": np.log(1000.0) / sigma,
    }
    if mass is not None or stiffness is not None:
        if mass is not None and stiffness is not None:
            raise EstimationError("give `mass` or `stiffness`, not both (the other follows from fn).")
        if mass is not None:
            m = float(mass)
            if not m > 0:
                raise EstimationError(f"`mass` must be positive, was {mass!r}.")
            k = m * wn * wn
        else:
            k = float(stiffness)
            if not k > 0:
                raise EstimationError(f"`stiffness` must be positive, was {stiffness!r}.")
            m = k / (wn * wn)
        cc = 2 * np.sqrt(k * m)
        out.update(mass=m, stiffness=k, critical_damping=cc, damping_coefficient=z * cc)
    return {key: float(v) for key, v in out.items()}
