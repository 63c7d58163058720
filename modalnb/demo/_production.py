"""Campaign demo: end-of-line tap test of cast brackets, a scenario of our own.

The parts
---------
A foundry casts a small mounting bracket; every part is tapped at the end of the line.
The bracket is modelled as a chain of three lumped masses (lug, web, flange: 0.5 kg
each), the lug tied to the rigid fixture by a spring, each further mass to the previous
one (a grounded chain, free at the flange), with Rayleigh damping of 0.8 % at the first
and the third mode (``C = a M + b K``; Chopra 2012, *Dynamics of Structures*, sect. 11.4;
from memory). The nominal part has modes near 190, 530 and 770 Hz. Casting scatter:
every mass and spring of a part is the nominal value times ``U(0.99, 1.01)``. A few parts
(``cracked`` in the truth) have a crack at the lug root: their fixture spring is 30 %
softer, which lowers the first mode by about 10 %, the second by about 5.5 % and the
third by about 1.5 %.

The test
--------
Three accelerometers (``lug``, ``web``, ``flange``), one per mass; the hammer strikes
the flange (a half-sine force of 1 ms, a medium tip, peak ``U(0.5, 1.5) x 50 N``); three hits per
part, 1 s at 2048 Hz with 10 ms pre-trigger; white noise 40 dB below each signal's RMS.

Truth
-----
``scipy.linalg.eig`` of the state matrix ``[[0, I], [-M^-1 K, -M^-1 C]]``: natural
frequency ``|lambda| / 2 pi``, damping ratio ``-Re(lambda) / |lambda|``. The responses
are the exact modal superposition of that eigen-solution for the half-sine force
(:mod:`modalnb.testing.scenarios`, whose closed form is checked there against
``scipy.integrate.solve_ivp``).

Everything is generated from ``numpy.random.default_rng([seed, part])``: the same seed
gives the same files to the last bit on one machine (LAPACK builds may differ by ~1e-12).
This is invented data for demonstrations and tests only.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._files import atomic_write_text
from ..testing.scenarios import ChainModel, state_space_modes

__all__ = ["LumpedModel", "lumped_model", "lumped_records", "bracket_model",
           "production_campaign", "PRODUCTION_CHANNELS"]

PRODUCTION_CHANNELS = ("lug", "web", "flange")
_NOMINAL_MASS = 0.5  # kg
_F_TOP_HZ = 850.0  # 2 sqrt(k/m) / 2 pi of the nominal chain
_DAMPING = 0.008
_CRACK_FACTOR = 0.70  # fixture spring of a cracked part


#: The eigen-solution container of the generated campaigns (matrices, eigenvalues, right
#: and left eigenvectors; ``frequency_hz``, ``damping_ratio``).
LumpedModel = ChainModel


def lumped_model(M: np.ndarray, K: np.ndarray, damping_ratio: float | None = None,
                 C: np.ndarray | None = None) -> LumpedModel:
    """Eigen-solution of ``M x'' + C x' + K x = 0`` (``scipy.linalg.eig`` of the state matrix).

    With `damping_ratio`, ``C`` is Rayleigh damping giving that ratio at the lowest and
    the highest mode.

    Examples
    --------
    >>> mdl = lumped_model(np.eye(1), np.array([[(2 * np.pi * 10.0) ** 2]]), 0.01)
    >>> round(float(mdl.frequency_hz[0]), 6), round(float(mdl.damping_ratio[0]), 6)
    (10.0, 0.01)
    """
    import scipy.linalg

    M = np.asarray(M, float)
    K = np.asarray(K, float)
    n = M.shape[0]
    if C is None:
        w = np.sqrt(np.sort(scipy.linalg.eigvalsh(K, M)))
        w1, w2 = w[0], w[-1]
        z = float(damping_ratio or 0.0)
        if n == 1 or w1 == w2:
            a, b = 2 * z * w1, 0.0
        else:
            a, b = 2 * z * w1 * w2 / (w1 + w2), 2 * z / (w1 + w2)
        C = a * M + b * K
    return state_space_modes(M, C, K)


def lumped_records(model: LumpedModel, force_at: Sequence[float], *, n_hits: int = 3,
                   sample_rate: float = 2048.0, n_samples: int = 2048, pretrigger_s: float = 0.01,
                   contact_s: float = 1.0e-3, snr_db: float = 40.0,
                   channels: Sequence[str] | None = None, seed: Any = 0) -> Any:
    """Hammer records of a lumped model: one channel per mass, the force spread as `force_at`.

    Exact modal superposition of the eigen-solution for a half-sine force (the closed form
    of :func:`modalnb.testing.scenarios._modal_coordinate`), white noise at `snr_db`.

    Examples
    --------
    >>> mdl = bracket_model()
    >>> rec = lumped_records(mdl, [0, 0, 1], n_samples=512)
    >>> dict(rec.sizes)["channel"], dict(rec.sizes)["hit"]
    (3, 3)
    """
    from ..records import records_from_arrays
    from ..testing.scenarios import _modal_coordinate
    from ..testing.synth import add_noise

    rng = np.random.default_rng(seed)
    n = model.M.shape[0]
    fs = float(sample_rate)
    t0 = -round(pretrigger_s * fs) / fs
    t = t0 + np.arange(int(n_samples)) / fs
    lam, vr, wl = model.eigenvalues, model.right, model.left
    B = np.zeros(2 * n)
    B[n:] = np.linalg.solve(model.M, np.asarray(force_at, float))
    c = (wl.conj().T @ B) / np.einsum("ij,ij->j", wl.conj(), vr)
    phi = vr[:n]
    q = _modal_coordinate(lam, t, contact_s)
    pulse = np.where((t >= 0) & (t <= contact_s), np.sin(np.pi * np.clip(t, 0, None) / contact_s), 0.0)
    dq = lam[:, None] * q + pulse[None, :]
    unit = 2 * np.real((phi * (lam * c)[None, :]) @ dq)  # channel x time, per newton
    levels = rng.uniform(0.5, 1.5, int(n_hits)) * 50.0
    clean = levels[:, None, None] * unit[None]
    resp, _ = add_noise(clean, snr_db, rng, time=t)
    force = levels[:, None] * pulse[None, :]
    fsig = 1e-3 * np.sqrt(np.mean(force[:, t >= 0] ** 2, axis=-1, keepdims=True))
    force = force + fsig * rng.standard_normal(force.shape)
    names = list(channels) if channels is not None else [f"m{k + 1}" for k in range(n)]
    return records_from_arrays(resp, fs, force=force, t0=t0, channels=names)


def bracket_model(scatter: Sequence[float] | None = None, cracked: bool = False) -> LumpedModel:
    """The bracket: a grounded three-mass chain (lug, web, flange).

    Parameters
    ----------
    scatter : sequence of 6 float, optional
        Factors on the three masses, then the three springs (casting scatter); default 1.
    cracked : bool
        The fixture spring 30 % softer (a crack at the lug root).

    Examples
    --------
    >>> np.round(bracket_model().frequency_hz, 0)
    array([189., 530., 766.])
    """
    s = np.ones(6) if scatter is None else np.asarray(scatter, float)
    m = _NOMINAL_MASS * s[:3]
    k0 = _NOMINAL_MASS * (np.pi * _F_TOP_HZ) ** 2
    k = k0 * s[3:]
    if cracked:
        k = k.copy()
        k[0] *= _CRACK_FACTOR
    K = np.array([[k[0] + k[1], -k[1], 0.0], [-k[1], k[1] + k[2], -k[2]], [0.0, -k[2], k[2]]])
    return lumped_model(np.diag(m), K, _DAMPING)


def production_campaign(folder: str | os.PathLike[str], *, n_parts: int = 40,
                        cracked: Sequence[int] | None = None, seed: int = 2026,
                        n_samples: int = 2048) -> Path:
    """Write the bracket campaign: ``parts/P<nnn>.nc``, ``manifest.csv``, ``truth.json``.

    Parameters
    ----------
    folder : path
        Created if needed.
    n_parts : int
        Parts off the line (default 40).
    cracked : sequence of int, optional
        Part numbers (1-based) with a crack; default every 9th part from the 5th
        (5, 14, 23, 32, ...), i.e. 4 of 40.
    seed : int
        Seed of the scatter and the noise.
    n_samples : int
        Samples per record (2048 = 1 s).

    Returns
    -------
    Path
        The manifest (``set,records,part_number,serial,shift``).

    Examples
    --------
    >>> import tempfile
    >>> m = production_campaign(tempfile.mkdtemp(), n_parts=2, n_samples=256)
    >>> m.read_text().splitlines()[1]
    'P001,parts/P001.nc,1,B26-0001,early'
    """
    from ..io import save_records

    out = Path(folder)
    (out / "parts").mkdir(parents=True, exist_ok=True)
    crack = set(range(5, n_parts + 1, 9)) if cracked is None else {int(c) for c in cracked}
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["set", "records", "part_number", "serial", "shift"])
    truth: dict[str, Any] = {
        "description": "cast brackets, end-of-line tap test (generated; see modalnb.demo._production)",
        "truth_source": "scipy.linalg.eig of the state matrix of each part's lumped model",
        "nominal_frequency_hz": bracket_model().frequency_hz.tolist(),
        "parts": {},
    }
    for p in range(1, n_parts + 1):
        rng = np.random.default_rng([seed, p])
        scatter = rng.uniform(0.99, 1.01, 6)
        mdl = bracket_model(scatter, cracked=p in crack)
        label = f"P{p:03d}"
        rec = lumped_records(mdl, [0.0, 0.0, 1.0], n_samples=n_samples, channels=PRODUCTION_CHANNELS,
                             seed=[seed, p, 1])
        save_records(rec, out / "parts" / f"{label}.nc")
        shift = ("early", "late", "night")[(p - 1) * 3 // max(n_parts, 1)]
        w.writerow([label, f"parts/{label}.nc", p, f"B26-{p:04d}", shift])
        truth["parts"][label] = {"cracked": p in crack, "frequency_hz": mdl.frequency_hz.tolist(),
                                 "damping_ratio": mdl.damping_ratio.tolist()}
    atomic_write_text(out / "truth.json", json.dumps(truth, indent=2) + "\n")
    return atomic_write_text(out / "manifest.csv", buf.getvalue())
