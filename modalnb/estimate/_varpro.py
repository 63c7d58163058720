"""Variable projection: poles shared by all signals, residues solved linearly inside.

The objective is ``sum_c ||(I - Phi Phi^+) y_c||^2`` over the nonlinear parameters only
(Golub & Pereyra 1973; several data sets sharing the nonlinear parameters: Golub &
LeVeque 1979). ``Phi`` holds two columns per mode (see :mod:`._basis`) and an offset
column. The covariance of the poles is ``s^2 (J^T J)^-1`` with ``J`` the Jacobian of the
projected residual (the VARPRO Jacobian, whose normal matrix is the Schur complement of
the full one, so the linear parameters are accounted for) and ``s^2 = RSS/(N_tot - p)``
where ``p`` counts the poles and every linear coefficient.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._errors import EstimationError
from ._basis import basis_du_matrix, basis_matrix, natural


def _finite_or_zero(a: np.ndarray) -> np.ndarray:
    """`a` with NaN and inf set to 0 (a copy only when there are any: the usual case is none)."""
    with np.errstate(over="ignore", invalid="ignore"):
        if np.isfinite(np.sum(a)):
            return a
    return np.nan_to_num(a, nan=0.0, posinf=0.0, neginf=0.0)


#: Largest condition number of the column-scaled basis for the Cholesky QR
#: (:func:`thin_qr`); CholeskyQR2 is orthogonal to rounding below about
#: ``eps**-1/2 = 7e7`` (Yamamoto et al. 2015); 1e6 keeps a margin of almost two decades.
CHOLESKY_QR_COND = 1e6


def thin_qr(a: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Thin QR of a tall matrix: CholeskyQR2 on the column-scaled matrix, Householder
    (``numpy.linalg.qr``) when that is ill-conditioned.

    CholeskyQR2: ``R1 = chol(B^T B)``, ``Q1 = B R1^-1``, then once more on ``Q1``
    (Fukaya, Nakatsukasa, Yanagisawa & Yamamoto 2014, "CholeskyQR2: a simple and
    communication-avoiding algorithm for computing a tall-skinny QR factorization",
    ScalA'14; Yamamoto, Nakatsukasa, Yanagisawa & Fukaya 2015, ETNA 44): the second pass
    makes ``Q`` orthogonal to rounding when ``cond(B) <~ eps^-1/2``. ``B = A D^-1`` with
    ``D`` the column norms (the basis's sine columns are scaled by ``1/w``). Its work is
    matrix products (level-3 BLAS), faster than Householder's on a few dozen columns.
    ``R`` has a positive diagonal (Householder's may not: ``Q`` then differs by column
    signs; ``Q Q^T`` and ``R^-1 Q^T`` do not).

    Examples
    --------
    >>> import numpy as np
    >>> a = np.random.default_rng(0).standard_normal((200, 5))
    >>> q, r = thin_qr(a)
    >>> bool(np.allclose(q @ r, a) and np.allclose(q.T @ q, np.eye(5)))
    True
    """
    norms = np.sqrt(np.einsum("ij,ij->j", a, a))
    if a.shape[0] >= a.shape[1] and norms.size and np.all(norms > 0):
        b = a / norms
        try:
            r1 = np.linalg.cholesky(b.T @ b).T
            if np.linalg.cond(r1) <= CHOLESKY_QR_COND:
                q = b @ np.linalg.inv(r1)
                r2 = np.linalg.cholesky(q.T @ q).T
                q = q @ np.linalg.inv(r2)
                return q, (r2 @ r1) * norms
        except np.linalg.LinAlgError:
            pass
    return np.linalg.qr(a)


