"""open_records: read a record set from a file, or from a list of one-hit files."""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import xarray as xr

from .._errors import ModalnbError, RecordError
from ._common import check_file
from .combine import combine_hits
from .registry import reader_for

__all__ = ["open_records"]


def _open_one(path: Any, options: Mapping[str, Any]) -> xr.Dataset:
    try:
        p = Path(path)
    except TypeError:
        raise RecordError(
            f"expected a file path or a list of them, got {type(path).__name__}."
        ) from None
    src = os.fspath(path)
    reader = reader_for(p, src)
    reader.check_options(src, options)
    head = check_file(p, src)
    try:
        return reader.read(p, src, head, **options)
    except RecordError:
        raise
    except ModalnbError as exc:  # e.g. a bad option value checked by a common helper
        raise RecordError(f"{src}: {exc}") from None


def open_records(
    path: str | os.PathLike[str] | Sequence[str | os.PathLike[str]], **options: Any
) -> xr.Dataset:
    """Read a record set from a file, or from a list of files holding one hit each.

    The file type follows the suffix (the readers are listed in
    :mod:`modalnb.io.registry`):

    ``.nc``
        netCDF4/HDF5 (read with engine ``"netcdf4"`` when the netCDF4 package is
        installed, else, or when netCDF-C refuses the file, ``"h5netcdf"``) or classic
        netCDF3 (engine ``"scipy"``), told apart by the first bytes; the file must already hold the
        record-set layout. Loaded fully into memory and closed. String coordinates come
        back as object arrays of ``str``, ``hit`` as int64.
    ``.csv``, ``.txt``
        A header row, then one row per sample. Column ``time`` (s) is required; ``force``
        and ``hit`` are optional; every other column is a response channel named by its
        header. With a ``hit`` column the rows of each hit must be together, and every hit
        must have the same number of samples and the same times. Options ``units``,
        ``force_units``, ``delimiter`` (default: the most frequent of ``,`` ``;`` tab in
        the header) and ``decimal`` (``"."`` or ``","``).
    ``.wav``
        Multichannel PCM (8 to 32 bits, WAVE_FORMAT_EXTENSIBLE included) or IEEE-float
        WAV. ``calibration`` is required: the response in physical units at digital full
        scale (one number, or one per response channel); integer PCM full scale is
        ``2**(bits-1)`` counts of the sample container, float WAV full scale is 1.0.
        ``force_channel`` (index) with ``force_calibration`` marks the force channel;
        ``channels`` names the response channels (default ``"ch<k>"``, k the 1-based WAV
        channel number); ``units``, ``force_units``. The full scales are kept in the
        per-channel coord ``full_scale`` and the attr ``force_full_scale``.
    ``.npz``
        Read with ``allow_pickle=False``. Arrays ``response`` (hit, channel, time) or
        (channel, time); ``time`` or scalar ``sample_rate``; optional ``force``,
        ``channel``, ``hit``, ``node``, ``direction``, ``x``, ``y``, ``z``, ``full_scale``,
        ``excitation_node``, ``excitation_direction``. Options ``units``, ``force_units``.

    A list or tuple of paths gives one hit per file, labelled 1..N in the order given;
    the files must share channels, times (to within 0.1 % of a step; the first file's
    time axis is kept), units, per-channel coords and attributes.

    Parameters
    ----------
    path : path-like or sequence of path-like
        The file, or files.
    **options
        Format options listed above; an option that does not apply is an error.

    Returns
    -------
    xarray.Dataset
        A record set that passes :func:`modalnb.records.validate_records`.

    Raises
    ------
    RecordFileNotFoundError
        The file does not exist.
    RecordError
        The file is empty, damaged, of unknown type, or does not hold valid records; the
        one-line message starts with the file name.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> np.savez(folder / "tap.npz", response=np.zeros((2, 64)), sample_rate=1024.0)
    >>> ds = open_records(folder / "tap.npz")
    >>> dict(ds["response"].sizes)
    {'hit': 1, 'channel': 2, 'time': 64}
    """
    if isinstance(path, list | tuple):
        if not path:
            raise RecordError("open_records got an empty list of files.")
        dsets = [_open_one(p, options) for p in path]
        return combine_hits([os.fspath(p) for p in path], dsets)
    return _open_one(path, options)
