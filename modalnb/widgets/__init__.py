"""Notebook widgets: the only part of modalnb that imports ipywidgets and plotly.

Thin views over :class:`modalnb.session.Analysis` (the state: choices, fit, autosaved
recipe); a panel never computes a modal result itself.

* :func:`analysis_desk` / :class:`Desk` — the panels in tabs, in working order;
* :class:`HitPanel`, :class:`WindowPanel`, :class:`ModesPanel`, :class:`FitPanel`,
  :class:`TablePanel` — each usable alone (``HitPanel(analysis)``).

One module per panel:

========================  =====================================================
``_base.py``              :class:`Panel` base class, figure box, escaped tables
``hits.py``               1 · Hits: force pulse, flags, accept / reject
``time_window.py``        2 · Time window: fit window on the ring-down
``modes.py``              3 · Modes: spectrum, band, mode count, stabilisation
``fit_check.py``          4 · Fit check: measured vs model, residual
``modal_table.py``        5 · Modal table: table, shapes, MAC, exports
``desk.py``               the tabs (:data:`~modalnb.widgets.desk.PANELS`)
``campaign.py``           the campaign panel (a :func:`modalnb.fit_campaign` result; not a tab)
``frf_views.py``          views inside panels: coherence (hits), measured vs model FRF (fit
                          check), model against test (modal table; :func:`model_pairing`)
========================  =====================================================

Colours and display decimation come from :mod:`modalnb._display` (shared with the report).

Adding a panel: write ``widgets/<name>.py`` with a :class:`~modalnb.widgets._base.Panel`
subclass (set ``key``, ``title``, ``css``; build the widgets in ``__init__``, end with
``self._finish(children)``; implement ``refresh()``; escape every text that comes from a
file with ``esc``), then add the class to ``PANELS`` in ``desk.py`` (its tab, and
``desk.<key>``) and export it here.
"""

from __future__ import annotations

from .campaign import CampaignPanel, campaign_panel
from .desk import Desk, analysis_desk
from .fit_check import FitPanel
from .frf_views import CoherenceView, FrfCheckView, ModelPairingView, model_pairing
from .hits import HitPanel
from .modal_table import TablePanel
from .modes import ModesPanel
from .time_window import WindowPanel

__all__ = ["analysis_desk", "Desk", "HitPanel", "WindowPanel", "ModesPanel", "FitPanel", "TablePanel",
           "campaign_panel", "CampaignPanel", "CoherenceView", "FrfCheckView", "ModelPairingView",
           "model_pairing"]
