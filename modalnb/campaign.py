"""Test campaigns: many record sets, one recipe, each mode tracked across the sets.

A campaign is a **manifest** (a CSV file: column ``set``, a unique label; column
``records``, a path to one record set relative to the manifest's folder; every other
column a label of the set, numbers or text) fitted set by set with one recipe
(:func:`modalnb.run_recipe`, unchanged), then each set's modes paired with those of a
**reference** (a modal table written by ``modalnb fit``, or by default the first set that
fits).

Pairing
    One optimal assignment (``scipy.optimize.linear_sum_assignment``: the Hungarian method,
    Kuhn 1955, "The Hungarian method for the assignment problem", Naval Research Logistics
    Quarterly 2:83-97; scipy uses Crouse 2016, "On implementing 2D rectangular assignment
    algorithms", IEEE Trans. Aerospace and Electronic Systems 52(4)) on the cost
    ``|f - f_ref| / f_ref + (1 - MAC)`` where the shapes are comparable (the set and the
    reference share at least two channels, compared on those channels; MAC of Allemang &
    Brown 1982), ``|f - f_ref| / f_ref`` alone otherwise. A pair is allowed only within
    the pairing tolerance, which is wide on purpose (a mode that moved is what the user
    looks for; the verdict flags it): :data:`PAIR_FREQUENCY_TOLERANCE` (30 %) where the
    MAC is at least :data:`PAIR_MIN_MAC` (0.5), :data:`PAIR_FREQUENCY_TOLERANCE_NO_SHAPES`
    (15 %) where shapes cannot be compared. These limits are our choice (common practice
    is to pair on MAC >= 0.8 for the same structure; here a moved or cracked part must
    still pair). A set's modes that pair with no reference mode are listed in
    ``extra_modes``.

Running
    With dask.distributed: by default an embedded ``LocalCluster`` (worker processes, one
    thread each, ``workers`` of them: default the CPU count; in a script, call
    :func:`fit_campaign` under ``if __name__ == "__main__":``, as dask starts them with
    ``spawn``), or an existing cluster at
    ``scheduler="tcp://host:8786"``. Workers receive the records' path and the recipe,
    never arrays, and hold one set at a time. ``workers=0`` or
    ``scheduler="synchronous"`` fits the sets one after the other in this process (no
    dask). Inside a fit the BLAS thread pools are limited to one thread
    (``threadpoolctl``).

Resuming
    With ``out=DIR`` every set's ``modalnb fit`` files go to ``DIR/sets/<set>/`` together
    with ``campaign_set.json`` (the checksums of its records file, of its recipe and of
    every file of the folder, and the few numbers the campaign needs of the set's table);
    each folder is built beside its place and swapped in whole (not flushed to disk file
    by file: a set that a machine crash left incomplete fails its checksums and is fitted
    again). A re-run fits only the sets whose folder is missing, failed, damaged or whose
    inputs changed, and takes the others' numbers from their ``campaign_set.json``
    (no table is read back); the summary files (``tracked_modes.csv``, ``sets.csv``,
    ``campaign.nc``, ``campaign_recipe.json``, ``campaign.html``) are replaced together at
    the end. With a cluster on other machines, the records and DIR must be on a disk the
    workers share.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
import shutil
import uuid
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError
from ._files import staged_files
from ._netcdf import load_netcdf4, netcdf4_engine
from .recipe import Recipe, load_recipe

__all__ = [
    "ManifestError",
    "CampaignSet",
    "read_manifest",
    "read_hit_overrides",
    "fit_campaign",
    "pair_modes",
    "write_campaign_files",
    "TRACKED_COLUMNS",
    "SETS_COLUMNS",
    "PAIR_FREQUENCY_TOLERANCE",
    "PAIR_FREQUENCY_TOLERANCE_NO_SHAPES",
    "PAIR_MIN_MAC",
]

#: Widest relative frequency change of a pair whose shapes agree (MAC >= PAIR_MIN_MAC).
PAIR_FREQUENCY_TOLERANCE = 0.30
#: Widest relative frequency change of a pair when the shapes cannot be compared.
PAIR_FREQUENCY_TOLERANCE_NO_SHAPES = 0.15
#: Lowest MAC of a pair where the shapes can be compared.
PAIR_MIN_MAC = 0.5

#: Columns of ``tracked_modes.csv`` (the contract).
TRACKED_COLUMNS = ("set", "mode", "frequency_hz", "damping_ratio", "frequency_hz_std",
                   "damping_ratio_std", "mac_to_reference", "frequency_change_pct", "status")
#: First columns of ``sets.csv``; the manifest labels follow.
SETS_COLUMNS = ("set", "records", "status", "verdict", "n_modes", "extra_modes")

#: dask settings of the embedded ``LocalCluster``'s workers: dask's sampling profiler
#: (a thread in every worker that records call stacks every 10 ms and keeps them) is
#: off, so a worker's memory does not grow with the number of sets it fits and no CPU
#: goes to sampling. An existing cluster (``scheduler=``) keeps its own settings
#: (``distributed.worker.profile.enabled: false`` in its dask configuration does the same).
EMBEDDED_WORKER_CONFIG: dict[str, Any] = {"distributed.worker.profile.enabled": False}

CAMPAIGN_RECIPE_FORMAT = "modalnb-campaign-recipe"
SET_MARKER = "campaign_set.json"
_NOT_FITTED = "not fitted"


class ManifestError(ModalnbError):
    """A campaign manifest (or its hit-override file) cannot be read as given."""


# --------------------------------------------------------------------------- manifest
@dataclass
class CampaignSet:
    """One row of a manifest: the set label, its records path (resolved) and its labels."""

    label: str
    records: Path
    records_text: str
    labels: dict[str, Any] = field(default_factory=dict)
    row: int = 0


def _csv_rows(path: Path, what: str) -> list[list[str]]:
    if not path.is_file():
        raise FileNotFoundError(2, f"{what} not found", str(path))
    raw = path.read_bytes()
    if b"\x00" in raw:
        raise ManifestError(f"{path}: not a CSV text file (binary content).")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ManifestError(f"{path}: not a CSV text file (not UTF-8).") from None
    try:
        rows = list(csv.reader(io.StringIO(text)))
    except csv.Error as exc:
        raise ManifestError(f"{path}: not a readable CSV ({exc}).") from None
    return rows


def _numeric_or_text(values: list[str]) -> list[Any]:
    try:
        return [int(v) for v in values]  # whole numbers, none empty: kept as integers
    except ValueError:
        pass
    out: list[float] = []
    for v in values:
        if v.strip() == "":
            out.append(math.nan)
            continue
        try:
            out.append(float(v))
        except ValueError:
            return [v.strip() for v in values]
    return out


def read_manifest(manifest: str | os.PathLike[str]) -> list[CampaignSet]:
    """Read a campaign manifest; one-line :class:`ManifestError` naming the row otherwise.

    Rows are counted as in a spreadsheet: the header is row 1. A label column of whole
    numbers (no empty cell) becomes integers; one whose every non-empty cell is a number
    becomes floats (empty cells NaN); any other column stays text.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "m.csv").write_text("set,records,temperature_c\\na,a.nc,20.5\\nb,b.nc,35\\n")
    >>> [(s.label, s.records.name, s.labels["temperature_c"]) for s in read_manifest(d / "m.csv")]
    [('a', 'a.nc', 20.5), ('b', 'b.nc', 35.0)]
    """
    path = Path(manifest)
    rows = _csv_rows(path, "manifest")
    while rows and not any(c.strip() for c in rows[-1]):
        rows.pop()
    if not rows or not any(c.strip() for c in rows[0]):
        raise ManifestError(f"{path}: not a CSV with a header row (the file is empty).")
    header = [c.strip() for c in rows[0]]
    for name in ("set", "records"):
        if name not in header:
            raise ManifestError(
                f"{path}, row 1 (header): no column `{name}` (columns: {', '.join(header)}). "
                "Hint: a manifest needs `set` and `records` columns."
            )
    for k, name in enumerate(header):
        if not name:
            raise ManifestError(f"{path}, row 1 (header): column {k + 1} has no name.")
        if name in header[:k]:
            raise ManifestError(f"{path}, row 1 (header): column `{name}` appears twice.")
    i_set, i_rec = header.index("set"), header.index("records")
    seen: dict[str, int] = {}
    body: list[tuple[int, list[str]]] = []
    for n, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        if len(row) != len(header):
            raise ManifestError(
                f"{path}, row {n}: {len(row)} fields, the header has {len(header)}."
            )
        label = row[i_set].strip()
        if not label:
            raise ManifestError(f"{path}, row {n}: empty `set` label.")
        if label in seen:
            raise ManifestError(
                f"{path}, row {n}: set label {label!r} already used in row {seen[label]}."
            )
        if "/" in label or "\\" in label or label in (".", ".."):
            raise ManifestError(
                f"{path}, row {n}: set label {label!r} cannot name a folder (no / or \\)."
            )
        if not row[i_rec].strip():
            raise ManifestError(f"{path}, row {n}: empty `records` path for set {label!r}.")
        seen[label] = n
        body.append((n, row))
    if not body:
        raise ManifestError(f"{path}: the manifest lists no set (only a header).")
    label_cols = [c for c in header if c not in ("set", "records")]
    columns = {c: _numeric_or_text([row[header.index(c)] for _, row in body]) for c in label_cols}
    base = path.parent
    out = []
    for j, (n, row) in enumerate(body):
        rec = row[i_rec].strip()
        out.append(CampaignSet(label=row[i_set].strip(), records=(base / rec), records_text=rec,
                               labels={c: columns[c][j] for c in label_cols}, row=n))
    return out


_TRUE = {"true", "1", "yes", "accept", "accepted"}
_FALSE = {"false", "0", "no", "reject", "rejected"}


def read_hit_overrides(path: str | os.PathLike[str], sets: Sequence[str] | None = None
                       ) -> dict[str, dict[int, bool]]:
    """Read per-set hit overrides (CSV ``set,hit,accepted``; accepted true/false).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "o.csv"
    >>> _ = p.write_text("set,hit,accepted\\nb07,3,false\\n")
    >>> read_hit_overrides(p)
    {'b07': {3: False}}
    """
    p = Path(path)
    rows = _csv_rows(p, "hit-override file")
    if not rows:
        raise ManifestError(f"{p}: empty; expected a header `set,hit,accepted`.")
    header = [c.strip() for c in rows[0]]
    for name in ("set", "hit", "accepted"):
        if name not in header:
            raise ManifestError(f"{p}, row 1 (header): no column `{name}` (expected set,hit,accepted).")
    i_s, i_h, i_a = (header.index(c) for c in ("set", "hit", "accepted"))
    known = set(sets) if sets is not None else None
    out: dict[str, dict[int, bool]] = {}
    for n, row in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in row):
            continue
        if len(row) != len(header):
            raise ManifestError(f"{p}, row {n}: {len(row)} fields, the header has {len(header)}.")
        label, hit, acc = row[i_s].strip(), row[i_h].strip(), row[i_a].strip().lower()
        if known is not None and label not in known:
            raise ManifestError(f"{p}, row {n}: set {label!r} is not in the manifest.")
        try:
            h = int(hit)
        except ValueError:
            raise ManifestError(f"{p}, row {n}: hit {hit!r} is not a hit label (an integer).") from None
        if acc not in _TRUE | _FALSE:
            raise ManifestError(f"{p}, row {n}: accepted {row[i_a]!r} is not true or false.")
        out.setdefault(label, {})[h] = acc in _TRUE
    return out


# --------------------------------------------------------------------------- checksums
def _file_digest(path: Path) -> str | None:
    """SHA-256 of a records file (or of every file of a folder, names included); None when
    it cannot be read (the fit then reports why)."""
    h = hashlib.sha256()
    try:
        if path.is_dir():
            for f in sorted(p for p in path.rglob("*") if p.is_file()):
                h.update(str(f.relative_to(path)).encode())
                h.update(f.read_bytes())
        else:
            h.update(path.read_bytes())
    except OSError:
        return None
    return "sha256:" + h.hexdigest()


def _recipe_digest(recipe_json: str) -> str:
    return "sha256:" + hashlib.sha256(recipe_json.encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------- one set
_SUMMARY_NUMBERS = ("frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std")


def _summary_record(table: xr.Dataset) -> dict[str, Any]:
    """What the campaign needs of a set's modal table (small: modes x channels), as plain
    lists: kept in the set's ``campaign_set.json`` (floats as JSON numbers: exact) and read
    back by a re-run instead of the table."""
    rec: dict[str, Any] = {name: np.asarray(table[name].values, float).tolist() for name in _SUMMARY_NUMBERS}
    rec["mode"] = [int(m) for m in np.asarray(table["mode"].values).tolist()]
    if "node_shape_amplitude" in table.data_vars:
        # a table with shapes over nodes (a roving-hammer set) is compared over its nodes
        # (a node without a value counts as 0 in the MAC)
        rec["channel"] = [str(c) for c in np.asarray(table["node"].values).tolist()]
        for name, src in (("shape_amplitude", "node_shape_amplitude"),
                          ("shape_phase_deg", "node_shape_phase_deg")):
            rec[name] = np.nan_to_num(np.asarray(table[src].values, float)).tolist()
        return rec
    rec["channel"] = [str(c) for c in np.asarray(table["channel"].values).tolist()] if "channel" in table.coords else []
    for name in ("shape_amplitude", "shape_phase_deg"):
        rec[name] = np.asarray(table[name].values, float).tolist() if name in table else None
    return rec


def _summary_from_record(rec: Mapping[str, Any]) -> dict[str, Any]:
    """The summary arrays of :func:`_summary_record`'s lists (the same numbers, first run
    or re-run)."""
    amp, ph = rec.get("shape_amplitude"), rec.get("shape_phase_deg")
    shapes = None
    if amp is not None and ph is not None:
        dims = (len(rec["mode"]), len(rec["channel"]))
        shapes = np.asarray(amp, float).reshape(dims) * np.exp(
            1j * np.deg2rad(np.asarray(ph, float).reshape(dims)))
    out: dict[str, Any] = {name: np.asarray(rec[name], float) for name in _SUMMARY_NUMBERS}
    out["mode"] = [int(m) for m in rec["mode"]]
    out["channel"] = [str(c) for c in rec["channel"]]
    out["shapes"] = shapes
    return out


def _summary(table: xr.Dataset) -> dict[str, Any]:
    """What the campaign needs of a set's modal table."""
    return _summary_from_record(_summary_record(table))


