"""Roving-hammer demo: the "Kestrel" welded test frame, a scenario of our own.

The structure
-------------
A planar portal frame welded from square hollow steel section 50 x 50 x 3 mm: two
columns 1.0 m tall, fixed (welded to a stiff base plate) at the floor, and a 1.2 m beam
across their tops with rigid welded corners. It stands in the X-Z plane (X along the
beam, Z up); only in-plane motion is modelled (bending and axial stretch of every
member), out-of-plane motion is not part of the scenario.

The model is a finite-element model of Euler-Bernoulli frame elements: per node the
displacements along X and Z and the rotation about Y; per element the axial bar and the
Hermite cubic beam with their consistent mass matrices, rotated into the global frame
(Przemieniecki 1968, *Theory of Matrix Structural Analysis*, ch. 5 and 11; Cook, Malkus,
Plesha & Witt 2002, *Concepts and Applications of Finite Element Analysis*, 4th ed.,
ch. 2 and 11; both from memory). The truth is ``scipy.linalg.eigh(K, M)``: undamped
natural frequencies and mass-normalised shapes (``phi^T M phi = 1``). Modal damping (a
ratio per mode) is added to the modal equations.

Nodes ``n01`` (left base, fixed) up the left column to ``n09`` (left corner), along the
beam ``n10`` .. ``n18``, ``n19`` (right corner) and down the right column to ``n27``
(right base, fixed): 27 nodes, 25 of them free. Positions and lines are written as a
geometry table (``frame_nodes.csv``, ``frame_lines.csv``: modalnb's own layout, see
:mod:`modalnb.geometry`).

The test
--------
Two accelerometers stay put: ``beam-mid`` on top of the beam at ``n14`` (+Z) and
``corner`` on the outside of the left corner ``n09`` (+X). The hammer roves over the 25
free nodes, three hits each: the beam from below (+Z), the left column from the left
(+X), the right column from the right (-X, the hammer pushes towards -X). ``n14`` +Z is
the driving point (hit where ``beam-mid`` measures). Hit 14 (the second at ``n05``) is a
double hit: the hammer bounced back for a second pulse. 75 hits, 2 s each at 2048 Hz
with 5 % pre-trigger, force in N, acceleration in m/s^2.

Physics and noise
-----------------
Half-sine hammer pulses (about 0.6 ms; peak 40 to 120 N), each modal response in closed
form (:func:`modalnb.demo.sdof_half_sine_response`) summed over the modes below 0.4 fs
(an ideal anti-alias filter); Gaussian noise 40 dB below the RMS of a nominal driving
point hit on both accelerometers and 50 dB below the nominal peak on the force. This is
invented data for demonstrations and tests only.
"""

from __future__ import annotations

import csv
import io
import json
import os
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._errors import ModalnbError
from .._files import atomic_write_text, atomic_write_with
from ..records import records_from_arrays, validate_records
from ._model import HalfSinePulse, sdof_half_sine_response

__all__ = ["FrameSettings", "FRAME_SETTINGS", "FrameModel", "frame_model", "frame_element",
           "beam_line_model", "roving_campaign", "write_roving_demo", "ROVING_SEED",
           "ROVING_FILES"]

#: Seed of the roving demo.
ROVING_SEED = 20261203
#: Files written by :func:`write_roving_demo`.
ROVING_FILES = {"records": "roving_records.nc", "truth": "roving_truth.json",
                "nodes": "frame_nodes.csv", "lines": "frame_lines.csv",
                "model_modes": "frame_model_modes.csv", "model_shapes": "frame_model_shapes.csv"}


