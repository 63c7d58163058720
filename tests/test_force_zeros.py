"""Force all zeros (issue 10): the force channel unplugged.

The hit check says there is no hammer pulse and rejects every hit by default; the CLI
ends with one line naming the records file, in bounded time; a fit of such hits (accepted
by hand) never reaches into the pre-trigger and finds the generated modes.

Truth: the records are closed-form decays x(t) = exp(-sigma t) sin(w_d t) of our own, whose
natural frequency is f_n = sqrt(w_d^2 + sigma^2) / (2 pi) (single-degree-of-freedom
relation, e.g. Inman, Engineering Vibration, the underdamped response).
"""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest

from modalnb import check_hits, fit_modes
from modalnb.io import save_records
from modalnb.records import records_from_arrays

FS = 2048.0
MODES = ((11.0, 3.0), (30.0, 5.0))  # damped frequency (Hz), decay rate sigma (1/s)


def _zero_force_records():
    t = np.arange(-256, 4096) / FS
    rng = np.random.default_rng(0)
    x = sum(np.exp(-s * t) * np.sin(2 * np.pi * fd * t) for fd, s in MODES)
    x = np.where(t >= 0, x, 0.0)
    resp = np.stack([[x, -0.6 * x]] * 3) + 1e-4 * rng.standard_normal((3, 2, t.size))
    return records_from_arrays(resp, FS, force=np.zeros((3, t.size)), t0=t[0])


def test_check_hits_rejects_every_hit_saying_no_pulse():
    out = check_hits(_zero_force_records())
    assert not out["accepted"].values.any()
    assert all(str(r).startswith("no pulse (force record flat") for r in out["reason"].values)
    assert out["force_flat"].values.all()
    assert "no pulse" in out.attrs["reject"]


def test_cli_fit_is_one_line_naming_the_file(tmp_path):
    path = save_records(_zero_force_records(), tmp_path / "unplugged.nc")
    proc = subprocess.run(
        [sys.executable, "-m", "modalnb.cli", "fit", str(path), "--out", str(tmp_path / "out"),
         "--quiet"],
        capture_output=True, text=True, timeout=300,  # a hang guard, not a speed check
    )
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert "unplugged.nc" in lines[0] and "no pulse" in lines[0] and "rejected" in lines[0]
    assert "Traceback" not in proc.stderr
    assert not (tmp_path / "out").exists()


def test_fit_of_accepted_flat_force_hits_starts_at_the_trigger():
    ds = _zero_force_records()
    res = fit_modes(ds, accept={1: True, 2: True, 3: True})
    assert res.attrs["window"][0] >= 0.0  # never in the pre-trigger
    truth = [math.hypot(2 * np.pi * fd, s) / (2 * np.pi) for fd, s in MODES]
    assert res.sizes["mode"] == len(truth)
    np.testing.assert_allclose(np.sort(res["frequency_hz"].values), truth, rtol=1e-3)
    # no force to normalise by: residues stay in response units
    assert res["residue_real"].attrs["units"] == ds["response"].attrs["units"]


@pytest.mark.parametrize("start", [-0.05, 0.0])
def test_engine_default_window_never_before_t0_with_a_pulse_before_the_trigger(start):
    """A real pulse that starts before t = 0 (a late trigger): the window still starts at
    t >= 0 and after the pulse."""
    from modalnb.estimate import SharedPoleFit

    t = np.arange(-256, 4096) / FS
    tp = t - start
    x = sum(np.exp(-s * tp) * np.sin(2 * np.pi * fd * tp) for fd, s in MODES)
    x = np.where(tp >= 0, x, 0.0) + 1e-4 * np.random.default_rng(1).standard_normal(t.size)
    f = np.where((tp >= 0) & (tp < 2e-3), np.sin(np.pi * tp / 2e-3), 0.0)
    est = SharedPoleFit().fit(records_from_arrays(x, FS, force=f, t0=t[0]))
    assert est.window_[0] >= max(0.0, start + 2e-3)
