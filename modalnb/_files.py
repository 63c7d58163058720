"""Atomic file writes with ordinary permissions: the one place modalnb writes files.

A single file (a recipe, a saved record set) goes to a temporary file beside its target
and then replaces the target in one step (:func:`os.replace`), so an interrupted run
leaves the previous file intact and a reader never sees a half-written one.

An output folder (the modal table and the report, :data:`OUTPUT_FILES`) is replaced as a
whole by :func:`replaced_folder`: the new set is built in a sibling folder
``.<name>.new-<pid>-<random>``, the user's own files are carried over into it, and the
two folders are exchanged in one step (Linux ``renameat2(RENAME_EXCHANGE)``; elsewhere
two renames, which the next run completes or undoes: :func:`recover_folder`). A reader
sees the complete old set or the complete new set, never a mix, and nothing temporary is
ever created inside the output folder. A lock file beside the folder
(``.<name>.lock``, ``flock``) keeps two runs from racing; leftovers of a killed run are
removed by the next run.

Every finished file gets the mode the user's umask gives any new file (0644 under umask
022), not ``mkstemp``'s private 0600, so a table written to a team drive can be read by
the team.
"""

from __future__ import annotations

import contextlib
import errno
import itertools
import os
import secrets
import shutil
import stat
import sys
import tempfile
from collections.abc import Callable, Collection, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path

from ._errors import ModalnbError

__all__ = [
    "MAX_CARRIED",
    "OUTPUT_FILES",
    "atomic_write_text",
    "check_output_folder",
    "atomic_write_bytes",
    "atomic_write_with",
    "recover_folder",
    "replaced_folder",
    "staged_files",
    "write_texts",
]

#: The files modalnb writes into an output folder (one name a line, so merges are easy).
#: Any other file in the folder is the user's and is carried over when the folder is
#: replaced.
OUTPUT_FILES: tuple[str, ...] = (
    "modes.csv",
    "shapes.csv",
    "hits.csv",
    "node_shapes.csv",
    "poles_set_aside.csv",
    "modes.nc",
    "modes.json",
    "recipe.json",
    "report.html",
    "frf.nc",
)


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


# ---------------------------------------------------------------- whole folders
_AT_FDCWD = -100
_RENAME_EXCHANGE = 2
#: renameat2 system call numbers, for a libc without the wrapper (glibc < 2.28).
_SYS_RENAMEAT2 = {"x86_64": 316, "aarch64": 276, "i686": 353, "armv7l": 382, "ppc64le": 357}


def _exchange(a: Path, b: Path) -> bool:
    """Swap two existing paths in one step (Linux ``renameat2(RENAME_EXCHANGE)``).

    Returns False where the exchange is unavailable (another system, an old kernel, a
    file system without it); raises OSError on other failures.
    """
    if not sys.platform.startswith("linux"):
        return False
    import ctypes

    try:
        libc = ctypes.CDLL(None, use_errno=True)
    except OSError:
        return False
    args = (ctypes.c_int(_AT_FDCWD), os.fsencode(a), ctypes.c_int(_AT_FDCWD), os.fsencode(b),
            ctypes.c_uint(_RENAME_EXCHANGE))
    fn = getattr(libc, "renameat2", None)
    if fn is not None:
        rc = fn(*args)
    else:
        number = _SYS_RENAMEAT2.get(os.uname().machine)
        if number is None:
            return False
        rc = libc.syscall(ctypes.c_long(number), *args)
    if rc == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV):
        return False
    raise OSError(err, os.strerror(err), str(a))


def _siblings(folder: Path) -> list[tuple[str, Path]]:
    """Staging (``"new"``) and set-aside (``"old"``) siblings of `folder` left by runs."""
    out = []
    if not folder.parent.is_dir():
        return out
    for p in folder.parent.iterdir():  # not glob: the name may hold [, * or ?
        for kind in ("new", "old"):
            if p.name.startswith(f".{folder.name}.{kind}-"):
                out.append((kind, p))
    return sorted(out)


