"""Interrupted runs (issue 10, "Nothing lost"): the output folder is replaced as a whole.

Each run is a fresh ``modalnb fit`` process, killed with SIGKILL, SIGTERM or SIGINT at a
random moment while it writes its files (the table, the netCDF, the 5 MB report). After
every kill the folder must hold exactly one complete set, the old or the new one, compared
file by file against manifests of unkilled runs, plus the user's own file; the next run
must remove whatever the killed one left beside the folder. The reference is the set
itself: the manifests come from complete, uninterrupted runs of the same command.

Apart from ISO-8601 time stamps and plot element ids, every output file depends only on
the inputs, so two runs into different folders give the same bytes (checked here too).
"""

from __future__ import annotations

import hashlib
import os
import random
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from modalnb._files import OUTPUT_FILES, recover_folder, replaced_folder
from modalnb.io import save_records
from modalnb.records import records_from_arrays

#: Plotly's element ids (uuid4) and ISO-8601 stamps are the only parts allowed to differ.
_IDS = re.compile(rb"[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}")
_STAMPS = re.compile(rb"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(?:\.\d+)?(?:Z|[+-]\d\d:?\d\d)?")

#: Run the CLI in a fresh interpreter; "fallback" makes the exchange unavailable so the two
#: renames (and their recovery) are exercised instead.
_RUNNER = (
    "import sys, modalnb._files as f\n"
    "if sys.argv[1] == 'fallback':\n"
    "    f._exchange = lambda a, b: False\n"
    "from modalnb.cli import main\n"
    "sys.exit(main(sys.argv[2:]))\n"
)


def _records(path: Path, f1: float) -> Path:
    fs = 2048.0
    t = np.arange(-128, 4096) / fs
    rng = np.random.default_rng(int(f1))
    x = np.where(t >= 0, np.exp(-3 * t) * np.sin(2 * np.pi * f1 * t)
                 + 0.5 * np.exp(-5 * t) * np.sin(2 * np.pi * 2.7 * f1 * t), 0.0)
    resp = np.stack([x, -0.6 * x]) + 1e-4 * rng.standard_normal((2, t.size))
    force = np.where((t >= 0) & (t < 2e-3), np.sin(np.pi * t / 2e-3), 0.0)
    return save_records(records_from_arrays(resp, fs, force=force, t0=t[0]), path)


def _manifest(folder: Path) -> dict[str, str]:
    out = {}
    for p in sorted(folder.iterdir()):
        data = p.read_bytes()
        if p.name == "report.html":
            data = _IDS.sub(b"<id>", data)
        out[p.name] = hashlib.sha256(_STAMPS.sub(b"<stamp>", data)).hexdigest()
    return out


def _cli(mode: str, records: Path, out: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-c", _RUNNER, mode, "fit", str(records), "--out", str(out)],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
    )


def _wait_for_writing(proc: subprocess.Popen) -> None:
    """Read the progress lines until the run starts writing its files."""
    assert proc.stderr is not None
    for line in proc.stderr:
        if "writing" in line:
            return
    raise AssertionError(f"the run ended before writing (exit {proc.wait()})")


def _siblings(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.parent.iterdir()
                  if p.name.startswith(f".{folder.name}.") and not p.name.endswith(".lock"))


@pytest.fixture(scope="module")
def sets(tmp_path_factory):
    """Two record files and the manifests of their complete, uninterrupted output sets."""
    base = tmp_path_factory.mktemp("sets")
    rec = {"a": _records(base / "a.nc", 11.0), "b": _records(base / "b.nc", 17.0)}
    manifests = {}
    for key, path in rec.items():
        out = base / f"ref-{key}"
        proc = _cli("exchange", path, out)
        _, err = proc.communicate(timeout=300)
        assert proc.returncode == 0, err
        manifests[key] = _manifest(out)
        assert sorted(manifests[key]) == sorted(OUTPUT_FILES)
    assert manifests["a"]["report.html"] != manifests["b"]["report.html"]
    return rec, manifests


def test_rerun_gives_the_same_bytes_apart_from_ids_and_stamps(sets, tmp_path):
    rec, manifests = sets
    proc = _cli("exchange", rec["a"], tmp_path / "elsewhere")  # another folder name
    _, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    assert _manifest(tmp_path / "elsewhere") == manifests["a"]


@pytest.mark.parametrize("mode", ["exchange", "fallback"])
def test_killed_runs_leave_a_complete_set_and_no_leftovers(sets, tmp_path, mode):
    rec, manifests = sets
    out = tmp_path / "out"
    proc = _cli(mode, rec["a"], out)
    assert proc.wait(timeout=300) == 0
    (out / "notes.txt").write_text("the user's own file\n")
    user = {"notes.txt": hashlib.sha256(b"the user's own file\n").hexdigest()}
    wanted = [{**manifests[k], **user} for k in ("a", "b")]
    rng = random.Random(10)
    kinds = [signal.SIGKILL, signal.SIGTERM, signal.SIGINT] * 2
    rng.shuffle(kinds)
    seen = set()
    for i, sig in enumerate(kinds):
        proc = _cli(mode, rec["b" if i % 2 == 0 else "a"], out)
        _wait_for_writing(proc)
        time.sleep(rng.uniform(0.0, 1.0))  # writing the set takes about 1 s here
        proc.send_signal(sig)
        code = proc.wait(timeout=300)
        seen.add(code)
        if out.exists():
            got = _manifest(out)
        else:
            # only the fallback's two renames can leave a gap: the old set is set aside
            assert mode == "fallback", f"kill {i} ({sig!r}) removed the folder"
            aside = [p for p in out.parent.iterdir() if p.name.startswith(".out.old-")]
            assert len(aside) == 1, _siblings(out)
            got = _manifest(aside[0])
        assert got in wanted, f"kill {i} ({sig!r}, exit {code}): a mixed folder"
    proc = _cli(mode, rec["a"], out)  # the next run
    assert proc.wait(timeout=300) == 0
    assert _manifest(out) == wanted[0]
    assert _siblings(out) == []
    assert any(c != 0 for c in seen)  # the kills did land before the runs ended


