"""FRF, coherence and model-against-test views, shown inside the panels.

Thin views over :class:`modalnb.session.Analysis` (they compute nothing themselves):

* :class:`CoherenceView` (in the hits panel) -- the coherence of the accepted hits per
  excitation point, for one channel (:meth:`Analysis.measured_frf`);
* :class:`FrfCheckView` (in the fit check) -- measured H1 against the modal model's FRF,
  magnitude in dB and phase, per channel and excitation (:meth:`Analysis.measured_frf`,
  :meth:`Analysis.model_frf`);
* :class:`ModelPairingView` (in the modal table) -- the test's modes paired with an
  analysis model's (:func:`modalnb.pair_modes` through :meth:`Analysis.compare_with_model`):
  the pairing table and the MAC heat map. :func:`model_pairing` makes one on its own.

Each view listens to the analysis and redraws on every new result; a problem (records
without force, a model sharing no node with the test) is one line in the view's note.
"""

from __future__ import annotations

from typing import Any

import ipywidgets as w
import numpy as np

from .._display import PALETTE, decimate_for_display, to_db
from .._errors import ModalnbError
from .._numbers import format_quantity
from ..frf_compare import frf_label
from ..session import Analysis
from ._base import esc, fig_box, figure, stacked_figure, table_html

__all__ = ["CoherenceView", "FrfCheckView", "ModelPairingView", "model_pairing", "display_index"]


def display_index(y: np.ndarray) -> np.ndarray:
    """Indices of the points of `y` drawn (min/max decimation, :func:`decimate_for_display`).

    NaN points are kept out of the decision (drawn where they fall in the kept indices).

    Examples
    --------
    >>> idx = display_index(np.sin(np.arange(10000.0)))
    >>> idx.size <= 2000, bool(np.all(np.diff(idx) > 0))
    (True, True)
    """
    y = np.asarray(y, float)
    finite = np.where(np.isfinite(y), y, np.nanmin(y) if np.isfinite(y).any() else 0.0)
    idx, _ = decimate_for_display(np.arange(y.size), finite)
    return np.asarray(idx, int)


def _note(text: str, kind: str = "note") -> str:
    colour = PALETTE.error if kind == "error" else PALETTE.warning
    return f'<span class="modalnb-frf-{kind}" style="color:{colour}">{esc(text)}</span>'


def _band(a: Analysis) -> list[float] | None:
    band = None if a.result is None else a.result.attrs.get("band")
    if band is not None and np.size(band) == 2:
        return [float(np.ravel(band)[0]), float(np.ravel(band)[1])]
    return None


def _driving_channel(a: Analysis, excitation: str) -> str:
    """The channel at the excitation point (node + direction), else the last channel."""
    rec = a.records
    if "node" in rec.coords and "direction" in rec.coords:
        for ch, n, d in zip(a.channels, rec["node"].values, rec["direction"].values, strict=True):
            if f"{n}{d}" == excitation:
                return ch
    return a.channels[-1]


class _View:
    """A view inside a panel: ``view.widget``; redraws on every new result."""

    css = "modalnb-frf-view"

    def __init__(self, analysis: Analysis) -> None:
        self.analysis = analysis
        self.note = w.HTML()
        self.note.add_class(f"{self.css}-note")
        self._unsubscribe = analysis.subscribe(self._on_event)

    def _on_event(self, event: str, analysis: Analysis) -> None:
        if event == "result":
            self.refresh()

    def _box(self, children: list[w.Widget]) -> None:
        self.widget = w.VBox(children, layout=w.Layout(width="100%"))
        self.widget.add_class(self.css)
        self.refresh()

    def refresh(self) -> None:  # pragma: no cover - every view overrides it
        raise NotImplementedError

    def close(self) -> None:
        """Stop listening to the analysis and close the widgets."""
        self._unsubscribe()
        self.widget.close()

    def _repr_mimebundle_(self, **kwargs: Any) -> Any:
        return self.widget._repr_mimebundle_(**kwargs)


