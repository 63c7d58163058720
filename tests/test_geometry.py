"""Geometry tables, positions from records, placed nodes and deformed positions.

Expected values are written out by hand (the arithmetic of xyz + s Re(a e^{j(phi+theta)})
with the cosines of 0, 90 and 180 degrees), never produced by modalnb.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import xarray as xr

from modalnb.geometry import (
    Geometry,
    GeometryError,
    NodesPlacedWarning,
    deformed_positions,
    geometry_from_records,
    node_motion,
    read_geometry,
    structure_geometry,
)


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _one_line(exc: pytest.ExceptionInfo) -> str:
    msg = str(exc.value)
    assert "\n" not in msg
    return msg


GOOD = "node,x,y,z\nA,0,0,0\nB,1,0,0\nC,1,0,0.5\n"


def test_reads_nodes_and_lines(tmp_path):
    n = _write(tmp_path, "nodes.csv", GOOD)
    ln = _write(tmp_path, "lines.csv", "node_a,node_b\nA,B\nB,C\n")
    g = read_geometry(n, ln)
    assert g.nodes == ("A", "B", "C")
    assert g.lines == (("A", "B"), ("B", "C"))
    assert g.xyz.tolist() == [[0, 0, 0], [1, 0, 0], [1, 0, 0.5]]
    assert g.span == 1.0


@pytest.mark.parametrize(("text", "words"), [
    ("node,x,y\nA,0,0\n", ["nodes.csv", "row 1", "'z'"]),
    ("node,x,y,z\nA,0,0,0\nA,1,0,0\n", ["nodes.csv", "row 3", "'A'", "twice", "row 2"]),
    ("node,x,y,z\nA,0,0,0\nB,1,zero,0\n", ["nodes.csv", "row 3", "y", "'zero'", "not a number"]),
    ("node,x,y,z\nA,0,0,0\nB,nan,0,0\n", ["nodes.csv", "row 3", "x", "not finite"]),
    ("node,x,y,z\nA,0,0,0\n,1,0,0\n", ["nodes.csv", "row 3", "empty"]),
    ("node,x,y,z\nA,0,0,0\nB,1,0\n", ["nodes.csv", "row 3", "cells"]),
    ("node,x,y,z\n", ["nodes.csv", "no nodes"]),
])
def test_bad_node_rows_are_one_line_errors_naming_the_row(tmp_path, text, words):
    p = _write(tmp_path, "nodes.csv", text)
    with pytest.raises(GeometryError) as exc:
        read_geometry(p)
    msg = _one_line(exc)
    for word in words:
        assert word in msg, (word, msg)


@pytest.mark.parametrize(("text", "words"), [
    ("node_a,node_b\nA,B\nB,D\n", ["lines.csv", "row 3", "node_b", "'D'", "not a node"]),
    ("node_a,node_b\nA,A\n", ["lines.csv", "row 2", "itself"]),
    ("node_a,nodeb\nA,B\n", ["lines.csv", "row 1", "'node_b'"]),
])
def test_bad_line_rows_are_one_line_errors_naming_the_row(tmp_path, text, words):
    n = _write(tmp_path, "nodes.csv", GOOD)
    ln = _write(tmp_path, "lines.csv", text)
    with pytest.raises(GeometryError) as exc:
        read_geometry(n, ln)
    msg = _one_line(exc)
    for word in words:
        assert word in msg, (word, msg)


def test_missing_file_names_it(tmp_path):
    with pytest.raises(GeometryError, match="nowhere.csv: no such file"):
        read_geometry(tmp_path / "nowhere.csv")


def _table(nodes, dirs, amp, ph, *, over="channel", xyz=None):
    """A small modal table: one mode, shapes over channels (or node shapes)."""
    if over == "channel":
        coords = {"mode": [1], "channel": [f"c{i}" for i in range(len(nodes))],
                  "node": ("channel", nodes), "direction": ("channel", dirs)}
        if xyz is not None:
            for k, c in enumerate("xyz"):
                coords[c] = ("channel", [p[k] for p in xyz])
        return xr.Dataset({"shape_amplitude": (("mode", "channel"), [amp]),
                           "shape_phase_deg": (("mode", "channel"), [ph])}, coords=coords)
    return xr.Dataset({"node_shape_amplitude": (("mode", "node"), [amp]),
                       "node_shape_phase_deg": (("mode", "node"), [ph])},
                      coords={"mode": [1], "node": nodes, "node_direction": ("node", dirs)})


def test_positions_from_records_and_a_disagreeing_triaxial_sensor():
    t = _table(["A", "A", "B"], ["+X", "+Z", "+Z"], [1, 1, 1], [0, 0, 0],
               xyz=[(0, 0, 0), (0, 0, 0), (2, 0, 0)])
    g = geometry_from_records(t)
    assert g.nodes == ("A", "B") and g.xyz.tolist() == [[0, 0, 0], [2, 0, 0]]
    bad = t.assign_coords(x=("channel", [0.0, 0.3, 2.0]))
    with pytest.raises(GeometryError, match="channel 'c1' puts node 'A'"):
        geometry_from_records(bad)


def test_nodes_without_position_are_placed_on_a_line_with_a_warning():
    g_user = Geometry(("A", "B"), np.array([[0.0, 0, 0], [2.0, 0, 1.0]]), (("A", "B"),))
    t = _table(["A", "n10", "n2"], ["+Z", "+Z", "+Z"], [1, 1, 1], [0, 0, 0], over="node")
    with pytest.warns(NodesPlacedWarning, match=r"2 node\(s\).*n2, n10"):
        g = structure_geometry(t, geometry=g_user)
    assert g.placed == ("n2", "n10")  # natural order: 2 before 10
    # on a line along x below the known nodes: z = 0 - 0.2 * span (span 2 m), x from 0 to 2
    assert g.xyz[g.index("n2")].tolist() == pytest.approx([0.0, 0.0, -0.4])
    assert g.xyz[g.index("n10")].tolist() == pytest.approx([2.0, 0.0, -0.4])
    assert ("n2", "n10") in g.lines and ("A", "B") in g.lines
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert structure_geometry(t, geometry=g, warn=True).placed == ()  # every node known


def test_hit_nodes_of_the_records_count_as_nodes():
    t = _table(["A"], ["+Z"], [1], [0])
    rec = xr.Dataset(coords={"hit": [1, 2], "excitation_node": ("hit", ["A", "H"])})
    g_user = Geometry(("A",), np.zeros((1, 3)))
    with pytest.warns(NodesPlacedWarning, match="H"):
        g = structure_geometry(t, geometry=g_user, records=rec)
    assert g.placed == ("H",)


def test_deformed_positions_by_hand():
    g = Geometry(("A", "B", "C"), np.array([[0.0, 0, 0], [1.0, 0, 0], [1.0, 0, 0.5]]))
    # A along +X with 1 at 0 deg; B along -Z (sign already applied by the table) 0.5 at 180 deg;
    # C along +Y 0.8 at 90 deg
    t = _table(["A", "B", "C"], ["+X", "-Z", "+Y"], [1.0, 0.5, 0.8], [0.0, 180.0, 90.0])
    s = 0.2
    at0 = deformed_positions(g, t, 1, 0.0, scale=s)
    # Re(a e^{j phi}) at theta = 0: A 1, B 0.5 cos 180 = -0.5, C 0.8 cos 90 = 0
    np.testing.assert_allclose(at0, [[0.2, 0, 0], [1.0, 0, -0.1], [1.0, 0, 0.5]], atol=1e-12)
    at90 = deformed_positions(g, t, 1, math.pi / 2, scale=s)
    # theta = 90 deg: A cos 90 = 0, B 0.5 cos 270 = 0, C 0.8 cos 180 = -0.8
    np.testing.assert_allclose(at90, [[0, 0, 0], [1.0, 0, 0], [1.0, 0.8 * 0.2 * -1, 0.5]], atol=1e-12)
    # node shapes (over the dim ``node``) take precedence over channel shapes
    merged = xr.merge([t.drop_vars(["node", "direction"]),
                       _table(["C"], ["+Z"], [1.0], [0.0], over="node")])
    at = deformed_positions(g, merged, 1, 0.0, scale=s)
    np.testing.assert_allclose(at, [[0, 0, 0], [1.0, 0, 0], [1.0, 0, 0.7]], atol=1e-12)
    motion, measured = node_motion(g, merged, 1)
    assert measured.tolist() == [False, False, True]


def test_unknown_direction_and_mode_are_one_line_errors():
    g = Geometry(("A",), np.zeros((1, 3)))
    with pytest.raises(GeometryError, match="modal table's channel 'c0': direction 'up'"):
        node_motion(g, _table(["A"], ["up"], [1.0], [0.0]), 1)
    with pytest.raises(GeometryError, match="no mode 3"):
        node_motion(g, _table(["A"], ["+Z"], [1.0], [0.0]), 3)
