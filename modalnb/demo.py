"""Demo campaign: tap test of the "Heron" sensor boom, a scenario of our own.

The structure
-------------
A slender steel flat bar, 500 mm long, 30 mm wide and 10 mm thick, is bolted at one end
to a rigid test frame and sticks out horizontally: an instrument boom with its sensor
removed for the test. Its root is modelled as clamped, its tip as free. Vertical bending
(the 10 mm direction, global Z) is modelled with Euler-Bernoulli beam finite elements:
Hermite cubic elements with the consistent mass matrix (Przemieniecki 1968, *Theory of
Matrix Structural Analysis*, ch. 11; Petyt 1990, *Introduction to Finite Element
Vibration Analysis*, ch. 3; both from memory). As the mesh is refined the natural
frequencies converge from above to the handbook cantilever values
``f_n = (beta_n L)^2 / (2 pi L^2) sqrt(E I / (rho A))`` with ``beta_n L`` = 1.87510407,
4.69409113, 7.85475744, 10.99554073 (Blevins 1979, *Formulas for Natural Frequency and
Mode Shape*, table 8-1; roots of ``cos x cosh x = -1``). The boom has four bending modes
between 10 and 1200 Hz (about 32.6, 204.4, 572.3 and 1121.5 Hz).

The test
--------
Six accelerometers (channels ``boom-1`` .. ``boom-6``) sit on the top face along the
boom; ``boom-3`` is mounted upside down on the bottom face, so its direction is ``-Z``
and it records the negative of the +Z motion. An instrumented hammer strikes the
underside of the tip upwards (+Z) at node ``n40``, right under ``boom-6`` (a driving
point). Eight hits are recorded at 4096 Hz, 8192 samples each (2 s) with 205 pre-trigger
samples, so ``time`` starts at -0.05 s. Hit 4 is a double hit (the hammer bounced back
onto the boom a few ms later) and hit 6 was struck so hard that the driving-point
channel saturates at the ADC full scale; both are recorded in the truth with the reason.

The physics we control
----------------------
* Modal superposition of the FE modes with mass-normalised shapes ``phi_k``; each modal
  coordinate obeys ``q'' + 2 zeta w q' + w^2 q = phi_k(p) f(t)`` (classical, i.e. modal,
  damping; ratios 1.5, 0.9, 0.7 and 0.6 %, typical of a bolted steel assembly at tap-test
  levels, compare the bolted-steel log decrements of EN 1991-1-4 Annex F).
* The force is a sum of half-sine pulses (a common model of a hammer impact; contact
  duration scaled with peak force as ``F^(-1/6)``, the Hertz-contact trend, Johnson 1985,
  *Contact Mechanics*, ch. 11, from memory). Each modal response to the continuous
  half-sine is computed in closed form (convolution with the modal impulse response), so
  there is no time-stepping error; :func:`sdof_half_sine_response` is that solution.
* Only modes below 0.4 fs are included: the acquisition is taken to have an ideal
  anti-alias filter (the fifth mode, about 1854 Hz, is left out). The force record is
  the continuous pulse sampled as is.
* Noise: independent Gaussian noise, the same floor on every accelerometer (40 dB below
  the RMS over all channels of a nominal 120 N hit) and on the force (50 dB below a
  120 N peak, so that a 5 % double-hit threshold stays well above the floor); then the
  ADC: values clipped to +-full scale and quantised to 24 bits.

This is invented data for demonstrations and tests only.

Truth conventions
-----------------
* ``frequency_hz`` is the undamped natural frequency of the FE model, ``damped_frequency_hz``
  is ``f sqrt(1 - zeta^2)``; ``handbook_frequency_hz`` is the continuous beam value.
* ``amplitude``/``phase_deg`` (one entry per channel) are the global (+Z) mode shape at
  the sensors, sensor direction sign removed, scaled so that the largest-amplitude
  channel has amplitude 1 and phase 0 (phases are therefore 0 or 180).
* Residues: for a unit impulse of force at ``t = 0`` the +Z displacement of sensor ``c``
  is ``sum_k phi_kc phi_kp exp(-sigma_k t) sin(wd_k t) / wd_k`` (METHODS §1; Ewins 2000,
  *Modal Testing*, ch. 2, from memory). Writing ``sin(wd t) / wd = 2 Re(e^{lambda t} /
  (2 j wd))`` with ``lambda = -sigma + j wd`` and differentiating twice, the acceleration
  for ``t > 0`` is ``sum_k 2 Re(R_kc e^{lambda_k t})`` with
  ``R_kc = phi_kc phi_kp lambda_k^2 / (2 j wd_k)`` (m/s^2 per N s). ``residue_real`` /
  ``residue_imag`` are ``R_kc`` in the global +Z frame; ``residue_*_recorded`` carry the
  sensor sign (what the channel itself records). The test suite checks this formula
  against a numerical ODE solution.
"""