class CoherenceView(_View):
    """Coherence of the accepted hits per excitation point, one channel at a time.

    Coherence ``|G_fx|^2 / (G_ff G_xx)`` near 1 says the hits agree (the response is the
    force's); where it drops, noise, a double hit or a nonlinearity dominates (Bendat &
    Piersol 2010, *Random Data*). One hit gives 1 everywhere and says nothing.

    Examples
    --------
    >>> view = CoherenceView(analysis)   # doctest: +SKIP
    """

    css = "modalnb-coherence-view"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        self.channel = w.Dropdown(options=a.channels, value=a.channels[-1], description="channel")
        self.channel.add_class("modalnb-coherence-channel")
        self.channel.observe(lambda ch: self.refresh(), "value")
        self._shown: tuple[Any, ...] | None = None  # (measured FRF, channel, band) drawn
        self.fig = figure(300, title="coherence of the accepted hits", xaxis_title="frequency [Hz]",
                          yaxis={"title": "coherence", "range": [0, 1.05]}, showlegend=True)
        self._box([w.HTML("<b>Coherence</b> of the accepted hits, per excitation point "
                          "(near 1: the hits agree; low: noise or a bad hit dominates)."),
                   self.channel, fig_box(self.fig, "modalnb-coherence-figure"), self.note])

    def refresh(self) -> None:
        a = self.analysis
        if a.result is None:
            return
        try:
            m = a.measured_frf()
        except ModalnbError as exc:
            self.note.value = _note(" ".join(str(exc).split()), "error")
            return
        shown = (m, self.channel.value, tuple(_band(a) or ()))
        if self._shown is not None and shown[0] is self._shown[0] and shown[1:] == self._shown[1:]:
            return  # a new window, the same hits: the same coherence, already drawn
        self._shown = shown
        c = a.channels.index(self.channel.value)
        f = m["frequency"].values
        names = [str(e) for e in m["excitation"].values]
        with self.fig.batch_update():
            while len(self.fig.data) < len(names):
                self.fig.add_scatter(x=[], y=[], mode="lines", line={"width": 1})
            for k, tr in enumerate(self.fig.data):
                if k >= len(names):
                    tr.x, tr.y, tr.visible = [], [], False
                    continue
                y = m["coherence"].values[k, c]
                idx = display_index(y)
                tr.x, tr.y = f[idx], y[idx]
                tr.name = esc(f"{names[k]} ({int(m['n_hits'].values[k])} hits)")
                tr.visible = True
            self.fig.layout.title = f"coherence of the accepted hits, channel {esc(self.channel.value)}"
            band = _band(a)
            if band:
                self.fig.layout.xaxis.range = band
        notes = [str(m.attrs.get("coherence_note", "")).strip()]
        one = [n for n, k in zip(names, m["n_hits"].values, strict=True) if int(k) == 1]
        if one:
            notes.append(f"one hit only at {', '.join(one)}: its coherence is 1 and says nothing")
        self.note.value = _note("; ".join(t for t in notes if t)) if any(notes) else ""


