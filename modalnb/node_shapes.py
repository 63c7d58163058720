"""Shapes over nodes: one shape value per structure node from per-hit residues.

A roving-hammer test strikes many nodes in turn with one or two fixed sensors; a
roving-sensor test moves the sensors over several setups with the hammer fixed. Either
way a mode's shape is spread over the *sensor* nodes (``node`` over channels) and the
*hit* nodes (``excitation_node`` over hits). This module turns the fitted table's per-hit
residues (``hit_residue_real``/``_imag`` over (mode, hit, channel)) into shapes over the
union of those nodes. Pure computation: it sits above the engine (:mod:`modalnb.estimate`)
and below the exports.

Theory (Ewins 2000, *Modal Testing: Theory, Practice and Application*, 2nd ed., ch. 2
(the modal expansion of a viscously damped system) and ch. 4 (modal constants, the
driving point and mass normalisation); the formulas below are written from memory and
checked in ``tests/test_node_shapes.py`` against ``scipy.linalg.eig`` of the state
matrix and ``scipy.integrate.solve_ivp`` records):

* The receptance impulse response of ``M x'' + C x' + K x = f`` is
  ``h_ij(t) = sum_r 2 Re(A_ij,r exp(lambda_r t))`` with the displacement residue
  ``A_ij,r = psi_i,r psi_j,r / a_r``, ``a_r = psi_r^T (2 lambda_r M + C) psi_r``. ``A`` is
  symmetric in (i, j) (Maxwell-Betti reciprocity), so the residue of response i to input j
  is proportional to ``psi_i psi_j``: with one fixed sensor the residues over the hits are
  the shape over the hit nodes, with one fixed hammer the residues over the channels are
  the shape over the sensor nodes.
* With the normalisation ``a_r = 2 i omega_d,r`` (``omega_d = Im lambda``) the shape is
  the mass-normalised one: for proportional damping ``psi_r`` is then the real mode with
  ``psi_r^T M psi_r = 1`` (units kg^-1/2); a one-mass check: ``m x'' + c x' + k x =
  delta(t)`` gives ``h = exp(-zeta omega t) sin(omega_d t) / (m omega_d)``, which is
  ``2 Re(exp(lambda t) / (2 i m omega_d))``, i.e. ``psi^2 = 1/m``.
* The velocity and acceleration impulse responses are the time derivatives of ``h``
  (after the pulse), so their residues are ``lambda_r A`` and ``lambda_r^2 A``
  (``lambda_r^2 ~ -omega_r^2`` for light damping; the exact ``lambda_r^2`` is used).
  Hence, for a response residue ``R_ij`` per unit force impulse (N s):

  - displacement (m):      ``psi_i psi_j = 2 i omega_d R_ij``;
  - velocity (m/s):        ``psi_i psi_j = 2 i omega_d R_ij / lambda``;
  - acceleration (m/s^2):  ``psi_i psi_j = 2 i omega_d R_ij / lambda^2``.

* At a driving point d (a hit node and direction equal to a sensor's) ``psi_d^2`` is
  known, so every other node's ``psi_j = (psi_d psi_j) / psi_d`` is scaled too.

How the shape is built from the residue matrix ``R`` (sensor nodes x hit nodes, direction
signs applied, the hits of one node averaged): its best rank-one fit ``sigma u w^T`` (the
leading singular triple; Eckart & Young 1936, "The approximation of one matrix by another
of lower rank", Psychometrika 1(3)) gives the shape over the sensor nodes (``u``) and over
the hit nodes (``w``); with a node both sensed and hit the two sides are put on one scale
(``a^2 u_d = sigma w_d``, least squares over those nodes) so that ``R_ij = psi_i psi_j``.
Without such a node only the larger side has values (the other side's are NaN: their
scale relative to it is not measured).
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import xarray as xr

from ._utils import natural_key
from .estimate import mpc

__all__ = [
    "NODE_ROLES",
    "is_roving",
    "node_shapes",
    "with_node_shapes",
    "dof_of",
    "ResidueSet",
    "residue_set",
    "shape_over_nodes",
    "shape_variables",
]

#: The column index of the hits that name no node (see :func:`residue_set`).
UNNAMED = -1

#: The values of ``node_role``.
NODE_ROLES = ("sensor", "hit", "both", "driving point")

#: SI response units and the power of lambda between their residue and the displacement one.
_SI_POWER = {"m": 0, "m/s": 1, "ms^-1": 1, "m/s^2": 2, "m/s²": 2, "ms^-2": 2, "m/s/s": 2,
             "m/s**2": 2}
_QUANTITY = {0: "displacement", 1: "velocity", 2: "acceleration"}
_NO_DRIVING = "no driving point (no hit node and direction equal to a sensor's)"


def dof_of(node: Any, direction: Any = "") -> tuple[str, str, float]:
    """``(node, axis, sign)`` of a node and a direction label such as ``"+Z"`` or ``"-x"``.

    The axis is upper case without its sign (``""`` when no direction is given); the sign
    is -1 for a direction that starts with ``-``.

    Examples
    --------
    >>> dof_of("m3", "-z")
    ('m3', 'Z', -1.0)
    >>> dof_of(" m1 ", None)
    ('m1', '', 1.0)
    """
    d = "" if direction is None or (isinstance(direction, float) and np.isnan(direction)) \
        else str(direction).strip()
    sign = -1.0 if d.startswith("-") else 1.0
    return str(node).strip(), d.lstrip("+-").strip().upper(), sign


def _texts(ds: xr.Dataset, name: str, dim: str) -> list[str] | None:
    if name not in ds.coords or ds[name].dims != (dim,):
        return None
    return ["" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v).strip()
            for v in np.asarray(ds[name].values).tolist()]


def _excitation_dofs(ds: xr.Dataset) -> list[tuple[str, str, float]] | None:
    nodes = _texts(ds, "excitation_node", "hit")
    if nodes is None:
        return None
    dirs = _texts(ds, "excitation_direction", "hit") or [""] * len(nodes)
    return [dof_of(n, d) for n, d in zip(nodes, dirs, strict=True)]


def is_roving(ds: xr.Dataset) -> bool:
    """True when the hits of `ds` (records or table) strike more than one node or direction.

    That is a roving-hammer test (``excitation_node`` over hits with more than one
    distinct node and direction); all hits count, accepted or not, so the table's layout
    does not change with the hit decisions.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb import records_from_arrays
    >>> ds = records_from_arrays(np.zeros((2, 1, 32)), 64.0)
    >>> is_roving(ds.assign_coords(excitation_node=("hit", ["m1", "m2"])))
    True
    >>> is_roving(ds.assign_coords(excitation_node=("hit", ["m1", "m1"])))
    False
    """
    dofs = _excitation_dofs(ds)
    if dofs is None:
        return False
    return len({(n, a) for n, a, _ in dofs if n}) > 1


@dataclass
class _Entries:
    """The node entries: one per node, or one per node and axis where a node is met
    along several stated axes."""

    labels: list[str]
    names: list[str]
    axes: list[str]
    index: dict[tuple[str, str], int]

    def of(self, node: str, axis: str) -> int:
        return self.index[(node, axis)]


def _entries(keys: Sequence[tuple[str, str]]) -> _Entries:
    axes_of: dict[str, list[str]] = {}
    for n, a in keys:
        axes_of.setdefault(n, [])
        if a and a not in axes_of[n]:
            axes_of[n].append(a)
    key_set = set(keys)
    slots: list[tuple[str, str, str]] = []  # (label, name, axis)
    index_key: dict[tuple[str, str], tuple[str, str, str]] = {}
    for n in sorted(axes_of, key=natural_key):
        stated = sorted(axes_of[n])
        if len(stated) <= 1:
            slot = (n, n, stated[0] if stated else "")
            slots.append(slot)
            index_key[(n, "")] = slot
            for a in stated:
                index_key[(n, a)] = slot
            continue
        for a in stated:
            slot = (f"{n}+{a}", n, a)
            slots.append(slot)
            index_key[(n, a)] = slot
        if (n, "") in key_set:
            slot = (n, n, "")
            slots.append(slot)
            index_key[(n, "")] = slot
    pos = {s: i for i, s in enumerate(slots)}
    return _Entries([s[0] for s in slots], [s[1] for s in slots], [s[2] for s in slots],
                    {k: pos[s] for k, s in index_key.items()})


@dataclass
class ResidueSet:
    """Residues of one record set over node entries: ``values`` (mode, sensor, hit), the
    direction signs applied, channels at one entry and hits at one entry averaged.

    ``sensors`` and ``hits`` are entry indices into ``labels`` (``hits`` may hold
    :data:`UNNAMED`, the column of the hits that name no node); ``driving`` holds the
    entries that a sensor and a hit share along the same stated direction.
    """

    labels: list[str]
    names: list[str]
    axes: list[str]
    sensors: list[int]
    hits: list[int]
    values: np.ndarray
    driving: set[int] = field(default_factory=set)
    hit_counts: dict[int, int] = field(default_factory=dict)
    hit_scatter: np.ndarray | None = None  # (mode, entry): see residue_set


def residue_set(
    hit_residues: np.ndarray,
    channel_dofs: Sequence[tuple[str, str, float]],
    hit_dofs: Sequence[tuple[str, str, float]],
    *,
    use_channel: Sequence[bool] | None = None,
) -> ResidueSet:
    """The residue matrix over node entries of one record set.

    Parameters
    ----------
    hit_residues : ndarray, complex (mode, hit, channel)
        Per-hit residues (NaN for rejected hits).
    channel_dofs, hit_dofs : sequences of (node, axis, sign)
        From :func:`dof_of` for every channel and every hit (a hit with node ``""`` is
        left out).
    use_channel : sequence of bool, optional
        Channels to use (e.g. not the dead ones); default all.

    Examples
    --------
    >>> import numpy as np
    >>> psi = np.array([1.0, 2.0, -1.0])  # shape over nodes a, b, c
    >>> res = (psi[None, :, None] * psi[None, None, [0]]).astype(complex)  # sensor at a
    >>> rs = residue_set(res, [("a", "Z", 1.0)], [(n, "Z", 1.0) for n in "abc"])
    >>> rs.labels, rs.sensors, rs.hits, sorted(rs.driving)
    (['a', 'b', 'c'], [0], [0, 1, 2], [0])
    """
    hr = np.asarray(hit_residues, complex)
    use = np.ones(len(channel_dofs), bool) if use_channel is None else np.asarray(use_channel, bool)
    keys = [(n, a) for (n, a, _), u in zip(channel_dofs, use, strict=True) if u and n]
    keys += [(n, a) for n, a, _ in hit_dofs if n]
    ent = _entries(keys)
    s_of: dict[int, list[int]] = {}
    for c, ((n, a, _), u) in enumerate(zip(channel_dofs, use, strict=True)):
        if u and n:
            s_of.setdefault(ent.of(n, a), []).append(c)
    e_of: dict[int, list[int]] = {}
    for h, (n, a, _) in enumerate(hit_dofs):
        # hits that name no node (a fixed hammer nobody labelled): one column of their own
        # (UNNAMED), which gives the sensor side its shape but no node value
        e_of.setdefault(ent.of(n, a) if n else UNNAMED, []).append(h)
    sensors, hits = sorted(s_of), sorted(e_of)
    csign = np.array([s for _, _, s in channel_dofs], float)
    hsign = np.array([s for _, _, s in hit_dofs], float)
    signed = hr * hsign[None, :, None] * csign[None, None, :]
    vals = np.full((hr.shape[0], len(sensors), len(hits)), np.nan, complex)
    scatter = np.full((hr.shape[0], len(ent.labels)), np.nan)
    counts: dict[int, int] = {}
    used = [c for s in sensors for c in s_of[s]]
    for j, e in enumerate(hits):
        hs = e_of[e]
        if e != UNNAMED:
            counts[e] = int(np.sum(np.all(np.isfinite(hr[:, hs, :]), axis=(0, 2)))) if hr.shape[0] else 0
        acc = [h for h in hs if np.all(np.isfinite(signed[:, h, used]))]
        if len(acc) >= 2 and used and e != UNNAMED:
            block = signed[:, acc][:, :, used]  # (mode, hits, channels)
            mean = block.mean(axis=1, keepdims=True)
            spread = np.sqrt(np.sum(np.abs(block - mean) ** 2, axis=(1, 2))
                             / ((len(acc) - 1) * len(used)))
            level = np.sqrt(np.mean(np.abs(mean[:, 0, :]) ** 2, axis=1))
            with np.errstate(invalid="ignore", divide="ignore"):
                scatter[:, e] = np.where(level > 0, spread / np.where(level > 0, level, 1), np.nan)
        for i, s in enumerate(sensors):
            block = signed[:, hs][:, :, s_of[s]]  # (mode, hits, channels)
            ok = np.isfinite(block)
            with np.errstate(invalid="ignore"):
                vals[:, i, j] = np.where(ok.any(axis=(1, 2)),
                                         np.where(ok, block, 0).sum(axis=(1, 2))
                                         / np.maximum(ok.sum(axis=(1, 2)), 1), np.nan)
    # a driving point: a sensor and a hit at one node along the same *stated* axis
    driving = set()
    stated_s = {(n, a) for (n, a, _), u in zip(channel_dofs, use, strict=True) if u and n and a}
    for n, a, _ in hit_dofs:
        if n and a and (n, a) in stated_s:
            driving.add(ent.of(n, a))
    return ResidueSet(ent.labels, ent.names, ent.axes, sensors, hits, vals, driving, counts,
                      scatter)


def shape_over_nodes(rs: ResidueSet, k: int) -> tuple[np.ndarray, bool, str]:
    """``(psi, absolute, note)`` of mode `k`: values over every entry (NaN where unknown).

    `absolute` is True when a node is both sensed and hit (finite, non-zero residue
    there): then ``R_ij = psi_i psi_j`` holds in the residues' own scale (see the module
    docstring). Hits of a node with no accepted hit give no column.

    Examples
    --------
    >>> import numpy as np
    >>> psi = np.array([1.0, 2.0, -1.0])
    >>> res = (psi[None, :, None] * psi[None, None, [0]]).astype(complex)
    >>> rs = residue_set(res, [("a", "Z", 1.0)], [(n, "Z", 1.0) for n in "abc"])
    >>> p, absolute, _ = shape_over_nodes(rs, 0)
    >>> np.round(np.real(p * np.sign(p[0].real)), 6).tolist(), absolute
    ([1.0, 2.0, -1.0], True)
    """
    n_ent = len(rs.labels)
    psi = np.full(n_ent, np.nan, complex)
    R = rs.values[k]
    cols = [j for j in range(R.shape[1]) if np.all(np.isfinite(R[:, j]))] if R.size else []
    rows = [i for i in range(R.shape[0]) if cols and np.all(np.isfinite(R[i, cols]))]
    if not rows or not cols:
        return psi, False, "no finite residues: no node shape"
    Rm = R[np.ix_(rows, cols)]
    s_ent = [rs.sensors[i] for i in rows]
    e_ent = [rs.hits[j] for j in cols]
    if not np.any(Rm != 0):
        return psi, False, "all residues zero: no node shape"
    U, sv, Vh = np.linalg.svd(Rm)
    sigma, u, w = float(sv[0]), U[:, 0], Vh[0, :]
    common = [e for e in s_ent if e in e_ent]
    if common:
        du = np.array([u[s_ent.index(e)] for e in common])
        dw = np.array([w[e_ent.index(e)] for e in common])
        den = float(np.sum(np.abs(du) ** 2))
        a2 = sigma * np.sum(np.conj(du) * dw) / den if den > 0 else 0.0
        if abs(a2) > 0 and np.isfinite(a2):
            a = np.sqrt(complex(a2))
            b = sigma / a
            acc = np.zeros(n_ent, complex)
            cnt = np.zeros(n_ent)
            for i, e in enumerate(s_ent):
                acc[e] += a * u[i]
                cnt[e] += 1
            for j, e in enumerate(e_ent):
                if e != UNNAMED:
                    acc[e] += b * w[j]
                    cnt[e] += 1
            psi = np.where(cnt > 0, acc / np.maximum(cnt, 1), np.nan + 0j)
            return psi, True, ""
    # no node both sensed and hit: only the larger side's values are measured
    n_named = sum(e != UNNAMED for e in e_ent)
    take_hits = n_named > len(s_ent) or (n_named == len(s_ent) and len(s_ent) > 1)
    if take_hits:
        named = [j for j, e in enumerate(e_ent) if e != UNNAMED]
        psi[[e_ent[j] for j in named]] = sigma * w[named]
        note = "sensor nodes not hit: their values relative to the hit nodes are not measured"
    else:
        psi[s_ent] = sigma * u
        note = "hit nodes not sensed: their values relative to the sensor nodes are not measured"
    return psi, False, note


def _pole(fn: float, z: float) -> complex:
    w = 2 * np.pi * fn
    return complex(-z * w, w * np.sqrt(max(1.0 - z * z, 0.0)))


def _units_of(table: xr.Dataset) -> tuple[str, str | None]:
    """Response units and force units (None: not force-normalised) from the residue units."""
    u = str(table["hit_residue_real"].attrs.get("units", ""))
    m = re.fullmatch(r"(.*)/\((.*) s\)", u)
    if m:
        return m.group(1).strip(), m.group(2).strip()
    return u.strip(), None


def shape_variables(
    psi: np.ndarray,
    absolute: np.ndarray,
    notes: Sequence[str],
    frequency_hz: np.ndarray,
    damping_ratio: np.ndarray,
    *,
    response_units: str,
    force_units: str | None,
    driving: bool,
) -> dict[str, Any]:
    """The node-shape variables from ``psi`` (mode, entry), as ``{name: (dims, values, attrs)}``.

    ``node_shape_amplitude``/``node_shape_phase_deg`` (largest amplitude 1 at phase 0,
    phase in (-180, 180]); where the scale is absolute (a driving point), the force in
    ``"N"`` and the response an SI displacement, velocity or acceleration,
    ``node_shape_mass_normalised`` (real after the best rotation, kg^-1/2),
    ``node_shape_mpc`` and ``modal_mass_kg`` (of the unit-maximum shape); else NaN and
    ``node_shape_status`` says why.

    Examples
    --------
    >>> import numpy as np
    >>> lam = complex(-0.01 * 2 * np.pi * 10, 2 * np.pi * 10 * np.sqrt(1 - 1e-4))
    >>> r = 1.0 / (2j * lam.imag * 4.0)  # a 4 kg mass: displacement residue 1/(2 i m wd)
    >>> v = shape_variables(np.sqrt([[r]]), np.array([True]), [""], np.array([10.0]),
    ...                     np.array([0.01]), response_units="m", force_units="N",
    ...                     driving=True)
    >>> round(float(v["modal_mass_kg"][1][0]), 9)
    4.0
    """
    psi = np.asarray(psi, complex)
    m, n = psi.shape
    amp = np.full((m, n), np.nan)
    ph = np.full((m, n), np.nan)
    scaled = np.full((m, n), np.nan)
    mpcs = np.full(m, np.nan)
    mass = np.full(m, np.nan)
    status = []
    power = _SI_POWER.get(response_units.replace(" ", ""))
    for k in range(m):
        p = psi[k]
        fin = np.isfinite(p)
        reasons = [notes[k]] if notes[k] else []
        if not fin.any() or not np.any(np.abs(p[fin]) > 0):
            status.append("; ".join(reasons) or "no node shape")
            continue
        ref = int(np.nanargmax(np.where(fin, np.abs(p), np.nan)))
        q = p / p[ref]
        amp[k] = np.abs(q)
        deg = np.degrees(np.angle(q))
        ph[k] = np.where(fin, np.where(deg <= -180.0 + 1e-9, 180.0, deg), np.nan)
        why = []
        if force_units is None:
            why.append("residues not per unit force (no force, or its spectrum zero at the pole)")
        elif force_units != "N":
            why.append(f"force units {force_units!r}, not 'N' (not calibrated)")
        if power is None:
            why.append(f"response units {response_units!r} are not SI displacement (m), "
                       "velocity (m/s) or acceleration (m/s^2)")
        lam = _pole(float(frequency_hz[k]), float(damping_ratio[k]))
        if not (lam.imag > 0):
            why.append("mode does not oscillate (damping ratio >= 1)")
        if not driving:
            why.append(_NO_DRIVING)
        elif not bool(absolute[k]):
            why.append("driving-point residue zero or not finite: no scale")
        if why:
            status.append("; ".join(reasons + ["not mass-normalised: " + "; ".join(why)]))
            continue
        phi = p * np.sqrt(2j * lam.imag / lam ** power)
        f = phi[fin]
        theta = 0.5 * np.angle(np.sum(f * f))
        real = np.real(phi * np.exp(-1j * theta))
        if real[ref] < 0:
            real = -real
        scaled[k] = np.where(fin, real, np.nan)
        mpcs[k] = mpc(f)
        mass[k] = 1.0 / real[ref] ** 2
        status.append("; ".join(reasons) or "ok")
    qty = _QUANTITY.get(power, "")
    return {
        "node_shape_amplitude": (("mode", "node"), amp, {
            "description": "shape over nodes, largest amplitude 1 (direction signs applied)"}),
        "node_shape_phase_deg": (("mode", "node"), ph, {"units": "deg"}),
        "node_shape_mass_normalised": (("mode", "node"), scaled, {
            "units": "kg^-1/2", "description": "mass-normalised shape, real after the best "
            "rotation (residue-to-shape relation of the " + (qty or "response") + " residue: "
            "Ewins 2000, Modal Testing, ch. 2 and 4)"}),
        "node_shape_mpc": ("mode", mpcs, {
            "description": "modal phase collinearity of the scaled shape (Pappa, Elliott & "
            "Schenk 1993); 1 for a real-normalisable shape"}),
        "modal_mass_kg": ("mode", mass, {
            "units": "kg", "description": "modal mass of the unit-maximum shape "
            "(node_shape_amplitude)"}),
        "node_shape_status": ("mode", np.array(status, dtype=object)),
    }


def _roles(rs: ResidueSet) -> list[str]:
    out = []
    for e in range(len(rs.labels)):
        s, h = e in rs.sensors, e in rs.hits
        out.append("driving point" if e in rs.driving else "both" if s and h
                   else "sensor" if s else "hit")
    return out


def node_dataset(rs: ResidueSet, psi: np.ndarray, absolute: np.ndarray, notes: Sequence[str],
                 table: xr.Dataset) -> xr.Dataset:
    """The node-shape variables and the ``node`` coords as a Dataset (over mode, node)."""
    resp_u, force_u = _units_of(table)
    dv = shape_variables(psi, absolute, notes, np.asarray(table["frequency_hz"].values, float),
                         np.asarray(table["damping_ratio"].values, float),
                         response_units=resp_u, force_units=force_u, driving=bool(rs.driving))
    roles = _roles(rs)
    both = [rs.labels[e] for e, r in enumerate(roles) if r == "both"]
    if both and not rs.driving:  # say what would make a driving point
        hint = (f"no driving point (node {both[0]} is sensed and hit, but the direction of "
                "one of them is not stated: give the channel's direction and the hits' "
                "excitation_direction)")
        dv["node_shape_status"] = ("mode", np.array(
            [str(t).replace(_NO_DRIVING, hint) for t in dv["node_shape_status"][1]],
            dtype=object))
    counts = np.array([rs.hit_counts.get(e, 0) for e in range(len(rs.labels))], np.int64)
    dv["node_hit_count"] = ("node", counts, {"description": "accepted hits at the node"})
    if rs.hit_scatter is not None:
        dv["node_hit_scatter"] = (("mode", "node"), rs.hit_scatter, {
            "description": "scatter of the hits' residues at the node: their standard "
                           "deviation (ddof 1) over the RMS of their mean, over the channels; "
                           "NaN below 2 accepted hits or for a node not hit"})
    coords = {
        "mode": table["mode"].values,
        "node": np.array(rs.labels, dtype=object),
        "node_name": ("node", np.array(rs.names, dtype=object)),
        "node_direction": ("node", np.array([f"+{a}" if a else "" for a in rs.axes], dtype=object),
                           {"description": "the axis each value is along (positive sense)"}),
        "node_role": ("node", np.array(roles, dtype=object)),
    }
    return xr.Dataset(dv, coords=coords)


def _channel_dofs(table: xr.Dataset) -> list[tuple[str, str, float]]:
    chans = [str(c) for c in table["channel"].values.tolist()]
    nodes = _texts(table, "channel_node", "channel") or _texts(table, "node", "channel") or chans
    dirs = _texts(table, "direction", "channel") or [""] * len(chans)
    return [dof_of(n or c, d) for n, d, c in zip(nodes, dirs, chans, strict=True)]


def _live(table: xr.Dataset) -> np.ndarray:
    if "channel_note" not in table.data_vars:
        return np.ones(table.sizes["channel"], bool)
    return np.array([not str(n).startswith("dead") for n in table["channel_note"].values])


def hit_residues(table: xr.Dataset) -> np.ndarray:
    """The table's per-hit residues as one complex array (mode, hit, channel)."""
    return (np.asarray(table["hit_residue_real"].transpose("mode", "hit", "channel").values)
            + 1j * np.asarray(table["hit_residue_imag"].transpose("mode", "hit", "channel").values))