@dataclass(frozen=True)
class FrameSettings:
    """Every number of the roving demo.

    Steel: 200 GPa is a common textbook round value, 7850 kg/m^3 the usual density (both
    from memory). The section is a sharp-cornered square tube (``A = b^2 - (b - 2t)^2``,
    ``I = (b^4 - (b - 2t)^4) / 12``); rolled tubes have rounded corners, a few % less.
    Damping ratios of 0.3 to 0.6 % are typical of welded steel at tap-test levels
    (common practice).

    Examples
    --------
    >>> FrameSettings().hits_per_node
    3
    """

    column_height_m: float = 1.0
    beam_length_m: float = 1.2
    tube_width_m: float = 0.05
    tube_wall_m: float = 0.003
    youngs_modulus_pa: float = 200e9
    density_kg_m3: float = 7850.0
    column_elements: int = 8
    beam_elements: int = 10
    damping_ratios: tuple[float, ...] = (0.006, 0.004, 0.005, 0.003, 0.004, 0.003, 0.004, 0.003)
    sample_rate_hz: float = 2048.0
    n_samples: int = 4096
    n_pretrigger: int = 205
    max_mode_fraction_of_fs: float = 0.4
    sensor_nodes: tuple[str, ...] = ("n14", "n09")
    sensor_directions: tuple[str, ...] = ("+Z", "+X")
    sensor_names: tuple[str, ...] = ("beam-mid", "corner")
    hits_per_node: int = 3
    double_hit: int = 14
    peak_force_range_n: tuple[float, float] = (40.0, 120.0)
    nominal_peak_force_n: float = 80.0
    nominal_duration_s: float = 0.6e-3
    duration_jitter_rel: float = 0.05
    start_range_s: tuple[float, float] = (-0.1e-3, 0.0)
    double_hit_delay_s: float = 3.5e-3
    double_hit_ratio: float = 0.35
    response_snr_db: float = 40.0
    force_snr_db: float = 50.0

    def as_json(self) -> dict[str, Any]:
        """JSON-safe dict (tuples become lists)."""
        return {k: list(v) if isinstance(v, tuple) else v for k, v in asdict(self).items()}


#: The settings of the demo.
FRAME_SETTINGS = FrameSettings()


def frame_element(xa: float, za: float, xb: float, zb: float, *, ea: float, ei: float,
                  rho_a: float) -> tuple[np.ndarray, np.ndarray]:
    """Stiffness and consistent mass of a 2-D Euler-Bernoulli frame element, global DOFs.

    DOFs ``(U_X, U_Z, theta)`` at node a, then at node b, in the X-Z plane. In the local
    frame (``u`` along the element, ``w`` across it) the axial bar has ``EA/L [[1, -1],
    [-1, 1]]`` and mass ``rho A L / 6 [[2, 1], [1, 2]]``; the Hermite cubic beam has
    ``EI/L^3 [[12, 6L, -12, 6L], ...]`` and the consistent mass ``rho A L / 420 [[156,
    22L, 54, -13L], ...]``; both are rotated by ``T^T k T`` (Przemieniecki 1968, ch. 5 and
    11; Cook et al. 2002, ch. 2 and 11; from memory).

    Examples
    --------
    >>> k, m = frame_element(0, 0, 1, 0, ea=1.0, ei=1.0, rho_a=420.0)
    >>> float(k[0, 0]), float(k[1, 1]), float(m[1, 1])
    (1.0, 12.0, 156.0)
    """
    dx, dz = xb - xa, zb - za
    length = float(np.hypot(dx, dz))
    if not length > 0:
        raise ModalnbError("frame element of zero length.")
    c, s = dx / length, dz / length
    L = length
    k = np.zeros((6, 6))
    m = np.zeros((6, 6))
    ax = [0, 3]
    bd = [1, 2, 4, 5]
    k[np.ix_(ax, ax)] = ea / L * np.array([[1.0, -1.0], [-1.0, 1.0]])
    m[np.ix_(ax, ax)] = rho_a * L / 6.0 * np.array([[2.0, 1.0], [1.0, 2.0]])
    k[np.ix_(bd, bd)] = ei / L**3 * np.array([
        [12.0, 6 * L, -12.0, 6 * L], [6 * L, 4 * L * L, -6 * L, 2 * L * L],
        [-12.0, -6 * L, 12.0, -6 * L], [6 * L, 2 * L * L, -6 * L, 4 * L * L]])
    m[np.ix_(bd, bd)] = rho_a * L / 420.0 * np.array([
        [156.0, 22 * L, 54.0, -13 * L], [22 * L, 4 * L * L, 13 * L, -3 * L * L],
        [54.0, 13 * L, 156.0, -22 * L], [-13 * L, -3 * L * L, -22 * L, 4 * L * L]])
    r = np.array([[c, s, 0.0], [-s, c, 0.0], [0.0, 0.0, 1.0]])
    t = np.zeros((6, 6))
    t[:3, :3] = r
    t[3:, 3:] = r
    return t.T @ k @ t, t.T @ m @ t


