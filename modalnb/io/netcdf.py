"""netCDF record files: reading (netCDF4/HDF5 and classic netCDF3) and writing (netCDF4).

netCDF4 files are read with :func:`modalnb._netcdf.netcdf4_engine` (netCDF-C when the
netCDF4 package is installed, several times faster on small files; h5netcdf otherwise,
and for a file netCDF-C refuses).

The file must already hold the record-set layout (:mod:`modalnb.records`); the reader
only decodes it (strings, integer widths) and rebuilds it through
:func:`modalnb.records.build_records`. :func:`save_records` writes netCDF4 atomically.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._errors import RecordError
from .._files import atomic_write_with
from .._netcdf import load_netcdf4, netcdf4_engine
from ..records import _str_array, build_records, record_parts, validate_records
from ._common import plain_attrs

__all__ = ["read_netcdf", "save_records", "NETCDF3_MAGIC", "HDF5_MAGIC"]

#: First bytes of a classic netCDF3 file (NetCDF Users Guide, "The NetCDF Classic Format").
NETCDF3_MAGIC = b"CDF"
#: HDF5 signature, the first bytes of a netCDF4 file (HDF5 File Format Specification, 2.2).
HDF5_MAGIC = b"\x89HDF\r\n\x1a\n"

_LOAD_ERRORS = (OSError, ValueError, TypeError, KeyError, IndexError, EOFError)


def _engine(src: str, head: bytes) -> str:
    if head.startswith(NETCDF3_MAGIC):
        return "scipy"
    if head.startswith(HDF5_MAGIC):
        return netcdf4_engine()
    raise RecordError(
        f"{src}: not a netCDF file (first bytes {head[:4]!r}; netCDF3 starts with b'CDF', "
        "netCDF4 with b'\\x89HDF'). Hint: check that the file was written as netCDF."
    )


def _load(path: Path, src: str, engine: str) -> xr.Dataset:
    try:
        if engine == "scipy":
            ds = xr.load_dataset(path, engine=engine, decode_times=False, decode_timedelta=False,
                                 mmap=False)
        else:  # netCDF-C, and h5netcdf's reading (and its error) for a file it refuses
            ds = load_netcdf4(path, decode_times=False, decode_timedelta=False)
    except _LOAD_ERRORS as exc:
        kind = "netCDF3" if engine == "scipy" else "netCDF4/HDF5"
        raise RecordError(
            f"{src}: cannot read this {kind} file, it looks damaged or incomplete "
            f"({type(exc).__name__}: {exc}). Hint: copy or export it again."
        ) from None
    return ds.drop_encoding()


def _decoded(ds: xr.Dataset) -> xr.Dataset:
    """Strings as object arrays of ``str``, attrs as Python scalars, ``hit`` as int64."""
    for name in list(ds.variables):
        var = ds.variables[name]
        if var.dtype.kind in "SUO":
            ds[name] = var.copy(data=_str_array(np.asarray(var.values)))
    if "hit" in ds.coords and ds["hit"].dtype.kind in "iu" and ds["hit"].dtype != np.int64:
        ds = ds.assign_coords(hit=ds["hit"].astype(np.int64))
    ds.attrs = plain_attrs(ds.attrs)
    for name in ds.variables:
        ds[name].attrs = plain_attrs(ds[name].attrs)
    return ds


def read_netcdf(path: Path, src: str, head: bytes) -> xr.Dataset:
    """Read a netCDF record file; netCDF3 and netCDF4 are told apart by `head`.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from modalnb.records import records_from_arrays
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.nc"
    >>> records_from_arrays(np.ones((1, 32)), 64.0).to_netcdf(p, engine="scipy")
    >>> read_netcdf(p, "r.nc", p.read_bytes()[:8])["response"].dtype
    dtype('float64')
    """
    ds = _decoded(_load(path, src, _engine(src, head)))
    validate_records(ds, source=src)
    return build_records(**record_parts(ds), source=src)


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
    :func:`~modalnb.records.records_from_arrays` and :func:`~modalnb.io.open_records` make
    them).

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
    >>> from modalnb.io import open_records
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
        atomic_write_with(
            target, lambda tmp: out.to_netcdf(tmp, engine="h5netcdf", encoding=encoding)
        )
    except (OSError, TypeError, ValueError) as exc:
        raise RecordError(
            f"{src}: could not write the file ({type(exc).__name__}: {exc})."
        ) from None
    return target
