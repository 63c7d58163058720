"""Mode-shape comparison: MAC and modal phase collinearity."""

from __future__ import annotations

import numpy as np

from .._errors import EstimationError


def _vec(a, name: str) -> np.ndarray:
    v = np.asarray(a, dtype=complex).ravel()
    if v.size == 0 or not np.all(np.isfinite(v)):
        raise EstimationError(f"`{name}` must be a non-empty vector of finite numbers.")
    return v


def mac(a, b) -> float:
    """Modal assurance criterion of two (complex) shape vectors.

    ``MAC = |a^H b|^2 / ((a^H a)(b^H b))`` with the conjugate transpose (Allemang &
    Brown 1982); 1 for vectors that differ by a complex factor, 0 for orthogonal ones.

    Examples
    --------
    >>> round(mac([1, 2j], [2j, -4]), 12)
    1.0
    """
    va, vb = _vec(a, "a"), _vec(b, "b")
    if va.size != vb.size:
        raise EstimationError(f"shape vectors differ in length ({va.size} and {vb.size}).")
    na, nb = np.vdot(va, va).real, np.vdot(vb, vb).real
    if na == 0 or nb == 0:
        return 0.0
    return float(abs(np.vdot(va, vb)) ** 2 / (na * nb))


def mac_matrix(a, b=None) -> np.ndarray:
    """MAC of every column of `a` (channels, modes) against every column of `b`.

    Examples
    --------
    >>> np.round(mac_matrix(np.eye(2)), 3)
    array([[1., 0.],
           [0., 1.]])
    """
    pa = np.atleast_2d(np.asarray(a, complex))
    pb = pa if b is None else np.atleast_2d(np.asarray(b, complex))
    if pa.shape[0] != pb.shape[0]:
        raise EstimationError("shape matrices must have the same number of rows (channels).")
    num = np.abs(pa.conj().T @ pb) ** 2
    den = np.outer(np.sum(np.abs(pa) ** 2, 0), np.sum(np.abs(pb) ** 2, 0))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), 0.0)


def mpc(phi) -> float:
    """Modal phase collinearity ``|phi^T phi|^2 / (phi^H phi)^2`` (Pappa, Elliott & Schenk 1993).

    1 for a monophase (real-normalisable) shape, 0 for circular phase scatter; uncentred.

    Examples
    --------
    >>> mpc([1, 1j])
    0.0
    """
    v = _vec(phi, "phi")
    den = np.vdot(v, v).real ** 2
    if den == 0:
        return 0.0
    return float(abs(np.sum(v * v)) ** 2 / den)
