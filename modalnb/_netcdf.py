"""Which xarray engine writes and reads netCDF4 (HDF5) files: the one place that chooses.

``"netcdf4"`` (Unidata's netCDF-C library through the netCDF4 package) when it is
installed, else ``"h5netcdf"`` (h5py). Both write the same netCDF4 format, which either
reads; a file netCDF-C refuses (an HDF5 file that is not quite netCDF4) is read
again with h5netcdf (:func:`load_netcdf4`). netCDF-C is the faster of the two on modalnb's small, many-variable files (a modal
table of about 40 variables: written in about a fifth of the time, read in about a
quarter, measured with ``modalnb bench --campaign``'s per-set profile), which is what a
campaign of thousands of sets pays for each set.
"""

from __future__ import annotations

import os
from typing import Any

__all__ = ["netcdf4_engine", "load_netcdf4", "FALLBACK_ENGINE"]

#: The engine used when the netCDF4 package is not installed (h5netcdf is a dependency).
FALLBACK_ENGINE = "h5netcdf"


def netcdf4_engine() -> str:
    """The xarray engine for netCDF4 files: ``"netcdf4"`` when installed, else ``"h5netcdf"``.

    Examples
    --------
    >>> netcdf4_engine() in ("netcdf4", "h5netcdf")
    True
    """
    try:
        import netCDF4  # noqa: F401
    except ImportError:
        return FALLBACK_ENGINE
    return "netcdf4"


def load_netcdf4(path: str | os.PathLike[str], **kwargs: Any) -> Any:
    """``xarray.load_dataset`` of a netCDF4 (HDF5) file with :func:`netcdf4_engine`;
    when netCDF-C cannot read it, read again with h5netcdf (whose error is the one raised).

    Examples
    --------
    >>> import tempfile, pathlib, xarray as xr
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.nc"
    >>> xr.Dataset({"x": ("i", [1.0, 2.0])}).to_netcdf(p, engine="h5netcdf")
    >>> load_netcdf4(p)["x"].values.tolist()
    [1.0, 2.0]
    """
    import xarray as xr

    engine = netcdf4_engine()
    if engine == FALLBACK_ENGINE:
        return xr.load_dataset(path, engine=engine, **kwargs)
    try:
        return xr.load_dataset(path, engine=engine, **kwargs)
    except (OSError, ValueError, TypeError, KeyError, IndexError, EOFError, RuntimeError):
        return xr.load_dataset(path, engine=FALLBACK_ENGINE, **kwargs)
