"""Readers, writer and segmentation of modalnb.io against files written by other programs.

Every reader is fed files written by an independent writer (scipy.io.wavfile.write,
numpy.savez, Python's csv module, xarray.Dataset.to_netcdf with each engine) and the values
read back are compared with the arrays that were written.
"""

from __future__ import annotations

import csv
import math
import os

import numpy as np
import pytest
import xarray as xr
from scipy.io import wavfile

from modalnb.io import open_records, save_records, segment_recording
from modalnb.records import records_from_arrays, validate_records

FS = 2048.0


def _signals(rng: np.random.Generator, n_hit: int, n_ch: int, n_t: int) -> np.ndarray:
    t = np.arange(n_t) / FS
    base = np.exp(-8.0 * t) * np.sin(2 * np.pi * 140.0 * t)
    return base[None, None, :] * rng.uniform(0.5, 2.0, (n_hit, n_ch, 1)) + 0.01 * rng.normal(
        size=(n_hit, n_ch, n_t)
    )


def _assert_layout(ds: xr.Dataset) -> None:
    """The exact record-set layout promised by the modalnb.records module docstring."""
    validate_records(ds)
    assert ds["response"].dims == ("hit", "channel", "time")
    assert ds["response"].dtype == np.float64
    assert ds["channel"].dtype == object
    assert all(type(c) is str for c in ds["channel"].values.tolist())
    assert ds["hit"].dtype == np.int64
    assert ds["time"].dtype == np.float64
    if "force" in ds:
        assert ds["force"].dims == ("hit", "time")
        assert ds["force"].dtype == np.float64


def _stamp(path):
    return path.read_bytes(), os.stat(path).st_mtime_ns


# ----------------------------------------------------------------------------- WAV


@pytest.mark.parametrize(
    ("dtype", "full_scale"),
    [
        # RIFF WAVE PCM (Microsoft/IBM multimedia spec, 1991; scipy.io.wavfile.read docs table):
        # samples wider than 8 bits are two's-complement signed, so -2**(bits-1) is -full scale.
        (np.int16, 2.0**15),
        (np.int32, 2.0**31),
        # IEEE-float WAVE: full scale is +-1.0 (scipy.io.wavfile.read docs table).
        (np.float32, 1.0),
    ],
)
def test_wav_written_by_scipy(tmp_path, dtype, full_scale):
    rng = np.random.default_rng(1)
    n = 600
    if np.dtype(dtype).kind == "i":
        info = np.iinfo(dtype)
        counts = rng.integers(info.min, info.max, size=(n, 3), dtype=dtype, endpoint=True)
    else:
        counts = rng.uniform(-1, 1, size=(n, 3)).astype(dtype)
    path = tmp_path / "rec.wav"
    wavfile.write(path, 4096, counts)  # independent writer: scipy.io.wavfile.write
    before = _stamp(path)
    ds = open_records(
        path,
        calibration=[50.0, 20.0],
        force_channel=0,
        force_calibration=2000.0,
        channels=["tip", "mid"],
        units="m/s^2",
    )
    assert _stamp(path) == before  # the input file is never modified
    _assert_layout(ds)
    assert ds["channel"].values.tolist() == ["tip", "mid"]
    # physical value = counts / full scale * (units at full scale), per the WAVE convention above
    c = counts.astype(np.float64)
    np.testing.assert_array_equal(ds["force"].values[0], c[:, 0] / full_scale * 2000.0)
    np.testing.assert_array_equal(ds["response"].values[0, 0], c[:, 1] / full_scale * 50.0)
    np.testing.assert_array_equal(ds["response"].values[0, 1], c[:, 2] / full_scale * 20.0)
    assert ds["full_scale"].values.tolist() == [50.0, 20.0]
    assert ds.attrs["force_full_scale"] == 2000.0
    assert ds.attrs["sample_rate"] == 4096.0
    # sample k of a WAV stream is at k / rate (rate in the header written above)
    np.testing.assert_array_equal(ds["time"].values, np.arange(n) / 4096.0)


def test_wav_uint8_and_mono_default_names(tmp_path):
    # 8-bit WAVE PCM is unsigned with 128 as zero (RIFF WAVE spec; scipy.io.wavfile.read docs).
    counts = np.array(([0, 128, 255, 64] * 8), dtype=np.uint8)
    path = tmp_path / "mono.wav"
    wavfile.write(path, 1000, counts)
    ds = open_records(path, calibration=10.0)
    assert ds["channel"].values.tolist() == ["ch1"]
    np.testing.assert_array_equal(ds["response"].values[0, 0], (counts - 128.0) / 128.0 * 10.0)