@dataclass(frozen=True)
class FrameModel:
    """The FE model and its modes.

    Attributes
    ----------
    nodes : tuple of str
    xyz : numpy.ndarray
        Node positions (node, 3), m (y = 0).
    lines : tuple of (str, str)
        The elements.
    fixed : tuple of str
        Nodes whose three DOFs are held.
    frequency_hz : numpy.ndarray
        Undamped natural frequencies of every mode of the free DOFs, ascending.
    shapes : numpy.ndarray
        Mass-normalised shapes, shape (mode, node, 3): U_X, U_Z (1/sqrt(kg)) and the
        rotation (rad/sqrt(kg)) at every node (zero at fixed nodes). Sign: the largest
        translation of each mode is positive.
    """

    nodes: tuple[str, ...]
    xyz: np.ndarray
    lines: tuple[tuple[str, str], ...]
    fixed: tuple[str, ...]
    frequency_hz: np.ndarray
    shapes: np.ndarray

    def translation(self, node: str, direction: str) -> np.ndarray:
        """The shapes along a direction (``+X``, ``-Z``, ...) at `node`, over modes (sign applied)."""
        d = direction.strip()
        sign = -1.0 if d.startswith("-") else 1.0
        axis = {"X": 0, "Z": 1}[d.lstrip("+-").upper()]
        return sign * self.shapes[:, self.nodes.index(node), axis]


def _solve(nodes: list[str], xz: np.ndarray, elements: list[tuple[int, int]], fixed: list[int],
           *, ea: float, ei: float, rho_a: float) -> tuple[np.ndarray, np.ndarray]:
    """Assemble K and M, hold the fixed DOFs, ``scipy.linalg.eigh``; shapes (mode, node, 3)."""
    import scipy.linalg

    n = len(nodes)
    K = np.zeros((3 * n, 3 * n))
    M = np.zeros((3 * n, 3 * n))
    for a, b in elements:
        ke, me = frame_element(xz[a, 0], xz[a, 1], xz[b, 0], xz[b, 1], ea=ea, ei=ei, rho_a=rho_a)
        idx = [3 * a, 3 * a + 1, 3 * a + 2, 3 * b, 3 * b + 1, 3 * b + 2]
        K[np.ix_(idx, idx)] += ke
        M[np.ix_(idx, idx)] += me
    held = {3 * i + j for i in fixed for j in range(3)}
    free = np.array([d for d in range(3 * n) if d not in held])
    lam, vec = scipy.linalg.eigh(K[np.ix_(free, free)], M[np.ix_(free, free)])
    full = np.zeros((lam.size, 3 * n))
    full[:, free] = vec.T
    shapes = full.reshape(lam.size, n, 3)
    for k in range(lam.size):
        trans = shapes[k, :, :2].ravel()
        if trans[np.argmax(np.abs(trans))] < 0:
            shapes[k] *= -1
    return np.sqrt(np.maximum(lam, 0.0)) / (2 * np.pi), shapes


