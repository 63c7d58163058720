"""``modalnb bench --campaign``: scale figures of test campaigns (issue 11 §4).

Measured in one run on this machine, reported as ratios and slopes, never asserted:

* **speed-up**: the whole campaign (cluster start included) of the generated cast
  brackets (:func:`modalnb.demo.production_campaign`: 3 channels x 3 hits x 1 s at
  2048 Hz) on an embedded ``LocalCluster`` with 2 workers against 1 worker;
* **re-run**: the same 2-worker command again on unchanged inputs (every set read back
  from its folder, nothing refitted), as a fraction of the first run's time, and whether
  ``tracked_modes.csv`` came out byte for byte the same;
* **overhead per set**: the synchronous campaign (``workers=0``), which does per set what
  a worker does (read the records file, its checksum, :func:`modalnb.run_recipe`, write
  the set's ``modalnb fit`` files), plus the pairing and the summary files once, against
  bare :func:`modalnb.fit_modes` calls on the same records already in memory (BLAS
  single-threaded in both); "with files" is ``out=DIR``, "without files" ``out=None``
  (the records are still read). In wall time and in this process's CPU time (on a shared
  machine the wall time also counts waiting for the disk and for the other processes);
  and the CPU time of each step of one set's work;
* **peak memory per worker**: the largest resident set size (``ru_maxrss``) of each worker
  process after the 2-worker campaign;
* **scaling**: 1, 10, 100 and 1000 sets generated *inside* the workers (no disk), fitted on
  2 workers; wall time against the number of sets with a least-squares line (slope, i.e.
  seconds per set, intercept and R^2), and each worker's resident memory after each size.
"""

from __future__ import annotations

import os
import tempfile
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["run_campaign_bench", "format_campaign_bench", "synthetic_set_fit"]


def _rss_mb() -> float:
    """Current resident memory of this process (MB), from psutil (a dask dependency)."""
    import psutil

    return psutil.Process().memory_info().rss / 1e6


def _peak_rss_mb() -> float:
    import resource
    import sys

    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / 1e6 if sys.platform == "darwin" else peak / 1e3  # bytes on macOS, kB on Linux


def synthetic_set_fit(index: int, seed: int = 99) -> float:
    """Generate one bracket set in this process (no disk) and fit it; returns its first
    natural frequency (runs in a worker).

    Examples
    --------
    >>> 180 < synthetic_set_fit(1) < 200
    True
    """
    from threadpoolctl import threadpool_limits

    from ..demo import bracket_model, lumped_records
    from ..fitting import fit_modes

    rng = np.random.default_rng([seed, index])
    mdl = bracket_model(rng.uniform(0.99, 1.01, 6))
    rec = lumped_records(mdl, [0.0, 0.0, 1.0], seed=[seed, index, 1], channels=("lug", "web", "flange"))
    with threadpool_limits(1):
        table = fit_modes(rec)
    return float(table["frequency_hz"].values[0])


def _per_set_steps(paths: Sequence[Path], out: Path) -> dict[str, float]:
    """CPU time per set (ms, this process) of each step of a campaign set's work, as
    :func:`modalnb.campaign.fit_campaign` does it, next to a bare ``fit_modes``."""
    from threadpoolctl import threadpool_limits

    from ..campaign import _file_digest, _fit_set, _recipe_digest, _set_recipe_json
    from ..export import write_modal_table
    from ..fitting import fit_modes
    from ..io import open_records
    from ..pipeline import recipe_for, run_recipe
    from ..recipe import Recipe

    recipe_json = _set_recipe_json(Recipe(), None)
    steps = {"read records": 0.0, "run_recipe": 0.0, "write set files": 0.0,
             "checksums": 0.0, "fit_modes (bare)": 0.0, "whole set (_fit_set)": 0.0}

    def add(name: str, fn: Callable[[], Any]) -> Any:
        c0 = time.process_time()
        value = fn()
        steps[name] += time.process_time() - c0
        return value

    with threadpool_limits(1):
        for i, p in enumerate(paths):
            rec = add("read records", lambda p=p: open_records(p))
            recipe = recipe_for(rec, Recipe.from_json(recipe_json), source=str(p))
            table, checks = add("run_recipe", lambda rec=rec, recipe=recipe: run_recipe(rec, recipe))
            add("write set files", lambda i=i, t=table, r=recipe, c=checks:
                write_modal_table(t, out / f"a{i}", recipe=r, checks=c, durable=False))
            digests = add("checksums", lambda p=p: (_file_digest(p), _recipe_digest(recipe_json)))
            add("fit_modes (bare)", lambda rec=rec: fit_modes(rec))
            add("whole set (_fit_set)", lambda i=i, p=p, dg=digests:
                _fit_set(f"s{i}", str(p), recipe_json, str(out / f"b{i}"), dg))
    return {k: 1e3 * v / len(paths) for k, v in steps.items()}


