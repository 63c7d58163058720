"""The registry of record-file readers: file suffix -> reader.

Adding a reader = one module + one registry entry. Write a module in this package with a
function ``read(path, src, head, **options) -> xarray.Dataset`` (``path`` a
:class:`~pathlib.Path`, ``src`` the name to start error messages with, ``head`` the
file's first 8 bytes) that raises :class:`~modalnb.RecordError` with a one-line message
for bad input and builds its result with :func:`modalnb.records.build_records`; then add
a :class:`Reader` for it to :data:`READERS` below. :func:`~modalnb.io.open_records`
finds it by suffix and checks its options.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import xarray as xr

from .._errors import RecordError
from .._utils import did_you_mean
from .csvtext import read_csv
from .netcdf import read_netcdf
from .npz import read_npz
from .wav import read_wav

__all__ = ["Reader", "READERS", "SUFFIXES", "reader_for"]


@dataclass(frozen=True)
class Reader:
    """One record-file format: its name, suffixes, options and reading function."""

    kind: str  #: short key, e.g. ``"netcdf"``
    label: str  #: name shown in messages, e.g. ``"netCDF"``
    suffixes: tuple[str, ...]  #: lower-case file suffixes, with the dot
    options: tuple[str, ...]  #: keyword options ``read`` accepts
    read: Callable[..., xr.Dataset]  #: ``read(path, src, head, **options)``

    def check_options(self, src: str, options: Mapping[str, Any]) -> None:
        """Raise RecordError for an option this format does not take (with a did-you-mean).

        Examples
        --------
        >>> READERS[0].check_options("a.nc", {})
        """
        for key in options:
            if key not in self.options:
                listed = ", ".join(self.options) if self.options else "none"
                raise RecordError(
                    f"{src}: option {key!r} does not apply to {self.label} files (options for "
                    f"them: {listed}).{did_you_mean(key, self.options)}"
                )


#: The readers :func:`~modalnb.io.open_records` knows, in the order messages list them.
READERS: tuple[Reader, ...] = (
    Reader("netcdf", "netCDF", (".nc",), (), read_netcdf),
    Reader("csv", "CSV", (".csv", ".txt"), ("units", "force_units", "delimiter", "decimal"), read_csv),
    Reader(
        "wav",
        "WAV",
        (".wav",),
        ("calibration", "force_channel", "force_calibration", "channels", "units", "force_units"),
        read_wav,
    ),
    Reader("npz", "npz", (".npz",), ("units", "force_units"), read_npz),
)

#: File suffixes :func:`~modalnb.io.open_records` understands, and the kind of file each means.
SUFFIXES: dict[str, str] = {s: r.kind for r in READERS for s in r.suffixes}


def reader_for(path: Path, src: str) -> Reader:
    """The reader for `path`'s suffix (any case), or a one-line RecordError listing them.

    Examples
    --------
    >>> reader_for(Path("bay.NC"), "bay.NC").label
    'netCDF'
    >>> reader_for(Path("bay.wave"), "bay.wave")
    Traceback (most recent call last):
    ...
    modalnb._errors.RecordError: bay.wave: unknown file type '.wave'; modalnb reads netCDF (.nc), CSV (.csv, .txt), WAV (.wav), npz (.npz). Did you mean '.wav'?
    """
    suffix = path.suffix.lower()
    for reader in READERS:
        if suffix in reader.suffixes:
            return reader
    known = ", ".join(f"{r.label} ({', '.join(r.suffixes)})" for r in READERS)
    raise RecordError(
        f"{src}: unknown file type {path.suffix or '(no suffix)'!r}; modalnb reads {known}."
        f"{did_you_mean(suffix, SUFFIXES)}"
    )