def test_sigterm_and_ctrl_c_clean_up_their_staging(sets, tmp_path):
    """With SIGTERM turned into KeyboardInterrupt, an interrupted run removes its own
    staging folder at once (SIGKILL cannot be caught: the next run removes it)."""
    rec, _ = sets
    out = tmp_path / "out"
    for sig in (signal.SIGTERM, signal.SIGINT):
        proc = _cli("exchange", rec["a"], out)
        _wait_for_writing(proc)
        time.sleep(0.1)
        proc.send_signal(sig)
        code = proc.wait(timeout=300)
        if code == 130:  # interrupted while writing (not after it ended)
            assert _siblings(out) == []


def test_failed_block_leaves_the_folder_as_it_was(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "modes.csv").write_text("old\n")
    with pytest.raises(RuntimeError), replaced_folder(out) as stage:
        (stage / "modes.csv").write_text("new\n")
        raise RuntimeError("interrupted")
    assert [p.name for p in out.iterdir()] == ["modes.csv"]
    assert (out / "modes.csv").read_text() == "old\n"
    assert _siblings(out) == []


def test_our_files_not_rewritten_are_dropped_the_users_kept(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    for name in ("recipe.json", "modes.csv", "mine.txt"):
        (out / name).write_text("old\n")
    (out / "sub").mkdir()
    (out / "sub" / "x.txt").write_text("x\n")
    with replaced_folder(out) as stage:
        (stage / "modes.csv").write_text("new\n")
    assert sorted(p.name for p in out.iterdir()) == ["mine.txt", "modes.csv", "sub"]
    assert (out / "sub" / "x.txt").read_text() == "x\n"


def test_recovery_puts_back_a_set_aside_folder(tmp_path):
    """A fallback run killed between its two renames: the old set comes back whole."""
    out = tmp_path / "out"
    aside = tmp_path / f".out.old-{os.getpid() + 1}-ab"
    aside.mkdir()
    (aside / "modes.csv").write_text("old\n")
    (tmp_path / ".out.new-1-cd").mkdir()
    recover_folder(out)
    assert (out / "modes.csv").read_text() == "old\n"
    assert _siblings(out) == []


def test_a_file_in_place_of_the_folder_is_one_line(tmp_path):
    from modalnb import ModalnbError

    (tmp_path / "out").write_text("x")
    with pytest.raises(ModalnbError, match="is a file, not a folder"), \
            replaced_folder(tmp_path / "out"):
        pass


def test_the_current_folder_is_refused_before_the_work(tmp_path, monkeypatch):
    """`--out .` would exchange the folder the shell stands in: one line, no fit."""
    from modalnb import ModalnbError

    monkeypatch.chdir(tmp_path)
    (tmp_path / "keep.txt").write_text("x")
    with pytest.raises(ModalnbError, match="current folder"), replaced_folder("."):
        pass
    with pytest.raises(ModalnbError, match="current folder"), replaced_folder(tmp_path.parent):
        pass
    assert (tmp_path / "keep.txt").read_text() == "x"
    proc = subprocess.run([sys.executable, "-m", "modalnb.cli", "demo", "--out", ".", "--quiet"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 2 and len(proc.stderr.strip().splitlines()) == 1, proc.stderr
    assert "fitting" not in proc.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.txt"]


def test_analysis_export_one_set_and_report_alone(sets, tmp_path):
    """Analysis.export writes the table and the report as one set; the report alone
    replaces only the report (the table files and the user's file stay)."""
    from modalnb.io import open_records
    from modalnb.session import Analysis

    rec, _ = sets
    a = Analysis(open_records(rec["a"]), recipe_path=tmp_path / "r.json")
    out = tmp_path / "out"
    files = a.export(out)
    assert sorted(files) == sorted(OUTPUT_FILES)
    (out / "notes.txt").write_text("mine\n")
    before = {n: (out / n).stat().st_ino for n in OUTPUT_FILES}
    a.export(out, table=False)
    assert sorted(p.name for p in out.iterdir()) == sorted([*OUTPUT_FILES, "notes.txt"])
    after = {n: (out / n).stat().st_ino for n in OUTPUT_FILES}
    assert after["report.html"] != before["report.html"]  # a new report
    # the table files are carried over untouched (hard links to the same files)
    assert all(after[n] == before[n] for n in OUTPUT_FILES if n != "report.html")
    assert _siblings(out) == []
