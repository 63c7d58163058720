"""Running a campaign (issue 11 §2): a real dask LocalCluster with 2 workers, an existing
scheduler by address, the synchronous path, and resuming after a SIGKILLed run.

Outside truth for the tracked frequencies: ``scipy.linalg.eig`` of each generated part's
state matrix (see tests/test_campaign.py, ``part_truth``).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
from test_campaign import N_SAMPLES, part_truth

import modalnb.campaign as campaign
from modalnb import fit_campaign
from modalnb.demo import production_campaign


@pytest.fixture(scope="module")
def parts(tmp_path_factory):
    d = tmp_path_factory.mktemp("parts")
    return production_campaign(d, n_parts=4, cracked=[2], seed=11, n_samples=N_SAMPLES)


def _check_truth(ds) -> None:
    for i, part in enumerate(range(1, 5)):
        f_true = part_truth(11, part, cracked=(part == 2))
        err = np.abs(ds["frequency_hz"].values[i] - f_true)
        np.testing.assert_array_less(err, np.maximum(5 * ds["frequency_hz_std"].values[i], 5e-4 * f_true))


def _count_set_fits(monkeypatch) -> list[str]:
    """The labels of the sets the campaign fits from now on (the real fit still runs)."""
    calls: list[str] = []
    real = campaign._fit_set

    def counting(label, *args):
        calls.append(label)
        return real(label, *args)

    monkeypatch.setattr(campaign, "_fit_set", counting)
    return calls

def test_local_cluster_two_workers_matches_synchronous_and_truth(parts, tmp_path):
    sync = fit_campaign(parts, workers=0, tolerance=3.0)
    dist = fit_campaign(parts, workers=2, tolerance=3.0, out=tmp_path / "out")
    assert list(dist["set_status"].values) == ["ok"] * 4
    _check_truth(dist)
    for name in ("frequency_hz", "damping_ratio", "frequency_hz_std", "mac_to_reference"):
        np.testing.assert_allclose(dist[name].values, sync[name].values, rtol=1e-12, atol=0)
    assert list(dist["verdict"].values) == list(sync["verdict"].values)
    assert dist["verdict"].values[1].startswith("fail: mode 1")
    assert (tmp_path / "out" / "sets" / "P004" / "modes.nc").is_file()


def test_existing_scheduler_by_address(parts):
    from distributed import LocalCluster

    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=":0") as cluster:
        ds = fit_campaign(parts, scheduler=cluster.scheduler_address)
    assert list(ds["set_status"].values) == ["ok"] * 4
    _check_truth(ds)


def test_synchronous_scheduler_name_is_the_in_process_path(parts, monkeypatch):
    monkeypatch.setattr("distributed.Client", None)  # any use of dask would fail
    ds = fit_campaign(parts, scheduler="synchronous")
    assert list(ds["set_status"].values) == ["ok"] * 4


KILLER = textwrap.dedent("""
    import os, signal, sys
    from modalnb import fit_campaign

    def progress(done, failed, total):
        if done == 3:
            os.kill(os.getpid(), signal.SIGKILL)

    fit_campaign(sys.argv[1], out=sys.argv[2], workers=0, progress=progress)
