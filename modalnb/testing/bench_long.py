"""Long records at high rates: time against record length, peak memory, partial recovery.

Part of ``modalnb bench`` (section "Long records at high rates"). Every record is of our
own (:mod:`modalnb.testing.scenarios`: the struck object, and a lumped-mass chain
campaign); every figure is measured in this run. Times are CPU seconds of this process
(``time.process_time``; the fit keeps BLAS at one thread), so a busy machine does not
distort the ratios:

* time ratios: one hit x one channel of the struck object at 51.2 kHz, ``T`` = 2**18
  samples (quick: 2**17), then 2T and 4T; and the 2,000,000-sample record (full run) —
  the engine (:class:`modalnb.estimate.SharedPoleFit`, every hit accepted) plus the
  cross-checks, as :func:`modalnb.fit_modes` runs them;
* peak memory over the data's size: :func:`modalnb.fit_modes` on a chain campaign of 32
  channels x 8 hits x 65,536 samples (quick: 8 x 4), traced by :mod:`tracemalloc` (numpy
  reports its buffers to it), the records' arrays counted as the data;
* partial recovery: the generating partials of each campaign of
  :data:`~modalnb.testing.scenarios.LONG_SUITE` (quick: the first two) found within
  0.05 % in frequency, and the modes found that match none.
"""

from __future__ import annotations

import time
import tracemalloc
from typing import Any

import numpy as np

#: A partial is recovered when a fitted mode lies within this fraction of its frequency.
RECOVERY_TOL = 5e-4

#: The record length the issue names (1 hit x 1 channel at 51.2 kHz).
LONG_SAMPLES = 2_000_000

#: Target time of the 2,000,000-sample fit (s) and of peak memory over the data size.
TARGET_LONG_S = 60.0
TARGET_MEMORY_RATIO = 4.0


def _struck_records(n: int, fs: float = 51200.0, n_channels: int = 1, seed: int = 7) -> Any:
    from ..records import records_from_arrays
    from .scenarios import StruckObject, struck_object

    obj = StruckObject(sample_rate=fs, duration_s=n / fs, n_channels=n_channels, seed=seed)
    x, truth = struck_object(obj)
    return records_from_arrays(x, fs, units="Pa"), truth


def _engine_fit(rec: Any, band: tuple[float, float] | None = None) -> tuple[Any, float]:
    from ..estimate import SharedPoleFit, with_cross_checks

    t0 = time.process_time()
    res = with_cross_checks(rec, SharedPoleFit(band=band).fit(rec).result_)
    return res, time.process_time() - t0


def _recovery(found: np.ndarray, truth: np.ndarray) -> tuple[int, int]:
    """(partials matched one-to-one within RECOVERY_TOL, fitted modes matching none)."""
    left = list(np.sort(np.asarray(found, float)))
    hit = 0
    for f in np.sort(np.asarray(truth, float)):
        if not left:
            break
        j = int(np.argmin(np.abs(np.array(left) - f)))
        if abs(left[j] - f) <= RECOVERY_TOL * f:
            hit += 1
            left.pop(j)
    return hit, len(left)


def _memory_case(quick: bool) -> dict[str, Any]:
    from ..fitting import fit_modes
    from .scenarios import Scenario, campaign

    n_ch, n_hit = (8, 4) if quick else (32, 8)
    sc = Scenario(name="long-chain", n_masses=32, n_channels=n_ch, n_hits=n_hit,
                  sample_rate=16384.0, n_samples=65536, f_top_hz=9000.0, seed=21)
    rec, truth = campaign(sc)
    data_bytes = int(sum(np.asarray(rec[v].values).nbytes for v in rec.data_vars))
    tracemalloc.start()
    t0 = time.process_time()
    try:
        res = fit_modes(rec, band=sc.band)
        elapsed = time.process_time() - t0
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    hit, extra = _recovery(res["frequency_hz"].values, truth["frequency_hz"])
    return {"channels": n_ch, "hits": n_hit, "samples": 65536, "data_mb": data_bytes / 1e6,
            "peak_mb": peak / 1e6, "peak_over_data": peak / data_bytes, "time_s": elapsed,
            "modes_true": int(len(truth["frequency_hz"])), "modes_matched": hit,
            "modes_extra": extra}


