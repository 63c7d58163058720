"""The demo campaign writer: hits, noise, the double hit, clipping, the ADC and the truth.

:func:`make_demo_campaign` runs these named steps on the physical model of
:mod:`modalnb.demo._model`:

1. :func:`_draw_hits` -- peak forces, duration jitter, start times, the bounce's delay and
   ratio, drawn from ``numpy.random.default_rng(seed)`` in a fixed order;
2. :func:`_noise_floor` -- the accelerometer and force noise levels from a nominal hit;
3. :func:`_hit_pulses` -- the half-sine pulses of every hit, the bounce of the double hit
   and the overdrive of the clipped hit;
4. :func:`_record` -- noise-free sensor accelerations, Gaussian noise, the ADC;
5. :func:`_records` -- the record set (xarray) with its coordinates;
6. :func:`demo_truth` -- the true modal parameters and hit decisions, from a
   :class:`DemoRun` (one object, not a long argument list).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from ..records import records_from_arrays, validate_records
from ._model import (
    HANDBOOK_CANTILEVER_BETA_L,
    BoomModel,
    HalfSinePulse,
    boom_model,
    half_sine_force,
    handbook_cantilever_frequencies,
)
from ._settings import DEMO_SEED, DEMO_SETTINGS, SCENARIO_NAME, DemoSettings


@dataclass(frozen=True)
class HitDraws:
    """The random hit parameters, in the order they are drawn."""

    peaks_n: np.ndarray
    jitter: np.ndarray
    starts_s: np.ndarray
    double_hit_delay_s: float
    double_hit_ratio: float


@dataclass(frozen=True)
class NoiseFloor:
    """Standard deviations of the Gaussian noise (m/s^2 and N)."""

    response_std: float
    force_std: float


@dataclass(frozen=True)
class Recorded:
    """What the ADC delivered, and the noise-free peaks (for the truth)."""

    response: np.ndarray  # (hit, channel, time), m/s^2, quantised
    force: np.ndarray  # (hit, time), N, quantised
    peak_noise_free: np.ndarray  # (hit, channel)


@dataclass(frozen=True)
class DemoRun:
    """Everything one run of the generator produced; the input of :func:`demo_truth`."""

    settings: DemoSettings
    seed: int
    time: np.ndarray
    model: BoomModel
    draws: HitDraws
    pulses: list[list[HalfSinePulse]]
    noise: NoiseFloor
    recorded: Recorded


def time_axis(settings: DemoSettings = DEMO_SETTINGS) -> np.ndarray:
    """Sample times (s), ``n_pretrigger`` samples before the trigger at t = 0.

    Examples
    --------
    >>> float(time_axis()[0])
    -0.050048828125
    """
    return (np.arange(settings.n_samples) - settings.n_pretrigger) / float(settings.sample_rate_hz)


def _draw_hits(s: DemoSettings, rng: np.random.Generator) -> HitDraws:
    """Step 1: the random hit parameters (this order is part of the shipped data)."""
    peaks = rng.uniform(*s.peak_force_range_n, s.n_hits)
    jitter = 1.0 + s.duration_jitter_rel * rng.standard_normal(s.n_hits)
    starts = rng.uniform(*s.start_range_s, s.n_hits)
    delay = float(rng.uniform(*s.double_hit_delay_range_s))
    ratio = float(rng.uniform(*s.double_hit_ratio_range))
    return HitDraws(peaks, jitter, starts, delay, ratio)


def _duration(s: DemoSettings, peak: float, jitter: float) -> float:
    """Contact duration scaled as ``peak^(-1/6)``: the Hertz-contact trend (Johnson 1985,
    *Contact Mechanics*, ch. 11; from memory)."""
    return float(s.nominal_duration_s * (peak / s.nominal_peak_force_n) ** (-1 / 6) * jitter)


def _noise_floor(s: DemoSettings, model: BoomModel, t: np.ndarray) -> NoiseFloor:
    """Step 2: accelerometer noise ``response_snr_db`` below the all-channel RMS (t >= 0)
    of a nominal hit, the same on every channel; force noise ``force_snr_db`` below the
    nominal peak force (so a 5 % double-hit threshold stays well above it)."""
    nominal = [HalfSinePulse(0.0, s.nominal_duration_s, s.nominal_peak_force_n)]
    nom = model.acceleration(t, nominal)
    rms = float(np.sqrt(np.mean(nom[:, t >= 0] ** 2)))
    return NoiseFloor(
        response_std=rms * 10 ** (-s.response_snr_db / 20),
        force_std=float(s.nominal_peak_force_n * 10 ** (-s.force_snr_db / 20)),
    )


def _hit_pulses(
    s: DemoSettings, model: BoomModel, draws: HitDraws, t: np.ndarray
) -> list[list[HalfSinePulse]]:
    """Step 3: one half-sine per hit; the double hit gets a bounce, the clipped hit is
    struck ``clip_overdrive`` times harder than needed to reach the accelerometer full
    scale."""
    hits = []
    for i in range(s.n_hits):
        label, start, jit = i + 1, float(draws.starts_s[i]), float(draws.jitter[i])
        peak = float(draws.peaks_n[i])
        if label == s.clipped_hit:
            unit = model.acceleration(t, [HalfSinePulse(start, _duration(s, peak, jit), 1.0)])
            peak = float(s.clip_overdrive * s.full_scale_m_s2 / np.abs(unit).max())
        pulses = [HalfSinePulse(start, _duration(s, peak, jit), peak)]
        if label == s.double_hit:
            second = draws.double_hit_ratio * peak
            pulses.append(
                HalfSinePulse(start + draws.double_hit_delay_s, _duration(s, second, jit), second)
            )
        hits.append(pulses)
    return hits


def _quantise(x: np.ndarray, full_scale: float, bits: int) -> np.ndarray:
    """ADC: clip to +-full scale, round to the LSB (values stay float64).

    Rounding is half-to-even (:func:`numpy.round`). It is reproducible because its input
    is: the modes come from a bit-reproducible solver (:func:`modalnb.demo._model.cantilever_modes`).
    """
    lsb = full_scale / 2 ** (bits - 1)
    return np.round(np.clip(x, -full_scale, full_scale) / lsb) * lsb


def _record(
    s: DemoSettings,
    model: BoomModel,
    pulses: list[list[HalfSinePulse]],
    noise: NoiseFloor,
    t: np.ndarray,
    rng: np.random.Generator,
) -> Recorded:
    """Step 4: noise-free sensor signals (sensor sign applied), noise, then the ADC."""
    n_ch = len(model.channels)
    response = np.empty((s.n_hits, n_ch, t.size))
    force = np.empty((s.n_hits, t.size))
    peaks = np.empty((s.n_hits, n_ch))
    for i, hit in enumerate(pulses):
        acc = model.acceleration(t, hit) * model.sign[:, None]
        peaks[i] = np.abs(acc).max(axis=1)
        noisy = acc + noise.response_std * rng.standard_normal(acc.shape)
        response[i] = _quantise(noisy, s.full_scale_m_s2, s.adc_bits)
        f = half_sine_force(t, hit) + noise.force_std * rng.standard_normal(t.size)
        force[i] = _quantise(f, s.force_full_scale_n, s.adc_bits)
    return Recorded(response, force, peaks)


def _records(run: DemoRun) -> xr.Dataset:
    """Step 5: the record set, with nodes, directions, positions and the excitation."""
    s, m = run.settings, run.model
    ds = records_from_arrays(
        run.recorded.response,
        float(s.sample_rate_hz),
        channels=m.channels,
        force=run.recorded.force,
        t0=float(run.time[0]),
        node=m.nodes,
        direction=list(s.sensor_directions),
        position=m.position,
        attrs={
            "full_scale": float(s.full_scale_m_s2),
            "force_full_scale": float(s.force_full_scale_n),
            "title": f"modalnb demo campaign: {SCENARIO_NAME} (invented data)",
            "source": f"modalnb.demo.make_demo_campaign(seed={int(run.seed)})",
            "seed": int(run.seed),
        },
    )
    exc_node = f"n{s.excitation_node:02d}"
    ds = ds.assign_coords(
        excitation_node=("hit", np.array([exc_node] * s.n_hits, dtype=object)),
        excitation_direction=("hit", np.array([s.excitation_direction] * s.n_hits, dtype=object)),
    )
    return validate_records(ds)


def make_demo_campaign(
    seed: int = DEMO_SEED, settings: DemoSettings = DEMO_SETTINGS
) -> tuple[xr.Dataset, dict[str, Any]]:
    """Generate the Heron boom tap-test campaign and its true modal parameters.

    See :mod:`modalnb.demo` for the scenario, physics and truth conventions. The result
    is deterministic for a given `seed` (``numpy.random.default_rng(seed)``), to the last
    bit across numpy/scipy/LAPACK builds (see :func:`modalnb.demo.cantilever_modes`).

    Parameters
    ----------
    seed : int
        Seed of the hit parameters and noise; :data:`DEMO_SEED` gives the shipped data.
    settings : DemoSettings
        The scenario; :data:`DEMO_SETTINGS` gives the shipped data.

    Returns
    -------
    records : xarray.Dataset
        Record set (8 hits, 6 channels, 8192 samples) that passes ``validate_records``.
    truth : dict
        JSON-safe dict: scenario, settings, seed, channels, modes (frequency, damping,
        shape, residues), excluded modes, per-hit pulses, the double and clipped hits.

    Examples
    --------
    >>> records, truth = make_demo_campaign()
    >>> dict(records["response"].sizes)
    {'hit': 8, 'channel': 6, 'time': 8192}
    >>> truth["double_hit"]["hit"], truth["clipped_hit"]["hit"]
    (4, 6)
    """
    s = settings
    rng = np.random.default_rng(seed)
    t = time_axis(s)
    model = boom_model(s)
    draws = _draw_hits(s, rng)
    noise = _noise_floor(s, model, t)
    pulses = _hit_pulses(s, model, draws, t)
    recorded = _record(s, model, pulses, noise, t, rng)
    run = DemoRun(s, int(seed), t, model, draws, pulses, noise, recorded)
    return _records(run), demo_truth(run)


# ---------------------------------------------------------------- truth


def _mode_truth(run: DemoRun, k: int, handbook_hz: float) -> dict[str, Any]:
    m = run.model
    f_n = float(m.frequency_hz[k])
    zeta = float(m.zeta[k])
    w = 2 * np.pi * f_n
    wd = w * np.sqrt(1 - zeta * zeta)
    lam = complex(-zeta * w, wd)
    shape = m.phi_sensors[k]
    ref = int(np.argmax(np.abs(shape)))
    norm = shape / shape[ref]
    res = shape * m.phi_drive[k] * lam**2 / (2j * wd)
    return {
        "mode": k + 1,
        "frequency_hz": f_n,
        "damping_ratio": zeta,
        "damped_frequency_hz": float(f_n * np.sqrt(1 - zeta * zeta)),
        "handbook_frequency_hz": float(handbook_hz),
        "handbook_beta_l": HANDBOOK_CANTILEVER_BETA_L[k],
        "pole_real": float(lam.real),
        "pole_imag": float(lam.imag),
        "reference_channel": m.channels[ref],
        "amplitude": [float(abs(v)) for v in norm],
        "phase_deg": [0.0 if v > 0 else 180.0 for v in norm],
        "mass_normalised_shape": [float(v) for v in shape],
        "shape_at_excitation": float(m.phi_drive[k]),
        "residue_real": [float(r.real) for r in res],
        "residue_imag": [float(r.imag) for r in res],
        "residue_real_recorded": [float(r.real) for r in res * m.sign],
        "residue_imag_recorded": [float(r.imag) for r in res * m.sign],
    }


def _hits_truth(run: DemoRun) -> tuple[list[dict[str, Any]], dict[str, Any]]:
    s, channels = run.settings, run.model.channels
    fsc = float(s.full_scale_m_s2)
    hits = []
    clipped_info: dict[str, Any] = {}
    for i, pulses in enumerate(run.pulses):
        label = i + 1
        at_fs = np.abs(run.recorded.response[i]) >= fsc
        clipped_ch = [channels[c] for c in range(len(channels)) if at_fs[c].any()]
        kind = "normal"
        if label == s.double_hit:
            kind = "double"
        elif label == s.clipped_hit:
            kind = "clipped"
            clipped_info = {
                "channels": clipped_ch,
                "samples_at_full_scale": {
                    channels[c]: int(at_fs[c].sum()) for c in range(len(channels)) if at_fs[c].any()
                },
            }
        hits.append(
            {
                "hit": label,
                "kind": kind,
                "pulses": [
                    {"start_s": p.start_s, "duration_s": p.duration_s, "peak_n": p.peak_n}
                    for p in pulses
                ],
                "peak_response_noise_free": dict(
                    zip(channels, [float(v) for v in run.recorded.peak_noise_free[i]], strict=True)
                ),
                "channels_at_full_scale": clipped_ch,
            }
        )
    return hits, clipped_info


def demo_truth(run: DemoRun) -> dict[str, Any]:
    """The JSON-safe truth of one generator run (see :mod:`modalnb.demo`, "Truth conventions").

    Examples
    --------
    >>> _, truth = make_demo_campaign()
    >>> [h["kind"] for h in truth["hits"]][3:6]
    ['double', 'normal', 'clipped']
    """
    s, m = run.settings, run.model
    n_modes = m.n_modes
    handbook = handbook_cantilever_frequencies(
        n_modes,
        length=s.length_m,
        thickness=s.thickness_m,
        youngs_modulus=s.youngs_modulus_pa,
        density=s.density_kg_m3,
    )
    all_f = m.modes.frequency_hz
    excluded = [
        {"mode": int(k + 1), "frequency_hz": float(all_f[k])}
        for k in range(n_modes, min(n_modes + 2, all_f.size))
    ]
    hits, clipped_info = _hits_truth(run)
    fsc = float(s.full_scale_m_s2)
    delay, ratio = run.draws.double_hit_delay_s, run.draws.double_hit_ratio
    return {
        "scenario": SCENARIO_NAME,
        "invented_data": True,
        "description": (
            "Steel flat bar 500 x 30 x 10 mm bolted to a rigid frame (clamped root, free tip), "
            "vertical bending; Euler-Bernoulli Hermite cubic FE model with consistent mass; "
            "modal superposition of the modes below 0.4 fs (ideal anti-alias filter assumed); "
            "half-sine hammer pulses at the tip (+Z, driving point under boom-6); Gaussian "
            "noise; 24-bit ADC with clipping at full scale."
        ),
        "generator": {
            "function": "modalnb.demo.make_demo_campaign",
            "seed": int(run.seed),
            "settings": s.as_json(),
        },
        "sample_rate_hz": float(s.sample_rate_hz),
        "time_first_s": float(run.time[0]),
        "channels": m.channels,
        "channel_nodes": m.nodes,
        "channel_directions": list(s.sensor_directions),
        "channel_x_m": [float(v) for v in m.position[:, 0]],
        "excitation_node": f"n{s.excitation_node:02d}",
        "excitation_direction": s.excitation_direction,
        "excitation_x_m": float(m.modes.x[s.excitation_node]),
        "conventions": {
            "frequency_hz": "undamped natural frequency of the FE model",
            "shape": (
                "amplitude/phase_deg per channel (order of 'channels'): global +Z shape, "
                "sensor direction sign removed, largest-amplitude channel = 1 at 0 deg"
            ),
            "residue": (
                "acceleration (m/s^2) per unit force impulse (N s) at t = 0: "
                "x''_c(t) = sum_k 2 Re(R_kc exp(lambda_k t)) for t > 0, "
                "R_kc = phi_kc phi_kp lambda_k^2 / (2 j wd_k), lambda_k = pole_real + j pole_imag; "
                "residue_* in the global +Z frame, residue_*_recorded with the sensor sign"
            ),
        },
        "modes": [_mode_truth(run, k, handbook[k]) for k in range(n_modes)],
        "excluded_modes": excluded,
        "excluded_modes_reason": "at or above 0.4 fs: removed by the (ideal) anti-alias filter",
        "noise": {
            "response_std_m_s2": run.noise.response_std,
            "force_std_n": run.noise.force_std,
            "response_rule": "40 dB below the all-channel RMS (t >= 0) of a nominal 120 N, 0.7 ms hit",
            "force_rule": "50 dB below a 120 N peak",
        },
        "hits": hits,
        "double_hit": {
            "hit": int(s.double_hit),
            "delay_s": float(delay),
            "second_to_first_peak_ratio": float(ratio),
            "why": (
                "the hammer bounced back onto the boom: a second half-sine pulse "
                f"{delay * 1e3:.2f} ms after the first, {ratio:.0%} of its peak"
            ),
        },
        "clipped_hit": {
            "hit": int(s.clipped_hit),
            **clipped_info,
            "full_scale_m_s2": fsc,
            "why": (
                f"struck {s.clip_overdrive:.1f} times harder than needed to reach the "
                "accelerometer full scale: the driving-point channel saturates"
            ),
        },
    }