class FrfCheckView(_View):
    """Measured H1 against the modal model's FRF (magnitude in dB, phase), per channel and excitation.

    The model is :func:`modalnb.synthesise_frf` of the current table (the pole-residue
    sum, Ewins 2000, *Modal Testing*, ch. 2). Exponentially windowed records: the
    measured FRF is that of the windowed records (labelled so), and the model carries
    the window's damping, so the two compare.

    Examples
    --------
    >>> view = FrfCheckView(analysis)   # doctest: +SKIP
    """

    css = "modalnb-frfcheck-view"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        a = analysis
        self.excitation = w.Dropdown(options=["–"], value="–", description="excitation")
        self.excitation.add_class("modalnb-frfcheck-excitation")
        self.channel = w.Dropdown(options=a.channels, value=a.channels[-1], description="channel")
        self.channel.add_class("modalnb-frfcheck-channel")
        self.fig = stacked_figure(
            ("magnitude", "phase"),
            (("measured", PALETTE.measured, 1, True), ("model", PALETTE.model, 1, True),
             ("measured phase", PALETTE.measured, 2, False),
             ("model phase", PALETTE.model, 2, False)), 480, shared_xaxes=True)
        self.fig.update_yaxes(title_text="dB re 1 unit", row=1, col=1)
        self.fig.update_yaxes(title_text="phase [°]", range=[-185, 185], row=2, col=1)
        self.fig.update_xaxes(title_text="frequency [Hz]", row=2, col=1)
        self._started = False
        self._quiet = False
        self._box([w.HTML("<b>FRF: measured against the modal model.</b> Where the model "
                          "follows the measured FRF around each peak, the table describes the "
                          "structure in the band. Between and beyond the peaks the model holds "
                          "the fitted modes only (no terms for modes outside the band, no mass "
                          "line at a driving point), so it may depart from the measurement there."),
                   w.HBox([self.excitation, self.channel]),
                   fig_box(self.fig, "modalnb-frfcheck-figure"), self.note])
        self.excitation.observe(lambda ch: self._draw(), "value")
        self.channel.observe(lambda ch: self._draw(), "value")

    def refresh(self) -> None:
        a = self.analysis
        if a.result is None:
            return
        try:
            m = a.measured_frf()
        except ModalnbError as exc:
            self.note.value = _note(" ".join(str(exc).split()), "error")
            return
        names = [str(e) for e in m["excitation"].values]
        if list(self.excitation.options) != names:
            keep = self.excitation.value if self.excitation.value in names else names[0]
            self._quiet = True
            try:
                self.excitation.options = names
                self.excitation.value = keep
            finally:
                self._quiet = False
            if not self._started:  # first time: the channel at the excitation point
                self.channel.value = _driving_channel(a, keep)
        self._started = True
        self._draw()

    def traces(self) -> dict[str, tuple[np.ndarray, np.ndarray]]:
        """The points drawn now, by trace name (for checks; the figure holds the same)."""
        return {tr.name: (np.asarray(tr.x, float), np.asarray(tr.y, float)) for tr in self.fig.data}

    def _draw(self) -> None:
        a = self.analysis
        if self._quiet or a.result is None or self.excitation.value == "–":
            return
        try:
            m = a.measured_frf()
            model = a.model_frf()
        except ModalnbError as exc:
            self.note.value = _note(" ".join(str(exc).split()), "error")
            return
        e = [str(x) for x in m["excitation"].values].index(self.excitation.value)
        c = a.channels.index(self.channel.value)
        f = m["frequency"].values
        h = m["frf"].values[e, c]
        g = model["frf"].values[e, c]
        mag = to_db(np.abs(h))
        idx = display_index(np.where(np.isfinite(h), mag, np.nan))
        units = esc(m["frf"].attrs.get("units", ""))
        with self.fig.batch_update():
            for k, (src, y) in enumerate(((h, mag), (g, to_db(np.abs(g))), (h, np.degrees(np.angle(h))),
                                          (g, np.degrees(np.angle(g))))):
                y = np.where(np.isfinite(src), y, np.nan)  # no model: a gap, not -6000 dB
                self.fig.data[k].x, self.fig.data[k].y = f[idx], y[idx]
            self.fig.layout.title = (f"{esc(m.attrs.get('estimator', 'H1'))} {esc(self.excitation.value)} "
                                     f"→ {esc(self.channel.value)} [{units}]")
            self.fig.update_yaxes(title_text=f"dB re 1 {units}", row=1, col=1)
            band = _band(a)
            if band:
                self.fig.update_xaxes(range=band)
        notes = []
        label = frf_label(m)
        if label != str(m.attrs.get("estimator", "H1")):
            notes.append(label)
        if model.attrs.get("model_note", "none") != "none":
            notes.append(str(model.attrs["model_note"]))
        if model.attrs.get("left_out", "none") != "none":
            notes.append(f"not in the model: {model.attrs['left_out']}")
        self.note.value = _note("; ".join(notes)) if notes else ""


