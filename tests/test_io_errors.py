"""Bad input to modalnb.io: our own one-line error, starting with the file name.

Every bad file gives a one-line RecordError that starts with the file name and leaves the
file as it was (the promise in the modalnb.io docstring); the broken files are written by
independent writers (numpy.savez, Python's csv module, xarray.Dataset.to_netcdf,
scipy.io.wavfile.write) or are plain bytes.
"""

from __future__ import annotations

import csv
import os
import re

import numpy as np
import pytest
import xarray as xr
from scipy.io import wavfile

from modalnb._errors import RecordError, RecordFileNotFoundError
from modalnb.io import open_records, save_records, segment_recording
from modalnb.records import records_from_arrays

FS = 1024.0


def _raises(path, match, **options) -> str:
    """open_records(path) raises RecordError matching `match`; the file is left unchanged."""
    before = (path.read_bytes(), os.stat(path).st_mtime_ns) if path.exists() else None
    with pytest.raises(RecordError, match=match) as info:
        open_records(path, **options)
    msg = str(info.value)
    assert "\n" not in msg  # one line (modalnb.io docstring)
    assert msg.startswith(str(path))  # "Error messages start with the file name"
    if before is not None:
        assert (path.read_bytes(), os.stat(path).st_mtime_ns) == before  # never modified
    return msg


def _csv(path, header, rows, delimiter=","):
    with open(path, "w", newline="", encoding="utf-8") as fh:  # writer: Python's csv module
        w = csv.writer(fh, delimiter=delimiter)
        w.writerow(header)
        w.writerows(rows)
    return path


def _good(n=64, n_hit=1, n_ch=2):
    t = np.arange(n) / FS
    return np.sin(2 * np.pi * 50 * t) * np.ones((n_hit, n_ch, 1)), t


# ----------------------------------------------------------------------------- any file


def test_missing_file(tmp_path):
    path = tmp_path / "nothere.nc"
    with pytest.raises(RecordFileNotFoundError, match=r"nothere\.nc: no such file") as info:
        open_records(path)
    assert isinstance(info.value, FileNotFoundError)
    assert isinstance(info.value, ValueError)
    assert not path.exists()


@pytest.mark.parametrize("suffix", [".nc", ".csv", ".wav", ".npz"])
def test_empty_file(tmp_path, suffix):
    path = tmp_path / f"empty{suffix}"
    path.write_bytes(b"")
    _raises(path, r"empty \(0 bytes\)", **({"calibration": 1.0} if suffix == ".wav" else {}))


def test_unknown_type(tmp_path):
    path = tmp_path / "records.xlsx"
    path.write_bytes(b"PK\x03\x04 something")
    _raises(path, r"unknown file type '\.xlsx'")


def test_folder_is_not_a_file(tmp_path):
    path = tmp_path / "d.nc"
    path.mkdir()
    with pytest.raises(RecordError, match="is a folder"):
        open_records(path)


def test_option_that_does_not_apply(tmp_path):
    resp, t = _good()
    path = tmp_path / "r.npz"
    np.savez(path, response=resp, time=t)
    msg = _raises(path, "option 'unit' does not apply to npz files", unit="g")
    assert "Did you mean 'units'?" in msg


# ----------------------------------------------------------------------------- corrupt


