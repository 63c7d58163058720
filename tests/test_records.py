"""The record-set layout (modalnb.records module docstring) and its validator."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from modalnb import RecordError, records_from_arrays, validate_records
from modalnb.records import get_sample_rate


def _ds(n_hit=2, n_ch=3, n_t=128, fs=1000.0, **kw):
    rng = np.random.default_rng(1)
    return records_from_arrays(
        rng.standard_normal((n_hit, n_ch, n_t)), fs, force=rng.standard_normal((n_hit, n_t)), **kw
    )


def test_layout_exact():
    ds = _ds(t0=-0.01, direction=["+Z", "-Z", "+Y"], node=["a", "b", "c"],
             position=np.arange(9.0).reshape(3, 3))
    assert ds["response"].dims == ("hit", "channel", "time")
    assert ds["force"].dims == ("hit", "time")
    assert ds["response"].dtype == np.float64 and ds["force"].dtype == np.float64
    assert ds["response"].attrs["units"] == "m/s^2" and ds["force"].attrs["units"] == "N"
    assert ds["hit"].values.tolist() == [1, 2]
    assert ds["channel"].values.tolist() == ["ch1", "ch2", "ch3"]
    assert ds["time"].values[0] == pytest.approx(-0.01)
    assert ds["direction"].dims == ("channel",) and ds["x"].values.tolist() == [0.0, 3.0, 6.0]
    # the step of the time coordinate is 1/fs (definition of a sample rate)
    assert np.allclose(np.diff(ds["time"].values), 1e-3)


def test_sample_rate_from_time_without_attr():
    ds = _ds(fs=2048.0)
    del ds.attrs["sample_rate"]
    assert get_sample_rate(ds) == pytest.approx(2048.0)


def test_rounded_times_accepted():
    # CSV files often round times; steps equal within 1 % of the median step are uniform
    ds = _ds(fs=3000.0)
    ds = ds.assign_coords(time=np.round(ds["time"].values, 6))
    assert validate_records(ds) is ds


@pytest.mark.parametrize(
    ("mutate", "match"),
    [
        (lambda d: d.rename({"response": "resp"}), r"no variable named 'response'.*Did you mean 'resp'"),
        (lambda d: d.transpose("channel", "hit", "time"), r"dims \('channel', 'hit', 'time'\)"),
        (lambda d: d.assign_coords(time=d["time"].values[::-1].copy()), r"'time' must increase"),
        (lambda d: d.assign_coords(time=np.r_[d["time"].values[:64], d["time"].values[64:] + 0.01]),
         r"not uniformly spaced"),
        (lambda d: d.isel(time=slice(0, 8)), r"too few samples"),
        (lambda d: d.assign(response=d["response"].astype(str)), r"must hold real numbers"),
        (lambda d: d.assign(force=d["force"].expand_dims(channel=d["channel"]).transpose("channel", "hit", "time")),
         r"'force' has dims"),
        (lambda d: d.assign_attrs(sample_rate=500.0), r"sample_rate=500 Hz disagrees"),
        (lambda d: d.assign_attrs(exponential_window_tau_s=-1.0), r"'exponential_window_tau_s' must be a positive"),
        (lambda d: d.assign_coords(hit=[1, 1]), r"hit labels are not unique"),
        (lambda d: d.assign_coords(channel=["a", "b", "a"]), r"channel name 'a' appears more than once"),
    ],
)
def test_validation_errors(mutate, match):
    ds = mutate(_ds())
    with pytest.raises(RecordError, match=match):
        validate_records(ds, source="rig.nc")


def test_error_names_file_hit_and_channel():
    ds = _ds()
    r = ds["response"].values.copy()
    r[1, 2, 40] = np.nan
    ds = ds.assign(response=(ds["response"].dims, r, ds["response"].attrs))
    with pytest.raises(RecordError) as info:
        validate_records(ds, source="bay3.nc")
    msg = str(info.value)
    assert msg.startswith("bay3.nc: ") and "hit 2" in msg and "'ch3'" in msg and "NaN" in msg
    assert "\n" not in msg


def test_inf_in_force_named():
    ds = _ds()
    f = ds["force"].values.copy()
    f[0, 5] = np.inf
    ds = ds.assign(force=(("hit", "time"), f))
    with pytest.raises(RecordError, match=r"'force'.*Inf at hit 1"):
        validate_records(ds)


def test_not_a_dataset():
    with pytest.raises(RecordError, match="expected an xarray.Dataset, got DataArray"):
        validate_records(xr.DataArray([1.0]))


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"response": np.zeros((2, 2, 2, 64))}, "must have 1, 2 or 3 dims"),
        ({"response": np.zeros((2, 64)), "channels": ["a"]}, "1 channel names given for 2"),
        ({"response": np.zeros((2, 64)), "force": np.zeros(63)}, "`force` must have shape"),
        ({"response": np.zeros((2, 64)), "sample_rate": 0.0}, "`sample_rate` must be a positive"),
        ({"response": [["a"] * 64]}, "`response` must be an array of real numbers"),
        ({"response": np.zeros((2, 64), complex)}, "`response` holds complex numbers"),
    ],
)
def test_records_from_arrays_errors(kwargs, match):
    kwargs.setdefault("sample_rate", 100.0)
    with pytest.raises(RecordError, match=match):
        records_from_arrays(**kwargs)


def test_accessor_delegates():
    ds = _ds(fs=640.0)
    assert ds.modalnb.sample_rate == pytest.approx(640.0)
    assert ds.modalnb.validate() is ds


def test_build_records_is_the_constructor_behind_records_from_arrays():
    from modalnb.records import build_records, record_parts

    ds = _ds(t0=-0.01, direction=["+Z", "-Z", "+Y"], node=["a", "b", "c"],
             position=np.arange(9.0).reshape(3, 3), attrs={"note": "x"})
    again = build_records(**record_parts(ds))
    xr.testing.assert_identical(again, ds)
    assert again["x"].attrs == {"units": "m"} and again["time"].attrs == {"units": "s"}


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"response": np.zeros((1, 64))}, r"rig\.csv: variable 'response' must have dims"),
        ({"time": np.zeros(10)}, r"rig\.csv: 'time' has shape \(10,\)"),
        ({"channels": ["a"]}, r"rig\.csv: 1 channel names for 2 response channels"),
        ({"force": np.zeros((2, 64))}, r"rig\.csv: variable 'force' has shape \(2, 64\)"),
        ({"hits": np.array([1.5])}, r"rig\.csv: 'hit' must hold 1 integer labels"),
        ({"channel_coords": {"node": ["a"]}}, r"rig\.csv: 'node' has shape \(1,\), expected one per channel"),
    ],
)
def test_build_records_errors_name_the_source(kwargs, match):
    from modalnb.records import build_records

    args = {"response": np.zeros((1, 2, 64)), "time": np.arange(64) / 100.0, "channels": ["a", "b"]}
    args.update(kwargs)
    with pytest.raises(RecordError, match=match):
        build_records(args.pop("response"), args.pop("time"), source="rig.csv", **args)


def test_records_from_arrays_empty_response_is_a_record_error():
    # found by the property test: an empty (0, 0, 0) response must give our error
    with pytest.raises(RecordError, match="integer labels|too few samples|empty"):
        records_from_arrays(np.zeros((0, 0, 0)), 100.0)