""")


def test_resume_after_sigkill_refits_only_unfinished_sets(tmp_path, monkeypatch):
    manifest = production_campaign(tmp_path / "data", n_parts=6, cracked=[], seed=5, n_samples=N_SAMPLES)
    out = tmp_path / "out"
    r = subprocess.run([sys.executable, "-c", KILLER, str(manifest), str(out)],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == -signal.SIGKILL, r.stderr
    done = sorted(p.name for p in (out / "sets").iterdir() if not p.name.startswith("."))  # hidden: the folders' lock files
    assert done == ["P001", "P002", "P003"]  # finished sets kept, nothing half-written
    assert not (out / "tracked_modes.csv").exists()
    inode = {s: os.stat(out / "sets" / s / "modes.nc").st_ino for s in done}
    (out / "sets" / ".P004.new-leftover").mkdir()  # what a kill during a set's write leaves

    calls = _count_set_fits(monkeypatch)
    ds = fit_campaign(manifest, out=out, workers=0)
    assert calls == ["P004", "P005", "P006"]
    assert list(ds["set_status"].values) == ["ok"] * 6
    assert {s: os.stat(out / "sets" / s / "modes.nc").st_ino for s in done} == inode
    assert sorted(p.name for p in (out / "sets").iterdir() if not p.name.startswith("."))  # hidden: the folders' lock files == [f"P00{k}" for k in range(1, 7)]
    first = (out / "tracked_modes.csv").read_bytes()

    calls.clear()
    fit_campaign(manifest, out=out, workers=0)
    assert calls == []
    assert (out / "tracked_modes.csv").read_bytes() == first  # byte for byte

    # changed inputs: P005's records replaced, then a new recipe for every set
    shutil.copyfile(tmp_path / "data" / "parts" / "P001.nc", tmp_path / "data" / "parts" / "P005.nc")
    fit_campaign(manifest, out=out, workers=0)
    assert calls == ["P005"]
    calls.clear()
    from modalnb import Recipe

    fit_campaign(manifest, out=out, workers=0, recipe=Recipe(band=(5.0, 900.0)))
    assert calls == [f"P00{k}" for k in range(1, 7)]


def _finished_sets(out) -> list[str]:
    """Set folders a run has finished (the marker arrives with the folder, in one step)."""
    sets = out / "sets"
    if not sets.is_dir():
        return []
    return sorted(p.name for p in sets.iterdir()
                  if not p.name.startswith(".") and (p / campaign.SET_MARKER).is_file())


def test_resume_after_the_whole_command_on_a_cluster_is_sigkilled(tmp_path, monkeypatch):
    # `modalnb campaign` on an embedded 2-worker LocalCluster, killed from outside (its
    # whole process group: the command and its dask workers) once a set has finished;
    # the re-run fits exactly the sets that had no finished folder, the others untouched
    manifest = production_campaign(tmp_path / "data", n_parts=12, cracked=[], seed=8, n_samples=N_SAMPLES)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "modalnb.cli", "campaign", str(manifest),
                             "--out", str(out), "--workers", "2"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        for _ in range(30_000):  # up to ~5 min on a loaded machine; no timing is asserted
            if _finished_sets(out) or proc.poll() is not None:
                break
            time.sleep(0.01)
        os.killpg(proc.pid, signal.SIGKILL)
    finally:
        proc.wait(timeout=60)
    assert proc.returncode == -signal.SIGKILL  # killed, not finished on its own
    finished = _finished_sets(out)
    assert finished, "no set finished before the kill"
    unfinished = [f"P{k:03d}" for k in range(1, 13) if f"P{k:03d}" not in finished]
    assert unfinished, "every set finished before the kill: nothing to resume"
    assert not (out / "tracked_modes.csv").exists()
    stamp = {s: ((out / "sets" / s / "modes.nc").stat().st_ino,
                 (out / "sets" / s / campaign.SET_MARKER).read_bytes()) for s in finished}

    real = campaign._fit_set
    calls = _count_set_fits(monkeypatch)
    ds = fit_campaign(manifest, out=out, workers=0)
    assert calls == unfinished
    assert list(ds["set_status"].values) == ["ok"] * 12
    assert {s: ((out / "sets" / s / "modes.nc").stat().st_ino,
                (out / "sets" / s / campaign.SET_MARKER).read_bytes()) for s in finished} == stamp
    assert _finished_sets(out) == [f"P{k:03d}" for k in range(1, 13)]
    # the resumed campaign equals one run start to end (same tracked_modes.csv, byte for byte)
    fresh = tmp_path / "fresh"
    monkeypatch.setattr(campaign, "_fit_set", real)
    fit_campaign(manifest, out=fresh, workers=0)
    assert (out / "tracked_modes.csv").read_bytes() == (fresh / "tracked_modes.csv").read_bytes()


def test_a_set_whose_files_were_damaged_is_fitted_again(tmp_path, monkeypatch):
    # set folders are not flushed to disk file by file; the marker's checksums of the
    # set's files let a re-run find a set a machine crash left incomplete
    manifest = production_campaign(tmp_path / "data", n_parts=4, cracked=[], seed=9, n_samples=N_SAMPLES)
    out = tmp_path / "out"
    fit_campaign(manifest, out=out, workers=0)
    first = (out / "tracked_modes.csv").read_bytes()
    marker = json.loads((out / "sets" / "P002" / campaign.SET_MARKER).read_text())
    assert {"modes.nc", "modes.csv", "shapes.csv", "hits.csv", "recipe.json"} <= set(marker["files"])
    (out / "sets" / "P002" / "shapes.csv").write_bytes(b"")  # as a crash may leave a file
    with open(out / "sets" / "P003" / "modes.nc", "r+b") as fh:  # one byte changed
        fh.seek(200)
        b = fh.read(1)
        fh.seek(200)
        fh.write(bytes([b[0] ^ 0xFF]))
    calls = _count_set_fits(monkeypatch)
    fit_campaign(manifest, out=out, workers=0)
    assert calls == ["P002", "P003"]
    assert (out / "tracked_modes.csv").read_bytes() == first
    assert (out / "sets" / "P002" / "shapes.csv").stat().st_size > 0
