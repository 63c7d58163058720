"""Where the structure's nodes are, and how a mode moves them (pure numpy, no plotting).

A :class:`Geometry` is a list of named nodes with positions (x, y, z) and the lines
between them that draw the structure. It comes from

* a geometry table given by the user (:func:`read_geometry`), in modalnb's own simple
  layout of two CSV files (UTF-8, a header row, one row per node or line):

  - nodes: ``node,x,y,z`` -- a node name (text, as in the records' ``node`` and
    ``excitation_node`` coords) and its position in metres; more columns are ignored;
  - lines (optional): ``node_a,node_b`` -- one straight line per row between two nodes
    of the nodes file, drawn undeformed and deformed;

* the records themselves (:func:`geometry_from_records`): the per-channel coords
  ``node`` and ``x``, ``y``, ``z``;

* or both, merged with the nodes of a modal table by :func:`structure_geometry`: the
  user's table first, then the records' positions; a node of the modal table or a hit
  node found in neither is placed on a straight line beside the known nodes (with a
  :class:`NodesPlacedWarning`, so nobody mistakes the drawing for the structure).

:func:`node_motion` maps a mode's shape onto the nodes: each value of the shape lies
along its direction (``+X``, ``-Y``, ``Z``, ...). The modal table has applied the
direction signs already (its shapes are along the positive global axis), so only the
axis of a direction is used here. :func:`deformed_positions` gives the nodes' positions
at one phase of the cycle: ``xyz + scale * Re(psi exp(j phase))``.
"""

from __future__ import annotations

import csv
import math
import os
import warnings
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError, ModalnbWarning
from ._utils import did_you_mean, natural_key

__all__ = [
    "Geometry",
    "GeometryError",
    "NodesPlacedWarning",
    "NODE_COLUMNS",
    "LINE_COLUMNS",
    "read_geometry",
    "geometry_from_records",
    "structure_geometry",
    "table_nodes",
    "node_motion",
    "deformed_positions",
    "cycle_positions",
    "default_scale",
]

#: Columns of the nodes file, in this order.
NODE_COLUMNS = ("node", "x", "y", "z")
#: Columns of the lines file, in this order.
LINE_COLUMNS = ("node_a", "node_b")
#: The largest deformation of the default scale, as a fraction of the structure's span
#: (what makes a shape readable without hiding the undeformed structure; common practice).
DEFAULT_SCALE_FRACTION = 0.15

_AXES = {"X": 0, "Y": 1, "Z": 2}


class GeometryError(ModalnbError):
    """A geometry table (nodes or lines file) or the records' positions cannot be used."""


class NodesPlacedWarning(ModalnbWarning):
    """Some nodes have no position (geometry table or records): modalnb placed them on a line."""