def _bytes_digest(data: bytes) -> str:
    return "sha256:" + hashlib.sha256(data).hexdigest()


def _remove_stale(sets_dir: Path) -> None:
    """Remove the half-built set folders a killed run left (``.<set>.new-*``, ``.<set>.old-*``).

    One campaign run per output folder at a time: a second run started on the same folder
    while one is still writing would remove that run's folders in progress."""
    if not sets_dir.is_dir():
        return
    for p in sets_dir.iterdir():
        if p.name.startswith(".") and (".new-" in p.name or ".old-" in p.name) and p.is_dir():
            shutil.rmtree(p, ignore_errors=True)


def _fit_set(label: str, records: str, recipe_json: str, set_dir: str | None,
             digests: tuple[str | None, str]) -> dict[str, Any]:
    """Fit one set (runs in a worker): read the records from `records`, replay the recipe,
    write the set's ``modalnb fit`` files when `set_dir` is given. Returns the summary and
    ``status`` ("ok" or why it failed, one line); never raises for a bad set."""
    from threadpoolctl import threadpool_limits

    from .export import write_modal_table
    from .io import open_records
    from .pipeline import recipe_for, run_recipe

    try:
        with threadpool_limits(1):
            rec = open_records(records)
            recipe = recipe_for(rec, Recipe.from_json(recipe_json), source=records)
            table, checks = run_recipe(rec, recipe)
        status = "ok" if table.sizes.get("mode", 0) > 0 else "no mode found in the band"
    except (ModalnbError, OSError, ValueError) as exc:
        msg = " ".join(str(exc).split()) or type(exc).__name__
        if isinstance(exc, OSError) and not isinstance(exc, ModalnbError) and exc.filename:
            msg = f"{exc.filename}: {exc.strerror or exc}"
        return {"status": msg}
    summary = _summary_record(table)
    if set_dir is not None:
        # the set's folder is replaced whole (built beside it, then exchanged: the marker
        # arrives with the table or not at all). Not flushed to disk file by file: the
        # marker, written last, holds the checksum of every other file of the set, so a
        # set a machine crash left incomplete is found by a re-run and fitted again.
        def write_marker(p: Path) -> None:
            files = {f.name: _bytes_digest(f.read_bytes())
                     for f in sorted(p.parent.iterdir()) if f.is_file() and f.name != SET_MARKER}
            marker = {"set": label, "records": records, "records_sha256": digests[0],
                      "recipe_sha256": digests[1], "status": status, "files": files,
                      "summary": summary}
            p.write_text(json.dumps(marker, indent=1) + "\n", encoding="utf-8")

        write_modal_table(table, Path(set_dir), recipe=recipe, checks=checks,
                          extra_files={SET_MARKER: write_marker}, durable=False)
    out = _summary_from_record(summary)
    out["status"] = status
    return out