# ----------------------------------------------------------------------------- npz


def test_npz_three_dims_with_time_force_and_coords(tmp_path):
    rng = np.random.default_rng(2)
    resp = _signals(rng, 3, 2, 128)
    force = rng.normal(size=(3, 128))
    time = (np.arange(128) - 16) / FS
    path = tmp_path / "rec.npz"
    np.savez(  # independent writer: numpy.savez
        path,
        response=resp,
        time=time,
        force=force,
        channel=np.array(["a1", "a2"]),
        hit=np.array([4, 7, 9]),
        node=np.array(["n1", "n2"]),
        direction=np.array(["+Z", "-Y"]),
        x=np.array([0.0, 0.5]),
        excitation_node=np.array(["n1", "n1", "n2"]),
    )
    before = _stamp(path)
    ds = open_records(path, units="m/s^2", force_units="N")
    assert _stamp(path) == before
    _assert_layout(ds)
    np.testing.assert_array_equal(ds["response"].values, resp)
    np.testing.assert_array_equal(ds["force"].values, force)
    np.testing.assert_array_equal(ds["time"].values, time)
    assert ds["hit"].values.tolist() == [4, 7, 9]
    assert ds["channel"].values.tolist() == ["a1", "a2"]
    assert ds["direction"].values.tolist() == ["+Z", "-Y"]
    assert ds["excitation_node"].values.tolist() == ["n1", "n1", "n2"]
    assert ds["force"].attrs["units"] == "N"


def test_npz_two_dims_with_sample_rate(tmp_path):
    rng = np.random.default_rng(3)
    resp = _signals(rng, 1, 3, 64)[0]
    path = tmp_path / "one.npz"
    np.savez(path, response=resp, sample_rate=FS, force=np.ones(64))
    ds = open_records(path)
    _assert_layout(ds)
    np.testing.assert_array_equal(ds["response"].values[0], resp)
    assert ds["hit"].values.tolist() == [1]  # modalnb.open_records docs: hits labelled 1..N
    assert ds.attrs["sample_rate"] == FS
    # uniform sampling: t_k = k / fs
    np.testing.assert_allclose(ds["time"].values, np.arange(64) / FS, rtol=0, atol=1e-15)


# ----------------------------------------------------------------------------- CSV


def _write_csv(path, header, rows, *, delimiter=",", decimal="."):
    # independent writer: Python's csv module; repr(float) round-trips exactly
    # (Python docs, "Floating Point Arithmetic: Issues and Limitations").
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, delimiter=delimiter)
        w.writerow(header)
        for row in rows:
            w.writerow([repr(float(v)).replace(".", decimal) for v in row])


def test_csv_comma(tmp_path):
    rng = np.random.default_rng(4)
    resp = _signals(rng, 1, 2, 100)[0]
    force = rng.normal(size=100)
    time = np.arange(100) / FS
    path = tmp_path / "rec.csv"
    _write_csv(path, ["time", "force", "acc1", "acc2"], zip(time, force, *resp, strict=True))
    before = _stamp(path)
    ds = open_records(path, units="g", force_units="kN")
    assert _stamp(path) == before
    _assert_layout(ds)
    assert ds["channel"].values.tolist() == ["acc1", "acc2"]
    np.testing.assert_array_equal(ds["response"].values[0], resp)
    np.testing.assert_array_equal(ds["force"].values[0], force)
    np.testing.assert_array_equal(ds["time"].values, time)
    assert ds["response"].attrs["units"] == "g"
    assert ds["force"].attrs["units"] == "kN"


def test_csv_semicolon_decimal_comma_with_hit_column(tmp_path):
    rng = np.random.default_rng(5)
    resp = _signals(rng, 2, 3, 80)
    time = (np.arange(80) - 8) / FS
    rows = [(label, time[k], *resp[h, :, k]) for h, label in enumerate([11, 12]) for k in range(80)]
    path = tmp_path / "rec.txt"
    _write_csv(path, ["hit", "time", "x", "y", "z"], rows, delimiter=";", decimal=",")
    ds = open_records(path, decimal=",")  # delimiter sniffed: ';'
    _assert_layout(ds)
    assert ds["hit"].values.tolist() == [11, 12]
    assert ds["channel"].values.tolist() == ["x", "y", "z"]
    np.testing.assert_array_equal(ds["response"].values, resp)
    np.testing.assert_array_equal(ds["time"].values, time)
    assert "force" not in ds