def _pid_alive(name: str) -> bool:
    """Whether the process whose id is in a sibling's name ``.x.new-<pid>-<rand>`` runs."""
    try:
        pid = int(name.rsplit(".", 1)[-1].split("-")[1])
    except (IndexError, ValueError):
        return False
    if pid == os.getpid():
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _remove(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    else:
        path.unlink(missing_ok=True)


def recover_folder(folder: str | os.PathLike[str], *, locked: bool = True) -> None:
    """Finish or undo what a killed run left beside `folder`.

    A run killed between the two renames of the fallback exchange leaves `folder`
    missing and the previous set aside as ``.<name>.old-*``: it is put back (the complete
    old set). Every other staging or set-aside sibling is a leftover and is removed. With
    ``locked=False`` (no lock could be taken) only leftovers of processes that no longer
    run are touched.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> (d / ".out.new-1-x").mkdir()      # left by a killed run
    >>> recover_folder(d / "out")
    >>> sorted(p.name for p in d.iterdir())
    []
    """
    folder = Path(folder)
    left = [(k, p) for k, p in _siblings(folder) if locked or not _pid_alive(p.name)]
    if not (folder.exists() or folder.is_symlink()):
        old = [p for k, p in left if k == "old"]
        if old:
            newest = max(old, key=lambda p: p.stat().st_mtime)
            os.rename(newest, folder)
            left = [(k, p) for k, p in left if p != newest]
    for _, p in left:
        _remove(p)


@contextmanager
def _folder_lock(folder: Path) -> Iterator[bool]:
    """Hold an exclusive ``flock`` on ``.<name>.lock`` beside `folder`; yields whether it
    is held (False where the file system cannot lock)."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - not POSIX
        yield False
        return
    path = folder.parent / f".{folder.name}.lock"
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666)
    except OSError as exc:
        raise ModalnbError(f"{folder}: cannot create the lock file {path.name} beside it "
                           f"({exc.strerror}). Hint: choose a folder you can write to.") from None
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX)
            held = True
        except OSError:
            held = False
        yield held
    finally:
        os.close(fd)


def _sync(folder: Path) -> None:
    """Flush the files of a staged set and the folder itself to disk before it is published."""
    for p in folder.rglob("*"):
        if p.is_file() and not p.is_symlink():
            fd = os.open(p, os.O_RDONLY)
            try:
                os.fsync(fd)
            finally:
                os.close(fd)
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    except OSError:  # pragma: no cover - a file system that cannot sync a folder
        pass
    finally:
        os.close(fd)


def _link_or_copy(src: str, dst: str) -> None:
    try:
        os.link(src, dst, follow_symlinks=False)
    except OSError:
        shutil.copy2(src, dst, follow_symlinks=False)


def _carry_over(old: Path, new: Path, replaces: Collection[str]) -> None:
    """Put the entries of `old` that are not ours (nor already written) into `new`."""
    for entry in old.iterdir():
        if entry.name in replaces or (new / entry.name).exists() or (new / entry.name).is_symlink():
            continue
        target = new / entry.name
        if entry.is_dir() and not entry.is_symlink():
            shutil.copytree(entry, target, symlinks=True, copy_function=_link_or_copy)
        else:
            _link_or_copy(str(entry), str(target))


#: Most entries of the user's own (files and folders, counted recursively) an output
#: folder may hold: they are carried over (hard links) each time it is replaced, so a
#: folder of its own is wanted, not a project folder (ours).
MAX_CARRIED = 10_000


def check_output_folder(folder: str | os.PathLike[str], *,
                        replaces: Collection[str] = OUTPUT_FILES) -> Path:
    """The absolute output folder, or a one-line ModalnbError when it cannot be replaced.

    Refused: a file in its place; the current working folder or one that holds it (it
    would be exchanged under the running shell); a folder holding more than
    :data:`MAX_CARRIED` entries of the user's own (a project folder, not an output folder).
    Cheap: callers check before the work, :func:`replaced_folder` checks again.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()) / "out"
    >>> check_output_folder(d) == d.resolve()
    True
    """
    path = Path(os.path.realpath(folder))
    if path.exists() and not path.is_dir():
        raise ModalnbError(f"{path} is a file, not a folder. Hint: give a folder path for "
                           "the output files.")
    cwd = Path(os.path.realpath(os.getcwd()))
    if path == cwd or path in cwd.parents:
        raise ModalnbError(f"{folder}: the output folder would replace the current folder "
                           f"{cwd} as a whole. Hint: give a folder of its own, e.g. "
                           f"{Path(folder) / 'modal-table'}.")
    if path.is_dir():
        count = 0
        for entry in path.iterdir():
            if entry.name in replaces:
                continue
            count += 1
            if entry.is_dir() and not entry.is_symlink():
                count += sum(1 for _ in itertools.islice(entry.rglob("*"), MAX_CARRIED + 1))
            if count > MAX_CARRIED:
                raise ModalnbError(
                    f"{folder} holds more than {MAX_CARRIED} files of other programs; the "
                    "output folder is replaced as a whole, with them carried over. Hint: give "
                    "a folder of its own for the output files.")
    return path


@contextmanager
def replaced_folder(
    folder: str | os.PathLike[str], *, replaces: Collection[str] = OUTPUT_FILES,
    sync: bool = True,
) -> Iterator[Path]:
    """Build a new set of files for `folder` and replace the folder with it as a whole.

    The block writes its files into the yielded staging folder (a sibling of `folder`).
    When it ends without error, the entries of the current `folder` that are not named in
    `replaces` (the user's own files) are carried over, and the staging folder takes the
    place of `folder` in one step; the previous set is then removed. On an error (or
    Ctrl-C) the staging folder is removed and `folder` is left as it was. A run killed
    at any point leaves `folder` holding the complete old or the complete new set; the
    next run removes the leftovers (:func:`recover_folder`). Two runs on one folder wait
    for each other (a lock file ``.<name>.lock`` beside it).

    Parameters
    ----------
    folder : path
        The output folder (created with its parents if needed).
    replaces : collection of str
        Names the new set replaces; default :data:`OUTPUT_FILES`. Those the block does
        not write are dropped: the folder holds one run's set, never a mix of two.
    sync : bool
        Flush the new files to disk (``fsync``) before the exchange (default). False only
        for a caller that can tell a set lost in a machine crash by its own checksums and
        write it again (the test-campaign set folders): a killed process still leaves
        the complete old or new set; a crash of the machine itself may leave files that
        did not reach the disk.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()) / "out"
    >>> d.mkdir(); _ = (d / "notes.txt").write_text("mine"); _ = (d / "modes.csv").write_text("old")
    >>> with replaced_folder(d) as new:
    ...     _ = (new / "modes.csv").write_text("new")
    >>> sorted(p.name for p in d.iterdir()), (d / "modes.csv").read_text()
    (['modes.csv', 'notes.txt'], 'new')
    """
    folder = check_output_folder(folder, replaces=replaces)  # a link: replace its target
    folder.parent.mkdir(parents=True, exist_ok=True)
    with _folder_lock(folder) as locked:
        recover_folder(folder, locked=locked)
        stage = Path(tempfile.mkdtemp(dir=folder.parent,
                                      prefix=f".{folder.name}.new-{os.getpid()}-"))
        aside: Path | None = None
        try:
            mode = stat.S_IMODE(folder.stat().st_mode) if folder.is_dir() else 0o777 & ~_umask()
            os.chmod(stage, mode)
            yield stage
            if sync:
                _sync(stage)
            if folder.is_dir():
                _carry_over(folder, stage, replaces)
                if _exchange(stage, folder):
                    aside = stage  # now holds the previous set
                else:
                    aside = folder.parent / f".{folder.name}.old-{os.getpid()}-{secrets.token_hex(4)}"
                    os.rename(folder, aside)
                    os.rename(stage, folder)
            else:
                os.rename(stage, folder)
        except BaseException:
            if aside is None or aside != stage:
                with contextlib.suppress(OSError):
                    if not folder.exists() and aside is not None and aside.exists():
                        os.rename(aside, folder)  # undo the first of the two renames
                        aside = None
                _remove(stage)
            raise
        if aside is not None:
            _remove(aside)