def _finished(set_dir: Path, digests: tuple[str | None, str]) -> dict[str, Any] | None:
    """The summary of a set already fitted with the same inputs, else None.

    Read from the set's ``campaign_set.json`` after checking the checksum of every file it
    lists (no table is read and nothing is refitted); a marker of an older modalnb without
    the summary reads the set's ``modes.nc``."""
    marker = set_dir / SET_MARKER
    if digests[0] is None or not marker.is_file():
        return None
    try:
        info = json.loads(marker.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if (not isinstance(info, dict) or info.get("status") != "ok"
            or info.get("records_sha256") != digests[0] or info.get("recipe_sha256") != digests[1]):
        return None
    files = info.get("files")
    try:
        if isinstance(files, dict) and isinstance(info.get("summary"), dict):
            if "modes.nc" not in files:
                return None
            for name, digest in files.items():
                if _bytes_digest((set_dir / str(name)).read_bytes()) != digest:
                    return None
            out = _summary_from_record(info["summary"])
        else:
            if not (set_dir / "modes.nc").is_file():
                return None
            out = _summary(load_netcdf4(set_dir / "modes.nc"))
    except (OSError, ValueError, KeyError, TypeError):
        return None
    out["status"] = "ok"
    return out


# --------------------------------------------------------------------------- pairing
def _common_shapes(s: dict[str, Any], ref: dict[str, Any]) -> tuple[np.ndarray, np.ndarray] | None:
    if s.get("shapes") is None or ref.get("shapes") is None:
        return None
    common = [c for c in ref["channel"] if c in s["channel"]]
    if len(common) < 2:
        return None
    ir = [ref["channel"].index(c) for c in common]
    is_ = [s["channel"].index(c) for c in common]
    return s["shapes"][:, is_], ref["shapes"][:, ir]


def _mac_matrix(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """MAC of every row of `a` (modes x channels) with every row of `b` (Allemang & Brown 1982)."""
    num = np.abs(a.conj() @ b.T) ** 2
    den = np.outer(np.sum(np.abs(a) ** 2, axis=1), np.sum(np.abs(b) ** 2, axis=1))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / den, 0.0)


def pair_modes(frequency_hz: Sequence[float], reference_hz: Sequence[float],
               mac: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray | None]:
    """Pair a set's modes with the reference's by one optimal assignment.

    Parameters
    ----------
    frequency_hz : sequence of float
        The set's natural frequencies.
    reference_hz : sequence of float
        The reference's natural frequencies.
    mac : ndarray, optional
        MAC (set mode x reference mode) where the shapes are comparable.

    Returns
    -------
    pair : ndarray of int
        For each reference mode the index of its set mode, or -1 (no pair).
    mac_of_pair : ndarray or None
        The MAC of each pair (NaN where no pair); None without `mac`.

    Examples
    --------
    Two modes that swapped order keep their identity through MAC:

    >>> import numpy as np
    >>> pair_modes([105.0, 118.0], [100.0, 110.0], mac=np.array([[0.02, 0.99], [0.98, 0.01]]))[0]
    array([1, 0])
    >>> pair_modes([100.0], [100.0, 200.0])[0]  # frequency only
    array([ 0, -1])
    """
    from scipy.optimize import linear_sum_assignment

    f = np.asarray(frequency_hz, float)
    fr = np.asarray(reference_hz, float)
    pair = np.full(fr.size, -1, dtype=int)
    if f.size == 0 or fr.size == 0:
        return pair, (np.full(fr.size, np.nan) if mac is not None else None)
    rel = np.abs(f[:, None] - fr[None, :]) / fr[None, :]
    if mac is not None:
        cost = rel + (1.0 - mac)
        allowed = (rel <= PAIR_FREQUENCY_TOLERANCE) & (mac >= PAIR_MIN_MAC)
    else:
        cost = rel.copy()
        allowed = rel <= PAIR_FREQUENCY_TOLERANCE_NO_SHAPES
    big = 1e6
    rows, cols = linear_sum_assignment(np.where(allowed, cost, big))
    for r, c in zip(rows, cols, strict=True):
        if allowed[r, c]:
            pair[c] = r
    mac_pair = None
    if mac is not None:
        mac_pair = np.array([mac[pair[j], j] if pair[j] >= 0 else np.nan for j in range(fr.size)])
    return pair, mac_pair


# --------------------------------------------------------------------------- verdicts
def _tolerances(tolerance: float | Mapping[Any, float] | None, modes: Sequence[int]) -> dict[int, float]:
    if tolerance is None:
        return {}
    if isinstance(tolerance, Mapping):
        out: dict[int, float] = {}
        for k, v in tolerance.items():
            try:
                m = int(k)
            except (TypeError, ValueError):
                raise ManifestError(f"tolerance: {k!r} is not a mode label of the reference {list(modes)}.") from None
            if m not in modes:
                raise ManifestError(f"tolerance: mode {m} is not a mode of the reference {list(modes)}.")
            out[m] = _pct(v)
        return out
    pct = _pct(tolerance)
    return {m: pct for m in modes}


def _pct(v: Any) -> float:
    try:
        x = float(v)
    except (TypeError, ValueError):
        raise ManifestError(f"tolerance must be a percentage (a positive number), was {v!r}.") from None
    if not (x > 0 and math.isfinite(x)):
        raise ManifestError(f"tolerance must be a positive percentage, was {v!r}.")
    return x


def _verdict(changes: dict[int, float], tol: dict[int, float]) -> str:
    if not tol:
        return ""
    bad = []
    for m, t in tol.items():
        c = changes.get(m, math.nan)
        if math.isnan(c):
            bad.append(f"mode {m} missing")
        elif abs(c) > t:
            bad.append(f"mode {m} {c:+.1f} %")
    return "pass" if not bad else "fail: " + ", ".join(bad)


def _fmt_hz(f: float) -> str:
    return f"{f:.4g} Hz"


# --------------------------------------------------------------------------- the run
def _reference_summary(reference: Any) -> tuple[dict[str, Any], str]:
    if isinstance(reference, xr.Dataset):
        return _summary(reference), "a modal table (Dataset)"
    p = Path(reference)
    nc = p / "modes.nc" if p.is_dir() else p
    if not nc.is_file():
        raise FileNotFoundError(2, "reference modal table (modes.nc) not found", str(nc))
    try:
        table = load_netcdf4(nc)
    except (OSError, ValueError) as exc:
        raise ManifestError(f"{nc}: not a modal table written by `modalnb fit` ({exc}).") from None
    missing = [v for v in ("frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std")
               if v not in table]
    if missing or "mode" not in table.coords:
        raise ManifestError(f"{nc}: not a modal table written by `modalnb fit` (no `{(missing or ['mode'])[0]}`).")
    return _summary(table), str(nc)


def _base_recipe(recipe: Any) -> Recipe:
    if recipe is None:
        return Recipe()
    if isinstance(recipe, Recipe):
        return recipe
    return load_recipe(recipe)


def _set_recipe_json(base: Recipe, overrides: Mapping[int, bool] | None) -> str:
    r = replace(base, records_checksum=None, source=None,
                hit_overrides={**base.hit_overrides, **dict(overrides or {})})
    # created_with is the version; keep the text stable within one modalnb version
    return r.to_json()


class _Progress:
    def __init__(self, progress: Any, total: int):
        self.cb: Callable[[int, int, int], None] | None = None
        self.bar = None
        self.done = self.failed = 0
        self.total = total
        if callable(progress):
            self.cb = progress
        elif progress:
            import sys

            from tqdm.std import tqdm

            self.bar = tqdm(total=total, desc="campaign", unit="set", file=sys.stderr,
                            dynamic_ncols=True)

    def step(self, ok: bool) -> None:
        self.done += 1
        self.failed += 0 if ok else 1
        if self.bar is not None:
            self.bar.set_postfix_str(f"failed {self.failed}, remaining {self.total - self.done}",
                                     refresh=False)
            self.bar.update(1)
        if self.cb is not None:
            self.cb(self.done, self.failed, self.total)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()


def _run_sets(jobs: list[tuple[Any, ...]], workers: int | None, scheduler: str | None,
              report: Callable[[int, dict[str, Any]], None]) -> None:
    """Fit every job (index, args of :func:`_fit_set`) and call ``report(index, summary)``
    as each finishes."""
    if not jobs:
        return
    synchronous = scheduler == "synchronous" or (scheduler is None and workers == 0)
    if synchronous:
        for idx, args in jobs:
            report(idx, _fit_set(*args))
        return
    import logging

    import dask
    from distributed import Client, LocalCluster, as_completed

    cluster = None
    if scheduler is None:
        n = workers if workers is not None else (os.cpu_count() or 1)
        n = max(1, min(int(n), len(jobs)))
        with dask.config.set(EMBEDDED_WORKER_CONFIG):
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                   dashboard_address=":0", silence_logs=logging.ERROR)
        client = Client(cluster)
    else:
        client = Client(scheduler)
    try:
        futures = {}
        for idx, args in jobs:
            fut = client.submit(_fit_set, *args, pure=False, key=f"modalnb-set-{args[0]}-{uuid.uuid4().hex[:12]}")
            futures[fut] = idx
        for fut in as_completed(futures):
            idx = futures[fut]
            if fut.status == "finished":
                report(idx, fut.result())
            else:
                # the worker itself failed (killed, out of memory): that set's status
                exc = fut.exception()
                report(idx, {"status": f"worker failed: {type(exc).__name__}: {' '.join(str(exc).split())}"})
            fut.release()
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def fit_campaign(
    manifest: str | os.PathLike[str],
    *,
    recipe: Recipe | str | os.PathLike[str] | None = None,
    reference: str | os.PathLike[str] | xr.Dataset | None = None,
    tolerance: float | Mapping[Any, float] | None = None,
    out: str | os.PathLike[str] | None = None,
    workers: int | None = None,
    scheduler: str | None = None,
    progress: Any = None,
    hit_overrides: str | os.PathLike[str] | Mapping[str, Mapping[int, bool]] | None = None,
) -> xr.Dataset:
    """Fit every set of a campaign with one recipe and track each mode across the sets.

    Parameters
    ----------
    manifest : path
        The manifest CSV (:func:`read_manifest`).
    recipe : Recipe or path, optional
        One recipe for every set (band, window rule, model order, check thresholds);
        default ``Recipe()`` (automatic choices).
    reference : path or Dataset, optional
        A modal table written by ``modalnb fit`` (its ``modes.nc`` or its folder); default
        the first set of the manifest that fits.
    tolerance : float or dict, optional
        Production check: one percentage for every reference mode, or ``{mode: pct}``. A
        set passes when every checked mode has a pair within its tolerance. None: no
        verdict.
    out : path, optional
        Output folder: ``sets/<set>/`` per set (resumable) and the summary files
        (:func:`write_campaign_files`). None: nothing is written and nothing resumed.
    workers : int, optional
        Worker processes of the embedded ``LocalCluster`` (default the CPU count, at most
        one per set); 0 = fit in this process, one set after the other.
    scheduler : str, optional
        Address of an existing dask scheduler (``"tcp://host:8786"``), or
        ``"synchronous"`` (as ``workers=0``).
    progress : bool or callable, optional
        True: a tqdm bar on stderr (sets done, failed, remaining, time left); a callable
        is called as ``progress(done, failed, total)`` after each set.
    hit_overrides : path or dict, optional
        Per-set hit decisions: a CSV ``set,hit,accepted`` (:func:`read_hit_overrides`) or
        ``{set: {hit: bool}}``; they add to the recipe's own overrides.

    Returns
    -------
    xarray.Dataset
        Over (``set``, ``mode``; ``mode`` the reference's labels): ``frequency_hz``,
        ``damping_ratio``, ``frequency_hz_std``, ``damping_ratio_std``,
        ``mac_to_reference`` (NaN where the shapes cannot be compared),
        ``frequency_change_pct``, ``mode_status`` ("ok", "out of tolerance", "missing",
        "not fitted"). Over ``set``: ``set_status`` ("ok" for every set that fitted,
        otherwise why it failed), ``verdict`` ("pass", "fail: mode 2 -3.4 %", "fail: mode 2
        missing", "fail: not fitted"; empty without `tolerance`), ``extra_modes`` (the
        set's modes paired with no reference mode, one line), ``n_modes``, ``records``;
        the manifest labels as coords over ``set``. Over ``mode``:
        ``reference_frequency_hz``, ``reference_damping_ratio``. ``attrs``:
        ``campaign_recipe`` (JSON), ``reference``, ``manifest`` (its absolute path).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from modalnb.demo import production_campaign
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> manifest = production_campaign(d, n_parts=3, seed=1, n_samples=1024)
    >>> ds = fit_campaign(manifest, workers=0, tolerance=5.0)
    >>> list(ds["set_status"].values)
    ['ok', 'ok', 'ok']
    """
    sets = read_manifest(manifest)
    base = _base_recipe(recipe)
    labels = [s.label for s in sets]
    if hit_overrides is None:
        per_set: dict[str, dict[int, bool]] = {}
    elif isinstance(hit_overrides, Mapping):
        per_set = {str(k): {int(h): bool(a) for h, a in v.items()} for k, v in hit_overrides.items()}
        unknown = sorted(set(per_set) - set(labels))
        if unknown:
            raise ManifestError(f"hit overrides: set {unknown[0]!r} is not in the manifest.")
    else:
        per_set = read_hit_overrides(hit_overrides, labels)
    if workers is not None and (isinstance(workers, bool) or int(workers) < 0):
        raise ManifestError(f"workers must be 0 or a positive number, was {workers!r}.")
    ref_given = None
    ref_source = ""
    if reference is not None:
        ref_given, ref_source = _reference_summary(reference)
        _tolerances(tolerance, ref_given["mode"])  # bad tolerance: fail before any fit
    elif isinstance(tolerance, Mapping):
        for v in tolerance.values():
            _pct(v)
    elif tolerance is not None:
        _pct(tolerance)
    out_dir = Path(out) if out is not None else None
    if out_dir is not None:
        out_dir.mkdir(parents=True, exist_ok=True)
        _remove_stale(out_dir / "sets")
    recipe_texts = {s.label: _set_recipe_json(base, per_set.get(s.label)) for s in sets}
    results: list[dict[str, Any] | None] = [None] * len(sets)
    jobs = []
    for i, s in enumerate(sets):
        digests = (_file_digest(s.records), _recipe_digest(recipe_texts[s.label]))
        set_dir = out_dir / "sets" / s.label if out_dir is not None else None
        if set_dir is not None:
            done = _finished(set_dir, digests)
            if done is not None:
                results[i] = done
                continue
        jobs.append((i, (s.label, str(s.records), recipe_texts[s.label],
                         str(set_dir) if set_dir is not None else None, digests)))
    bar = _Progress(progress, len(sets))
    for r in results:
        if r is not None:
            bar.step(True)

    def report(idx: int, summary: dict[str, Any]) -> None:
        results[idx] = summary
        bar.step(summary.get("status") == "ok")

    try:
        _run_sets(jobs, workers, scheduler, report)
    finally:
        bar.close()
    ds = _assemble(sets, results, ref_given, ref_source, tolerance, base, per_set,
                   str(Path(manifest).resolve()))
    if out_dir is not None:
        write_campaign_files(ds, out_dir)
    return ds


