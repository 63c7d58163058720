"""Reading, writing and cutting record sets.

* :func:`open_records` reads a record set (layout in :mod:`modalnb.records`) from netCDF
  (``.nc``: netCDF4/HDF5 or classic netCDF3), CSV (``.csv``/``.txt``), WAV (``.wav``) or
  NumPy (``.npz``) files, or from a list of files holding one hit each.
* :func:`save_records` writes a record set to netCDF4 atomically; reading it back with
  :func:`open_records` gives an identical dataset.
* :func:`segment_recording` cuts one continuous recording holding several hits into a
  record set, triggering on the force (or, without force, on the response).

Every result passes :func:`modalnb.records.validate_records`. Problems with a file raise
:class:`~modalnb.RecordError` (or :class:`~modalnb.RecordFileNotFoundError`) with a
one-line message that starts with the file name. Input files are only ever read.
"""

from __future__ import annotations

import csv
import io
import os
import struct
import warnings
import zipfile
import zlib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError, RecordError, RecordFileNotFoundError
from ._files import atomic_write_with
from ._utils import did_you_mean
from .records import DIMS, validate_records

__all__ = ["open_records", "save_records", "segment_recording", "SUFFIXES"]

#: File suffixes :func:`open_records` understands, and the kind of file each means.
SUFFIXES = {".nc": "netcdf", ".csv": "csv", ".txt": "csv", ".wav": "wav", ".npz": "npz"}

_OPTIONS = {
    "netcdf": (),
    "csv": ("units", "force_units", "delimiter", "decimal"),
    "wav": (
        "calibration",
        "force_channel",
        "force_calibration",
        "channels",
        "units",
        "force_units",
    ),
    "npz": ("units", "force_units"),
}
_KIND_NAME = {"netcdf": "netCDF", "csv": "CSV", "wav": "WAV", "npz": "npz"}
_STR_CHANNEL_COORDS = ("node", "direction")
_NUM_CHANNEL_COORDS = ("x", "y", "z", "full_scale")
_STR_HIT_COORDS = ("excitation_node", "excitation_direction")
_NPZ_NAMES = (
    ("response", "time", "sample_rate", "force", "channel", "hit")
    + _STR_CHANNEL_COORDS
    + _NUM_CHANNEL_COORDS
    + _STR_HIT_COORDS
)
_HDF5_MAGIC = b"\x89HDF\r\n\x1a\n"
_ZIP_MAGICS = (b"PK\x03\x04", b"PK\x05\x06")


# --------------------------------------------------------------------------- helpers


def _is_real_numeric(a: np.ndarray) -> bool:
    return a.dtype.kind in "iuf"


def _assemble(
    src: str,
    response: np.ndarray,
    time: np.ndarray,
    *,
    channels: Sequence[str],
    force: np.ndarray | None = None,
    hits: np.ndarray | None = None,
    units: str = "m/s^2",
    force_units: str = "N",
    channel_coords: Mapping[str, np.ndarray] | None = None,
    hit_coords: Mapping[str, np.ndarray] | None = None,
    attrs: Mapping[str, Any] | None = None,
) -> xr.Dataset:
    """Build and validate a record set from checked-shape arrays; errors start with `src`."""
    w = f"{src}: "
    if not _is_real_numeric(response):
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
    if not _is_real_numeric(time):
        raise RecordError(f"{w}'time' must hold numbers in seconds, its type is {time.dtype}.")
    channels = list(channels)
    if len(channels) != n_ch:
        raise RecordError(f"{w}{len(channels)} channel names for {n_ch} response channels.")
    if hits is None:
        hits = np.arange(1, n_hit + 1, dtype=np.int64)
    if hits.shape != (n_hit,) or hits.dtype.kind not in "iu":
        raise RecordError(
            f"{w}'hit' must hold {n_hit} integer labels, has shape {hits.shape} and type "
            f"{hits.dtype}."
        )
    if hits.dtype.kind == "u" and hits.size and int(hits.max()) > np.iinfo(np.int64).max:
        raise RecordError(f"{w}hit labels are too large for 64-bit integers.")
    coords: dict[str, Any] = {
        "hit": hits.astype(np.int64),
        "channel": np.array([str(c) for c in channels], dtype=object),
        "time": ("time", time.astype(np.float64), {"units": "s"}),
    }
    for name, values in (channel_coords or {}).items():
        if values.shape != (n_ch,):
            raise RecordError(
                f"{w}{name!r} has shape {values.shape}, expected one per channel ({n_ch})."
            )
        coords[name] = ("channel", values)
    for name, values in (hit_coords or {}).items():
        if values.shape != (n_hit,):
            raise RecordError(
                f"{w}{name!r} has shape {values.shape}, expected one per hit ({n_hit})."
            )
        coords[name] = ("hit", values)
    data_vars: dict[str, Any] = {
        "response": (DIMS, response.astype(np.float64), {"units": str(units)})
    }
    if force is not None:
        if not _is_real_numeric(force):
            raise RecordError(
                f"{w}variable 'force' must hold real numbers, its type is {force.dtype}."
            )
        if force.shape != (n_hit, n_t):
            raise RecordError(
                f"{w}variable 'force' has shape {force.shape}, expected (hit, time) = "
                f"{(n_hit, n_t)}."
            )
        data_vars["force"] = (
            ("hit", "time"),
            force.astype(np.float64),
            {"units": str(force_units)},
        )
    ds = xr.Dataset(data_vars, coords=coords, attrs=dict(attrs or {}))
    return validate_records(ds, source=src)