def node_shapes(table: xr.Dataset) -> xr.Dataset:
    """Shapes over nodes of a fitted table whose hits carry ``excitation_node``.

    Parameters
    ----------
    table : xarray.Dataset
        A :func:`modalnb.fit_modes` table with ``hit_residue_real``/``_imag`` and the hits'
        ``excitation_node`` (and ``excitation_direction``) coords; the sensor nodes are the
        channel coord ``channel_node`` (or ``node``; the channel name without either).

    Returns
    -------
    xarray.Dataset
        Over (mode, node): ``node_shape_amplitude``, ``node_shape_phase_deg``,
        ``node_shape_mass_normalised``; over mode: ``node_shape_mpc``, ``modal_mass_kg``,
        ``node_shape_status``; ``node_hit_scatter`` over (mode, node) (the relative
        hit-to-hit scatter of the residues at a hit node: a check of the 3-5 hits per node
        common practice asks for); over node: ``node_hit_count`` and the coords
        ``node_name``, ``node_direction`` (``"+Z"``: the value is the motion along +Z;
        ``""`` when no direction is given), ``node_role`` (one of :data:`NODE_ROLES`).
        A node met along one axis is labelled by its name, one met along several by
        ``<node>+<axis>``. The relations used are in the module docstring.

    Examples
    --------
    >>> from modalnb.testing.scenarios import roving_chain
    >>> import modalnb
    >>> rec, truth = roving_chain(n_masses=3, hits_per_node=2, snr_db=60.0)
    >>> nodes = node_shapes(modalnb.fit_modes(rec))
    >>> nodes["node"].values.tolist(), nodes["node_role"].values.tolist()
    (['m1', 'm2', 'm3'], ['hit', 'hit', 'driving point'])
    """
    exc = _excitation_dofs(table)
    if exc is None:
        from ._errors import EstimationError

        raise EstimationError("node_shapes: the table's hits carry no 'excitation_node' coord. "
                              "Hint: give the records' hits their excitation_node and fit again.")
    rs = residue_set(hit_residues(table), _channel_dofs(table), exc, use_channel=_live(table))
    m = table.sizes["mode"]
    psi = np.full((m, len(rs.labels)), np.nan, complex)
    absolute = np.zeros(m, bool)
    notes = []
    for k in range(m):
        psi[k], absolute[k], note = shape_over_nodes(rs, k)
        notes.append(note)
    return node_dataset(rs, psi, absolute, notes, table)


def with_node_shapes(table: xr.Dataset, records: xr.Dataset) -> xr.Dataset:
    """`table` with the shapes over nodes of a roving-hammer record set (the finisher's step).

    The hits' ``excitation_node``/``excitation_direction`` coords are copied from
    `records`; the channel coord ``node`` becomes ``channel_node`` (the dim ``node`` is
    the union of sensor and hit nodes). Tables of one excitation are returned unchanged.

    Examples
    --------
    >>> from modalnb.testing.scenarios import roving_chain
    >>> import modalnb
    >>> rec, _ = roving_chain(n_masses=3, hits_per_node=2, snr_db=60.0)
    >>> res = modalnb.fit_modes(rec)
    >>> res["node_shape_amplitude"].dims, "channel_node" in res.coords
    (('mode', 'node'), True)
    """
    if "hit_setup" in records.coords or not is_roving(records):
        return table
    out = table
    if "node" in out.coords and out["node"].dims == ("channel",):
        out = out.rename({"node": "channel_node"})
    for name in ("excitation_node", "excitation_direction"):
        if name in records.coords:
            out = out.assign_coords({name: ("hit", np.asarray(records[name].values, dtype=object))})
    return out.merge(node_shapes(out))
