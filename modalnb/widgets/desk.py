"""One call that puts the five panels together: :func:`analysis_desk`."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import ipywidgets as w
import xarray as xr

from ..recipe import Recipe
from ..session import Analysis
from .panels import FitPanel, HitPanel, ModesPanel, TablePanel, WindowPanel

__all__ = ["Desk", "analysis_desk"]


class Desk:
    """The five panels of one analysis in tabs (``desk.widget``), in working order.

    A panel is built the first time its tab is opened (or its attribute is read), so a
    notebook shows the first tab quickly and the browser draws only the figures in view.

    Attributes
    ----------
    analysis : Analysis
    hits, window, modes, fit, table : the panels (each also usable alone)
    """

    _KINDS = (("hits", HitPanel), ("window", WindowPanel), ("modes", ModesPanel),
              ("fit", FitPanel), ("table", TablePanel))

    def __init__(self, analysis: Analysis, *, out_dir: str | Path | None = None) -> None:
        self.analysis = analysis
        self._out_dir = out_dir
        self._built: dict[str, Any] = {}
        self._boxes = [w.VBox([w.HTML("<i>opening…</i>")], layout=w.Layout(width="100%"))
                       for _ in self._KINDS]
        self.tabs = w.Tab(children=self._boxes)
        for i, (_, cls) in enumerate(self._KINDS):
            self.tabs.set_title(i, f"{i + 1} · {cls.title}")
        self.tabs.add_class("modalnb-desk-tabs")
        self.tabs.observe(lambda ch: self._panel(int(ch["new"])), "selected_index")
        head = w.HTML(
            f"<b>modalnb</b> · {analysis.source or 'record set'} · {len(analysis.hits)} hits × "
            f"{len(analysis.channels)} channels at {analysis.sample_rate:g} Hz"
            + (f" · recipe autosaved to <code>{analysis.recipe_path}</code>" if analysis.recipe_path else "")
        )
        self.widget = w.VBox([head, self.tabs])
        self.widget.add_class("modalnb-desk")
        self.tabs.selected_index = 0
        self._panel(0)

    def _panel(self, i: int) -> Any:
        name, cls = self._KINDS[i]
        if name not in self._built:
            panel = cls(self.analysis, out_dir=self._out_dir) if cls is TablePanel else cls(self.analysis)
            self._built[name] = panel
            self._boxes[i].children = [panel.widget]
        return self._built[name]

    hits = property(lambda self: self._panel(0), doc="the hit review panel")
    window = property(lambda self: self._panel(1), doc="the fit-window panel")
    modes = property(lambda self: self._panel(2), doc="the mode-finding panel")
    fit = property(lambda self: self._panel(3), doc="the fit-check panel")
    table = property(lambda self: self._panel(4), doc="the modal-table panel")

    @property
    def panels(self) -> list[Any]:
        return [self._panel(i) for i in range(len(self._KINDS))]

    def close(self) -> None:
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
) -> Desk:
    """Open an analysis (or take one) and show its five panels in tabs.

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
    return Desk(analysis, out_dir=out_dir)
