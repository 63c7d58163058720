"""The campaign panel: a view over the Dataset of :func:`modalnb.fit_campaign`.

Not a tab of the analysis desk (a desk views one record set; this views many): the sets
table with status and verdict, one tracked mode's natural frequency and damping ratio
against a manifest label with 1-sigma error bars, the MAC-to-reference matrix, and one
set opened in the analysis desk (:func:`modalnb.widgets.analysis_desk`) with the
campaign's recipe, to look at its hits and window. The panel computes nothing itself.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import ipywidgets as w
import numpy as np
import plotly.graph_objects as go
import xarray as xr

from .._display import PALETTE
from ..export.campaign_report import label_axis
from ._base import esc, fig_box, figure, table_html

__all__ = ["CampaignPanel", "campaign_panel"]


def _label_names(ds: xr.Dataset) -> list[str]:
    return [c for c in ds.coords if c not in ("set", "mode") and ds[c].dims == ("set",)
            and np.issubdtype(ds[c].dtype, np.number)]


class CampaignPanel:
    """The campaign at a glance (``panel.widget``; shows itself in a notebook).

    Parameters
    ----------
    campaign : xarray.Dataset
        The result of :func:`modalnb.fit_campaign`.
    manifest : path, optional
        The manifest, to open a set's records (default ``campaign.attrs["manifest"]``).

    Examples
    --------
    >>> import tempfile
    >>> from modalnb import fit_campaign
    >>> from modalnb.demo import production_campaign
    >>> ds = fit_campaign(production_campaign(tempfile.mkdtemp(), n_parts=2, seed=4, n_samples=1024), workers=0)
    >>> panel = CampaignPanel(ds)
    >>> panel.mode.options[0], len(panel.freq_fig.data)
    (('mode 1', 1), 1)
    """

    def __init__(self, campaign: xr.Dataset, *, manifest: str | os.PathLike[str] | None = None) -> None:
        self.campaign = campaign
        m = manifest if manifest is not None else campaign.attrs.get("manifest")
        self.manifest = Path(m) if m else None
        sets = [str(s) for s in campaign["set"].values.tolist()]
        modes = [int(v) for v in campaign["mode"].values.tolist()]
        labels = _label_names(campaign)
        self.label = w.Dropdown(options=[*labels, "set number"], description="against",
                                value=label_axis(campaign)[0] if labels else "set number")
        self.mode = w.Dropdown(options=[(f"mode {k}", k) for k in modes], description="mode")
        self.freq_fig = figure(300, title="natural frequency [Hz]")
        self.damp_fig = figure(300, title="damping ratio [%]")
        self.mac_fig = figure(max(260, 22 * len(sets) + 80), title="MAC to the reference")
        self.set_pick = w.Dropdown(options=sets, description="set")
        self.open_button = w.Button(description="open in the desk", icon="folder-open")
        self.desk_out = w.Output()
        self.message = w.HTML()
        self.open_button.on_click(lambda _b: self.open_set(self.set_pick.value))
        self.label.observe(lambda _c: self.refresh(), "value")
        self.mode.observe(lambda _c: self.refresh(), "value")
        status = [str(s) for s in campaign["set_status"].values]
        n_ok = status.count("ok")
        head = w.HTML(
            f"<b>modalnb campaign</b> · {len(sets)} sets: {n_ok} fitted, {len(sets) - n_ok} failed · "
            f"reference: {esc(campaign.attrs.get('reference', ''))}<br><i>Estimates for engineering "
            "judgement, not a certification; defer to local codes and licensed engineers.</i>")
        self.table = w.HTML(self._table_html())
        self.widget = w.VBox([
            head, self.table,
            w.HBox([self.mode, self.label]),
            w.HBox([fig_box(self.freq_fig, "modalnb-campaign-frequency"),
                    fig_box(self.damp_fig, "modalnb-campaign-damping")]),
            fig_box(self.mac_fig, "modalnb-campaign-mac"),
            w.HBox([self.set_pick, self.open_button]), self.message, self.desk_out,
        ])
        self.widget.add_class("modalnb-campaign")
        self._draw_mac()
        self.refresh()

    def _ipython_display_(self) -> None:  # pragma: no cover - notebook only
        from IPython.display import display

        display(self.widget)

    def _table_html(self) -> str:
        ds = self.campaign
        labels = [c for c in ds.coords if c not in ("set", "mode") and ds[c].dims == ("set",)]
        rows = []
        for i, s in enumerate(ds["set"].values.tolist()):
            row = {"set": s, "status": ds["set_status"].values[i], "verdict": ds["verdict"].values[i],
                   "n_modes": int(ds["n_modes"].values[i]), "extra": ds["extra_modes"].values[i]}
            row.update({c: ds[c].values[i] for c in labels})
            rows.append(row)
        cols = [("set", "set"), ("status", "status"), ("verdict", "verdict"), ("n_modes", "modes"),
                ("extra", "extra modes"), *((c, c) for c in labels)]
        return table_html(rows, cols, "modalnb-campaign-sets")

    def refresh(self) -> None:
        """Redraw the tracked-mode figures for the chosen mode and label."""
        ds = self.campaign
        if not self.mode.options:
            return
        j = [int(v) for v in ds["mode"].values.tolist()].index(int(self.mode.value))
        name, x = label_axis(ds, None if self.label.value == "set number" else self.label.value)
        sets = [str(s) for s in ds["set"].values.tolist()]
        status = [str(s) for s in ds["mode_status"].values[:, j]]
        colour = [PALETTE.measured if s == "ok" else PALETTE.error for s in status]
        for fig, var, scale in ((self.freq_fig, "frequency_hz", 1.0), (self.damp_fig, "damping_ratio", 100.0)):
            y = scale * np.asarray(ds[var].values[:, j], float)
            err = scale * np.asarray(ds[f"{var}_std"].values[:, j], float)
            with fig.batch_update():
                fig.data = []
                fig.add_trace(go.Scatter(x=x, y=y, mode="markers", marker={"color": colour},
                                         error_y={"type": "data", "array": err, "visible": True},
                                         text=[f"{esc(s)}: {esc(t)}" for s, t in zip(sets, status, strict=True)],
                                         hoverinfo="text+x+y", showlegend=False))
                fig.update_xaxes(title_text=esc(name))

    def _draw_mac(self) -> None:
        ds = self.campaign
        z = np.asarray(ds["mac_to_reference"].values, float)
        with self.mac_fig.batch_update():
            self.mac_fig.add_trace(go.Heatmap(
                z=z, x=[f"mode {int(m)}" for m in ds["mode"].values], y=[esc(s) for s in ds["set"].values],
                zmin=0, zmax=1, colorscale="Blues", colorbar={"title": "MAC"}))
            self.mac_fig.update_yaxes(autorange="reversed")

    def set_recipe(self, label: str) -> Any:
        """The recipe the campaign used for set `label` (its hit overrides included)."""
        from dataclasses import replace

        from ..recipe import Recipe

        info = json.loads(self.campaign.attrs.get("campaign_recipe", "{}"))
        base = Recipe.from_dict(info["recipe"]) if "recipe" in info else Recipe()
        own = {int(h): bool(a) for h, a in info.get("hit_overrides", {}).get(label, {}).items()}
        return replace(base, hit_overrides={**base.hit_overrides, **own})

    def open_set(self, label: str) -> Any:
        """Open set `label` in the analysis desk (no autosave: the campaign's files stay as
        they are). Returns the desk, or None with a one-line message."""
        from .._errors import ModalnbError
        from ..io import open_records
        from .desk import analysis_desk

        i = [str(s) for s in self.campaign["set"].values].index(label)
        if self.manifest is None:
            self.message.value = "<b>cannot open:</b> the manifest's folder is not known (pass manifest=)."
            return None
        path = self.manifest.parent / str(self.campaign["records"].values[i])
        try:
            desk = analysis_desk(open_records(path), self.set_recipe(label))
        except (ModalnbError, OSError) as exc:
            self.message.value = f"<b>cannot open {esc(label)}:</b> {esc(' '.join(str(exc).split()))}"
            return None
        self.message.value = f"set <b>{esc(label)}</b> · {esc(path)}"
        self.desk_out.clear_output()
        with self.desk_out:
            from IPython.display import display

            display(desk)
        return desk


def campaign_panel(campaign: xr.Dataset, *, manifest: str | os.PathLike[str] | None = None) -> CampaignPanel:
    """The campaign panel of a :func:`modalnb.fit_campaign` result (see :class:`CampaignPanel`).

    Examples
    --------
    >>> import tempfile
    >>> from modalnb import fit_campaign
    >>> from modalnb.demo import production_campaign
    >>> ds = fit_campaign(production_campaign(tempfile.mkdtemp(), n_parts=2, seed=4, n_samples=1024), workers=0)
    >>> campaign_panel(ds).set_pick.options
    ('P001', 'P002')
    """
    return CampaignPanel(campaign, manifest=manifest)
