"""Several setups (roving sensors): one fit with poles shared over every setup, shapes glued
through the reference sensors.

A roving-sensor test measures the structure in several setups: the sensors move between
setups, one or more reference sensors stay put (the same node and direction in several
setups), the hammer strikes the same point (or roves as well). The setups are fitted
together and their shapes joined into one shape over nodes:

1. :func:`combine_setups` makes one record set of every setup's hits (hits 1..N in setup
   order). Channels become slots ``slot1 .. slotK`` (K the most channels of a setup); slot
   k of a hit is channel k of its setup. A setup with fewer channels repeats its last
   channel in the spare slots (the copy weighs that signal twice in the pole fit; its
   residues are not used). The hits carry ``hit_setup`` (the setup's name),
   ``setup_hit`` (the hit's label in its own file) and their ``excitation_node`` and
   ``excitation_direction``; what each slot holds in each setup is in
   ``attrs["setups"]`` (JSON).
2. :func:`modalnb.fit_modes` fits that record set: one pole per mode over every setup,
   residues per hit and slot (the engine's shared-pole fit over hits).
3. :func:`setup_node_shapes` builds each setup's shape over its nodes
   (:mod:`modalnb.node_shapes`) and glues them: a setup's shape is multiplied by the
   complex scale that best fits (least squares) its values at the reference nodes to those
   of the setups glued before it, starting from a setup with a driving point (then the
   glued shape keeps the driving point's absolute scale, and a mass-normalised shape
   follows) or else from the first setup. The reference nodes are those of the channels
   named in `reference_channels`, or by default every node and direction sensed in more
   than one setup.

:func:`fit_setups` does the three steps; :func:`read_setup_manifest` reads a CSV listing
the setups (columns ``setup,records``, paths relative to the manifest), like a campaign
manifest.
"""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import SetupError
from .node_shapes import (
    ResidueSet,
    _entries,
    _live,
    dof_of,
    hit_residues,
    node_dataset,
    residue_set,
    shape_over_nodes,
)
from .node_shapes import (
    _texts as node_texts,
)
from .records import MIN_SAMPLES, build_records, get_sample_rate, validate_records

__all__ = ["SetupError", "read_setup_manifest", "combine_setups", "setup_node_shapes",
           "fit_setups"]


# ------------------------------------------------------------------------- manifest
def read_setup_manifest(manifest: str | os.PathLike[str]) -> list[tuple[str, Path]]:
    """Read a setup manifest: ``[(setup name, records path), ...]`` in file order.

    A CSV with a header row holding the columns ``setup`` (a unique name) and ``records``
    (a path to one record file, relative to the manifest's folder); other columns are
    ignored. Rows are counted as in a spreadsheet (header = row 1); a bad row is a
    one-line :class:`SetupError` naming it.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "s.csv").write_text("setup,records\\nA,a.nc\\nB,b.nc\\n")
    >>> _ = [(d / f).write_bytes(b"") for f in ("a.nc", "b.nc")]
    >>> [(n, p.name) for n, p in read_setup_manifest(d / "s.csv")]
    [('A', 'a.nc'), ('B', 'b.nc')]
    """
    path = Path(manifest)
    if not path.is_file():
        raise SetupError(f"{path}: setup manifest not found.")
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise SetupError(f"{path}: not a CSV text file (not UTF-8).") from None
    if "\x00" in text:
        raise SetupError(f"{path}: not a CSV text file (binary content).")
    try:
        rows = list(csv.reader(io.StringIO(text)))
    except csv.Error as exc:
        raise SetupError(f"{path}: not a readable CSV ({exc}).") from None
    if not rows or not any(c.strip() for c in rows[0]):
        raise SetupError(f"{path}: no header row (the file is empty). Hint: the first row is "
                         "`setup,records`.")
    header = [c.strip() for c in rows[0]]
    for name in ("setup", "records"):
        if name not in header:
            raise SetupError(f"{path}, row 1 (header): no column `{name}` (columns: "
                             f"{', '.join(header)}). Hint: a setup manifest needs `setup` and "
                             "`records` columns.")
    i_set, i_rec = header.index("setup"), header.index("records")
    out: list[tuple[str, Path]] = []
    seen: dict[str, int] = {}
    for n, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        if len(row) != len(header):
            raise SetupError(f"{path}, row {n}: {len(row)} fields, the header has {len(header)}.")
        name, rec = row[i_set].strip(), row[i_rec].strip()
        if not name:
            raise SetupError(f"{path}, row {n}: empty `setup` name.")
        if name in seen:
            raise SetupError(f"{path}, row {n}: setup name {name!r} already used in row "
                             f"{seen[name]}.")
        if not rec:
            raise SetupError(f"{path}, row {n}: empty `records` path for setup {name!r}.")
        target = Path(rec) if Path(rec).is_absolute() else path.parent / rec
        if not target.exists():
            raise SetupError(f"{path}, row {n}: records file {rec!r} of setup {name!r} not "
                             f"found (looked for {target}).")
        seen[name] = n
        out.append((name, target))
    if not out:
        raise SetupError(f"{path}: the manifest lists no setup (only a header).")
    return out