def _section(s: FrameSettings) -> tuple[float, float, float]:
    b, t = s.tube_width_m, s.tube_wall_m
    area = b * b - (b - 2 * t) ** 2
    inertia = (b**4 - (b - 2 * t) ** 4) / 12.0
    return s.youngs_modulus_pa * area, s.youngs_modulus_pa * inertia, s.density_kg_m3 * area


def frame_model(settings: FrameSettings = FRAME_SETTINGS) -> FrameModel:
    """The portal frame's FE model and its modes (``scipy.linalg.eigh``).

    Examples
    --------
    >>> mdl = frame_model()
    >>> len(mdl.nodes), mdl.fixed, round(float(mdl.frequency_hz[0]))
    (27, ('n01', 'n27'), 46)
    """
    s = settings
    h, w = s.column_height_m, s.beam_length_m
    nc, nb = s.column_elements, s.beam_elements
    pts = [(0.0, h * i / nc) for i in range(nc + 1)]                      # left column, up
    pts += [(w * i / nb, h) for i in range(1, nb)]                         # beam interior
    pts += [(w, h * (nc - i) / nc) for i in range(nc + 1)]                 # right column, down
    nodes = [f"n{i + 1:02d}" for i in range(len(pts))]
    xz = np.array(pts)
    elements = [(i, i + 1) for i in range(len(pts) - 1)]
    fixed = [0, len(pts) - 1]
    ea, ei, rho_a = _section(s)
    f, shapes = _solve(nodes, xz, elements, fixed, ea=ea, ei=ei, rho_a=rho_a)
    xyz = np.column_stack([xz[:, 0], np.zeros(len(pts)), xz[:, 1]])
    return FrameModel(tuple(nodes), xyz, tuple((nodes[a], nodes[b]) for a, b in elements),
                      (nodes[0], nodes[-1]), f, shapes)


def beam_line_model(length: float, n_elements: int, *, ea: float, ei: float, rho_a: float,
                    clamped: bool) -> np.ndarray:
    """Natural frequencies (Hz) of one straight member of :func:`frame_element` s along X,
    clamped at x = 0 (``clamped``) or free at both ends; for checks against the handbook.

    Examples
    --------
    >>> f = beam_line_model(1.0, 10, ea=1e9, ei=1e3, rho_a=1.0, clamped=True)
    >>> round(float(f[0]), 2)  # (1.8751^2 / 2 pi) sqrt(EI / rho A) = 17.696 (Blevins 1979)
    17.7
    """
    xz = np.column_stack([np.linspace(0.0, length, n_elements + 1), np.zeros(n_elements + 1)])
    nodes = [str(i) for i in range(n_elements + 1)]
    f, _ = _solve(nodes, xz, [(i, i + 1) for i in range(n_elements)], [0] if clamped else [],
                  ea=ea, ei=ei, rho_a=rho_a)
    return f


# ---------------------------------------------------------------- the test
@dataclass(frozen=True)
class _Hit:
    node: str
    direction: str
    pulses: list[HalfSinePulse]


def _plan(s: FrameSettings, mdl: FrameModel, rng: np.random.Generator) -> list[_Hit]:
    free = [n for n in mdl.nodes if n not in mdl.fixed]
    beam_z = mdl.xyz[:, 2].max()
    hits = []
    label = 0
    for n in free:
        i = mdl.nodes.index(n)
        x, z = mdl.xyz[i, 0], mdl.xyz[i, 2]
        if z >= beam_z - 1e-12 and 0 < x < s.beam_length_m:
            direction = "+Z"
        elif x < s.beam_length_m / 2:
            direction = "+X"
        else:
            direction = "-X"
        for _ in range(s.hits_per_node):
            label += 1
            peak = float(rng.uniform(*s.peak_force_range_n))
            dur = float(s.nominal_duration_s * (peak / s.nominal_peak_force_n) ** (-1 / 6)
                        * (1 + s.duration_jitter_rel * rng.standard_normal()))
            start = float(rng.uniform(*s.start_range_s))
            pulses = [HalfSinePulse(start, dur, peak)]
            if label == s.double_hit:
                second = s.double_hit_ratio * peak
                pulses.append(HalfSinePulse(start + s.double_hit_delay_s, dur, second))
            hits.append(_Hit(n, direction, pulses))
    return hits