def _timed(fn: Callable[[], Any]) -> tuple[float, Any]:
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def _line(n: Sequence[int], t: Sequence[float]) -> dict[str, float]:
    x, y = np.asarray(n, float), np.asarray(t, float)
    slope, intercept = np.polyfit(x, y, 1)
    pred = slope * x + intercept
    ss = float(np.sum((y - y.mean()) ** 2))
    r2 = 1.0 - float(np.sum((y - pred) ** 2)) / ss if ss > 0 else float("nan")
    return {"slope_s_per_set": float(slope), "intercept_s": float(intercept), "r2": r2}


def run_campaign_bench(*, n_sets: int = 40, sizes: Sequence[int] = (1, 10, 100, 1000),
                       progress: Callable[[str], None] | None = None) -> dict[str, Any]:
    """Run the campaign scale figures (see the module docstring); a plain dict of numbers.

    Parameters
    ----------
    n_sets : int
        Sets of the speed-up and overhead runs (default 40).
    sizes : sequence of int
        Numbers of in-worker generated sets of the scaling run.
    progress : callable, optional
        Called with a short text before each step.

    Examples
    --------
    >>> r = run_campaign_bench(n_sets=2, sizes=(1, 2))  # doctest: +SKIP
    """
    import dask
    from distributed import Client, LocalCluster
    from threadpoolctl import threadpool_limits

    from ..campaign import EMBEDDED_WORKER_CONFIG, fit_campaign
    from ..demo import production_campaign
    from ..fitting import fit_modes
    from ..io import open_records

    say = progress or (lambda _m: None)
    out: dict[str, Any] = {"n_sets": n_sets, "cpu_count": os.cpu_count()}
    with tempfile.TemporaryDirectory(prefix="modalnb-bench-campaign-") as tmp:
        d = Path(tmp)
        say(f"generating {n_sets} sets")
        manifest = production_campaign(d / "data", n_parts=n_sets)
        say("1 worker")
        t1, _ = _timed(lambda: fit_campaign(manifest, workers=1, out=d / "w1"))
        say("2 workers")
        t2, _ = _timed(lambda: fit_campaign(manifest, workers=2, out=d / "w2"))
        out.update(wall_1_worker_s=t1, wall_2_workers_s=t2, speedup_2_vs_1=t1 / t2)
        say("re-run on unchanged inputs")
        csv_first = (d / "w2" / "tracked_modes.csv").read_bytes()
        t_rerun, _ = _timed(lambda: fit_campaign(manifest, workers=2, out=d / "w2"))
        out.update(rerun_s=t_rerun, rerun_ratio=t_rerun / t2,
                   rerun_tracked_modes_identical=(d / "w2" / "tracked_modes.csv").read_bytes() == csv_first)
        paths = [d / "data" / "parts" / f"P{k:03d}.nc" for k in range(1, n_sets + 1)]
        say("bare fit_modes")
        recs = [open_records(p) for p in paths]
        fit_modes(recs[0])  # warm-up (imports, caches), as the campaign runs below are warm
        with threadpool_limits(1):  # as inside the campaign's fits
            c0 = time.process_time()
            t_bare, _ = _timed(lambda: [fit_modes(r) for r in recs])
            c_bare = time.process_time() - c0
        say("synchronous campaign")
        c0 = time.process_time()
        t_sync, _ = _timed(lambda: fit_campaign(manifest, workers=0, out=d / "w0"))
        c_sync = time.process_time() - c0
        c0 = time.process_time()
        t_nofiles, _ = _timed(lambda: fit_campaign(manifest, workers=0))
        c_nofiles = time.process_time() - c0
        out.update(bare_fit_modes_per_set_s=t_bare / n_sets, campaign_per_set_s=t_sync / n_sets,
                   campaign_per_set_without_files_s=t_nofiles / n_sets,
                   bare_fit_modes_cpu_per_set_s=c_bare / n_sets,
                   overhead_per_set=(t_sync - t_bare) / t_bare,
                   overhead_per_set_without_files=(t_nofiles - t_bare) / t_bare,
                   cpu_overhead_per_set=(c_sync - c_bare) / c_bare,
                   cpu_overhead_per_set_without_files=(c_nofiles - c_bare) / c_bare)
        say("per-set steps")
        out["per_set_cpu_ms"] = _per_set_steps(paths, d / "steps")
        say("peak memory per worker")
        with dask.config.set(EMBEDDED_WORKER_CONFIG), LocalCluster(
                n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
                silence_logs=40) as cluster, Client(cluster) as client:
            fit_campaign(manifest, scheduler=cluster.scheduler_address)
            peaks = client.run(_peak_rss_mb)
        out["peak_rss_per_worker_mb"] = sorted(float(v) for v in peaks.values())
    say("scaling")
    walls, mem = [], []
    with dask.config.set(EMBEDDED_WORKER_CONFIG), LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0",
            silence_logs=40) as cluster, Client(cluster) as client:
        client.run(synthetic_set_fit, 0)  # import and warm up every worker once
        base = 10_000
        for n in sizes:
            say(f"scaling: {n} sets")
            t, _ = _timed(lambda n=n, b=base: client.gather(client.map(synthetic_set_fit, range(b, b + n), pure=False)))
            base += n
            walls.append(t)
            mem.append(sorted(float(v) for v in client.run(_rss_mb).values()))
    out["scaling"] = {"sizes": list(sizes), "wall_s": walls, "worker_rss_mb": mem,
                      **(_line(sizes, walls) if len(sizes) >= 2 else {})}
    return out