def _check_options(src: str, kind: str, options: Mapping[str, Any]) -> None:
    allowed = _OPTIONS[kind]
    for key in options:
        if key not in allowed:
            listed = ", ".join(allowed) if allowed else "none"
            raise RecordError(
                f"{src}: option {key!r} does not apply to {_KIND_NAME[kind]} files (options for "
                f"them: {listed}).{did_you_mean(key, allowed)}"
            )


def _check_file(path: Path, src: str) -> bytes:
    """Return the file's first bytes after checking it exists, is a file and is not empty."""
    if not path.exists():
        raise RecordFileNotFoundError(
            f"{src}: no such file. Hint: check the path (relative paths start at {os.getcwd()})."
        )
    if path.is_dir():
        raise RecordError(f"{src}: is a folder, not a record file.")
    try:
        with path.open("rb") as fh:
            head = fh.read(8)
    except PermissionError:
        raise RecordError(f"{src}: permission denied when reading the file.") from None
    if not head:
        raise RecordError(f"{src}: the file is empty (0 bytes). Hint: re-export the records.")
    return head


def _to_str_array(values: np.ndarray) -> np.ndarray:
    """Object array of str from str/bytes/object arrays (bytes decoded as UTF-8)."""
    out = [v.decode("utf-8") if isinstance(v, bytes) else str(v) for v in values.ravel().tolist()]
    return np.array(out, dtype=object).reshape(values.shape)


def _attrs_equal(a: Mapping[str, Any], b: Mapping[str, Any]) -> bool:
    if set(a) != set(b):
        return False
    return all(np.array_equal(np.asarray(a[k]), np.asarray(b[k])) for k in a)


def _plain_attrs(attrs: Mapping[str, Any]) -> dict[str, Any]:
    """Numpy scalars in attrs become Python scalars (JSON-safe, equal in value)."""
    return {k: (v.item() if isinstance(v, np.generic) else v) for k, v in attrs.items()}


# --------------------------------------------------------------------------- netCDF


def _read_netcdf(path: Path, src: str, head: bytes) -> xr.Dataset:
    if head.startswith(b"CDF"):
        engine = "scipy"
    elif head.startswith(_HDF5_MAGIC):
        engine = "h5netcdf"
    else:
        raise RecordError(
            f"{src}: not a netCDF file (first bytes {head[:4]!r}; netCDF3 starts with b'CDF', "
            "netCDF4 with b'\\x89HDF'). Hint: check that the file was written as netCDF."
        )
    try:
        extra = {"mmap": False} if engine == "scipy" else {}
        ds = xr.load_dataset(
            path, engine=engine, decode_times=False, decode_timedelta=False, **extra
        )
    except (OSError, ValueError, TypeError, KeyError, IndexError, EOFError) as exc:
        kind = "netCDF3" if engine == "scipy" else "netCDF4/HDF5"
        raise RecordError(
            f"{src}: cannot read this {kind} file, it looks damaged or incomplete "
            f"({type(exc).__name__}: {exc}). Hint: copy or export it again."
        ) from None
    ds = ds.drop_encoding()
    for name in list(ds.variables):
        var = ds.variables[name]
        if var.dtype.kind in "SUO":
            ds[name] = var.copy(data=_to_str_array(np.asarray(var.values)))
    if "hit" in ds.coords and ds["hit"].dtype.kind in "iu" and ds["hit"].dtype != np.int64:
        ds = ds.assign_coords(hit=ds["hit"].astype(np.int64))
    validate_records(ds, source=src)
    for name in ("response", "force"):
        if name in ds.data_vars and ds[name].dtype != np.float64:
            ds[name] = ds[name].astype(np.float64)
    ds.attrs = _plain_attrs(ds.attrs)
    for name in ds.variables:
        ds[name].attrs = _plain_attrs(ds[name].attrs)
    return ds


# --------------------------------------------------------------------------- CSV


def _sniff_delimiter(header_line: str) -> str:
    counts = {d: header_line.count(d) for d in (",", ";", "\t")}
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] else ","


def _parse_column(
    src: str, name: str, cells: Sequence[str], lines: Sequence[int], decimal: str
) -> np.ndarray:
    vals = [c.strip() for c in cells]
    if decimal == ",":
        vals = [v.replace(",", ".") for v in vals]
    try:
        return np.array([float(v) for v in vals], dtype=np.float64)
    except ValueError:
        pass
    for cell, raw, line in zip(vals, cells, lines, strict=True):
        try:
            float(cell)
        except ValueError:
            hint = "Hint: fix or remove that cell."
            if decimal == "." and "," in raw:
                hint = "Hint: for decimal commas pass decimal=','."
            raise RecordError(
                f"{src}: line {line}, column {name!r}: {raw.strip()!r} is not a number. {hint}"
            ) from None
    raise RecordError(f"{src}: column {name!r} could not be read as numbers.")  # pragma: no cover


