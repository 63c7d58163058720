"""Export contract of the modal table (issue 4 §2), read back with independent readers."""

from __future__ import annotations

import csv
import json
import re

import numpy as np
import pytest
import xarray as xr
from gum_rounding import gum_pm

from modalnb.export import (
    HIT_COLUMNS,
    MODE_COLUMNS,
    SHAPE_COLUMNS,
    format_modal_table,
    write_modal_table,
)
from modalnb.recipe import Recipe


def _result() -> xr.Dataset:
    rng = np.random.default_rng(3)
    modes, channels, hits = [1, 2], ["tip", "mid", "<script>alert(1)</script>"], [1, 2, 3]
    return xr.Dataset(
        {
            "frequency_hz": ("mode", [12.345678901234, 80.5]),
            "damping_ratio": ("mode", [0.0123, 1.2]),
            "frequency_hz_std": ("mode", [1e-3, 0.4]),
            "damping_ratio_std": ("mode", [2e-4, 0.05]),
            "regime": ("mode", ["underdamped", "overdamped"]),
            "status": ("mode", ["ok", "no damped frequency: overdamped"]),
            "damped_frequency_hz": ("mode", [12.3447, np.nan]),
            "shape_amplitude": (("mode", "channel"), rng.random((2, 3))),
            "shape_phase_deg": (("mode", "channel"), rng.uniform(-179, 180, (2, 3))),
            "residue_real": (("mode", "channel"), rng.standard_normal((2, 3))),
            "hit_residue_real": (("mode", "hit", "channel"), rng.standard_normal((2, 3, 3))),
            "hit_accepted": ("hit", [True, False, True]),
            "hit_reason": ("hit", ["", "double hit", ""]),
            "hit_warnings": ("hit", ["", "", "low signal-to-noise"]),
        },
        coords={"mode": modes, "channel": np.array(channels, dtype=object), "hit": hits},
        attrs={"modalnb_version": "0.1.0", "settings": {"band": [1.0, 100.0]}},
    )


def test_files_columns_and_values(tmp_path):
    res = _result()
    files = write_modal_table(res, tmp_path / "out", recipe=Recipe(n_modes=2))
    assert sorted(files) == sorted(["modes.csv", "shapes.csv", "hits.csv", "node_shapes.csv", "poles_set_aside.csv", "modes.nc", "modes.json", "recipe.json"])
    # Python's csv module as the independent reader
    with open(tmp_path / "out" / "modes.csv", newline="") as fh:
        rows = list(csv.reader(fh))
    assert tuple(rows[0][: len(MODE_COLUMNS)]) == MODE_COLUMNS
    assert "status" in rows[0] and "damped_frequency_hz" in rows[0]
    col = {c: i for i, c in enumerate(rows[0])}
    assert float(rows[1][col["frequency_hz"]]) == res["frequency_hz"].values[0]  # exact round trip
    assert rows[2][col["regime"]] == "overdamped"
    assert rows[2][col["damped_frequency_hz"]] == "nan"
    with open(tmp_path / "out" / "shapes.csv", newline="") as fh:
        srows = list(csv.DictReader(fh))
    assert tuple(list(srows[0])[: len(SHAPE_COLUMNS)]) == SHAPE_COLUMNS
    assert len(srows) == 6 and srows[2]["channel"] == "<script>alert(1)</script>"
    assert float(srows[4]["amplitude"]) == res["shape_amplitude"].values[1, 1]
    with open(tmp_path / "out" / "hits.csv", newline="") as fh:
        hrows = list(csv.reader(fh))
    assert tuple(hrows[0]) == HIT_COLUMNS
    assert [r[1] for r in hrows[1:]] == ["true", "false", "true"]
    assert hrows[2][2] == "double hit" and hrows[3][3] == "low signal-to-noise"
    # plain xarray (h5netcdf engine) as the independent netCDF reader
    with xr.open_dataset(tmp_path / "out" / "modes.nc", engine="h5netcdf") as nc:
        np.testing.assert_array_equal(nc["frequency_hz"].values, res["frequency_hz"].values)
        np.testing.assert_array_equal(nc["shape_phase_deg"].values, res["shape_phase_deg"].values)
        assert nc["hit_accepted"].values.tolist() == [True, False, True]
        assert json.loads(nc.attrs["settings"]) == {"band": [1.0, 100.0]}
    data = json.loads((tmp_path / "out" / "modes.json").read_text())
    assert data["modes"][0]["frequency_hz"] == res["frequency_hz"].values[0]
    assert data["modes"][1]["damped_frequency_hz"] is None  # NaN -> null (JSON has no NaN)
    assert "not a certification" in data["caution"]
    assert json.loads((tmp_path / "out" / "recipe.json").read_text())["n_modes"] == 2