@dataclass(frozen=True)
class Geometry:
    """Named nodes with positions and the lines between them.

    Attributes
    ----------
    nodes : tuple of str
        Node names, in order.
    xyz : numpy.ndarray
        Positions, shape (node, 3), in metres.
    lines : tuple of (str, str)
        Lines between two nodes of `nodes`.
    placed : tuple of str
        Nodes that had no position and were placed on a line by modalnb.
    source : str
        Where the positions came from (file names, ``"records"``), for titles and errors.

    Examples
    --------
    >>> g = Geometry(("a", "b"), np.array([[0.0, 0, 0], [1.0, 0, 0]]), (("a", "b"),))
    >>> g.index("b"), g.span
    (1, 1.0)
    """

    nodes: tuple[str, ...]
    xyz: np.ndarray
    lines: tuple[tuple[str, str], ...] = ()
    placed: tuple[str, ...] = ()
    source: str = ""
    _index: dict[str, int] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        xyz = np.asarray(self.xyz, dtype=float).reshape(len(self.nodes), 3)
        object.__setattr__(self, "xyz", xyz)
        object.__setattr__(self, "_index", {n: i for i, n in enumerate(self.nodes)})
        if len(self._index) != len(self.nodes):
            dup = next(n for n in self.nodes if self.nodes.count(n) > 1)
            raise GeometryError(f"{self.source or 'geometry'}: node {dup!r} is listed twice.")
        for a, b in self.lines:
            for n in (a, b):
                if n not in self._index:
                    raise GeometryError(
                        f"{self.source or 'geometry'}: line {a!r}-{b!r} names node {n!r}, "
                        "which has no position.")

    def index(self, node: str) -> int:
        """Row of `node` in :attr:`xyz` (:class:`GeometryError` for an unknown node)."""
        try:
            return self._index[str(node)]
        except KeyError:
            raise GeometryError(f"{self.source or 'geometry'}: no node {node!r}.") from None

    def __contains__(self, node: object) -> bool:
        return str(node) in self._index

    @property
    def span(self) -> float:
        """The largest extent of the nodes along x, y or z (m); 1.0 for a single point."""
        if not len(self.nodes):
            return 1.0
        s = float(np.max(np.ptp(self.xyz, axis=0)))
        return s if s > 0 else 1.0

    def line_index(self) -> np.ndarray:
        """The lines as pairs of rows of :attr:`xyz`, shape (line, 2), int."""
        return np.array([[self._index[a], self._index[b]] for a, b in self.lines],
                        dtype=int).reshape(-1, 2)


def _read_rows(path: Path, columns: Sequence[str]) -> list[tuple[int, dict[str, str]]]:
    """Rows of a CSV file as (row number in the file, {column: text}); header is row 1."""
    src = os.fspath(path)
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            reader = csv.reader(fh)
            header = next(reader, None)
            if header is None:
                raise GeometryError(f"{src}: the file is empty; expected a header "
                                    f"{','.join(columns)}.")
            header = [h.strip() for h in header]
            missing = [c for c in columns if c not in header]
            if missing:
                raise GeometryError(f"{src}: row 1: no column {missing[0]!r} (header {header}); "
                                    f"expected {','.join(columns)}.")
            where = [header.index(c) for c in columns]
            rows = []
            for line, cells in enumerate(reader, start=2):
                if not any(c.strip() for c in cells):
                    continue  # a blank row
                if len(cells) < len(header):
                    raise GeometryError(f"{src}: row {line}: {len(cells)} cells, the header has "
                                        f"{len(header)}.")
                rows.append((line, {c: cells[i].strip() for c, i in zip(columns, where, strict=True)}))
            return rows
    except FileNotFoundError:
        raise GeometryError(f"{src}: no such file.") from None
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise GeometryError(f"{src}: cannot be read ({type(exc).__name__}: {exc}).") from None