@pytest.mark.parametrize("engine", ["h5netcdf", "scipy"])
def test_truncated_netcdf(tmp_path, engine):
    resp, t = _good(256)
    full = tmp_path / "full.nc"
    records_from_arrays(resp, FS).to_netcdf(full, engine=engine)  # writer: xarray
    path = tmp_path / "cut.nc"
    path.write_bytes(full.read_bytes()[: full.stat().st_size // 2])
    _raises(path, "damaged or incomplete")


@pytest.mark.parametrize(
    ("suffix", "content", "match"),
    [
        (".nc", b"hello world, not netCDF", "not a netCDF file"),
        (".nc", b"\x89HDF\r\n\x1a\n" + b"\0" * 64, "damaged or incomplete"),
        (".npz", b"not a zip archive at all", "not an npz archive"),
        (".npz", b"PK\x03\x04" + b"\0" * 40, "cannot read this npz archive"),
        (".wav", b"RIFF\x10\x00\x00\x00WAVEjunk", "not a readable WAV file"),
        (".csv", b"time,a\n\xff\xfe\x00broken", "not a UTF-8 text file"),
    ],
)
def test_corrupt_files(tmp_path, suffix, content, match):
    path = tmp_path / f"bad{suffix}"
    path.write_bytes(content)
    _raises(path, match, **({"calibration": 1.0} if suffix == ".wav" else {}))


def test_truncated_wav_is_not_silently_shortened(tmp_path):
    full = tmp_path / "full.wav"
    wavfile.write(full, 8000, np.zeros((400, 2), dtype=np.int16))  # writer: scipy.io.wavfile
    path = tmp_path / "cut.wav"
    path.write_bytes(full.read_bytes()[:300])
    _raises(path, "truncated", calibration=1.0)


# ----------------------------------------------------------------------------- layout


def test_missing_response_netcdf(tmp_path):
    resp, t = _good()
    ds = records_from_arrays(resp, FS).rename({"response": "respons"})
    path = tmp_path / "r.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    msg = _raises(path, "no variable named 'response'")
    assert "Did you mean 'respons'?" in msg


def test_missing_response_npz(tmp_path):
    path = tmp_path / "r.npz"
    np.savez(path, sample_rate=FS)  # writer: numpy.savez
    msg = _raises(path, "unknown array|no array named 'response'")
    np.savez(path, acc=np.zeros((2, 64)), sample_rate=FS)
    msg = _raises(path, "unknown array 'acc'")
    assert "response" in msg


def test_wrong_dims_netcdf(tmp_path):
    resp, t = _good()
    ds = records_from_arrays(resp, FS).transpose("time", "channel", "hit")
    path = tmp_path / "r.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    _raises(path, r"'response' has dims \('time', 'channel', 'hit'\)")


@pytest.mark.parametrize("shape", [(64,), (1, 1, 1, 64)])
def test_wrong_dims_npz(tmp_path, shape):
    path = tmp_path / "r.npz"
    np.savez(path, response=np.zeros(shape), sample_rate=FS)
    _raises(path, r"array 'response' has shape .*expected \(hit, channel, time\)")


def test_force_wrong_shape_npz(tmp_path):
    resp, t = _good(n_hit=2)
    path = tmp_path / "r.npz"
    np.savez(path, response=resp, time=t, force=np.zeros(64))
    _raises(path, r"'force' has shape \(64,\), expected \(hit, time\)")


def test_non_uniform_time_csv(tmp_path):
    t = np.arange(64) / FS
    t[40:] += 0.5 / FS  # one step half again as long
    path = _csv(tmp_path / "r.csv", ["time", "a"], [(repr(float(x)), "0.0") for x in t])
    _raises(path, "not uniformly spaced")


def test_decreasing_time_npz(tmp_path):
    resp, t = _good()
    t = t.copy()
    t[[10, 11]] = t[[11, 10]]
    path = tmp_path / "r.npz"
    np.savez(path, response=resp, time=t)
    _raises(path, "'time' must increase")


def test_nan_sample_names_channel_and_hit_csv(tmp_path):
    t = np.arange(64) / FS
    rows = [
        (h, repr(float(x)), "0.5", "nan" if (h == 2 and k == 7) else "1.0")
        for h in (1, 2)
        for k, x in enumerate(t)
    ]
    path = _csv(tmp_path / "r.csv", ["hit", "time", "a", "b"], rows)
    _raises(path, r"NaN at hit 2, channel 'b'")


def test_inf_sample_names_channel_and_hit_npz(tmp_path):
    resp, t = _good(n_hit=3, n_ch=2)
    resp[1, 0, 5] = np.inf
    path = tmp_path / "r.npz"
    np.savez(path, response=resp, time=t, channel=np.array(["left", "right"]), hit=[7, 8, 9])
    _raises(path, r"Inf at hit 8, channel 'left'")


def test_nan_in_force_netcdf(tmp_path):
    resp, t = _good()
    ds = records_from_arrays(resp, FS, force=np.ones(64))
    ds["force"].values[0, 3] = np.nan  # written past validation, as another program might
    path = tmp_path / "r.nc"
    ds.to_netcdf(path, engine="scipy")
    _raises(path, r"'force' has 1 non-finite sample.*NaN at hit 1")


def test_too_few_samples(tmp_path):
    path = tmp_path / "r.npz"
    np.savez(path, response=np.zeros((2, 8)), sample_rate=FS)
    _raises(path, "too few samples: 8")


def test_non_numeric_response_npz(tmp_path):
    path = tmp_path / "r.npz"
    np.savez(path, response=np.full((2, 64), "x"), sample_rate=FS)
    _raises(path, "'response' must hold real numbers")


def test_non_numeric_response_netcdf(tmp_path):
    ds = xr.Dataset(
        {"response": (("hit", "channel", "time"), np.full((1, 1, 32), "abc", dtype=object))},
        coords={"hit": [1], "channel": ["a"], "time": np.arange(32) / FS},
    )
    path = tmp_path / "r.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    _raises(path, "'response' must hold real numbers")


def test_npz_with_pickled_objects(tmp_path):
    path = tmp_path / "r.npz"
    # numpy.savez pickles object arrays (allow_pickle defaults to True when saving)
    np.savez(
        path,
        response=np.zeros((2, 64)),
        sample_rate=FS,
        channel=np.array([{"name": "a"}, {"name": "b"}], dtype=object),
    )
    _raises(path, r"array 'channel' holds Python objects.*pickl")


def test_npz_sample_rate_not_positive(tmp_path):
    path = tmp_path / "r.npz"
    np.savez(path, response=np.zeros((2, 64)), sample_rate=-5.0)
    _raises(path, "'sample_rate' must be one positive number")


def test_npz_neither_time_nor_rate(tmp_path):
    path = tmp_path / "r.npz"
    np.savez(path, response=np.zeros((2, 64)))
    _raises(path, "neither 'time' nor 'sample_rate'")


# ----------------------------------------------------------------------------- CSV


def test_csv_non_numeric_cell_names_line_and_column(tmp_path):
    rows = [(repr(k / FS), "1.0", "2.0") for k in range(40)]
    rows[4] = (rows[4][0], "1.0", "oops")  # file line 6: header is line 1
    path = _csv(tmp_path / "r.csv", ["time", "a", "b"], rows)
    _raises(path, r"line 6, column 'b': 'oops' is not a number")


def test_csv_decimal_comma_hint(tmp_path):
    rows = [(f"{k / FS:.6f}".replace(".", ","), "1,5") for k in range(40)]
    path = _csv(tmp_path / "r.csv", ["time", "a"], rows, delimiter=";")
    _raises(path, r"line 2, column 'time'.*decimal=','")


def test_csv_without_time_column(tmp_path):
    rows = [(repr(k / FS), "1.0") for k in range(40)]
    path = _csv(tmp_path / "r.csv", ["tme", "a"], rows)
    msg = _raises(path, r"no 'time' column")
    assert "['tme', 'a']" in msg and "Did you mean 'tme'?" in msg


def test_csv_reserved_name_in_other_case(tmp_path):
    rows = [(repr(k / FS), "1.0", "2.0") for k in range(40)]
    path = _csv(tmp_path / "r.csv", ["time", "Force", "a"], rows)
    _raises(path, "column 'Force' looks like the reserved column 'force'")


def test_csv_ragged_row(tmp_path):
    rows = [(repr(k / FS), "1.0") for k in range(40)]
    rows[9] = (rows[9][0], "1.0", "3.0")
    path = _csv(tmp_path / "r.csv", ["time", "a"], rows)
    _raises(path, "line 11 has 3 cells but the header has 2 columns")


def test_csv_header_only(tmp_path):
    path = _csv(tmp_path / "r.csv", ["time", "a"], [])
    _raises(path, "no data rows")


def test_csv_hits_of_different_length(tmp_path):
    rows = [(h, repr(k / FS), "1.0") for h, n in ((1, 40), (2, 39)) for k in range(n)]
    path = _csv(tmp_path / "r.csv", ["hit", "time", "a"], rows)
    _raises(path, "hit 2 has 39 rows but hit 1 has 40")


def test_csv_hits_with_different_times(tmp_path):
    rows = [(h, repr(k / FS + (0.5 if h == 2 else 0.0)), "1.0") for h in (1, 2) for k in range(40)]
    path = _csv(tmp_path / "r.csv", ["hit", "time", "a"], rows)
    _raises(path, "hit 2 has other times than hit 1 .line 42")


def test_csv_hit_rows_not_together(tmp_path):
    rows = [(h, repr(k / FS), "1.0") for h in (1, 2, 1) for k in range(20)]
    path = _csv(tmp_path / "r.csv", ["hit", "time", "a"], rows)
    _raises(path, "rows of hit 1 are not together")


def test_csv_fractional_hit_label(tmp_path):
    rows = [("1.5", repr(k / FS), "1.0") for k in range(40)]
    path = _csv(tmp_path / "r.csv", ["hit", "time", "a"], rows)
    _raises(path, "line 2, column 'hit': 1.5 is not an integer hit label")


# ----------------------------------------------------------------------------- WAV


def test_wav_without_calibration(tmp_path):
    path = tmp_path / "r.wav"
    wavfile.write(path, 8000, np.zeros((100, 2), dtype=np.int16))
    _raises(path, "digital counts with no physical units; pass calibration=")


@pytest.mark.parametrize(
    ("options", "match"),
    [
        ({"calibration": [1.0, 2.0, 3.0]}, "calibration has 3 values for 2 response channels"),
        ({"calibration": -1.0}, "calibration must be positive"),
        ({"calibration": 1.0, "force_channel": 0}, "force_calibration is not"),
        ({"calibration": 1.0, "force_channel": 5, "force_calibration": 1.0}, "force_channel=5"),
        ({"calibration": 1.0, "force_calibration": 1.0}, "force_channel is not"),
        ({"calibration": 1.0, "channels": ["a"]}, "1 channel names for 2 response channels"),
    ],
)
def test_wav_bad_options(tmp_path, options, match):
    path = tmp_path / "r.wav"
    wavfile.write(path, 8000, np.zeros((100, 2), dtype=np.int16))
    _raises(path, match, **options)


# ----------------------------------------------------------------------------- lists


def test_list_with_different_channels_names_the_file(tmp_path):
    resp, t = _good()
    a, b = tmp_path / "a.npz", tmp_path / "b.npz"
    np.savez(a, response=resp[0], time=t, channel=np.array(["x", "y"]))
    np.savez(b, response=resp[0], time=t, channel=np.array(["x", "z"]))
    with pytest.raises(RecordError, match=r"b\.npz: channels \['x', 'z'\] differ"):
        open_records([a, b])


def test_list_with_different_times_names_the_file(tmp_path):
    resp, t = _good()
    a, b = tmp_path / "a.npz", tmp_path / "b.npz"
    np.savez(a, response=resp[0], sample_rate=FS)
    np.savez(b, response=resp[0], sample_rate=2 * FS)
    with pytest.raises(RecordError, match=r"b\.npz: times .* differ from"):
        open_records([a, b])


def test_list_with_multi_hit_file(tmp_path):
    resp, t = _good(n_hit=2)
    a = tmp_path / "a.npz"
    np.savez(a, response=resp, time=t)
    with pytest.raises(RecordError, match=r"a\.npz: holds 2 hits"):
        open_records([a, a])


def test_empty_list():
    with pytest.raises(RecordError, match="empty list"):
        open_records([])


# ----------------------------------------------------------------------------- writing


def test_save_rejects_invalid_records(tmp_path):
    resp, t = _good()
    ds = records_from_arrays(resp, FS).rename({"response": "resp"})
    with pytest.raises(RecordError, match=r"out\.nc: no variable named 'response'"):
        save_records(ds, tmp_path / "out.nc")
    assert not (tmp_path / "out.nc").exists()


def test_save_rejects_boolean_attribute(tmp_path):
    resp, t = _good()
    ds = records_from_arrays(resp, FS, attrs={"checked": True})
    with pytest.raises(RecordError, match="attribute 'checked' is a boolean"):
        save_records(ds, tmp_path / "out.nc")
    assert list(tmp_path.iterdir()) == []  # nothing written, no temporary file left


def test_save_rejects_other_suffix_and_missing_folder(tmp_path):
    ds = records_from_arrays(_good()[0], FS)
    with pytest.raises(RecordError, match=r"must end in '\.nc'"):
        save_records(ds, tmp_path / "out.h5")
    with pytest.raises(RecordError, match="does not exist"):
        save_records(ds, tmp_path / "no" / "out.nc")


def test_save_keeps_old_file_when_write_fails(tmp_path):
    target = tmp_path / "out.nc"
    target.write_bytes(b"previous")
    ds = records_from_arrays(_good()[0], FS, attrs={"bad": {"a": 1}})
    with pytest.raises(RecordError, match="cannot be stored in netCDF"):
        save_records(ds, target)
    assert target.read_bytes() == b"previous"


# ----------------------------------------------------------------------------- segmentation


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"response": np.zeros((1, 2, 100))}, r"shape \(channel, time\)"),
        ({"force": np.zeros(50)}, r"`force` must have shape \(time,\)"),
        ({"force": np.zeros(1000)}, "zero throughout"),
        ({"trigger": 1.5}, "`trigger` must be in"),
        ({"record_s": -1.0}, "`record_s` must be a positive"),
        ({"pretrigger_s": 0.5}, "shorter than `record_s`"),
        ({"response": np.full((1, 1000), np.nan)}, "channel 'ch1' has a NaN or Inf at sample 0"),
        ({"record_s": 2.0, "pretrigger_s": 0.1}, "no complete record"),
    ],
)
@pytest.mark.filterwarnings("ignore:segment_recording. dropped")
def test_segmentation_errors(kwargs, match):
    args = {
        "response": np.r_[np.zeros(500), np.ones(500)][None, :],
        "sample_rate": 1000.0,
        "record_s": 0.2,
    }
    args.update(kwargs)
    response = args.pop("response")
    fs = args.pop("sample_rate")
    with pytest.raises(RecordError, match=match) as info:
        segment_recording(response, fs, **args)
    assert "\n" not in str(info.value)