def format_campaign_bench(r: dict[str, Any]) -> str:
    """The figures as text (rounded as an engineer writes them).

    Examples
    --------
    >>> print(format_campaign_bench({"n_sets": 2, "wall_1_worker_s": 4.0, "wall_2_workers_s": 2.5,
    ...   "speedup_2_vs_1": 1.6, "bare_fit_modes_per_set_s": 0.2, "campaign_per_set_s": 0.22,
    ...   "overhead_per_set": 0.1, "overhead_per_set_without_files": 0.05,
    ...   "rerun_s": 0.5, "rerun_ratio": 0.2, "rerun_tracked_modes_identical": True,
    ...   "peak_rss_per_worker_mb": [150.0, 151.0], "scaling": {"sizes": [1, 2], "wall_s": [0.2, 0.4],
    ...   "worker_rss_mb": [[140.0, 141.0], [140.0, 141.0]], "slope_s_per_set": 0.2,
    ...   "intercept_s": 0.0, "r2": 1.0}}).splitlines()[1])
    speed-up, 2 workers vs 1, 2 sets (cluster start included): 1.6 (4 s vs 2.5 s)
    """
    s = r["scaling"]
    lines = [
        "Test campaigns (one run; times depend on the machine's load)",
        f"speed-up, 2 workers vs 1, {r['n_sets']} sets (cluster start included): "
        f"{r['speedup_2_vs_1']:.2g} ({r['wall_1_worker_s']:.3g} s vs {r['wall_2_workers_s']:.3g} s)",
        f"overhead per set over a bare fit_modes call: {100 * r['overhead_per_set']:+.0f} % with the set's "
        f"files, {100 * r['overhead_per_set_without_files']:+.0f} % without "
        f"(fit_modes {1e3 * r['bare_fit_modes_per_set_s']:.0f} ms per set); in CPU time "
        f"{100 * r.get('cpu_overhead_per_set', float('nan')):+.0f} % and "
        f"{100 * r.get('cpu_overhead_per_set_without_files', float('nan')):+.0f} %",
        f"re-run on unchanged inputs (2 workers): {r['rerun_ratio']:.2g} of the first run's time "
        f"({r['rerun_s']:.3g} s); tracked_modes.csv byte for byte the same: "
        f"{'yes' if r['rerun_tracked_modes_identical'] else 'NO'}",
        f"peak memory per worker: {', '.join(f'{v:.0f}' for v in r['peak_rss_per_worker_mb'])} MB",
    ]
    if "per_set_cpu_ms" in r:
        st = r["per_set_cpu_ms"]
        lines.append("per set, CPU time of each step (ms): " + ", ".join(f"{k} {v:.1f}" for k, v in st.items()))
        bare = st["fit_modes (bare)"]
        lines.append(f"  overhead over fit_modes from these steps: {100 * (st['whole set (_fit_set)'] / bare - 1):+.0f} % "
                     f"with the set's files (a worker's whole set), "
                     f"{100 * ((st['read records'] + st['run_recipe']) / bare - 1):+.0f} % without "
                     "(reading the records and run_recipe)")
    lines.append("scaling, sets generated inside 2 workers:")
    for n, t, m in zip(s["sizes"], s["wall_s"], s["worker_rss_mb"], strict=True):
        lines.append(f"  {n:>5d} sets  {t:8.3g} s  ({1e3 * t / n:5.0f} ms per set)   worker memory "
                     f"{', '.join(f'{v:.0f}' for v in m)} MB")
    if "slope_s_per_set" in s:
        lines.append(f"  least-squares line: {s['slope_s_per_set']:.3g} s per set + {s['intercept_s']:.2g} s, "
                     f"R^2 = {s['r2']:.4f}")
    if len(s["worker_rss_mb"]) >= 2:
        growth = max(b - a for a, b in zip(s["worker_rss_mb"][0], s["worker_rss_mb"][-1], strict=True))
        lines.append(f"  worker memory from {s['sizes'][0]} to {s['sizes'][-1]} sets: {growth:+.0f} MB "
                     "(largest change of one worker)")
    return "\n".join(lines)


def main() -> None:  # pragma: no cover - ``python -m modalnb.testing.bench_campaign``
    import sys

    quick = "--quick" in sys.argv
    r = run_campaign_bench(n_sets=8 if quick else 40, sizes=(1, 5, 10) if quick else (1, 10, 100, 1000),
                           progress=lambda m: print(f"bench campaign: {m}", file=sys.stderr, flush=True))
    print(format_campaign_bench(r))


if __name__ == "__main__":  # pragma: no cover
    main()
