"""The demo's physical model: a clamped-free steel bar, its bending modes and its response.

* :func:`cantilever_modes` -- Euler-Bernoulli beam finite elements (Hermite cubics,
  consistent mass) and their modes; the lowest modes are computed by a bit-reproducible
  inverse iteration (see the function) so the shipped demo data regenerate to the last
  bit on any numpy/scipy/LAPACK build;
* :func:`handbook_cantilever_frequencies` -- the continuous-beam values they converge to;
* :class:`HalfSinePulse`, :func:`half_sine_force` -- the hammer force;
* :func:`sdof_half_sine_response` -- the exact modal response to it;
* :class:`BoomModel`, :func:`boom_model` -- the kept modes at the sensors and the
  driving point, and the noise-free sensor accelerations of a hit (modal superposition).

The campaign itself (hits, noise, double hit, clipping, files) is in
:mod:`modalnb.demo._campaign`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import ModalnbError
from ._settings import DEMO_SETTINGS, DemoSettings

#: Cantilever eigenvalues beta_n L, roots of cos x cosh x = -1 (Blevins 1979, table 8-1).
HANDBOOK_CANTILEVER_BETA_L = (1.87510407, 4.69409113, 7.85475744, 10.99554073, 14.13716839)

#: Modes computed by the bit-reproducible inverse iteration (the demo keeps 4 and names
#: the next 2 in its truth).
EXACT_MODES = 6


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


def _element_matrices(
    el: float, ei: float, rho_a: float
) -> tuple[list[list[float]], list[list[float]]]:
    """Hermite cubic beam element: stiffness and consistent mass, DOFs (w1, th1, w2, th2).

    Written with products only (no ``**``, whose ``pow`` may round differently between
    C libraries), so the matrices are the same bits everywhere.
    """
    l2 = el * el
    k0 = ei / (l2 * el)
    m0 = rho_a * el / 420.0
    ke = [
        [12.0, 6 * el, -12.0, 6 * el],
        [6 * el, 4 * l2, -6 * el, 2 * l2],
        [-12.0, -6 * el, 12.0, -6 * el],
        [6 * el, 2 * l2, -6 * el, 4 * l2],
    ]
    me = [
        [156.0, 22 * el, 54.0, -13 * el],
        [22 * el, 4 * l2, 13 * el, -3 * l2],
        [54.0, 13 * el, 156.0, -22 * el],
        [-13 * el, -3 * l2, -22 * el, 4 * l2],
    ]
    return [[k0 * v for v in r] for r in ke], [[m0 * v for v in r] for r in me]


def _assemble(n: int, ke: list[list[float]], me: list[list[float]]) -> tuple[np.ndarray, np.ndarray]:
    """Global K and M with the root's two DOFs removed (clamped), as float64 arrays."""
    ndof = 2 * (n + 1)
    k = np.zeros((ndof, ndof))
    m = np.zeros((ndof, ndof))
    ke_a, me_a = np.array(ke), np.array(me)
    for e in range(n):
        s = slice(2 * e, 2 * e + 4)
        k[s, s] += ke_a
        m[s, s] += me_a
    return k[2:, 2:], m[2:, 2:]


_BAND = 3  # half-bandwidth of K and M: a node's two DOFs couple to the next node's two


def _band_cholesky(a: np.ndarray) -> list[list[float]]:
    """Lower Cholesky factor of a banded SPD matrix, in plain Python floats (fixed order)."""
    n = a.shape[0]
    rows = a.tolist()
    low = [[0.0] * n for _ in range(n)]
    for j in range(n):
        lo = max(0, j - _BAND)
        d = rows[j][j]
        for p in range(lo, j):
            d -= low[j][p] * low[j][p]
        low[j][j] = math.sqrt(d)
        for i in range(j + 1, min(n, j + _BAND + 1)):
            v = rows[i][j]
            for p in range(max(0, i - _BAND), j):
                v -= low[i][p] * low[j][p]
            low[i][j] = v / low[j][j]
    return low


def _band_solve(low: list[list[float]], b: list[float]) -> list[float]:
    """Solve ``L L^T x = b`` with the banded factor of :func:`_band_cholesky`."""
    n = len(b)
    y = [0.0] * n
    for i in range(n):
        v = b[i]
        for p in range(max(0, i - _BAND), i):
            v -= low[i][p] * y[p]
        y[i] = v / low[i][i]
    x = [0.0] * n
    for i in range(n - 1, -1, -1):
        v = y[i]
        for p in range(i + 1, min(n, i + _BAND + 1)):
            v -= low[p][i] * x[p]
        x[i] = v / low[i][i]
    return x


def _band_matvec(rows: list[list[float]], x: list[float]) -> list[float]:
    n = len(x)
    out = [0.0] * n
    for i in range(n):
        v = 0.0
        for j in range(max(0, i - _BAND), min(n, i + _BAND + 1)):
            v += rows[i][j] * x[j]
        out[i] = v
    return out


def _dot(a: list[float], b: list[float]) -> float:
    return math.fsum(x * y for x, y in zip(a, b, strict=True))  # correctly rounded sum


