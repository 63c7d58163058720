"""Small record sets and a subprocess runner for the guard tests (tests/test_guard_*.py)."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np

from modalnb.records import records_from_arrays
from modalnb.testing.synth import free_decay

#: a generous hang guard for one subprocess (never a speed assertion)
HANG_GUARD_S = 300


def small_records(n_hits: int = 3, seed: int = 0, fs: float = 1024.0, gain: float = 1.0):
    """3 hits x 2 channels of closed-form free decay (25 Hz, 2 %) with a half-sine hammer
    pulse and a pre-trigger, 0.25 s before and 1.75 s after the trigger; converter full
    scale 2 (response peaks near 1.1)."""
    rng = np.random.default_rng(seed)
    t = np.arange(-256, 1792) / fs
    pulse = np.where((t >= 0) & (t < 4e-3), np.sin(np.pi * np.clip(t, 0, None) / 4e-3), 0.0)
    x = np.where(t >= 0, 1.0, 0.0) * np.stack([free_decay(np.clip(t, 0, None), 25.0, 0.02, a)
                                               for a in (1.0, -0.5)])
    resp = np.stack([gain * x * g for g in np.linspace(0.9, 1.1, n_hits)])
    resp = resp + 1e-3 * rng.standard_normal(resp.shape)
    force = np.stack([pulse * g for g in np.linspace(0.9, 1.1, n_hits)])
    return records_from_arrays(resp, fs, force=force, t0=float(t[0]),
                               attrs={"full_scale": 2.0 * gain})


def run_cli(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    """``python -m modalnb.cli ARGS`` in a fresh process."""
    env = {**os.environ, "PYTHONWARNINGS": "default"}
    return subprocess.run([sys.executable, "-m", "modalnb.cli", *args], cwd=cwd, env=env,
                          capture_output=True, text=True, timeout=HANG_GUARD_S)


def stderr_lines(proc: subprocess.CompletedProcess) -> list[str]:
    return [line for line in proc.stderr.splitlines() if line.strip()]
