"""Model against test: pairing the modes of a modal table with an analysis model's modes.

:func:`pair_modes` compares the shapes of a :func:`modalnb.fit_modes` table with those
of an analysis model (finite elements, a lumped model) over the node-directions both
have, by the modal assurance criterion (MAC = ``|a^H b|^2 / ((a^H a)(b^H b))``, Allemang
& Brown 1982, "A correlation coefficient for modal vector analysis", Proc. 1st IMAC,
pp. 110-116), and pairs them one to one by the assignment that minimises the summed cost
``(1 - MAC) + frequency_weight * |f_test - f_model| / f_model`` (a linear assignment
problem, solved by ``scipy.optimize.linear_sum_assignment``: Crouse 2016, "On
implementing 2D rectangular assignment algorithms", IEEE Trans. Aerospace and
Electronic Systems 52(4)). The cost is our own choice; MAC >= 0.9 for "the same mode"
is common practice (Allemang 2003, "The modal assurance criterion - twenty years of use
and abuse", Sound & Vibration 37(8)).

The model, our own simple layout (two CSV files, header row first):

* modes: ``mode,frequency_hz`` — one row per model mode (``mode`` an integer label);
* shapes: ``mode,node,direction,value`` — one row per mode and node-direction
  (``direction`` like ``+Z``, ``-Y`` or ``Z``; a ``-`` sign negates the value; ``value``
  a real number, any scaling).

or an :class:`xarray.Dataset` with ``frequency_hz(mode)`` and ``shape(mode, dof)`` (real
or complex) with coords ``node(dof)`` and ``direction(dof)``.

The test shapes are the table's ``node_shape_amplitude`` / ``node_shape_phase_deg``
over ``node`` where present, else its channel shapes (``shape_amplitude``,
``shape_phase_deg``) keyed by the channels' ``node`` and ``direction`` coords (the
table has applied the direction signs already).
"""

from __future__ import annotations

import csv
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError
from .estimate._shapes import mac_matrix

__all__ = ["pair_modes", "read_model_modes", "SAME_MODE_MAC"]

#: MAC above which two shapes are called the same mode (common practice, Allemang 2003).
SAME_MODE_MAC = 0.9


def _axis(direction: str) -> tuple[str, float]:
    d = str(direction).strip()
    sign = -1.0 if d.startswith("-") else 1.0
    return d.lstrip("+-").strip().upper(), sign


def _rows(path: Path, columns: Sequence[str]) -> list[tuple[int, dict[str, str]]]:
    src = os.fspath(path)
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            reader = csv.DictReader(fh)
            header = [h.strip() for h in (reader.fieldnames or [])]
            missing = [c for c in columns if c not in header]
            if missing:
                raise ModalnbError(f"{src}: no column {missing[0]!r} (header {header}); expected "
                                   f"{','.join(columns)}.")
            return [(i, {k.strip(): (v or "").strip() for k, v in row.items() if k})
                    for i, row in enumerate(reader, start=2)]
    except FileNotFoundError:
        raise ModalnbError(f"{src}: no such file.") from None
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise ModalnbError(f"{src}: cannot be read ({type(exc).__name__}: {exc}).") from None


def _number(src: str, line: int, col: str, text: str, kind: type = float) -> Any:
    try:
        value = kind(text)
    except ValueError:
        raise ModalnbError(f"{src}: row {line}: {col} {text!r} is not a number.") from None
    if kind is float and not np.isfinite(value):
        raise ModalnbError(f"{src}: row {line}: {col} {text!r} is not finite.")
    return value


