"""Several files holding one hit each, combined into one record set (hits 1..N).

The files must share channels, times (to within 0.1 % of a step; the first file's time
axis is kept), force or its absence, units, per-channel coords and attributes; per-hit
coords are joined in file order.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import xarray as xr

from .._errors import RecordError
from ..records import DIMS, build_records, record_parts
from ._common import attrs_equal

__all__ = ["combine_hits"]


def _one_hit_each(sources: Sequence[str], dsets: Sequence[xr.Dataset]) -> None:
    for src, ds in zip(sources, dsets, strict=True):
        if ds.sizes["hit"] != 1:
            raise RecordError(
                f"{src}: holds {ds.sizes['hit']} hits; in a list of files each file must "
                "hold one hit. Hint: open it on its own."
            )


def _alike(src: str, ds: xr.Dataset, src0: str, first: xr.Dataset) -> None:
    """`ds` (from `src`) matches `first` (from `src0`) in everything but its samples."""
    if ds["channel"].values.tolist() != first["channel"].values.tolist():
        raise RecordError(
            f"{src}: channels {ds['channel'].values.tolist()} differ from "
            f"{first['channel'].values.tolist()} in {src0}."
        )
    t, t0 = ds["time"].values, first["time"].values
    step = float(np.median(np.diff(t0)))
    if t.size != t0.size or not np.allclose(t, t0, rtol=0.0, atol=1e-3 * step):
        raise RecordError(
            f"{src}: times ({t.size} samples from {t[0]:g} s, step "
            f"{float(np.median(np.diff(t))):.6g} s) differ from {src0} ({t0.size} samples from "
            f"{t0[0]:g} s, step {step:.6g} s). Hint: every hit must share one time axis."
        )
    if ("force" in ds) != ("force" in first):
        raise RecordError(
            f"{src}: has{'' if 'force' in ds else ' no'} force but {src0} "
            f"has{'' if 'force' in first else ' no'} force."
        )
    for var in ("response", "force"):
        if var in ds and ds[var].attrs.get("units") != first[var].attrs.get("units"):
            raise RecordError(
                f"{src}: {var} units {ds[var].attrs.get('units')!r} differ from "
                f"{first[var].attrs.get('units')!r} in {src0}."
            )
    for name in sorted(map(str, set(ds.coords) | set(first.coords))):
        if name in DIMS:
            continue
        if (name in ds.coords) != (name in first.coords) or (
            "hit" not in ds[name].dims and not ds[name].equals(first[name])
        ):
            raise RecordError(f"{src}: coordinate {name!r} differs from {src0}.")
    if not attrs_equal(ds.attrs, first.attrs):
        raise RecordError(f"{src}: attributes {ds.attrs} differ from {src0} ({first.attrs}).")


def _joined_extra(sources: Sequence[str], parts: Sequence[dict[str, Any]]) -> xr.Dataset | None:
    """Further variables: those along ``hit`` joined in file order, the others equal in all."""
    extras = [p["extra"] for p in parts]
    first = extras[0]
    names = sorted(map(str, first.variables)) if first is not None else []
    for src, extra in zip(sources[1:], extras[1:], strict=True):
        these = sorted(map(str, extra.variables)) if extra is not None else []
        if these != names:
            raise RecordError(
                f"{src}: further variables {these} differ from {names} in {sources[0]}."
            )
        for name in names:
            if "hit" not in extra[name].dims and not extra[name].equals(first[name]):
                raise RecordError(f"{src}: variable {name!r} differs from {sources[0]}.")
    if first is None:
        return None
    joined = {
        name: xr.Variable.concat([e[name].variable for e in extras], dim="hit")
        if "hit" in first[name].dims
        else first[name].variable
        for name in names
    }
    coords = {n: v for n, v in joined.items() if n in first.coords}
    return xr.Dataset({n: v for n, v in joined.items() if n not in coords}, coords=coords)


def combine_hits(sources: Sequence[str], dsets: Sequence[xr.Dataset]) -> xr.Dataset:
    """Join one-hit record sets (read from `sources`) into one record set, hits 1..N.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> a = records_from_arrays(np.zeros((1, 32)), 64.0)
    >>> b = records_from_arrays(np.ones((1, 32)), 64.0)
    >>> combine_hits(["a.npz", "b.npz"], [a, b])["response"].values[:, 0, 0].tolist()
    [0.0, 1.0]
    """
    if not dsets:
        raise RecordError("open_records got an empty list of files.")
    _one_hit_each(sources, dsets)
    for src, ds in zip(sources[1:], dsets[1:], strict=True):
        _alike(src, ds, sources[0], dsets[0])
    parts = [record_parts(ds) for ds in dsets]
    joined = dict(parts[0])
    joined["response"] = np.concatenate([p["response"] for p in parts])
    if joined["force"] is not None:
        joined["force"] = np.concatenate([p["force"] for p in parts])
    joined["hits"] = np.arange(1, len(parts) + 1, dtype=np.int64)
    joined["hit_coords"] = {
        name: np.concatenate([p["hit_coords"][name] for p in parts])
        for name in parts[0]["hit_coords"]
    }
    joined["extra"] = _joined_extra(sources, parts)
    return build_records(**joined, source=sources[0])
