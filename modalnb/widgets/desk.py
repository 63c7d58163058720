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

    Attributes
    ----------
    analysis : Analysis
    hits, window, modes, fit, table : the panels (each also usable alone)
    """

    def __init__(self, analysis: Analysis, *, out_dir: str | Path | None = None) -> None:
        self.analysis = analysis
        self.hits = HitPanel(analysis)
        self.window = WindowPanel(analysis)
        self.modes = ModesPanel(analysis)
        self.fit = FitPanel(analysis)
        self.table = TablePanel(analysis, out_dir=out_dir)
        self.panels = [self.hits, self.window, self.modes, self.fit, self.table]
        self.tabs = w.Tab(children=[p.widget for p in self.panels])
        for i, p in enumerate(self.panels):
            self.tabs.set_title(i, f"{i + 1} · {p.title}")
        self.tabs.add_class("modalnb-desk-tabs")
        head = w.HTML(
            f"<b>modalnb</b> · {analysis.source or 'record set'} · {len(analysis.hits)} hits × "
            f"{len(analysis.channels)} channels at {analysis.sample_rate:g} Hz"
            + (f" · recipe autosaved to <code>{analysis.recipe_path}</code>" if analysis.recipe_path else "")
        )
        self.widget = w.VBox([head, self.tabs])
        self.widget.add_class("modalnb-desk")

    def close(self) -> None:
        for p in self.panels:
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