@dataclass
class Problem:
    """Data of one VARPRO fit: signals (P, N) in weighted units, times from the window start."""

    data_t: np.ndarray  # (N, P) contiguous, the signals as columns
    t: np.ndarray  # (N,)
    w_scale: float  # angular-frequency scale of the parameters (rad/s)
    n_extra: int = 1

    def unpack(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        x = np.asarray(x, float)
        return x[0::2] * self.w_scale, x[1::2] * self.w_scale**2

    def pack(self, sigma: np.ndarray, u: np.ndarray) -> np.ndarray:
        x = np.empty(2 * len(sigma))
        x[0::2] = np.asarray(sigma) / self.w_scale
        x[1::2] = np.asarray(u) / self.w_scale**2
        return x

    def basis(self, x: np.ndarray) -> np.ndarray:
        sigma, u = self.unpack(x)
        return basis_matrix(self.t, sigma, u, self.n_extra)

    def _factor(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``(Phi, Q, R)`` of the basis at `x` (thin QR), kept for the last point asked.

        A Levenberg-Marquardt step evaluates the residual at a trial point and, once it is
        accepted, the normal equations at the same point: the one-entry cache saves the
        second basis and QR.
        """
        key = np.asarray(x, float).tobytes()
        cache = getattr(self, "_cache", None)
        if cache is not None and cache[0] == key:
            return cache[1]
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):
            phi = self.basis(x)
        if np.all(np.isfinite(phi)):
            q, rr = thin_qr(phi)
        else:
            q = rr = None
        self._cache = (key, (phi, q, rr))
        return phi, q, rr

    def residual(self, x: np.ndarray) -> np.ndarray:
        phi, q, _ = self._factor(x)
        if q is None:
            # a trial step to a growing exponential: worse than any real fit
            return np.full(self.data_t.size, 1e100)
        r = self.data_t - q @ (q.T @ self.data_t)
        return r.ravel()

    def share_factors(self, other: Problem) -> None:
        """Use the basis factorisation and derivative pieces `other` last computed.

        They depend on the times and the parameters only, not on the signals, so problems
        on the same times (the hits of one campaign, see ``_per_hit_scatter``) evaluated
        at the same point need them once. `other` must have the same ``t``, ``w_scale``
        and ``n_extra``.
        """
        if not (other.t is self.t or np.array_equal(other.t, self.t)) or (
                other.w_scale != self.w_scale or other.n_extra != self.n_extra):
            raise ValueError("share_factors needs problems on the same times and scales")
        for name in ("_cache", "_dcache"):
            if hasattr(other, name):
                setattr(self, name, getattr(other, name))

    def _derivatives(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray,
                                                   np.ndarray, np.ndarray]:
        """``(Phi, Q, R, D, E^T E)`` at `x`, ``E = (I - Q Q^T) D``: the signal-free pieces of
        Kaufman's Jacobian, kept for the last point asked (``D`` as in :meth:`_projection`;
        ``Q, R`` of a basis with non-finite entries are those of its finite part)."""
        key = np.asarray(x, float).tobytes()
        cache = getattr(self, "_dcache", None)
        if cache is not None and cache[0] == key:
            return cache[1]
        sigma, u = self.unpack(np.asarray(x, float))
        t = self.t
        phi, q, rr = self._factor(x)
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):
            if q is None:
                phi = np.nan_to_num(phi, nan=0.0, posinf=0.0, neginf=0.0)
                q, rr = np.linalg.qr(phi)
            m = sigma.size
            dmat = np.empty((t.size, 4 * m))
            dmat4 = dmat.reshape(t.size, m, 4)
            # d/dsigma of exp(-sigma t) f(t) is -t exp(-sigma t) f(t) (written in place)
            np.multiply(t[:, None, None], phi[:, : 2 * m].reshape(t.size, m, 2),
                        out=dmat4[:, :, 0:2])
            dmat4[:, :, 0:2] *= -self.w_scale
            ddu = basis_du_matrix(t, sigma, u, phi)
            np.multiply(ddu.reshape(t.size, m, 2), self.w_scale**2, out=dmat4[:, :, 2:4])
            dmat = _finite_or_zero(dmat)
            # E^T E = D^T D - (Q^T D)^T (Q^T D) (Q orthonormal): E itself is never needed
            w = q.T @ dmat
            ete = dmat.T @ dmat - w.T @ w
        out = (phi, q, rr, dmat, ete)
        self._dcache = (key, out)
        return out

    def _projection(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """``(Q, Q^T d, coefficients, D)`` at `x`: the pieces of Kaufman's Jacobian.

        ``D`` (N, 4M) holds, per mode, the derivatives of its two basis columns with respect
        to sigma, then to u, in packed units.
        """
        phi, q, rr, dmat, _ = self._derivatives(x)
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):
            qtd = q.T @ self.data_t
            if np.all(np.abs(np.diag(rr)) > 0):
                coef = np.linalg.solve(rr, qtd)
            else:
                coef = np.linalg.lstsq(phi, self.data_t, rcond=None)[0]
        return q, qtd, coef, dmat

    def kaufman_jacobian(self, x: np.ndarray) -> np.ndarray:
        """Jacobian of the projected residual in Kaufman's (1975) form (N*P, n_params).

        ``J_j = -(I - Q Q^T) (dPhi/dx_j) c`` with ``c`` the least-squares coefficients; the
        second (residual-sized) term of Golub & Pereyra is dropped, as Kaufman proposed.
        """
        q, _, coef, dmat = self._projection(x)
        jac = np.empty((self.data_t.size, 2 * (dmat.shape[1] // 4)), order="F")
        with np.errstate(over="ignore", invalid="ignore"):
            for j in range(jac.shape[1]):
                k = j // 2
                g = dmat[:, 2 * j : 2 * j + 2] @ coef[2 * k : 2 * k + 2]  # (N, P)
                g = g - q @ (q.T @ g)
                jac[:, j] = _finite_or_zero(-g.ravel())
        return jac

    def kaufman_normal(self, x: np.ndarray, r: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """``(J^T J, J^T r)`` of Kaufman's Jacobian without forming J (same values).

        Each Jacobian column is ``J_j = -(I - Q Q^T) D_j C_j`` with ``D_j`` (N, 2) the
        derivative of the mode's two basis columns and ``C_j`` (2, P) their coefficients,
        so ``J_i . J_j = sum((E_i^T E_j) * (C_i C_j^T))`` with ``E = (I - Q Q^T) D``, and
        ``J_j . r = -sum((D_j^T R) * C_j)`` since the residual ``R`` is already projected.
        The cost no longer grows with the number of signals P beyond one ``D^T R``.
        """
        q, qtd, coef, dmat = self._projection(x)
        m = dmat.shape[1] // 4
        n = 2 * m
        kk = np.arange(n) // 2  # mode of each parameter
        cm = coef[: 2 * m].reshape(m, 2, -1)  # (m, 2, P)
        with np.errstate(over="ignore", invalid="ignore"):
            # a trial point far out (a nearly growing mode) may overflow: such a point
            # gets a huge but finite normal matrix, so the step is simply refused
            ete = self._derivatives(x)[4].reshape(n, 2, n, 2)
            resid = (self.data_t - q @ qtd) if r is None else r.reshape(self.data_t.shape)
            cc = np.einsum("kap,lbp->kalb", cm, cm)  # C_k C_l^T
            jtj = np.einsum("iajb,iajb->ij", ete, cc[kk][:, :, kk])
            dtr = (dmat.T @ resid).reshape(n, 2, -1)
            g = -np.einsum("iap,iap->i", dtr, cm[kk])
        big = np.finfo(float).max / 1e6
        return (np.nan_to_num(jtj, nan=0.0, posinf=big, neginf=-big),
                np.nan_to_num(g, nan=0.0, posinf=big, neginf=-big))

    def reduced(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(r', J')``: a residual of n + 1 entries and its (n + 1, n) Jacobian with the
        same ``|r'|^2``, ``J'^T J'`` and ``J'^T r'`` as the projected residual and Kaufman's
        Jacobian at `x` (n parameters).

        With ``J^T J = V diag(w) V^T``: ``J' = [diag(sqrt w) V^T; 0]`` and
        ``r' = [diag(w)^-1/2 V^T J^T r; sqrt(|r|^2 - |diag(w)^-1/2 V^T J^T r|^2)]``. A
        Gauss-Newton or trust-region method sees the residual only through these three
        quantities (scipy's ``trf`` with the exact solver: the SVD of ``J`` gives the same
        singular values, right vectors and ``U^T r``), so its iterates are those of the full
        problem in exact arithmetic, at the cost of one normal-matrix build instead of an
        SVD of an (N P, n) matrix (the Gram-matrix form of a least-squares problem, e.g.
        Björck 1996, *Numerical Methods for Least Squares Problems*, SIAM, sect. 2.2; from
        memory). The factorisation is kept for the last point asked.
        """
        x = np.asarray(x, float)
        key = x.tobytes()
        cache = getattr(self, "_rcache", None)
        if cache is not None and cache[0] == key:
            return cache[1]
        n = x.size
        r = self.residual(x)
        jac = np.zeros((n + 1, n))
        rr = np.zeros(n + 1)
        if r.size and r[0] == 1e100 and np.all(r == 1e100):  # a growing-exponential trial
            rr[n] = 1e100 * np.sqrt(float(r.size))
        else:
            cost = float(r @ r)
            jtj, g = self.kaufman_normal(x, r)
            w, v = np.linalg.eigh(0.5 * (jtj + jtj.T))
            tiny = max(float(w.max(initial=0.0)), 0.0) * n * np.finfo(float).eps
            pos = w > tiny
            sw = np.sqrt(np.where(pos, w, 0.0))
            jac[:n] = sw[:, None] * v.T
            z = np.where(pos, (v.T @ g) / np.where(pos, sw, 1.0), 0.0)
            rr[:n] = z
            rr[n] = np.sqrt(max(cost - float(z @ z), 0.0))
        self._rcache = (key, (rr, jac))
        return rr, jac

    def coefficients(self, x: np.ndarray, data_t: np.ndarray | None = None) -> np.ndarray:
        """Linear coefficients (n_cols, P) by least squares at parameters `x`."""
        phi = self.basis(x)
        d = self.data_t if data_t is None else data_t
        coef, *_ = np.linalg.lstsq(phi, d, rcond=None)
        return coef


#: Relative-offset convergence limit of the Levenberg-Marquardt loop (Bates & Watts 1981,
#: "A relative offset convergence criterion for nonlinear least squares", Technometrics
#: 23(2)): the distance left to the least-squares point, measured against the statistical
#: uncertainty of the parameters; they recommend 0.001, at which the remaining change is
#: a negligible fraction of a standard deviation.
RELATIVE_OFFSET_TOL = 1e-3


def relative_offset(prob: Problem, jtj: np.ndarray, g: np.ndarray, cost: float) -> float:
    """Bates & Watts' relative offset ``sqrt(|P_J r|^2 / p) / sqrt(|r - P_J r|^2 / (n - p))``.

    ``|P_J r|^2 = g^T (J^T J)^-1 g`` with ``g = J^T r`` (the part of the residual the
    parameters can still remove), ``p`` the nonlinear parameters and ``n - p`` the residual
    degrees of freedom of the projected problem (every linear coefficient counted). Inf
    when the normal matrix is singular.
    """
    p = g.size
    n_dof = prob.data_t.size - prob.data_t.shape[1] * (p + prob.n_extra) - p
    try:
        off2 = float(g @ np.linalg.solve(jtj, g))
    except np.linalg.LinAlgError:
        return float("inf")
    rest = cost - off2
    if not (np.isfinite(off2) and off2 >= 0) or n_dof <= 0:
        return float("inf")
    if rest <= 0:
        return 0.0 if off2 == 0 else float("inf")
    return float(np.sqrt((off2 / p) / (rest / n_dof)))


def step_in_std(prob: Problem, jtj: np.ndarray, g: np.ndarray, cost: float,
                watch: np.ndarray | None = None) -> float:
    """Largest Gauss-Newton step of one parameter in units of its standard deviation:
    ``max_i |dx_i| / sqrt(s^2 [(J^T J)^-1]_ii)`` with ``dx = -(J^T J)^-1 J^T r`` and
    ``s^2 = |r|^2 / (n - p)`` (degrees of freedom as in :func:`relative_offset`). Inf when
    the normal matrix is singular.

    Unlike the relative offset (an RMS over all parameters), it says how far each
    parameter still is from the least-squares point on the scale of its own uncertainty:
    a step far below one standard deviation changes no estimate that the table reports
    (the per-parameter form of the statistical stopping rule of Bates & Watts 1981,
    "A relative offset convergence criterion for nonlinear least squares",
    Technometrics 23(2)). With `watch` (a mask over the parameters), the largest over
    the watched parameters only (the joint step: how the others would still move is in it).
    """
    p = g.size
    n_dof = prob.data_t.size - prob.data_t.shape[1] * (p + prob.n_extra) - p
    if n_dof <= 0 or not np.isfinite(cost) or cost <= 0:
        return float("inf")
    try:
        inv = np.linalg.inv(jtj)
    except np.linalg.LinAlgError:
        return float("inf")
    dx = -(inv @ g)
    var = np.diag(inv) * (cost / n_dof)
    if not (np.all(np.isfinite(dx)) and np.all(var > 0)):
        return float("inf")
    z = np.abs(dx) / np.sqrt(var)
    if watch is not None:
        z = z[np.asarray(watch, bool)]
    return float(np.max(z, initial=0.0))


def levenberg_marquardt(
    prob: Problem, x: np.ndarray, max_iter: int = 60, rtol: float = 1e-10,
    offset_tol: float = RELATIVE_OFFSET_TOL, std_tol: float | None = None,
    watch: np.ndarray | None = None,
) -> tuple[np.ndarray, int]:
    """Levenberg-Marquardt on the projected residual with Kaufman's Jacobian.

    Works on the normal equations (the Jacobian has few columns), with Marquardt's
    diagonal scaling (Marquardt 1963). Stops when the relative offset
    (:func:`relative_offset`, Bates & Watts 1981) falls below `offset_tol`, with
    `std_tol` also when no parameter's Gauss-Newton step reaches `std_tol` of its
    standard deviation (:func:`step_in_std`; of the parameters in the mask `watch`
    when given), when a step lowers the cost by less than
    `rtol` relatively or moves no parameter by 1e-9 relatively, or after `max_iter`
    iterations. Returns the parameters and the iterations used.
    """
    x = np.asarray(x, float).copy()
    r = prob.residual(x)
    cost = float(r @ r)
    mu = 1e-3
    it = 0
    for _ in range(max_iter):
        jtj, g = prob.kaufman_normal(x, r)
        if relative_offset(prob, jtj, g, cost) < offset_tol:
            break
        if std_tol is not None and step_in_std(prob, jtj, g, cost, watch) < std_tol:
            break
        it += 1
        d = np.diag(jtj).copy()
        d[d <= 0] = 1.0
        improved = False
        for _ in range(12):
            a = jtj + mu * np.diag(d)
            try:
                dx = -np.linalg.solve(a, g)
            except np.linalg.LinAlgError:
                mu *= 10
                continue
            xn = x + dx
            rn = prob.residual(xn)
            cn = float(rn @ rn)
            if np.isfinite(cn) and cn <= cost:
                improved = True
                rel = (cost - cn) / max(cost, 1e-300)
                x, r, cost = xn, rn, cn
                mu = max(mu / 5, 1e-12)
                break
            mu *= 10
        if not improved:
            break
        step = np.max(np.abs(dx) / np.maximum(np.abs(x), 1e-12))
        if rel < rtol or step < 1e-9:
            break
    return x, it


def one_step(prob: Problem, x: np.ndarray) -> np.ndarray:
    """One Gauss-Newton step ``x - (J^T J)^-1 J^T r`` from `x` (Kaufman's normal equations).

    The linearised pole update of :meth:`Problem.kaufman_normal`; NaN parameters where
    the normal matrix is singular or the step leaves the finite numbers (a mode that
    this data does not determine).

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(512) / 512.0
    >>> y = np.exp(-2.0 * t) * np.cos(2 * np.pi * 20.0 * t)
    >>> prob = Problem(np.ascontiguousarray(y[:, None]), t, 2 * np.pi * 100.0)
    >>> x = one_step(prob, prob.pack([2.01], [(2 * np.pi * 20.001) ** 2]))
    >>> sigma, u = prob.unpack(x)
    >>> round(float(sigma[0]), 4), round(float(np.sqrt(u[0]) / (2 * np.pi)), 5)
    (2.0, 20.0)
    """
    x = np.asarray(x, float)
    jtj, g = prob.kaufman_normal(x)
    # Marquardt's diagonal scaling: solve the equilibrated system (conditioning only)
    d = np.sqrt(np.abs(np.diag(jtj)))
    d[d <= 0] = 1.0
    try:
        dx = -np.linalg.solve(jtj / np.outer(d, d), g / d) / d
    except np.linalg.LinAlgError:
        return np.full_like(x, np.nan)
    out = x + dx
    return out if np.all(np.isfinite(out)) else np.full_like(x, np.nan)


LSQ_TOL = 1e-10
"""ftol, xtol and gtol of the final refinement (common practice: tight, the start has converged)."""


class _Abort(Exception):
    """More residual evaluations than the refinement's budget."""


def _finite(a: np.ndarray, what: str) -> np.ndarray:
    a = np.asarray(a, dtype=np.float64)
    if not np.isfinite(np.sum(a)):
        raise EstimationError(
            f"the {what} of the final refinement is not finite (NaN or inf). Hint: check "
            "the records for NaN or inf samples, or narrow the window."
        )
    return a


@dataclass
class Refinement:
    """The final refinement of the poles: its start, budget and scipy's result.

    ``x`` is the point it returns; :meth:`minimizer_result` gives the same refinement as
    an ``lmfit.MinimizerResult`` (built only when asked: importing lmfit is slow). A
    ``deferred`` refinement (a refit's) was not run: ``x`` is its start, and
    :meth:`minimizer_result` runs it from there when asked.
    """

    prob: Problem
    x0: np.ndarray
    max_nfev: int
    x: np.ndarray
    scipy_result: Any
    aborted: bool
    deferred: bool = False
    reduced: bool = False
    _lmfit: Any = None

    def minimizer_result(self) -> Any:
        """The refinement as lmfit reports it (``lmfit.minimize``, method "least_squares").

        lmfit (Newville et al. 2014, LMFIT: Non-Linear Least-Square Minimization and
        Curve-Fitting for Python, doi:10.5281/zenodo.11813) runs the same scipy call from
        the same start with the same budget, so its parameters are the points of ``x``;
        the result is kept after the first call.
        """
        if self._lmfit is None:
            import lmfit

            prob = self.prob
            params = lmfit.Parameters()
            for k in range(len(self.x0) // 2):
                params.add(f"m{k + 1}_sigma", value=float(self.x0[2 * k]))
                params.add(f"m{k + 1}_u", value=float(self.x0[2 * k + 1]))
            names = list(params)

            def fcn(pars: Any) -> np.ndarray:
                x = np.array([pars[n].value for n in names])
                return prob.reduced(x)[0] if self.reduced else prob.residual(x)

            def dfun(pars: Any) -> np.ndarray:
                x = np.array([pars[n].value for n in names])
                return prob.reduced(x)[1] if self.reduced else prob.kaufman_jacobian(x)

            self._lmfit = lmfit.minimize(
                fcn, params, method="least_squares", Dfun=dfun, x_scale="jac",
                max_nfev=self.max_nfev, ftol=LSQ_TOL, xtol=LSQ_TOL, gtol=LSQ_TOL,
            )
        return self._lmfit


def refine(prob: Problem, x0: np.ndarray, max_nfev: int, reduced: bool = False) -> Refinement:
    """Minimise the projected residual from `x0` with scipy's ``least_squares``.

    The trust-region reflective method (Branch, Coleman & Li 1999, "A subspace, interior,
    and conjugate gradient method for large-scale bound-constrained minimization
    problems", SIAM J. Sci. Comput. 21(1)), unbounded, with the Kaufman Jacobian
    (:meth:`Problem.kaufman_jacobian`), ``x_scale="jac"`` and ftol = xtol = gtol =
    :data:`LSQ_TOL`. The call is the one ``lmfit.minimize(..., method="least_squares")``
    makes for unbounded parameters (scipy gets twice the budget; the fit stops at the
    residual evaluation past `max_nfev` and returns that point, as lmfit does), so
    :meth:`Refinement.minimizer_result` reproduces it without lmfit on the fitting path.
    With `reduced` the call gets :meth:`Problem.reduced` (n + 1 residuals with the same
    cost, gradient and normal matrix: the same iterates in exact arithmetic, without an
    SVD of the (N P, n) Jacobian per iteration), and so does its lmfit reproduction.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(512) / 512.0
    >>> y = np.exp(-2.0 * t) * np.cos(2 * np.pi * 20.0 * t)
    >>> prob = Problem(np.ascontiguousarray(y[:, None]), t, 2 * np.pi * 100.0)
    >>> ref = refine(prob, prob.pack([1.5], [(2 * np.pi * 20.2) ** 2]), 30)
    >>> sigma, u = prob.unpack(ref.x)
    >>> round(float(sigma[0]), 6), round(float(np.sqrt(u[0]) / (2 * np.pi)), 6)
    (2.0, 20.0)
    """
    from scipy.optimize import least_squares

    x0 = np.asarray(x0, dtype=np.float64)
    state = {"nfev": 0, "last": x0}

    def fun(x: np.ndarray) -> np.ndarray:
        state["nfev"] += 1
        state["last"] = x
        if state["nfev"] > max_nfev:
            raise _Abort
        xx = np.array([float(v) for v in x])
        r = prob.reduced(xx)[0] if reduced else prob.residual(xx)
        return _finite(r.ravel(), "residual")

    def jac(x: np.ndarray) -> np.ndarray:
        xx = np.array([float(v) for v in x])
        return _finite(prob.reduced(xx)[1] if reduced else prob.kaufman_jacobian(xx), "Jacobian")

    n = x0.size
    try:
        ret = least_squares(
            fun, x0, jac=jac, bounds=(np.full(n, -np.inf), np.full(n, np.inf)), method="trf",
            ftol=LSQ_TOL, xtol=LSQ_TOL, gtol=LSQ_TOL, x_scale="jac", max_nfev=2 * max_nfev,
        )
    except _Abort:
        return Refinement(prob, x0, max_nfev, np.array(state["last"], dtype=float), None, True,
                          reduced=reduced)
    return Refinement(prob, x0, max_nfev, np.array(ret.x, dtype=float), ret, False,
                      reduced=reduced)


def covariance(prob: Problem, x: np.ndarray, rss: float, n_tot: int, n_lin: int) -> np.ndarray:
    """Covariance of the packed parameters: s^2 (J^T J)^-1 with s^2 = RSS/(N_tot - p)."""
    jtj, _ = prob.kaufman_normal(x)
    p = x.size + n_lin
    s2 = rss / max(n_tot - p, 1)
    try:
        return s2 * np.linalg.inv(jtj)
    except np.linalg.LinAlgError:
        return np.full((x.size, x.size), np.nan)


def natural_with_cov(
    prob: Problem, x: np.ndarray, cov: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(f_n Hz, zeta) per mode and their standard deviations by linear propagation."""
    sigma, u = prob.unpack(x)
    m = sigma.size
    fn = np.empty(m)
    zeta = np.empty(m)
    fn_std = np.empty(m)
    zeta_std = np.empty(m)
    ws = prob.w_scale
    for k in range(m):
        wn, z = natural(sigma[k], u[k])
        fn[k] = wn / (2 * np.pi)
        zeta[k] = z
        if not np.isfinite(wn):
            fn_std[k] = zeta_std[k] = np.nan
            continue
        # d wn / d(sigma, u) = (sigma / wn, 1 / (2 wn)); zeta = sigma / wn
        dwn = np.array([sigma[k] / wn, 0.5 / wn])
        dz = np.array([1.0 / wn, 0.0]) - sigma[k] / wn**2 * dwn
        scale = np.array([ws, ws * ws])  # packed -> physical
        c = cov[2 * k : 2 * k + 2, 2 * k : 2 * k + 2] * np.outer(scale, scale)
        fn_std[k] = np.sqrt(max(dwn @ c @ dwn, 0.0)) / (2 * np.pi)
        zeta_std[k] = np.sqrt(max(dz @ c @ dz, 0.0))
    return fn, zeta, fn_std, zeta_std
