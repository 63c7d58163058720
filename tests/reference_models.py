"""Independent reference computations shared by the estimation tests.

Nothing here calls modalnb: the signals and their truths are computed from the physics
written out below, so the tests compare the estimator with something outside it.

* :func:`free_decay` — the closed-form free vibration of a viscously damped single degree
  of freedom, ``x = A exp(-zeta wn t) cos(wd t + phi)``, ``wd = wn sqrt(1 - zeta^2)``
  (any vibration text, e.g. Thomson & Dahleh 1998, *Theory of Vibration with
  Applications*, ch. 2; from memory);
* :func:`state_matrix`, :func:`eig_truth` — poles and complex shapes of
  ``M x'' + C x' + K x = 0`` from ``scipy.linalg.eig`` of the first-order state matrix
  ``[[0, I], [-M^-1 K, -M^-1 C]]``; a pole ``lambda`` gives ``wn = |lambda|`` and
  ``zeta = -Re(lambda) / |lambda|``;
* :func:`impulse_response` — the response to a unit force impulse at one DOF: the state
  just after the impulse is ``x = 0``, ``x' = M^-1 e_drive`` (impulse-momentum), then the
  free motion is integrated by ``scipy.integrate.solve_ivp`` (DOP853, rtol 1e-10);
* :func:`cantilever_fe` — an Euler-Bernoulli cantilever of Hermite cubic beam elements
  with the consistent mass matrix (Przemieniecki 1968, *Theory of Matrix Structural
  Analysis*, ch. 11; from memory), root clamped.
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp
from scipy.linalg import eig


def free_decay(t, fn, zeta, amp=1.0, phase=0.0):
    """Sum of ``A exp(-zeta wn t) cos(wd t + phi)`` over modes (zeta < 1), zero for t < 0."""
    t = np.asarray(t, float)
    fn, zeta, amp, phase = (np.atleast_1d(np.asarray(v, float)) for v in (fn, zeta, amp, phase))
    fn, zeta, amp, phase = np.broadcast_arrays(fn, zeta, amp, phase)
    tp = np.clip(t, 0.0, None)
    out = np.zeros_like(t)
    for f, z, a, p in zip(fn, zeta, amp, phase, strict=True):
        assert z < 1, "closed form written for the underdamped case only"
        wn = 2 * np.pi * f
        wd = wn * np.sqrt(1 - z * z)
        out += a * np.exp(-z * wn * tp) * np.cos(wd * tp + p)
    return np.where(t >= 0, out, 0.0)


def state_matrix(m, c, k):
    """First-order state matrix of ``M x'' + C x' + K x = 0``, state ``(x, x')``."""
    m, c, k = (np.atleast_2d(np.asarray(v, float)) for v in (m, c, k))
    n = m.shape[0]
    minv = np.linalg.inv(m)
    return np.block([[np.zeros((n, n)), np.eye(n)], [-minv @ k, -minv @ c]])


def eig_truth(m, c, k):
    """``(fn_hz, zeta, shapes)`` of the oscillating modes (scipy.linalg.eig), by |lambda|.

    ``shapes[:, i]`` is the displacement part of the eigenvector of the pole with positive
    imaginary part.
    """
    n = np.atleast_2d(m).shape[0]
    w, v = eig(state_matrix(m, c, k))
    keep = w.imag > 0
    w, v = w[keep], v[:n, keep]
    order = np.argsort(np.abs(w))
    w, v = w[order], v[:, order]
    return np.abs(w) / (2 * np.pi), -w.real / np.abs(w), v


def impulse_response(m, c, k, t, drive=0, quantity="acceleration"):
    """Response (dof, t.size) to a unit force impulse at DOF `drive` at t = 0 (solve_ivp).

    Zero for t < 0. `quantity` is ``"displacement"`` or ``"acceleration"`` (the latter from
    the equation of motion, ``x'' = -M^-1 (C x' + K x)``).
    """
    m, c, k = (np.atleast_2d(np.asarray(v, float)) for v in (m, c, k))
    n = m.shape[0]
    a = state_matrix(m, c, k)
    z0 = np.zeros(2 * n)
    z0[n:] = np.linalg.inv(m)[:, drive]  # impulse-momentum: M dv = e_drive
    t = np.asarray(t, float)
    tp = t[t >= 0]
    sol = solve_ivp(lambda _t, z: a @ z, (0.0, float(tp[-1])), z0, t_eval=tp,
                    rtol=1e-10, atol=1e-14, method="DOP853")
    assert sol.success, sol.message
    part = sol.y[:n] if quantity == "displacement" else a[n:] @ sol.y
    out = np.zeros((n, t.size))
    out[:, t >= 0] = part
    return out


def cantilever_fe(n_el, length, width, thickness, e, rho):
    """``(K, M)`` of a clamped-free Euler-Bernoulli beam, DOFs (w_1, theta_1, ..., w_n, theta_n)."""
    le = length / n_el
    area, inertia = width * thickness, width * thickness**3 / 12
    ke = e * inertia / le**3 * np.array([
        [12, 6 * le, -12, 6 * le], [6 * le, 4 * le**2, -6 * le, 2 * le**2],
        [-12, -6 * le, 12, -6 * le], [6 * le, 2 * le**2, -6 * le, 4 * le**2]])
    me = rho * area * le / 420 * np.array([
        [156, 22 * le, 54, -13 * le], [22 * le, 4 * le**2, 13 * le, -3 * le**2],
        [54, 13 * le, 156, -22 * le], [-13 * le, -3 * le**2, -22 * le, 4 * le**2]])
    ndof = 2 * (n_el + 1)
    k = np.zeros((ndof, ndof))
    m = np.zeros((ndof, ndof))
    for i in range(n_el):
        s = slice(2 * i, 2 * i + 4)
        k[s, s] += ke
        m[s, s] += me
    return k[2:, 2:], m[2:, 2:]  # clamp the root (deflection and slope of node 0)


def calibration_band(n: int, k_sigma: float = 3.0) -> tuple[float, float]:
    """Band for ``RMSE / mean(reported std)`` over `n` independent trials.

    A sample variance of n Gaussian draws has relative standard error ``sqrt(2/n)``
    (chi-square with n degrees of freedom: variance 2n); the band on the variance ratio
    is ``1 +- k sqrt(2/n)``, so on the std ratio its square root.
    """
    s = k_sigma * np.sqrt(2.0 / n)
    return float(np.sqrt(max(1.0 - s, 0.0))), float(np.sqrt(1.0 + s))