def test_csv_tab_and_explicit_delimiter(tmp_path):
    resp = _signals(np.random.default_rng(6), 1, 1, 40)[0]
    time = np.arange(40) / FS
    path = tmp_path / "tab.csv"
    _write_csv(path, ["time", "tip"], zip(time, resp[0], strict=True), delimiter="\t")
    for opts in ({}, {"delimiter": "\t"}):
        ds = open_records(path, **opts)
        np.testing.assert_array_equal(ds["response"].values[0, 0], resp[0])


# ----------------------------------------------------------------------------- netCDF


@pytest.mark.parametrize("engine", ["h5netcdf", "scipy"])
def test_netcdf_written_by_xarray(tmp_path, engine):
    rng = np.random.default_rng(7)
    resp = _signals(rng, 2, 2, 96)
    force = rng.normal(size=(2, 96))
    time = (np.arange(96) - 10) / FS
    written = xr.Dataset(
        {
            "response": (("hit", "channel", "time"), resp, {"units": "m/s^2"}),
            "force": (("hit", "time"), force, {"units": "N"}),
        },
        coords={
            "hit": [3, 5],
            "channel": ["p1", "p2"],  # plain unicode strings, not object arrays
            "time": time,
            "direction": ("channel", ["+X", "+Z"]),
        },
        attrs={"sample_rate": FS, "exponential_window_tau_s": 0.5},
    )
    path = tmp_path / "rec.nc"
    written.to_netcdf(path, engine=engine)  # independent writer: xarray with each engine
    before = _stamp(path)
    ds = open_records(path)
    assert _stamp(path) == before
    _assert_layout(ds)
    np.testing.assert_array_equal(ds["response"].values, resp)
    np.testing.assert_array_equal(ds["force"].values, force)
    np.testing.assert_array_equal(ds["time"].values, time)
    assert ds["hit"].values.tolist() == [3, 5]
    assert ds["channel"].values.tolist() == ["p1", "p2"]
    assert ds["direction"].values.tolist() == ["+X", "+Z"]
    assert ds["direction"].dtype == object
    assert ds.attrs == {"sample_rate": FS, "exponential_window_tau_s": 0.5}
    # the data is in memory: removing the file must not affect the loaded dataset
    path.unlink()
    np.testing.assert_array_equal(ds["response"].values, resp)


# ----------------------------------------------------------------------------- lists, round trip


def test_list_of_files_one_hit_each(tmp_path):
    rng = np.random.default_rng(8)
    resp = _signals(rng, 3, 2, 64)
    paths = []
    for k in range(3):
        p = tmp_path / f"hit{k}.npz"
        np.savez(p, response=resp[k], sample_rate=FS, channel=np.array(["a", "b"]))
        paths.append(p)
    ds = open_records(paths[::-1])
    _assert_layout(ds)
    assert ds["hit"].values.tolist() == [1, 2, 3]
    # files in the order given: hit 1 is the last file written
    np.testing.assert_array_equal(ds["response"].values, resp[::-1])


def _rich_records() -> xr.Dataset:
    rng = np.random.default_rng(9)
    ds = records_from_arrays(
        _signals(rng, 2, 3, 128),
        FS,
        channels=["tip", "mid", "root"],
        force=rng.normal(size=(2, 128)),
        t0=-16 / FS,
        node=["n3", "n2", "n1"],
        direction=["+Z", "+Z", "-Y"],
        position=[[1.0, 0, 0], [0.5, 0, 0], [0.0, 0, 0]],
        attrs={"exponential_window_tau_s": 0.25, "force_full_scale": 4000.0, "note": "bench A"},
    )
    return ds.assign_coords(
        excitation_node=("hit", np.array(["n3", "n1"], dtype=object)),
        full_scale=("channel", np.array([50.0, 50.0, 100.0])),
    )


def test_save_open_round_trip_is_identical(tmp_path):
    ds = _rich_records()
    original = ds.copy(deep=True)
    out = save_records(ds, tmp_path / "set.nc")
    assert out == tmp_path / "set.nc"
    back = open_records(out)
    # xarray.testing.assert_identical: values, dims, coords, dtypes of names, all attrs
    xr.testing.assert_identical(back, ds)
    _assert_layout(back)
    xr.testing.assert_identical(ds, original)  # save_records does not alter its input
    # written as netCDF4/HDF5 (HDF5 signature, HDF5 File Format Specification, section 2.2)
    assert out.read_bytes()[:8] == b"\x89HDF\r\n\x1a\n"
    # readable by xarray itself, independent of open_records
    plain = xr.load_dataset(out, engine="h5netcdf")
    np.testing.assert_array_equal(plain["response"].values, ds["response"].values)