def read_geometry(nodes_csv: str | os.PathLike[str],
                  lines_csv: str | os.PathLike[str] | None = None) -> Geometry:
    """Read a geometry table: a nodes file ``node,x,y,z`` and an optional lines file ``node_a,node_b``.

    The layout is modalnb's own (module docstring): UTF-8 CSV with a header row; positions
    in metres; a line joins two nodes of the nodes file.

    Parameters
    ----------
    nodes_csv : path
        One row per node: name, x, y, z.
    lines_csv : path, optional
        One row per line: two node names.

    Returns
    -------
    Geometry

    Raises
    ------
    GeometryError
        One line naming the file and the row: a missing column, an empty or duplicate
        node name, a position that is not a finite number, a line naming an unknown node
        or joining a node to itself.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "nodes.csv").write_text("node,x,y,z\\nA,0,0,0\\nB,1.5,0,0\\n")
    >>> _ = (d / "lines.csv").write_text("node_a,node_b\\nA,B\\n")
    >>> g = read_geometry(d / "nodes.csv", d / "lines.csv")
    >>> g.nodes, g.lines, g.xyz[1].tolist()
    (('A', 'B'), (('A', 'B'),), [1.5, 0.0, 0.0])
    """
    src = os.fspath(nodes_csv)
    nodes: list[str] = []
    seen: dict[str, int] = {}
    xyz: list[list[float]] = []
    for line, row in _read_rows(Path(nodes_csv), NODE_COLUMNS):
        name = row["node"]
        if not name:
            raise GeometryError(f"{src}: row {line}: the node name is empty.")
        if name in seen:
            raise GeometryError(f"{src}: row {line}: node {name!r} is listed twice (first in "
                                f"row {seen[name]}).")
        pos = []
        for c in ("x", "y", "z"):
            try:
                v = float(row[c])
            except ValueError:
                raise GeometryError(f"{src}: row {line}: {c} {row[c]!r} of node {name!r} is not a "
                                    "number (metres).") from None
            if not math.isfinite(v):
                raise GeometryError(f"{src}: row {line}: {c} {row[c]!r} of node {name!r} is not "
                                    "finite.")
            pos.append(v)
        seen[name] = line
        nodes.append(name)
        xyz.append(pos)
    if not nodes:
        raise GeometryError(f"{src}: no nodes listed (a header row and one row per node).")
    lines: list[tuple[str, str]] = []
    source = src
    if lines_csv is not None:
        lsrc = os.fspath(lines_csv)
        source = f"{src} + {lsrc}"
        for line, row in _read_rows(Path(lines_csv), LINE_COLUMNS):
            a, b = row["node_a"], row["node_b"]
            for col, n in (("node_a", a), ("node_b", b)):
                if n not in seen:
                    raise GeometryError(f"{lsrc}: row {line}: {col} {n!r} is not a node of {src}."
                                        + _hint(n, nodes))
            if a == b:
                raise GeometryError(f"{lsrc}: row {line}: the line joins node {a!r} to itself.")
            lines.append((a, b))
    return Geometry(tuple(nodes), np.array(xyz), tuple(lines), source=source)


def _hint(name: str, options: Iterable[str]) -> str:
    return did_you_mean(name, list(options))


def _channel_nodes(ds: xr.Dataset) -> list[str]:
    """The node of every channel: the per-channel coord ``node`` (or ``channel_node``, the
    name a table with a ``node`` dimension may give it), else the channel name."""
    for name in ("node", "channel_node"):
        if name in ds.coords and tuple(ds[name].dims) == ("channel",):
            return [str(n) for n in ds[name].values]
    return [str(c) for c in ds["channel"].values]


def geometry_from_records(records: xr.Dataset) -> Geometry | None:
    """The sensor positions of a record set (or modal table): channel coords ``x, y, z``.

    The node of a channel is its ``node`` coord (else the channel name). Channels on one
    node (a triaxial sensor) must agree on its position. Returns None when the channels
    carry no ``x, y, z``.

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> g = geometry_from_records(load_demo())
    >>> g.nodes[:2], g.lines
    (('n11', 'n17'), ())
    """
    if not all(c in records.coords and tuple(records[c].dims) == ("channel",)
               for c in ("x", "y", "z")):
        return None
    channels = [str(c) for c in records["channel"].values]
    names = _channel_nodes(records)
    xyz = np.stack([np.asarray(records[c].values, dtype=float) for c in ("x", "y", "z")], axis=1)
    out: dict[str, np.ndarray] = {}
    for ch, n, p in zip(channels, names, xyz, strict=True):
        if not np.all(np.isfinite(p)):
            raise GeometryError(f"records: channel {ch!r}: position (x, y, z) = {p.tolist()} is not "
                                "finite.")
        if n in out and not np.allclose(out[n], p, rtol=0, atol=1e-9 * max(1.0, np.abs(p).max())):
            raise GeometryError(f"records: channel {ch!r} puts node {n!r} at {p.tolist()}, another "
                                f"channel at {out[n].tolist()}.")
        out.setdefault(n, p)
    return Geometry(tuple(out), np.array(list(out.values())), source="records")


