"""Decaying-mode basis functions, continuous through critical damping.

A mode is described by its decay rate ``sigma = zeta * wn`` (1/s) and the signed square
``u = wd**2`` of its damped angular frequency (``u < 0`` for an overdamped pair, whose
poles are ``-sigma +- sqrt(-u)``). Its free response is spanned by

* ``exp(-sigma t) C(t)`` with ``C = cos(sqrt(u) t)`` (u > 0) or ``cosh(sqrt(-u) t)`` (u < 0),
* ``exp(-sigma t) S(t)`` with ``S = sin(sqrt(u) t)/sqrt(u)`` or ``sinh(sqrt(-u) t)/sqrt(-u)``,

which tend to ``exp(-sigma t)`` and ``t exp(-sigma t)`` at ``u = 0``: the repeated real
pole basis ``(A + B t) exp(s t)`` (Fermo, van der Mee & Seatzu 2013). Hyperbolic terms are
evaluated as differences of decaying exponentials so nothing overflows.
"""

from __future__ import annotations

import numpy as np

#: Below this value of |u| t_max**2 the series form is used (error ~ x**3/720).
SERIES_LIMIT = 1e-4


def mode_columns(t: np.ndarray, sigma: float, u: float) -> tuple[np.ndarray, np.ndarray]:
    """The two basis functions of one mode at times `t` (s, from the window start)."""
    tmax = float(t[-1]) if t.size else 0.0
    x = u * tmax * tmax
    if abs(x) < SERIES_LIMIT:
        e = np.exp(-sigma * t)
        t2u = u * t * t
        c = e * (1.0 - t2u / 2.0 + t2u * t2u / 24.0)  # cos(sqrt(u) t), Taylor
        s = e * t * (1.0 - t2u / 6.0 + t2u * t2u / 120.0)  # sin(sqrt(u) t) / sqrt(u)
        return c, s
    if u > 0:
        w = np.sqrt(u)
        e = np.exp(-sigma * t)
        wt = w * t
        return e * np.cos(wt), e * np.sin(wt) / w
    w = np.sqrt(-u)
    a = np.exp((w - sigma) * t)
    b = np.exp((-w - sigma) * t)
    return 0.5 * (a + b), 0.5 * (a - b) / w