from __future__ import annotations

import argparse
import json
import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError
from ._files import atomic_write_with
from .records import records_from_arrays, validate_records

__all__ = [
    "DEMO_SEED",
    "HANDBOOK_CANTILEVER_BETA_L",
    "HalfSinePulse",
    "CantileverModes",
    "cantilever_modes",
    "handbook_cantilever_frequencies",
    "half_sine_force",
    "sdof_half_sine_response",
    "make_demo_campaign",
    "load_demo",
    "load_demo_truth",
    "write_demo",
    "main",
]

#: Seed of the shipped campaign.
DEMO_SEED = 20240611
#: Cantilever eigenvalues beta_n L, roots of cos x cosh x = -1 (Blevins 1979, table 8-1).
HANDBOOK_CANTILEVER_BETA_L = (1.87510407, 4.69409113, 7.85475744, 10.99554073, 14.13716839)

SCENARIO_NAME = "Heron sensor boom, bench tap test"
CAMPAIGN_FILE = "demo_campaign.nc"
TRUTH_FILE = "demo_truth.json"
CSV_FILE = "demo_hit1.csv"

# Everything the generator uses, in one place (also written to the truth).
_SETTINGS: dict[str, Any] = {
    "length_m": 0.5,
    "width_m": 0.03,
    "thickness_m": 0.01,
    "youngs_modulus_pa": 200e9,  # structural steel, METHODS §7
    "density_kg_m3": 7850.0,
    "n_elements": 40,
    "sample_rate_hz": 4096.0,
    "n_samples": 8192,
    "n_pretrigger": 205,
    "max_mode_fraction_of_fs": 0.4,
    "damping_ratios": [0.015, 0.009, 0.007, 0.006],
    "sensor_nodes": [11, 17, 23, 29, 37, 40],
    "sensor_directions": ["+Z", "+Z", "-Z", "+Z", "+Z", "+Z"],
    "excitation_node": 40,
    "excitation_direction": "+Z",
    "n_hits": 8,
    "double_hit": 4,
    "clipped_hit": 6,
    "peak_force_range_n": [60.0, 160.0],
    "nominal_peak_force_n": 120.0,
    "nominal_duration_s": 0.7e-3,
    "duration_jitter_rel": 0.03,
    "start_range_s": [-0.15e-3, 0.0],
    "double_hit_delay_range_s": [3.0e-3, 4.5e-3],
    "double_hit_ratio_range": [0.3, 0.4],
    "clip_overdrive": 1.3,
    "response_snr_db": 40.0,
    "force_snr_db": 50.0,
    "full_scale_m_s2": 2000.0,
    "force_full_scale_n": 1000.0,
    "adc_bits": 24,
}


@dataclass(frozen=True)
class HalfSinePulse:
    """One half-sine force pulse ``peak_n * sin(pi (t - start_s) / duration_s)``.

    Zero outside ``start_s <= t <= start_s + duration_s``.

    Examples
    --------
    >>> HalfSinePulse(0.0, 1e-3, 100.0).duration_s
    0.001
    """

    start_s: float
    duration_s: float
    peak_n: float


def half_sine_force(t: Any, pulses: Sequence[HalfSinePulse]) -> np.ndarray:
    """Sum of half-sine pulses sampled at times `t` (s), in N.

    Examples
    --------
    >>> half_sine_force([0.0, 0.5e-3, 2e-3], [HalfSinePulse(0.0, 1e-3, 100.0)]).round(6)
    array([  0., 100.,   0.])
    """
    t = np.asarray(t, dtype=float)
    f = np.zeros_like(t)
    for p in pulses:
        tau = t - p.start_s
        on = (tau >= 0) & (tau <= p.duration_s)
        f[on] += p.peak_n * np.sin(np.pi * tau[on] / p.duration_s)
    return f