class ModelPairingView(_View):
    """The test's modes paired with an analysis model's: pairing table and MAC heat map.

    The model comes from two CSV files (``mode,frequency_hz`` and
    ``mode,node,direction,value``, :func:`modalnb.pairing.read_model_modes`) named in the
    boxes, or from :meth:`set_model` (the files, or a Dataset). Pairing:
    :func:`modalnb.pair_modes` (MAC, Allemang & Brown 1982, and the frequency difference).

    Examples
    --------
    >>> view = ModelPairingView(analysis)                       # doctest: +SKIP
    >>> view.set_model(("model_modes.csv", "model_shapes.csv"))  # doctest: +SKIP
    """

    css = "modalnb-pairing-view"

    def __init__(self, analysis: Analysis) -> None:
        super().__init__(analysis)
        wide = {"description_width": "initial"}
        self.modes_csv = w.Text(description="model modes", placeholder="modes.csv: mode,frequency_hz",
                                style=wide, layout=w.Layout(width="48%"))
        self.modes_csv.add_class("modalnb-pairing-modes-csv")
        self.shapes_csv = w.Text(description="model shapes",
                                 placeholder="shapes.csv: mode,node,direction,value",
                                 style=wide, layout=w.Layout(width="48%"))
        self.shapes_csv.add_class("modalnb-pairing-shapes-csv")
        self.button = w.Button(description="compare with the model", layout=w.Layout(width="220px"))
        self.button.add_class("modalnb-pairing-compare")
        self.button.on_click(lambda _b: self.set_model((self.modes_csv.value.strip(),
                                                        self.shapes_csv.value.strip())))
        self.table = w.HTML()
        self.table.add_class("modalnb-pairing-table")
        self.fig = figure(340, title="MAC: test modes against model modes")
        self.fig.add_heatmap(z=[[0]], zmin=0, zmax=1, colorscale=[list(s) for s in PALETTE.mac_scale],
                             colorbar={"title": "MAC"}, texttemplate="%{z:.2f}")
        self.fig.update_layout(xaxis_title="model mode", yaxis_title="test mode")
        self._box([w.HTML("<b>Model against test.</b> The fitted modes paired with an analysis "
                          "model's modes by MAC over the common node-directions and by frequency."),
                   w.HBox([self.modes_csv, self.shapes_csv]), self.button, self.table,
                   fig_box(self.fig, "modalnb-pairing-figure"), self.note])

    def set_model(self, model: Any) -> bool:
        """Compare with `model` ((modes_csv, shapes_csv) or a Dataset); True when it worked."""
        try:
            self.analysis.compare_with_model(model)
        except ModalnbError as exc:
            self.note.value = _note(" ".join(str(exc).split()), "error")
            return False
        self.refresh()
        return True

    def refresh(self) -> None:
        a = self.analysis
        if a.result is None:
            return
        try:
            p = a.model_pairing()
        except ModalnbError as exc:
            self.note.value = _note(" ".join(str(exc).split()), "error")
            return
        if p is None:
            self.table.value = "<i>No model yet: name its two CSV files and press compare.</i>"
            self.note.value = ""
            return
        rows = [{"test": int(p["test_mode"].values[i]), "model": int(p["model_mode"].values[i]),
                 "mac": format_quantity(float(p["mac"].values[i]), "ratio"),
                 "ft": format_quantity(float(p["test_frequency_hz"].values[i]), "frequency_hz",
                                       unit=False),
                 "fm": format_quantity(float(p["model_frequency_hz"].values[i]), "frequency_hz",
                                       unit=False),
                 "df": format_quantity(float(p["frequency_difference_pct"].values[i]) / 100.0,
                                       "percent", unit=False),
                 "same": bool(p["same_mode"].values[i])} for i in range(p.sizes["pair"])]
        self.table.value = (f"<div class='modalnb-pairing-source'>model: {esc(a.test_model_source)}; "
                            f"{p.sizes['node_direction']} common node-directions</div>" + table_html(
                                rows, [("test", "test mode"), ("model", "model mode"), ("mac", "MAC"),
                                       ("ft", "test [Hz]"), ("fm", "model [Hz]"),
                                       ("df", "difference [%]"), ("same", "same mode")],
                                "modalnb-pairing-rows", "modalnb-pair"))
        with self.fig.batch_update():
            tr = self.fig.data[0]
            tr.z = p["mac_matrix"].values
            tr.x = [f"model {m}" for m in p["model"].values.tolist()]
            tr.y = [f"test {m}" for m in p["test"].values.tolist()]
        unpaired = str(p.attrs.get("unpaired", "none"))
        self.note.value = _note(f"without a partner: {unpaired}") if unpaired != "none" else ""


def model_pairing(analysis: Analysis, model: Any = None) -> ModelPairingView:
    """A model-against-test view of `analysis`, comparing with `model` when given.

    Parameters
    ----------
    analysis : Analysis
        The analysis whose modal table is the test.
    model : (modes_csv, shapes_csv) or xarray.Dataset, optional
        The analysis model (see :func:`modalnb.pair_modes`); later through the view's boxes
        or :meth:`ModelPairingView.set_model`.

    Examples
    --------
    >>> from modalnb.widgets import model_pairing             # doctest: +SKIP
    >>> model_pairing(analysis, ("fe_modes.csv", "fe_shapes.csv"))  # doctest: +SKIP
    """
    view = ModelPairingView(analysis)
    if model is not None:
        if isinstance(model, (tuple, list)) and len(model) == 2:
            view.modes_csv.value, view.shapes_csv.value = (str(model[0]), str(model[1]))
        view.set_model(model)
    return view
