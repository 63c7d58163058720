"""Reading, writing and cutting record sets.

* :func:`open_records` reads a record set (layout in :mod:`modalnb.records`) from netCDF
  (``.nc``: netCDF4/HDF5 or classic netCDF3), CSV (``.csv``/``.txt``), WAV (``.wav``) or
  NumPy (``.npz``) files, or from a list of files holding one hit each.
* :func:`save_records` writes a record set to netCDF4 atomically; reading it back with
  :func:`open_records` gives an identical dataset.
* :func:`segment_recording` cuts one continuous recording holding several hits into a
  record set, triggering on the force (or, without force, on the response).

Where things are: one module per format (:mod:`~modalnb.io.netcdf` with the writer,
:mod:`~modalnb.io.csvtext`, :mod:`~modalnb.io.wav`, :mod:`~modalnb.io.npz`), the
suffix -> reader table in :mod:`~modalnb.io.registry` (adding a reader = one module + one
registry entry), the joining of one-hit files in :mod:`~modalnb.io.combine`, the
segmentation in :mod:`~modalnb.io.segment`. Every reader builds its result with
:func:`modalnb.records.build_records`, the one constructor of record sets.

Every result passes :func:`modalnb.records.validate_records`. Problems with a file raise
:class:`~modalnb.RecordError` (or :class:`~modalnb.RecordFileNotFoundError`) with a
one-line message that starts with the file name. Input files are only ever read.
"""

from __future__ import annotations

from .netcdf import save_records
from .reading import open_records
from .registry import SUFFIXES
from .segment import segment_recording

__all__ = ["open_records", "save_records", "segment_recording", "SUFFIXES"]