def read_model_modes(modes_csv: str | os.PathLike[str], shapes_csv: str | os.PathLike[str]
                     ) -> xr.Dataset:
    """An analysis model's modes from the two CSV files of the module docstring.

    Returns
    -------
    xarray.Dataset
        ``frequency_hz(mode)`` and ``shape(mode, dof)`` with coords ``node(dof)``,
        ``direction(dof)`` (the axis, sign applied to the values); a node-direction a mode
        does not list is 0.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "m.csv").write_text("mode,frequency_hz\\n1,12.5\\n")
    >>> _ = (d / "s.csv").write_text("mode,node,direction,value\\n1,n1,+Z,1\\n1,n2,-Z,0.5\\n")
    >>> ds = read_model_modes(d / "m.csv", d / "s.csv")
    >>> ds["shape"].values.tolist(), ds["direction"].values.tolist()
    ([[1.0, -0.5]], ['Z', 'Z'])
    """
    msrc, ssrc = os.fspath(modes_csv), os.fspath(shapes_csv)
    freq: dict[int, float] = {}
    for line, row in _rows(Path(modes_csv), ("mode", "frequency_hz")):
        mode = _number(msrc, line, "mode", row["mode"], int)
        if mode in freq:
            raise ModalnbError(f"{msrc}: row {line}: mode {mode} is listed twice.")
        f = _number(msrc, line, "frequency_hz", row["frequency_hz"])
        if f <= 0:
            raise ModalnbError(f"{msrc}: row {line}: frequency_hz {f!r} must be > 0.")
        freq[mode] = f
    if not freq:
        raise ModalnbError(f"{msrc}: no modes listed.")
    values: dict[tuple[int, str, str], float] = {}
    for line, row in _rows(Path(shapes_csv), ("mode", "node", "direction", "value")):
        mode = _number(ssrc, line, "mode", row["mode"], int)
        if mode not in freq:
            raise ModalnbError(f"{ssrc}: row {line}: mode {mode} is not in {msrc}.")
        if not row["node"] or not row["direction"]:
            raise ModalnbError(f"{ssrc}: row {line}: node and direction must not be empty.")
        axis, sign = _axis(row["direction"])
        key = (mode, row["node"], axis)
        if key in values:
            raise ModalnbError(f"{ssrc}: row {line}: mode {mode}, node {row['node']!r}, "
                               f"direction {axis} is listed twice.")
        values[key] = sign * _number(ssrc, line, "value", row["value"])
    dofs = list(dict.fromkeys((n, a) for _, n, a in values))
    modes = sorted(freq)
    shape = np.zeros((len(modes), len(dofs)))
    for (mode, n, a), v in values.items():
        shape[modes.index(mode), dofs.index((n, a))] = v
    return xr.Dataset(
        {"frequency_hz": ("mode", [freq[m] for m in modes], {"units": "Hz"}),
         "shape": (("mode", "dof"), shape)},
        coords={"mode": modes, "node": ("dof", np.array([n for n, _ in dofs], dtype=object)),
                "direction": ("dof", np.array([a for _, a in dofs], dtype=object))})


def _model_dataset(model: Any) -> xr.Dataset:
    if isinstance(model, xr.Dataset):
        for var in ("frequency_hz", "shape"):
            if var not in model.data_vars:
                raise ModalnbError(f"the model Dataset has no variable {var!r}: it needs "
                                   "frequency_hz(mode) and shape(mode, dof).")
        for c in ("node", "direction"):
            if c not in model.coords:
                raise ModalnbError(f"the model Dataset has no coordinate {c!r} over dof.")
        return model
    if isinstance(model, (tuple, list)) and len(model) == 2:
        return read_model_modes(*model)
    raise ModalnbError("`model` must be (modes_csv, shapes_csv) or an xarray.Dataset with "
                       "frequency_hz(mode) and shape(mode, dof).")


def _keyed(nodes: Any, directions: Any, values: np.ndarray) -> dict[tuple[str, str], np.ndarray]:
    """{(node, axis): values over modes}, with the sign of a '-' direction applied."""
    out = {}
    for j, (n, d) in enumerate(zip(np.asarray(nodes).tolist(), np.asarray(directions).tolist(),
                                   strict=True)):
        axis, sign = _axis(d)
        out[(str(n), axis)] = sign * values[:, j]
    return out


def _test_shapes(table: xr.Dataset) -> dict[tuple[str, str], np.ndarray]:
    """Test shapes over modes keyed by (node, axis); the table applied the signs already."""
    if "node_shape_amplitude" in table.data_vars and "node_shape_phase_deg" in table.data_vars:
        amp = np.asarray(table["node_shape_amplitude"].values, float)
        ph = np.radians(np.asarray(table["node_shape_phase_deg"].values, float))
        nodes = np.asarray(table["node"].values)
        dirs = (np.asarray(table["node_direction"].values) if "node_direction" in table.coords
                else np.array([""] * nodes.size))
        psi = amp * np.exp(1j * ph)
        return {(str(n), _axis(d)[0]): psi[:, j] for j, (n, d) in enumerate(zip(nodes, dirs, strict=True))}
    for var in ("frequency_hz", "shape_amplitude", "shape_phase_deg"):
        if var not in table.data_vars:
            raise ModalnbError(f"the test table has no variable {var!r}: give a fit_modes table.")
    psi = (np.asarray(table["shape_amplitude"].values, float)
           * np.exp(1j * np.radians(np.asarray(table["shape_phase_deg"].values, float))))
    chans = np.asarray(table["channel"].values).astype(str)
    nodes = table["node"].values if "node" in table.coords else chans
    dirs = table["direction"].values if "direction" in table.coords else np.array([""] * chans.size)
    # the table applied the direction signs: key by the axis alone, no second sign
    return {(str(n), _axis(d)[0]): psi[:, j] for j, (n, d) in enumerate(zip(nodes, dirs, strict=True))}