def _read_csv(
    path: Path,
    src: str,
    *,
    units: str = "m/s^2",
    force_units: str = "N",
    delimiter: str | None = None,
    decimal: str = ".",
) -> xr.Dataset:
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise RecordError(
            f"{src}: not a UTF-8 text file (undecodable byte at offset {exc.start}). "
            "Hint: save the table as UTF-8 CSV."
        ) from None
    if not text.strip():
        raise RecordError(f"{src}: the file holds no text. Hint: re-export the records.")
    if decimal not in (".", ","):
        raise RecordError(f"{src}: option decimal must be '.' or ',', was {decimal!r}.")
    first_line = text.lstrip("\r\n").splitlines()[0]
    if delimiter is None:
        delimiter = _sniff_delimiter(first_line)
    if not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in '\r\n"':
        raise RecordError(f"{src}: option delimiter must be one character, was {delimiter!r}.")
    if delimiter == decimal:
        raise RecordError(
            f"{src}: delimiter and decimal are both {decimal!r}. Hint: decimal commas need "
            "delimiter=';'."
        )
    reader = csv.reader(io.StringIO(text), delimiter=delimiter)
    header: list[str] | None = None
    rows: list[list[str]] = []
    lines: list[int] = []
    try:
        for row in reader:
            if not row or all(not c.strip() for c in row):
                continue
            if header is None:
                header = [c.strip() for c in row]
                continue
            if len(row) != len(header):
                raise RecordError(
                    f"{src}: line {reader.line_num} has {len(row)} cells but the header has "
                    f"{len(header)} columns. Hint: check the delimiter (now {delimiter!r})."
                )
            rows.append(row)
            lines.append(reader.line_num)
    except csv.Error as exc:
        raise RecordError(f"{src}: line {reader.line_num} is not valid CSV ({exc}).") from None
    if header is None:
        raise RecordError(f"{src}: the file holds only empty cells; no header row found.")
    for i, name in enumerate(header):
        if not name:
            raise RecordError(f"{src}: column {i + 1} of the header has no name.")
    dup = [n for n in header if header.count(n) > 1]
    if dup:
        raise RecordError(f"{src}: column name {dup[0]!r} appears more than once in the header.")
    for name in header:
        for reserved in ("time", "force", "hit"):
            if name != reserved and name.lower() == reserved:
                raise RecordError(
                    f"{src}: column {name!r} looks like the reserved column {reserved!r}. Hint: "
                    f"rename it to {reserved!r}, or give the channel another name."
                )
    if "time" not in header:
        raise RecordError(
            f"{src}: no 'time' column (seconds). Columns found: {header}."
            f"{did_you_mean('time', header)} Hint: name the time column 'time'"
            + (" or pass delimiter=..." if len(header) == 1 else "")
            + "."
        )
    channels = [n for n in header if n not in ("time", "force", "hit")]
    if not channels:
        raise RecordError(
            f"{src}: no response columns; every column other than time, force and hit is a "
            f"response channel, but the header is {header}."
        )
    if not rows:
        raise RecordError(f"{src}: the table has a header but no data rows.")
    cols = list(zip(*rows, strict=True))
    data = {n: _parse_column(src, n, cols[i], lines, decimal) for i, n in enumerate(header)}
    line_arr = np.asarray(lines)
    if "hit" in data:
        labels = data["hit"]
        bad = ~(np.isfinite(labels) & (labels == np.round(labels)) & (np.abs(labels) < 2**53))
        if bad.any():
            i = int(np.argmax(bad))
            raise RecordError(
                f"{src}: line {line_arr[i]}, column 'hit': {labels[i]:g} is not an integer hit "
                "label."
            )
        labels = labels.astype(np.int64)
        starts = np.flatnonzero(np.r_[True, labels[1:] != labels[:-1]])
        order = labels[starts]
        if np.unique(order).size != order.size:
            again = next(h for h in order.tolist() if order.tolist().count(h) > 1)
            i = starts[np.flatnonzero(order == again)[1]]
            raise RecordError(
                f"{src}: rows of hit {again} are not together (hit {again} starts again at line "
                f"{line_arr[i]}). Hint: sort the rows by hit."
            )
        bounds = np.r_[starts, labels.size]
        sizes = np.diff(bounds)
        if np.any(sizes != sizes[0]):
            k = int(np.argmax(sizes != sizes[0]))
            raise RecordError(
                f"{src}: hit {order[k]} has {sizes[k]} rows but hit {order[0]} has {sizes[0]}; "
                "every hit needs the same number of samples. Hint: trim the records to one length."
            )
        t_all = data["time"].reshape(order.size, sizes[0])
        time = t_all[0]
        step = float(np.median(np.abs(np.diff(time)))) if time.size > 1 else 0.0
        for k in range(1, order.size):
            if not np.allclose(t_all[k], time, rtol=0.0, atol=1e-3 * step):
                j = int(np.argmax(~np.isclose(t_all[k], time, rtol=0.0, atol=1e-3 * step)))
                raise RecordError(
                    f"{src}: hit {order[k]} has other times than hit {order[0]} (line "
                    f"{line_arr[bounds[k] + j]}: {t_all[k][j]:g} s, expected {time[j]:g} s). "
                    "Hint: every hit must share the same time axis."
                )
        resp = np.stack([data[c].reshape(order.size, sizes[0]) for c in channels], axis=1)
        force = data["force"].reshape(order.size, sizes[0]) if "force" in data else None
        hits: np.ndarray | None = order
    else:
        time = data["time"]
        resp = np.stack([data[c] for c in channels], axis=0)[None, :, :]
        force = data["force"][None, :] if "force" in data else None
        hits = None
    return _assemble(
        src,
        resp,
        time,
        channels=channels,
        force=force,
        hits=hits,
        units=units,
        force_units=force_units,
    )


