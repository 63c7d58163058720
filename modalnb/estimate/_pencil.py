"""Initial poles: multi-signal matrix pencil / ESPRIT with band splitting.

The poles shared by all signals are the shift-invariant structure of the column space of
the stacked Hankel matrix ``H = [H_1 ... H_P]`` (matrix pencil, Hua & Sarkar 1990; the same
shift invariance as Kung, Arun & Bhaskar Rao 1983 and ESPRIT, Roy & Kailath 1989):
``z = eig(pinv(U[:-1]) U[1:])`` with ``U`` the leading left singular vectors of ``H``.

Two passes keep the Hankel matrices small:

* sub-bands: each band of the spectrum is shifted to 0 Hz, tapered and resampled at a low
  rate (complex demodulation through the FFT), so each pencil sees only a few poles and
  has the full record length for resolution;
* a wide-band pass on the first few hundred samples at the full rate catches heavily
  damped and non-oscillating (real) poles, whose spectra are too wide for a sub-band.

Orders are over-specified and swept; every pole at every order is kept for the
stabilisation chart. Candidates are the poles that are stable across orders and carry
energy ``E_k = sum_c |r_ck|^2 sum_n |z_k|^(2n)`` well above the noise.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._significance import significance_threshold

TWO_PI = 2.0 * np.pi


@dataclass
class Candidate:
    """A continuous-time pole found by a pencil, with its significance."""

    lam: complex
    significance: float
    source: str


@dataclass
class PencilOutput:
    """Candidates and the stabilisation records of every order swept."""

    candidates: list[Candidate] = field(default_factory=list)
    # rows of (pass id, order, frequency_hz (damped), natural_hz, damping_ratio, stable,
    # significance = pole energy over the residual variance of that order's fit; NaN in an
    # order without a stable pole, where it is not needed; mac = MAC of the pole's shape
    # with that of the matched pole of the previous order, NaN without a match; match =
    # why the pole is or is not stable, one of the MATCH_* codes)
    rows: list[tuple[int, int, float, float, float, bool, float, float, int]] = field(
        default_factory=list)


def _hankel_gram(sig: np.ndarray, k_rows: int) -> np.ndarray:
    """``sum_p H_p H_p^H`` of the (k_rows, n - k_rows + 1) Hankel matrices of the rows.

    Hankel structure: ``G[i+1, j+1] = G[i, j] + sum_p (x_p[i+L] x_p[j+L]^* - x_p[i] x_p[j]^*)``
    with ``L`` the column count, so the first column (``O(k L P)``) and one rank-P update
    per diagonal replace the ``O(k^2 L P)`` product.
    """
    p, n = sig.shape
    n_cols = n - k_rows + 1
    from numpy.lib.stride_tricks import sliding_window_view

    gram = np.zeros((k_rows, k_rows), dtype=np.result_type(sig.dtype, np.complex128))
    # first column: G[i, 0] = sum_p sum_l x_p[i + l] x_p[l]^*
    for row in sig:
        gram[:, 0] += sliding_window_view(row, n_cols) @ row[:n_cols].conj()
    if k_rows > 1:
        xs = sig[:, : k_rows - 1]
        xe = sig[:, n_cols : n_cols + k_rows - 1]
        upd = xe.T @ xe.conj() - xs.T @ xs.conj()  # (k-1, k-1), upd[i, j] for G[i+1, j+1]
        for d in range(k_rows - 1):
            t = np.arange(k_rows - 1 - d)
            gram[d + 1 + t, 1 + t] = gram[d, 0] + np.cumsum(upd[d + t, t])
        low = np.tril_indices(k_rows, -1)
        gram[low[1], low[0]] = gram[low].conj()
    gram[np.diag_indices(k_rows)] = gram.diagonal().real
    return gram if np.iscomplexobj(sig) else gram.real


def _signal_space(sig: np.ndarray, k_rows: int, n_vec: int) -> tuple[np.ndarray, np.ndarray]:
    """Leading left singular vectors (k_rows, n_vec) and singular values of stacked Hankels."""
    gram = _hankel_gram(sig, k_rows)
    w, v = np.linalg.eigh(gram)
    order = np.argsort(w)[::-1]
    w = np.clip(w[order], 0.0, None)
    return v[:, order[:n_vec]], np.sqrt(w)


def _shift_poles(u: np.ndarray) -> np.ndarray:
    """Discrete poles from the shift invariance of the column space (least squares)."""
    psi, *_ = np.linalg.lstsq(u[:-1], u[1:], rcond=None)
    return np.linalg.eigvals(psi)


def _shift_poles_shapes(u: np.ndarray, first: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Discrete poles and their shapes over the signals, (m,) and (m, P).

    The Hankel columns span ``A = [a(z_1) ... a(z_m)]`` with ``a(z) = (1, z, z^2, ...)``;
    with ``psi = T diag(z) T^-1`` the eigen-decomposition of the shift matrix, ``A = U T D``
    for some diagonal D, so the first Hankel column of signal p, ``sum_i a(z_i) r_pi``,
    gives ``r_p = D^-1 T^-1 U^H first_p``: each pole's coefficients over the signals up to
    one factor per pole, which the MAC ignores. `first` is (k_rows, P).
    """
    psi, *_ = np.linalg.lstsq(u[:-1], u[1:], rcond=None)
    z, t = np.linalg.eig(psi)
    try:
        shapes = np.linalg.solve(t, u.conj().T @ first)
    except np.linalg.LinAlgError:
        shapes = np.full((z.size, first.shape[1]), np.nan, complex)
    return z, shapes


