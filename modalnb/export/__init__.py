"""Everything modalnb hands over: the modal-table files, the terminal table, the HTML report.

One module per kind of export, all fed by the same rows (:mod:`._rows`):

* :mod:`.table_files` -- :func:`write_modal_table`: ``modes.csv``, ``shapes.csv``,
  ``hits.csv``, ``modes.nc``, ``modes.json``, ``recipe.json``;
* :mod:`.terminal` -- :func:`format_modal_table`, the aligned text the CLI prints;
* :mod:`.report` -- :func:`write_report` / :func:`report_html`, the offline HTML report
  (imports plotly inside its functions only).

Adding an export = one module here that reads the rows of :mod:`._rows` (or the result
Dataset) and writes through :mod:`modalnb._files`, plus one import line below.

Files written by :func:`write_modal_table` (the contract other tools rely on):

* ``modes.csv``  — ``mode,frequency_hz,damping_ratio,frequency_hz_std,damping_ratio_std,regime``,
  then every other per-mode quantity;
* ``shapes.csv`` — ``mode,channel,amplitude,phase_deg``, then the other per-(mode, channel)
  quantities;
* ``hits.csv``   — ``hit,accepted,reason,warnings,notes`` (``accepted`` is ``true``/``false``;
  ``notes``: advisories that neither reject nor warn);
* ``node_shapes.csv`` — ``mode,node,node_name,direction,role,amplitude,phase_deg,
  mass_normalised_kg^-1/2`` (shapes over nodes of a roving or several-setup table; header
  only without them);
* ``poles_set_aside.csv`` — ``pole,frequency_hz,damping_ratio,frequency_hz_std,energy,reason``
  (the residual terms that are not modes; :mod:`._aside`);
* ``modes.nc`` (the result Dataset), ``modes.json`` (everything above), ``recipe.json``.

:func:`write_frf` (:mod:`.frf_file`) writes an FRF Dataset as ``frf.nc`` (``frf_real``,
``frf_imag``, ``coherence``, ...); :func:`frf_section_html` (:mod:`.frf_report`) is the
report's FRF section (measured against model FRF and coherence, one HTML fragment).

:func:`write_shape_views` (:mod:`.shape_view`) writes ``shape_view.html``, the moving shape
view on the structure's geometry; :func:`shape_section_html` is the same view as one HTML
fragment for a report page.
"""

from __future__ import annotations

from ._rows import (
    CAUTION,
    HIT_COLUMNS,
    MODE_COLUMNS,
    SHAPE_COLUMNS,
    hits_rows,
    modes_rows,
    shapes_rows,
)
from .frf_file import write_frf
from .frf_report import frf_section_html
from .report import report_html, write_report
from .shape_view import shape_section_html, shape_view_html, write_shape_views
from .table_files import write_modal_table
from .terminal import format_modal_table

__all__ = [
    "MODE_COLUMNS",
    "SHAPE_COLUMNS",
    "HIT_COLUMNS",
    "CAUTION",
    "modes_rows",
    "shapes_rows",
    "hits_rows",
    "write_modal_table",
    "format_modal_table",
    "write_report",
    "report_html",
    "write_frf",
    "shape_view_html",
    "shape_section_html",
    "write_shape_views",
    "frf_section_html",
]