def _kept(s: FrameSettings, mdl: FrameModel) -> int:
    kept = int(np.sum(mdl.frequency_hz < s.max_mode_fraction_of_fs * s.sample_rate_hz))
    if kept > len(s.damping_ratios):
        raise ModalnbError(f"roving demo: {kept} modes below 0.4 fs but only "
                           f"{len(s.damping_ratios)} damping ratios.")
    return kept


def _acceleration(s: FrameSettings, mdl: FrameModel, t: np.ndarray, hit: _Hit,
                  n_modes: int) -> np.ndarray:
    """Noise-free accelerations of the sensors (sensor sign applied), (channel, time)."""
    drive = mdl.translation(hit.node, hit.direction)
    sens = np.array([mdl.translation(n, d) for n, d in zip(s.sensor_nodes, s.sensor_directions,
                                                           strict=True)])
    out = np.zeros((len(s.sensor_nodes), t.size))
    for k in range(n_modes):
        _, _, a = sdof_half_sine_response(t, hit.pulses, omega_n=2 * np.pi * mdl.frequency_hz[k],
                                          zeta=s.damping_ratios[k], gain=float(drive[k]))
        out += sens[:, k, None] * a[None]
    return out


def band_limited_force(t: np.ndarray, pulses: list[HalfSinePulse]) -> np.ndarray:
    """Half-sine pulses as an anti-aliased force channel samples them, in N.

    A hammer pulse of 0.6 ms spans about one sample at 2048 Hz: sampling the pulse itself
    would give a force whose sample sum (the engine's force integral) misses its area by up
    to tens of percent from hit to hit. A real acquisition low-pass filters the channel
    before sampling; here the filter is ideal (zero-phase, cut at fs/2, as the linear-phase
    decimation filters of sigma-delta converters nearly are): the samples are the inverse
    DFT of the pulse's continuous Fourier transform
    ``F(w) = P (pi/T) (1 + exp(-i w T)) exp(-i w t0) / ((pi/T)^2 - w^2)`` on the record's
    frequency grid, so their sum times dt is the pulse's area ``2 P T / pi`` exactly.

    Examples
    --------
    >>> t = np.arange(4096) / 2048.0
    >>> f = band_limited_force(t, [HalfSinePulse(0.1, 0.6e-3, 100.0)])
    >>> round(float(f.sum() / 2048.0 / (2 * 100.0 * 0.6e-3 / np.pi)), 9)
    1.0
    """
    t = np.asarray(t, dtype=float)
    n, dt = t.size, float(t[1] - t[0])
    w = 2 * np.pi * np.fft.rfftfreq(n, dt)
    spec = np.zeros(w.size, dtype=complex)
    for p in pulses:
        a = np.pi / p.duration_s
        den = a**2 - w**2
        near = np.abs(den) < 1e-9 * a**2  # the removable point w = pi / T: F = -i P T / 2
        safe = np.where(near, 1.0, den)
        f = np.where(near, -0.5j * p.duration_s,
                     a * (1 + np.exp(-1j * w * p.duration_s)) / safe)
        spec += p.peak_n * f * np.exp(-1j * w * (p.start_s - t[0]))
    return np.fft.irfft(spec / dt, n=n)