def sdof_half_sine_response(
    t: Any,
    pulses: Sequence[HalfSinePulse],
    *,
    omega_n: float,
    zeta: float,
    gain: float = 1.0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Exact response of ``q'' + 2 zeta omega_n q' + omega_n^2 q = gain * f(t)``, at rest at -inf.

    `f` is the sum of half-sine `pulses` (:func:`half_sine_force`). The solution is the
    convolution (Duhamel integral) of the force with the impulse response
    ``h(t) = exp(-sigma t) sin(wd t) / wd`` (e.g. Clough & Penzien 1993, *Dynamics of
    Structures*, ch. 6, from memory), done in closed form: with ``lambda = -sigma + j wd``,
    ``q = Re(J / (j wd))`` where ``J(t) = int e^{lambda (t-u)} gain f(u) du``; then
    ``q' = Re(lambda J / (j wd))`` and ``q'' = Re(lambda^2 J / (j wd)) + gain f(t)``.
    Valid for ``0 < zeta < 1``.

    Parameters
    ----------
    t : array_like
        Times (s).
    pulses : sequence of HalfSinePulse
        The force.
    omega_n : float
        Undamped natural frequency (rad/s).
    zeta : float
        Damping ratio, in (0, 1).
    gain : float
        Factor on the force (for a modal coordinate, the mode shape at the driving point).

    Returns
    -------
    tuple of ndarray
        Displacement, velocity and acceleration at `t`.

    Examples
    --------
    >>> q, v, a = sdof_half_sine_response([1.0], [HalfSinePulse(0.0, 1e-3, 1.0)],
    ...                                   omega_n=100.0, zeta=0.01)
    >>> bool(abs(q[0]) < 1e-5)
    True
    """
    if not (0.0 < float(zeta) < 1.0):
        raise ModalnbError(f"`zeta` must be in (0, 1), was {zeta!r}.")
    if not (float(omega_n) > 0.0):
        raise ModalnbError(f"`omega_n` must be positive, was {omega_n!r}.")
    t = np.asarray(t, dtype=float)
    sigma = zeta * omega_n
    wd = omega_n * np.sqrt(1.0 - zeta**2)
    lam = complex(-sigma, wd)
    big_j = np.zeros(t.shape, dtype=complex)
    for p in pulses:
        tau = t - p.start_s
        tau_c = np.clip(tau, 0.0, p.duration_s)
        om = np.pi / p.duration_s
        k = np.zeros(t.shape, dtype=complex)
        for s, sign in ((1j * om, 1.0), (-1j * om, -1.0)):
            # int_0^tau_c e^{lam (tau_c - v)} e^{s v} dv, without cancellation
            k += sign * np.exp(lam * tau_c) * np.expm1((s - lam) * tau_c) / (s - lam)
        k /= 2j
        big_j += np.where(tau > 0, gain * p.peak_n * np.exp(lam * (tau - tau_c)) * k, 0.0)
    q = (big_j / (1j * wd)).real
    v = (lam * big_j / (1j * wd)).real
    a = (lam**2 * big_j / (1j * wd)).real + gain * half_sine_force(t, pulses)
    return q, v, a


@dataclass(frozen=True)
class CantileverModes:
    """Bending modes of a clamped-free beam FE model.

    Attributes
    ----------
    x : ndarray
        Node positions along the beam (m), root first (``n_elements + 1`` nodes).
    frequency_hz : ndarray
        Undamped natural frequencies (Hz), ascending.
    deflection : ndarray
        Mass-normalised transverse deflection at the nodes, shape (mode, node), in
        1/sqrt(kg); zero at the root; sign chosen so the tip deflection is positive.
    """

    x: np.ndarray
    frequency_hz: np.ndarray
    deflection: np.ndarray


def cantilever_modes(
    n_elements: int,
    *,
    length: float = _SETTINGS["length_m"],
    width: float = _SETTINGS["width_m"],
    thickness: float = _SETTINGS["thickness_m"],
    youngs_modulus: float = _SETTINGS["youngs_modulus_pa"],
    density: float = _SETTINGS["density_kg_m3"],
) -> CantileverModes:
    """Euler-Bernoulli cantilever modes from Hermite cubic beam elements.

    Element stiffness ``EI/l^3 [[12, 6l, -12, 6l], [6l, 4l^2, -6l, 2l^2], ...]`` and
    consistent mass ``rho A l / 420 [[156, 22l, 54, -13l], ...]`` (Przemieniecki 1968,
    *Theory of Matrix Structural Analysis*; Petyt 1990, ch. 3; from memory), two degrees
    of freedom (deflection, rotation) per node, both fixed at the root; generalised
    eigenproblem ``K v = w^2 M v`` solved by :func:`scipy.linalg.eigh`, which returns
    ``v^T M v = 1`` (mass-normalised shapes).

    Parameters
    ----------
    n_elements : int
        Number of equal elements (>= 1).
    length, width, thickness : float
        Beam dimensions (m); bending about the width axis.
    youngs_modulus, density : float
        Material (Pa, kg/m^3).

    Returns
    -------
    CantileverModes

    Examples
    --------
    >>> modes = cantilever_modes(20)
    >>> round(float(modes.frequency_hz[0]), 1)
    32.6
    """
    import scipy.linalg

    n = int(n_elements)
    if n < 1 or n != n_elements:
        raise ModalnbError(f"`n_elements` must be a positive integer, was {n_elements!r}.")
    el = length / n
    area = width * thickness
    inertia = width * thickness**3 / 12.0
    ke = (youngs_modulus * inertia / el**3) * np.array(
        [
            [12, 6 * el, -12, 6 * el],
            [6 * el, 4 * el**2, -6 * el, 2 * el**2],
            [-12, -6 * el, 12, -6 * el],
            [6 * el, 2 * el**2, -6 * el, 4 * el**2],
        ]
    )
    me = (density * area * el / 420.0) * np.array(
        [
            [156, 22 * el, 54, -13 * el],
            [22 * el, 4 * el**2, 13 * el, -3 * el**2],
            [54, 13 * el, 156, -22 * el],
            [-13 * el, -3 * el**2, -22 * el, 4 * el**2],
        ]
    )
    ndof = 2 * (n + 1)
    k = np.zeros((ndof, ndof))
    m = np.zeros((ndof, ndof))
    for e in range(n):
        s = slice(2 * e, 2 * e + 4)
        k[s, s] += ke
        m[s, s] += me
    w2, v = scipy.linalg.eigh(k[2:, 2:], m[2:, 2:])
    defl = np.vstack([np.zeros((1, v.shape[1])), v[0::2, :]]).T  # (mode, node)
    defl *= np.sign(defl[:, -1])[:, None]
    return CantileverModes(
        x=np.linspace(0.0, length, n + 1),
        frequency_hz=np.sqrt(np.clip(w2, 0.0, None)) / (2 * np.pi),
        deflection=defl,
    )


def handbook_cantilever_frequencies(
    n_modes: int = 4,
    *,
    length: float = _SETTINGS["length_m"],
    thickness: float = _SETTINGS["thickness_m"],
    youngs_modulus: float = _SETTINGS["youngs_modulus_pa"],
    density: float = _SETTINGS["density_kg_m3"],
) -> np.ndarray:
    """Continuous Euler-Bernoulli cantilever frequencies (Hz) of a rectangular bar.

    ``f_n = (beta_n L)^2 / (2 pi L^2) sqrt(E I / (rho A))`` with ``I / A = h^2 / 12``
    (Blevins 1979, table 8-1), using :data:`HANDBOOK_CANTILEVER_BETA_L`.

    Examples
    --------
    >>> handbook_cantilever_frequencies(2).round(2)
    array([ 32.62, 204.4 ])
    """
    if not 1 <= n_modes <= len(HANDBOOK_CANTILEVER_BETA_L):
        raise ModalnbError(
            f"`n_modes` must be 1..{len(HANDBOOK_CANTILEVER_BETA_L)}, was {n_modes!r}."
        )
    bl = np.asarray(HANDBOOK_CANTILEVER_BETA_L[:n_modes])
    return bl**2 / (2 * np.pi * length**2) * np.sqrt(youngs_modulus * thickness**2 / (12 * density))


def _quantise(x: np.ndarray, full_scale: float, bits: int) -> np.ndarray:
    """ADC: clip to +-full scale, round to the LSB (values stay float64)."""
    lsb = full_scale / 2 ** (bits - 1)
    return np.round(np.clip(x, -full_scale, full_scale) / lsb) * lsb


def _noise_free(
    t: np.ndarray,
    pulses: Sequence[HalfSinePulse],
    omega: np.ndarray,
    zeta: np.ndarray,
    phi_p: np.ndarray,
    phi_sensors: np.ndarray,
) -> np.ndarray:
    """Global +Z acceleration at the sensors, shape (channel, time)."""
    acc = np.zeros((phi_sensors.shape[1], t.size))
    for k in range(omega.size):
        _, _, qdd = sdof_half_sine_response(
            t, pulses, omega_n=omega[k], zeta=zeta[k], gain=phi_p[k]
        )
        acc += phi_sensors[k][:, None] * qdd[None, :]
    return acc


def make_demo_campaign(seed: int = DEMO_SEED) -> tuple[xr.Dataset, dict[str, Any]]:
    """Generate the Heron boom tap-test campaign and its true modal parameters.

    See the module docstring for the scenario, physics and truth conventions. The result
    is deterministic for a given `seed` (``numpy.random.default_rng(seed)``).

    Parameters
    ----------
    seed : int
        Seed of the hit parameters and noise; :data:`DEMO_SEED` gives the shipped data.

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
    s = _SETTINGS
    rng = np.random.default_rng(seed)
    fs = float(s["sample_rate_hz"])
    t = (np.arange(s["n_samples"]) - s["n_pretrigger"]) / fs
    modes = cantilever_modes(s["n_elements"])
    keep = modes.frequency_hz < s["max_mode_fraction_of_fs"] * fs
    n_modes = int(keep.sum())
    zeta = np.asarray(s["damping_ratios"], dtype=float)
    if zeta.size != n_modes:
        raise ModalnbError(
            f"demo settings: {n_modes} modes lie below {s['max_mode_fraction_of_fs']} fs but "
            f"{zeta.size} damping ratios are given. Hint: give one ratio per mode."
        )
    f_n = modes.frequency_hz[:n_modes]
    omega = 2 * np.pi * f_n
    sensor_nodes = list(s["sensor_nodes"])
    phi_s = modes.deflection[:n_modes][:, sensor_nodes]  # (mode, channel), global +Z
    phi_p = modes.deflection[:n_modes, s["excitation_node"]]
    sign = np.array([-1.0 if d.startswith("-") else 1.0 for d in s["sensor_directions"]])
    channels = [f"boom-{i + 1}" for i in range(len(sensor_nodes))]
    half_h = 0.5 * s["thickness_m"]
    position = np.array(
        [
            [modes.x[n], 0.0, -half_h if sg < 0 else half_h]
            for n, sg in zip(sensor_nodes, sign, strict=True)
        ]
    )

    # --- hits: pulse parameters (drawn in a fixed order) ---
    n_hits = int(s["n_hits"])
    p_lo, p_hi = s["peak_force_range_n"]
    peaks = rng.uniform(p_lo, p_hi, n_hits)
    jitter = 1.0 + s["duration_jitter_rel"] * rng.standard_normal(n_hits)
    starts = rng.uniform(*s["start_range_s"], n_hits)
    delay = rng.uniform(*s["double_hit_delay_range_s"])
    ratio = rng.uniform(*s["double_hit_ratio_range"])

    def duration(peak: float, j: float) -> float:
        return float(s["nominal_duration_s"] * (peak / s["nominal_peak_force_n"]) ** (-1 / 6) * j)

    # noise floors from a nominal hit (same floor on every accelerometer)
    nominal = [HalfSinePulse(0.0, s["nominal_duration_s"], s["nominal_peak_force_n"])]
    nom = _noise_free(t, nominal, omega, zeta, phi_p, phi_s)
    sigma_resp = float(np.sqrt(np.mean(nom[:, t >= 0] ** 2)) * 10 ** (-s["response_snr_db"] / 20))
    sigma_force = float(s["nominal_peak_force_n"] * 10 ** (-s["force_snr_db"] / 20))
    fsc = float(s["full_scale_m_s2"])
    ffs = float(s["force_full_scale_n"])

    hit_pulses: list[list[HalfSinePulse]] = []
    for i in range(n_hits):
        label = i + 1
        peak = float(peaks[i])
        if label == s["clipped_hit"]:
            # hit hard enough that the noise-free peak exceeds the full scale by clip_overdrive
            unit = _noise_free(
                t,
                [HalfSinePulse(starts[i], duration(peak, jitter[i]), 1.0)],
                omega,
                zeta,
                phi_p,
                phi_s,
            )
            peak = float(s["clip_overdrive"] * fsc / np.abs(unit).max())
        pulses = [HalfSinePulse(float(starts[i]), duration(peak, jitter[i]), peak)]
        if label == s["double_hit"]:
            second = ratio * peak
            pulses.append(
                HalfSinePulse(float(starts[i] + delay), duration(second, jitter[i]), second)
            )
        hit_pulses.append(pulses)

    response = np.empty((n_hits, len(channels), t.size))
    force = np.empty((n_hits, t.size))
    peak_noise_free = np.empty((n_hits, len(channels)))
    for i, pulses in enumerate(hit_pulses):
        acc = _noise_free(t, pulses, omega, zeta, phi_p, phi_s) * sign[:, None]
        peak_noise_free[i] = np.abs(acc).max(axis=1)
        noisy = acc + sigma_resp * rng.standard_normal(acc.shape)
        response[i] = _quantise(noisy, fsc, s["adc_bits"])
        f = half_sine_force(t, pulses) + sigma_force * rng.standard_normal(t.size)
        force[i] = _quantise(f, ffs, s["adc_bits"])

    ds = records_from_arrays(
        response,
        fs,
        channels=channels,
        force=force,
        t0=float(t[0]),
        node=[f"n{n:02d}" for n in sensor_nodes],
        direction=list(s["sensor_directions"]),
        position=position,
        attrs={
            "full_scale": fsc,
            "force_full_scale": ffs,
            "title": f"modalnb demo campaign: {SCENARIO_NAME} (invented data)",
            "source": f"modalnb.demo.make_demo_campaign(seed={int(seed)})",
            "seed": int(seed),
        },
    )
    exc_node = f"n{s['excitation_node']:02d}"
    ds = ds.assign_coords(
        excitation_node=("hit", np.array([exc_node] * n_hits, dtype=object)),
        excitation_direction=("hit", np.array([s["excitation_direction"]] * n_hits, dtype=object)),
    )
    validate_records(ds)

    truth = _truth(
        seed,
        t,
        modes,
        n_modes,
        zeta,
        phi_s,
        phi_p,
        sign,
        channels,
        sensor_nodes,
        position,
        hit_pulses,
        peak_noise_free,
        sigma_resp,
        sigma_force,
        response,
        fsc,
        delay,
        ratio,
    )
    return ds, truth


def _truth(
    seed,
    t,
    modes,
    n_modes,
    zeta,
    phi_s,
    phi_p,
    sign,
    channels,
    sensor_nodes,
    position,
    hit_pulses,
    peak_noise_free,
    sigma_resp,
    sigma_force,
    response,
    fsc,
    delay,
    ratio,
) -> dict[str, Any]:
    s = _SETTINGS
    fs = float(s["sample_rate_hz"])
    f_n = modes.frequency_hz[:n_modes]
    handbook = handbook_cantilever_frequencies(n_modes)
    mode_list = []
    for k in range(n_modes):
        w = 2 * np.pi * f_n[k]
        sigma = zeta[k] * w
        wd = w * np.sqrt(1 - zeta[k] ** 2)
        lam = complex(-sigma, wd)
        shape = phi_s[k]
        ref = int(np.argmax(np.abs(shape)))
        norm = shape / shape[ref]
        res = phi_s[k] * phi_p[k] * lam**2 / (2j * wd)
        mode_list.append(
            {
                "mode": k + 1,
                "frequency_hz": float(f_n[k]),
                "damping_ratio": float(zeta[k]),
                "damped_frequency_hz": float(f_n[k] * np.sqrt(1 - zeta[k] ** 2)),
                "handbook_frequency_hz": float(handbook[k]),
                "handbook_beta_l": HANDBOOK_CANTILEVER_BETA_L[k],
                "pole_real": float(lam.real),
                "pole_imag": float(lam.imag),
                "reference_channel": channels[ref],
                "amplitude": [float(abs(v)) for v in norm],
                "phase_deg": [0.0 if v > 0 else 180.0 for v in norm],
                "mass_normalised_shape": [float(v) for v in shape],
                "shape_at_excitation": float(phi_p[k]),
                "residue_real": [float(r.real) for r in res],
                "residue_imag": [float(r.imag) for r in res],
                "residue_real_recorded": [float(r.real) for r in res * sign],
                "residue_imag_recorded": [float(r.imag) for r in res * sign],
            }
        )
    all_f = modes.frequency_hz
    excluded = [
        {"mode": int(k + 1), "frequency_hz": float(all_f[k])}
        for k in range(n_modes, min(n_modes + 2, all_f.size))
    ]
    hits = []
    clipped_info: dict[str, Any] = {}
    for i, pulses in enumerate(hit_pulses):
        label = i + 1
        at_fs = np.abs(response[i]) >= fsc
        clipped_ch = [channels[c] for c in range(len(channels)) if at_fs[c].any()]
        kind = "normal"
        if label == s["double_hit"]:
            kind = "double"
        elif label == s["clipped_hit"]:
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
                    zip(channels, [float(v) for v in peak_noise_free[i]], strict=True)
                ),
                "channels_at_full_scale": clipped_ch,
            }
        )
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
            "seed": int(seed),
            "settings": json.loads(json.dumps(s)),
        },
        "sample_rate_hz": fs,
        "time_first_s": float(t[0]),
        "channels": channels,
        "channel_nodes": [f"n{n:02d}" for n in sensor_nodes],
        "channel_directions": list(s["sensor_directions"]),
        "channel_x_m": [float(v) for v in position[:, 0]],
        "excitation_node": f"n{s['excitation_node']:02d}",
        "excitation_direction": s["excitation_direction"],
        "excitation_x_m": float(modes.x[s["excitation_node"]]),
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
        "modes": mode_list,
        "excluded_modes": excluded,
        "excluded_modes_reason": "at or above 0.4 fs: removed by the (ideal) anti-alias filter",
        "noise": {
            "response_std_m_s2": sigma_resp,
            "force_std_n": sigma_force,
            "response_rule": "40 dB below the all-channel RMS (t >= 0) of a nominal 120 N, 0.7 ms hit",
            "force_rule": "50 dB below a 120 N peak",
        },
        "hits": hits,
        "double_hit": {
            "hit": int(s["double_hit"]),
            "delay_s": float(delay),
            "second_to_first_peak_ratio": float(ratio),
            "why": (
                "the hammer bounced back onto the boom: a second half-sine pulse "
                f"{delay * 1e3:.2f} ms after the first, {ratio:.0%} of its peak"
            ),
        },
        "clipped_hit": {
            "hit": int(s["clipped_hit"]),
            **clipped_info,
            "full_scale_m_s2": fsc,
            "why": (
                f"struck {s['clip_overdrive']:.1f} times harder than needed to reach the "
                "accelerometer full scale: the driving-point channel saturates"
            ),
        },
    }


