"""CSV and plain-text tables (``.csv``, ``.txt``): one row per sample, one column per signal.

A header row, then one row per sample. Column ``time`` (s) is required; ``force`` and
``hit`` are optional; every other column is a response channel named by its header. With
a ``hit`` column the rows of each hit must be together, and every hit must have the same
number of samples and the same times. Reading goes in named steps: decode the text, settle
delimiter and decimal mark, split rows, check the header, parse the columns, split the
hits, build the record set.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from .._errors import RecordError
from .._utils import did_you_mean
from ..records import build_records

__all__ = ["read_csv", "RESERVED"]

#: Column names with a meaning of their own; every other column is a response channel.
RESERVED = ("time", "force", "hit")
_DELIMITERS = (",", ";", "\t")


@dataclass
class _Table:
    header: list[str]
    rows: list[list[str]]
    lines: list[int]  # file line of each row, for error messages


@dataclass
class _Hits:
    time: np.ndarray
    response: np.ndarray  # (hit, channel, time)
    force: np.ndarray | None
    labels: np.ndarray | None


def _decode(raw: bytes, src: str) -> str:
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise RecordError(
            f"{src}: not a UTF-8 text file (undecodable byte at offset {exc.start}). "
            "Hint: save the table as UTF-8 CSV."
        ) from None
    if not text.strip():
        raise RecordError(f"{src}: the file holds no text. Hint: re-export the records.")
    return text


def _sniff_delimiter(header_line: str) -> str:
    """The most frequent of ``,`` ``;`` tab in the header line (``,`` when none appears)."""
    counts = {d: header_line.count(d) for d in _DELIMITERS}
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] else ","


def _settle_delimiter(src: str, text: str, delimiter: str | None, decimal: str) -> str:
    if decimal not in (".", ","):
        raise RecordError(f"{src}: option decimal must be '.' or ',', was {decimal!r}.")
    if delimiter is None:
        delimiter = _sniff_delimiter(text.lstrip("\r\n").splitlines()[0])
    if not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in '\r\n"':
        raise RecordError(f"{src}: option delimiter must be one character, was {delimiter!r}.")
    if delimiter == decimal:
        raise RecordError(
            f"{src}: delimiter and decimal are both {decimal!r}. Hint: decimal commas need "
            "delimiter=';'."
        )
    return delimiter


def _split_rows(src: str, text: str, delimiter: str) -> _Table:
    reader = csv.reader(io.StringIO(text), delimiter=delimiter)
    header: list[str] | None = None
    rows: list[list[str]] = []
    lines: list[int] = []
    try:
        for row in reader:
            if not row or all(not c.strip() for c in row):
                continue
            if header is None:
                header = [c.strip() for c in row]
                continue
            if len(row) != len(header):
                raise RecordError(
                    f"{src}: line {reader.line_num} has {len(row)} cells but the header has "
                    f"{len(header)} columns. Hint: check the delimiter (now {delimiter!r})."
                )
            rows.append(row)
            lines.append(reader.line_num)
    except csv.Error as exc:
        raise RecordError(f"{src}: line {reader.line_num} is not valid CSV ({exc}).") from None
    if header is None:
        raise RecordError(f"{src}: the file holds only empty cells; no header row found.")
    return _Table(header, rows, lines)


def _channels(src: str, header: list[str]) -> list[str]:
    """Check the header's names and return the response channels, in header order."""
    for i, name in enumerate(header):
        if not name:
            raise RecordError(f"{src}: column {i + 1} of the header has no name.")
    dup = [n for n in header if header.count(n) > 1]
    if dup:
        raise RecordError(f"{src}: column name {dup[0]!r} appears more than once in the header.")
    for name in header:
        for reserved in RESERVED:
            if name != reserved and name.lower() == reserved:
                raise RecordError(
                    f"{src}: column {name!r} looks like the reserved column {reserved!r}. Hint: "
                    f"rename it to {reserved!r}, or give the channel another name."
                )
    if "time" not in header:
        raise RecordError(
            f"{src}: no 'time' column (seconds). Columns found: {header}."
            f"{did_you_mean('time', header)} Hint: name the time column 'time'"
            + (" or pass delimiter=..." if len(header) == 1 else "")
            + "."
        )
    channels = [n for n in header if n not in RESERVED]
    if not channels:
        raise RecordError(
            f"{src}: no response columns; every column other than time, force and hit is a "
            f"response channel, but the header is {header}."
        )
    return channels


def _parse_column(
    src: str, name: str, cells: Sequence[str], lines: Sequence[int], decimal: str
) -> np.ndarray:
    vals = [c.strip() for c in cells]
    if decimal == ",":
        vals = [v.replace(",", ".") for v in vals]
    try:
        return np.array([float(v) for v in vals], dtype=np.float64)
    except ValueError:
        pass
    for cell, raw, line in zip(vals, cells, lines, strict=True):
        try:
            float(cell)
        except ValueError:
            hint = "Hint: fix or remove that cell."
            if decimal == "." and "," in raw:
                hint = "Hint: for decimal commas pass decimal=','."
            raise RecordError(
                f"{src}: line {line}, column {name!r}: {raw.strip()!r} is not a number. {hint}"
            ) from None
    raise RecordError(f"{src}: column {name!r} could not be read as numbers.")  # pragma: no cover


