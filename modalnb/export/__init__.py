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
* ``poles_set_aside.csv`` — ``pole,frequency_hz,damping_ratio,frequency_hz_std,energy,reason``
  (the residual terms that are not modes; :mod:`._aside`);
* ``modes.nc`` (the result Dataset), ``modes.json`` (everything above), ``recipe.json``.

:func:`write_frf` (:mod:`.frf_file`) writes an FRF Dataset as ``frf.nc`` (``frf_real``,
``frf_imag``, ``coherence``, ...).
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
from .report import report_html, write_report
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
]