def roving_campaign(seed: int = ROVING_SEED, settings: FrameSettings = FRAME_SETTINGS
                    ) -> tuple[xr.Dataset, dict[str, Any], FrameModel]:
    """Generate the roving-hammer test of the Kestrel frame: records, truth, FE model.

    Parameters
    ----------
    seed : int
        Seed of ``numpy.random.default_rng`` (hit forces, timing, noise).
    settings : FrameSettings

    Returns
    -------
    records : xarray.Dataset
        75 hits x 2 channels; channel coords ``node``, ``direction``, ``x, y, z``; hit
        coords ``excitation_node``, ``excitation_direction``.
    truth : dict
        JSON-safe: frequencies, damping ratios, mass-normalised shapes at every hit
        node-direction and sensor, the driving point, the double hit, the noise.
    model : FrameModel

    Examples
    --------
    >>> ds, truth, mdl = roving_campaign()
    >>> dict(ds["response"].sizes), truth["double_hit"]["hit"]
    ({'hit': 75, 'channel': 2, 'time': 4096}, 14)
    """
    s = settings
    rng = np.random.default_rng(seed)
    mdl = frame_model(s)
    n_modes = _kept(s, mdl)
    t = (np.arange(s.n_samples) - s.n_pretrigger) / s.sample_rate_hz
    plan = _plan(s, mdl, rng)
    drive_i = s.sensor_nodes[0]
    nominal = _Hit(drive_i, s.sensor_directions[0], [HalfSinePulse(0.0, s.nominal_duration_s,
                                                                   s.nominal_peak_force_n)])
    nom = _acceleration(s, mdl, t, nominal, n_modes)
    resp_std = float(np.sqrt(np.mean(nom[:, t >= 0] ** 2))) * 10 ** (-s.response_snr_db / 20)
    force_std = s.nominal_peak_force_n * 10 ** (-s.force_snr_db / 20)
    response = np.empty((len(plan), len(s.sensor_nodes), t.size))
    force = np.empty((len(plan), t.size))
    for i, hit in enumerate(plan):
        response[i] = _acceleration(s, mdl, t, hit, n_modes) + resp_std * rng.standard_normal(
            (len(s.sensor_nodes), t.size))
        force[i] = band_limited_force(t, hit.pulses) + force_std * rng.standard_normal(t.size)
    pos = np.array([mdl.xyz[mdl.nodes.index(n)] for n in s.sensor_nodes])
    ds = records_from_arrays(
        response, float(s.sample_rate_hz), channels=list(s.sensor_names), force=force,
        t0=float(t[0]), node=list(s.sensor_nodes), direction=list(s.sensor_directions),
        position=pos,
        attrs={"title": "modalnb roving-hammer demo: Kestrel welded frame (invented data)",
               "source": f"modalnb.demo.roving_campaign(seed={int(seed)})", "seed": int(seed)})
    ds = ds.assign_coords(
        excitation_node=("hit", np.array([h.node for h in plan], dtype=object)),
        excitation_direction=("hit", np.array([h.direction for h in plan], dtype=object)))
    ds = validate_records(ds)
    return ds, _truth(s, mdl, plan, n_modes, int(seed), resp_std, force_std), mdl


