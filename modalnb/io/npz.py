"""NumPy archives (``.npz``) holding the record-set arrays by name.

Read with ``allow_pickle=False``. Arrays ``response`` (hit, channel, time) or (channel,
time); ``time`` or scalar ``sample_rate``; optional ``force``, ``channel``, ``hit``,
``node``, ``direction``, ``x``, ``y``, ``z``, ``full_scale``, ``excitation_node``,
``excitation_direction``.
"""

from __future__ import annotations

import zipfile
import zlib
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._errors import RecordError
from .._utils import did_you_mean
from ..records import _str_array, build_records, is_real_numeric

__all__ = ["read_npz", "NPZ_NAMES"]

_STR_CHANNEL_COORDS = ("node", "direction")
_NUM_CHANNEL_COORDS = ("x", "y", "z", "full_scale")
_STR_HIT_COORDS = ("excitation_node", "excitation_direction")
#: The array names an npz record file may hold.
NPZ_NAMES = (
    ("response", "time", "sample_rate", "force", "channel", "hit")
    + _STR_CHANNEL_COORDS
    + _NUM_CHANNEL_COORDS
    + _STR_HIT_COORDS
)
#: First bytes of a zip archive (PKWARE APPNOTE.TXT, local file header and empty archive).
ZIP_MAGICS = (b"PK\x03\x04", b"PK\x05\x06")


def _load(path: Path, src: str, head: bytes) -> dict[str, np.ndarray]:
    if not head.startswith(ZIP_MAGICS):
        raise RecordError(
            f"{src}: not an npz archive (first bytes {head[:4]!r}). Hint: write it with "
            "numpy.savez."
        )
    arrays: dict[str, np.ndarray] = {}
    try:
        with np.load(path, allow_pickle=False) as npz:
            for key in npz.files:
                try:
                    arrays[key] = np.asarray(npz[key])
                except ValueError as exc:
                    if "pickle" in str(exc):
                        raise RecordError(
                            f"{src}: array {key!r} holds Python objects, which would need "
                            "unpickling; modalnb loads npz files without pickle for safety. "
                            "Hint: save numbers and strings as plain numpy arrays."
                        ) from None
                    raise
    except (ValueError, OSError, EOFError, zipfile.BadZipFile, zlib.error) as exc:
        raise RecordError(f"{src}: cannot read this npz archive ({exc}).") from None
    for key in arrays:
        if key not in NPZ_NAMES:
            raise RecordError(
                f"{src}: unknown array {key!r}; npz record files may hold {list(NPZ_NAMES)}."
                f"{did_you_mean(key, NPZ_NAMES)}"
            )
    return arrays


def _response(src: str, arrays: dict[str, np.ndarray]) -> np.ndarray:
    if "response" not in arrays:
        raise RecordError(
            f"{src}: no array named 'response'. Arrays present: {sorted(arrays)}."
            f"{did_you_mean('response', arrays)} Hint: save the samples as response=..."
        )
    resp = arrays["response"]
    if resp.ndim == 2:
        resp = resp[None, :, :]
    elif resp.ndim != 3:
        raise RecordError(
            f"{src}: array 'response' has shape {resp.shape}; expected (hit, channel, time) or "
            "(channel, time)."
        )
    if not is_real_numeric(resp):
        raise RecordError(
            f"{src}: variable 'response' must hold real numbers, its type is {resp.dtype}. "
            "Hint: store the samples as float64."
        )
    return resp


def _time(src: str, arrays: dict[str, np.ndarray], n_t: int) -> tuple[np.ndarray, dict[str, Any]]:
    """The time axis, and the ``sample_rate`` attr when the archive gives one."""
    attrs: dict[str, Any] = {}
    if "sample_rate" in arrays:
        fs_arr = arrays["sample_rate"]
        ok = fs_arr.size == 1 and is_real_numeric(fs_arr)
        fs = float(fs_arr.reshape(-1)[0]) if ok else float("nan")
        if not (np.isfinite(fs) and fs > 0):
            raise RecordError(
                f"{src}: 'sample_rate' must be one positive number (Hz), is {fs_arr!r}."
            )
        attrs["sample_rate"] = fs
    if "time" in arrays:
        return arrays["time"], attrs
    if "sample_rate" in arrays:
        return np.arange(n_t) / attrs["sample_rate"], attrs
    raise RecordError(f"{src}: neither 'time' nor 'sample_rate' is given. Hint: save one of them.")


def _channel_names(src: str, arrays: dict[str, np.ndarray], n_ch: int) -> list[str]:
    if "channel" not in arrays:
        return [f"ch{i + 1}" for i in range(n_ch)]
    ch = arrays["channel"]
    if ch.dtype.kind not in "SU" or ch.ndim != 1:
        raise RecordError(
            f"{src}: 'channel' must be a 1-D array of names (strings), is {ch.dtype} {ch.shape}."
        )
    return _str_array(ch).tolist()


def _side_coords(
    src: str, arrays: dict[str, np.ndarray]
) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
    """Per-channel and per-hit coords, with their types checked."""
    ch_coords: dict[str, np.ndarray] = {}
    hit_coords: dict[str, np.ndarray] = {}
    for name in _STR_CHANNEL_COORDS + _STR_HIT_COORDS:
        if name in arrays:
            a = arrays[name]
            if a.dtype.kind not in "SU":
                raise RecordError(f"{src}: {name!r} must hold strings, has type {a.dtype}.")
            (ch_coords if name in _STR_CHANNEL_COORDS else hit_coords)[name] = _str_array(a)
    for name in _NUM_CHANNEL_COORDS:
        if name in arrays:
            a = arrays[name]
            if not is_real_numeric(a):
                raise RecordError(f"{src}: {name!r} must hold numbers, has type {a.dtype}.")
            ch_coords[name] = a.astype(np.float64)
    return ch_coords, hit_coords


def read_npz(
    path: Path, src: str, head: bytes, *, units: str = "m/s^2", force_units: str = "N"
) -> xr.Dataset:
    """Read an npz record archive (array names in the module docstring).

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.npz"
    >>> np.savez(p, response=np.ones((2, 32)), sample_rate=64.0)
    >>> read_npz(p, "r.npz", p.read_bytes()[:8]).attrs
    {'sample_rate': 64.0}
    """
    arrays = _load(path, src, head)
    resp = _response(src, arrays)
    time, attrs = _time(src, arrays, resp.shape[2])
    force = arrays.get("force")
    if force is not None and force.ndim == 1 and resp.shape[0] == 1:
        force = force[None, :]
    channels = _channel_names(src, arrays, resp.shape[1])
    ch_coords, hit_coords = _side_coords(src, arrays)
    return build_records(
        resp,
        time,
        channels=channels,
        force=force,
        hits=arrays.get("hit"),
        units=units,
        force_units=force_units,
        channel_coords=ch_coords,
        hit_coords=hit_coords,
        attrs=attrs,
        source=src,
    )