def table_nodes(table: xr.Dataset, records: xr.Dataset | None = None) -> list[str]:
    """The nodes a modal table (and its records' hits) speaks of, in first-seen order.

    The table's ``node`` dimension (shapes over nodes) when present, else the channels'
    ``node`` coord (else the channel names); then the hit nodes (``excitation_node`` of
    the records, else of the table).

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> table_nodes(load_demo())
    ['n11', 'n17', 'n23', 'n29', 'n37', 'n40']
    """
    out: list[str] = []
    if "node" in table.dims:
        out += [str(n) for n in table["node"].values]
    elif "channel" in table.dims:
        out += _channel_nodes(table)
    for ds in (records, table):
        if ds is not None and "excitation_node" in ds.coords:
            out += [str(n) for n in ds["excitation_node"].values]
            break
    return list(dict.fromkeys(out))


def structure_geometry(table: xr.Dataset, *, geometry: Geometry | None = None,
                       records: xr.Dataset | None = None, warn: bool = True) -> Geometry:
    """One geometry for a modal table: the user's table, the records' positions, then placed nodes.

    A node's position is taken from `geometry` (the user's table, :func:`read_geometry`),
    else from the channel coords ``x, y, z`` of `records` (or of `table`). Nodes of the
    table (:func:`table_nodes`) found in neither are placed, in natural name order, on a
    straight line along x just below the known nodes (or along x from the origin, 1 m
    apart, when no node is known), joined by lines, and named in a
    :class:`NodesPlacedWarning` (and in :attr:`Geometry.placed`). The user's lines are
    kept; the nodes of the user's table that the modal table does not name are kept too
    (drawn, not moving).

    Parameters
    ----------
    table : xarray.Dataset
        A modal table (:func:`modalnb.fit_modes`) or a record set.
    geometry : Geometry, optional
        The user's geometry table.
    records : xarray.Dataset, optional
        The record set (sensor positions, hit nodes).
    warn : bool
        Warn when nodes are placed.

    Returns
    -------
    Geometry

    Examples
    --------
    >>> import warnings
    >>> from modalnb.demo import load_demo
    >>> ds = load_demo()
    >>> g = structure_geometry(ds)
    >>> g.placed, g.source
    ((), 'records')
    """
    parts = [g for g in (geometry, geometry_from_records(records) if records is not None else None,
                         geometry_from_records(table)) if g is not None]
    nodes: list[str] = []
    xyz: list[np.ndarray] = []
    lines: list[tuple[str, str]] = []
    sources: list[str] = []
    for g in parts:
        added = False
        for n, p in zip(g.nodes, g.xyz, strict=True):
            if n not in nodes:
                nodes.append(n)
                xyz.append(p)
                added = True
        if added and g.source not in sources:
            sources.append(g.source)
        lines += [ln for ln in g.lines if ln not in lines]
    missing = sorted((n for n in table_nodes(table, records) if n not in nodes), key=natural_key)
    placed: list[str] = []
    if missing:
        if xyz:
            known = np.array(xyz)
            lo, hi = known.min(axis=0), known.max(axis=0)
            span = float(np.max(hi - lo)) or 1.0
            start = np.array([lo[0], lo[1], lo[2] - 0.2 * span])
            step = (hi[0] - lo[0]) / max(len(missing) - 1, 1) if hi[0] > lo[0] else span / max(len(missing), 1)
        else:
            start, step = np.zeros(3), 1.0
        for i, n in enumerate(missing):
            nodes.append(n)
            xyz.append(start + np.array([i * step, 0.0, 0.0]))
            placed.append(n)
        lines += list(zip(missing[:-1], missing[1:], strict=True))
        if warn:
            shown = ", ".join(missing[:8]) + (f" and {len(missing) - 8} more" if len(missing) > 8 else "")
            warnings.warn(
                f"{len(missing)} node(s) have no position in the geometry table or the records "
                f"({shown}): placed on a straight line beside the structure. Hint: give their "
                "positions in a nodes file (node,x,y,z) with `geometry=read_geometry(...)`.",
                NodesPlacedWarning, stacklevel=2)
        sources.append("placed by modalnb")
    return Geometry(tuple(nodes), np.array(xyz).reshape(-1, 3), tuple(lines), tuple(placed),
                    source=" + ".join(sources))


