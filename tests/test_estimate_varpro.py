"""Inner algebra of the variable-projection fit, against independent numerical references.

* Kaufman's (1975) Jacobian, explicit (for lmfit) and as normal equations (J^T J, J^T r)
  formed without it, against a Jacobian built column by column with central differences
  of the projected residual (numerical differentiation: independent of the closed forms);
* the u-derivative of the mode basis against central differences, on both sides of
  critical damping (cos/sin, cosh/sinh and the series branch).
"""

from __future__ import annotations

import numpy as np
import pytest

from modalnb.estimate._basis import mode_columns, mode_columns_du
from modalnb.estimate._varpro import Problem
from modalnb.synth import free_decay


def _problem(rng):
    t = np.arange(3000) / 3000.0
    # closed-form free decays (modalnb.synth.free_decay): two close modes and one apart
    y = np.stack([free_decay(t, [30.0, 70.0, 71.5], [0.01, 0.02, 0.01], rng.normal(size=3))
                  for _ in range(5)])
    y += 0.01 * rng.normal(size=y.shape)
    return Problem(np.ascontiguousarray(y.T), t, 2 * np.pi * 300.0, 1)


def test_normal_equations_match_a_finite_difference_jacobian():
    # Kaufman's form drops the second Golub-Pereyra term, so it equals the exact Jacobian
    # only at zero residual: compare on noise-free data at a point near the optimum
    rng = np.random.default_rng(3)
    prob = _problem(rng)
    t = prob.t
    clean = np.stack([free_decay(t, [30.0, 70.0, 71.5], [0.01, 0.02, 0.01], a)
                      for a in rng.normal(size=(4, 3))])
    prob = Problem(np.ascontiguousarray(clean.T), t, prob.w_scale, 1)
    wn = 2 * np.pi * np.array([30.0, 70.0, 71.5])
    z = np.array([0.01, 0.02, 0.01])
    x = prob.pack(z * wn, (wn * np.sqrt(1 - z**2)) ** 2) * (1 + 1e-6)
    jtj, g = prob.kaufman_normal(x)
    j = prob.jacobian(x)  # central differences of the projected residual
    r = prob.residual(x)
    np.testing.assert_allclose(jtj, j.T @ j, rtol=1e-4, atol=1e-6 * np.abs(jtj).max())
    np.testing.assert_allclose(g, j.T @ r, rtol=1e-3, atol=1e-3 * np.abs(g).max())


def test_explicit_kaufman_jacobian_matches_finite_differences():
    # the Jacobian handed to lmfit: on zero-residual data (Kaufman's form is exact there)
    # its columns equal central differences of the projected residual
    rng = np.random.default_rng(4)
    t = np.arange(2000) / 2000.0
    clean = np.stack([free_decay(t, [25.0, 60.0], [0.02, 0.01], a) for a in rng.normal(size=(3, 2))])
    prob = Problem(np.ascontiguousarray(clean.T), t, 2 * np.pi * 200.0, 1)
    wn = 2 * np.pi * np.array([25.0, 60.0])
    z = np.array([0.02, 0.01])
    x = prob.pack(z * wn, (wn * np.sqrt(1 - z**2)) ** 2) * (1 + 1e-6)
    jk = prob.kaufman_jacobian(x)
    j = prob.jacobian(x)
    np.testing.assert_allclose(jk, j, rtol=1e-3, atol=1e-4 * np.abs(j).max())


@pytest.mark.parametrize("u", [4000.0, -40.0, 1e-7])  # oscillating, overdamped, near critical
def test_basis_u_derivative_matches_central_differences(u):
    t = np.linspace(0.0, 0.5, 200)
    c, s = mode_columns(t, 3.0, u)
    dc, ds = mode_columns_du(t, 3.0, u, c, s)
    h = 1e-6 * max(abs(u), 1.0)
    cp, sp = mode_columns(t, 3.0, u + h)
    cm, sm = mode_columns(t, 3.0, u - h)
    np.testing.assert_allclose(dc, (cp - cm) / (2 * h), rtol=1e-5, atol=1e-9)
    np.testing.assert_allclose(ds, (sp - sm) / (2 * h), rtol=1e-5, atol=1e-9)