# ------------------------------------------------------------------------- combining
def _names(records_list: Sequence[xr.Dataset], names: Sequence[str] | None) -> list[str]:
    if names is None:
        return [str(ds.attrs.get("setup", "")) or f"setup{i + 1}" for i, ds in enumerate(records_list)]
    names = [str(n) for n in names]
    if len(names) != len(records_list):
        raise SetupError(f"`names` has {len(names)} names for {len(records_list)} setups.")
    dup = [n for n in names if names.count(n) > 1]
    if dup:
        raise SetupError(f"setup name {dup[0]!r} is given twice: setup names must be unique.")
    return names


def _texts(ds: xr.Dataset, name: str, dim: str, n: int) -> list[str]:
    """The text labels of coord `name` over `dim` (a missing label is ""); n blanks without it."""
    return node_texts(ds, name, dim) or [""] * n


def _setup_meta(name: str, ds: xr.Dataset) -> dict[str, Any]:
    chans = [str(c) for c in ds["channel"].values.tolist()]
    nodes = _texts(ds, "node", "channel", len(chans))
    return {
        "name": name,
        "source": str(ds.attrs.get("source", "")),
        "channels": chans,
        "nodes": [n or c for n, c in zip(nodes, chans, strict=True)],
        "directions": _texts(ds, "direction", "channel", len(chans)),
    }