# --------------------------------------------------------------------------- WAV


def _per_channel(src: str, name: str, value: Any, n: int) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise RecordError(
            f"{src}: option {name} must be a number or one number per channel."
        ) from None
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    if arr.shape != (n,):
        raise RecordError(
            f"{src}: option {name} has {arr.size} values for {n} response channels. Hint: give "
            "one value, or one per response channel."
        )
    if not np.all(np.isfinite(arr) & (arr > 0)):
        raise RecordError(
            f"{src}: option {name} must be positive finite numbers (physical units at digital "
            f"full scale), was {value!r}."
        )
    return arr


def _read_wav(
    path: Path,
    src: str,
    *,
    calibration: Any = None,
    force_channel: int | None = None,
    force_calibration: float | None = None,
    channels: Sequence[str] | None = None,
    units: str = "m/s^2",
    force_units: str = "N",
) -> xr.Dataset:
    from scipy.io import wavfile

    if calibration is None:
        raise RecordError(
            f"{src}: WAV samples are digital counts with no physical units; pass calibration= "
            "(response units at digital full scale: one number, or one per response channel). "
            "Hint: full-scale volts / sensor sensitivity in volts per unit."
        )
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            rate, data = wavfile.read(path)
        except (ValueError, EOFError, OSError, struct.error) as exc:
            raise RecordError(f"{src}: not a readable WAV file ({exc}).") from None
    for item in caught:
        if "EOF" in str(item.message):
            raise RecordError(
                f"{src}: the WAV file is truncated ({item.message}). Hint: copy or export it again."
            )
        warnings.warn_explicit(item.message, item.category, item.filename, item.lineno)
    data = np.asarray(data)
    if data.ndim == 1:
        data = data[:, None]
    if data.dtype == np.uint8:
        counts = (data.astype(np.float64) - 128.0) / 128.0
    elif data.dtype.kind == "i":
        counts = data.astype(np.float64) / float(2 ** (8 * data.dtype.itemsize - 1))
    elif data.dtype.kind == "f":
        counts = data.astype(np.float64)
    else:  # pragma: no cover - scipy returns only the types above
        raise RecordError(f"{src}: unsupported WAV sample type {data.dtype}.")
    n_t, n_wav = counts.shape
    idx = list(range(n_wav))
    force = None
    force_fs = None
    if force_channel is not None:
        if isinstance(force_channel, bool) or not isinstance(force_channel, int | np.integer):
            raise RecordError(
                f"{src}: option force_channel must be a channel index, was {force_channel!r}."
            )
        if not 0 <= int(force_channel) < n_wav:
            raise RecordError(
                f"{src}: force_channel={force_channel} but the file has {n_wav} channel(s) "
                f"(indices 0..{n_wav - 1})."
            )
        if force_calibration is None:
            raise RecordError(
                f"{src}: force_channel is given but force_calibration is not; pass "
                "force_calibration= (force units at digital full scale)."
            )
        force_fs = float(_per_channel(src, "force_calibration", force_calibration, 1)[0])
        idx.remove(int(force_channel))
        force = counts[:, int(force_channel)][None, :] * force_fs
    elif force_calibration is not None:
        raise RecordError(f"{src}: force_calibration is given but force_channel is not.")
    if not idx:
        raise RecordError(f"{src}: the WAV file has no channel left for the response.")
    cal = _per_channel(src, "calibration", calibration, len(idx))
    names = [f"ch{k + 1}" for k in idx] if channels is None else [str(c) for c in channels]
    if len(names) != len(idx):
        raise RecordError(f"{src}: {len(names)} channel names for {len(idx)} response channels.")
    resp = (counts[:, idx] * cal).T[None, :, :]
    attrs: dict[str, Any] = {"sample_rate": float(rate)}
    if force_fs is not None:
        attrs["force_full_scale"] = force_fs
    return _assemble(
        src,
        resp,
        np.arange(n_t) / float(rate),
        channels=names,
        force=force,
        units=units,
        force_units=force_units,
        channel_coords={"full_scale": cal},
        attrs=attrs,
    )


# --------------------------------------------------------------------------- npz


