"""The record set: the one container every part of modalnb works on.

A record set is an :class:`xarray.Dataset` with

* ``response(hit, channel, time)`` float64, attr ``units`` (e.g. ``"m/s^2"``);
* optional ``force(hit, time)`` float64, attr ``units`` (``"N"``);
* coords ``time`` (s, uniformly spaced, may start below 0 for pre-trigger samples),
  ``channel`` (str), ``hit`` (int labels); optional per-channel coords ``node``,
  ``direction`` (e.g. ``"+Z"``), ``x``, ``y``, ``z`` (m), ``full_scale``; optional per-hit
  coords ``excitation_node`` and ``excitation_direction``;
* optional attrs ``sample_rate`` (Hz), ``exponential_window_tau_s`` (s),
  ``full_scale`` and ``force_full_scale`` (ADC full scale in the variable's units).

:func:`build_records` is the one constructor of record sets: every reader in
:mod:`modalnb.io`, the segmentation of a continuous recording and the user-facing
:func:`records_from_arrays` build through it, so a record set has one form whatever its
origin. :func:`record_parts` is its inverse. :func:`validate_records` checks a dataset
against this layout and raises :class:`~modalnb.RecordError` with a one-line message when
it does not fit; it never repairs anything silently.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError, RecordError
from ._utils import did_you_mean

__all__ = [
    "DIMS",
    "MIN_SAMPLES",
    "validate_records",
    "records_from_arrays",
    "build_records",
    "record_parts",
    "get_sample_rate",
    "has_force",
    "records_checksum",
]

#: Dimensions of the ``response`` variable, in order.
DIMS = ("hit", "channel", "time")
#: Fewest time samples a record set may have.
MIN_SAMPLES = 16
#: Relative tolerance on the time step (rounded CSV times are fine).
TIME_STEP_RTOL = 0.01

_PER_CHANNEL = ("node", "direction", "x", "y", "z", "full_scale")
_PER_HIT = ("excitation_node", "excitation_direction")


def _where(source: str | None) -> str:
    return f"{source}: " if source else ""


def _check_finite(values: np.ndarray, var: str, ds: xr.Dataset, source: str | None) -> None:
    bad = ~np.isfinite(values)
    if not bad.any():
        return
    idx = np.argwhere(bad)[0]
    hit = ds["hit"].values[idx[0]]
    where = f"hit {hit}"
    if var == "response":
        where += f", channel {ds['channel'].values[idx[1]]!r}"
    t = float(ds["time"].values[idx[-1]])
    kind = "NaN" if np.isnan(values[tuple(idx)]) else "Inf"
    raise RecordError(
        f"{_where(source)}variable {var!r} has {int(bad.sum())} non-finite sample(s); first "
        f"is {kind} at {where}, time {t:.6g} s. Hint: fill or cut the gap, or reject that hit."
    )


def _check_numeric(da: xr.DataArray, var: str, source: str | None) -> None:
    if not (np.issubdtype(da.dtype, np.floating) or np.issubdtype(da.dtype, np.integer)):
        raise RecordError(
            f"{_where(source)}variable {var!r} must hold real numbers, but its type is "
            f"{da.dtype}. Hint: convert it to float64."
        )


def _time_step(time: np.ndarray, source: str | None) -> float:
    if time.ndim != 1:
        raise RecordError(f"{_where(source)}coordinate 'time' must be 1-D, has shape {time.shape}.")
    if not np.issubdtype(time.dtype, np.number) or np.issubdtype(time.dtype, np.complexfloating):
        raise RecordError(
            f"{_where(source)}coordinate 'time' must be numbers in seconds, its type is "
            f"{time.dtype}."
        )
    if time.size < MIN_SAMPLES:
        raise RecordError(
            f"{_where(source)}too few samples: {time.size} in 'time', at least {MIN_SAMPLES} "
            "are needed."
        )
    t = time.astype(float)
    if not np.all(np.isfinite(t)):
        raise RecordError(f"{_where(source)}coordinate 'time' has NaN or Inf values.")
    dt = np.diff(t)
    if np.any(dt <= 0):
        i = int(np.argmax(dt <= 0))
        raise RecordError(
            f"{_where(source)}coordinate 'time' must increase, but sample {i + 1} "
            f"({t[i + 1]:.6g} s) does not follow sample {i} ({t[i]:.6g} s). "
            "Hint: sort the samples or split the file."
        )
    step = float(np.median(dt))
    off = np.abs(dt - step) > TIME_STEP_RTOL * step
    if off.any():
        i = int(np.argmax(off))
        raise RecordError(
            f"{_where(source)}coordinate 'time' is not uniformly spaced: step {dt[i]:.6g} s "
            f"after sample {i} differs from the median step {step:.6g} s by more than "
            f"{TIME_STEP_RTOL:.0%}. Hint: resample the record to a uniform rate."
        )
    return step


def validate_records(ds: Any, *, source: str | None = None) -> xr.Dataset:
    """Check that `ds` is a record set in modalnb's layout and return it unchanged.

    Parameters
    ----------
    ds : xarray.Dataset
        Candidate record set (layout in the module docstring).
    source : str, optional
        File name or other origin, put at the start of error messages.

    Returns
    -------
    xarray.Dataset
        `ds` itself (no copy, no repair).

    Raises
    ------
    RecordError
        With a one-line message naming the variable, channel or hit and what is wrong.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb import records_from_arrays, validate_records
    >>> ds = records_from_arrays(np.zeros((2, 64)), sample_rate=1024.0)
    >>> validate_records(ds) is ds
    True
    """
    if not isinstance(ds, xr.Dataset):
        raise RecordError(f"{_where(source)}expected an xarray.Dataset, got {type(ds).__name__}.")
    _check_response(ds, source)
    step = _time_step(np.asarray(ds["time"].values), source)
    _check_labels(ds, source)
    if "force" in ds.data_vars:
        _check_force(ds, source)
    _check_finite(np.asarray(ds["response"].values, dtype=float), "response", ds, source)
    _check_side_coords(ds, source)
    _check_attrs(ds, step, source)
    return ds


def _check_response(ds: xr.Dataset, source: str | None) -> None:
    """``response`` is there, with dims (hit, channel, time), numbers and index coords."""
    w = _where(source)
    if "response" not in ds.data_vars:
        raise RecordError(
            f"{w}no variable named 'response'. Variables present: {sorted(map(str, ds.data_vars))}."
            f"{did_you_mean('response', map(str, ds.data_vars))} Hint: rename your response "
            "variable to 'response' with dims (hit, channel, time)."
        )
    resp = ds["response"]
    if tuple(resp.dims) != DIMS:
        raise RecordError(
            f"{w}variable 'response' has dims {tuple(map(str, resp.dims))}, expected {DIMS}. "
            "Hint: use .transpose('hit', 'channel', 'time') or add the missing dims."
        )
    _check_numeric(resp, "response", source)
    for dim in DIMS:
        if dim not in ds.coords:
            raise RecordError(f"{w}coordinate {dim!r} is missing. Hint: assign it with assign_coords.")


def _check_labels(ds: xr.Dataset, source: str | None) -> None:
    """At least one hit and channel; unique string channel names, unique integer hits."""
    w = _where(source)
    resp = ds["response"]
    if resp.sizes["hit"] < 1 or resp.sizes["channel"] < 1:
        raise RecordError(f"{w}variable 'response' is empty (sizes {dict(resp.sizes)}).")
    ch = ds["channel"].values
    if ch.dtype.kind not in "UO" or not all(isinstance(c, str) for c in ch.tolist()):
        raise RecordError(f"{w}coordinate 'channel' must hold strings (channel names), has {ch.dtype}.")
    if len(set(ch.tolist())) != ch.size:
        dup = next(c for c in ch.tolist() if ch.tolist().count(c) > 1)
        raise RecordError(f"{w}channel name {dup!r} appears more than once.")
    hits = ds["hit"].values
    if not np.issubdtype(hits.dtype, np.integer):
        raise RecordError(f"{w}coordinate 'hit' must hold integer labels, has {hits.dtype}.")
    if np.unique(hits).size != hits.size:
        raise RecordError(f"{w}hit labels are not unique: {hits.tolist()}.")


def _check_force(ds: xr.Dataset, source: str | None) -> None:
    f = ds["force"]
    if tuple(f.dims) != ("hit", "time"):
        raise RecordError(
            f"{_where(source)}variable 'force' has dims {tuple(map(str, f.dims))}, expected "
            "('hit', 'time')."
        )
    _check_numeric(f, "force", source)
    _check_finite(np.asarray(f.values, dtype=float), "force", ds, source)


def _check_side_coords(ds: xr.Dataset, source: str | None) -> None:
    w = _where(source)
    for name in _PER_CHANNEL:
        if name in ds.coords and tuple(ds[name].dims) != ("channel",):
            raise RecordError(f"{w}coordinate {name!r} must be per channel (dim 'channel').")
    for name in _PER_HIT:
        if name in ds.coords and tuple(ds[name].dims) != ("hit",):
            raise RecordError(f"{w}coordinate {name!r} must be per hit (dim 'hit').")
    if "full_scale" in ds.coords and np.any(~(np.asarray(ds["full_scale"].values, float) > 0)):
        raise RecordError(f"{w}coordinate 'full_scale' must be positive on every channel.")


def _check_attrs(ds: xr.Dataset, step: float, source: str | None) -> None:
    """Positive numeric attrs; ``sample_rate`` agrees with the time step to 1 %."""
    if "sample_rate" in ds.attrs:
        fs = _positive_attr(ds, "sample_rate", source)
        if abs(fs * step - 1.0) > TIME_STEP_RTOL:
            raise RecordError(
                f"{_where(source)}attribute sample_rate={fs:g} Hz disagrees with the time step "
                f"{step:.6g} s ({1 / step:.6g} Hz). Hint: fix or drop the attribute."
            )
    for name in ("exponential_window_tau_s", "full_scale", "force_full_scale"):
        if name in ds.attrs:
            _positive_attr(ds, name, source)


def _positive_attr(ds: xr.Dataset, name: str, source: str | None) -> float:
    value = ds.attrs[name]
    try:
        v = float(np.asarray(value).item())
    except (TypeError, ValueError):
        v = float("nan")
    if not (np.isfinite(v) and v > 0):
        raise RecordError(f"{_where(source)}attribute {name!r} must be a positive number, was {value!r}.")
    return v


def get_sample_rate(ds: xr.Dataset) -> float:
    """Sample rate in Hz: the ``sample_rate`` attribute, else 1 / median time step.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb import records_from_arrays
    >>> get_sample_rate(records_from_arrays(np.zeros((1, 32)), sample_rate=500.0))
    500.0
    """
    if "sample_rate" in ds.attrs:
        return float(ds.attrs["sample_rate"])
    return float(1.0 / np.median(np.diff(np.asarray(ds["time"].values, dtype=float))))


def has_force(ds: xr.Dataset) -> bool:
    """True when the record set holds a ``force`` variable."""
    return "force" in ds.data_vars


def _real_array(values: Any, name: str) -> np.ndarray:
    try:
        raw = np.asarray(values)
    except (TypeError, ValueError):
        raise RecordError(f"`{name}` must be an array of real numbers.") from None
    if np.iscomplexobj(raw):
        raise RecordError(f"`{name}` holds complex numbers; records must be real. Hint: pass the real part.")
    try:
        return np.asarray(raw, dtype=np.float64)
    except (TypeError, ValueError):
        raise RecordError(f"`{name}` must be an array of real numbers, its type is {raw.dtype}.") from None


def _str_array(values: Any) -> np.ndarray:
    """Object array of ``str`` from str/bytes/object values (bytes decoded as UTF-8)."""
    arr = np.asarray(values)
    out = [v.decode("utf-8") if isinstance(v, bytes) else str(v) for v in arr.ravel().tolist()]
    return np.array(out, dtype=object).reshape(arr.shape)


def is_real_numeric(a: np.ndarray) -> bool:
    """True for integer and floating arrays (not bool, complex, str or object).

    Examples
    --------
    >>> is_real_numeric(np.zeros(3)), is_real_numeric(np.array(["a"]))
    (True, False)
    """
    return a.dtype.kind in "iuf"


def _checked_hits(w: str, hits: Any, n_hit: int) -> np.ndarray:
    if hits is None:
        return np.arange(1, n_hit + 1, dtype=np.int64)
    hits = np.asarray(hits)
    if hits.shape != (n_hit,) or hits.dtype.kind not in "iu":
        raise RecordError(
            f"{w}'hit' must hold {n_hit} integer labels, has shape {hits.shape} and type "
            f"{hits.dtype}."
        )
    if hits.dtype.kind == "u" and hits.size and int(hits.max()) > np.iinfo(np.int64).max:
        raise RecordError(f"{w}hit labels are too large for 64-bit integers.")
    return hits.astype(np.int64)


def _is_text(values: np.ndarray) -> bool:
    if values.dtype.kind in "SU":
        return True
    return values.dtype.kind == "O" and all(isinstance(v, str | bytes) for v in values.tolist())


def _side_coords(
    w: str, coords: Mapping[str, Any] | None, dim: str, n: int
) -> dict[str, tuple[str, np.ndarray]]:
    """Per-channel or per-hit coords along `dim` (length `n`); text as object arrays of str."""
    out: dict[str, tuple[str, np.ndarray]] = {}
    for name, values in (coords or {}).items():
        values = np.asarray(values)
        if values.shape != (n,):
            raise RecordError(f"{w}{name!r} has shape {values.shape}, expected one per {dim} ({n}).")
        if _is_text(values):
            values = _str_array(values)
        out[str(name)] = (dim, values)
    return out


def _checked_force(w: str, force: np.ndarray, n_hit: int, n_t: int) -> np.ndarray:
    if not is_real_numeric(force):
        raise RecordError(f"{w}variable 'force' must hold real numbers, its type is {force.dtype}.")
    if force.shape != (n_hit, n_t):
        raise RecordError(
            f"{w}variable 'force' has shape {force.shape}, expected (hit, time) = {(n_hit, n_t)}."
        )
    return force.astype(np.float64)


def build_records(
    response: np.ndarray,
    time: np.ndarray,
    *,
    channels: Sequence[Any],
    force: np.ndarray | None = None,
    hits: np.ndarray | None = None,
    units: str = "m/s^2",
    force_units: str = "N",
    channel_coords: Mapping[str, Any] | None = None,
    hit_coords: Mapping[str, Any] | None = None,
    attrs: Mapping[str, Any] | None = None,
    var_attrs: Mapping[str, Mapping[str, Any]] | None = None,
    extra: xr.Dataset | None = None,
    source: str | None = None,
) -> xr.Dataset:
    """Build a validated record set from arrays: the one constructor of record sets.

    Every reader in :mod:`modalnb.io`, :func:`records_from_arrays` and the segmentation of
    a continuous recording end here, so a record set always comes out in one form:
    ``response`` and ``force`` float64, ``time`` float64 (attr ``units = "s"``), ``hit``
    int64, channel names and string coords as object arrays of ``str``.

    Parameters
    ----------
    response : numpy.ndarray
        Shape (hit, channel, time), real numbers.
    time : numpy.ndarray
        Shape (time,), seconds.
    channels : sequence of str
        One name per channel (bytes are decoded as UTF-8).
    force : numpy.ndarray, optional
        Shape (hit, time).
    hits : numpy.ndarray, optional
        Integer hit labels; default 1..N.
    units, force_units : str
        The ``units`` attrs of response and force.
    channel_coords, hit_coords : mapping of str to array, optional
        Per-channel coords (``node``, ``direction``, ``x``, ...) and per-hit coords
        (``excitation_node``, ...).
    attrs : mapping, optional
        Dataset attributes.
    var_attrs : mapping of str to mapping, optional
        Attributes of named variables; an entry replaces that variable's default attrs
        (the units above) whole, so a file's attrs come back as they were.
    extra : xarray.Dataset, optional
        Further variables to keep as they are (e.g. from a netCDF file), without the
        ``hit``, ``channel`` and ``time`` index coords.
    source : str, optional
        File name or origin, put at the start of error messages.

    Returns
    -------
    xarray.Dataset
        A record set that passes :func:`validate_records`.

    Raises
    ------
    RecordError
        A one-line message starting with `source` when an array has the wrong type or shape.

    Examples
    --------
    >>> import numpy as np
    >>> ds = build_records(np.zeros((1, 2, 32)), np.arange(32) / 256.0, channels=["a", "b"])
    >>> ds["hit"].values.tolist(), ds["channel"].values.tolist(), ds["time"].attrs
    ([1], ['a', 'b'], {'units': 's'})
    """
    w = _where(source)
    response, time = np.asarray(response), np.asarray(time)
    if not is_real_numeric(response):
        raise RecordError(
            f"{w}variable 'response' must hold real numbers, its type is {response.dtype}. "
            "Hint: store the samples as float64."
        )
    if response.ndim != 3:
        raise RecordError(
            f"{w}variable 'response' must have dims {DIMS}, has shape {response.shape}."
        )
    n_hit, n_ch, n_t = response.shape
    if time.ndim != 1 or time.size != n_t:
        raise RecordError(
            f"{w}'time' has shape {time.shape} but 'response' has {n_t} samples per record. "
            "Hint: give one time value per sample."
        )
    if not is_real_numeric(time):
        raise RecordError(f"{w}'time' must hold numbers in seconds, its type is {time.dtype}.")
    names = _str_array(list(channels))
    if names.shape != (n_ch,):
        raise RecordError(f"{w}{len(channels)} channel names for {n_ch} response channels.")
    coords: dict[str, Any] = {
        "hit": _checked_hits(w, hits, n_hit),
        "channel": names,
        "time": ("time", time.astype(np.float64), {"units": "s"}),
    }
    coords.update(_side_coords(w, channel_coords, "channel", n_ch))
    coords.update(_side_coords(w, hit_coords, "hit", n_hit))
    data_vars: dict[str, Any] = {
        "response": (DIMS, response.astype(np.float64), {"units": str(units)})
    }
    if force is not None:
        force = _checked_force(w, np.asarray(force), n_hit, n_t)
        data_vars["force"] = (("hit", "time"), force, {"units": str(force_units)})
    ds = xr.Dataset(data_vars, coords=coords, attrs=dict(attrs or {}))
    for name, var_attr in (var_attrs or {}).items():
        if name in ds.variables:
            ds[name].attrs = dict(var_attr)
    if extra is not None:
        ds = ds.assign_coords({str(k): v.variable for k, v in extra.coords.items()})
        ds = ds.assign({str(k): v.variable for k, v in extra.data_vars.items()})
    return validate_records(ds, source=source)


def record_parts(ds: xr.Dataset) -> dict[str, Any]:
    """Split a record set into the arguments of :func:`build_records` (its inverse).

    ``build_records(**record_parts(ds))`` is identical to `ds` when `ds` already has the
    form :func:`build_records` gives. Readers of files that hold the layout (netCDF) and
    the combination of several files into one record set go through this.

    Examples
    --------
    >>> import numpy as np
    >>> ds = records_from_arrays(np.ones((1, 2, 32)), 64.0, node=["n1", "n2"])
    >>> build_records(**record_parts(ds)).identical(ds)
    True
    """
    per_channel = [str(n) for n, c in ds.coords.items() if n != "channel" and c.dims == ("channel",)]
    per_hit = [str(n) for n, c in ds.coords.items() if n != "hit" and c.dims == ("hit",)]
    layout = ["response", "force", *DIMS, *per_channel, *per_hit]
    rest = ds.drop_vars([n for n in layout if n in ds.variables])
    return {
        "response": ds["response"].values,
        "time": ds["time"].values,
        "channels": ds["channel"].values.tolist(),
        "force": ds["force"].values if "force" in ds.data_vars else None,
        "hits": ds["hit"].values,
        "channel_coords": {n: ds[n].values for n in per_channel},
        "hit_coords": {n: ds[n].values for n in per_hit},
        "attrs": dict(ds.attrs),
        "var_attrs": {n: dict(ds[n].attrs) for n in layout if n in ds.variables},
        "extra": rest if rest.variables else None,
    }


def records_from_arrays(
    response: Any,
    sample_rate: float,
    *,
    channels: Sequence[str] | None = None,
    force: Any = None,
    hits: Sequence[int] | None = None,
    t0: float = 0.0,
    units: str = "m/s^2",
    force_units: str = "N",
    node: Sequence[str] | None = None,
    direction: Sequence[str] | None = None,
    position: Any = None,
    attrs: dict[str, Any] | None = None,
) -> xr.Dataset:
    """Build a validated record set from plain arrays sampled at `sample_rate`.

    The front end for users: it checks the arguments (naming them in its errors), makes
    the time axis ``t0 + k / sample_rate`` and hands over to :func:`build_records`.

    Parameters
    ----------
    response : array_like
        Shape (hit, channel, time), (channel, time) for a single hit, or (time,) for a
        single channel of a single hit.
    sample_rate : float
        Samples per second (Hz).
    channels : sequence of str, optional
        Channel names; default ``"ch1"``, ``"ch2"``, ...
    force : array_like, optional
        Shape (hit, time), or (time,) for one hit.
    hits : sequence of int, optional
        Hit labels; default 1..N.
    t0 : float
        Time of the first sample in seconds (negative with pre-trigger).
    units, force_units : str
        Units of response and force.
    node, direction : sequence of str, optional
        Per-channel node names and measurement directions (e.g. ``"+Z"``).
    position : array_like, optional
        Node positions, shape (channel, 3), in m; stored as coords ``x``, ``y``, ``z``.
    attrs : dict, optional
        Extra dataset attributes (``exponential_window_tau_s``, ``full_scale``, ...).

    Returns
    -------
    xarray.Dataset
        A record set that passes :func:`validate_records`.

    Examples
    --------
    >>> import numpy as np
    >>> t = np.arange(256) / 1024.0
    >>> x = np.exp(-5 * t) * np.cos(2 * np.pi * 80 * t)
    >>> ds = records_from_arrays(x[None, None, :], 1024.0, channels=["tip"])
    >>> dict(ds["response"].sizes)
    {'hit': 1, 'channel': 1, 'time': 256}
    """
    from ._utils import check_positive

    try:
        fs = check_positive("sample_rate", sample_rate)
    except ModalnbError as exc:
        raise RecordError(str(exc)) from None
    r = _real_array(response, "response")
    if r.ndim == 1:
        r = r[None, None, :]
    elif r.ndim == 2:
        r = r[None, :, :]
    elif r.ndim != 3:
        raise RecordError(
            f"`response` must have 1, 2 or 3 dims (hit, channel, time), has shape {r.shape}."
        )
    n_hit, n_ch, n_t = r.shape
    names = [f"ch{i + 1}" for i in range(n_ch)] if channels is None else [str(c) for c in channels]
    if len(names) != n_ch:
        raise RecordError(f"{len(names)} channel names given for {n_ch} response channels.")
    if hits is None:
        hits = list(range(1, n_hit + 1))
    hit_arr = np.asarray(hits)
    if hit_arr.shape != (n_hit,) or not np.issubdtype(hit_arr.dtype, np.integer):
        raise RecordError(f"`hits` must be {n_hit} integer labels, got {list(hits)!r}.")
    side: dict[str, np.ndarray] = {}
    for name, val in (("node", node), ("direction", direction)):
        if val is not None:
            side[name] = np.array([str(v) for v in val], dtype=object)
            if len(side[name]) != n_ch:
                raise RecordError(f"`{name}` has {len(side[name])} entries for {n_ch} channels.")
    if position is not None:
        p = np.asarray(position, dtype=float)
        if p.shape != (n_ch, 3):
            raise RecordError(f"`position` must have shape ({n_ch}, 3), has {p.shape}.")
        side.update({axis: p[:, k] for k, axis in enumerate("xyz")})
    f = None
    if force is not None:
        f = _real_array(force, "force")
        f = f[None, :] if f.ndim == 1 else f
        if f.shape != (n_hit, n_t):
            raise RecordError(f"`force` must have shape (hit, time) = {(n_hit, n_t)}, has {f.shape}.")
    return build_records(
        r,
        float(t0) + np.arange(n_t) / fs,
        channels=names,
        force=f,
        hits=hit_arr,
        units=units,
        force_units=force_units,
        channel_coords=side,
        attrs={"sample_rate": fs, **(attrs or {})},
        var_attrs={axis: {"units": "m"} for axis in "xyz" if axis in side},
    )


def records_checksum(ds: xr.Dataset) -> str:
    """SHA-256 of the arrays that define a record set (time, hit, channel, response, force).

    Two record sets with the same checksum give the same modal table for the same recipe.

    Examples
    --------
    >>> import numpy as np
    >>> a = records_from_arrays(np.ones((1, 32)), 100.0)
    >>> records_checksum(a) == records_checksum(a.copy(deep=True))
    True
    """
    import hashlib

    h = hashlib.sha256()
    for name in ("time", "hit", "response", "force"):
        if name in ds.variables:
            arr = np.ascontiguousarray(np.asarray(ds[name].values, dtype=np.float64))
            h.update(name.encode())
            h.update(str(arr.shape).encode())
            h.update(arr.tobytes())
    h.update("\x1f".join(map(str, ds["channel"].values.tolist())).encode())
    return "sha256:" + h.hexdigest()