def run_long_bench(quick: bool = False) -> dict[str, Any]:
    """The long-record figures (see the module docstring) as JSON-safe dicts.

    Examples
    --------
    >>> res = run_long_bench(quick=True)  # doctest: +SKIP
    >>> sorted(res)  # doctest: +SKIP
    ['long_record', 'memory', 'quick', 'recovery', 'scaling', 'targets']
    """
    from .scenarios import LONG_SUITE, struck_object

    n0 = 2**17 if quick else 2**18
    times = []
    for k in (1, 2, 4):
        rec, _ = _struck_records(k * n0)
        _, dt = _engine_fit(rec)
        times.append(dt)
    scaling = {"samples": [n0, 2 * n0, 4 * n0], "time_s": times,
               "ratio_2T": times[1] / times[0], "ratio_4T": times[2] / times[0]}
    long_record = None
    if not quick:
        rec, truth = _struck_records(LONG_SAMPLES)
        res, dt = _engine_fit(rec)
        hit, extra = _recovery(res["frequency_hz"].values, truth["frequency_hz"])
        long_record = {"samples": LONG_SAMPLES, "sample_rate": 51200.0, "time_s": dt,
                       "partials": int(truth["frequency_hz"].size), "matched": hit,
                       "extra": extra}
        del rec, res
    memory = _memory_case(quick)
    recovery = []
    from ..records import records_from_arrays

    for obj in (LONG_SUITE[:2] if quick else LONG_SUITE):
        x, truth = struck_object(obj)
        rec = records_from_arrays(x, obj.sample_rate, units="Pa")
        band = (1000.0, min(8000.0, 0.45 * obj.sample_rate))
        res, dt = _engine_fit(rec, band)
        hit, extra = _recovery(res["frequency_hz"].values, truth["frequency_hz"])
        recovery.append({"name": obj.name, "sample_rate": obj.sample_rate,
                         "duration_s": obj.duration_s, "channels": obj.n_channels,
                         "partials": int(truth["frequency_hz"].size), "matched": hit,
                         "extra": extra, "time_s": dt})
    return {"quick": bool(quick), "scaling": scaling, "long_record": long_record,
            "memory": memory, "recovery": recovery,
            "targets": {"long_record_s": TARGET_LONG_S, "peak_over_data": TARGET_MEMORY_RATIO}}


def format_long_bench(res: dict[str, Any]) -> list[str]:
    """Lines of the section "Long records at high rates" of ``modalnb bench``.

    Examples
    --------
    >>> res = run_long_bench(quick=True)  # doctest: +SKIP
    >>> print("\\n".join(format_long_bench(res)))  # doctest: +SKIP
    """
    sc = res["scaling"]
    lines = ["Long records at high rates (struck object of our own, 51.2 kHz, 1 channel; "
             "engine + cross-checks)"]
    lines.append("  samples   " + "  ".join(f"{n:>9,d}" for n in sc["samples"]))
    lines.append("  CPU [s]   " + "  ".join(f"{t:>9.1f}" for t in sc["time_s"]))
    lines.append(f"  time ratio 2T/T {sc['ratio_2T']:.2f}, 4T/T {sc['ratio_4T']:.2f} "
                 "(linear: 2 and 4)")
    lr = res.get("long_record")
    if lr:
        ok = "PASS" if lr["time_s"] < res["targets"]["long_record_s"] else "FAIL"
        lines.append(f"  {lr['samples']:,d} samples: {lr['time_s']:.1f} CPU s (target < "
                     f"{res['targets']['long_record_s']:.0f} s) {ok}; partials "
                     f"{lr['matched']}/{lr['partials']} within 0.05 %, {lr['extra']} extra")
    else:
        lines.append(f"  {LONG_SAMPLES:,d} samples: n/a (full run only)")
    m = res["memory"]
    ok = "PASS" if m["peak_over_data"] <= res["targets"]["peak_over_data"] else "FAIL"
    lines.append(f"  memory: fit_modes of {m['channels']} ch x {m['hits']} hits x "
                 f"{m['samples']:,d} samples ({m['data_mb']:.0f} MB): peak {m['peak_mb']:.0f} MB"
                 f" = {m['peak_over_data']:.1f}x the data (target <= "
                 f"{res['targets']['peak_over_data']:.0f}x) {ok}; {m['time_s']:.1f} CPU s; modes "
                 f"{m['modes_matched']}/{m['modes_true']} within 0.05 %, {m['modes_extra']} extra")
    lines.append(f"  {'campaign':<20}{'rate':>8} {'T [s]':>6} {'ch':>3} {'partials':>9} "
                 f"{'extra':>6} {'CPU [s]':>9}")
    for r in res["recovery"]:
        lines.append(f"  {r['name']:<20}{r['sample_rate'] / 1000:>7.1f}k {r['duration_s']:>6.1f} "
                     f"{r['channels']:>3} {r['matched']:>4}/{r['partials']:<4} {r['extra']:>6} "
                     f"{r['time_s']:>9.1f}")
    return lines