def _hit_blocks(src: str, labels: np.ndarray, lines: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Hit labels in file order and the row where each hit's block starts (plus the end)."""
    bad = ~(np.isfinite(labels) & (labels == np.round(labels)) & (np.abs(labels) < 2**53))
    if bad.any():
        i = int(np.argmax(bad))
        raise RecordError(
            f"{src}: line {lines[i]}, column 'hit': {labels[i]:g} is not an integer hit label."
        )
    labels = labels.astype(np.int64)
    starts = np.flatnonzero(np.r_[True, labels[1:] != labels[:-1]])
    order = labels[starts]
    if np.unique(order).size != order.size:
        again = next(h for h in order.tolist() if order.tolist().count(h) > 1)
        i = starts[np.flatnonzero(order == again)[1]]
        raise RecordError(
            f"{src}: rows of hit {again} are not together (hit {again} starts again at line "
            f"{lines[i]}). Hint: sort the rows by hit."
        )
    bounds = np.r_[starts, labels.size]
    sizes = np.diff(bounds)
    if np.any(sizes != sizes[0]):
        k = int(np.argmax(sizes != sizes[0]))
        raise RecordError(
            f"{src}: hit {order[k]} has {sizes[k]} rows but hit {order[0]} has {sizes[0]}; "
            "every hit needs the same number of samples. Hint: trim the records to one length."
        )
    return order, bounds


def _shared_time(src: str, t_all: np.ndarray, order: np.ndarray, row_lines: np.ndarray) -> None:
    """Every hit's times equal the first hit's to within 0.1 % of a step.

    `t_all` and `row_lines` (the file line of each row) have shape (hit, sample).
    """
    time = t_all[0]
    step = float(np.median(np.abs(np.diff(time)))) if time.size > 1 else 0.0
    for k in range(1, order.size):
        close = np.isclose(t_all[k], time, rtol=0.0, atol=1e-3 * step)
        if not close.all():
            j = int(np.argmax(~close))
            raise RecordError(
                f"{src}: hit {order[k]} has other times than hit {order[0]} (line "
                f"{row_lines[k, j]}: {t_all[k][j]:g} s, expected {time[j]:g} s). "
                "Hint: every hit must share the same time axis."
            )


def _split_hits(
    src: str, data: dict[str, np.ndarray], lines: list[int], channels: list[str]
) -> _Hits:
    """Response (hit, channel, time), force, time axis and labels from the parsed columns."""
    if "hit" not in data:
        return _Hits(
            time=data["time"],
            response=np.stack([data[c] for c in channels], axis=0)[None, :, :],
            force=data["force"][None, :] if "force" in data else None,
            labels=None,
        )
    line_arr = np.asarray(lines)
    order, bounds = _hit_blocks(src, data["hit"], line_arr)
    shape = (order.size, int(bounds[1] - bounds[0]))
    t_all = data["time"].reshape(shape)
    _shared_time(src, t_all, order, line_arr.reshape(shape))
    return _Hits(
        time=t_all[0],
        response=np.stack([data[c].reshape(shape) for c in channels], axis=1),
        force=data["force"].reshape(shape) if "force" in data else None,
        labels=order,
    )


def read_csv(
    path: Path,
    src: str,
    head: bytes = b"",
    *,
    units: str = "m/s^2",
    force_units: str = "N",
    delimiter: str | None = None,
    decimal: str = ".",
) -> xr.Dataset:
    """Read a CSV/text record table (layout in the module docstring).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.csv"
    >>> rows = "".join(f"{k / 100},{k % 3}\\n" for k in range(20))
    >>> _ = p.write_text("time,tip\\n" + rows)
    >>> read_csv(p, "r.csv")["channel"].values.tolist()
    ['tip']
    """
    text = _decode(path.read_bytes(), src)
    delimiter = _settle_delimiter(src, text, delimiter, decimal)
    table = _split_rows(src, text, delimiter)
    channels = _channels(src, table.header)
    if not table.rows:
        raise RecordError(f"{src}: the table has a header but no data rows.")
    cols = list(zip(*table.rows, strict=True))
    data = {
        n: _parse_column(src, n, cols[i], table.lines, decimal)
        for i, n in enumerate(table.header)
    }
    hits = _split_hits(src, data, table.lines, channels)
    return build_records(
        hits.response,
        hits.time,
        channels=channels,
        force=hits.force,
        hits=hits.labels,
        units=units,
        force_units=force_units,
        source=src,
    )
