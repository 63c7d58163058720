"""Atomic file writes with ordinary permissions: the one place modalnb writes files.

Every file modalnb writes goes to a temporary file in the target folder and then replaces
the target in one step (:func:`os.replace`), so an interrupted run leaves the previous file
intact and a reader never sees a half-written one. The finished file gets the mode the
user's umask gives any new file (0644 under umask 022), not ``mkstemp``'s private 0600,
so a table written to a team drive can be read by the team.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path

__all__ = ["atomic_write_text", "atomic_write_bytes", "atomic_write_with", "staged_files", "write_texts"]


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _new_temp(path: Path) -> Path:
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    os.close(fd)
    return Path(tmp)


def _publish(tmp: Path, path: Path) -> None:
    os.chmod(tmp, 0o666 & ~_umask())
    os.replace(tmp, path)


def atomic_write_with(path: str | os.PathLike[str], write: Callable[[Path], object]) -> Path:
    """Call ``write(tmp)`` on a temporary file beside `path`, then move it onto `path`.

    Use it for writers that need a file name (netCDF, WAV). On any error the temporary
    file is removed and `path` is left as it was.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.bin"
    >>> atomic_write_with(p, lambda tmp: tmp.write_bytes(b"ab")).read_bytes()
    b'ab'
    """
    path = Path(path)
    tmp = _new_temp(path)
    try:
        write(tmp)
        _publish(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def atomic_write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write `data` to `path` atomically (flushed to disk before the rename).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.bin"
    >>> atomic_write_bytes(p, b"\\x00\\x01").read_bytes()
    b'\\x00\\x01'
    """

    def write(tmp: Path) -> None:
        with open(tmp, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())

    return atomic_write_with(path, write)


def atomic_write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Write `text` (UTF-8, newlines as given) to `path` atomically.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.txt"
    >>> atomic_write_text(p, "hi").read_text()
    'hi'
    """
    return atomic_write_bytes(path, text.encode("utf-8"))


@contextmanager
def staged_files(folder: str | os.PathLike[str]) -> Iterator[Callable[[str], Path]]:
    """Stage several files in `folder` and publish them together when the block ends.

    Inside the block, ``stage(name)`` returns a temporary path to write `name` to. When the
    block ends without error every staged file replaces its target; on an error none does
    and the temporaries are removed.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> with staged_files(d) as stage:
    ...     _ = stage("a.txt").write_text("1")
    ...     _ = stage("b.txt").write_text("2")
    >>> sorted(p.name for p in d.iterdir())
    ['a.txt', 'b.txt']
    """
    out = Path(folder)
    staged: dict[str, Path] = {}

    def stage(name: str) -> Path:
        if name not in staged:
            staged[name] = _new_temp(out / name)
        return staged[name]

    try:
        yield stage
        for name, tmp in staged.items():
            _publish(tmp, out / name)
    except BaseException:
        for tmp in staged.values():
            tmp.unlink(missing_ok=True)
        raise


def write_texts(folder: str | os.PathLike[str], texts: Mapping[str, str]) -> dict[str, Path]:
    """Write several text files into `folder`, all or none (see :func:`staged_files`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> sorted(write_texts(d, {"x.csv": "a\\n", "y.csv": "b\\n"}))
    ['x.csv', 'y.csv']
    """
    with staged_files(folder) as stage:
        for name, text in texts.items():
            stage(name).write_bytes(text.encode("utf-8"))
    return {name: Path(folder) / name for name in texts}