def test_save_replaces_atomically_and_leaves_no_temp_file(tmp_path):
    target = tmp_path / "set.nc"
    target.write_bytes(b"old contents")
    ds = _rich_records()
    save_records(ds, target)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["set.nc"]
    xr.testing.assert_identical(open_records(target), ds)
    # a dataset read from netCDF3 (with its encodings) saves again as netCDF4
    nc3 = tmp_path / "old3.nc"
    ds.to_netcdf(nc3, engine="scipy")
    save_records(open_records(nc3), target)
    xr.testing.assert_identical(open_records(target), ds)


# ----------------------------------------------------------------------------- segmentation


def _half_sine(n: int, fs: float, starts_s, amps, width_s: float) -> np.ndarray:
    t = np.arange(n) / fs
    f = np.zeros(n)
    for t0, a in zip(starts_s, amps, strict=True):
        on = (t >= t0) & (t <= t0 + width_s)
        f[on] += a * np.sin(np.pi * (t[on] - t0) / width_s)
    return f


def test_segmentation_on_force_finds_hit_starts():
    fs, n, width = 5000.0, 5000 * 6, 0.002
    starts = [0.4013, 1.5021, 2.7007, 3.9003, 5.8]  # the last one is cut off by the end
    amps = [300.0, 120.0, 250.0, 80.0, 300.0]
    force = _half_sine(n, fs, starts, amps, width)
    t = np.arange(n) / fs
    resp = np.zeros((2, n))
    for t0, a in zip(starts, amps, strict=True):
        on = t >= t0
        resp[:, on] += a * np.exp(-20 * (t[on] - t0)) * np.sin(2 * np.pi * 90 * (t[on] - t0))
    with pytest.warns(UserWarning, match="dropped 1 incomplete"):
        ds = segment_recording(
            resp,
            fs,
            force=force,
            record_s=0.5,
            pretrigger_s=0.05,
            trigger=0.1,
            channels=["a", "b"],
        )
    _assert_layout(ds)
    assert ds.attrs["segment_dropped"] == 1
    assert ds["hit"].values.tolist() == [1, 2, 3, 4]
    # half-sine a*sin(pi*tau/T) first reaches the level L = 0.1*max(a) at
    # tau = T*asin(L/a)/pi (closed form of the inverse sine); the first sample at or after it
    # is the expected trigger.
    level = 0.1 * max(amps)
    expected = [
        math.ceil((t0 + width * math.asin(level / a) / math.pi) * fs)
        for t0, a in zip(starts[:4], amps[:4], strict=True)
    ]
    found = ds.attrs["segment_trigger_samples"].tolist()
    assert np.all(np.abs(np.array(found) - np.array(expected)) <= 1)
    # time is 0 at the trigger sample; 0.05 s of pre-trigger at 5 kHz is 250 samples
    i0 = int(np.flatnonzero(ds["time"].values == 0.0)[0])
    assert i0 == 250
    assert ds.sizes["time"] == 2500
    for k, s in enumerate(found):
        np.testing.assert_array_equal(ds["force"].values[k], force[s - 250 : s + 2250])
        np.testing.assert_array_equal(ds["response"].values[k], resp[:, s - 250 : s + 2250])


def test_segmentation_without_force_and_holdoff():
    from scipy.optimize import brentq

    fs, n = 4000.0, 4000 * 3
    sigma, f0 = 15.0, 60.0
    starts, amps = [0.2, 0.2 + 0.1, 1.3, 2.1], [1.0, 0.8, 0.6, 0.9]  # hit 2 is a double tap

    def x(tau):
        return np.where(tau >= 0, np.exp(-sigma * tau) * np.sin(2 * np.pi * f0 * tau), 0.0)

    t = np.arange(n) / fs
    resp = sum(a * x(t - t0) for t0, a in zip(starts, amps, strict=True))[None, :]
    ds = segment_recording(resp, fs, record_s=0.6, pretrigger_s=0.02, trigger=0.2)
    # the double tap 0.1 s after hit 1 falls inside hit 1's record, so it starts no new hit
    assert ds.sizes["hit"] == 3
    level = 0.2 * np.abs(resp).max()
    expected = []
    for t0, a in zip([starts[0], starts[2], starts[3]], [amps[0], amps[2], amps[3]], strict=True):
        # first root of a*x(tau) = level on the first rising quarter period (scipy.optimize.brentq)
        tau = brentq(
            lambda s, a=a: a * np.exp(-sigma * s) * np.sin(2 * np.pi * f0 * s) - level,
            0.0,
            0.25 / f0,
        )
        expected.append(math.ceil((t0 + tau) * fs))
    found = ds.attrs["segment_trigger_samples"].tolist()
    assert np.all(np.abs(np.array(found) - np.array(expected)) <= 1), (found, expected)


