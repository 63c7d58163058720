"""Panel 4, fit check: measured against model per channel, the residual trace and its
spectrum, per-channel quality numbers, and the damping cross-checks the engine reports."""

from __future__ import annotations

import ipywidgets as w
import numpy as np

from .._display import PALETTE, decimate_for_display
from ..session import Analysis
from ._base import Panel, esc, fig_box, number, stacked_figure, table_html
from .frf_views import FrfCheckView

__all__ = ["FitPanel"]

#: Spectra are drawn down to this fraction of their peak (1e-6 = 120 dB): log axes need a
#: floor, and 120 dB is below what a 16-bit acquisition resolves (about 96 dB).
SPECTRUM_FLOOR = 1e-6

_CROSS = ("log_dec", "half_power", "envelope", "hilbert")
_CROSS_LABELS = {"log_decrement": "δ (from the fit)",
                 "xcheck_log_decrement_damping": "ζ [%], log decrement",
                 "xcheck_half_power_damping": "ζ [%], half-power",
                 "xcheck_hilbert_damping": "ζ [%], Hilbert envelope"}


class FitPanel(Panel):
    """Fit inspection: measured vs model, residual trace and spectrum, quality, cross-checks."""

    key = "fit"
    css = "modalnb-fit"
    title = "Fit check"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        narrow = {"style": {"description_width": "initial"}, "layout": w.Layout(width="auto")}
        self.hit = w.Dropdown(options=a.hits, value=(a.accepted_hits() or a.hits)[0],
                              description="hit", **narrow)
        self.channel = w.Dropdown(options=a.channels, value=a.channels[-1], description="channel",
                                  **narrow)
        self.hit.observe(lambda ch: self.refresh(), "value")
        self.channel.observe(lambda ch: self.refresh(), "value")
        self.fig = stacked_figure(
            ("measured and model in the fit window", "residual (measured − model)",
             "spectra: measured and residual"),
            (("measured", PALETTE.measured, 1, True), ("model", PALETTE.model, 1, True),
             ("residual", PALETTE.residual, 2, True),
             ("measured spectrum", PALETTE.measured, 3, False),
             ("residual spectrum", PALETTE.residual, 3, False)), 700, spacing=0.15)
        self.fig.update_xaxes(title_text="time [s]", row=2, col=1)
        self.fig.update_xaxes(title_text="frequency [Hz]", row=3, col=1)
        self.fig.update_yaxes(type="log", row=3, col=1)
        self.quality = w.HTML()
        self.quality.add_class("modalnb-fit-quality")
        self.cross = w.HTML()
        self.cross.add_class("modalnb-cross-checks")
        self.frf_check = FrfCheckView(a)  # measured against model FRF (frf_views)
        self.views.append(self.frf_check)
        self._finish([
            w.HTML("<b>Fit check.</b> The model uses the fitted poles; a residual without "
                   "structure and a residual spectrum without peaks mean no mode was missed."),
            w.HBox([self.hit, self.channel]), fig_box(self.fig, "modalnb-fit-figure"),
            w.HBox([self.quality, self.cross]), self.frf_check.widget,
        ])

    def refresh(self) -> None:
        a = self.analysis
        if a.result is None:
            return
        h = int(self.hit.value)
        c = a.channels.index(self.channel.value)
        t, y, m = a.model(h)
        r = y - m
        fr = np.fft.rfftfreq(t.size, 1 / a.sample_rate)
        with self.fig.batch_update():
            for i, yy in enumerate((y[c], m[c], r[c])):
                self.fig.data[i].x, self.fig.data[i].y = decimate_for_display(t, yy)
            spectra = [np.abs(np.fft.rfft(yy - yy.mean())) / t.size for yy in (y[c], r[c])]
            floor = SPECTRUM_FLOOR * max(float(sp.max()) for sp in spectra) or 1e-300
            for i, sp in enumerate(spectra):
                fx, fy = decimate_for_display(fr, sp)
                self.fig.data[3 + i].x, self.fig.data[3 + i].y = fx, np.maximum(fy, floor)
        units = a.records["response"].attrs.get("units", "")
        quality = [{"channel": q["channel"], "r_squared": number(q["r_squared"], "ratio", step=1e-4),
                    "residual_rms": number(q["residual_rms"], "amplitude")}
                   for q in a.channel_quality(h)]
        rms_head = f"residual RMS [{units}]" if units else "residual RMS"
        self.quality.value = f"<b>fit quality, hit {h}</b>" + table_html(
            quality, [("channel", "channel"), ("r_squared", "R²"), ("residual_rms", rms_head)],
            "modalnb-quality-table", "modalnb-quality")
        self._show_cross_checks()

    def _show_cross_checks(self) -> None:
        res = self.analysis.cross_checks()
        names = [] if res is None else [
            n for n in res.data_vars if res[n].dims == ("mode",) and any(k in n for k in _CROSS)]
        if not names:
            self.cross.value = "<i>The estimation engine reported no cross-checks.</i>"
            return
        def cell(n: str, k: int) -> str:  # damping ratios in %, the log decrement as it is
            v = res[n].values[k].item()
            return number(v, "ratio") if n == "log_decrement" else number(v, "damping_pct", unit="%")

        rows = [{"mode": int(mm), "damping_ratio": cell("damping_ratio", k),
                 **{n: cell(n, k) for n in names}}
                for k, mm in enumerate(res["mode"].values)]
        bias = {n: str(res[n].attrs.get("bias", "")) for n in names}
        label = {n: _CROSS_LABELS.get(n, n.replace("_", " ")) for n in names}
        self.cross.value = "<b>cross-checks (each with its known bias)</b>" + table_html(
            rows, [("mode", "mode"), ("damping_ratio", "fitted ζ [%]")] + [(n, label[n]) for n in names],
            "modalnb-cross-table", "modalnb-cross") + "".join(
            f"<div class='modalnb-cross-bias'><i>{esc(label[n])}</i>: {esc(bias[n])}</div>"
            for n in names if bias[n])
