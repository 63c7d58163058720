"""Helpers shared by the record-file readers: file checks and attribute clean-up."""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import RecordError, RecordFileNotFoundError

__all__ = ["check_file", "plain_attrs", "attrs_equal"]


def check_file(path: Path, src: str) -> bytes:
    """Return the file's first 8 bytes after checking it exists, is a file and is not empty.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.csv"
    >>> _ = p.write_bytes(b"time,a\\n")
    >>> check_file(p, "a.csv")
    b'time,a\\n'
    """
    if not path.exists():
        raise RecordFileNotFoundError(
            f"{src}: no such file. Hint: check the path (relative paths start at {os.getcwd()})."
        )
    if path.is_dir():
        raise RecordError(f"{src}: is a folder, not a record file.")
    try:
        with path.open("rb") as fh:
            head = fh.read(8)
    except PermissionError:
        raise RecordError(f"{src}: permission denied when reading the file.") from None
    if not head:
        raise RecordError(f"{src}: the file is empty (0 bytes). Hint: re-export the records.")
    return head


def attrs_equal(a: Mapping[str, Any], b: Mapping[str, Any]) -> bool:
    """True when two attribute dicts have the same keys and equal values (arrays too).

    Examples
    --------
    >>> attrs_equal({"a": np.array([1, 2])}, {"a": [1, 2]})
    True
    """
    if set(a) != set(b):
        return False
    return all(np.array_equal(np.asarray(a[k]), np.asarray(b[k])) for k in a)


def plain_attrs(attrs: Mapping[str, Any]) -> dict[str, Any]:
    """Numpy scalars in attrs become Python scalars (JSON-safe, equal in value).

    Examples
    --------
    >>> plain_attrs({"fs": np.float64(2.0)})
    {'fs': 2.0}
    """
    return {k: (v.item() if isinstance(v, np.generic) else v) for k, v in attrs.items()}