def combine_setups(records_list: Sequence[xr.Dataset], *,
                   names: Sequence[str] | None = None) -> xr.Dataset:
    """One record set of several setups' hits (layout in the module docstring).

    The setups must share the sample rate, the start time of their records, the response
    and force units, whether force is recorded and the acquisition attributes
    (``exponential_window_tau_s``, ``full_scale``, ``force_full_scale``); records of
    different lengths are cut to the shortest. Anything else is a one-line
    :class:`SetupError` naming the setup. Per-channel coords (``full_scale``, ``x, y, z``)
    are not carried over to the slots (their values differ between setups).

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> a = records_from_arrays(np.zeros((2, 2, 64)), 256.0, channels=["ref", "r1"])
    >>> b = records_from_arrays(np.zeros((1, 1, 64)), 256.0, channels=["ref"])
    >>> both = combine_setups([a, b], names=["A", "B"])
    >>> both["channel"].values.tolist(), both["hit_setup"].values.tolist()
    (['slot1', 'slot2'], ['A', 'A', 'B'])
    """
    if len(records_list) == 0:
        raise SetupError("no setups given: pass a list of record sets (one per setup).")
    names = _names(records_list, names)
    for name, ds in zip(names, records_list, strict=True):
        try:
            validate_records(ds)
        except SetupError:
            raise
        except ValueError as exc:
            raise SetupError(f"setup {name!r}: {exc}") from None
    first, name0 = records_list[0], names[0]
    fs0 = get_sample_rate(first)
    t0 = float(first["time"].values[0])
    with_force = "force" in first.data_vars
    units = str(first["response"].attrs.get("units", ""))
    f_units = str(first["force"].attrs.get("units", "")) if with_force else None
    for name, ds in zip(names[1:], records_list[1:], strict=True):
        fs = get_sample_rate(ds)
        if abs(fs / fs0 - 1.0) > 1e-6:
            raise SetupError(f"setup {name!r}: sample rate {fs:g} Hz differs from {fs0:g} Hz of "
                             f"setup {name0!r}. Hint: resample the setups to one rate.")
        if abs(float(ds["time"].values[0]) - t0) > 1e-3 / fs0:
            raise SetupError(f"setup {name!r}: records start at {float(ds['time'].values[0]):g} s, "
                             f"setup {name0!r} at {t0:g} s. Hint: give every setup the same "
                             "pre-trigger length.")
        if ("force" in ds.data_vars) != with_force:
            raise SetupError(f"setup {name!r}: has{'' if 'force' in ds.data_vars else ' no'} "
                             f"force but setup {name0!r} has{'' if with_force else ' no'} force.")
        if str(ds["response"].attrs.get("units", "")) != units:
            raise SetupError(f"setup {name!r}: response units "
                             f"{ds['response'].attrs.get('units')!r} differ from {units!r} of "
                             f"setup {name0!r}.")
        for key in ("exponential_window_tau_s", "full_scale", "force_full_scale"):
            a, b = first.attrs.get(key), ds.attrs.get(key)
            if (a is None) != (b is None) or (a is not None and float(a) != float(b)):
                raise SetupError(f"setup {name!r}: attribute {key} = {b!r} differs from {a!r} of "
                                 f"setup {name0!r}. Hint: setups fitted together share the "
                                 "acquisition settings.")
        if with_force and str(ds["force"].attrs.get("units", "")) != f_units:
            raise SetupError(f"setup {name!r}: force units {ds['force'].attrs.get('units')!r} "
                             f"differ from {f_units!r} of setup {name0!r}.")
    n_time = min(ds.sizes["time"] for ds in records_list)
    if n_time < MIN_SAMPLES:
        raise SetupError(f"the shortest setup holds {n_time} samples, at least {MIN_SAMPLES} "
                         "are needed.")
    n_slot = max(ds.sizes["channel"] for ds in records_list)
    resp, force, setup_of, setup_hit, exc_node, exc_dir = [], [], [], [], [], []
    for name, ds in zip(names, records_list, strict=True):
        r = np.asarray(ds["response"].values, float)[:, :, :n_time]
        if r.shape[1] < n_slot:  # spare slots repeat the last channel (module docstring)
            r = np.concatenate([r, np.repeat(r[:, -1:, :], n_slot - r.shape[1], axis=1)], axis=1)
        resp.append(r)
        if with_force:
            force.append(np.asarray(ds["force"].values, float)[:, :n_time])
        nh = ds.sizes["hit"]
        setup_of += [name] * nh
        setup_hit += [int(h) for h in ds["hit"].values.tolist()]
        exc_node += _texts(ds, "excitation_node", "hit", nh)
        exc_dir += _texts(ds, "excitation_direction", "hit", nh)
    meta = [_setup_meta(n, ds) for n, ds in zip(names, records_list, strict=True)]
    hit_coords: dict[str, Any] = {
        "hit_setup": np.array(setup_of, dtype=object),
        "setup_hit": np.array(setup_hit, dtype=np.int64),
        "excitation_node": np.array(exc_node, dtype=object),
        "excitation_direction": np.array(exc_dir, dtype=object),
    }
    attrs = {k: v for k, v in first.attrs.items()
             if k in ("exponential_window_tau_s", "full_scale", "force_full_scale")}
    attrs["setups"] = json.dumps(meta)
    return build_records(
        np.concatenate(resp), np.asarray(first["time"].values, float)[:n_time],
        channels=[f"slot{k + 1}" for k in range(n_slot)],
        force=np.concatenate(force) if with_force else None,
        units=units, force_units=f_units or "N", hit_coords=hit_coords, attrs=attrs,
        source="setups: " + ", ".join(names),
    )


