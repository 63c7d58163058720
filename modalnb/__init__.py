"""modalnb: modal parameters from impact-hammer ring-down records.

Headless core (never imports ipywidgets or plotly):

* records: :func:`validate_records`, :func:`records_from_arrays`
* errors: :class:`ModalnbError`, :class:`RecordError`, :class:`EstimationError`
"""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version

from . import accessor as _accessor  # noqa: F401  (registers ds.modalnb)
from ._errors import EstimationError, ModalnbError, RecordError, RecordFileNotFoundError
from .checks import check_hits, format_hit_report
from .io import open_records, save_records, segment_recording
from .recipe import Recipe, load_recipe, save_recipe
from .records import (
    get_sample_rate,
    has_force,
    records_checksum,
    records_from_arrays,
    validate_records,
)

try:
    __version__ = version("modalnb")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0.0.0+unknown"

__all__ = (
    "__version__",
    # records
    "validate_records",
    "records_from_arrays",
    "get_sample_rate",
    "has_force",
    "records_checksum",
    # io
    "open_records",
    "save_records",
    "segment_recording",
    # hit checks
    "check_hits",
    "format_hit_report",
    # recipe
    "Recipe",
    "load_recipe",
    "save_recipe",
    # errors
    "ModalnbError",
    "RecordError",
    "RecordFileNotFoundError",
    "EstimationError",
)