def _assemble(sets: list[CampaignSet], results: list[dict[str, Any] | None],
              ref_given: dict[str, Any] | None, ref_source: str, tolerance: Any,
              base: Recipe, per_set: dict[str, dict[int, bool]], manifest_path: str) -> xr.Dataset:
    res = [r if r is not None else {"status": "not run (interrupted)"} for r in results]
    ref = ref_given
    if ref is None:
        for s, r in zip(sets, res, strict=True):
            if r.get("status") == "ok":
                ref, ref_source = r, f"set {s.label} (first set that fitted)"
                break
    modes = list(ref["mode"]) if ref is not None else []
    tol = _tolerances(tolerance, modes)
    n_s, n_m = len(sets), len(modes)
    shape = (n_s, n_m)
    arr = {k: np.full(shape, np.nan) for k in ("frequency_hz", "damping_ratio", "frequency_hz_std",
                                               "damping_ratio_std", "mac_to_reference",
                                               "frequency_change_pct")}
    mstat = np.full(shape, _NOT_FITTED, dtype=object)
    set_status, verdict, extra, n_modes = [], [], [], []
    for i, r in enumerate(res):
        st = str(r.get("status"))
        set_status.append(st)
        if st != "ok" or ref is None:
            verdict.append("fail: not fitted" if tol else "")
            extra.append("")
            n_modes.append(0)
            continue
        f = r["frequency_hz"]
        n_modes.append(int(f.size))
        common = _common_shapes(r, ref)
        mac = _mac_matrix(*common) if common is not None else None
        pair, mac_pair = pair_modes(f, ref["frequency_hz"], mac)
        changes: dict[int, float] = {}
        for j, m in enumerate(modes):
            k = pair[j]
            if k < 0:
                mstat[i, j] = "missing"
                continue
            for name in ("frequency_hz", "damping_ratio", "frequency_hz_std", "damping_ratio_std"):
                arr[name][i, j] = r[name][k]
            if mac_pair is not None:
                arr["mac_to_reference"][i, j] = mac_pair[j]
            c = 100.0 * (f[k] - ref["frequency_hz"][j]) / ref["frequency_hz"][j]
            arr["frequency_change_pct"][i, j] = c
            changes[m] = c
            mstat[i, j] = "out of tolerance" if (m in tol and abs(c) > tol[m]) else "ok"
        paired = set(int(k) for k in pair if k >= 0)
        extra.append(", ".join(_fmt_hz(float(f[k])) for k in range(f.size) if k not in paired))
        verdict.append(_verdict(changes, tol))
    coords: dict[str, Any] = {"set": [s.label for s in sets], "mode": np.asarray(modes, dtype=int)}
    for name in (sets[0].labels if sets else {}):
        vals = [s.labels[name] for s in sets]
        numeric = all(isinstance(v, (int, float)) for v in vals)
        coords[name] = ("set", np.asarray(vals) if numeric else np.asarray(vals, dtype=object))
    dv: dict[str, Any] = {k: (("set", "mode"), v) for k, v in arr.items()}
    dv["mode_status"] = (("set", "mode"), mstat)
    dv["set_status"] = ("set", np.asarray(set_status, dtype=object))
    dv["verdict"] = ("set", np.asarray(verdict, dtype=object))
    dv["extra_modes"] = ("set", np.asarray(extra, dtype=object))
    dv["n_modes"] = ("set", np.asarray(n_modes, dtype=int))
    dv["records"] = ("set", np.asarray([s.records_text for s in sets], dtype=object))
    dv["reference_frequency_hz"] = ("mode", np.asarray(ref["frequency_hz"] if ref else [], float))
    dv["reference_damping_ratio"] = ("mode", np.asarray(ref["damping_ratio"] if ref else [], float))
    ds = xr.Dataset(dv, coords=coords)
    ds.attrs["reference"] = ref_source or "none (no set fitted)"
    ds.attrs["manifest"] = manifest_path
    ds.attrs["campaign_recipe"] = json.dumps({
        "format": CAMPAIGN_RECIPE_FORMAT,
        "version": 1,
        "recipe": base.to_dict(),
        "tolerance_pct": {str(m): t for m, t in tol.items()},
        "hit_overrides": {k: {str(h): a for h, a in sorted(v.items())} for k, v in sorted(per_set.items())},
        "reference": ds.attrs["reference"],
        "pairing": {"frequency_tolerance": PAIR_FREQUENCY_TOLERANCE,
                    "frequency_tolerance_without_shapes": PAIR_FREQUENCY_TOLERANCE_NO_SHAPES,
                    "min_mac": PAIR_MIN_MAC},
    }, indent=2) + "\n"
    return ds