# ------------------------------------------------------------------------- references
def _reference_keys(meta: list[dict[str, Any]],
                    reference_channels: Sequence[str] | None) -> set[tuple[str, str]]:
    """The reference (node, axis) pairs, checked; one-line :class:`SetupError` otherwise."""
    if isinstance(reference_channels, str):
        reference_channels = [reference_channels]
    if reference_channels is None:
        count: dict[tuple[str, str], int] = {}
        for m in meta:
            for key in {dof_of(n, d)[:2] for n, d in zip(m["nodes"], m["directions"], strict=True)}:
                count[key] = count.get(key, 0) + 1
        return {k for k, c in count.items() if c > 1}
    keys: set[tuple[str, str]] = set()
    for ch in reference_channels:
        where = [(m["name"], dof_of(m["nodes"][m["channels"].index(ch)],
                                    m["directions"][m["channels"].index(ch)])[:2])
                 for m in meta if ch in m["channels"]]
        if len(where) < 2:
            found = f"only in setup {where[0][0]!r}" if where else "in no setup"
            raise SetupError(f"reference channel {ch!r} is {found}; a reference sensor must be "
                             "in at least two setups. Hint: name a channel that stays put.")
        dofs = {d for _, d in where}
        if len(dofs) > 1:
            (s1, d1), (s2, d2) = where[0], next(w for w in where if w[1] != where[0][1])
            raise SetupError(f"reference channel {ch!r} is at node {d1[0]!r} {d1[1] or '-'} in "
                             f"setup {s1!r} but at node {d2[0]!r} {d2[1] or '-'} in setup {s2!r}; "
                             "a reference sensor keeps its node and direction.")
        keys |= dofs
    return keys


def _check_glue(meta: list[dict[str, Any]], refs: set[tuple[str, str]]) -> None:
    """Every setup is joined to the first through shared reference sensors."""
    if len(meta) < 2:
        return
    sensed = [{dof_of(n, d)[:2] for n, d in zip(m["nodes"], m["directions"], strict=True)} & refs
              for m in meta]
    joined, pending = [0], list(range(1, len(meta)))
    grew = True
    while pending and grew:
        grew = False
        for s in list(pending):
            if any(sensed[s] & sensed[j] for j in joined):
                joined.append(s)
                pending.remove(s)
                grew = True
    if pending:
        m = meta[pending[0]]
        src = f" ({m['source']})" if m["source"] else ""
        raise SetupError(f"setup {m['name']!r}{src} shares no reference sensor (a channel at the "
                         f"same node and direction) with setup {meta[0]['name']!r} or the setups "
                         "joined to it. Hint: keep one sensor in place over the setups, or name "
                         "it with reference_channels (--reference-channel).")


def _meta_of(records: xr.Dataset) -> list[dict[str, Any]]:
    if "setups" not in records.attrs or "hit_setup" not in records.coords:
        raise SetupError("these records are not combined setups (no attrs['setups']). Hint: "
                         "make them with combine_setups.")
    return json.loads(str(records.attrs["setups"]))