def _read_npz(
    path: Path, src: str, head: bytes, *, units: str = "m/s^2", force_units: str = "N"
) -> xr.Dataset:
    if not head.startswith(_ZIP_MAGICS):
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
    w = f"{src}: "
    for key in arrays:
        if key not in _NPZ_NAMES:
            raise RecordError(
                f"{w}unknown array {key!r}; npz record files may hold {list(_NPZ_NAMES)}."
                f"{did_you_mean(key, _NPZ_NAMES)}"
            )
    if "response" not in arrays:
        raise RecordError(
            f"{w}no array named 'response'. Arrays present: {sorted(arrays)}."
            f"{did_you_mean('response', arrays)} Hint: save the samples as response=..."
        )
    resp = arrays["response"]
    if resp.ndim == 2:
        resp = resp[None, :, :]
    elif resp.ndim != 3:
        raise RecordError(
            f"{w}array 'response' has shape {resp.shape}; expected (hit, channel, time) or "
            "(channel, time)."
        )
    if not _is_real_numeric(resp):
        raise RecordError(
            f"{w}variable 'response' must hold real numbers, its type is {resp.dtype}. "
            "Hint: store the samples as float64."
        )
    n_t = resp.shape[2]
    attrs: dict[str, Any] = {}
    if "sample_rate" in arrays:
        fs_arr = arrays["sample_rate"]
        ok = fs_arr.size == 1 and _is_real_numeric(fs_arr)
        fs = float(fs_arr.reshape(-1)[0]) if ok else float("nan")
        if not (np.isfinite(fs) and fs > 0):
            raise RecordError(f"{w}'sample_rate' must be one positive number (Hz), is {fs_arr!r}.")
        attrs["sample_rate"] = fs
    if "time" in arrays:
        time = arrays["time"]
    elif "sample_rate" in arrays:
        time = np.arange(n_t) / attrs["sample_rate"]
    else:
        raise RecordError(f"{w}neither 'time' nor 'sample_rate' is given. Hint: save one of them.")
    force = arrays.get("force")
    if force is not None and force.ndim == 1 and resp.shape[0] == 1:
        force = force[None, :]
    if "channel" in arrays:
        ch = arrays["channel"]
        if ch.dtype.kind not in "SU" or ch.ndim != 1:
            raise RecordError(
                f"{w}'channel' must be a 1-D array of names (strings), is {ch.dtype} {ch.shape}."
            )
        channels = _to_str_array(ch).tolist()
    else:
        channels = [f"ch{i + 1}" for i in range(resp.shape[1])]
    ch_coords: dict[str, np.ndarray] = {}
    hit_coords: dict[str, np.ndarray] = {}
    for name in _STR_CHANNEL_COORDS + _STR_HIT_COORDS:
        if name in arrays:
            a = arrays[name]
            if a.dtype.kind not in "SU":
                raise RecordError(f"{w}{name!r} must hold strings, has type {a.dtype}.")
            (ch_coords if name in _STR_CHANNEL_COORDS else hit_coords)[name] = _to_str_array(a)
    for name in _NUM_CHANNEL_COORDS:
        if name in arrays:
            a = arrays[name]
            if not _is_real_numeric(a):
                raise RecordError(f"{w}{name!r} must hold numbers, has type {a.dtype}.")
            ch_coords[name] = a.astype(np.float64)
    return _assemble(
        src,
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
    )


# --------------------------------------------------------------------------- dispatch


def _open_one(path: Any, options: Mapping[str, Any]) -> xr.Dataset:
    try:
        p = Path(path)
    except TypeError:
        raise RecordError(
            f"expected a file path or a list of them, got {type(path).__name__}."
        ) from None
    src = os.fspath(path)
    kind = SUFFIXES.get(p.suffix.lower())
    if kind is None:
        raise RecordError(
            f"{src}: unknown file type {p.suffix or '(no suffix)'!r}; modalnb reads "
            f"{', '.join(SUFFIXES)}.{did_you_mean(p.suffix.lower(), SUFFIXES)}"
        )
    _check_options(src, kind, options)
    head = _check_file(p, src)
    try:
        if kind == "netcdf":
            return _read_netcdf(p, src, head)
        if kind == "csv":
            return _read_csv(p, src, **options)
        if kind == "wav":
            return _read_wav(p, src, **options)
        return _read_npz(p, src, head, **options)
    except RecordError:
        raise
    except ModalnbError as exc:  # e.g. a bad option value checked by a shared helper
        raise RecordError(f"{src}: {exc}") from None