def _exact_lowest_modes(
    k: np.ndarray, m: np.ndarray, n_modes: int, max_iter: int = 2000
) -> tuple[list[float], list[list[float]]]:
    """Lowest eigenpairs of ``K v = w^2 M v`` by inverse iteration with deflation.

    Why not LAPACK alone: a dense solver's eigenvalues are exact for a matrix within
    ``eps ||K||`` of ours, which for the lowest modes of a 40-element beam (stiffness
    eigenvalues spread over about ten decades) is a relative error near 1e-9, and its
    rounding differs between LAPACK builds and drivers. The demo's 24-bit ADC resolves
    about 1e-6 of its full scale, so such a difference flips the rounding of a few hundred
    samples in 400 000. This iteration runs in plain Python floats (IEEE-754 double, fixed
    order, :func:`math.fsum` for inner products), from a start vector of exact small
    fractions, so its result is the same bits on every platform; it converges to the same
    modes as the dense solver (inverse iteration, e.g. Bathe 1996, *Finite Element
    Procedures*, sect. 11.2; from memory). Each mode is iterated until its shape changes
    by at most 1e-13 of its largest entry (the eigenvalue, a Rayleigh quotient of that
    shape, is then exact to rounding) or `max_iter` passes.
    """
    n = k.shape[0]
    low = _band_cholesky(k)
    mrows = m.tolist()
    vals: list[float] = []
    vecs: list[list[float]] = []
    mvecs: list[list[float]] = []
    for _ in range(min(n_modes, n)):
        x = [((i * 7919) % 101) / 101.0 - 0.5 for i in range(n)]  # exact binary fractions
        for _ in range(max_iter):
            y = _band_solve(low, _band_matvec(mrows, x))
            for v, mv in zip(vecs, mvecs, strict=True):  # M-orthogonal to the modes found
                c = _dot(mv, y)
                y = [yi - c * vi for yi, vi in zip(y, v, strict=True)]
            norm = math.sqrt(_dot(y, _band_matvec(mrows, y)))
            y = [yi / norm for yi in y]
            step = max(abs(a - b) for a, b in zip(x, y, strict=True))
            x = y
            if step <= 1e-13 * max(abs(a) for a in x):  # the shape has converged
                break
        mx = _band_matvec(mrows, x)
        vals.append(1.0 / _dot(mx, _band_solve(low, mx)))
        vecs.append(x)
        mvecs.append(mx)
    return vals, vecs