# ---------------------------------------------------------------- files


def _encoding(ds: xr.Dataset) -> dict[str, dict[str, Any]]:
    bits = _SETTINGS["adc_bits"]
    enc = {}
    for var, fs_attr in (("response", "full_scale"), ("force", "force_full_scale")):
        lsb = float(ds.attrs[fs_attr]) / 2 ** (bits - 1)
        enc[var] = {
            "dtype": "int32",
            "scale_factor": lsb,
            "_FillValue": np.int32(-(2**31)),
            "zlib": True,
            "complevel": 6,
            "shuffle": True,
        }
    return enc


def _write_campaign(ds: xr.Dataset, path: Path) -> None:
    atomic_write_with(
        path,
        lambda p: ds.to_netcdf(p, engine="h5netcdf", encoding=_encoding(ds), invalid_netcdf=False),
    )


def _write_json(obj: dict[str, Any], path: Path) -> None:
    text = json.dumps(obj, indent=1) + "\n"
    atomic_write_with(path, lambda p: p.write_text(text, encoding="utf-8"))


def _write_csv(ds: xr.Dataset, hit: int, path: Path) -> None:
    import csv

    one = ds.sel(hit=hit)
    names = ["time", "force", *[str(c) for c in ds["channel"].values]]
    cols = [one["time"].values, one["force"].values, *one["response"].values]

    def write(p: Path) -> None:
        with open(p, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(names)
            for row in zip(*cols, strict=True):
                w.writerow([f"{v:.10g}" for v in row])

    atomic_write_with(path, write)


def write_demo(
    folder: str | os.PathLike[str] | None,
    *,
    seed: int = DEMO_SEED,
    package_data: bool = True,
) -> list[Path]:
    """Generate the campaign and write it (netCDF4 + truth JSON) where needed.

    Writes, atomically, ``demo_campaign.nc``, ``demo_truth.json`` and ``demo_hit1.csv``
    (hit 1 as CSV: columns time, force, then one per channel) into `folder`, and, when
    `package_data` is true, the first two into the ``modalnb/data`` package folder.
    ``example_data/README.md`` is written by hand, not here.

    Parameters
    ----------
    folder : path or None
        Output folder (created if missing); None writes only the package data.
    seed : int
        Generator seed.
    package_data : bool
        Also refresh ``modalnb/data``.

    Returns
    -------
    list of Path
        Files written.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as d:  # doctest: +SKIP
    ...     paths = write_demo(d, package_data=False)
    """
    ds, truth = make_demo_campaign(seed)
    written: list[Path] = []
    targets: list[Path] = []
    if folder is not None:
        targets.append(Path(folder))
    if package_data:
        targets.append(Path(__file__).resolve().parent / "data")
    for target in targets:
        target.mkdir(parents=True, exist_ok=True)
        _write_campaign(ds, target / CAMPAIGN_FILE)
        _write_json(truth, target / TRUTH_FILE)
        written += [target / CAMPAIGN_FILE, target / TRUTH_FILE]
    if folder is not None:
        _write_csv(ds, 1, Path(folder) / CSV_FILE)
        written.append(Path(folder) / CSV_FILE)
    return written


def load_demo() -> xr.Dataset:
    """The shipped demo campaign (package data), loaded into memory and validated.

    Works from an installed wheel: the file is found with :mod:`importlib.resources`.

    Examples
    --------
    >>> ds = load_demo()
    >>> float(ds.attrs["sample_rate"])
    4096.0
    """
    from importlib.resources import as_file, files

    res = files("modalnb.data") / CAMPAIGN_FILE
    with as_file(res) as path:
        if not Path(path).is_file():
            raise ModalnbError(
                f"{path}: the demo campaign is missing from the package data. "
                "Hint: run `python -m modalnb.demo --write example_data/` or reinstall modalnb."
            )
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            ds = ds.load()
    return validate_records(ds, source=str(path))


def load_demo_truth() -> dict[str, Any]:
    """True modal parameters of the shipped demo campaign (package data).

    Examples
    --------
    >>> truth = load_demo_truth()
    >>> [round(m["frequency_hz"]) for m in truth["modes"]]
    [33, 204, 572, 1122]
    """
    from importlib.resources import files

    res = files("modalnb.data") / TRUTH_FILE
    try:
        text = res.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ModalnbError(
            f"{TRUTH_FILE}: the demo truth is missing from the package data. "
            "Hint: run `python -m modalnb.demo --write example_data/` or reinstall modalnb."
        ) from None
    return json.loads(text)


def main(argv: Sequence[str] | None = None) -> int:
    """Command line: ``python -m modalnb.demo --write example_data/``.

    Examples
    --------
    >>> main(["--write", "example_data/"])  # doctest: +SKIP
    0
    """
    parser = argparse.ArgumentParser(
        prog="python -m modalnb.demo",
        description="Regenerate the demo campaign (package data and an example folder).",
    )
    parser.add_argument("--write", metavar="FOLDER", help="example folder to write into")
    parser.add_argument("--seed", type=int, default=DEMO_SEED, help="generator seed")
    parser.add_argument(
        "--no-package-data", action="store_true", help="do not refresh modalnb/data"
    )
    args = parser.parse_args(argv)
    if args.write is None and args.no_package_data:
        parser.error("nothing to write: give --write FOLDER or drop --no-package-data")
    for p in write_demo(args.write, seed=args.seed, package_data=not args.no_package_data):
        print(f"wrote {p} ({p.stat().st_size / 1e6:.2f} MB)")
    return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
