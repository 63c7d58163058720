"""Headless tests of the FRF views (coherence, measured against model FRF, model against
test) and the report's FRF section, built on the demo analysis.

Sources of the expected values:

* what a view draws is compared with ``modalnb.frf`` / ``modalnb.synthesise_frf`` /
  ``modalnb.pair_modes`` called here on the same records and table (the views must show
  those numbers, in dB = 20 log10 |H| and degrees, nothing of their own);
* the demo's finite-element truth (``demo_truth.json``: Euler-Bernoulli cantilever, FE
  model with consistent mass; poles and residues per unit force impulse) gives the
  pole-residue FRF ``H(w) = sum_k R_k / (i w - lambda_k) + conj(R_k) / (i w -
  conj(lambda_k))`` (e.g. Ewins 2000, *Modal Testing*, ch. 2; from memory), evaluated here
  in numpy: the measured and model curves drawn must follow it near mode 1;
* the same truth's mode shapes, written as an analysis model's CSV files, must pair one to
  one with the fitted modes at MAC >= 0.99 (MAC: Allemang & Brown 1982);
* an exponential window ``e^(-t/tau)`` moves every pole by ``-1/tau`` (Laplace shift
  theorem); the model drawn for windowed records must carry that shift.
"""

from __future__ import annotations

import csv
import re

import numpy as np
import pytest

import modalnb
from modalnb._display import PALETTE
from modalnb.demo import load_demo, load_demo_truth
from modalnb.export import frf_section_html
from modalnb.export.frf_report import _figure
from modalnb.frf_compare import compare_frf
from modalnb.session import Analysis
from modalnb.widgets import CoherenceView, FrfCheckView, ModelPairingView, model_pairing


@pytest.fixture(scope="module")
def analysis():
    return Analysis(load_demo())


def _truth_frf(f_hz: np.ndarray, channel: int, modes=None) -> np.ndarray:
    """Pole-residue FRF of the demo's FE truth (recorded residues: sensor signs included)."""
    s = 2j * np.pi * np.asarray(f_hz)
    h = np.zeros(s.shape, complex)
    for m in load_demo_truth()["modes"] if modes is None else modes:
        lam = m["pole_real"] + 1j * m["pole_imag"]
        r = m["residue_real_recorded"][channel] + 1j * m["residue_imag_recorded"][channel]
        h += r / (s - lam) + np.conj(r) / (s - np.conj(lam))
    return h


