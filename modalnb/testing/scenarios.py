"""Generated hammer campaigns on lumped-mass chains, with truth from the eigen-solution.

A scenario is a chain of ``N`` masses (mass 1 tied to the ground by a spring, each
further mass tied to the previous one, the last end free), viscous dampers parallel to
the springs (Rayleigh damping ``C = a M + b K``, proportional) and optionally one damper
from mass 1 to the ground (non-proportional: complex modes) and a light side oscillator
tuned to a chain mode (two close modes). Every number is ours: the physics is
``M x'' + C x' + K x = f`` (any vibration text, e.g. Rao 2011, *Mechanical Vibrations*,
5th ed., ch. 6; from memory).

Truth
    ``scipy.linalg.eig`` of the state matrix ``A = [[0, I], [-M^-1 K, -M^-1 C]]``:
    natural frequency ``|lambda| / 2 pi``, damping ratio ``-Re(lambda) / |lambda|``, complex
    shape = displacement half of the right eigenvector (Tisseur & Meerbergen 2001, "The
    quadratic eigenvalue problem", SIAM Review 43(2):235-286; from memory).

Response
    Exact modal superposition from the eigen-solution (not ``lsim`` / ``solve_ivp``): with
    left eigenvectors ``w_r`` the state is ``z(t) = sum_r v_r (w_r^H B / w_r^H v_r) q_r(t)``,
    ``q_r(t) = int_0^t exp(lambda_r (t - s)) f(s) ds``, and for the half-sine force
    ``f(s) = F sin(pi s / T_c)`` (0 <= s <= T_c) that integral has a closed form (written in
    :func:`_modal_coordinate`). It is exact at every sample (no integration error, no
    step-size choice, and cheap for 40 masses x 16 hits), and it lets the modes above the
    band be removed exactly. Its correctness is checked in the tests against
    ``scipy.integrate.solve_ivp`` of ``M x'' + C x' + K x = f`` on a small chain.

Anti-alias filter
    An ideal low-pass at the top of the analysed band is modelled by dropping the
    modal terms whose damped frequency ``|Im lambda| / 2 pi`` lies above it; the kept
    modes pass unchanged (ideal: unit gain, zero phase in the pass band). The tails of the
    dropped modes' spectra below the cut-off are dropped with them (a small, stated
    simplification; their truth is then simply "not in the record").

Acceleration
    ``x'' = sum_r phi_r lambda_r c_r (lambda_r q_r(t) + f(t))`` over the kept modes
    (``phi_r`` the displacement half of ``v_r``, ``c_r = w_r^H B / w_r^H v_r``), i.e. the
    derivative of the modal velocity, exact for the kept modes.

Noise
    White Gaussian noise per signal at the scenario's SNR (RMS of the clean response over
    ``t >= 0`` / noise RMS, :func:`modalnb.testing.synth.add_noise`), on the whole record
    including the pre-trigger; the force gets noise 60 dB below its peak RMS.
    An exponential window ``exp(-t / tau)`` (``t >= 0``) is applied after the noise,
    as an analyser does, and recorded in the ``exponential_window_tau_s`` attribute.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace
from typing import Any

import numpy as np

from .._utils import BAND_LIMIT_FRACTION
from .synth import add_noise

__all__ = ["Scenario", "ChainModel", "chain_model", "campaign", "SUITE", "QUICK_SUITE",
           "roving_chain", "StruckObject", "STRUCK_PARTIALS", "DULL_PARTIALS", "struck_object", "write_struck_wav", "LONG_SUITE"]


@dataclass(frozen=True)
class Scenario:
    """The parameters of one generated campaign (every field has a documented default).

    Parameters
    ----------
    name : str
        Label in the bench tables.
    n_masses : int
        Chain length (4 to 40 in the suite).
    n_channels : int
        Accelerometers, spread evenly along the chain; with more channels than masses
        some masses carry two sensors (independent noise).
    n_hits : int
        Hits, each at the same mass with a force amplitude drawn from U(0.5, 1.5).
    sample_rate : float
        Hz.
    n_samples : int
        Samples per record, pre-trigger included.
    pretrigger_s : float
        Record start is ``-pretrigger_s`` (the force starts at t = 0).
    contact_s : float
        Duration of the half-sine force (0.1-1 ms is a steel-to-hard-tip contact;
        common practice).
    snr_db : float
        SNR of every response signal.
    damping_ratio : float
        Rayleigh damping fixed to this value at the first and the last in-band mode.
    ground_damper : float
        Damper from mass 1 to the ground, as a fraction of ``2 sqrt(k_1 m_1)``
        (0 = proportional damping).
    close_modes : bool
        Add a side oscillator (mass 0.01 % of the chain) tuned to the second chain mode at
        the tip mass: the pair is about 1 % apart (2-3 half-power bandwidths at 1 %).
    f_top_hz : float
        ``2 sqrt(k/m) / 2 pi`` of the uniform chain (its highest possible frequency);
        together with `n_masses` it fixes how many modes fall below the band.
    window_tau_s : float or None
        Exponential window time constant (s).
    hit_mass : int or None
        Index of the struck mass (default: the free end).
    channel_masses : tuple of int or None
        The masses carrying the accelerometers (0-based; overrides `n_channels`); default
        `n_channels` masses spread evenly from the grounded end to the free end.
    seed : int
        Seed of ``numpy.random.default_rng`` (masses, stiffness scatter, force levels,
        noise).
    trial : int
        Noise realisation (force levels and noise are drawn from ``[seed, 2, trial]``; the
        structure stays the same).
    """

    name: str = "chain"
    n_masses: int = 8
    n_channels: int = 8
    n_hits: int = 4
    sample_rate: float = 4096.0
    n_samples: int = 4096
    pretrigger_s: float = 0.01
    contact_s: float = 0.4e-3
    snr_db: float = 40.0
    damping_ratio: float = 0.01
    ground_damper: float = 0.0
    close_modes: bool = False
    f_top_hz: float = 2500.0
    window_tau_s: float | None = None
    hit_mass: int | None = None
    channel_masses: tuple[int, ...] | None = None
    seed: int = 0
    trial: int = 0

    @property
    def band(self) -> tuple[float, float]:
        """The analysed band: 5 Hz to ``BAND_LIMIT_FRACTION * sample_rate``."""
        return 5.0, BAND_LIMIT_FRACTION * self.sample_rate

    def as_dict(self) -> dict[str, Any]:
        """The fields as a JSON-safe dict."""
        return asdict(self)


@dataclass
class ChainModel:
    """Mass, damping and stiffness matrices and the eigen-solution of the state matrix."""

    M: np.ndarray
    C: np.ndarray
    K: np.ndarray
    eigenvalues: np.ndarray  # (2n,) complex, one of each conjugate pair kept (Im > 0)
    right: np.ndarray  # (2n, m) right eigenvectors of A for those eigenvalues
    left: np.ndarray  # (2n, m) left eigenvectors (w^H A = lambda w^H)
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def frequency_hz(self) -> np.ndarray:
        """Natural frequencies ``|lambda| / 2 pi`` (Hz), ascending."""
        return np.abs(self.eigenvalues) / (2 * np.pi)

    @property
    def damping_ratio(self) -> np.ndarray:
        """``-Re(lambda) / |lambda|``."""
        return -self.eigenvalues.real / np.abs(self.eigenvalues)

    @property
    def shapes(self) -> np.ndarray:
        """Complex displacement shapes (n_dof, m), each scaled to unit largest entry."""
        phi = self.right[: self.M.shape[0]]
        k = np.argmax(np.abs(phi), axis=0)
        return phi / phi[k, np.arange(phi.shape[1])]

    def state_matrix(self) -> np.ndarray:
        """``[[0, I], [-M^-1 K, -M^-1 C]]``."""
        n = self.M.shape[0]
        mi = np.linalg.inv(self.M)
        return np.block([[np.zeros((n, n)), np.eye(n)], [-mi @ self.K, -mi @ self.C]])


def _matrices(sc: Scenario, rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray, int]:
    n = int(sc.n_masses)
    m = 1.0 * rng.uniform(0.9, 1.1, n)
    k0 = m.mean() * (np.pi * sc.f_top_hz) ** 2  # 2 sqrt(k/m) = 2 pi f_top
    k = k0 * rng.uniform(0.9, 1.1, n)
    n_dof = n + (1 if sc.close_modes else 0)
    M = np.zeros((n_dof, n_dof))
    K = np.zeros((n_dof, n_dof))
    M[np.arange(n), np.arange(n)] = m
    K[0, 0] += k[0]
    for i in range(1, n):
        K[i - 1, i - 1] += k[i]
        K[i, i] += k[i]
        K[i - 1, i] -= k[i]
        K[i, i - 1] -= k[i]
    return M, K, n_dof


def chain_model(sc: Scenario) -> ChainModel:
    """The scenario's matrices and eigen-solution.

    Examples
    --------
    >>> mdl = chain_model(Scenario(n_masses=4, f_top_hz=400.0))
    >>> mdl.frequency_hz.size, bool(np.all(np.diff(mdl.frequency_hz) > 0))
    (4, True)
    """
    import scipy.linalg

    rng = np.random.default_rng([sc.seed, 1])
    M, K, n_dof = _matrices(sc, rng)
    n = int(sc.n_masses)
    if sc.close_modes:
        # side oscillator at the tip, tuned to the second mode of the bare chain
        w2 = np.sqrt(np.sort(scipy.linalg.eigvalsh(K[:n, :n], M[:n, :n])))[min(1, n - 1)]
        ma = 1e-4 * float(np.trace(M))
        ka = ma * w2**2
        M[n, n] = ma
        K[n - 1, n - 1] += ka
        K[n, n] += ka
        K[n - 1, n] -= ka
        K[n, n - 1] -= ka
    w = np.sqrt(np.sort(scipy.linalg.eigvalsh(K, M)))
    f_cut = 2 * np.pi * sc.band[1]
    lo = 2 * np.pi * sc.band[0]
    inband = w[(w > lo) & (w < f_cut)]
    w1, w2 = (inband[0], inband[-1]) if inband.size >= 2 else (w[0], w[min(1, w.size - 1)])
    zeta = float(sc.damping_ratio)
    # Rayleigh: zeta(w) = a/(2w) + b w/2 equal to zeta at w1 and w2 (Chopra 2012,
    # *Dynamics of Structures*, sect. 11.4; from memory)
    a = 2 * zeta * w1 * w2 / (w1 + w2)
    b = 2 * zeta / (w1 + w2)
    C = a * M + b * K
    if sc.ground_damper:
        C[0, 0] += sc.ground_damper * 2 * math.sqrt(K[0, 0] * M[0, 0])
    mdl = state_space_modes(M, C, K)
    mdl.extra["rayleigh"] = (a, b)
    return mdl


def state_space_modes(M: np.ndarray, C: np.ndarray, K: np.ndarray) -> ChainModel:
    """Eigen-solution of ``M x'' + C x' + K x = 0``: ``scipy.linalg.eig`` of the state
    matrix ``[[0, I], [-M^-1 K, -M^-1 C]]``, one eigenvalue of each conjugate pair
    (Im > 0), ascending ``|lambda|``, with right and left eigenvectors.

    Examples
    --------
    >>> w = 2 * np.pi * 10.0
    >>> mdl = state_space_modes(np.eye(1), np.array([[2 * 0.01 * w]]), np.array([[w**2]]))
    >>> round(float(mdl.frequency_hz[0]), 6), round(float(mdl.damping_ratio[0]), 6)
    (10.0, 0.01)
    """
    import scipy.linalg

    M, C, K = (np.asarray(a, float) for a in (M, C, K))
    n = M.shape[0]
    mi = np.linalg.inv(M)
    A = np.block([[np.zeros((n, n)), np.eye(n)], [-mi @ K, -mi @ C]])
    lam, wl, vr = scipy.linalg.eig(A, left=True, right=True)
    keep = lam.imag > 0
    lam, wl, vr = lam[keep], wl[:, keep], vr[:, keep]
    order = np.argsort(np.abs(lam))
    return ChainModel(M, C, K, lam[order], vr[:, order], wl[:, order])


def _modal_coordinate(lam: np.ndarray, t: np.ndarray, tc: float) -> np.ndarray:
    """``q(t) = int_0^min(t,Tc) exp(lam (t-s)) sin(pi s/Tc) ds`` (0 for t < 0), closed form.

    ``int_0^u exp(-lam s) sin(W s) ds = (W - exp(-lam u)(lam sin(W u) + W cos(W u)))
    / (lam^2 + W^2)`` with ``W = pi / Tc`` (integration by parts twice).
    """
    W = np.pi / tc
    tt = np.clip(t, 0.0, None)[None, :]
    u = np.minimum(tt, tc)
    L = lam[:, None]
    den = L**2 + W**2
    # exp(lam t) * (W - exp(-lam u)(...)) written without exp(-lam u) alone (no overflow)
    q = (W * np.exp(L * tt) - np.exp(L * (tt - u)) * (L * np.sin(W * u) + W * np.cos(W * u))) / den
    return np.where(t[None, :] >= 0, q, 0.0)


def campaign(sc: Scenario) -> tuple[Any, dict[str, Any]]:
    """Records of the scenario and their truth.

    Returns
    -------
    records : xarray.Dataset
        From :func:`modalnb.records.records_from_arrays` (response in m/s^2, force in N).
    truth : dict
        ``frequency_hz``, ``damping_ratio`` (the in-band modes, ascending), ``shapes``
        (complex, channel x mode), ``residue`` (complex, hit x channel x mode: the
        acceleration is ``2 Re(R exp(lambda t))`` after the pulse), ``noise_std``
        (hit x channel), ``all_frequency_hz`` (every chain mode), ``masses`` (the channel
        masses), ``scenario``.

    Examples
    --------
    >>> rec, truth = campaign(Scenario(n_masses=4, n_channels=4, n_hits=2, f_top_hz=400.0))
    >>> dict(rec.sizes)["hit"], len(truth["frequency_hz"])
    (2, 4)
    """
    from ..records import records_from_arrays

    mdl = chain_model(sc)
    rng = np.random.default_rng([sc.seed, 2, sc.trial])
    fs = float(sc.sample_rate)
    t0 = -round(sc.pretrigger_s * fs) / fs
    t = t0 + np.arange(int(sc.n_samples)) / fs
    n_dof = mdl.M.shape[0]
    lo, hi = sc.band
    f_d = np.abs(mdl.eigenvalues.imag) / (2 * np.pi)
    kept = f_d < hi  # the ideal anti-alias filter
    inband = kept & (mdl.frequency_hz > lo)
    lam = mdl.eigenvalues[kept]
    vr, wl = mdl.right[:, kept], mdl.left[:, kept]
    hit = sc.n_masses - 1 if sc.hit_mass is None else int(sc.hit_mass)
    B = np.zeros(2 * n_dof)
    B[n_dof + hit] = 1.0 / mdl.M[hit, hit]
    c = (wl.conj().T @ B) / np.einsum("ij,ij->j", wl.conj(), vr)
    if sc.channel_masses is not None:
        masses = np.asarray(sc.channel_masses, int)
        if masses.size == 0 or masses.min() < 0 or masses.max() >= sc.n_masses:
            from .._errors import ModalnbError

            raise ModalnbError(
                f"scenario {sc.name!r}: channel_masses must be indices 0..{sc.n_masses - 1}, "
                f"got {sc.channel_masses!r}."
            )
    else:
        masses = np.round(np.linspace(0, sc.n_masses - 1, int(sc.n_channels))).astype(int)
    phi = vr[:n_dof][masses]  # channel x kept mode
    q = _modal_coordinate(lam, t, sc.contact_s)  # per unit force peak
    pulse = np.where((t >= 0) & (t <= sc.contact_s), np.sin(np.pi * np.clip(t, 0, None) / sc.contact_s), 0.0)
    dq = lam[:, None] * q + pulse[None, :]
    unit = 2 * np.real((phi * (lam * c)[None, :]) @ dq)  # channel x time, per newton
    levels = rng.uniform(0.5, 1.5, int(sc.n_hits)) * 100.0  # peak force (N)
    clean = levels[:, None, None] * unit[None]
    resp, sigma = add_noise(clean, sc.snr_db, rng, time=t)
    force = levels[:, None] * pulse[None, :]
    fsig = 1e-3 * np.sqrt(np.mean(force[:, t >= 0] ** 2, axis=-1, keepdims=True))
    force = force + fsig * rng.standard_normal(force.shape)
    attrs: dict[str, Any] = {}
    if sc.window_tau_s is not None:
        w = np.where(t >= 0, np.exp(-np.clip(t, 0, None) / sc.window_tau_s), 1.0)
        resp = resp * w
        attrs["exponential_window_tau_s"] = float(sc.window_tau_s)
    rec = records_from_arrays(resp, fs, force=force, t0=t0, attrs=attrs)
    # residues after the pulse: q = W exp(lam t)(1 + exp(-lam Tc)) / (lam^2 + W^2) for t >= Tc
    W = np.pi / sc.contact_s
    Q = W * (1 + np.exp(-lam * sc.contact_s)) / (lam**2 + W**2)
    res_unit = phi * (lam**2 * c * Q)[None, :]
    sel = inband[kept]
    residue = levels[:, None, None] * res_unit[None][..., sel]
    truth = {
        "frequency_hz": mdl.frequency_hz[inband],
        "damping_ratio": mdl.damping_ratio[inband],
        "shapes": mdl.shapes[masses][:, inband],
        "residue": residue,
        "eigenvalues": mdl.eigenvalues[inband],
        "noise_std": np.asarray(sigma),
        "all_frequency_hz": mdl.frequency_hz,
        "masses": masses,
        "hit_mass": hit,
        "scenario": sc.as_dict(),
    }
    return rec, truth


def roving_chain(
    n_masses: int = 5,
    *,
    hits_per_node: int = 3,
    sensor_masses: tuple[int, ...] | None = None,
    hit_masses: tuple[int, ...] | None = None,
    snr_db: float = 40.0,
    sample_rate: float = 4096.0,
    n_samples: int = 4096,
    f_top_hz: float = 600.0,
    damping_ratio: float = 0.01,
    contact_s: float = 1e-3,
    sensor_direction: str = "+Z",
    seed: int = 0,
) -> tuple[Any, dict[str, Any]]:
    """A roving-hammer record set on a lumped chain, with its eigen-solution truth.

    The chain of :func:`chain_model` (proportional damping); the hammer strikes every mass
    of `hit_masses` (default all) `hits_per_node` times (peak force U(50, 150) N), the
    accelerometers sit on `sensor_masses` (default the free end); responses by the exact
    modal superposition of :func:`campaign`. Nodes are named ``m1 .. mN`` (mass 1 at the
    grounded end), hits carry ``excitation_node`` and ``excitation_direction`` (+Z).

    The force is the raw sampled half-sine (1 ms = 4 samples at 4096 Hz by default), not
    an anti-aliased one: the sum of its samples underestimates the pulse's integral by
    about 4 %, so residues per unit force (and scaled shapes, modal masses) from these
    records are biased by a few % at the low modes; use a longer contact or a higher
    sample rate when that matters (tests/test_node_shapes.py uses a smooth pulse).

    Returns
    -------
    records : xarray.Dataset
    truth : dict
        ``frequency_hz``, ``damping_ratio`` (the in-band modes), ``mass_normalised``
        (node x mode, real, ``phi^T M phi = 1`` from ``scipy.linalg.eigh(K, M)``, sign:
        largest entry positive), ``modal_mass_kg`` (of the unit-maximum shape), ``nodes``.

    Examples
    --------
    >>> rec, truth = roving_chain(n_masses=3, hits_per_node=2)
    >>> rec.sizes["hit"], rec["excitation_node"].values.tolist()[:3]
    (6, ['m1', 'm1', 'm2'])
    """
    import scipy.linalg

    from ..records import records_from_arrays

    sc = Scenario(n_masses=n_masses, sample_rate=sample_rate, n_samples=n_samples,
                  f_top_hz=f_top_hz, damping_ratio=damping_ratio, contact_s=contact_s,
                  snr_db=snr_db, seed=seed)
    mdl = chain_model(sc)
    rng = np.random.default_rng([seed, 3])
    fs = float(sample_rate)
    t0 = -round(sc.pretrigger_s * fs) / fs
    t = t0 + np.arange(int(n_samples)) / fs
    n = mdl.M.shape[0]
    lo, hi = sc.band
    kept = np.abs(mdl.eigenvalues.imag) / (2 * np.pi) < hi
    inband = kept & (mdl.frequency_hz > lo)
    lam, vr, wl = mdl.eigenvalues[kept], mdl.right[:, kept], mdl.left[:, kept]
    sensors = np.array([n - 1] if sensor_masses is None else sensor_masses, int)
    struck = np.arange(n) if hit_masses is None else np.asarray(hit_masses, int)
    q = _modal_coordinate(lam, t, contact_s)
    pulse = np.where((t >= 0) & (t <= contact_s),
                     np.sin(np.pi * np.clip(t, 0, None) / contact_s), 0.0)
    dq = lam[:, None] * q + pulse[None, :]
    phi = vr[:n][sensors]
    resp, force, nodes = [], [], []
    for j in struck:
        B = np.zeros(2 * n)
        B[n + j] = 1.0 / mdl.M[j, j]
        c = (wl.conj().T @ B) / np.einsum("ij,ij->j", wl.conj(), vr)
        unit = 2 * np.real((phi * (lam * c)[None, :]) @ dq)
        for _ in range(hits_per_node):
            level = rng.uniform(50.0, 150.0)
            clean = level * unit
            noisy, _s = add_noise(clean, snr_db, rng, time=t)
            resp.append(noisy)
            f = level * pulse
            force.append(f + 1e-3 * level * rng.standard_normal(t.size))
            nodes.append(f"m{j + 1}")
    rec = records_from_arrays(
        np.array(resp), fs, force=np.array(force), t0=t0,
        channels=[f"acc_m{s + 1}" for s in sensors],
    )
    rec = rec.assign_coords(
        node=("channel", np.array([f"m{s + 1}" for s in sensors], dtype=object)),
        direction=("channel", np.array([sensor_direction] * sensors.size, dtype=object)),
        excitation_node=("hit", np.array(nodes, dtype=object)),
        excitation_direction=("hit", np.array(["+Z"] * len(nodes), dtype=object)),
    )
    w2, v = scipy.linalg.eigh(mdl.K, mdl.M)
    v = v * np.sign(v[np.argmax(np.abs(v), axis=0), np.arange(v.shape[1])])
    sel = np.flatnonzero(inband)
    mn = v[:, sel]
    unit_max = mn / np.max(np.abs(mn), axis=0)
    truth = {
        "frequency_hz": mdl.frequency_hz[inband],
        "damping_ratio": mdl.damping_ratio[inband],
        "mass_normalised": mn,
        "modal_mass_kg": np.einsum("im,ij,jm->m", unit_max, mdl.M, unit_max),
        "nodes": [f"m{i + 1}" for i in range(n)],
    }
    return rec, truth


def _s(name: str, **kw: Any) -> Scenario:
    return replace(Scenario(name=name), **kw)


#: The bench suite. Each row varies what matters from a 16-mass, 16-channel, 5-hit
#: chain at 4096 Hz (1 s, 10 ms pre-trigger, 0.4 ms contact, 40 dB, 1 % damping).
SUITE: tuple[Scenario, ...] = (
    _s("base", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0, seed=1),
    _s("issue-32x8", n_masses=32, n_channels=32, n_hits=8, f_top_hz=4700.0, seed=2),
    _s("chain-4", n_masses=4, n_channels=4, n_hits=3, f_top_hz=1200.0, seed=3),
    _s("chain-4-ground-damper", n_masses=4, n_channels=4, n_hits=3, f_top_hz=1200.0,
       ground_damper=0.05, seed=4),
    _s("chain-40", n_masses=40, n_channels=40, n_hits=5, f_top_hz=4000.0, seed=5),
    _s("snr-20", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0, snr_db=20.0, seed=6),
    _s("snr-50", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0, snr_db=50.0, seed=7),
    _s("damping-0.2pc", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       damping_ratio=0.002, seed=8),
    _s("damping-5pc", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       damping_ratio=0.05, seed=9),
    _s("channels-4", n_masses=16, n_channels=4, n_hits=5, f_top_hz=3000.0, seed=10),
    _s("channels-64", n_masses=32, n_channels=64, n_hits=3, f_top_hz=4700.0, seed=11),
    _s("hits-16", n_masses=16, n_channels=16, n_hits=16, f_top_hz=3000.0, seed=12),
    _s("pretrigger-0", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       pretrigger_s=0.0, seed=13),
    _s("pretrigger-100ms", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       pretrigger_s=0.1, seed=14),
    _s("close-modes", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       close_modes=True, seed=15),
    _s("ground-damper", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       ground_damper=0.05, seed=16),
    _s("exp-window", n_masses=16, n_channels=16, n_hits=5, f_top_hz=3000.0,
       window_tau_s=0.25, seed=17),
)

#: The CI subset of :data:`SUITE` (``modalnb bench --quick``).
QUICK_SUITE: tuple[Scenario, ...] = tuple(
    s for s in SUITE if s.name in ("base", "chain-4-ground-damper", "close-modes")
)


# --------------------------------------------------------------------------- struck object
#: The partials of a small struck object of our own (a thick-walled brass cup, struck at its
#: rim, heard by two microphones): ``(frequency_hz, Q, amplitude, split)``. An object that is
#: almost axisymmetric has its bending partials in pairs whose degeneracy a slight
#: asymmetry splits (a doublet; e.g. Rossing & Fletcher 2004, *Principles of Vibration and
#: Sound*, 2nd ed., ch. 3 and 12; from memory); ``split`` is the pair's relative separation
#: (None: a single partial). Q = 1 / (2 zeta). Every number is ours.
STRUCK_PARTIALS: tuple[tuple[float, float, float, float | None], ...] = (
    (1312.0, 8000.0, 1.0, 0.0012),
    (2147.5, 10000.0, 0.7, 0.0015),
    (2980.5, 3000.0, 0.45, None),
    (3561.0, 6000.0, 0.5, 0.0010),
    (4420.0, 300.0, 0.3, None),
    (5233.0, 1500.0, 0.3, 0.0013),
    (6702.0, 800.0, 0.25, None),
)

#: The same object with a dull partial: the 4420 Hz partial at Q = 10 (a felt-damped
#: rim; it rings for about a millisecond). The response-only double-hit check takes such
#: a partial for a second tap (it is not in a linear predictor fitted over the record), so
#: the campaigns that hold it are fitted with the hit accepted by the caller.
DULL_PARTIALS: tuple[tuple[float, float, float, float | None], ...] = tuple(
    (f, 10.0, a, s) if f == 4420.0 else (f, q, a, s) for f, q, a, s in STRUCK_PARTIALS
)


@dataclass(frozen=True)
class StruckObject:
    """One recording of the struck object of :data:`STRUCK_PARTIALS` (no force channel).

    Parameters
    ----------
    name : str
        Label in the bench tables.
    sample_rate : float
        Hz (10-51.2 kHz in :data:`LONG_SUITE`).
    duration_s : float
        Record length; the strike is at t = 0 (the record starts there, as a microphone
        recording cut at the strike does).
    n_channels : int
        Microphones; each hears every partial with its own amplitude (U(0.4, 1) of the
        partial's) and phase (U(0, 2 pi)).
    noise_db : float
        White noise RMS below the strongest partial's initial amplitude (dB).
    q_scale : float
        Every Q multiplied by this (a lighter or heavier damped variant).
    partials : tuple
        ``(frequency_hz, Q, amplitude, split)`` per partial (:data:`STRUCK_PARTIALS`).
    seed : int
        Seed of ``numpy.random.default_rng`` (channel gains, phases, noise).
    """

    name: str = "struck"
    sample_rate: float = 44100.0
    duration_s: float = 6.7
    n_channels: int = 2
    noise_db: float = 70.0
    q_scale: float = 1.0
    partials: tuple[tuple[float, float, float, float | None], ...] = STRUCK_PARTIALS
    seed: int = 0

    @property
    def n_samples(self) -> int:
        return int(round(self.duration_s * self.sample_rate))

    def truth(self) -> dict[str, np.ndarray]:
        """``frequency_hz``, ``damping_ratio``, ``amplitude`` of every partial (doublets as two)."""
        f, z, a = [], [], []
        for fk, qk, ak, split in self.partials:
            if fk >= 0.45 * self.sample_rate:
                continue  # above the band of an anti-alias filtered recording
            zk = 1.0 / (2.0 * qk * self.q_scale)
            if split is None:
                f.append(fk), z.append(zk), a.append(ak)
            else:
                # the pair: the lower member, and the upper one a little weaker
                f += [fk, fk * (1.0 + split)]
                z += [zk, zk * 1.1]
                a += [ak, 0.6 * ak]
        return {"frequency_hz": np.array(f), "damping_ratio": np.array(z),
                "amplitude": np.array(a)}


def struck_object(obj: StruckObject = StruckObject()) -> tuple[np.ndarray, dict[str, Any]]:
    """Microphone signals (channel, time) of the struck object and their truth.

    Each channel is a sum of closed-form free decays
    (:func:`modalnb.testing.synth.free_decay`, itself checked against ``solve_ivp``) plus
    white Gaussian noise; the signals are scaled so that the largest absolute sample is 0.5
    (half digital full scale).

    Returns
    -------
    signals : ndarray
        (n_channels, n_samples), float64.
    truth : dict
        ``frequency_hz``, ``damping_ratio``, ``amplitude`` (per partial), ``noise_std``
        (per channel, in the units of `signals`), ``sample_rate``, ``object`` (the
        parameters).

    Examples
    --------
    >>> x, truth = struck_object(StruckObject(sample_rate=16000.0, duration_s=0.5))
    >>> x.shape, int(truth["frequency_hz"].size)
    ((2, 8000), 11)
    """
    from .synth import free_decay

    tr = obj.truth()
    rng = np.random.default_rng([obj.seed, 9])
    t = np.arange(obj.n_samples) / obj.sample_rate
    m = tr["frequency_hz"].size
    sig = np.empty((obj.n_channels, t.size))
    for c in range(obj.n_channels):
        gain = rng.uniform(0.4, 1.0, m)
        phase = rng.uniform(0.0, 2 * np.pi, m)
        sig[c] = free_decay(t, tr["frequency_hz"], tr["damping_ratio"], tr["amplitude"] * gain,
                            phase)
    noise = float(np.max(tr["amplitude"][:1])) * 10 ** (-obj.noise_db / 20)
    sig += noise * rng.standard_normal(sig.shape)
    scale = 0.5 / float(np.max(np.abs(sig)))
    tr = dict(tr, noise_std=np.full(obj.n_channels, noise * scale), sample_rate=obj.sample_rate,
              object=asdict(obj))
    return sig * scale, tr


def write_struck_wav(path: Any, obj: StruckObject = StruckObject()) -> dict[str, Any]:
    """Write :func:`struck_object` as a 16-bit PCM WAV file (default 44.1 kHz, 2 channels, 6.7 s).

    The 16-bit rounding adds its own quantisation noise (1/sqrt(12) counts RMS, far below
    the scenario's noise). Written atomically. Returns the truth of :func:`struck_object`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "cup.wav"
    >>> truth = write_struck_wav(p, StruckObject(duration_s=0.2))
    >>> p.stat().st_size > 0
    True
    """
    import io

    from scipy.io import wavfile

    from .._files import atomic_write_bytes

    sig, truth = struck_object(obj)
    counts = np.round(sig.T * 32767.0).astype(np.int16)
    buf = io.BytesIO()
    wavfile.write(buf, int(round(obj.sample_rate)), counts)
    atomic_write_bytes(path, buf.getvalue())
    return truth


#: Long records at real sampling rates (not in :data:`SUITE`: a fit of a 10 s record at
#: 51.2 kHz would dominate the bench's time). Used by :mod:`modalnb.testing.bench_long`.
LONG_SUITE: tuple[StruckObject, ...] = (
    StruckObject("cup-10k-1s", sample_rate=10240.0, duration_s=1.0, seed=1),
    StruckObject("cup-44k-6.7s", sample_rate=44100.0, duration_s=6.7, seed=2),
    StruckObject("cup-25.6k-4s-4ch", sample_rate=25600.0, duration_s=4.0, n_channels=4, seed=3),
    StruckObject("cup-51.2k-10s", sample_rate=51200.0, duration_s=10.0, noise_db=60.0, seed=4),
    StruckObject("cup-51.2k-2s-q/4", sample_rate=51200.0, duration_s=2.0, q_scale=0.25, seed=5),
    StruckObject("dull-cup-44k-3s", sample_rate=44100.0, duration_s=3.0, partials=DULL_PARTIALS,
                 seed=6),
)
