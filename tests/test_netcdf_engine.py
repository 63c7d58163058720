"""The netCDF4 engine choice (modalnb._netcdf): netCDF-C (the netCDF4 package) when it is
installed, h5netcdf otherwise; files written either way are read by the other library.

Independent readers: the netCDF4 package's own ``netCDF4.Dataset`` (Unidata's netCDF-C)
and h5netcdf (h5py), not the engine that wrote the file.
"""

from __future__ import annotations

import sys

import netCDF4
import numpy as np
import xarray as xr

from modalnb import fit_modes
from modalnb._netcdf import netcdf4_engine
from modalnb.demo import load_demo
from modalnb.export import write_modal_table
from modalnb.io import open_records, save_records


def _written_by(path) -> str:
    """Which library wrote a netCDF4 file: its ``_NCProperties`` attribute (netCDF4 format
    convention) names it (``netcdf=4.x`` for netCDF-C, ``h5netcdf=1.x`` for h5netcdf)."""
    import h5py

    with h5py.File(path, "r") as f:
        v = f.attrs["_NCProperties"]
    return v.decode() if isinstance(v, bytes) else str(v)


def test_netcdf4_installed_is_used_and_read_back_by_h5netcdf(tmp_path):
    assert netcdf4_engine() == "netcdf4"
    rec = load_demo().isel(hit=[0, 1, 2])
    result = fit_modes(rec, n_modes=2)
    write_modal_table(result, tmp_path / "t")
    assert "netcdf=" in _written_by(tmp_path / "t" / "modes.nc")  # written by netCDF-C
    with xr.open_dataset(tmp_path / "t" / "modes.nc", engine="h5netcdf") as nc:  # the other library
        np.testing.assert_array_equal(nc["frequency_hz"].values, result["frequency_hz"].values)
        assert list(nc["channel"].values) == list(result["channel"].values)


def test_without_netcdf4_falls_back_to_h5netcdf(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "netCDF4", None)  # as if not installed: import fails
    assert netcdf4_engine() == "h5netcdf"
    rec = load_demo().isel(hit=[0, 1, 2])
    save_records(rec, tmp_path / "r.nc")
    back = open_records(tmp_path / "r.nc")
    np.testing.assert_array_equal(back["response"].values, rec["response"].values)
    result = fit_modes(back, n_modes=2)
    write_modal_table(result, tmp_path / "t")
    monkeypatch.undo()
    # both files written by h5netcdf when netCDF4 cannot be imported
    assert "h5netcdf=" in _written_by(tmp_path / "r.nc")
    assert "h5netcdf=" in _written_by(tmp_path / "t" / "modes.nc")
    with netCDF4.Dataset(tmp_path / "t" / "modes.nc") as nc:  # netCDF-C reads h5netcdf's file
        np.testing.assert_array_equal(nc["frequency_hz"][:], result["frequency_hz"].values)