def _axis_of(direction: Any, where: str) -> int:
    d = str(direction).strip().lstrip("+-").strip().upper()
    if d not in _AXES:
        raise GeometryError(f"{where}: direction {str(direction)!r} is not one of +X, -X, +Y, -Y, +Z, -Z.")
    return _AXES[d]


def _shape_source(table: xr.Dataset) -> tuple[str, str, str, list[str], list[Any], list[str]]:
    """(amplitude variable, phase variable, dim, node per entry, direction per entry, entry
    names for messages)."""
    if "node_shape_amplitude" in table.data_vars and "node_shape_phase_deg" in table.data_vars:
        nodes = [str(n) for n in table["node"].values]
        dirs = (list(table["node_direction"].values) if "node_direction" in table.coords
                else [None] * len(nodes))
        return ("node_shape_amplitude", "node_shape_phase_deg", "node", nodes, dirs,
                [f"node {n!r}" for n in nodes])
    if "shape_amplitude" in table.data_vars and "shape_phase_deg" in table.data_vars:
        nodes = _channel_nodes(table)
        dirs = (list(table["direction"].values) if "direction" in table.coords
                and tuple(table["direction"].dims) == ("channel",) else [None] * len(nodes))
        return ("shape_amplitude", "shape_phase_deg", "channel", nodes, dirs,
                [f"channel {str(c)!r}" for c in table["channel"].values])
    raise GeometryError("the modal table has no shapes (node_shape_amplitude / node_shape_phase_deg "
                        "over node, or shape_amplitude / shape_phase_deg over channel).")


def node_motion(geometry: Geometry, table: xr.Dataset, mode: int) -> tuple[np.ndarray, np.ndarray]:
    """A mode's complex motion at every node of `geometry`, along x, y and z.

    The shape is the table's node shapes (``node_shape_amplitude``, ``node_shape_phase_deg``
    over ``node``, with ``node_direction``) when present, else its channel shapes
    (``shape_amplitude``, ``shape_phase_deg`` over ``channel``, at the channels' ``node``
    and ``direction``). Each value ``a exp(j phase)`` is put on the axis of its direction
    (``+X``, ``-Y``, ``Z``: the sign is not applied again, the table has applied it); a
    shape without directions moves along Z. Nodes the shape does not reach do not move.

    Parameters
    ----------
    geometry : Geometry
    table : xarray.Dataset
        Modal table.
    mode : int
        Mode label (the table's ``mode`` coord).

    Returns
    -------
    motion : numpy.ndarray
        Complex, shape (node, 3), in the table's shape units (largest amplitude 1).
    measured : numpy.ndarray
        Bool, shape (node,): the shape has a value at the node.

    Examples
    --------
    >>> import xarray as xr
    >>> g = Geometry(("a", "b"), np.zeros((2, 3)))
    >>> t = xr.Dataset({"shape_amplitude": (("mode", "channel"), [[1.0, 0.5]]),
    ...                 "shape_phase_deg": (("mode", "channel"), [[0.0, 180.0]])},
    ...                coords={"mode": [1], "channel": ["c1", "c2"], "node": ("channel", ["a", "b"]),
    ...                        "direction": ("channel", ["+X", "-Z"])})
    >>> motion, measured = node_motion(g, t, 1)
    >>> np.round(motion.real, 6).tolist(), measured.tolist()
    ([[1.0, 0.0, 0.0], [0.0, 0.0, -0.5]], [True, True])
    """
    amp_var, ph_var, dim, nodes, dirs, names = _shape_source(table)
    modes = [int(m) for m in table["mode"].values]
    if int(mode) not in modes:
        raise GeometryError(f"the modal table has no mode {mode!r} (modes {modes}).")
    k = modes.index(int(mode))
    amp = np.asarray(table[amp_var].transpose("mode", dim).values, dtype=float)[k]
    ph = np.asarray(table[ph_var].transpose("mode", dim).values, dtype=float)[k]
    psi = amp * np.exp(1j * np.deg2rad(ph))
    motion = np.zeros((len(geometry.nodes), 3), dtype=complex)
    measured = np.zeros(len(geometry.nodes), dtype=bool)
    for n, d, v, name in zip(nodes, dirs, psi, names, strict=True):
        if d is not None and str(d).strip():
            axis = _axis_of(d, f"the modal table's {name}")
        else:
            axis = 2
        if n not in geometry or not np.isfinite(v):
            continue
        i = geometry.index(n)
        motion[i, axis] += v
        measured[i] = True
    return motion, measured