#: Shapes of a pole at successive orders agree when their MAC is at least 0.9 (common
#: practice for stabilisation charts; MAC of Allemang & Brown 1982).
STABLE_MAC = 0.9

#: Why a pole of the stabilisation chart is or is not stable: the first test it fails
#: against the previous order of its pencil, in the order the tests are made.
#: MATCH_NEW: the first order of its pencil (or an order below without poles): nothing to
#: compare with.
MATCH_NEW = 0
#: MATCH_FREQUENCY: no pole of the order below within 1 % in natural frequency.
MATCH_FREQUENCY = 1
#: MATCH_DAMPING: the nearest pole of the order below is within 1 % in frequency but not
#: within 5 % in damping ratio.
MATCH_DAMPING = 2
#: MATCH_ENERGY: frequency and damping agree, but the pole's energy is under the
#: candidate significance limit (a noise pole of an over-specified order).
MATCH_ENERGY = 3
#: MATCH_SHAPE: stable in frequency, damping and energy, but its shape MAC with the
#: matched pole is under :data:`STABLE_MAC` (or not defined).
MATCH_SHAPE = 4
#: MATCH_STABLE: stable in frequency, damping, energy and shape.
MATCH_STABLE = 5


def _mac(a: np.ndarray, b: np.ndarray) -> float:
    """Modal assurance criterion ``|a^H b|^2 / (a^H a b^H b)`` of two complex vectors
    (Allemang & Brown 1982, "A correlation coefficient for modal vector analysis", Proc.
    1st IMAC)."""
    den = float(np.vdot(a, a).real * np.vdot(b, b).real)
    return float(abs(np.vdot(a, b)) ** 2 / den) if den > 0 else float("nan")


def _energies(sig: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, float]:
    """Energy of each pole (summed over signals) and residual variance per sample.

    The amplitudes are the least-squares fit of the signals on the Vandermonde basis
    ``z_k^n``. The basis is built by running products (one multiplication per entry,
    the poles have ``|z| < 1``: no overflow) and solved by a Householder QR; when the
    triangular factor is near singular (two poles of an over-specified order nearly
    coincide) the SVD-based minimum-norm solution (``numpy.linalg.lstsq``) is used, as
    before, so the energies keep their meaning.
    """
    n = sig.shape[-1]
    m = z.size
    vand = np.empty((n, m), complex)
    if n:
        vand[0] = 1.0
    if n > 1 and m:
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):
            vand[1:] = z[None, :]
            np.cumprod(vand[1:], axis=0, out=vand[1:])
        vand = np.where(np.isfinite(vand), vand, 0.0)
    rhs = sig.T
    coef = None
    if m and n >= m:
        q, r = np.linalg.qr(vand)
        dr = np.abs(np.diag(r))
        if dr.min() > 1e-10 * dr.max():
            from scipy.linalg import solve_triangular

            coef = solve_triangular(r, q.conj().T @ rhs, check_finite=False)
    if coef is None:
        coef, *_ = np.linalg.lstsq(vand, rhs, rcond=None)
    resid = rhs - vand @ coef
    dof = max(sig.size - coef.size, 1)
    var = float(np.sum(np.abs(resid) ** 2) / dof)
    zmag2 = np.abs(z) ** 2
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        geo = np.where(np.abs(1 - zmag2) > 1e-12, (1 - zmag2**n) / (1 - zmag2), n)
    energy = np.sum(np.abs(coef) ** 2, axis=1) * np.abs(geo)
    return energy, var