def _open_many(paths: Sequence[Any], options: Mapping[str, Any]) -> xr.Dataset:
    if not paths:
        raise RecordError("open_records got an empty list of files.")
    dsets = [_open_one(p, options) for p in paths]
    first, src0 = dsets[0], os.fspath(paths[0])
    for p, ds in zip(paths, dsets, strict=True):
        if ds.sizes["hit"] != 1:
            raise RecordError(
                f"{os.fspath(p)}: holds {ds.sizes['hit']} hits; in a list of files each file must "
                "hold one hit. Hint: open it on its own."
            )
    step = float(np.median(np.diff(first["time"].values)))
    for p, ds in zip(paths[1:], dsets[1:], strict=True):
        src = os.fspath(p)
        if ds["channel"].values.tolist() != first["channel"].values.tolist():
            raise RecordError(
                f"{src}: channels {ds['channel'].values.tolist()} differ from "
                f"{first['channel'].values.tolist()} in {src0}."
            )
        t, t0 = ds["time"].values, first["time"].values
        if t.size != t0.size or not np.allclose(t, t0, rtol=0.0, atol=1e-3 * step):
            raise RecordError(
                f"{src}: times ({t.size} samples from {t[0]:g} s, step "
                f"{float(np.median(np.diff(t))):.6g} s) differ from {src0} ({t0.size} samples from "
                f"{t0[0]:g} s, step {step:.6g} s). Hint: every hit must share one time axis."
            )
        if ("force" in ds) != ("force" in first):
            raise RecordError(
                f"{src}: has{'' if 'force' in ds else ' no'} force but {src0} "
                f"has{'' if 'force' in first else ' no'} force."
            )
        for var in ("response", "force"):
            if var in ds and ds[var].attrs.get("units") != first[var].attrs.get("units"):
                raise RecordError(
                    f"{src}: {var} units {ds[var].attrs.get('units')!r} differ from "
                    f"{first[var].attrs.get('units')!r} in {src0}."
                )
        for name in _STR_CHANNEL_COORDS + _NUM_CHANNEL_COORDS:
            if (name in ds.coords) != (name in first.coords) or (
                name in ds.coords and not ds[name].equals(first[name])
            ):
                raise RecordError(f"{src}: coordinate {name!r} differs from {src0}.")
        if not _attrs_equal(ds.attrs, first.attrs):
            raise RecordError(f"{src}: attributes {ds.attrs} differ from {src0} ({first.attrs}).")
    dsets = [ds.assign_coords(time=first["time"]) for ds in dsets]
    out = xr.concat(
        dsets,
        dim="hit",
        data_vars="minimal",
        coords="minimal",
        compat="override",
        join="exact",
        combine_attrs="override",
    )
    out = out.assign_coords(hit=np.arange(1, len(dsets) + 1, dtype=np.int64))
    return validate_records(out, source=src0)


def open_records(
    path: str | os.PathLike[str] | Sequence[str | os.PathLike[str]], **options: Any
) -> xr.Dataset:
    """Read a record set from a file, or from a list of files holding one hit each.

    The file type follows the suffix:

    ``.nc``
        netCDF4/HDF5 (read with engine ``"h5netcdf"``) or classic netCDF3 (engine
        ``"scipy"``), told apart by the first bytes; the file must already hold the
        record-set layout. Loaded fully into memory and closed. String coordinates come
        back as object arrays of ``str``, ``hit`` as int64.
    ``.csv``, ``.txt``
        A header row, then one row per sample. Column ``time`` (s) is required; ``force``
        and ``hit`` are optional; every other column is a response channel named by its
        header. With a ``hit`` column the rows of each hit must be together, and every hit
        must have the same number of samples and the same times. Options ``units``,
        ``force_units``, ``delimiter`` (default: the most frequent of ``,`` ``;`` tab in
        the header) and ``decimal`` (``"."`` or ``","``).
    ``.wav``
        Multichannel PCM or float WAV. ``calibration`` is required: the response in
        physical units at digital full scale (one number, or one per response channel);
        integer PCM full scale is ``2**(bits-1)`` counts, float WAV full scale is 1.0.
        ``force_channel`` (index) with ``force_calibration`` marks the force channel;
        ``channels`` names the response channels (default ``"ch<k>"``, k the 1-based WAV
        channel number); ``units``, ``force_units``. The full scales are kept in the
        per-channel coord ``full_scale`` and the attr ``force_full_scale``.
    ``.npz``
        Read with ``allow_pickle=False``. Arrays ``response`` (hit, channel, time) or
        (channel, time); ``time`` or scalar ``sample_rate``; optional ``force``,
        ``channel``, ``hit``, ``node``, ``direction``, ``x``, ``y``, ``z``, ``full_scale``,
        ``excitation_node``, ``excitation_direction``. Options ``units``, ``force_units``.

    A list or tuple of paths gives one hit per file, labelled 1..N in the order given;
    the files must share channels, times (to within 0.1 % of a step; the first file's
    time axis is kept), units, per-channel coords and attributes.

    Parameters
    ----------
    path : path-like or sequence of path-like
        The file, or files.
    **options
        Format options listed above; an option that does not apply is an error.

    Returns
    -------
    xarray.Dataset
        A record set that passes :func:`modalnb.records.validate_records`.

    Raises
    ------
    RecordFileNotFoundError
        The file does not exist.
    RecordError
        The file is empty, damaged, of unknown type, or does not hold valid records; the
        one-line message starts with the file name.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> np.savez(folder / "tap.npz", response=np.zeros((2, 64)), sample_rate=1024.0)
    >>> ds = open_records(folder / "tap.npz")
    >>> dict(ds["response"].sizes)
    {'hit': 1, 'channel': 2, 'time': 64}
    """
    if isinstance(path, list | tuple):
        return _open_many(path, options)
    return _open_one(path, options)