def test_segmentation_holdoff_and_double_tap():
    fs, n, width = 2000.0, 2000 * 3, 0.003
    starts, amps = [0.2, 0.3, 1.3], [100.0, 60.0, 90.0]  # 0.1 s after the first: a double tap
    force = _half_sine(n, fs, starts, amps, width)
    resp = np.zeros((1, n))
    ds = segment_recording(resp, fs, force=force, record_s=0.6, pretrigger_s=0.02)
    # default holdoff is the record length after the trigger: the double tap stays in hit 1
    assert ds.sizes["hit"] == 2
    ds2 = segment_recording(resp, fs, force=force, record_s=0.6, pretrigger_s=0.02, holdoff_s=0.05)
    assert ds2.sizes["hit"] == 3
    # inverse-sine crossing of a half-sine, as in test_segmentation_on_force_finds_hit_starts
    level = 0.1 * max(amps)
    expected = [
        math.ceil((t0 + width * math.asin(level / a) / math.pi) * fs)
        for t0, a in zip(starts, amps, strict=True)
    ]
    found = ds2.attrs["segment_trigger_samples"]
    assert np.all(np.abs(found - np.array(expected)) <= 1)
    assert np.all(np.abs(ds.attrs["segment_trigger_samples"] - np.array(expected)[[0, 2]]) <= 1)


def test_segmentation_drops_cut_off_first_record():
    fs, n = 1000.0, 3000
    force = _half_sine(n, fs, [0.01, 1.0], [1.0, 1.0], 0.004)
    with pytest.warns(UserWarning, match="incomplete"):
        ds = segment_recording(np.zeros((1, n)), fs, force=force, record_s=0.5, pretrigger_s=0.05)
    assert ds.sizes["hit"] == 1
    assert ds["time"].values[0] == pytest.approx(-0.05)


def test_io_does_not_import_widget_stack():
    # pure computation never imports ipywidgets or plotly, even indirectly (DEVELOPERS.md);
    # checked in a fresh interpreter so other tests' imports cannot mask it
    import subprocess
    import sys

    code = (
        "import sys, modalnb.io; bad = [m for m in ('ipywidgets', 'plotly', 'tqdm.auto') "
        "if m in sys.modules]; print(bad); sys.exit(1 if bad else 0)"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr


# ----------------------------------------------------------------------------- further content


def test_netcdf_further_variables_are_kept(tmp_path):
    # a record file from another pipeline may carry its own variables beside the layout;
    # they come back unchanged (values written by xarray.Dataset.to_netcdf, compared here)
    ds = _rich_records()
    temps = np.array([21.5, 22.0])
    serials = np.array(["S1", "S2", "S3"], dtype=object)
    more = ds.assign(
        temperature=("hit", temps, {"units": "degC"}),
        gain=("channel", np.array([1.0, 2.0, 4.0])),
    ).assign_coords(serial=("channel", serials))
    path = tmp_path / "more.nc"
    more.to_netcdf(path, engine="h5netcdf")
    back = open_records(path)
    np.testing.assert_array_equal(back["temperature"].values, temps)
    assert back["temperature"].attrs == {"units": "degC"}
    np.testing.assert_array_equal(back["gain"].values, [1.0, 2.0, 4.0])
    assert back["serial"].values.tolist() == ["S1", "S2", "S3"] and "serial" in back.coords
    xr.testing.assert_identical(back.drop_vars(["temperature", "gain", "serial"]), ds)


def test_list_of_netcdf_files_joins_per_hit_values(tmp_path):
    ds = _rich_records()  # two hits, excitation_node ["n3", "n1"]
    paths = []
    for k in (1, 0):
        one = ds.isel(hit=[k]).assign(
            temperature=("hit", [20.0 + k]), gain=("channel", [1.0, 2.0, 4.0])
        )
        paths.append(save_records(one, tmp_path / f"hit{k}.nc"))
    both = open_records(paths)
    assert both["hit"].values.tolist() == [1, 2]
    # files in the order given: the first file holds hit index 1 of the original
    np.testing.assert_array_equal(both["response"].values, ds["response"].values[[1, 0]])
    np.testing.assert_array_equal(both["force"].values, ds["force"].values[[1, 0]])
    assert both["excitation_node"].values.tolist() == ["n1", "n3"]
    assert both["temperature"].values.tolist() == [21.0, 20.0]
    assert both["gain"].values.tolist() == [1.0, 2.0, 4.0]  # equal in every file: kept once
    assert both["node"].values.tolist() == ["n3", "n2", "n1"]
    assert both.attrs == ds.attrs
