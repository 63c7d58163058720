"""modalnb: modal parameters from impact-hammer ring-down records.

Headless core (never imports ipywidgets or plotly):

* records: :func:`open_records`, :func:`save_records`, :func:`segment_recording`,
  :func:`records_from_arrays`, :func:`validate_records`, :func:`records_checksum`
* hit checks: :func:`check_hits`, :func:`format_hit_report`
* estimation: :func:`fit_modes` (one scripted fit), :class:`ModeFit` (repeated refits),
  :func:`mac`, :func:`mac_matrix`, :func:`mpc`, :func:`cross_checks`,
  :func:`modal_conversions`
* shapes over nodes (roving hammer, several setups): :func:`node_shapes`,
  :func:`fit_setups`, :func:`combine_setups`, :func:`read_setup_manifest`
* FRFs: :func:`frf` (measured, with coherence), :func:`synthesise_frf` (of the modal
  table), :func:`write_frf` (``frf.nc``)
* model against test: :func:`pair_modes` (MAC and frequency pairing with a model's modes)
* the deliverable: :class:`Recipe`, :func:`load_recipe`, :func:`save_recipe`,
  :func:`run_recipe` (a reproducible replay), :func:`write_modal_table`
* test campaigns: :func:`fit_campaign` (many record sets, one recipe, modes tracked; dask)
* the notebook state: :class:`Analysis` (headless; the widgets are views over it)
* numbers shown to people: :func:`format_with_uncertainty` (GUM 7.2.6 rounding),
  :func:`format_quantity` (times, dB, frequencies, damping, ... with sensible digits)
* errors: :class:`ModalnbError` and its subclasses :class:`RecordError`,
  :class:`RecordFileNotFoundError`, :class:`EstimationError`, :class:`RecipeError`,
  :class:`RecipeFileNotFoundError`, :class:`OptionError`, :class:`SetupError`; warnings derive from
  :class:`ModalnbWarning`

Widgets live in :mod:`modalnb.widgets` (imported only when asked for); benchmark and test
support in :mod:`modalnb.testing`; the demo campaign in :mod:`modalnb.demo`.
"""

from __future__ import annotations

from . import accessor as _accessor  # noqa: F401  (registers ds.modalnb)
from ._errors import (
    EstimationError,
    ModalnbError,
    ModalnbWarning,
    NoAcceptedHitsError,
    OptionError,
    RecipeError,
    RecipeFileNotFoundError,
    RecordError,
    RecordFileNotFoundError,
    SetupError,
)
from ._numbers import format_quantity, format_with_uncertainty
from .campaign import fit_campaign
from .checks import check_hits, format_hit_report
from .estimate import cross_checks, mac, mac_matrix, modal_conversions, mpc
from .export import write_frf, write_modal_table
from .fitting import ModeFit, fit_modes
from .frf import frf, synthesise_frf
from .io import open_records, save_records, segment_recording
from .node_shapes import node_shapes
from .pairing import pair_modes
from .pipeline import run_recipe
from .recipe import Recipe, load_recipe, package_version, save_recipe
from .records import records_checksum, records_from_arrays, validate_records
from .session import Analysis
from .setups import combine_setups, fit_setups, read_setup_manifest

__version__ = package_version()

__all__ = (
    "__version__",
    # records
    "validate_records",
    "records_from_arrays",
    "records_checksum",
    # io
    "open_records",
    "save_records",
    "segment_recording",
    # hit checks
    "check_hits",
    "format_hit_report",
    # estimation
    "fit_modes",
    "ModeFit",
    "mac",
    "mac_matrix",
    "mpc",
    "cross_checks",
    "modal_conversions",
    # shapes over nodes
    "node_shapes",
    "fit_setups",
    "combine_setups",
    "read_setup_manifest",
    # FRFs
    "frf",
    "synthesise_frf",
    "write_frf",
    "pair_modes",
    # the deliverable
    "run_recipe",
    "write_modal_table",
    "fit_campaign",
    # recipe
    "Recipe",
    "load_recipe",
    "save_recipe",
    # the notebook state
    "Analysis",
    # numbers shown to people
    "format_with_uncertainty",
    "format_quantity",
    # errors
    "ModalnbError",
    "RecordError",
    "RecordFileNotFoundError",
    "EstimationError",
    "NoAcceptedHitsError",
    "RecipeError",
    "RecipeFileNotFoundError",
    "OptionError",
    "SetupError",
    "ModalnbWarning",
)