# --------------------------------------------------------------------------- writing


def _check_attr(src: str, where: str, key: Any, value: Any) -> None:
    if isinstance(value, bool | np.bool_):
        raise RecordError(
            f"{src}: {where} attribute {key!r} is a boolean, which netCDF cannot store. Hint: "
            "store 0 or 1."
        )
    if isinstance(value, str | int | float | np.number):
        return
    if isinstance(value, list | tuple | np.ndarray):
        arr = np.asarray(value)
        if arr.ndim <= 1 and arr.dtype.kind in "iufU":
            return
    raise RecordError(
        f"{src}: {where} attribute {key!r} = {value!r} cannot be stored in netCDF. Hint: use a "
        "string, a number or a 1-D list of numbers."
    )


def save_records(ds: xr.Dataset, path: str | os.PathLike[str]) -> Path:
    """Write a record set to a netCDF4 file (engine ``"h5netcdf"``), atomically.

    The dataset is validated first. It is written to a temporary file in the target folder,
    which then replaces `path` in one step (:func:`os.replace`), so a reader never sees a
    half-written file. Data variables are zlib-compressed; encodings left over from an
    earlier read are dropped. ``open_records(save_records(ds, path))`` is identical to `ds`
    when its string coordinates are object arrays of ``str`` and ``hit`` is int64 (as
    :func:`~modalnb.records.records_from_arrays` and :func:`open_records` make them).

    Parameters
    ----------
    ds : xarray.Dataset
        A record set.
    path : path-like
        Target file; must end in ``.nc``. An existing file is replaced.

    Returns
    -------
    pathlib.Path
        `path`.

    Raises
    ------
    RecordError
        `ds` is not a valid record set, an attribute cannot be stored in netCDF, or the
        folder does not exist or cannot be written.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from modalnb.records import records_from_arrays
    >>> ds = records_from_arrays(np.zeros((1, 2, 64)), 1024.0, channels=["tip", "root"])
    >>> out = save_records(ds, pathlib.Path(tempfile.mkdtemp()) / "taps.nc")
    >>> open_records(out).identical(ds)
    True
    """
    target = Path(path)
    src = os.fspath(path)
    validate_records(ds, source=src)
    if target.suffix.lower() != ".nc":
        raise RecordError(f"{src}: save_records writes netCDF; the file name must end in '.nc'.")
    folder = target.parent
    if not folder.is_dir():
        raise RecordError(f"{src}: the folder {os.fspath(folder)!r} does not exist.")
    for key, value in ds.attrs.items():
        _check_attr(src, "dataset", key, value)
    for name, var in ds.variables.items():
        for key, value in var.attrs.items():
            _check_attr(src, f"variable {str(name)!r}", key, value)
    out = ds.drop_encoding()
    encoding = {
        str(name): {"zlib": True, "complevel": 4}
        for name, var in out.data_vars.items()
        if var.dtype.kind in "iuf"
    }
    try:
        atomic_write_with(target, lambda tmp: out.to_netcdf(tmp, engine="h5netcdf", encoding=encoding))
    except (OSError, TypeError, ValueError) as exc:
        raise RecordError(
            f"{src}: could not write the file ({type(exc).__name__}: {exc})."
        ) from None
    return target


# --------------------------------------------------------------------------- segmentation