def _truth(s: FrameSettings, mdl: FrameModel, plan: list[_Hit], n_modes: int, seed: int,
           resp_std: float, force_std: float) -> dict[str, Any]:
    dofs = list(dict.fromkeys([(h.node, h.direction) for h in plan]
                              + list(zip(s.sensor_nodes, s.sensor_directions, strict=True))))
    modes = []
    for k in range(n_modes):
        modes.append({
            "mode": k + 1,
            "frequency_hz": float(mdl.frequency_hz[k]),
            "damping_ratio": float(s.damping_ratios[k]),
            "mass_normalised_shape": {f"{n}{d}": float(mdl.translation(n, d)[k]) for n, d in dofs},
            "nodal_motion_x_z": [[float(v) for v in mdl.shapes[k, i, :2]]
                                 for i in range(len(mdl.nodes))],
        })
    return {
        "scenario": "Kestrel welded frame, roving-hammer test",
        "invented_data": True,
        "generator": {"function": "modalnb.demo.roving_campaign", "seed": seed,
                      "settings": s.as_json()},
        "model": ("planar portal frame of Euler-Bernoulli frame elements with consistent mass "
                  "(Przemieniecki 1968; Cook et al. 2002); scipy.linalg.eigh(K, M), shapes "
                  "mass-normalised (phi^T M phi = 1, units 1/sqrt(kg))"),
        "conventions": {
            "mass_normalised_shape": ("value of phi along the named direction (sign applied: "
                                      "'-X' is minus the +X motion), key '<node><direction>'"),
            "nodal_motion_x_z": "phi along +X and +Z at every node of 'nodes'",
        },
        "nodes": list(mdl.nodes),
        "fixed_nodes": list(mdl.fixed),
        "driving_point": f"{s.sensor_nodes[0]}{s.sensor_directions[0]}",
        "channels": list(s.sensor_names),
        "modes": modes,
        "excluded_modes": [{"mode": k + 1, "frequency_hz": float(mdl.frequency_hz[k])}
                           for k in range(n_modes, min(n_modes + 2, mdl.frequency_hz.size))],
        "excluded_modes_reason": "at or above 0.4 fs: removed by the (ideal) anti-alias filter",
        "hits": [{"hit": i + 1, "node": h.node, "direction": h.direction,
                  "pulses": [asdict(p) for p in h.pulses]} for i, h in enumerate(plan)],
        "double_hit": {"hit": int(s.double_hit), "node": plan[s.double_hit - 1].node,
                       "delay_s": s.double_hit_delay_s, "ratio": s.double_hit_ratio},
        "noise": {"response_std_m_s2": resp_std, "force_std_n": force_std},
    }


def _csv(rows: list[list[Any]]) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    return buf.getvalue()


def write_roving_demo(folder: str | os.PathLike[str], *, seed: int = ROVING_SEED
                      ) -> dict[str, Path]:
    """Generate the roving demo and write its files (atomically) into `folder`.

    Files (:data:`ROVING_FILES`): ``roving_records.nc`` (the record set), ``roving_truth.json``
    (the FE truth), ``frame_nodes.csv`` / ``frame_lines.csv`` (the geometry table,
    :func:`modalnb.geometry.read_geometry`), and the FE modes in the layout of
    :func:`modalnb.pair_modes` (``frame_model_modes.csv``, ``frame_model_shapes.csv``).

    Examples
    --------
    >>> import tempfile
    >>> sorted(write_roving_demo(tempfile.mkdtemp()))
    ['lines', 'model_modes', 'model_shapes', 'nodes', 'records', 'truth']
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    ds, truth, mdl = roving_campaign(seed)
    paths = {k: folder / v for k, v in ROVING_FILES.items()}
    atomic_write_with(paths["records"], lambda p: ds.to_netcdf(p, engine="h5netcdf"))
    atomic_write_text(paths["truth"], json.dumps(truth, indent=1) + "\n")
    atomic_write_text(paths["nodes"], _csv([["node", "x", "y", "z"]] + [
        [n, repr(float(p[0])), repr(float(p[1])), repr(float(p[2]))]
        for n, p in zip(mdl.nodes, mdl.xyz, strict=True)]))
    atomic_write_text(paths["lines"], _csv([["node_a", "node_b"]] + [list(ln) for ln in mdl.lines]))
    atomic_write_text(paths["model_modes"], _csv([["mode", "frequency_hz"]] + [
        [m["mode"], repr(m["frequency_hz"])] for m in truth["modes"]]))
    shape_rows = [["mode", "node", "direction", "value"]]
    for m in truth["modes"]:
        for i, n in enumerate(mdl.nodes):
            if n in mdl.fixed:
                continue
            for axis, ux in zip(("+X", "+Z"), m["nodal_motion_x_z"][i], strict=True):
                shape_rows.append([m["mode"], n, axis, repr(ux)])
    atomic_write_text(paths["model_shapes"], _csv(shape_rows))
    return paths