def test_interrupted_write_keeps_old_files(tmp_path, monkeypatch):
    out = tmp_path / "out"
    write_modal_table(_result(), out)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    changed = _result().assign(frequency_hz=("mode", [99.0, 100.0]))

    def boom(*args, **kwargs):
        raise KeyboardInterrupt  # as if the user pressed Ctrl-C while the netCDF was written

    monkeypatch.setattr(xr.Dataset, "to_netcdf", boom)
    with pytest.raises(KeyboardInterrupt):
        write_modal_table(changed, out)
    after = {p.name: p.read_bytes() for p in out.iterdir()}
    assert after == before  # old files intact, no temporary files left behind


def test_terminal_table_aligned_with_units():
    res = _result()
    text = format_modal_table(res)
    lines = text.splitlines()
    assert "f_n [Hz]" in lines[0] and "damping [%]" in lines[0]
    assert len(lines) == 3
    # each value ± u rounded per GUM 7.2.6, computed here from the raw numbers (tests/gum_rounding.py)
    for k, line in enumerate(lines[1:]):
        f = gum_pm(res["frequency_hz"].values[k], res["frequency_hz_std"].values[k])
        z = gum_pm(res["damping_ratio"].values[k], res["damping_ratio_std"].values[k], scale=100)
        assert f in line and z in line
    assert "12.3457 ± 0.0010" in lines[1]  # by hand: u = 0.0010 Hz, value to 4 decimals
    assert not re.search(r"\de[+-]?\d", text)  # no e-notation
    # columns line up: every row starts its regime at the same offset
    assert len({line.index(w) for line, w in zip(lines[1:], ["underdamped", "overdamped"], strict=True)}) == 1


def test_frf_nc_written_with_the_table_when_the_records_carry_force(tmp_path):
    """frf.nc beside the table files: read back by the netCDF-C library's reader (netCDF4),
    not by xarray, and compared with modalnb.frf / synthesise_frf of the same records."""
    netCDF4 = pytest.importorskip("netCDF4")
    import modalnb
    from modalnb.demo import load_demo

    ds = load_demo()
    table = modalnb.fit_modes(ds)
    files = write_modal_table(table, tmp_path / "out", records=ds)
    assert "frf.nc" in files and files["frf.nc"].is_file()
    with netCDF4.Dataset(files["frf.nc"]) as nc:
        h = np.asarray(nc["frf_real"][:]) + 1j * np.asarray(nc["frf_imag"][:])
        g = np.asarray(nc["model_frf_real"][:]) + 1j * np.asarray(nc["model_frf_imag"][:])
        coh = np.asarray(nc["coherence"][:])
        assert tuple(nc["frf_real"].dimensions) == ("excitation", "channel", "frequency")
        excitation = list(nc["excitation"][:])
    measured = modalnb.frf(ds, accept=table)
    np.testing.assert_array_equal(h, measured["frf"].values)
    np.testing.assert_array_equal(coh, measured["coherence"].values)
    model = modalnb.synthesise_frf(table, measured, excitation=excitation[0])
    np.testing.assert_array_equal(g, model["frf"].values)
    # records without force: no FRF, no frf.nc (and an old one does not survive the replace)
    files = write_modal_table(table, tmp_path / "out", records=ds.drop_vars("force"))
    assert "frf.nc" not in files and not (tmp_path / "out" / "frf.nc").exists()