def cantilever_modes(
    n_elements: int,
    *,
    length: float = DEMO_SETTINGS.length_m,
    width: float = DEMO_SETTINGS.width_m,
    thickness: float = DEMO_SETTINGS.thickness_m,
    youngs_modulus: float = DEMO_SETTINGS.youngs_modulus_pa,
    density: float = DEMO_SETTINGS.density_kg_m3,
    exact_modes: int = EXACT_MODES,
) -> CantileverModes:
    """Euler-Bernoulli cantilever modes from Hermite cubic beam elements.

    Element stiffness ``EI/l^3 [[12, 6l, -12, 6l], [6l, 4l^2, -6l, 2l^2], ...]`` and
    consistent mass ``rho A l / 420 [[156, 22l, 54, -13l], ...]`` (Przemieniecki 1968,
    *Theory of Matrix Structural Analysis*; Petyt 1990, *Introduction to Finite Element
    Vibration Analysis*, ch. 3; from memory), two degrees of freedom (deflection,
    rotation) per node, both fixed at the root; generalised eigenproblem
    ``K v = w^2 M v`` with mass-normalised shapes ``v^T M v = 1``. All modes come from
    :func:`scipy.linalg.eigh`; the lowest `exact_modes` are then replaced by a
    bit-reproducible inverse iteration (:func:`_exact_lowest_modes`), which agrees with
    LAPACK to about 1e-9 but, unlike it, gives the same bits on every build.

    Parameters
    ----------
    n_elements : int
        Number of equal elements (>= 1).
    length, width, thickness : float
        Beam dimensions (m); bending about the width axis.
    youngs_modulus, density : float
        Material (Pa, kg/m^3).
    exact_modes : int
        How many of the lowest modes the reproducible iteration computes.

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
    inertia = width * thickness * thickness * thickness / 12.0
    ke, me = _element_matrices(el, youngs_modulus * inertia, density * area)
    k, m = _assemble(n, ke, me)
    w2, v = scipy.linalg.eigh(k, m)
    w2 = np.clip(w2, 0.0, None)
    n_exact = min(int(exact_modes), w2.size)
    if n_exact > 0:
        vals, vecs = _exact_lowest_modes(k, m, n_exact)
        w2[:n_exact] = vals
        v[:, :n_exact] = np.array(vecs).T
    defl = np.vstack([np.zeros((1, v.shape[1])), v[0::2, :]]).T  # (mode, node)
    defl *= np.sign(defl[:, -1])[:, None]
    return CantileverModes(
        x=np.linspace(0.0, length, n + 1),
        frequency_hz=np.sqrt(w2) / (2 * np.pi),
        deflection=defl,
    )


def handbook_cantilever_frequencies(
    n_modes: int = 4,
    *,
    length: float = DEMO_SETTINGS.length_m,
    thickness: float = DEMO_SETTINGS.thickness_m,
    youngs_modulus: float = DEMO_SETTINGS.youngs_modulus_pa,
    density: float = DEMO_SETTINGS.density_kg_m3,
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


@dataclass(frozen=True)
class BoomModel:
    """The kept modes of the demo boom, at its sensors and its driving point.

    Attributes
    ----------
    modes : CantileverModes
        All FE modes (the first `n_modes` are kept).
    n_modes : int
        Modes below ``max_mode_fraction_of_fs * fs``.
    zeta : ndarray, shape (n_modes,)
        Damping ratios (classical, i.e. modal, damping).
    phi_sensors : ndarray, shape (n_modes, channel)
        Mass-normalised global (+Z) shapes at the sensor nodes.
    phi_drive : ndarray, shape (n_modes,)
        The same at the excitation node.
    sign : ndarray, shape (channel,)
        +1 or -1: a ``-Z`` sensor records the negative of the +Z motion.
    channels, nodes : list of str
        ``boom-1`` ..., and ``n11`` ...
    position : ndarray, shape (channel, 3)
        Sensor x, y, z (m): on the top face, or the bottom face for a ``-Z`` sensor.

    Examples
    --------
    >>> boom_model().n_modes
    4
    """

    modes: CantileverModes
    n_modes: int
    zeta: np.ndarray
    phi_sensors: np.ndarray
    phi_drive: np.ndarray
    sign: np.ndarray
    channels: list[str]
    nodes: list[str]
    position: np.ndarray

    @property
    def frequency_hz(self) -> np.ndarray:
        """Undamped natural frequencies of the kept modes (Hz)."""
        return self.modes.frequency_hz[: self.n_modes]

    def acceleration(self, t: np.ndarray, pulses: Sequence[HalfSinePulse]) -> np.ndarray:
        """Noise-free global +Z acceleration at the sensors, shape (channel, time).

        Modal superposition: each modal coordinate obeys
        ``q'' + 2 zeta w q' + w^2 q = phi_drive f(t)``
        (:func:`sdof_half_sine_response`), the sensors see ``phi_sensors q''``.

        Examples
        --------
        >>> b = boom_model()
        >>> b.acceleration(np.array([-1e-3]), [HalfSinePulse(0.0, 1e-3, 1.0)]).shape
        (6, 1)
        """
        omega = 2 * np.pi * self.frequency_hz
        acc = np.zeros((self.phi_sensors.shape[1], t.size))
        for k in range(self.n_modes):
            _, _, qdd = sdof_half_sine_response(
                t, pulses, omega_n=omega[k], zeta=self.zeta[k], gain=self.phi_drive[k]
            )
            acc += self.phi_sensors[k][:, None] * qdd[None, :]
        return acc


def boom_model(settings: DemoSettings = DEMO_SETTINGS) -> BoomModel:
    """The FE boom of `settings`, restricted to the modes below the anti-alias limit.

    Examples
    --------
    >>> [round(float(f), 1) for f in boom_model().frequency_hz]
    [32.6, 204.4, 572.3, 1121.5]
    """
    s = settings
    modes = cantilever_modes(
        s.n_elements,
        length=s.length_m,
        width=s.width_m,
        thickness=s.thickness_m,
        youngs_modulus=s.youngs_modulus_pa,
        density=s.density_kg_m3,
    )
    n_modes = int(np.sum(modes.frequency_hz < s.max_mode_fraction_of_fs * s.sample_rate_hz))
    zeta = np.asarray(s.damping_ratios, dtype=float)
    if zeta.size != n_modes:
        raise ModalnbError(
            f"demo settings: {n_modes} modes lie below {s.max_mode_fraction_of_fs} fs but "
            f"{zeta.size} damping ratios are given. Hint: give one ratio per mode."
        )
    if n_modes + 2 > EXACT_MODES:
        raise ModalnbError(
            f"demo settings: {n_modes} modes are kept but only the lowest {EXACT_MODES} are "
            "computed reproducibly. Hint: raise EXACT_MODES in modalnb/demo/_model.py."
        )
    nodes = list(s.sensor_nodes)
    sign = np.array([-1.0 if d.startswith("-") else 1.0 for d in s.sensor_directions])
    half_h = 0.5 * s.thickness_m
    position = np.array(
        [[modes.x[n], 0.0, -half_h if sg < 0 else half_h] for n, sg in zip(nodes, sign, strict=True)]
    )
    return BoomModel(
        modes=modes,
        n_modes=n_modes,
        zeta=zeta,
        phi_sensors=modes.deflection[:n_modes][:, nodes],
        phi_drive=modes.deflection[:n_modes, s.excitation_node],
        sign=sign,
        channels=[f"boom-{i + 1}" for i in range(len(nodes))],
        nodes=[f"n{n:02d}" for n in nodes],
        position=position,
    )
