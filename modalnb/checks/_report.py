"""The hit report: :func:`format_hit_report`, an aligned plain-text table of hit checks."""

from __future__ import annotations

from typing import Any

import numpy as np
import xarray as xr

from .._errors import ModalnbError

__all__ = ["format_hit_report"]


def _fmt(value: Any, kind: str) -> str:
    """A number through the one formatter (:func:`modalnb._numbers.format_quantity`)."""
    from .._numbers import format_quantity

    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if np.isnan(v):
        return "-"
    if np.isinf(v):
        return "inf" if v > 0 else "-inf"
    return format_quantity(v, kind, unit=False)


def format_hit_report(checks: xr.Dataset, source: str | None = None) -> str:
    """Plain-text table of :func:`modalnb.checks.check_hits` results, one line per hit, plus a summary.

    Parameters
    ----------
    checks : xarray.Dataset
        The result of :func:`check_hits`.
    source : str, optional
        Where the records came from, printed on the first line.

    Returns
    -------
    str
        Aligned columns (hit, accepted yes/no, peak force, pulse duration, second
        excursion, clipped samples, SNR, in-band force SNR, force roll-off, end level,
        reason / warnings / notes)
        with units in the header, and a last line such as "4 of 6 hits accepted".

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> t = np.arange(-64, 1984) / 2048.0
    >>> x = np.exp(-20 * t) * np.sin(2 * np.pi * 100 * t) * (t >= 0)
    >>> rng = np.random.default_rng(1)
    >>> ds = records_from_arrays(x + 1e-5 * rng.standard_normal(t.size), 2048.0, t0=t[0])
    >>> from modalnb.checks import check_hits
    >>> print(format_hit_report(check_hits(ds)).splitlines()[-1])
    1 of 1 hits accepted
    """
    if not isinstance(checks, xr.Dataset) or "accepted" not in checks.data_vars:
        raise ModalnbError(
            "format_hit_report expects the Dataset returned by check_hits (with 'accepted')."
        )
    f_units = checks["peak_force"].attrs.get("units", "") if "peak_force" in checks else ""
    cols = [  # header, variable, kind of number (modalnb._numbers), scale
        (f"peak force [{f_units}]" if f_units else "peak force", "peak_force", "amplitude", 1.0),
        ("pulse [ms]", "pulse_duration_s", "amplitude", 1e3),
        ("2nd hit [%]", "double_hit_ratio", "percent", 1.0),
        ("clipped [samples]", "clipped_samples", "count", 1),
        ("SNR [dB]", "snr_db", "db", 1.0),
        ("force in band [dB]", "force_band_snr_db", "db", 1.0),
        ("roll-off [dB]", "force_rolloff_db", "db", 1.0),
        ("end [dB]", "end_level_db", "db", 1.0),
    ]
    cols = [c for c in cols if c[1] in checks]
    rows: list[list[str]] = []
    for i, hit in enumerate(checks["hit"].values):
        row = []
        for _, var, kind, scale in cols:
            value = checks[var].values[i]
            row.append(str(int(value)) if kind == "count" else _fmt(scale * float(value), kind))
        ok = bool(checks["accepted"].values[i])
        notes = []
        for name, label in (("reason", "rejected"), ("warnings", "warnings"), ("notes", "notes")):
            if name in checks and str(checks[name].values[i]):
                notes.append(f"{label}: {checks[name].values[i]}")
        rows.append([str(int(hit)), "yes" if ok else "no", *row, " | ".join(notes)])
    header = ["hit", "accepted", *(c[0] for c in cols), "reason / warnings / notes"]
    widths = [max(len(header[j]), *(len(r[j]) for r in rows)) for j in range(len(header) - 1)]
    lines = []
    if source:
        lines.append(f"hit checks for {source}")
    band = checks.attrs.get("band_hz", "")
    if band:
        lines.append(f"band of interest {band} Hz")

    def line(cells: list[str]) -> str:
        left = [cells[0].rjust(widths[0]), cells[1].ljust(widths[1])]
        rest = [c.rjust(w) for c, w in zip(cells[2:-1], widths[2:], strict=True)]
        return "  ".join([*left, *rest, cells[-1]]).rstrip()

    lines.append(line(header))
    lines.append(line(["-" * w for w in widths] + ["-" * len(header[-1])]))
    lines.extend(line(r) for r in rows)
    n_ok = int(np.count_nonzero(checks["accepted"].values))
    lines.append(f"{n_ok} of {len(rows)} hits accepted")
    return "\n".join(lines)