# ------------------------------------------------------------------------- gluing
def setup_node_shapes(table: xr.Dataset, records: xr.Dataset, *,
                      reference_channels: Sequence[str] | None = None) -> xr.Dataset:
    """`table` (a fit of :func:`combine_setups` records) with the glued shapes over nodes.

    Adds the variables of :func:`modalnb.node_shapes.node_shapes` over (mode, node) for the
    union of every setup's nodes, ``setup_scale_magnitude``/``setup_scale_phase_deg``
    (mode, setup; the complex scale applied to each setup's shape) and
    ``setup_glue_misfit`` (mode, setup; relative misfit at the reference nodes after
    scaling, 0 with one reference node), the hits' ``hit_setup``, ``setup_hit``,
    ``excitation_node``/``excitation_direction`` coords and, over (setup, channel), what
    each slot holds (``setup_channel``, ``setup_channel_node``,
    ``setup_channel_direction``; ``""`` for a spare slot).

    Examples
    --------
    >>> from modalnb import fit_modes
    >>> from modalnb.testing.scenarios import roving_chain
    >>> a, _ = roving_chain(3, hits_per_node=2, hit_masses=(2,), sensor_masses=(0, 1))
    >>> b, _ = roving_chain(3, hits_per_node=2, hit_masses=(2,), sensor_masses=(1, 2))
    >>> both = combine_setups([a, b], names=["A", "B"])
    >>> res = setup_node_shapes(fit_modes(both), both)
    >>> res["setup_glue_misfit"].sel(setup="B").values.round(12).tolist()
    [0.0, 0.0, 0.0]
    """
    meta = _meta_of(records)
    refs = _reference_keys(meta, reference_channels)
    _check_glue(meta, refs)
    hr = hit_residues(table)
    live = _live(table)
    setup_of = np.asarray(records["hit_setup"].values).astype(str)
    exc_n = [str(v) for v in records["excitation_node"].values.tolist()]
    exc_d = [str(v) for v in records["excitation_direction"].values.tolist()]
    parts: list[ResidueSet] = []
    for m in meta:
        hits = np.flatnonzero(setup_of == m["name"])
        nch = len(m["channels"])
        ch_dofs = [dof_of(n, d) for n, d in zip(m["nodes"], m["directions"], strict=True)]
        parts.append(residue_set(hr[:, hits, :nch], ch_dofs,
                                 [dof_of(exc_n[h], exc_d[h]) for h in hits],
                                 use_channel=live[:nch]))
    # the union of every setup's entries
    keys = [(p.names[e], p.axes[e]) for p in parts for e in range(len(p.labels))]
    ent = _entries(keys)
    n_ent = len(ent.labels)
    gmap = [[ent.of(p.names[e], p.axes[e]) for e in range(len(p.labels))] for p in parts]
    ref_ent = {ent.of(n, a) for n, a in refs if (n, a) in ent.index}
    m_modes, n_set = table.sizes["mode"], len(parts)
    psi = np.full((m_modes, n_ent), np.nan, complex)
    absolute = np.zeros(m_modes, bool)
    notes: list[str] = []
    scale = np.full((m_modes, n_set), np.nan, complex)
    misfit = np.full((m_modes, n_set), np.nan)
    for k in range(m_modes):
        local = [shape_over_nodes(p, k) for p in parts]
        vals = []
        for s, (v, _, _) in enumerate(local):
            g = np.full(n_ent, np.nan, complex)
            g[gmap[s]] = v
            vals.append(g)
        base = next((s for s, (_, a, _) in enumerate(local) if a), 0)
        absolute[k] = bool(local[base][1])
        acc = np.zeros(n_ent, complex)
        cnt = np.zeros(n_ent)
        fin = np.isfinite(vals[base])
        acc[fin] += vals[base][fin]
        cnt[fin] += 1
        scale[k, base], misfit[k, base] = 1.0, 0.0
        pending = [s for s in range(n_set) if s != base]
        grew = True
        while pending and grew:
            grew = False
            for s in list(pending):
                glued = np.where(cnt > 0, acc / np.maximum(cnt, 1), np.nan)
                common = [e for e in ref_ent if np.isfinite(vals[s][e]) and np.isfinite(glued[e])
                          and abs(vals[s][e]) > 0]
                if not common:
                    continue
                v, g = vals[s][common], glued[common]
                alpha = np.sum(np.conj(v) * g) / np.sum(np.abs(v) ** 2)
                scale[k, s] = alpha
                misfit[k, s] = float(np.linalg.norm(alpha * v - g) / np.linalg.norm(g))
                f = np.isfinite(vals[s])
                acc[f] += alpha * vals[s][f]
                cnt[f] += 1
                pending.remove(s)
                grew = True
        psi[k] = np.where(cnt > 0, acc / np.maximum(cnt, 1), np.nan)
        note = [local[base][2]] if local[base][2] and not absolute[k] else []
        if pending:
            note.append("setups " + ", ".join(repr(meta[s]["name"]) for s in pending)
                        + " not glued for this mode (reference residues zero or undefined)")
        notes.append("; ".join(note))
    union = ResidueSet(
        ent.labels, ent.names, ent.axes,
        sorted({gmap[s][e] for s, p in enumerate(parts) for e in p.sensors}),
        sorted({gmap[s][e] for s, p in enumerate(parts) for e in p.hits if e >= 0}),
        np.zeros((0, 0, 0), complex),
        {gmap[s][e] for s, p in enumerate(parts) for e in p.driving},
        {},
    )
    scat_sum = np.zeros((m_modes, n_ent))
    scat_n = np.zeros((m_modes, n_ent))
    for s, p in enumerate(parts):
        for e, c in p.hit_counts.items():  # named hit nodes only (UNNAMED has no count)
            union.hit_counts[gmap[s][e]] = union.hit_counts.get(gmap[s][e], 0) + c
        if p.hit_scatter is not None:
            for e in range(len(p.labels)):
                f = np.isfinite(p.hit_scatter[:, e])
                scat_sum[f, gmap[s][e]] += p.hit_scatter[f, e]
                scat_n[f, gmap[s][e]] += 1
    # a node hit in several setups: the mean of their scatters
    union.hit_scatter = np.where(scat_n > 0, scat_sum / np.maximum(scat_n, 1), np.nan)
    # mass normalisation needs the base setup's own driving point (absolute[k])
    nodes = node_dataset(union, psi, absolute, notes, table)
    n_slot = table.sizes["channel"]

    def slots(key: str) -> np.ndarray:
        out = np.full((n_set, n_slot), "", dtype=object)
        for s, m in enumerate(meta):
            out[s, :len(m[key])] = m[key]
        return out

    out = table.assign_coords(
        hit_setup=("hit", np.asarray(records["hit_setup"].values, dtype=object)),
        setup_hit=("hit", np.asarray(records["setup_hit"].values)),
        excitation_node=("hit", np.asarray(records["excitation_node"].values, dtype=object)),
        excitation_direction=("hit", np.asarray(records["excitation_direction"].values,
                                                dtype=object)),
        setup=np.array([m["name"] for m in meta], dtype=object),
    )
    out = out.assign(
        setup_channel=(("setup", "channel"), slots("channels")),
        setup_channel_node=(("setup", "channel"), slots("nodes")),
        setup_channel_direction=(("setup", "channel"), slots("directions")),
        setup_scale_magnitude=(("mode", "setup"), np.abs(scale)),
        setup_scale_phase_deg=(("mode", "setup"), np.degrees(np.angle(scale)), {"units": "deg"}),
        setup_glue_misfit=(("mode", "setup"), misfit, {
            "description": "|alpha v - g| / |g| over the reference nodes after scaling"}),
    )
    out = out.merge(nodes)
    for name in ("shape_amplitude", "shape_phase_deg", "residue_real", "residue_imag"):
        if name in out.data_vars:  # over slots that hold other sensors in other setups
            out[name].attrs["description"] = (
                "over the channel slots of combined setups (least squares over every setup's "
                "hits): not a shape; the shape is node_shape_*")
    refs_list = None if reference_channels is None else list(
        [reference_channels] if isinstance(reference_channels, str) else reference_channels)
    if isinstance(out.attrs.get("recipe"), str):  # the choice lives in the recipe
        from dataclasses import replace

        from .recipe import Recipe

        out.attrs["recipe"] = replace(Recipe.from_json(out.attrs["recipe"]),
                                      reference_channels=refs_list).to_json()
    out.attrs["setups"] = json.dumps({
        "setups": meta,
        "reference_channels": refs_list,
        "reference_nodes": sorted(f"{n}{'+' + a if a else ''}" for n, a in refs),
    })
    return out


