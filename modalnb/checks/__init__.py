"""Hit checks: is each hammer hit of a record set fit for modal estimation?

:func:`check_hits` measures every hit of a record set (no pulse, double hit, soft tip, weak hit,
clipping, low signal-to-noise, decay by the record end, dead channels) and decides, from
thresholds that are plain keyword parameters, whether the hit is accepted. Which checks
reject a hit and which only warn is data (the ``reject`` parameter), and the user can
override any decision per hit (``overrides``). :func:`format_hit_report` prints the
result as an aligned plain-text table; :func:`force_spectrum` gives the force spectrum
the soft-tip check judges, for plotting.

Where things are:

* one module per check -- :mod:`~modalnb.checks.no_pulse`, :mod:`~modalnb.checks.double_hit`,
  :mod:`~modalnb.checks.soft_tip`, :mod:`~modalnb.checks.weak_hit`,
  :mod:`~modalnb.checks.clipping`, :mod:`~modalnb.checks.low_snr`,
  :mod:`~modalnb.checks.not_decayed`, :mod:`~modalnb.checks.dead_channel` -- each with
  its measure, thresholds and their sources documented at the top;
* :mod:`modalnb.checks._hit`: what several checks share, measured once per hit (the main
  force pulse and force noise, each channel's noise floor and peak, dead channels);
* :mod:`modalnb.checks._compose`: :func:`check_hits`, which runs the checks listed in
  ``CHECKS`` and builds the result;
* :mod:`modalnb.checks._report`: :func:`format_hit_report`.

Adding a check: write a module with a function ``run(hit, thresholds) -> Outcome`` and a
``CHECK = Check(name, run, thresholds, variables)`` (see :mod:`modalnb.checks._base` and
any existing check), then add ``CHECK`` to the ``CHECKS`` list in
:mod:`modalnb.checks._compose`. Its name becomes valid in ``reject``, its thresholds
keyword arguments of :func:`check_hits` (validated, stored as attrs, listed in the
docstring) and its variables part of the result.

Nothing here imports ipywidgets, plotly or scipy.
"""

from __future__ import annotations

from ._compose import CHECK_NAMES, CHECKS, DEFAULT_REJECT, THRESHOLDS, check_hits
from ._report import format_hit_report
from .soft_tip import force_spectrum

__all__ = [
    "CHECKS",
    "CHECK_NAMES",
    "DEFAULT_REJECT",
    "THRESHOLDS",
    "check_hits",
    "force_spectrum",
    "format_hit_report",
]