def default_scale(geometry: Geometry, motion: np.ndarray | None = None) -> float:
    """Displacement (m) per unit shape amplitude so the largest motion is 15 % of the span.

    Examples
    --------
    >>> default_scale(Geometry(("a", "b"), np.array([[0.0, 0, 0], [2.0, 0, 0]])))
    0.3
    """
    peak = 1.0
    if motion is not None and motion.size:
        peak = float(np.max(np.linalg.norm(np.abs(motion), axis=1))) or 1.0
    return DEFAULT_SCALE_FRACTION * geometry.span / peak


def deformed_positions(geometry: Geometry, table: xr.Dataset, mode: int, phase: float,
                       scale: float | None = None) -> np.ndarray:
    """The nodes' positions at one phase of a mode's cycle: ``xyz + scale * Re(psi exp(j phase))``.

    Parameters
    ----------
    geometry : Geometry
    table : xarray.Dataset
        Modal table (shapes as in :func:`node_motion`).
    mode : int
        Mode label.
    phase : float
        Phase of the cycle in radians (0 to 2 pi is one cycle).
    scale : float, optional
        Displacement in metres of a unit shape amplitude; default :func:`default_scale`
        (largest motion 15 % of the structure's span).

    Returns
    -------
    numpy.ndarray
        Shape (node, 3), metres.

    Examples
    --------
    >>> import xarray as xr
    >>> g = Geometry(("a",), np.array([[1.0, 2.0, 3.0]]))
    >>> t = xr.Dataset({"shape_amplitude": (("mode", "channel"), [[1.0]]),
    ...                 "shape_phase_deg": (("mode", "channel"), [[90.0]])},
    ...                coords={"mode": [1], "channel": ["c"], "node": ("channel", ["a"])})
    >>> np.round(deformed_positions(g, t, 1, np.pi / 2, scale=0.5), 9).tolist()
    [[1.0, 2.0, 2.5]]
    """
    motion, _ = node_motion(geometry, table, mode)
    s = default_scale(geometry, motion) if scale is None else float(scale)
    return geometry.xyz + s * (motion * np.exp(1j * float(phase))).real


def cycle_positions(geometry: Geometry, motion: np.ndarray, scale: float,
                    n_frames: int = 24) -> np.ndarray:
    """Positions over one cycle, shape (frame, node, 3): frame ``k`` at phase ``2 pi k / n_frames``.

    Examples
    --------
    >>> g = Geometry(("a",), np.zeros((1, 3)))
    >>> p = cycle_positions(g, np.array([[0, 0, 1.0 + 0j]]), 2.0, 4)
    >>> np.round(p[:, 0, 2], 9).tolist()
    [2.0, 0.0, -2.0, -0.0]
    """
    phases = 2 * np.pi * np.arange(int(n_frames)) / int(n_frames)
    return geometry.xyz[None] + float(scale) * (motion[None] * np.exp(1j * phases)[:, None, None]).real