# --------------------------------------------------------------------------- files
def _cell(x: Any) -> str:
    if isinstance(x, (bool, np.bool_)):
        return "true" if x else "false"
    if isinstance(x, (float, np.floating)):
        x = float(x)
        return "nan" if math.isnan(x) else repr(x)
    if isinstance(x, (np.integer,)):
        return str(int(x))
    return str(x)


def _csv(columns: Sequence[str], rows: list[list[Any]]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    for row in rows:
        w.writerow([_cell(v) for v in row])
    return buf.getvalue()


def tracked_modes_csv(ds: xr.Dataset) -> str:
    """The text of ``tracked_modes.csv`` (one row per set and reference mode)."""
    rows = []
    for i, s in enumerate(ds["set"].values.tolist()):
        for j, m in enumerate(ds["mode"].values.tolist()):
            rows.append([s, int(m), *(ds[v].values[i, j] for v in TRACKED_COLUMNS[2:-1]),
                         ds["mode_status"].values[i, j]])
    return _csv(TRACKED_COLUMNS, rows)


def sets_csv(ds: xr.Dataset) -> str:
    """The text of ``sets.csv`` (one row per set, the manifest labels last)."""
    label_cols = [c for c in ds.coords if c not in ("set", "mode") and ds[c].dims == ("set",)]
    rows = []
    for i, s in enumerate(ds["set"].values.tolist()):
        rows.append([s, ds["records"].values[i], ds["set_status"].values[i], ds["verdict"].values[i],
                     int(ds["n_modes"].values[i]), ds["extra_modes"].values[i],
                     *(ds[c].values[i] for c in label_cols)])
    return _csv([*SETS_COLUMNS, *label_cols], rows)


def write_campaign_files(ds: xr.Dataset, out_dir: str | os.PathLike[str]) -> dict[str, Path]:
    """Write the campaign's summary files into `out_dir`, all replaced together.

    ``tracked_modes.csv``, ``sets.csv``, ``campaign.nc``, ``campaign_recipe.json`` and
    ``campaign.html`` (offline report, :mod:`modalnb.export.campaign_report`).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> from modalnb.demo import production_campaign
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> ds = fit_campaign(production_campaign(d, n_parts=2, seed=3, n_samples=1024), workers=0)
    >>> sorted(write_campaign_files(ds, d / "out"))  # doctest: +NORMALIZE_WHITESPACE
    ['campaign.html', 'campaign.nc', 'campaign_recipe.json', 'sets.csv', 'tracked_modes.csv']
    """
    from .export.campaign_report import campaign_html

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    texts = {
        "tracked_modes.csv": tracked_modes_csv(ds),
        "sets.csv": sets_csv(ds),
        "campaign_recipe.json": ds.attrs.get("campaign_recipe", "{}\n"),
        "campaign.html": campaign_html(ds),
    }
    nc = ds.copy()
    for name in list(nc.variables):
        if nc[name].dtype == object:
            nc[name] = nc[name].astype(str)
    with staged_files(out) as stage:
        for name, text in texts.items():
            stage(name).write_bytes(text.encode("utf-8"))
        nc.to_netcdf(stage("campaign.nc"), engine=netcdf4_engine())
    return {name: out / name for name in [*texts, "campaign.nc"]}
