"""``frf.nc``: a measured or synthesised FRF (:func:`modalnb.frf`, :func:`modalnb.synthesise_frf`)
as netCDF4 that any netCDF reader opens.

netCDF has no complex type, so the complex ``frf(excitation, channel, frequency)`` is
written as two float64 variables, ``frf_real`` and ``frf_imag`` (same dims and units), and
so is every other complex variable (``model_frf`` -> ``model_frf_real``,
``model_frf_imag``); every other variable (``coherence``, ``force_level_db``, ``n_hits``)
as it is.

:func:`write_table_frf` writes the ``frf.nc`` of an output folder (beside the modal
table): the measured H1 and coherence over the table's accepted hits and the table's
model FRF (:func:`modalnb.frf_compare.compare_frf`). String
coordinates (``excitation``, ``channel``, ``node``, ``direction``) are variable-length
strings; list attributes are numbers; the file is written atomically
(:func:`modalnb._files.atomic_write_with`).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import xarray as xr

from .._errors import ModalnbError
from .._files import atomic_write_with

__all__ = ["write_frf", "write_table_frf", "FRF_DIMS"]

#: Dims of the ``frf`` variable, in order.
FRF_DIMS = ("excitation", "channel", "frequency")


def _attr(value: object) -> object:
    if isinstance(value, (str, int, float, np.integer, np.floating)) and not isinstance(value, bool):
        return value
    if isinstance(value, (list, tuple)) and value and all(
            isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
            for v in value):
        return np.asarray(value)
    return json.dumps(value, default=str)


def _netcdf_ready(ds: xr.Dataset) -> xr.Dataset:
    complex_vars = [str(n) for n, v in ds.data_vars.items() if v.dtype.kind == "c"]
    out = ds.drop_vars(complex_vars).drop_encoding()
    for name in complex_vars:
        h = ds[name]
        out[f"{name}_real"] = (h.dims, np.real(h.values), {**h.attrs, "part": f"real part of {name}"})
        out[f"{name}_imag"] = (h.dims, np.imag(h.values),
                               {**h.attrs, "part": f"imaginary part of {name}"})
    for name in list(out.variables):
        if out[name].dtype.kind == "O":
            out[name] = out[name].astype(str)
        out[name].attrs = {k: _attr(v) for k, v in out[name].attrs.items()}
    out.attrs = {k: _attr(v) for k, v in ds.attrs.items()}
    out.attrs["frf_parts"] = "; ".join(f"{n} = {n}_real + 1j * {n}_imag" for n in complex_vars)
    return out


def write_frf(ds: xr.Dataset, path: str | os.PathLike[str]) -> Path:
    """Write an FRF Dataset to netCDF4 (``frf.nc``), real and imaginary parts apart.

    Parameters
    ----------
    ds : xarray.Dataset
        A :func:`modalnb.frf` or :func:`modalnb.synthesise_frf` result.
    path : path-like
        Target file, ending in ``.nc`` (by convention ``frf.nc``); replaced atomically.

    Returns
    -------
    pathlib.Path
        `path`.

    Raises
    ------
    ModalnbError
        `ds` holds no complex ``frf(excitation, channel, frequency)``, the name does not
        end in ``.nc``, or the folder does not exist or cannot be written.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib, xarray as xr
    >>> ds = xr.Dataset({"frf": (FRF_DIMS, np.ones((1, 1, 3)) * (1 + 2j))},
    ...                 coords={"excitation": ["hammer"], "channel": ["tip"],
    ...                         "frequency": [0.0, 1.0, 2.0]})
    >>> p = write_frf(ds, pathlib.Path(tempfile.mkdtemp()) / "frf.nc")
    >>> back = xr.open_dataset(p, engine="h5netcdf")
    >>> float(back["frf_real"][0, 0, 1]), float(back["frf_imag"][0, 0, 1])
    (1.0, 2.0)
    >>> back.close()
    """
    target = Path(path)
    src = os.fspath(path)
    if not isinstance(ds, xr.Dataset) or "frf" not in ds.data_vars:
        raise ModalnbError(f"{src}: write_frf needs a Dataset with a variable 'frf' "
                           "(from modalnb.frf or modalnb.synthesise_frf).")
    if tuple(ds["frf"].dims) != FRF_DIMS:
        raise ModalnbError(f"{src}: variable 'frf' has dims {tuple(map(str, ds['frf'].dims))}, "
                           f"expected {FRF_DIMS}.")
    if target.suffix.lower() != ".nc":
        raise ModalnbError(f"{src}: write_frf writes netCDF; the file name must end in '.nc'.")
    if not target.parent.is_dir():
        raise ModalnbError(f"{src}: the folder {os.fspath(target.parent)!r} does not exist.")
    out = _netcdf_ready(ds)
    encoding = {str(n): {"zlib": True, "complevel": 4}
                for n, v in out.data_vars.items() if v.dtype.kind in "iuf"}
    try:
        atomic_write_with(target, lambda tmp: out.to_netcdf(tmp, engine="h5netcdf",
                                                            encoding=encoding))
    except (OSError, TypeError, ValueError) as exc:
        raise ModalnbError(f"{src}: could not write the file ({type(exc).__name__}: {exc}).") from None
    return target


def write_table_frf(records: xr.Dataset, result: xr.Dataset, path: str | os.PathLike[str]) -> Path:
    """Write the ``frf.nc`` of an output folder: measured FRF, coherence and model FRF.

    :func:`modalnb.frf_compare.compare_frf` of the records and their table (H1 over the
    table's accepted hits; the table's model FRF on the same frequencies), written by
    :func:`write_frf`: ``frf_real``, ``frf_imag``, ``model_frf_real``, ``model_frf_imag``,
    ``coherence``, ``force_level_db``, ``n_hits``.

    Parameters
    ----------
    records : xarray.Dataset
        The record set, with ``force``.
    result : xarray.Dataset
        Its :func:`modalnb.fit_modes` table.
    path : path-like
        Target ``.nc`` file.

    Returns
    -------
    pathlib.Path
        `path`.

    Examples
    --------
    >>> from modalnb.demo import load_demo                            # doctest: +SKIP
    >>> import modalnb                                                # doctest: +SKIP
    >>> ds = load_demo()                                              # doctest: +SKIP
    >>> write_table_frf(ds, modalnb.fit_modes(ds), "frf.nc").name     # doctest: +SKIP
    'frf.nc'
    """
    from ..frf_compare import compare_frf

    return write_frf(compare_frf(records, result), path)
