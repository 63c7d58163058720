"""netCDF files written by the netCDF4 library (Unidata's netCDF-C through netCDF4-python,
an independent writer: not xarray), read by open_records and compared value by value.

The files follow the documented record-set layout (modalnb.records): dimensions hit,
channel, time; ``response(hit, channel, time)`` and ``force(hit, time)`` with ``units``;
coordinate variables named after their dimension; per-channel and per-hit coordinates
listed in the ``coordinates`` attribute of the data variables (CF Conventions 1.8,
section 5, "Coordinate Systems and Domain"). Strings are variable-length strings in
netCDF4 files and character arrays with a trailing length dimension in classic files
(NetCDF Users Guide, "Strings"; netCDF4.stringtochar).
"""

from __future__ import annotations

import netCDF4
import numpy as np
import pytest

from modalnb.io import open_records

FS = 1024.0
CHANNELS = ["tip", "mid", "root"]
DIRECTIONS = ["+Z", "+Z", "-Y"]
EXC = ["n3", "n1"]


def _data():
    rng = np.random.default_rng(44)
    n_hit, n_t = 2, 80
    time = (np.arange(n_t) - 8) / FS
    resp = rng.normal(size=(n_hit, len(CHANNELS), n_t))
    force = rng.normal(size=(n_hit, n_t)).astype(np.float32)  # stored as 32-bit floats
    x = np.array([1.0, 0.5, 0.0])
    return time, resp, force, x


def _write(path, fmt: str) -> None:
    time, resp, force, x = _data()
    with netCDF4.Dataset(path, "w", format=fmt) as nc:  # independent writer: netCDF4
        nc.createDimension("hit", resp.shape[0])
        nc.createDimension("channel", resp.shape[1])
        nc.createDimension("time", resp.shape[2])
        nc.sample_rate = FS
        nc.exponential_window_tau_s = 0.25
        nc.title = "written by netCDF4-python"
        hit = nc.createVariable("hit", "i4", ("hit",))  # 32-bit labels
        hit[:] = [4, 9]
        t = nc.createVariable("time", "f8", ("time",))
        t.units = "s"
        t[:] = time
        if fmt == "NETCDF4":
            names = {
                "channel": ("channel", CHANNELS),
                "direction": ("channel", DIRECTIONS),
                "excitation_node": ("hit", EXC),
            }
            for name, (dim, values) in names.items():
                v = nc.createVariable(name, str, (dim,))
                v[:] = np.array(values, dtype=object)
        else:
            nc.createDimension("nchar", 8)
            for name, dim, values in (
                ("channel", "channel", CHANNELS),
                ("direction", "channel", DIRECTIONS),
                ("excitation_node", "hit", EXC),
            ):
                v = nc.createVariable(name, "S1", (dim, "nchar"))
                v[:] = netCDF4.stringtochar(np.array(values, dtype="S8"))
        xv = nc.createVariable("x", "f8", ("channel",))
        xv.units = "m"
        xv[:] = x
        r = nc.createVariable("response", "f8", ("hit", "channel", "time"))
        r.units = "m/s^2"
        r.coordinates = "direction x excitation_node"
        r[:] = resp
        f = nc.createVariable("force", "f4", ("hit", "time"))
        f.units = "N"
        f.coordinates = "excitation_node"
        f[:] = force


@pytest.mark.parametrize("fmt", ["NETCDF4", "NETCDF3_CLASSIC"])
def test_netcdf_written_by_netcdf4_library(tmp_path, fmt):
    path = tmp_path / "rec.nc"
    _write(path, fmt)
    time, resp, force, x = _data()
    ds = open_records(path)
    # values as written, one by one
    np.testing.assert_array_equal(ds["response"].values, resp)
    np.testing.assert_array_equal(ds["force"].values, force.astype(np.float64))
    np.testing.assert_array_equal(ds["time"].values, time)
    np.testing.assert_array_equal(ds["x"].values, x)
    assert ds["hit"].values.tolist() == [4, 9]
    assert ds["channel"].values.tolist() == CHANNELS
    assert ds["direction"].values.tolist() == DIRECTIONS
    assert ds["excitation_node"].values.tolist() == EXC
    # the layout's types: float64 samples, int64 labels, object arrays of str
    assert ds["response"].dtype == np.float64 and ds["force"].dtype == np.float64
    assert ds["hit"].dtype == np.int64 and ds["channel"].dtype == object
    assert all(type(v) is str for v in ds["direction"].values.tolist())
    # per-channel and per-hit coords are coordinates on their dimension (CF "coordinates")
    assert ds["direction"].dims == ("channel",) and "direction" in ds.coords
    assert ds["excitation_node"].dims == ("hit",) and "excitation_node" in ds.coords
    # attributes as written
    assert ds["response"].attrs == {"units": "m/s^2"}
    assert ds["force"].attrs == {"units": "N"}
    assert ds["x"].attrs == {"units": "m"}
    assert ds.attrs["sample_rate"] == FS
    assert ds.attrs["exponential_window_tau_s"] == 0.25
    assert ds.attrs["title"] == "written by netCDF4-python"
