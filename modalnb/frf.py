"""Frequency response functions (FRFs) and coherence of a record set, and of a modal table.

:func:`frf` estimates the measured FRF of every channel from the hammer force, averaged
over the accepted hits of each excitation point, with the ordinary coherence beside it;
:func:`synthesise_frf` evaluates the FRF of the fitted modal model (a
:func:`modalnb.fit_modes` table) at given frequencies, so the two can be compared.
Pure computation: no widgets, no plotting (the notebook panels and the report draw them).

Estimators (Bendat & Piersol 2010, *Random Data: Analysis and Measurement Procedures*,
4th ed., Wiley, ch. 6 and 9; the formulas from memory). With ``X_i`` and ``F_i`` the
``numpy.fft.rfft`` of response and force of hit ``i`` (one transform per hit over the
whole record, pulse included; no Welch segments), summed over the accepted hits of one
excitation:

* ``G_ff = sum |F_i|^2``, ``G_xx = sum |X_i|^2``, ``G_fx = sum conj(F_i) X_i``;
* ``H1 = G_fx / G_ff`` (unbiased by noise on the response);
* ``H2 = G_xx / conj(G_fx)`` (unbiased by noise on the force);
* ``coherence = |G_fx|^2 / (G_ff G_xx)``, in [0, 1]; it is ``H1 / H2``. With one hit it
  is 1 at every frequency and says nothing (the attribute ``coherence_note`` says so).
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError, RecordError
from ._noise import unit_scale
from ._pulse import holds_pulse, pulse_bounds
from ._utils import did_you_mean
from .estimate._fit import FORCE_TAIL_SAMPLES, accept_decisions
from .estimate._model import model_poles
from .records import get_sample_rate, has_force, validate_records

__all__ = ["ESTIMATORS", "DEFAULT_EXCITATION", "frf", "synthesise_frf", "excitation_labels"]

#: The FRF estimators :func:`frf` knows.
ESTIMATORS = ("H1", "H2")
#: Label of the one excitation of records whose hits do not name their excitation point.
DEFAULT_EXCITATION = "hammer"

_PER_UNIT_FORCE = re.compile(r"^(?P<resp>.*)/\((?P<force>.*) s\)$")


# ---------------------------------------------------------------- arguments
def _estimator(value: Any) -> str:
    name = str(value).strip().upper() if isinstance(value, str) else None
    if name not in ESTIMATORS:
        raise ModalnbError(
            f"unknown FRF estimator {value!r}; known: {', '.join(ESTIMATORS)}."
            f"{did_you_mean(str(value), ESTIMATORS)}"
        )
    return name


def _nfft(value: Any, n: int) -> int:
    if value is None:
        return n
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        raise ModalnbError(f"`nfft` must be a whole number of samples, was {value!r}.")
    if int(value) < n:
        raise ModalnbError(
            f"`nfft` = {int(value)} is shorter than the records ({n} samples): the transform "
            "would cut off the ring-down. Hint: give nfft >= the record length (zero padding), "
            "or shorten the records first (records.isel(time=...))."
        )
    return int(value)


def _margin(value: Any, fs: float) -> int | None:
    """Samples kept after the pulse end, or None for no force window."""
    if value is None or value is False:
        return None
    if value is True:
        return FORCE_TAIL_SAMPLES
    try:
        margin = float(value)
    except (TypeError, ValueError):
        raise ModalnbError(
            f"`force_window` must be None, True or a margin in seconds after the pulse, was "
            f"{value!r}.") from None
    if not (np.isfinite(margin) and margin >= 0):
        raise ModalnbError(f"`force_window` margin must be >= 0 s and finite, was {value!r}.")
    return int(np.ceil(margin * fs - 1e-9))


def _decisions(records: xr.Dataset, accept: Any) -> np.ndarray:
    """One bool per hit: None uses every hit; a modal table or hit-check Dataset gives its
    own decisions (``hit_accepted`` or ``accepted``); else as the engine takes them."""
    hits = np.asarray(records["hit"].values).tolist()
    if isinstance(accept, xr.Dataset):
        var = next((v for v in ("hit_accepted", "accepted") if v in accept.data_vars), None)
        if var is None or "hit" not in accept[var].dims:
            raise ModalnbError(
                "`accept` is a Dataset without hit decisions: give a fit_modes table "
                "(hit_accepted) or a check_hits result (accepted), or one bool per hit.")
        known = dict(zip(np.asarray(accept["hit"].values).tolist(),
                         np.asarray(accept[var].values, bool).tolist(), strict=True))
        missing = [h for h in hits if h not in known]
        if missing:
            raise ModalnbError(
                f"`accept` ({var}) decides no hit {missing[0]!r} of these records: the table "
                "was made from other records.")
        accept = {h: known[h] for h in hits}
    elif isinstance(accept, Mapping):
        missing = [h for h in hits if h not in accept]
        if missing and not [k for k in accept if k not in hits]:
            raise ModalnbError(
                f"`accept` decides no hit {missing[0]!r}: name every hit (hits {hits}), or "
                "pass the fit_modes table, whose decisions cover every hit.")
    return accept_decisions(records, accept)


# ---------------------------------------------------------------- excitations
def excitation_labels(records: xr.Dataset) -> np.ndarray:
    """The excitation label of every hit: ``<node><direction>`` (e.g. ``"m3+Z"``) from the
    hits' ``excitation_node`` and ``excitation_direction`` coords, else
    :data:`DEFAULT_EXCITATION`.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb import records_from_arrays
    >>> ds = records_from_arrays(np.zeros((2, 1, 32)), 64.0)
    >>> excitation_labels(ds).tolist()
    ['hammer', 'hammer']
    >>> ds = ds.assign_coords(excitation_node=("hit", ["m3", "m4"]),
    ...                       excitation_direction=("hit", ["+Z", "+Z"]))
    >>> excitation_labels(ds).tolist()
    ['m3+Z', 'm4+Z']
    """
    n = records.sizes["hit"]

    def part(name: str) -> list[str]:
        if name not in records.coords:
            return [""] * n
        return ["" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v).strip()
                for v in np.asarray(records[name].values).tolist()]

    labels = [(a + b) or DEFAULT_EXCITATION
              for a, b in zip(part("excitation_node"), part("excitation_direction"), strict=True)]
    return np.array(labels, dtype=object)


def _in_order(labels: np.ndarray) -> list[str]:
    return list(dict.fromkeys(labels.tolist()))


def _channel_coords(source: xr.Dataset) -> dict[str, Any]:
    coords: dict[str, Any] = {"channel": np.asarray(source["channel"].values)}
    for extra in ("node", "direction"):
        if extra in source.coords and source[extra].dims == ("channel",):
            coords[extra] = ("channel", np.asarray(source[extra].values))
    return coords


# ---------------------------------------------------------------- measured FRF
def _force_windowed(force: np.ndarray, t: np.ndarray, rows: np.ndarray, tail: int) -> np.ndarray:
    """Force of the given hits with everything but the main pulse (plus `tail` samples) zeroed."""
    out = np.zeros_like(force)
    for h in rows:
        start, _, end = pulse_bounds(force[h], t)
        stop = min(end + tail, t.size)
        out[h, start:stop] = force[h, start:stop]
    return out


def frf(
    records: xr.Dataset,
    *,
    estimator: str = "H1",
    force_window: bool | float | None = None,
    accept: Any = None,
    nfft: int | None = None,
) -> xr.Dataset:
    """Measured FRF and coherence of every channel, per excitation point.

    Parameters
    ----------
    records : xarray.Dataset
        A record set with ``force`` (:mod:`modalnb.records`).
    estimator : {"H1", "H2"}
        ``H1 = G_fx / G_ff`` (noise on the response averages out) or ``H2 = G_xx /
        conj(G_fx)`` (noise on the force averages out); formulas in the module docstring
        (Bendat & Piersol 2010, *Random Data*, 4th ed.).
    force_window : None, True or float
        None (default): the force as recorded. True: keep the main pulse (from
        :func:`modalnb._pulse.pulse_bounds`, plus the two samples of its falling edge the
        engine keeps) and zero the rest of the force record, so force-sensor noise outside
        the pulse does not enter ``G_ff``. A number: the same with that margin (s) after
        the pulse end (common practice: a short margin). A later tap of a double hit is
        zeroed too, so reject double hits (the hit checks flag them).
    accept : optional
        Which hits to average. None: every hit (no hit checks are run here); a
        :func:`modalnb.fit_modes` table or a :func:`modalnb.check_hits` result: its
        decisions; a mapping ``{hit: bool}`` naming every hit or one bool per hit.
    nfft : int, optional
        Transform length; None is the record length. Longer pads with zeros (a finer
        frequency grid, not a finer resolution); shorter is refused.

    Returns
    -------
    xarray.Dataset
        ``frf(excitation, channel, frequency)`` complex, in the records' units
        (``"(<response units>)/(<force units>)"``, no conversion); ``coherence`` over the
        same dims; ``force_level_db(excitation, frequency)``, ``G_ff`` in dB below its peak
        (where it is low the FRF is not trustworthy); ``n_hits(excitation)``, the hits
        averaged. ``frequency`` in Hz (0 to fs/2, step fs/nfft); ``excitation`` labelled
        ``<node><direction>`` (:func:`excitation_labels`). An excitation with no accepted
        hit is kept with NaN values and ``n_hits`` 0. Records carrying an exponential
        window (attribute ``exponential_window_tau_s``) give the FRF of the windowed
        records (attribute ``windowed_records``): its poles are shifted by ``-1/tau`` and
        the FRF cannot be un-windowed; compare it with :func:`synthesise_frf`, which adds
        the window's damping.

    Raises
    ------
    RecordError
        No ``force`` variable, or an accepted hit whose force holds no pulse.
    ModalnbError
        An unknown estimator, a bad ``nfft``, ``force_window`` or ``accept``.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb import records_from_arrays
    >>> fs, t = 1024.0, np.arange(2048) / 1024.0
    >>> f = np.where(t < 0.004, np.sin(np.pi * t / 0.004), 0.0)     # half-sine tap
    >>> x = np.convolve(f, np.exp(-3 * t) * np.sin(2 * np.pi * 40 * t))[:2048] / fs
    >>> ds = frf(records_from_arrays(x[None, None], fs, force=f[None]))
    >>> dict(ds["frf"].sizes), str(ds["excitation"].values[0])
    ({'excitation': 1, 'channel': 1, 'frequency': 1025}, 'hammer')
    >>> round(float(ds["coherence"].min()), 6)      # one hit: coherence is 1 everywhere
    1.0
    """
    records = validate_records(records)
    est = _estimator(estimator)
    if not has_force(records):
        raise RecordError(
            "the records have no variable 'force': an FRF needs the hammer force of every hit. "
            "Hint: record the force channel, or fit the ring-down only (modalnb.fit_modes).")
    fs = get_sample_rate(records)
    t = np.asarray(records["time"].values, float)
    n = _nfft(nfft, t.size)
    tail = _margin(force_window, fs)
    acc = _decisions(records, accept)
    hits = np.asarray(records["hit"].values)
    force = np.asarray(records["force"].values, float)
    rows = np.nonzero(acc)[0]
    if rows.size == 0:
        raise ModalnbError(f"all {hits.size} hits are rejected: no FRF to average. Hint: accept "
                           "at least one hit.")
    for h in rows:
        if not holds_pulse(force[h]):
            raise RecordError(
                f"hit {hits[h]}: the force record holds no pulse (flat), so its FRF is undefined. "
                "Hint: reject that hit (accept=...).")
    if tail is not None:
        force = _force_windowed(force, t, rows, tail)
    resp = np.asarray(records["response"].values, float)
    # each channel and the force at unit peak before squares (powers of two, exact)
    sx = unit_scale(resp[rows], axis=(0, 2)).reshape(-1)
    sf = float(unit_scale(force[rows]).item())
    spec_x = np.fft.rfft(resp[rows] * sx[None, :, None], n=n, axis=-1)
    spec_f = np.fft.rfft(force[rows] * sf, n=n, axis=-1)
    labels = excitation_labels(records)
    names = _in_order(labels)
    n_ch, n_f = resp.shape[1], spec_f.shape[-1]
    out = np.full((len(names), n_ch, n_f), np.nan + 0j)
    coh = np.full((len(names), n_ch, n_f), np.nan)
    level = np.full((len(names), n_f), np.nan)
    n_hits = np.zeros(len(names), int)
    for e, name in enumerate(names):
        sel = labels[rows] == name
        n_hits[e] = int(sel.sum())
        if not n_hits[e]:
            continue
        xs, fsp = spec_x[sel], spec_f[sel]
        g_ff = np.sum(np.abs(fsp) ** 2, axis=0)
        g_xx = np.sum(np.abs(xs) ** 2, axis=0)
        g_fx = np.sum(np.conj(fsp)[:, None, :] * xs, axis=0)
        with np.errstate(divide="ignore", invalid="ignore"):
            h = g_fx / g_ff[None, :] if est == "H1" else g_xx / np.conj(g_fx)
            coh[e] = np.abs(g_fx) ** 2 / (g_ff[None, :] * g_xx)
            peak = np.max(g_ff)
            level[e] = 10 * np.log10(g_ff / peak) if peak > 0 else np.nan
        h[~np.isfinite(h)] = np.nan
        # H of the scaled signals is (sx / sf) H: back to the records' units
        out[e] = h * (sf / sx)[:, None]
    coh = np.where(np.isfinite(coh), np.clip(coh, 0.0, 1.0), np.nan)
    resp_units = str(records["response"].attrs.get("units", ""))
    force_units = str(records["force"].attrs.get("units", ""))
    units = f"({resp_units})/({force_units})"
    coords = {"excitation": np.array(names, dtype=object), **_channel_coords(records),
              "frequency": ("frequency", np.fft.rfftfreq(n, 1.0 / fs), {"units": "Hz"})}
    ds = xr.Dataset(
        {
            "frf": (("excitation", "channel", "frequency"), out, {
                "units": units, "description": f"{est} estimate, averaged over the accepted hits "
                                               "of each excitation"}),
            "coherence": (("excitation", "channel", "frequency"), coh, {
                "units": "1", "description": "ordinary coherence |G_fx|^2 / (G_ff G_xx)"}),
            "force_level_db": (("excitation", "frequency"), level, {
                "units": "dB", "description": "force autospectrum G_ff below its peak"}),
            "n_hits": ("excitation", n_hits, {"description": "accepted hits averaged"}),
        },
        coords=coords,
    )
    tau = records.attrs.get("exponential_window_tau_s")
    ds.attrs = {
        "estimator": est,
        "method": "one rfft per hit over the whole record, averaged over hits (Bendat & "
                  "Piersol 2010, Random Data, 4th ed.)",
        "nfft": n,
        "sample_rate": fs,
        "frequency_step_hz": fs / n,
        "force_window": ("none: force as recorded" if tail is None else
                         f"main pulse kept (plus {tail} samples), the rest zeroed"),
        "hits_used": [int(v) for v in hits[rows]],
        "windowed_records": "no",
        "coherence_note": ("" if n_hits.max() > 1 else
                           "one hit per excitation: coherence is 1 by construction and says "
                           "nothing; average several hits"),
    }
    if tau is not None:
        ds.attrs["exponential_window_tau_s"] = float(tau)
        ds.attrs["windowed_records"] = (
            f"yes: the response carries an exponential window (tau = {float(tau):.6g} s); this "
            "is the FRF of the windowed records (every pole shifted by -1/tau, more damping) "
            "and cannot be un-windowed; synthesise_frf adds the same 1/tau to compare")
    return ds


# ---------------------------------------------------------------- model FRF
def _frequencies(frequency: Any) -> np.ndarray:
    if isinstance(frequency, (xr.Dataset, xr.DataArray)):
        if "frequency" not in frequency.coords:
            raise ModalnbError("`frequency` is an xarray object without a 'frequency' coordinate.")
        frequency = frequency["frequency"].values
    try:
        f = np.atleast_1d(np.asarray(frequency, dtype=float))
    except (TypeError, ValueError):
        raise ModalnbError(f"`frequency` must be numbers in Hz, was {frequency!r}.") from None
    if f.ndim != 1 or f.size == 0 or not np.all(np.isfinite(f)) or np.any(f < 0):
        raise ModalnbError("`frequency` must be a 1-D list of finite frequencies >= 0 Hz.")
    return f


def _table_units(table: xr.Dataset) -> str:
    for var in ("frequency_hz", "damping_ratio", "residue_real", "residue_imag"):
        if var not in table.data_vars:
            raise ModalnbError(
                f"the table has no variable {var!r}: give a modalnb.fit_modes table."
                f"{did_you_mean(var, map(str, table.data_vars))}")
    r_units = str(table["residue_real"].attrs.get("units", ""))
    match = _PER_UNIT_FORCE.match(r_units)
    if not match:
        raise ModalnbError(
            f"the table's residues are in {r_units!r}, not per unit force: it was fitted without "
            "a force record, so it holds no FRF. Hint: fit records that carry the hammer force.")
    return f"({match['resp']})/({match['force']})"


def _residues(table: xr.Dataset, excitation: str | Sequence[str] | None
              ) -> tuple[list[str], np.ndarray]:
    """Excitation labels and residues per unit force (mode, excitation, channel)."""
    channel_res = table["residue_real"].values + 1j * table["residue_imag"].values
    grouped = ("excitation_node" in table.coords and table["excitation_node"].dims == ("hit",)
               and "hit_residue_real" in table.data_vars)
    if not grouped:
        if excitation is not None and not isinstance(excitation, str):
            raise ModalnbError("the table has one excitation: give `excitation` as one label "
                               "(the name to give it) or None.")
        return [excitation or DEFAULT_EXCITATION], channel_res[:, None, :]
    labels = excitation_labels(table)
    names = _in_order(labels)
    if excitation is not None:
        wanted = [excitation] if isinstance(excitation, str) else list(excitation)
        for w in wanted:
            if w not in names:
                raise ModalnbError(f"the table has no excitation {w!r} (it has {names})."
                                   f"{did_you_mean(w, names)}")
        names = wanted
    per_hit = table["hit_residue_real"].values + 1j * table["hit_residue_imag"].values
    used = (np.asarray(table["hit_accepted"].values, bool) if "hit_accepted" in table.data_vars
            else np.ones(labels.size, bool))
    out = np.full((channel_res.shape[0], len(names), channel_res.shape[1]), np.nan + 0j)
    for e, name in enumerate(names):
        sel = (labels == name) & used
        if sel.any():
            out[:, e, :] = np.nanmean(per_hit[:, sel, :], axis=1)
    return names, out


def synthesise_frf(
    table: xr.Dataset,
    frequency: Any,
    *,
    excitation: str | Sequence[str] | None = None,
    windowed: bool = True,
) -> xr.Dataset:
    """The FRF of the fitted modal model of a :func:`modalnb.fit_modes` table.

    Pole-residue form (e.g. Ewins 2000, *Modal Testing: Theory, Practice and
    Application*, 2nd ed., ch. 2; from memory)::

        H(w) = sum_r [ A_r / (i w - lambda_r) + conj(A_r) / (i w - conj(lambda_r)) ]

    with ``lambda_r = -zeta_r w_r + i w_r sqrt(1 - zeta_r^2)`` from the table's
    ``frequency_hz`` and ``damping_ratio`` and ``A_r`` the table's residue per unit force
    (``residue_real + i residue_imag``: the impulse response of the mode is ``A_r
    e^(lambda_r t) + c.c.``; the engine divides the fitted residue by the force spectrum
    ``F(lambda_r) = integral f(t) e^(-lambda_r t) dt``). The residues are those of the
    quantity recorded, so ``H`` is in the records' units with no conversion: for
    displacement ``A_r`` is the receptance residue; for velocity ``lambda_r A_r`` and for
    acceleration ``lambda_r^2 A_r`` of it (``s`` and ``s^2`` times the receptance). An
    accelerance also has a constant term the modes do not carry: the receptance is
    strictly proper, so ``s^2 H_d(s) = sum_r [lambda_r^2 A_r / (s - lambda_r) + c.c.] +
    (M^-1)_jk`` (the jump of the velocity impulse response at t = 0); it is zero between
    two lumped masses but not at a driving point, where the measured accelerance above the
    last mode tends to it. Only underdamped modes enter (the table keeps one real residue
    of an overdamped mode's two poles, too little for its FRF); the poles set aside
    (``aside_*``) carry no residues in the table and are not included (attribute
    ``left_out``).

    Exponential window: where the table was fitted on records carrying one (attribute
    ``exponential_window_tau_s`` > 0) and `windowed` is True (default), every pole is
    moved to ``lambda_r - 1/tau``, which is exactly the FRF of the windowed records
    (``e^(-t/tau) (h * f) = (e^(-t/tau) h) * (e^(-t/tau) f)``; with the force not
    windowed, up to the window's decay over the pulse), so it compares with
    :func:`frf` of those records. ``windowed=False`` gives the structure's FRF.

    Parameters
    ----------
    table : xarray.Dataset
        A :func:`modalnb.fit_modes` table of records with force.
    frequency : array_like or xarray object
        Frequencies (Hz), or a :func:`frf` result (its ``frequency``).
    excitation : str or list of str, optional
        When the table's hits name their excitation points (``excitation_node`` over
        ``hit``): the excitations to synthesise (default all, residues averaged over the
        accepted hits of each). Otherwise the label to give the table's one excitation
        (default :data:`DEFAULT_EXCITATION`), e.g. ``"m1+Z"`` to line up with :func:`frf`.
    windowed : bool
        Add the exponential window's damping when the records carried one (see above).

    Returns
    -------
    xarray.Dataset
        ``frf(excitation, channel, frequency)`` complex, units ``"(<response>)/(<force>)"``.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> table = xr.Dataset(
    ...     {"frequency_hz": ("mode", [10.0]), "damping_ratio": ("mode", [0.01]),
    ...      "residue_real": (("mode", "channel"), [[0.0]], {"units": "m/(N s)"}),
    ...      "residue_imag": (("mode", "channel"), [[-0.5]], {"units": "m/(N s)"})},
    ...     coords={"channel": ["tip"]})
    >>> h = synthesise_frf(table, [10.0])["frf"]
    >>> round(float(abs(h.squeeze())) * 0.01 * 2 * np.pi * 10.0 / 0.5, 2)  # |H| ~ |A|/(zeta wn)
    1.0
    """
    units = _table_units(table)
    f = _frequencies(frequency)
    poles = model_poles(table)
    regime = (np.asarray(table["regime"].values).astype(str) if "regime" in table.data_vars
              else np.where(np.asarray(table["damping_ratio"].values, float) < 1,
                            "underdamped", "overdamped"))
    use = (regime == "underdamped") & np.isfinite(poles)
    left_out = [f"mode {m} ({r}): one real residue of two poles"
                for m, r, u in zip(np.asarray(table["mode"].values).tolist() if "mode" in table.coords
                                   else range(1, use.size + 1), regime, use, strict=True) if not u]
    if "aside_frequency_hz" in table.data_vars and table.sizes.get("aside_pole", 0):
        left_out.append(f"{table.sizes['aside_pole']} pole(s) set aside: the table keeps no "
                        "residues for them")
    tau = float(table.attrs.get("exponential_window_tau_s", -1.0))
    shifted = bool(windowed and tau > 0)
    if shifted:
        poles = poles - 1.0 / tau
    names, res = _residues(table, excitation)
    s = 2j * np.pi * f
    h = np.zeros((len(names), res.shape[2], f.size), complex)
    for k in np.nonzero(use)[0]:
        lam, a = poles[k], res[k]  # a: (excitation, channel)
        h += (a[:, :, None] / (s - lam)[None, None, :]
              + np.conj(a)[:, :, None] / (s - np.conj(lam))[None, None, :])
    coords = {"excitation": np.array(names, dtype=object), **_channel_coords(table),
              "frequency": ("frequency", f, {"units": "Hz"})}
    ds = xr.Dataset(
        {"frf": (("excitation", "channel", "frequency"), h, {
            "units": units, "description": "FRF of the fitted modal model (pole-residue form)"})},
        coords=coords,
    )
    ds.attrs = {
        "method": "pole-residue sum over the table's underdamped modes (Ewins 2000, Modal "
                  "Testing, ch. 2)",
        "modes_used": [int(v) for v in np.nonzero(use)[0] + 1],
        "left_out": "; ".join(left_out) or "none",
        "windowed_records": (
            f"yes: poles moved by -1/tau (tau = {tau:.6g} s) to match the FRF of the windowed "
            "records" if shifted else
            "no" if tau <= 0 else
            f"records were windowed (tau = {tau:.6g} s) but this is the structure's FRF "
            "(windowed=False)"),
    }
    return ds
