"""Panel 5, modal table: natural frequencies and damping ratios with their uncertainties,
the poles set aside (residual terms, not modes) with their reasons, shapes, MAC between
modes and between hits, the moving shape view (on the user's geometry table, else the
records' node coordinates; :mod:`.shape_motion`), exports and "save recipe"."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import ipywidgets as w

from .._display import PALETTE
from .._numbers import format_quantity
from ..export._aside import ASIDE_TITLE, aside_rows
from ..geometry import Geometry
from ..session import Analysis
from ._base import (
    Panel,
    esc,
    fig_box,
    figure,
    mac_heatmap,
    mode_cells,
    number,
    side_by_side,
    table_html,
    with_u,
)
from .frf_views import ModelPairingView
from .shape_motion import ShapeMotion

__all__ = ["TablePanel"]

def _phase_text(deg: float) -> str:
    """Phase to 0.1° (modalnb._numbers) within (-180, 180]: -179.97 shows as +180.0°.

    Examples
    --------
    >>> _phase_text(-179.97), _phase_text(-0.02), _phase_text(90.44)
    ('+180.0°', '+0.0°', '+90.4°')
    """
    r = round(float(deg), 1)
    if r <= -180:
        r += 360
    text = format_quantity(r, "phase_deg")
    return text if text.startswith("-") else f"+{text}"


def _mac_labels(fig: Any, z: Any, labels: list[str]) -> None:
    """Fill a MAC heat map: one row and one column per label (a square matrix)."""
    fig.data[0].z, fig.data[0].x, fig.data[0].y = z, labels, labels
    fig.layout.xaxis.categoryorder = fig.layout.yaxis.categoryorder = "array"
    fig.layout.xaxis.categoryarray = fig.layout.yaxis.categoryarray = labels
    fig.layout.xaxis.tickvals = fig.layout.yaxis.tickvals = labels


def _aside_html(result: Any) -> str:
    """The poles set aside as a small table (rounded as an engineer writes them), or ''.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"aside_frequency_hz": ("aside_pole", [812.512]),
    ...                  "aside_frequency_hz_std": ("aside_pole", [3.14159]),
    ...                  "aside_damping_ratio": ("aside_pole", [0.0123]),
    ...                  "aside_energy": ("aside_pole", [233.7]),
    ...                  "aside_reason": ("aside_pole", ["too weak"])})
    >>> "812.5 ± 3.1" in _aside_html(ds), "1.23" in _aside_html(ds), _aside_html(xr.Dataset())
    (True, True, '')
    """
    rows = aside_rows(result)
    if not rows:
        return ""

    def num(v: Any) -> Any:
        return v if isinstance(v, (int, float)) else None

    shown = [{"pole": r["pole"], "f": with_u(num(r["frequency_hz"]), num(r["frequency_hz_std"]),
                                            unit="Hz"),
              "z": number(num(r["damping_ratio"]), "damping_pct", unit="%"),
              "e": number(num(r["energy"]), "ratio"), "reason": r["reason"]} for r in rows]
    return (f"<b>{esc(ASIDE_TITLE)}</b>: residual terms kept in the model (the modes' numbers "
            "do not depend on leaving them out of the table)" + table_html(shown, [
                ("pole", "pole"), ("f", "frequency ± u [Hz]"),
                ("z", "damping [%]"), ("e", "energy / noise"), ("reason", "reason")],
                "modalnb-aside-rows", "modalnb-aside"))


class TablePanel(Panel):
    """The modal table, shapes, MAC matrices, shape plot, exports and 'save recipe'."""

    key = "table"
    css = "modalnb-table-panel"
    title = "Modal table"

    def __init__(self, analysis: Analysis, out_dir: str | Path | None = None,
                 geometry: Geometry | None = None) -> None:
        super().__init__(analysis)
        a = analysis
        if out_dir is None:
            base = a.recipe_path.parent if a.recipe_path is not None else Path.cwd()
            stem = a.recipe_path.name.removesuffix(".recipe.json") if a.recipe_path else "modalnb"
            out_dir = base / f"{stem}-modal-table"
        self.modes = w.HTML()
        self.modes.add_class("modalnb-modes-table")
        self.aside = w.HTML()
        self.aside.add_class("modalnb-aside-table")
        self.shapes = w.HTML()
        self.shapes.add_class("modalnb-shapes-table")
        self.mode = w.Dropdown(options=[1], value=1, description="mode",
                               tooltip="the mode of the hits' MAC and the shape plot",
                               style={"description_width": "initial"},
                               layout=w.Layout(width="160px"))
        self.mode.add_class("modalnb-table-mode")
        self.mode.observe(lambda ch: self._draw_mode(), "value")
        self.mac_fig = figure(380, title="MAC between modes")
        mac_heatmap(self.mac_fig)
        self.hitmac_fig = figure(380, title="MAC between hits")
        mac_heatmap(self.hitmac_fig)
        self.geometry = geometry
        self.motion = ShapeMotion(geometry)
        self.shape_fig = self.motion.fig
        self.out_dir = w.Text(value=str(out_dir), description="folder",
                              tooltip="the export folder (replaced as a whole)",
                              style={"description_width": "initial"},
                              layout=w.Layout(width="60%"))
        self.out_dir.add_class("modalnb-export-dir")
        auto = w.Layout(width="auto")
        self.b_table = w.Button(description="export table", layout=auto,
                                tooltip="write the modal table as CSV, netCDF and JSON, with the "
                                "recipe, into the folder")
        self.b_table.add_class("modalnb-export-table")
        self.b_report = w.Button(description="HTML report", layout=auto,
                                 tooltip="write the offline HTML report into the folder")
        self.b_report.add_class("modalnb-export-report")
        self.b_recipe = w.Button(description="save recipe", layout=auto,
                                 tooltip="save every choice made here as the recipe (JSON)")
        self.b_recipe.add_class("modalnb-save-recipe")
        self.export_status = w.HTML()
        self.export_status.add_class("modalnb-export-status")
        self.b_table.on_click(lambda _b: self.export(table=True, report=False))
        self.b_report.on_click(lambda _b: self.export(table=False, report=True))
        self.b_recipe.on_click(lambda _b: self.save_recipe())
        self.pairing = ModelPairingView(a)  # model against test (frf_views)
        self.views.append(self.pairing)
        self._finish([
            w.HTML("<b>Modal table.</b> Frequencies and damping ratios with their standard "
                   "uncertainties; shapes normalised to 1 on the largest channel."),
            self.modes, self.aside, self.shapes, self.mode,
            side_by_side(fig_box(self.mac_fig, "modalnb-mac-figure"),
                         fig_box(self.hitmac_fig, "modalnb-hitmac-figure")),
            self.motion.widget,
            self.pairing.widget,
            w.HBox([self.out_dir]), w.HBox([self.b_table, self.b_report, self.b_recipe]),
            self.export_status,
        ])

    @classmethod
    def for_desk(cls, analysis: Analysis, *, out_dir: str | Path | None = None,
                 geometry: Geometry | None = None, **_options: Any) -> TablePanel:
        """The desk's export folder becomes the panel's default folder; its geometry table
        places the moving shape view."""
        return cls(analysis, out_dir=out_dir, geometry=geometry)

    def _failed(self, exc: Exception) -> None:
        self.export_status.value = (f'<span class="modalnb-error" style="color:{PALETTE.error}">'
                                    f"⚠ {esc(' '.join(str(exc).split()))}</span>")

    def export(self, *, table: bool = True, report: bool = True) -> dict[str, Path]:
        """Write the table files and/or the report into the folder box; return the paths."""
        self.export_status.value = "⏳ writing…"
        try:
            files = self.analysis.export(self.out_dir.value, table=table, report=report,
                                         geometry=self.geometry)
        except (ValueError, OSError) as exc:
            self._failed(exc)
            return {}
        self.export_status.value = "wrote " + ", ".join(
            f'<code class="modalnb-written">{esc(p)}</code>' for p in files.values())
        return files

    def save_recipe(self) -> Path | None:
        """Save the recipe (to the autosave file, or into the folder box); return the path."""
        a = self.analysis
        target = a.recipe_path or Path(self.out_dir.value) / "recipe.json"
        try:
            Path(target).parent.mkdir(parents=True, exist_ok=True)
            p = a.save_recipe(target)
        except (ValueError, OSError) as exc:
            self._failed(exc)
            return None
        self.export_status.value = f'recipe saved: <code class="modalnb-written">{esc(p)}</code>'
        return p

    def refresh(self) -> None:
        a = self.analysis
        r = a.result
        if r is None:
            return
        used = a.accepted_hits()
        self.modes.value = (
            f'<div class="modalnb-table-hits">from <b class="modalnb-table-nhits">{len(used)}</b> of '
            f"{len(a.hits)} hits ({', '.join(map(str, used))})</div>"
        ) + table_html(mode_cells(a), [
            ("mode", "mode"), ("frequency_hz", "natural frequency ± u [Hz]"),
            ("damping_pct", "damping ratio ± u [%]"), ("regime", "regime"),
            ("q_factor", "Q"), ("status", "status")], "modalnb-mode-rows", "modalnb-mode") + (
            "<div class='modalnb-table-note'><i>u: standard uncertainty, rounded as GUM "
            "(JCGM 100:2008) 7.2.6 says.</i></div>")
        self.aside.value = _aside_html(r)
        modes = r["mode"].values.tolist()
        amp, ph = r["shape_amplitude"].values, r["shape_phase_deg"].values
        srows = []
        for c, ch in enumerate(a.channels):
            row = {"channel": ch}
            for k, mm in enumerate(modes):
                row[f"m{mm}"] = f"{number(amp[k, c], 'amplitude')} ∠ {_phase_text(ph[k, c])}"
            srows.append(row)
        self.shapes.value = "<b>shapes: amplitude ∠ phase</b>" + table_html(
            srows, [("channel", "channel")] + [(f"m{mm}", f"mode {mm}") for mm in modes],
            "modalnb-shape-rows", "modalnb-shape")
        labels = [f"mode {m}" for m in modes]
        with self.mac_fig.batch_update():
            _mac_labels(self.mac_fig, a.mac_modes(), labels)
        keep = self.mode.value if self.mode.value in modes else (modes[0] if modes else None)
        self.mode.unobserve_all("value")
        self.mode.options = modes or [1]
        if keep is not None:
            self.mode.value = keep
        self.mode.observe(lambda ch: self._draw_mode(), "value")
        self._draw_mode()

    def _draw_mode(self) -> None:
        a = self.analysis
        r = a.result
        if r is None or not r.sizes.get("mode", 0):
            return
        m = int(self.mode.value)
        if "hit_residue_real" in r:
            hits, mat = a.mac_hits(m)
            lab = [f"hit {h}" for h in hits]
            with self.hitmac_fig.batch_update():
                _mac_labels(self.hitmac_fig, mat, lab)
                self.hitmac_fig.layout.title.text = f"MAC between hits, mode {m} (residues)"
        self.motion.show(r, m, a.records)