def pair_modes(test: xr.Dataset, model: Any, *, frequency_weight: float = 1.0) -> xr.Dataset:
    """Pair a modal table's modes with an analysis model's modes by MAC and frequency.

    Parameters
    ----------
    test : xarray.Dataset
        A :func:`modalnb.fit_modes` table.
    model : (modes_csv, shapes_csv) or xarray.Dataset
        The analysis model (layouts in the module docstring).
    frequency_weight : float
        Weight of the relative frequency difference in the pairing cost ``(1 - MAC) +
        frequency_weight * |f_test - f_model| / f_model`` (our choice; 0 pairs by MAC alone).

    Returns
    -------
    xarray.Dataset
        Over ``pair``: ``test_mode``, ``model_mode``, ``mac``, ``test_frequency_hz``,
        ``model_frequency_hz``, ``frequency_difference_pct`` (``100 (f_test - f_model) /
        f_model``), ``same_mode`` (MAC >= :data:`SAME_MODE_MAC`); ``mac_matrix(test, model)``
        (coords: the mode labels); coords ``node_direction`` (the common node-directions compared).
        Attribute ``unpaired``: the modes of the larger set left without a partner.

    Examples
    --------
    >>> import numpy as np, xarray as xr
    >>> test = xr.Dataset(
    ...     {"frequency_hz": ("mode", [10.0, 31.0]),
    ...      "shape_amplitude": (("mode", "channel"), [[0.5, 1.0], [1.0, 1.0]]),
    ...      "shape_phase_deg": (("mode", "channel"), [[0.0, 0.0], [0.0, 180.0]])},
    ...     coords={"mode": [1, 2], "channel": ["a", "b"], "node": ("channel", ["n1", "n2"]),
    ...             "direction": ("channel", ["+Z", "+Z"])})
    >>> model = xr.Dataset(
    ...     {"frequency_hz": ("mode", [30.0, 10.5]), "shape": (("mode", "dof"), [[1, -1], [0.5, 1]])},
    ...     coords={"mode": [7, 8], "node": ("dof", ["n1", "n2"]), "direction": ("dof", ["Z", "Z"])})
    >>> p = pair_modes(test, model)
    >>> p["model_mode"].values.tolist(), np.round(p["mac"].values, 3).tolist()
    ([8, 7], [1.0, 1.0])
    """
    try:
        w = float(frequency_weight)
    except (TypeError, ValueError):
        raise ModalnbError(f"`frequency_weight` must be a number >= 0, was {frequency_weight!r}.") from None
    if not (np.isfinite(w) and w >= 0):
        raise ModalnbError(f"`frequency_weight` must be a number >= 0, was {frequency_weight!r}.")
    from scipy.optimize import linear_sum_assignment

    mdl = _model_dataset(model)
    tshape = _test_shapes(test)
    mshape = _keyed(mdl["node"].values, mdl["direction"].values, np.asarray(mdl["shape"].values))
    if all(axis == "" for _, axis in tshape):  # node shapes without a direction
        by_node: dict[str, list[tuple[str, str]]] = {}
        for key in mshape:
            by_node.setdefault(key[0], []).append(key)
        mshape = {(n, ""): mshape[keys[0]] for n, keys in by_node.items() if len(keys) == 1}
    common = [k for k in tshape if k in mshape]
    if not common:
        raise ModalnbError(
            f"the test and the model share no node-direction (test {sorted(tshape)[:4]}..., model "
            f"{sorted(mshape)[:4]}...). Hint: name the channels' node and direction as the model does.")
    a = np.stack([tshape[k] for k in common])  # (dof, test modes)
    b = np.stack([mshape[k] for k in common]).astype(complex)
    macs = mac_matrix(a, b)
    ft = np.asarray(test["frequency_hz"].values, float)
    fm = np.asarray(mdl["frequency_hz"].values, float)
    tmodes = np.asarray(test["mode"].values) if "mode" in test.coords else np.arange(1, ft.size + 1)
    mmodes = np.asarray(mdl["mode"].values) if "mode" in mdl.coords else np.arange(1, fm.size + 1)
    cost = (1.0 - macs) + w * np.abs(ft[:, None] - fm[None, :]) / fm[None, :]
    rows, cols = linear_sum_assignment(cost)
    unpaired = ([f"test mode {m}" for i, m in enumerate(tmodes.tolist()) if i not in rows]
                + [f"model mode {m}" for j, m in enumerate(mmodes.tolist()) if j not in cols])
    pair_mac = macs[rows, cols]
    return xr.Dataset(
        {
            "test_mode": ("pair", tmodes[rows]),
            "model_mode": ("pair", mmodes[cols]),
            "mac": ("pair", pair_mac, {"units": "1"}),
            "test_frequency_hz": ("pair", ft[rows], {"units": "Hz"}),
            "model_frequency_hz": ("pair", fm[cols], {"units": "Hz"}),
            "frequency_difference_pct": ("pair", 100.0 * (ft[rows] - fm[cols]) / fm[cols],
                                         {"units": "%"}),
            "same_mode": ("pair", pair_mac >= SAME_MODE_MAC),
            "mac_matrix": (("test", "model"), macs, {"units": "1", "description": "MAC of every "
                           "test mode (test) against every model mode (model)"}),
        },
        coords={"pair": np.arange(1, rows.size + 1), "test": tmodes, "model": mmodes,
                "node_direction": np.array([f"{n}{d}" for n, d in common], dtype=object)},
        attrs={"unpaired": "; ".join(unpaired) or "none", "frequency_weight": w,
               "method": "MAC (Allemang & Brown 1982) + relative frequency difference, "
                         "linear_sum_assignment"},
    )