def segment_recording(
    response: Any,
    sample_rate: float,
    *,
    record_s: float,
    force: Any = None,
    channels: Sequence[str] | None = None,
    trigger: float = 0.1,
    pretrigger_s: float | None = None,
    units: str = "m/s^2",
    force_units: str = "N",
    holdoff_s: float | None = None,
) -> xr.Dataset:
    """Cut one continuous recording holding several hits into a record set.

    The trigger signal is ``|force|`` when `force` is given, else the largest ``|response|``
    across channels at each sample. A hit starts at a rising crossing of ``trigger`` times
    the trigger signal's overall peak (the usual level trigger of a data-acquisition
    front end; common practice). After an accepted trigger, crossings are ignored for
    `holdoff_s` (default: until the record has ended), so one hit gives one record and a
    second tap inside a record stays in it for the hit checks to judge. Each record spans
    `pretrigger_s` before the trigger sample and ``record_s - pretrigger_s`` from it;
    ``time`` is 0 at the trigger sample and negative in the pre-trigger. Records cut off
    by the start or end of the recording are dropped with a warning.

    Parameters
    ----------
    response : array_like
        Shape (channel, time), or (time,) for one channel.
    sample_rate : float
        Samples per second (Hz).
    record_s : float
        Length of each record in seconds, pre-trigger included.
    force : array_like, optional
        Force, shape (time,).
    channels : sequence of str, optional
        Channel names; default ``"ch1"``, ``"ch2"``, ...
    trigger : float
        Trigger level as a fraction of the peak, in (0, 1].
    pretrigger_s : float, optional
        Pre-trigger length in seconds; default a tenth of `record_s` (common practice).
    units, force_units : str
        Units of response and force.
    holdoff_s : float, optional
        Time after an accepted trigger during which no new hit starts; default
        ``record_s - pretrigger_s``.

    Returns
    -------
    xarray.Dataset
        A record set with hits 1..N. Attributes ``segment_trigger_samples`` (index of each
        hit's trigger sample in the recording), ``segment_trigger_level`` (in the trigger
        signal's units) and ``segment_dropped`` (number of incomplete records dropped).

    Raises
    ------
    RecordError
        Bad shapes or values, no trigger crossing, or no complete record.

    Examples
    --------
    >>> import numpy as np
    >>> fs = 1000.0
    >>> force = np.zeros(3000)
    >>> force[[500, 1700]] = 1.0
    >>> response = np.zeros((1, 3000))
    >>> ds = segment_recording(response, fs, force=force, record_s=0.5, pretrigger_s=0.05)
    >>> ds.attrs["segment_trigger_samples"].tolist()
    [500, 1700]
    """
    from ._utils import check_fraction, check_positive

    try:
        fs = check_positive("sample_rate", sample_rate)
        rec = check_positive("record_s", record_s)
        level_frac = check_fraction("trigger", trigger)
        pre = rec / 10.0 if pretrigger_s is None else float(pretrigger_s)
        hold = None if holdoff_s is None else check_positive("holdoff_s", holdoff_s)
    except ModalnbError as exc:
        raise RecordError(str(exc)) from None
    except (TypeError, ValueError):
        raise RecordError(f"`pretrigger_s` must be a number, was {pretrigger_s!r}.") from None
    try:
        r = np.asarray(response, dtype=np.float64)
        f = None if force is None else np.asarray(force, dtype=np.float64)
    except (TypeError, ValueError):
        raise RecordError("`response` and `force` must be arrays of real numbers.") from None
    if r.ndim == 1:
        r = r[None, :]
    if r.ndim != 2 or r.shape[0] < 1:
        raise RecordError(f"`response` must have shape (channel, time), has {r.shape}.")
    n = r.shape[1]
    if f is not None and f.shape != (n,):
        raise RecordError(f"`force` must have shape (time,) = ({n},), has {f.shape}.")
    names = (
        [f"ch{i + 1}" for i in range(r.shape[0])]
        if channels is None
        else [str(c) for c in channels]
    )
    if len(names) != r.shape[0]:
        raise RecordError(f"{len(names)} channel names given for {r.shape[0]} response channels.")
    for i in range(r.shape[0]):
        if not np.all(np.isfinite(r[i])):
            j = int(np.argmax(~np.isfinite(r[i])))
            raise RecordError(f"`response` channel {names[i]!r} has a NaN or Inf at sample {j}.")
    if f is not None and not np.all(np.isfinite(f)):
        raise RecordError(f"`force` has a NaN or Inf at sample {int(np.argmax(~np.isfinite(f)))}.")
    n_rec = int(round(rec * fs))
    n_pre = int(round(pre * fs))
    if not 0 <= n_pre < n_rec:
        raise RecordError(
            f"`pretrigger_s`={pre:g} s must be >= 0 and shorter than `record_s`={rec:g} s."
        )
    n_hold = n_rec - n_pre if hold is None else max(1, int(round(hold * fs)))
    signal = np.abs(f) if f is not None else np.max(np.abs(r), axis=0)
    peak = float(signal.max()) if n else 0.0
    what = "force" if f is not None else "response"
    if not peak > 0:
        raise RecordError(f"the {what} is zero throughout: no hit to trigger on.")
    level = level_frac * peak
    above = signal >= level
    crossings = np.flatnonzero(above & np.r_[True, ~above[:-1]])
    triggers: list[int] = []
    dropped: list[int] = []
    next_ok = -1
    for c in crossings.tolist():
        if c < next_ok:
            continue
        next_ok = c + n_hold
        if c - n_pre < 0 or c - n_pre + n_rec > n:
            dropped.append(c)
        else:
            triggers.append(c)
    if dropped:
        warnings.warn(
            f"segment_recording: dropped {len(dropped)} incomplete record(s) cut off by the start "
            f"or end of the recording (trigger samples {dropped}).",
            UserWarning,
            stacklevel=2,
        )
    if not triggers:
        raise RecordError(
            f"no complete record: {len(dropped)} trigger(s) on the {what}, each too close to the "
            "start or end of the recording. Hint: shorten record_s or pretrigger_s."
        )
    starts = np.asarray(triggers) - n_pre
    cut = starts[:, None] + np.arange(n_rec)[None, :]
    resp = np.transpose(r[:, cut], (1, 0, 2))
    time = (np.arange(n_rec) - n_pre) / fs
    attrs = {
        "sample_rate": fs,
        "segment_trigger_samples": np.asarray(triggers, dtype=np.int64),
        "segment_trigger_level": level,
        "segment_dropped": len(dropped),
    }
    return _assemble(
        "segment_recording",
        resp,
        time,
        channels=names,
        force=None if f is None else f[cut],
        units=units,
        force_units=force_units,
        attrs=attrs,
    )
