"""One call that puts the panels together: :func:`analysis_desk`."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import ipywidgets as w
import xarray as xr

from ..geometry import Geometry
from ..recipe import Recipe
from ..session import Analysis
from ._base import Panel, esc
from .fit_check import FitPanel
from .hits import HitPanel
from .modal_table import TablePanel
from .modes import ModesPanel
from .time_window import WindowPanel

__all__ = ["Desk", "analysis_desk", "PANELS"]

#: The desk's tabs, in working order. A new panel is one entry here.
PANELS: tuple[type[Panel], ...] = (HitPanel, WindowPanel, ModesPanel, FitPanel, TablePanel)


class Desk:
    """The panels of one analysis in tabs (``desk.widget``), in working order.

    A panel is built the first time its tab is opened (or its attribute is read), so a
    notebook shows the first tab quickly and the browser draws only the figures in view.

    Attributes
    ----------
    analysis : Analysis
    hits, window, modes, fit, table : Panel
        The panels, by their ``key`` (each also usable alone).
    """

    def __init__(self, analysis: Analysis, *, out_dir: str | Path | None = None,
                 geometry: Geometry | None = None) -> None:
        self.analysis = analysis
        self._options: dict[str, Any] = {"out_dir": out_dir, "geometry": geometry}
        self._built: dict[str, Panel] = {}
        self._boxes = [w.VBox([w.HTML("<i>opening…</i>")], layout=w.Layout(width="100%"))
                       for _ in PANELS]
        self.tabs = w.Tab(children=self._boxes)
        for i, cls in enumerate(PANELS):
            self.tabs.set_title(i, f"{i + 1} · {cls.title}")
        self.tabs.add_class("modalnb-desk-tabs")
        self.tabs.observe(lambda ch: self._panel(int(ch["new"])), "selected_index")
        saved = (f" · recipe autosaved to <code>{esc(analysis.recipe_path)}</code>"
                 if analysis.recipe_path else "")
        head = w.HTML(
            f"<b>modalnb</b> · {esc(analysis.source or 'record set')} · {len(analysis.hits)} hits × "
            f"{len(analysis.channels)} channels at {analysis.sample_rate:g} Hz{saved}")
        head.add_class("modalnb-desk-head")
        self.widget = w.VBox([head, self.tabs])
        self.widget.add_class("modalnb-desk")
        self.tabs.selected_index = 0
        self._panel(0)

    def _panel(self, i: int) -> Panel:
        cls = PANELS[i]
        if cls.key not in self._built:
            panel = cls.for_desk(self.analysis, **self._options)
            self._built[cls.key] = panel
            self._boxes[i].children = [panel.widget]
        return self._built[cls.key]

    def __getattr__(self, name: str) -> Panel:
        # desk.hits, desk.window, ...: the panel whose key is `name` (built on first use)
        for i, cls in enumerate(PANELS):
            if cls.key == name:
                return self._panel(i)
        raise AttributeError(f"{type(self).__name__!r} object has no attribute {name!r}")

    def __dir__(self) -> list[str]:
        return [*super().__dir__(), *(cls.key for cls in PANELS)]

    @property
    def panels(self) -> list[Panel]:
        """Every panel, in tab order (builds those not opened yet)."""
        return [self._panel(i) for i in range(len(PANELS))]

    def close(self) -> None:
        """Close every built panel and the desk."""
        for p in self._built.values():
            p.close()
        self.widget.close()

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        return self.widget._repr_mimebundle_(**kwargs)


def analysis_desk(
    records: Analysis | xr.Dataset | str | os.PathLike[str],
    recipe: Recipe | None = None,
    *,
    recipe_path: str | os.PathLike[str] | None = None,
    out_dir: str | Path | None = None,
    geometry: Geometry | None = None,
) -> Desk:
    """Open an analysis (or take one) and show its panels in tabs.

    Parameters
    ----------
    records : Analysis, xarray.Dataset or path
        An existing :class:`~modalnb.session.Analysis`, a record set, or a record file
        (its recipe ``<stem>.recipe.json`` is restored and autosaved).
    recipe : Recipe, optional
        Starting choices for a record set given as a Dataset.
    recipe_path : path, optional
        Where the recipe is autosaved.
    out_dir : path, optional
        Default export folder of the table panel.
    geometry : Geometry, optional
        The structure's geometry table (:func:`modalnb.geometry.read_geometry`) for the
        moving shape view; default the records' channel positions ``x, y, z``.

    Returns
    -------
    Desk
        Shows itself in a notebook; ``desk.analysis`` is the state behind it.

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> desk = analysis_desk(load_demo(), recipe_path="demo.recipe.json")  # doctest: +SKIP
    >>> desk                                                                 # doctest: +SKIP
    """
    if isinstance(records, Analysis):
        analysis = records
    elif isinstance(records, xr.Dataset):
        analysis = Analysis(records, recipe, recipe_path=recipe_path)
    else:
        analysis = Analysis.open(records, recipe_path)
    return Desk(analysis, out_dir=out_dir, geometry=geometry)
