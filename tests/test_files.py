"""Atomic writes: ordinary permissions and all-or-nothing folders.

Source for the expected mode: POSIX open(2)/umask(2) — a new file gets the requested mode
0666 with the process umask's bits cleared, so 0644 under umask 022 (what any ordinary
program's output gets).
"""

from __future__ import annotations

import os
import stat

import pytest

from modalnb._files import atomic_write_bytes, atomic_write_text, staged_files, write_texts


@pytest.fixture
def umask_022():
    old = os.umask(0o022)
    try:
        yield
    finally:
        os.umask(old)


def _mode(p) -> int:
    return stat.S_IMODE(os.stat(p).st_mode)


def test_text_file_gets_umask_mode(tmp_path, umask_022):
    p = atomic_write_text(tmp_path / "a.txt", "x")
    assert _mode(p) == 0o644


def test_umask_077_is_respected(tmp_path):
    old = os.umask(0o077)
    try:
        p = atomic_write_bytes(tmp_path / "b.bin", b"1")
    finally:
        os.umask(old)
    assert _mode(p) == 0o600


def test_staged_files_all_or_nothing(tmp_path, umask_022):
    (tmp_path / "a.txt").write_text("old")
    with pytest.raises(RuntimeError), staged_files(tmp_path) as stage:
        stage("a.txt").write_text("new")
        stage("b.txt").write_text("new")
        raise RuntimeError("interrupted")
    assert (tmp_path / "a.txt").read_text() == "old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.txt"]  # no temporaries left
    paths = write_texts(tmp_path, {"a.txt": "new", "b.txt": "2"})
    assert (tmp_path / "a.txt").read_text() == "new"
    assert all(_mode(p) == 0o644 for p in paths.values())


def test_modal_table_and_recipe_files_are_0644(tmp_path, umask_022):
    import numpy as np

    from modalnb import Recipe, fit_modes, records_from_arrays, save_recipe, write_modal_table

    fs, n = 2048.0, 2048
    t = np.arange(n) / fs
    rng = np.random.default_rng(0)
    wn, zeta = 2 * np.pi * 80.0, 0.01
    y = np.exp(-zeta * wn * t) * np.cos(wn * np.sqrt(1 - zeta**2) * t)
    resp = (y + 1e-3 * rng.standard_normal((2, n)))[:, None, :]
    ds = records_from_arrays(resp, fs, channels=["a"])
    paths = write_modal_table(fit_modes(ds), tmp_path / "table")
    paths["extra"] = save_recipe(Recipe(n_modes=1), tmp_path / "r.json")
    assert paths and all(_mode(p) == 0o644 for p in paths.values()), {
        k: oct(_mode(v)) for k, v in paths.items()
    }
