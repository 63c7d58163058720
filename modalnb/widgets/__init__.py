"""Notebook widgets: the only part of modalnb that imports ipywidgets and plotly.

Thin views over :class:`modalnb.session.Analysis`:

* :func:`analysis_desk` — the five panels in tabs, in working order;
* :class:`HitPanel`, :class:`WindowPanel`, :class:`ModesPanel`, :class:`FitPanel`,
  :class:`TablePanel` — each usable alone (``HitPanel(analysis)``).
"""

from __future__ import annotations

from .desk import Desk, analysis_desk
from .panels import FitPanel, HitPanel, ModesPanel, TablePanel, WindowPanel

__all__ = ["analysis_desk", "Desk", "HitPanel", "WindowPanel", "ModesPanel", "FitPanel", "TablePanel"]
