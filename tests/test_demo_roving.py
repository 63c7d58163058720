"""The roving-hammer demo: its FE model against the handbook, the fit against its FE truth.

Outside truths:

* Euler-Bernoulli beam eigenvalues ``beta_n L`` (Blevins 1979, *Formulas for Natural
  Frequency and Mode Shape*, table 8-1): clamped-free 1.87510407, 4.69409113; free-free
  4.73004074, 7.85320462 (roots of ``cos x cosh x = -1`` and ``= 1``), with
  ``f = (beta L)^2 / (2 pi L^2) sqrt(E I / (rho A))``;
* the first axial mode of a clamped-free bar, ``f = sqrt(E / rho) / (4 L)`` (e.g. Blevins
  1979, table 8-16; from memory);
* the demo's truth is ``scipy.linalg.eigh(K, M)`` of the FE model (independent of the
  estimation engine): the fit's frequencies and damping ratios are compared with it.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

import modalnb
from modalnb.demo import beam_line_model, frame_model, roving_campaign, write_roving_demo
from modalnb.geometry import NodesPlacedWarning, read_geometry, structure_geometry

# steel tube 50 x 50 x 3 (the demo's section), 1 m long
E, RHO = 200e9, 7850.0
B, T = 0.05, 0.003
AREA = B * B - (B - 2 * T) ** 2
INERTIA = (B**4 - (B - 2 * T) ** 4) / 12


def _euler_bernoulli_hz(beta_l: float, length: float) -> float:
    return beta_l**2 / (2 * math.pi * length**2) * math.sqrt(E * INERTIA / (RHO * AREA))


@pytest.mark.parametrize(("clamped", "first", "beta_l"), [
    (True, 0, 1.87510407),   # Blevins 1979, table 8-1, clamped-free
    (True, 1, 4.69409113),
    (False, 3, 4.73004074),  # free-free: three rigid-body modes first (two translations, a rotation)
    (False, 4, 7.85320462),
])
def test_frame_element_beam_against_euler_bernoulli_tables(clamped, first, beta_l):
    f = beam_line_model(1.0, 24, ea=E * AREA, ei=E * INERTIA, rho_a=RHO * AREA, clamped=clamped)
    expected = _euler_bernoulli_hz(beta_l, 1.0)
    assert f[first] == pytest.approx(expected, rel=2e-5)
    if not clamped:
        assert np.all(f[:3] < 1e-3 * expected)  # the rigid-body modes


def test_frame_element_axial_mode_against_the_bar_formula():
    f = beam_line_model(1.0, 24, ea=E * AREA, ei=E * INERTIA, rho_a=RHO * AREA, clamped=True)
    axial = math.sqrt(E / RHO) / 4.0  # clamped-free bar, quarter wave
    assert np.min(np.abs(f - axial)) / axial < 1e-3


def test_frame_model_layout():
    mdl = frame_model()
    assert len(mdl.nodes) == 27 and mdl.fixed == ("n01", "n27")
    assert np.all(mdl.shapes[:, [0, 26], :] == 0)  # welded to the base plate
    assert mdl.xyz[8].tolist() == [0.0, 0.0, 1.0] and mdl.xyz[18].tolist() == [1.2, 0.0, 1.0]


@pytest.fixture(scope="module")
def roving():
    ds, truth, mdl = roving_campaign()
    result = modalnb.fit_modes(ds, band=(10.0, 880.0))
    return ds, truth, mdl, result


def test_records_carry_nodes_directions_positions_and_hits(roving):
    ds, truth, _, _ = roving
    assert ds.sizes["hit"] == 75 and ds.sizes["channel"] == 2
    assert set(ds["excitation_node"].values.tolist()) == {f"n{i:02d}" for i in range(2, 27)}
    counts = {n: int((ds["excitation_node"].values == n).sum()) for n in set(ds["excitation_node"].values)}
    assert set(counts.values()) == {3}
    assert ds["node"].values.tolist() == ["n14", "n09"]
    assert ds["direction"].values.tolist() == ["+Z", "+X"]
    assert ds["z"].values.tolist() == [1.0, 1.0] and ds["x"].values.tolist() == [0.6, 0.0]
    drive = (ds["excitation_node"] == "n14") & (ds["excitation_direction"] == "+Z")
    assert int(drive.sum()) == 3  # the driving point
    assert truth["driving_point"] == "n14+Z"


def test_fitted_frequencies_and_damping_match_the_fe_truth(roving):
    _, truth, _, result = roving
    true_f = np.array([m["frequency_hz"] for m in truth["modes"]])
    true_z = np.array([m["damping_ratio"] for m in truth["modes"]])
    est_f = result["frequency_hz"].values
    assert est_f.size == true_f.size
    np.testing.assert_allclose(np.sort(est_f), true_f, rtol=1e-4)
    np.testing.assert_allclose(result["damping_ratio"].values[np.argsort(est_f)], true_z, rtol=0.05)


def test_the_double_hit_is_left_out(roving):
    _, truth, _, result = roving
    bad = truth["double_hit"]["hit"]
    acc = dict(zip(result["hit"].values.tolist(), result["hit_accepted"].values.tolist(), strict=True))
    assert not acc[bad]
    assert sum(bool(v) for v in acc.values()) == 74


def test_geometry_files_cover_every_node(tmp_path, roving):
    ds, _, mdl, result = roving
    paths = write_roving_demo(tmp_path)
    g = read_geometry(paths["nodes"], paths["lines"])
    assert g.nodes == mdl.nodes and len(g.lines) == 26
    with warnings.catch_warnings():
        warnings.simplefilter("error", NodesPlacedWarning)
        full = structure_geometry(result, geometry=g, records=ds)
    assert full.placed == ()
    reread = modalnb.open_records(paths["records"])
    assert reread["excitation_node"].values.tolist() == ds["excitation_node"].values.tolist()
    # the FE modes in pair_modes' layout: every fitted mode pairs with its FE mode (frequency
    # from scipy.linalg.eigh, independent of the fit)
    pair = modalnb.pair_modes(result, (paths["model_modes"], paths["model_shapes"]))
    assert pair["test_mode"].values.tolist() == pair["model_mode"].values.tolist() == [1, 2, 3, 4, 5, 6]
    assert np.all(np.abs(pair["frequency_difference_pct"].values) < 0.01)


def test_node_shapes_and_scaled_shapes_match_the_fe_truth(roving):
    """MAC >= 0.99 against the FE shapes over every node; mass-normalised shapes within 5 %.

    The table's node shapes are along the positive global axis (direction signs applied,
    issue 12 §1), so the truth value at a '-X' node is negated back to +X here.
    """
    _, truth, _, result = roving
    nodes = [str(n) for n in result["node_name"].values]
    dirs = [str(d) for d in result["node_direction"].values]

    def along_table_axis(shape: dict, node: str, direction: str) -> float:
        # the truth is keyed by the direction struck or sensed ('n19-X'); the table is along
        # the positive axis of that direction ('+X'): a '-' key is negated back
        axis = direction.lstrip("+-")
        if f"{node}+{axis}" in shape:
            return shape[f"{node}+{axis}"]
        return -shape[f"{node}-{axis}"]

    for m in truth["modes"]:
        k = int(np.argmin(np.abs(result["frequency_hz"].values - m["frequency_hz"])))
        phi = np.array([along_table_axis(m["mass_normalised_shape"], n, d)
                        for n, d in zip(nodes, dirs, strict=True)])
        psi = (result["node_shape_amplitude"].values[k]
               * np.exp(1j * np.deg2rad(result["node_shape_phase_deg"].values[k])))
        mac = abs(np.vdot(phi, psi)) ** 2 / (np.vdot(phi, phi).real * np.vdot(psi, psi).real)
        assert mac >= 0.99, (m["mode"], mac)
        scaled = result["node_shape_mass_normalised"].values[k]
        s = np.sign(np.dot(scaled, phi))
        big = np.abs(phi) > 0.2 * np.abs(phi).max()
        np.testing.assert_allclose(s * scaled[big], phi[big], rtol=0.05)
        # modal mass of the unit-maximum shape: 1 / max|phi|^2 (phi^T M phi = 1)
        assert float(result["modal_mass_kg"].values[k]) == pytest.approx(1 / np.abs(phi).max() ** 2,
                                                                        rel=0.05)


def test_cli_roving_demo_writes_the_table_the_view_and_the_data(tmp_path, capsys):
    from modalnb.cli import main

    out = tmp_path / "rov"
    assert main(["demo", "--roving", "--out", str(out), "--quiet"]) == 0
    text = capsys.readouterr().out
    assert "74 of 75 hits used" in text and "hit 14" in text  # the double hit, left out
    assert "finite-element model, scipy.linalg.eigh" in text and "not found" not in text
    for name in ("modes.csv", "report.html", "shape_view.html", "roving-data/frame_nodes.csv",
                 "roving-data/roving_truth.json"):
        assert (out / name).is_file(), name
    page = (out / "shape_view.html").read_text(encoding="utf-8")
    assert "modalnb-shape-placed" not in page  # every node has a position (the geometry table)
    report = (out / "report.html").read_text(encoding="utf-8")
    # the report carries the moving shape view on the frame's geometry and the FRF section
    assert 'class="modalnb-shape-view"' in report and "modalnb-shape-placed" not in report
    assert "modalnb-frf-section" in report and "No FRF" not in report
    # shapes over nodes, one table per mode, every node of the frame in each
    assert report.count('class="node-shapes"') == 6 and report.count("<td>n14</td>") >= 6
    assert main(["demo", "--roving", "--campaign", "--out", str(tmp_path / "x")]) != 0