def test_messages_are_one_line_even_for_multiline_causes(tmp_path):
    path = tmp_path / "bad.nc"
    path.write_bytes(b"CDF\x01" + b"\xff" * 30)
    msg = _raises(path, "damaged or incomplete")
    assert re.fullmatch(r"[^\n]+", msg)


def test_unknown_type_lists_the_formats_with_a_did_you_mean(tmp_path):
    path = tmp_path / "records.wave"
    path.write_bytes(b"RIFF")
    msg = _raises(path, r"unknown file type '\.wave'")
    assert "netCDF (.nc), CSV (.csv, .txt), WAV (.wav), npz (.npz)" in msg
    assert msg.endswith("Did you mean '.wav'?")


def test_list_with_per_hit_coord_in_one_file_only(tmp_path):
    resp, t = _good()
    a, b = tmp_path / "a.npz", tmp_path / "b.npz"
    np.savez(a, response=resp[0], time=t, excitation_node=np.array(["n1"]))
    np.savez(b, response=resp[0], time=t)
    with pytest.raises(RecordError, match=r"b\.npz: coordinate 'excitation_node' differs"):
        open_records([a, b])


def test_list_with_different_further_variables_names_the_file(tmp_path):
    resp, t = _good()
    base = records_from_arrays(resp, FS)
    a = save_records(base.assign(gain=("channel", [1.0, 2.0])), tmp_path / "a.nc")
    b = save_records(base, tmp_path / "b.nc")
    c = save_records(base.assign(gain=("channel", [1.0, 3.0])), tmp_path / "c.nc")
    with pytest.raises(RecordError, match=r"b\.nc: further variables \[\] differ from \['gain'\]"):
        open_records([a, b])
    with pytest.raises(RecordError, match=r"c\.nc: variable 'gain' differs from .*a\.nc"):
        open_records([a, c])
