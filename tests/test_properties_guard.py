"""Property tests: random shapes, scales, dtypes and NaN/Inf patterns through the readers,
check_hits, fit_modes and the recipe reader give a result or one of our errors, nothing else.

The property is the README's promise (bad input -> one line, a ModalnbError), so any
other exception fails a test; what does come back is checked for its layout. Examples
are few (a few dozen each; MODALNB_HYPOTHESIS_EXAMPLES raises them for a longer hunt) and
fit_modes sees tiny records; no deadline (the time of an example is not the property).
"""

from __future__ import annotations

import json
import os
import tempfile
import warnings
from pathlib import Path

import numpy as np
import xarray as xr
from hypothesis import HealthCheck, event, example, given, settings
from hypothesis import strategies as st

from modalnb import ModalnbError, Recipe, RecipeError, check_hits, fit_modes, open_records
from modalnb._errors import RecordError
from modalnb.checks import THRESHOLDS
from modalnb.records import records_from_arrays, validate_records

N = int(os.environ.get("MODALNB_HYPOTHESIS_EXAMPLES", "30"))
# derandomize: CI runs the same examples every time (a failure is a regression, not luck)
SETTINGS = settings(max_examples=N, deadline=None, database=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
DTYPES = ["float64", "float32", "float16", "int32", "int16", "uint8"]
PATTERNS = ["none"] * 6 + ["nan sample", "inf sample", "-inf channel", "nan hit", "all nan", "zeros",
            "constant"]


_ALL_SCALES = st.integers(-300, 300)


@st.composite
def signals(draw, max_hits=3, max_channels=3, min_time=8, max_time=400, force=None,
            scales=_ALL_SCALES):
    """(response, force or None, sample rate, t0): decays plus noise after a pre-trigger and
    a hammer pulse, at a random scale (a power of ten), cast to a random dtype, with a
    random NaN/Inf pattern."""
    h = draw(st.integers(1, max_hits))
    c = draw(st.integers(1, max_channels))
    n = draw(st.integers(min_time, max_time))
    fs = draw(st.sampled_from([64.0, 1000.0, 51200.0]))
    scale = 10.0 ** draw(st.sampled_from([0, 0, 0, 3, -3]) | scales)
    dtype = draw(st.sampled_from(["float64"] * 3 + DTYPES))
    pattern = draw(st.sampled_from(PATTERNS))
    rng = np.random.default_rng(draw(st.integers(0, 2**31)))
    pre = n // 8  # pre-trigger samples, then the hammer pulse, then the ring-down
    t = (np.arange(n) - pre) / fs
    f0 = fs * draw(st.sampled_from([0.05, 0.1, 0.2]) | st.floats(0.01, 0.45))
    y = np.where(t >= 0, np.exp(-draw(st.sampled_from([5.0]) | st.floats(0.0, 50.0)) * np.clip(t, 0, None))
                 * np.sin(2 * np.pi * f0 * t), 0.0)
    noise = draw(st.sampled_from([1e-3, 1e-2]) | st.floats(0.0, 0.5))
    resp = y * rng.uniform(-1, 1, (h, c, 1)) + noise * rng.standard_normal((h, c, n))
    with np.errstate(over="ignore", invalid="ignore"):
        resp = resp * scale
        if dtype.startswith(("int", "uint")):
            info = np.iinfo(dtype)
            resp = np.clip(np.nan_to_num(resp), info.min, info.max)
        resp = resp.astype(dtype)
    if pattern != "none" and resp.dtype.kind == "f":
        if pattern == "nan sample":
            resp[0, 0, n // 2] = np.nan
        elif pattern == "inf sample":
            resp[-1, -1, 0] = np.inf
        elif pattern == "-inf channel":
            resp[:, 0, :] = -np.inf
        elif pattern == "nan hit":
            resp[0] = np.nan
        elif pattern == "all nan":
            resp[:] = np.nan
    if pattern == "zeros":
        resp[:] = 0
    elif pattern == "constant":
        resp[:] = resp.flat[0] if np.isfinite(resp.flat[0]) else 1
    with_force = draw(st.booleans()) if force is None else force
    f = None
    if with_force:
        k = max(1, n // 50)
        pulse = np.zeros(n)
        pulse[pre:pre + k] = np.sin(np.pi * (np.arange(k) + 0.5) / k)
        f = np.tile(pulse, (h, 1)) * 10.0 ** draw(st.sampled_from([0, 0, 2]) | st.integers(-300, 300))
        if draw(st.integers(0, 3)) == 0:
            f[0, draw(st.integers(0, n - 1))] = draw(st.sampled_from([np.nan, np.inf, 0.0]))
    return resp, f, fs, float(t[0])


def _clean() -> tuple[np.ndarray, float]:
    """One clean ring-down (100 Hz, 1000 S/s, 2 channels) for explicit examples."""
    t = (np.arange(160) - 20) / 1000.0
    y = np.where(t >= 0, np.exp(-5 * np.clip(t, 0, None)) * np.sin(2 * np.pi * 100 * t), 0.0)
    noise = 1e-2 * np.random.default_rng(0).standard_normal((1, 2, t.size))
    return y * np.ones((1, 2, 1)) + noise, float(t[0])


_CLEAN = _clean()


def _layout(ds: xr.Dataset) -> None:
    validate_records(ds)
    assert ds["response"].dims == ("hit", "channel", "time")


def _build(resp, f, fs, t0):
    try:
        return records_from_arrays(resp, fs, force=f, t0=t0)
    except RecordError:
        event("records refused")
        return None


# --- the readers ---------------------------------------------------------------------------
@SETTINGS
@given(sig=signals(), fmt=st.sampled_from(["npz", "nc", "wav"]))
def test_readers_give_records_or_a_record_error(sig, fmt):
    resp, f, fs, t0 = sig
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"r.{fmt}"
        options = {}
        if fmt == "npz":  # writer: numpy.savez
            np.savez(path, response=resp, sample_rate=fs, **({} if f is None else {"force": f}))
        elif fmt == "nc":  # writer: xarray's netCDF writer, our layout, raw values
            data = {"response": (("hit", "channel", "time"), resp)}
            if f is not None:
                data["force"] = (("hit", "time"), f)
            xr.Dataset(data, coords={"time": t0 + np.arange(resp.shape[-1]) / fs,
                                     "hit": np.arange(1, resp.shape[0] + 1),
                                     "channel": [f"c{i}" for i in range(resp.shape[1])]},
                       attrs={"sample_rate": fs}).to_netcdf(path, engine="h5netcdf")
        else:  # writer: scipy.io.wavfile (one hit, channels as WAV channels)
            from scipy.io import wavfile

            if resp.dtype.name == "float16":
                resp = resp.astype("float32")
            wavfile.write(path, int(fs), np.ascontiguousarray(resp[0].T))
            options = {"calibration": 1.0}
        try:
            ds = open_records(path, **options)
        except RecordError as exc:
            assert "\n" not in str(exc) and str(exc).startswith(str(path))
            event("reader: RecordError")
            return
        event("reader: records")
        _layout(ds)


# --- check_hits ---------------------------------------------------------------------------
_NAMES = st.sampled_from([t.name for t in THRESHOLDS] + ["no_such", "clip_levl", "reject"])
_VALUES = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-5, 10),
                    st.booleans(), st.text(max_size=3), st.none(), st.lists(st.integers(), max_size=2))


@SETTINGS
@given(sig=signals(), kwargs=st.dictionaries(_NAMES, _VALUES, max_size=2),
       band=st.none() | st.tuples(st.floats(-1, 1e5), st.floats(-1, 1e5)))
def test_check_hits_gives_a_result_or_our_error(sig, kwargs, band):
    ds = _build(*sig)
    if ds is None:
        return
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # warnings are the scale helper's item
            out = check_hits(ds, band=band, **kwargs)
    except ModalnbError as exc:
        assert "\n" not in str(exc)
        event(f"check_hits: {type(exc).__name__}")
        return
    event("check_hits: result")
    assert out.sizes["hit"] == ds.sizes["hit"] and out.sizes["channel"] == ds.sizes["channel"]
    assert out["accepted"].dtype == bool


# --- fit_modes on tiny records ------------------------------------------------------------
def _fit_or_our_error(sig, n_modes, window, accept_all):
    ds = _build(*sig)
    if ds is None:
        return
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # leaking warnings are the extreme-scales item
            accept = [True] * ds.sizes["hit"] if accept_all else None  # past the hit checks
            table = fit_modes(ds, n_modes=n_modes, window=window, scatter=False, accept=accept)
    except ModalnbError as exc:
        assert "\n" not in str(exc)
        event(f"fit_modes: {type(exc).__name__}")
        return
    event("fit_modes: table")
    assert np.all(np.isfinite(table["frequency_hz"].values))
    assert np.all(table["frequency_hz"].values > 0)


_TINY = {"max_hits": 2, "max_channels": 2, "min_time": 16, "max_time": 160}
_FIT_OPTIONS = {
    "n_modes": st.none() | st.integers(1, 3),
    "window": st.none() | st.none() | st.tuples(st.floats(-1, 3), st.floats(-1, 3)),
    "accept_all": st.booleans(),
}


@settings(SETTINGS, max_examples=max(N // 2, 10))
@given(sig=signals(**_TINY, scales=st.integers(-100, 100)), **_FIT_OPTIONS)
@example(sig=(_CLEAN[0], None, 1000.0, _CLEAN[1]), n_modes=None, window=None, accept_all=True)
@example(sig=((1e-30 * _CLEAN[0]).astype("float32"), None, 1000.0, _CLEAN[1]), n_modes=1,
         window=None, accept_all=True)
def test_fit_modes_gives_a_table_or_our_error(sig, n_modes, window, accept_all):
    _fit_or_our_error(sig, n_modes, window, accept_all)


@settings(SETTINGS, max_examples=max(N // 3, 8))
@given(sig=signals(**_TINY, scales=st.sampled_from([-300, -200, 200, 300])), **_FIT_OPTIONS)
@example(sig=(1e-300 * _CLEAN[0], None, 1000.0, _CLEAN[1]), n_modes=None, window=None,
         accept_all=True)
def test_fit_modes_at_extreme_scales_gives_a_table_or_our_error(sig, n_modes, window, accept_all):
    _fit_or_our_error(sig, n_modes, window, accept_all)


# --- the recipe reader ----------------------------------------------------------------------
_JSON = st.recursive(
    st.none() | st.booleans() | st.integers(-10**20, 10**20) | st.floats() | st.text(max_size=5),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner, max_size=3),
    max_leaves=6,
)
_FIELDS = st.sampled_from(["band", "window", "n_modes", "add_modes", "drop_modes", "hit_overrides",
                           "check_thresholds", "correct_exponential_window", "records_checksum",
                           "replayed_on_checksum", "source", "notes", "created_with", "bnad"])


@SETTINGS
@given(body=st.dictionaries(_FIELDS, _JSON, max_size=4))
def test_recipe_reader_gives_a_recipe_or_a_recipe_error(body):
    text = json.dumps({"format": "modalnb-recipe", "version": 1, **body})  # may hold NaN/Infinity
    try:
        recipe = Recipe.from_json(text, source="r.json")
    except RecipeError as exc:
        assert "\n" not in str(exc) and str(exc).startswith("r.json: ")
        event("recipe: RecipeError")
        return
    event("recipe: read")
    again = recipe.to_json()
    json.loads(again, parse_constant=lambda c: (_ for _ in ()).throw(AssertionError(c)))
    assert Recipe.from_json(again) == recipe