def fit_setups(
    records_list: Sequence[xr.Dataset],
    *,
    reference_channels: Sequence[str] | None = None,
    names: Sequence[str] | None = None,
    band: tuple[float, float] | None = None,
    window: tuple[float, float] | None = None,
    n_modes: int | None = None,
    accept: Mapping[int, bool] | Sequence[bool] | None = None,
    check_thresholds: Mapping[str, Any] | None = None,
    max_order: int | None = None,
    scatter: bool = True,
    blas_threads: int | None = 1,
    recipe: Any = None,
) -> xr.Dataset:
    """Fit several setups with poles shared over all of them and glue their shapes.

    Parameters
    ----------
    records_list : sequence of xarray.Dataset
        One record set per setup (same sample rate, start time and units).
    reference_channels : sequence of str, optional
        Channel names of the reference sensors (each in at least two setups, at the same
        node and direction in each). Default: every node and direction sensed in more than
        one setup.
    names : sequence of str, optional
        Setup names (default ``attrs["setup"]`` of each set, else ``setup1, ...``).
    band, window, n_modes, check_thresholds, max_order, scatter, blas_threads
        As in :func:`modalnb.fit_modes`.
    accept : mapping or sequence of bool, optional
        Hit decisions over the combined hits (1..N in setup order; ``setup_hit`` gives
        each hit's label in its own file).
    recipe : modalnb.Recipe or path, optional
        Replay a recipe (as :func:`modalnb.fit_modes`); its ``reference_channels`` are used
        unless `reference_channels` is given. The table's ``attrs["recipe"]`` holds the
        reference channels used.

    Returns
    -------
    xarray.Dataset
        The :func:`modalnb.fit_modes` table of the combined records (channels are slots,
        see :func:`combine_setups`) with the glued shapes over nodes
        (:func:`setup_node_shapes`).

    Raises
    ------
    SetupError
        One line naming the setup or reference channel: unlike records, a reference
        channel in one setup only, a setup sharing no reference sensor with the others.

    Examples
    --------
    >>> from modalnb.testing.scenarios import roving_chain
    >>> a, _ = roving_chain(3, hits_per_node=2, hit_masses=(2,), sensor_masses=(0, 1))
    >>> b, _ = roving_chain(3, hits_per_node=2, hit_masses=(2,), sensor_masses=(1, 2))
    >>> res = fit_setups([a, b], names=["A", "B"])
    >>> res["node"].values.tolist(), res["node_role"].values.tolist()
    (['m1', 'm2', 'm3'], ['sensor', 'sensor', 'driving point'])
    """
    from .fitting import fit_modes
    from .recipe import Recipe, load_recipe

    if recipe is not None:
        recipe = recipe if isinstance(recipe, Recipe) else load_recipe(recipe)
        if reference_channels is None:
            reference_channels = recipe.reference_channels
    names = _names(records_list, names)
    meta = [_setup_meta(n, ds) for n, ds in zip(names, records_list, strict=True)]
    _check_glue(meta, _reference_keys(meta, reference_channels))
    combined = combine_setups(records_list, names=names)
    if recipe is not None:
        table = fit_modes(combined, recipe=recipe, max_order=max_order, scatter=scatter,
                          blas_threads=blas_threads)
    else:
        table = fit_modes(combined, band=band, window=window, n_modes=n_modes, accept=accept,
                          check_thresholds=check_thresholds, max_order=max_order,
                          scatter=scatter, blas_threads=blas_threads)
    return setup_node_shapes(table, combined, reference_channels=reference_channels)