def mode_columns_du(
    t: np.ndarray, sigma: float, u: float, c: np.ndarray, s: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Derivatives with respect to ``u`` of the two mode columns ``c, s`` (from :func:`mode_columns`).

    Away from ``u = 0`` both branches (cos/sin and cosh/sinh) give the same closed forms,
    ``dc/du = -t s / 2`` and ``ds/du = (t c - s) / (2 u)``; near ``u = 0`` the derivative
    of the series form is used (the same switch as :func:`mode_columns`).

    Examples
    --------
    >>> t = np.linspace(0.0, 1.0, 5)
    >>> c, s = mode_columns(t, 2.0, 400.0)
    >>> cp, sp = mode_columns(t, 2.0, 400.0 + 1e-6)
    >>> dc, ds = mode_columns_du(t, 2.0, 400.0, c, s)
    >>> bool(np.allclose(dc, (cp - c) / 1e-6, atol=1e-5))
    True
    """
    tmax = float(t[-1]) if t.size else 0.0
    if abs(u * tmax * tmax) < SERIES_LIMIT:
        e = np.exp(-sigma * t)
        t2 = t * t
        return e * (-t2 / 2.0 + t2 * t2 * u / 12.0), e * t * (-t2 / 6.0 + t2 * t2 * u / 60.0)
    return -0.5 * t * s, (t * c - s) / (2.0 * u)


def _oscillating(t: np.ndarray, sigma: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Modes evaluated in closed form by the vectorised cos/sin branch (u > 0, no series)."""
    tmax = float(t[-1]) if t.size else 0.0
    return (u > 0) & (np.abs(u * tmax * tmax) >= SERIES_LIMIT)


#: Samples per block of :func:`_uniform_oscillating` (about sqrt(N) for the records of the
#: bench; any block length gives the same values to rounding).
BLOCK = 64


def _is_uniform(t: np.ndarray) -> bool:
    """`t` is an equally spaced grid to rounding (the window of a sampled record)."""
    if t.size < 2 * BLOCK:
        return False
    dt = float(t[1] - t[0])
    if not dt > 0:
        return False
    k = np.arange(t.size)
    return bool(np.max(np.abs(t - (t[0] + k * dt))) <= 1e-9 * dt * t.size)


def _uniform_oscillating(t: np.ndarray, sigma: np.ndarray, w: np.ndarray) -> np.ndarray:
    """``exp((-sigma + i w) t)`` (N, M) on an equally spaced grid, by blocks.

    With ``t_n = t_0 + (j B + i) dt``: ``exp(lam t_n) = exp(lam (t_0 + j B dt)) exp(lam i dt)``,
    two small tables of complex exponentials (B and N / B rows) and one product per sample
    instead of an exp, a cos and a sin per sample (the cos and sin of large arguments are
    the basis's main cost). Each factor is correctly rounded, so the product is within a
    few ulps of the direct evaluation apart from the rounding of the phase ``w t`` that
    both share (the same idea as a table-driven oscillator; common practice).
    """
    n = t.size
    dt = float(t[1] - t[0])
    nb = -(-n // BLOCK)
    lam = -sigma + 1j * w
    inner = np.exp(np.multiply.outer(np.arange(BLOCK) * dt, lam))  # (B, M)
    outer = np.exp(np.multiply.outer(float(t[0]) + np.arange(nb) * (BLOCK * dt), lam))
    with np.errstate(over="ignore", invalid="ignore"):  # a growing trial mode: inf, as exp gives
        return (outer[:, None, :] * inner[None, :, :]).reshape(nb * BLOCK, -1)[:n]


def basis_matrix(
    t: np.ndarray, sigma: np.ndarray, u: np.ndarray, n_extra: int = 1
) -> np.ndarray:
    """Design matrix (N, 2M + n_extra): mode columns, then offset (and drift) columns.

    Oscillating modes are evaluated together (one exp, cos and sin of the (N, M) phase
    array, or on an equally spaced grid by :func:`_uniform_oscillating`); the others per
    mode by :func:`mode_columns` (same values to rounding).

    Examples
    --------
    >>> t = np.linspace(0.0, 1.0, 6)
    >>> phi = basis_matrix(t, np.array([2.0, 3.0]), np.array([400.0, -4.0]))
    >>> c, s = mode_columns(t, 2.0, 400.0)
    >>> bool(np.allclose(phi[:, 0], c) and np.allclose(phi[:, 1], s)), phi.shape
    (True, (6, 5))
    """
    sigma = np.asarray(sigma, float)
    u = np.asarray(u, float)
    m = sigma.size
    out = np.empty((t.size, 2 * m + n_extra))
    osc = _oscillating(t, sigma, u)
    if osc.all() and m and _is_uniform(t):
        # every mode oscillates (the usual case): written through a (N, M, 2) view
        w = np.sqrt(u)
        z = _uniform_oscillating(t, sigma, w)
        v = out[:, : 2 * m].reshape(t.size, m, 2)
        v[:, :, 0] = z.real
        np.divide(z.imag, w, out=v[:, :, 1])
    elif osc.any():
        k = np.nonzero(osc)[0]
        w = np.sqrt(u[k])
        if _is_uniform(t):
            z = _uniform_oscillating(t, sigma[k], w)
            out[:, 2 * k] = z.real
            out[:, 2 * k + 1] = z.imag / w
        else:
            e = np.exp(np.outer(t, -sigma[k]))
            wt = np.outer(t, w)
            out[:, 2 * k] = e * np.cos(wt)
            out[:, 2 * k + 1] = e * np.sin(wt) / w
    for k in np.nonzero(~osc)[0]:
        out[:, 2 * k], out[:, 2 * k + 1] = mode_columns(t, float(sigma[k]), float(u[k]))
    if n_extra >= 1:
        out[:, 2 * m] = 1.0
    if n_extra >= 2:
        out[:, 2 * m + 1] = t / (t[-1] if t[-1] > 0 else 1.0)
    return out


def basis_du_matrix(t: np.ndarray, sigma: np.ndarray, u: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """Derivatives (N, 2M) of every mode's two columns of `phi` with respect to its ``u``.

    Column ``2k`` is d(c_k)/du_k and ``2k + 1`` is d(s_k)/du_k (:func:`mode_columns_du`,
    vectorised over the oscillating modes).
    """
    sigma = np.asarray(sigma, float)
    u = np.asarray(u, float)
    m = sigma.size
    out = np.empty((t.size, 2 * m))
    osc = _oscillating(t, sigma, u)
    if osc.all() and m:
        # every mode oscillates: through (N, M, 2) views (same values, no gather/scatter)
        v = out.reshape(t.size, m, 2)
        p = phi[:, : 2 * m].reshape(t.size, m, 2)
        c, s = p[:, :, 0], p[:, :, 1]
        np.multiply(-0.5 * t[:, None], s, out=v[:, :, 0])
        tmp = t[:, None] * c
        tmp -= s
        np.divide(tmp, 2.0 * u, out=v[:, :, 1])
        return out
    if osc.any():
        k = np.nonzero(osc)[0]
        c, s = phi[:, 2 * k], phi[:, 2 * k + 1]
        out[:, 2 * k] = -0.5 * t[:, None] * s
        out[:, 2 * k + 1] = (t[:, None] * c - s) / (2.0 * u[k])
    for k in np.nonzero(~osc)[0]:
        out[:, 2 * k], out[:, 2 * k + 1] = mode_columns_du(
            t, float(sigma[k]), float(u[k]), phi[:, 2 * k], phi[:, 2 * k + 1])
    return out


def residues_from_coefficients(
    a: np.ndarray, b: np.ndarray, sigma: float, u: float
) -> np.ndarray:
    """Complex residue(s) of the mode from its basis coefficients ``a C + b S``.

    Oscillating (u > 0): ``x = 2 Re(r exp(lambda t))`` with ``lambda = -sigma + j sqrt(u)``
    gives ``r = (a - j b / sqrt(u)) / 2``. Non-oscillating (u < 0): the (real) residue of
    the slower pole ``-sigma + sqrt(-u)``, ``a/2 + b/(2 sqrt(-u))``. Near ``u = 0`` the
    residues diverge, so the repeated-pole form ``(a + b t) exp(-sigma t)`` is summarised
    by its value at ``t = 1/sigma``: ``a + b / sigma`` (real).
    """
    a = np.asarray(a, float)
    b = np.asarray(b, float)
    if u > 0 and not is_near_critical(sigma, u):
        return (a - 1j * b / np.sqrt(u)) / 2.0
    if u < 0 and not is_near_critical(sigma, u):
        w = np.sqrt(-u)
        return (a / 2.0 + b / (2.0 * w)) + 0j
    return (a + b / max(sigma, 1e-300)) + 0j


def is_near_critical(sigma: float, u: float, tol: float = 0.02) -> bool:
    """True when |zeta - 1| <= tol (|wd| small compared with sigma)."""
    wn2 = sigma * sigma + u
    if wn2 <= 0:
        return False
    zeta = sigma / np.sqrt(wn2)
    return abs(zeta - 1.0) <= tol


def pole_of(sigma: float, u: float) -> complex:
    """Continuous-time pole: ``-sigma + j sqrt(u)`` (u >= 0), slower real pole otherwise."""
    if u >= 0:
        return complex(-sigma, np.sqrt(u))
    return complex(-sigma + np.sqrt(-u), 0.0)


def natural(sigma: float, u: float) -> tuple[float, float]:
    """(wn, zeta) from (sigma, u): ``wn**2 = sigma**2 + u``, ``zeta = sigma / wn``."""
    wn2 = sigma * sigma + u
    if wn2 <= 0:
        return float("nan"), float("nan")
    wn = float(np.sqrt(wn2))
    return wn, float(sigma / wn)
