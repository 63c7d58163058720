"""Composing the checks: :func:`check_hits` runs every check of :data:`CHECKS` on each hit.

Each hit is analysed once (:func:`modalnb.checks._hit.analyse_hit`: force pulse, noise
floors, dead channels); then every check in :data:`CHECKS` measures it and may add
phrases. The phrases of the checks named in ``reject`` become the hit's ``reason``, the
others its ``warnings`` (followed by advisories such as "no force record"); a check's
notes (advisories that neither reject nor warn, such as the force range used) go to
``notes``; the user's overrides win over reason and warnings. Keyword arguments, their validation, the result's variables and
its attrs all come from the checks' declarations.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np
import xarray as xr

from .._errors import ModalnbError, OptionError, RecordError
from .._utils import check_band, did_you_mean
from ..records import get_sample_rate, validate_records
from . import (
    _hit,
    clipping,
    dead_channel,
    double_hit,
    low_snr,
    no_pulse,
    not_decayed,
    soft_tip,
    weak_hit,
)
from ._base import Check, Threshold, Variable

__all__ = ["CHECKS", "CHECK_NAMES", "DEFAULT_REJECT", "THRESHOLDS", "check_hits", "check_threshold_value"]

#: The checks, in the order they run and their phrases appear in ``reason``/``warnings``.
#: A new check is a module with a ``CHECK`` and one entry here.
CHECKS: tuple[Check, ...] = (
    no_pulse.CHECK,
    double_hit.CHECK,
    soft_tip.CHECK,
    weak_hit.CHECK,
    clipping.CHECK,
    low_snr.CHECK,
    not_decayed.CHECK,
    dead_channel.CHECK,
)

#: Names of the checks, as used in ``reject`` and at the start of reason/warning phrases.
CHECK_NAMES: tuple[str, ...] = tuple(c.name for c in CHECKS)

#: Checks that reject a hit by default; all others only warn. A flat force record holds no
#: hammer pulse (the force sensor is unplugged: nothing to normalise by, no pulse to start
#: the decay after), a double hit adds a second input the free-decay model does not have,
#: and a clipped record is not the structure's response (common practice: check the force
#: first, reject double hits and overloads).
DEFAULT_REJECT = ("no pulse", "double hit", "clipping")

#: Every keyword threshold of :func:`check_hits`: the shared hit analysis's, then each
#: check's.
THRESHOLDS: tuple[Threshold, ...] = _hit.THRESHOLDS + tuple(
    t for c in CHECKS for t in c.thresholds
)

_STATUS = (
    Variable("accepted", "bool", "the hit is used for estimation"),
    Variable("reason", "str", "why it is rejected (phrases joined by '; ')"),
    Variable("warnings", "str", "findings that do not reject it (phrases joined by '; ')"),
    Variable("notes", "str", "advisories that neither reject nor warn, e.g. force range "
             "used (phrases joined by '; ')"),
    Variable("user_decision", "str", '"accepted", "rejected" or ""'),
)
_VARIABLES: tuple[Variable, ...] = _STATUS + _hit.VARIABLES + tuple(
    v for c in CHECKS for v in c.variables
)
_DTYPES = {"float": float, "int": np.int64, "bool": bool, "str": object}


def _join(items: Iterable[str]) -> str:
    return "; ".join(i for i in items if i)


def _check_reject(reject: Iterable[str]) -> tuple[str, ...]:
    if isinstance(reject, str):
        reject = (reject,)
    try:
        names_ = list(reject)
    except TypeError:
        raise OptionError(
            f"`reject` must be a list of check names, was {reject!r}; known checks: "
            f"{', '.join(map(repr, CHECK_NAMES))}."
        ) from None
    out = []
    for name in names_:
        if name not in CHECK_NAMES:
            raise OptionError(
                f"`reject` names an unknown check {name!r}; known checks: "
                f"{', '.join(map(repr, CHECK_NAMES))}.{did_you_mean(str(name), CHECK_NAMES)}"
            )
        out.append(name)
    return tuple(out)


def check_threshold_value(name: str, value: Any) -> float | int:
    """One threshold of :func:`check_hits` validated: its stored value, or a one-line
    :class:`~modalnb.OptionError` naming it (unknown names get a did-you-mean).

    Examples
    --------
    >>> check_threshold_value("clip_level", 0.99)
    0.99
    """
    by_name = {t.name: t for t in THRESHOLDS}
    if name not in by_name:
        raise OptionError(
            f"check_hits got an unknown threshold `{name}`.{did_you_mean(name, by_name)} "
            f"Thresholds: {', '.join(by_name)}."
        )
    t = by_name[name]
    if isinstance(value, (bool, np.bool_)):
        raise OptionError(f"threshold `{name}` must be a number (default {t.default!r}), was {value!r}.")
    try:
        return t.validate(value)
    except ModalnbError as exc:
        raise OptionError(f"threshold {str(exc).rstrip('.')} (default {t.default!r}).") from None


def _check_thresholds(given: Mapping[str, Any]) -> dict[str, Any]:
    out = {t.name: t.validate(t.default) for t in THRESHOLDS}
    for name, value in given.items():
        out[name] = check_threshold_value(name, value)
    return out


def _check_overrides(overrides: Mapping[Any, Any] | None, hits: list[int],
                     source: str | None) -> dict[int, bool]:
    if overrides is None:
        return {}
    where = f"{source}: " if source else ""
    if not isinstance(overrides, Mapping):
        raise OptionError(
            f"{where}`overrides` must be a mapping {{hit: True/False}}, was {overrides!r}."
        )
    out: dict[int, bool] = {}
    for key, value in overrides.items():
        label: int | None = None
        if isinstance(key, bool):
            label = None
        elif isinstance(key, (int, np.integer)):
            label = int(key)
        elif isinstance(key, str) and key.strip().lstrip("+-").isdigit():
            label = int(key)
        if label is None or label not in hits:
            raise RecordError(
                f"{where}override for unknown hit {key!r}; the hit labels are {hits}. "
                "Hint: use one of those labels."
            )
        if not isinstance(value, (bool, np.bool_)):
            raise RecordError(
                f"{where}override for hit {label} must be True (accept) or False (reject), "
                f"was {value!r}."
            )
        out[label] = bool(value)
    return out



def check_hits(
    records: xr.Dataset,
    *,
    band: tuple[float, float] | None = None,
    overrides: Mapping[int, bool] | None = None,
    reject: Iterable[str] = DEFAULT_REJECT,
    source: str | None = None,
    **thresholds: float,
) -> xr.Dataset:
    """Measure every hit of a record set and decide whether it is accepted.

    Parameters
    ----------
    records : xarray.Dataset
        A record set (see :mod:`modalnb.records`); it is validated first.
    band : (float, float), optional
        Band of interest (low, high) in Hz for the force roll-off check. Without it the
        roll-off is not judged (``force_rolloff_db`` is NaN) but ``force_bandwidth_hz``
        is still reported.
    overrides : mapping of hit label to bool, optional
        The user's decision per hit (True accepts, False rejects). It wins over the
        checks and is recorded in ``user_decision``, ``reason`` and ``warnings``.
    reject : iterable of str
        Checks whose findings reject the hit; the others only warn. Names are those of
        :data:`CHECK_NAMES`. Default ``("no pulse", "double hit", "clipping")`` (common practice).
    source : str, optional
        File name for error messages.
    **thresholds : float or int
        The checks' thresholds by keyword, each documented with its measure and source in
        its check's module (:mod:`modalnb.checks.double_hit`, ...). An unknown name is a
        one-line :class:`~modalnb.ModalnbError`. The thresholds and their defaults:

__THRESHOLDS__

    Returns
    -------
    xarray.Dataset
        Over ``hit``:

__HIT_VARIABLES__

        Over ``(hit, channel)``:

__CHANNEL_VARIABLES__

        The thresholds used are stored as attrs, with ``reject`` and ``band_hz``.

    Raises
    ------
    RecordError
        Invalid records, an override for an unknown hit, a malformed band or one above
        Nyquist.
    OptionError
        An unknown check name in `reject`, an unknown or invalid threshold (a
        :class:`~modalnb.ModalnbError`).

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> fs = 10000.0
    >>> t = np.arange(-200, 4800) / fs
    >>> f = np.where((t >= 0) & (t < 1e-3), np.sin(np.pi * t / 1e-3), 0.0)
    >>> x = np.exp(-40 * t) * np.sin(2 * np.pi * 150 * t) * (t >= 0)
    >>> rng = np.random.default_rng(0)
    >>> ds = records_from_arrays(x + 1e-4 * rng.standard_normal(t.size), fs,
    ...                          force=f, t0=t[0])
    >>> out = check_hits(ds)
    >>> bool(out["accepted"].item()), str(out["reason"].item())
    (True, '')
    >>> check_hits(ds, clip_levl=0.9)
    Traceback (most recent call last):
    ...
    modalnb._errors.OptionError: check_hits got an unknown threshold `clip_levl`. Did you mean 'clip_level'? ...
    """
    validate_records(records, source=source)
    reject_set = set(_check_reject(reject))
    th = _check_thresholds(thresholds)
    fs = get_sample_rate(records)
    band_ = check_band(band, fs, error=RecordError, source=source)
    arrays = _hit.record_arrays(records, fs, band_)
    user = _check_overrides(overrides, arrays.labels, source)

    columns: dict[str, list[Any]] = {v.name: [] for v in _VARIABLES}
    for index, label in enumerate(arrays.labels):
        hit = _hit.analyse_hit(arrays, index, th)
        values = _hit.hit_values(hit)
        reasons: list[str] = []
        warns: list[str] = []
        notes: list[str] = []
        for check in CHECKS:
            outcome = check.run(hit, th)
            values.update(outcome.values)
            (reasons if check.name in reject_set else warns).extend(outcome.findings)
            notes.extend(outcome.notes)
        warns.extend(hit.notes)
        decision = ""
        if label in user:
            if user[label]:
                decision = "accepted"
                if reasons:
                    warns.insert(0, "accepted by user despite: " + ", ".join(reasons))
                reasons = []
            else:
                decision = "rejected"
                reasons.insert(0, "rejected by user")
        values.update(accepted=not reasons, reason=_join(reasons), warnings=_join(warns),
                      notes=_join(notes), user_decision=decision)
        for name, column in columns.items():
            column.append(values[name])

    data_vars: dict[str, Any] = {}
    for var in _VARIABLES:
        arr = np.array(columns[var.name], dtype=_DTYPES[var.kind])
        dims = ("hit", "channel") if var.per_channel else "hit"
        if var.per_channel:
            arr = arr.reshape(len(arrays.labels), len(arrays.channels))
        attrs = {} if var.units is None else {"units": var.units.format(force=arrays.force_units)}
        data_vars[var.name] = (dims, arr, attrs)
    attrs: dict[str, Any] = {
        "reject": ", ".join(sorted(reject_set, key=CHECK_NAMES.index)),
        "band_hz": "" if band_ is None else f"{band_[0]:g}-{band_[1]:g}",
        **th,
    }
    return xr.Dataset(
        data_vars,
        coords={"hit": np.array(arrays.labels, dtype=np.int64),
                "channel": np.array(arrays.channels, dtype=object)},
        attrs=attrs,
    )


def _bullets(lines: Iterable[str]) -> str:
    import textwrap

    return "".join(
        textwrap.fill(line, 88, initial_indent="        * ", subsequent_indent="          ")
        + "\n" for line in lines
    )


check_hits.__doc__ = (
    (check_hits.__doc__ or "")
    .replace("__THRESHOLDS__\n", _bullets(f"``{t.name}`` = {t.default!r}: {t.doc}."
                                          for t in THRESHOLDS))
    .replace("__HIT_VARIABLES__\n", _bullets(f"``{v.name}``: {v.doc}" for v in _VARIABLES
                                             if not v.per_channel))
    .replace("__CHANNEL_VARIABLES__\n", _bullets(f"``{v.name}``: {v.doc}"
                                                 for v in _VARIABLES if v.per_channel))
)