def _at(freq: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Indices of the plotted frequencies `x` on the full grid `freq` (exact matches)."""
    idx = np.searchsorted(freq, x)
    assert np.array_equal(freq[idx], x)  # every plotted point is a grid point
    return idx


def test_frf_check_draws_frf_and_synthesise_frf(analysis):
    a = analysis
    view = FrfCheckView(a)
    try:
        assert view.excitation.value == "n40+Z"
        assert view.channel.value == "boom-6"  # the channel at the excitation point (demo truth)
        measured = modalnb.frf(a.records, accept=a.result)
        model = modalnb.synthesise_frf(a.result, measured, excitation="n40+Z")
        f = measured["frequency"].values
        for ch in a.channels:
            view.channel.value = ch
            c = a.channels.index(ch)
            h, g = measured["frf"].values[0, c], model["frf"].values[0, c]
            tr = view.traces()
            x, y = tr["measured"]
            idx = _at(f, x)
            np.testing.assert_allclose(y, 20 * np.log10(np.abs(h[idx])), rtol=0, atol=1e-9)
            np.testing.assert_allclose(tr["model"][1], 20 * np.log10(np.abs(g[idx])), atol=1e-9)
            np.testing.assert_allclose(tr["measured phase"][1], np.degrees(np.angle(h[idx])), atol=1e-9)
            np.testing.assert_allclose(tr["model phase"][1], np.degrees(np.angle(g[idx])), atol=1e-9)
            assert x.size <= 2000  # display decimation
        # the peaks survive the decimation: the largest measured magnitude in the band is drawn
        band = (f > 5) & (f < 1800)
        assert np.max(tr["measured"][1]) == pytest.approx(np.max(20 * np.log10(np.abs(
            measured["frf"].values[0, -1][band]))), abs=1e-9)
        assert view.note.value == ""  # not windowed, every mode in the model
    finally:
        view.close()


def test_frf_check_follows_the_fe_truth_near_each_mode(analysis):
    """Outside truth: the demo's FE poles and residues, at the driving point (boom-6).
    The model drawn is within 0.5 dB of the truth FRF within three half-power bandwidths
    of every mode (|f - f_k| <= 3 zeta_k f_k; the truth sum leaves out the cut-off modes'
    tails: our tolerance); the measured H1 drawn, at the bin nearest each natural
    frequency, within 1.5 dB (noise on 6 averaged hits, force noise over the record)."""
    view = FrfCheckView(analysis)
    try:
        view.channel.value = "boom-6"
        tr = view.traces()
        for m in load_demo_truth()["modes"]:
            x, y = tr["model"]
            near = np.abs(x - m["frequency_hz"]) <= 3 * m["damping_ratio"] * m["frequency_hz"]
            assert near.sum() >= 2
            truth_db = 20 * np.log10(np.abs(_truth_frf(x[near], 5)))
            assert np.max(np.abs(y[near] - truth_db)) < 0.5, (m["mode"], y[near] - truth_db)
            x, y = tr["measured"]
            i = int(np.argmin(np.abs(x - m["frequency_hz"])))
            assert abs(x[i] - m["frequency_hz"]) <= 2.5  # a point of the peak is drawn (buckets of 5 bins)
            assert abs(y[i] - 20 * np.log10(np.abs(_truth_frf(x[i:i + 1], 5)[0]))) < 1.5, m["mode"]
        # the wrong channel's truth is far off: the check can fail
        x, y = tr["model"]
        i = int(np.argmin(np.abs(x - load_demo_truth()["modes"][0]["frequency_hz"])))
        assert abs(y[i] - 20 * np.log10(np.abs(_truth_frf(x[i:i + 1], 0)[0]))) > 10
    finally:
        view.close()


def _coherence_is_force_noise_limited(records, used, coherence, f):
    """Outside truth for the coherence shown: at each resonance the response noise is
    negligible and the force noise over the whole record (no force window) dominates, so
    (Bendat & Piersol 2010, ch. 6, input noise; from memory) ``1 - gamma^2 ~ n N s^2 /
    sum |F_i|^2``: n hits, N samples, s the force noise std of demo_truth.json, F_i the
    DFT (fs times the Fourier integral) of hit i's half-sine pulse ``P (2T/pi) cos(pi f
    T) / (1 - (2 f T)^2)`` (peak P, duration T from the truth). The measured ``1 - gamma^2``
    is one draw of that noise (chi-square with 2n degrees of freedom): within a factor 0.25
    to 2.5 (about a 99 % band for n = 6; our arithmetic). The same on every channel, as
    the force noise is common to all."""
    truth = load_demo_truth()
    fs, n_t = truth["sample_rate_hz"], records.sizes["time"]
    sigma = truth["noise"]["force_std_n"]
    for mode in truth["modes"]:
        i = int(np.argmin(np.abs(f - mode["frequency_hz"])))
        s = sum(abs(p["peak_n"] * 2 * p["duration_s"] / np.pi * np.cos(np.pi * f[i] * p["duration_s"])
                    / (1 - (2 * f[i] * p["duration_s"]) ** 2) * fs) ** 2
                for hit in truth["hits"] if hit["hit"] in used for p in hit["pulses"])
        predicted = len(used) * n_t * sigma**2 / s
        lost = 1 - coherence[:, i]
        assert np.all((lost > 0.25 * predicted) & (lost < 2.5 * predicted)), (mode["mode"], lost, predicted)
        assert np.ptp(coherence[:, i]) < 0.01


def test_coherence_view_updates_when_a_hit_is_rejected():
    a = Analysis(load_demo())
    view = CoherenceView(a)
    try:
        used = a.accepted_hits()
        f = a.measured_frf()["frequency"].values
        before = modalnb.frf(a.records, accept={h: h in used for h in a.hits})["coherence"].values
        x, y = np.asarray(view.fig.data[0].x), np.asarray(view.fig.data[0].y)
        np.testing.assert_array_equal(y, before[0, -1][_at(f, x)])
        assert f"({len(used)} hits)" in view.fig.data[0].name
        _coherence_is_force_noise_limited(a.records, used, before[0], f)
        drop = used[0]
        assert a.set_hit(drop, False)
        after = modalnb.frf(a.records, accept={h: h in used and h != drop for h in a.hits})
        x, y = np.asarray(view.fig.data[0].x), np.asarray(view.fig.data[0].y)
        np.testing.assert_array_equal(y, after["coherence"].values[0, -1][_at(f, x)])
        assert f"({len(used) - 1} hits)" in view.fig.data[0].name
        assert not np.array_equal(after["coherence"].values, before)
        # another channel: its own coherence
        view.channel.value = "boom-1"
        x, y = np.asarray(view.fig.data[0].x), np.asarray(view.fig.data[0].y)
        np.testing.assert_array_equal(y, after["coherence"].values[0, 0][_at(f, x)])
    finally:
        view.close()
    assert a._listeners == []


def test_views_without_force_say_so_in_one_line():
    a = Analysis(load_demo().drop_vars("force"))
    for cls in (CoherenceView, FrfCheckView):
        view = cls(a)
        text = re.sub(r"<[^>]+>", "", view.note.value)
        assert "no variable 'force'" in text.replace("&#x27;", "'") and "\n" not in text
        view.close()


def _model_files(tmp_path, order=(3, 1, 0, 2), shift=0.02):
    """The demo's FE truth as an analysis model: modes renumbered 11.. in another order,
    frequencies 2 % high (a model a little stiff), shapes in the global +Z frame."""
    truth = load_demo_truth()
    modes, shapes = tmp_path / "model_modes.csv", tmp_path / "model_shapes.csv"
    with open(modes, "w", newline="") as fm, open(shapes, "w", newline="") as fs:
        wm, ws = csv.writer(fm), csv.writer(fs)
        wm.writerow(["mode", "frequency_hz"])
        ws.writerow(["mode", "node", "direction", "value"])
        for j, k in enumerate(order):
            m = truth["modes"][k]
            wm.writerow([11 + j, m["frequency_hz"] * (1 + shift)])
            for node, amp, ph in zip(truth["channel_nodes"], m["amplitude"], m["phase_deg"], strict=True):
                ws.writerow([11 + j, node, "+Z", amp * np.cos(np.radians(ph))])
    return modes, shapes


def test_model_pairing_view_pairs_with_the_fe_truth(analysis, tmp_path):
    modes, shapes = _model_files(tmp_path)
    view = model_pairing(analysis, (modes, shapes))
    try:
        p = modalnb.pair_modes(analysis.result, (modes, shapes))
        html = view.table.value
        for i in range(p.sizes["pair"]):
            test_mode = int(re.search(rf'class="modalnb-pair-{i + 1}-test">(\d+)<', html).group(1))
            model_mode = int(re.search(rf'class="modalnb-pair-{i + 1}-model">(\d+)<', html).group(1))
            mac = float(re.search(rf'class="modalnb-pair-{i + 1}-mac">([\d.]+)<', html).group(1))
            df = float(re.search(rf'class="modalnb-pair-{i + 1}-df">(-?[\d.]+)<', html).group(1))
            # outside truth: model mode 11 + j is truth mode order[j]; fitted mode k is truth mode k-1
            assert model_mode == 11 + (3, 1, 0, 2).index(test_mode - 1)
            assert mac >= 0.99
            assert df == pytest.approx(-100 * 0.02 / 1.02, abs=0.6)  # model 2 % stiff
        np.testing.assert_array_equal(np.asarray(view.fig.data[0].z), p["mac_matrix"].values)
        assert analysis.test_model_source.endswith("model_shapes.csv")
    finally:
        view.close()


def test_model_pairing_view_bad_file_is_one_line(analysis, tmp_path):
    modes, shapes = _model_files(tmp_path)
    shapes.write_text(shapes.read_text() + "11,n99,+Z,abc\n")
    view = ModelPairingView(analysis)
    try:
        view.modes_csv.value, view.shapes_csv.value = str(modes), str(shapes)
        view.button.click()
        text = re.sub(r"<[^>]+>", "", view.note.value).replace("&#x27;", "'")
        assert "model_shapes.csv" in text and "row 26" in text and "'abc' is not a number" in text
    finally:
        view.close()


def test_windowed_records_labelled_and_model_carries_the_window(tmp_path):
    ds = load_demo()
    tau = 0.4
    t = ds["time"].values
    ds = ds.assign(response=ds["response"] * np.where(t >= 0, np.exp(-np.clip(t, 0, None) / tau), 1.0))
    ds.attrs["exponential_window_tau_s"] = tau
    a = Analysis(ds)
    view = FrfCheckView(a)
    try:
        assert "exponentially windowed" in view.note.value and "tau = 400 ms" in view.note.value
        measured = modalnb.frf(ds, accept=a.result)
        shifted = modalnb.synthesise_frf(a.result, measured, excitation="n40+Z", windowed=True)
        x, y = view.traces()["model"]
        idx = _at(measured["frequency"].values, x)
        np.testing.assert_allclose(y, 20 * np.log10(np.abs(shifted["frf"].values[0, -1][idx])), atol=1e-9)
        # outside truth: the window's pole shift -1/tau applied to the FE truth (Laplace shift)
        truth = load_demo_truth()["modes"]
        moved = [{**m, "pole_real": m["pole_real"] - 1 / tau} for m in truth]
        m1 = truth[0]
        near = np.abs(x - m1["frequency_hz"]) <= m1["frequency_hz"] * m1["damping_ratio"]
        for name in ("measured", "model"):
            yy = view.traces()[name][1][near]
            assert np.max(np.abs(yy - 20 * np.log10(np.abs(_truth_frf(x[near], 5, moved))))) < 1.5, name
    finally:
        view.close()


def test_report_fragment_one_plot_per_channel_and_no_plotly_js(analysis):
    a = analysis
    part = frf_section_html(a.records, a.result)
    plots = re.findall(r'class="modalnb-frf-plot" data-excitation="([^"]*)" data-channel="([^"]*)"', part)
    assert plots == [("n40+Z", ch) for ch in a.channels]
    assert part.count("Plotly.newPlot") == len(a.channels)
    assert len(part) < 2_000_000 and "plotly.js v" not in part  # the report embeds plotly.js once
    assert part.startswith('<section class="modalnb-frf-section">') and part.endswith("</section>")
    # the figure of one channel holds frf() / synthesise_frf() / coherence, as drawn
    both = compare_frf(a.records, a.result)
    measured = modalnb.frf(a.records, accept=a.result)
    model = modalnb.synthesise_frf(a.result, measured, excitation="n40+Z")
    fig = _figure(both, 0, 2, None)
    f = measured["frequency"].values
    x = np.asarray(fig.data[0].x)
    idx = _at(f, x)
    np.testing.assert_allclose(np.asarray(fig.data[0].y), 20 * np.log10(np.abs(measured["frf"].values[0, 2][idx])),
                               atol=1e-9)
    np.testing.assert_allclose(np.asarray(fig.data[1].y), 20 * np.log10(np.abs(model["frf"].values[0, 2][idx])),
                               atol=1e-9)
    xc = np.asarray(fig.data[4].x)
    np.testing.assert_array_equal(np.asarray(fig.data[4].y), measured["coherence"].values[0, 2][_at(f, xc)])
    assert [tr.line.color for tr in fig.data[:2]] == [PALETTE.measured, PALETTE.model]


def test_report_fragment_without_force_says_so():
    ds = load_demo()
    table = modalnb.fit_modes(ds)
    part = frf_section_html(ds.drop_vars("force"), table)
    assert "modalnb-frf-plot" not in part and "No FRF" in part