def _natural(lam: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    wn = np.abs(lam)
    with np.errstate(invalid="ignore", divide="ignore"):
        zeta = np.where(wn > 0, -lam.real / wn, np.nan)
    return wn / TWO_PI, zeta


def _sweep(
    sig: np.ndarray,
    dt: float,
    shift_hz: float,
    orders: list[int],
    k_rows: int,
    pass_id: int,
    out: PencilOutput,
    accept: callable,
    real_data: bool,
) -> None:
    """Sweep orders of one pencil; append rows and the candidates of the top order."""
    if sig.shape[0] > 8:
        # only a few poles per pass: keep the leading components of this pass's signals
        g = sig @ sig.conj().T
        w, v = np.linalg.eigh(g)
        sig = v[:, np.argsort(w)[::-1][:8]].conj().T @ sig
    u, _sv = _signal_space(sig, k_rows, max(orders))
    prev: np.ndarray | None = None
    prev_shape: np.ndarray | None = None
    per_order: list[np.ndarray] = []
    first = sig[:, :k_rows].T  # first Hankel column of each signal
    for m in orders:
        z, shape = _shift_poles_shapes(u[:, :m], first)
        with np.errstate(divide="ignore"):
            lam = np.log(z.astype(complex)) / dt + 1j * TWO_PI * shift_hz
        keep = (np.abs(z) < 1.0) & (np.abs(z) > 0)
        if real_data:
            keep &= lam.imag >= -1e-9 * np.abs(lam)
        lam, shape = lam[keep], shape[keep]
        fn, zeta = _natural(lam)
        # stable for the chart (common practice): a pole of the previous order within 1 % in
        # natural frequency and 5 % in damping ratio (frequency alone marks noise poles too);
        # its shape MAC with that pole is kept beside (the chart's shape criterion)
        stable = np.zeros(lam.size, bool)
        mac = np.full(lam.size, np.nan)
        match = np.full(lam.size, MATCH_NEW)
        if prev is not None and prev.size and lam.size:
            pfn, pz = _natural(prev)
            j = np.argmin(np.abs(pfn[None, :] - fn[:, None]), axis=1)
            close = np.abs(pfn[j] - fn) <= 0.01 * fn
            stable = close & (np.abs(pz[j] - zeta) <= 0.05 * np.maximum(zeta, 1e-4))
            for i in np.nonzero(close)[0]:
                mac[i] = _mac(shape[i], prev_shape[j[i]])
            # provisional: energy and shape are judged once the limit is known (find_poles)
            match = np.where(stable, MATCH_STABLE, np.where(close, MATCH_DAMPING, MATCH_FREQUENCY))
        # pole energies only where the chart needs them (an order with a stable pole)
        signif = np.full(lam.size, np.nan)
        last = None
        if stable.any():
            e_m, v_m = _energies(sig, np.exp((lam - 1j * TWO_PI * shift_hz) * dt))
            signif = e_m / max(v_m, 1e-300)
            last = (e_m, v_m)
        for lk, f, zz, st, sg, mc, mt in zip(lam, fn, zeta, stable, signif, mac, match,
                                             strict=True):
            out.rows.append((pass_id, m, float(lk.imag / TWO_PI), float(f), float(zz), bool(st),
                             float(sg), float(mc), int(mt)))
        per_order.append(lam)
        prev = lam
        prev_shape = shape
    # candidates: top-order poles that reappear (within tolerance) in the two orders below
    top = per_order[-1]
    if top.size == 0:
        return
    if last is not None:  # the top order's energies, computed in the sweep
        energy, var = last
    else:
        energy, var = _energies(sig, np.exp((top - 1j * TWO_PI * shift_hz) * dt))
    var = max(var, 1e-300)
    for i, lk in enumerate(top):
        hits = 0
        for lower in per_order[-3:-1]:
            if lower.size and np.min(np.abs(lower - lk)) <= max(0.01 * abs(lk), 0.1 * abs(lk.real)):
                hits += 1
        if hits < min(2, len(per_order) - 1):
            continue
        if not accept(lk):
            continue
        out.candidates.append(Candidate(complex(lk), float(energy[i] / var), f"pass{pass_id}"))


def band_taper(f: np.ndarray, lo: float, hi: float, margin: float) -> np.ndarray:
    """Weights of the spectrum lines `f` for the band ``[lo, hi]``: 1 inside, a raised
    cosine over `margin` on either side (a Tukey-shaped edge; common practice).

    Examples
    --------
    >>> band_taper(np.array([0.5, 1.0, 2.0, 3.5]), 1.0, 3.0, 1.0).round(3).tolist()
    [0.5, 1.0, 1.0, 0.5]
    """
    taper = np.ones(f.size)
    left = f < lo
    taper[left] = 0.5 - 0.5 * np.cos(np.pi * (f[left] - (lo - margin)) / margin)
    right = f > hi
    taper[right] = 0.5 - 0.5 * np.cos(np.pi * ((hi + margin) - f[right]) / margin)
    return taper


def find_poles(
    data: np.ndarray,
    fs: float,
    f_max: float,
    *,
    max_order: int | None = None,
    min_significance: float | None = None,
) -> PencilOutput:
    """Candidate poles of the signals `data` (P, N), sampled at `fs`, below `f_max` Hz.

    Parameters
    ----------
    data : ndarray
        Real signals (already weighted and compressed), time from the window start.
    fs : float
        Sample rate (Hz).
    f_max : float
        Highest damped frequency searched (Hz).
    max_order : int, optional
        Highest pencil order per pass (default 20 per sub-band, 40 wide-band).
    min_significance : float
        Least pole energy over the noise variance per sample for a candidate
        (default: 3 times the threshold of the refinement stage, common practice).
    """
    p, n = data.shape
    dt = 1.0 / fs
    t_len = n * dt
    out = PencilOutput()
    data = data - data.mean(axis=1, keepdims=True)
    # ---- sub-bands (complex demodulation through the FFT)
    n_target = 360
    width = max(n_target / (1.6 * t_len), 4.0 / t_len)
    n_bands = max(1, int(np.ceil(f_max / width)))
    width = f_max / n_bands
    margin = 0.25 * width
    nfft = int(2 ** np.ceil(np.log2(2 * n)))
    spec = np.fft.fft(data, nfft, axis=1)
    df = fs / nfft
    freqs = np.fft.fftfreq(nfft, dt)
    order_sub = max_order or 20
    for b in range(n_bands):
        lo, hi = b * width, (b + 1) * width
        fc = 0.5 * (lo + hi)
        sel_lo, sel_hi = lo - margin, hi + margin
        idx = np.nonzero((freqs >= sel_lo) & (freqs <= sel_hi))[0]
        if idx.size < 8:
            continue
        f_sel = freqs[idx]
        taper = band_taper(f_sel, lo, hi, margin)
        n_base = int(np.ceil(1.25 * idx.size))
        base = np.zeros((p, n_base), complex)
        k_c = int(round(fc / df))
        pos = (np.round(f_sel / df).astype(int) - k_c) % n_base
        base[:, pos] = spec[:, idx] * taper
        sig = np.fft.ifft(base, axis=1)
        dt_b = nfft / (fs * n_base)
        n_keep = int(np.floor(t_len / dt_b))
        skip = int(np.ceil(1.0 / (margin * dt_b)))
        sig = sig[:, skip : max(n_keep - skip, skip)]
        nb = sig.shape[1]
        if nb < 24:
            continue
        k_rows = max(8, min(nb // 3, 4 * order_sub))
        top = min(order_sub, k_rows - 2)
        orders = list(range(max(1, top - 8), top + 1))

        def accept_sub(lk: complex, lo: float = lo, hi: float = hi) -> bool:
            fd = lk.imag / TWO_PI
            return lo <= fd < hi and lk.real < 0 and -lk.real < 2.0 * abs(lk.imag) + 1e-12

        _sweep(sig, dt_b, k_c * df, orders, k_rows, b + 1, out, accept_sub, real_data=False)
    # ---- wide band, full rate, start of the record: heavy damping and real poles
    n_w = min(n, 600)
    k_w = n_w // 3
    order_w = min(max_order * 2 if max_order else 40, k_w - 2)
    orders_w = list(range(max(2, order_w - 10), order_w + 1, 2))

    def accept_wide(lk: complex) -> bool:
        fn = abs(lk) / TWO_PI
        if lk.real >= 0 or fn > 0.5 * fs:
            return False
        zeta = -lk.real / abs(lk)
        slow = -lk.real * t_len < 0.5  # decays less than e^-0.5 over the window: drift
        return zeta >= 0.1 and not slow

    _sweep(data[:, :n_w], dt, 0.0, orders_w, k_w, 0, out, accept_wide, real_data=True)
    if min_significance is None:
        min_significance = 3.0 * significance_threshold(min(p, 8))
    out.candidates = [c for c in out.candidates if c.significance >= min_significance]
    # the chart calls a pole stable only when it also carries energy above the same limit
    # (noise poles of an over-specified order can be stable in frequency and damping)
    out.rows = [(*r[:5], bool(r[5] and r[6] >= min_significance), *r[6:8],
                 _final_match(r, min_significance)) for r in out.rows]
    return out


def _final_match(row: tuple, min_significance: float) -> int:
    """A row's MATCH_* code once energy (against `min_significance`) and shape are judged."""
    if row[8] != MATCH_STABLE:  # failed frequency or damping, or nothing to compare
        return int(row[8])
    if not row[6] >= min_significance:
        return MATCH_ENERGY
    return MATCH_STABLE if row[7] >= STABLE_MAC else MATCH_SHAPE


#: The source label of the wide-band pass's candidates.
WIDE_PASS = "pass0"

#: Two sub-band candidates closer than this relative distance are one pole found at the
#: shared edge of two sub-bands (far below any resolvable split: 1e-6 of 1 kHz is
#: 1 mHz, the resolution 1/T of a 1000 s record).
SAME_POLE_REL = 1e-6


def initial_modes(cands: list[Candidate], fs: float) -> list[tuple[float, float]]:
    """Turn candidate poles into (sigma, u) mode starts, pairing real poles.

    Oscillating poles give ``(sigma, wd**2)``; near-duplicates (same pole from the wide
    pass and a sub-band, within 0.3 % or half the decay rate; or from two sub-bands,
    within half the decay rate) are merged, keeping the more significant. Real poles are paired, strongest first, into
    non-oscillating modes ``sigma = -(s1 + s2)/2``, ``u = -((s1 - s2)/2)**2``; a real pole
    left without a partner starts as an overdamped pair with a partner 4 times faster.
    """
    cands = sorted(cands, key=lambda c: -c.significance)
    kept: list[Candidate] = []
    for c in cands:
        dup = False
        for k in kept:
            half_bw = 0.5 * max(-c.lam.real, -k.lam.real)
            if WIDE_PASS in (c.source, k.source) and c.source != k.source:
                # the wide pass (600 samples) sees a sub-band's pole only roughly
                tol = max(half_bw, 0.003 * abs(c.lam), TWO_PI * 1e-3 * fs / 1e3)
            else:
                # sub-band poles are found once each (a pole belongs to one sub-band); two
                # of them are the same pole only within half their decay rate (a doublet
                # 0.1 % apart at Q ~ 1e4 is 20 decay rates apart)
                tol = max(half_bw, SAME_POLE_REL * abs(c.lam))
            if abs(c.lam - k.lam) < tol:
                dup = True
                break
        if not dup:
            kept.append(c)
    modes: list[tuple[float, float]] = []
    reals: list[float] = []
    for c in kept:
        lam = c.lam
        if abs(lam.imag) < 1e-6 * abs(lam):
            reals.append(lam.real)
        else:
            modes.append((-lam.real, lam.imag**2))
    while len(reals) >= 2:
        s1, s2 = reals.pop(0), reals.pop(0)
        modes.append((-(s1 + s2) / 2.0, -(((s1 - s2) / 2.0) ** 2)))
    if reals:
        s1 = reals[0]
        s2 = 4.0 * s1
        modes.append((-(s1 + s2) / 2.0, -(((s1 - s2) / 2.0) ** 2)))
    return modes
