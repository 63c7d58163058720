"""The analysis recipe: every user choice in one small, versioned, human-readable JSON file.

The same recipe and the same records give the same modal table, in a notebook or from
the command line. A recipe holds the frequency band, the time window, the model order (a
number of modes, or a list of mode frequencies to keep), the hit decisions the user
overrode, the hit-check thresholds, whether the acquisition's exponential window is
corrected, and the checksum of the records it was made on; and, for the report's title
block, what was tested (``title``), who analysed it (``analyst``) and free ``notes``.

Versions: 2 added ``title`` and ``analyst``; a version-1 recipe is still read (without
them), and a version-1 file that holds them is refused (they are not version-1 keys).
"""

from __future__ import annotations

import functools
import hashlib
import json
import math
import os
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field, fields, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ._errors import ModalnbError, RecipeError, RecipeFileNotFoundError
from ._files import atomic_write_text
from ._utils import check_band, did_you_mean, frequency_list

if TYPE_CHECKING:
    import xarray as xr

__all__ = ["Recipe", "RecipeError", "RecipeFileNotFoundError", "load_recipe", "save_recipe",
           "recipe_for", "package_version", "merge_recipes", "read_recipe_file", "content_hash",
           "CHOICE_FIELDS", "RECIPE_FORMAT", "RECIPE_VERSION", "ADDED_IN"]

#: Value of the ``format`` key that marks a modalnb recipe.
RECIPE_FORMAT = "modalnb-recipe"
#: Version written by this modalnb; older versions are read (migrated) or refused.
RECIPE_VERSION = 2

#: Keys each version added (a file of an older version may not hold them).
ADDED_IN = {"title": 2, "analyst": 2, "reference_channels": 2}


@functools.cache
def package_version() -> str:
    """The installed modalnb version (``modalnb.__version__``), without importing the package.

    Examples
    --------
    >>> import modalnb
    >>> package_version() == modalnb.__version__
    True
    """
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("modalnb")
    except PackageNotFoundError:  # pragma: no cover - running from a source tree
        return "0.0.0+unknown"


def _pair(name: str, value: Any) -> tuple[float, float] | None:
    if value is None:
        return None
    try:
        if isinstance(value, (str, bytes)):  # "12" is not the pair (1, 2)
            raise TypeError
        a, b = (float(v) for v in value)
    except (TypeError, ValueError):
        raise RecipeError(f"recipe `{name}` must be two numbers [low, high] or null, was {value!r}.") from None
    if not (math.isfinite(a) and math.isfinite(b)):
        raise RecipeError(f"recipe `{name}` must be two finite numbers, was {value!r}.")
    if not a < b:
        raise RecipeError(f"recipe `{name}` must have low < high, was {value!r}.")
    return (a, b)


def _thresholds(value: Any) -> dict[str, Any]:
    """The recipe's check thresholds, each checked by the hit checks' own rule."""
    if not isinstance(value, Mapping):
        raise RecipeError("recipe `check_thresholds` must be an object of threshold names and "
                          f"numbers, was {value!r}.")
    from .checks._compose import THRESHOLDS, _check_reject, check_threshold_value

    known = ["reject"] + [t.name for t in THRESHOLDS]
    out: dict[str, Any] = {}
    for name, v in value.items():
        if not isinstance(name, str) or name not in known:
            raise RecipeError(
                f"recipe `check_thresholds` has an unknown threshold {name!r}."
                f"{did_you_mean(str(name), known)} Known: {', '.join(known)}."
            )
        try:
            if name == "reject":  # the checks that reject (the others only warn)
                if not isinstance(v, list):
                    raise RecipeError(f"`reject` must be a list of check names, was {v!r}.")
                out[name] = list(_check_reject(v))
                continue
            if isinstance(v, float) and not math.isfinite(v):
                raise RecipeError(f"`{name}` must be a finite number, was {v!r}.")
            out[name] = check_threshold_value(name, v)
        except ModalnbError as exc:
            raise RecipeError(f"recipe `check_thresholds`: {exc}") from None
    return out


def _optional_text(name: str, value: Any, *, allow_none: bool = True) -> Any:
    if value is None and allow_none:
        return None
    if not isinstance(value, str):
        kind = "text or null" if allow_none else "text"
        raise RecipeError(f"recipe `{name}` must be {kind}, was {value!r}.")
    return value


@dataclass
class Recipe:
    """Every choice behind one modal table.

    Parameters
    ----------
    band : (float, float) or None
        Frequency band in Hz; None = 0 to 0.45 fs.
    window : (float, float) or None
        Fit window, absolute times of the record's ``time`` (s); None = automatic.
    n_modes : int or None
        Number of modes to keep (strongest by energy); None = automatic.
    add_modes : list of float
        Frequencies (Hz) where the user says a mode is that the automatic search missed;
        each seeds a pole that the fit keeps.
    drop_modes : list of float
        Frequencies (Hz) of fitted modes the user leaves out of the table (the nearest
        mode to each; it stays in the model, so its neighbours are not biased).
    hit_overrides : dict
        Hit label -> True (accept) / False (reject), overriding the automatic checks.
    check_thresholds : dict
        Keyword arguments for :func:`modalnb.check_hits`.
    correct_exponential_window : bool
        Remove the damping added by the acquisition's exponential window (when the
        records say one was applied).
    reference_channels : list of str or None
        Several setups only (:func:`modalnb.fit_setups`): the channel names of the
        reference sensors that glue the setups' shapes; None = every node and direction
        sensed in more than one setup. Written to the JSON only when set.
    records_checksum : str or None
        Checksum of the records the recipe was made on (:func:`modalnb.records_checksum`).
        A replay on other records keeps it.
    replayed_on_checksum : str or None
        Checksum of the records this recipe was last replayed on, when they differ from
        ``records_checksum`` (None otherwise): the table may differ from the original.
    source : str or None
        Where the records came from (informative).
    title : str
        The structure or test analysed (the report's title block), e.g. "Bay 3 footbridge,
        deck, tap test 2"; "" for none.
    analyst : str
        Who analysed the records (the report's title block); "" for none.
    notes : str
        Free text (shown in the report's title block).
    created_with : str
        modalnb version that wrote the recipe.

    Examples
    --------
    >>> r = Recipe(band=(10.0, 500.0), hit_overrides={3: False})
    >>> Recipe.from_json(r.to_json()) == r
    True
    """

    band: tuple[float, float] | None = None
    window: tuple[float, float] | None = None
    n_modes: int | None = None
    add_modes: list[float] = field(default_factory=list)
    drop_modes: list[float] = field(default_factory=list)
    hit_overrides: dict[int, bool] = field(default_factory=dict)
    check_thresholds: dict[str, Any] = field(default_factory=dict)
    correct_exponential_window: bool = True
    reference_channels: list[str] | None = None
    records_checksum: str | None = None
    replayed_on_checksum: str | None = None
    source: str | None = None
    title: str = ""
    analyst: str = ""
    notes: str = ""
    created_with: str = ""

    def __post_init__(self) -> None:
        self.band = check_band(self.band, error=RecipeError)
        self.window = _pair("window", self.window)
        if self.n_modes is not None:
            if isinstance(self.n_modes, bool) or not isinstance(self.n_modes, int) or self.n_modes < 1:
                raise RecipeError(f"recipe `n_modes` must be a positive integer or null, was {self.n_modes!r}.")
        self.add_modes = frequency_list("recipe `add_modes`", self.add_modes, RecipeError)
        self.drop_modes = frequency_list("recipe `drop_modes`", self.drop_modes, RecipeError)
        if not isinstance(self.hit_overrides, Mapping):
            raise RecipeError(
                f"recipe `hit_overrides` must be an object {{hit label: true/false}}, was {self.hit_overrides!r}."
            )
        overrides: dict[int, bool] = {}
        for k, v in dict(self.hit_overrides).items():
            try:
                label = int(k)
            except (TypeError, ValueError):
                raise RecipeError(
                    f"recipe `hit_overrides` keys must be hit labels (integers), got {k!r}."
                ) from None
            overrides[label] = _as_bool(v, f"hit_overrides[{k}]")
        self.hit_overrides = overrides
        self.check_thresholds = _thresholds(self.check_thresholds)
        self.correct_exponential_window = _as_bool(self.correct_exponential_window, "correct_exponential_window")
        if self.reference_channels is not None:
            refs = self.reference_channels
            if (isinstance(refs, (str, bytes)) or not isinstance(refs, (list, tuple))
                    or not refs or not all(isinstance(c, str) and c.strip() for c in refs)):
                raise RecipeError("recipe `reference_channels` must be a non-empty list of "
                                  f"channel names or null, was {refs!r}.")
            self.reference_channels = [str(c) for c in refs]
        self.records_checksum = _optional_text("records_checksum", self.records_checksum)
        self.replayed_on_checksum = _optional_text("replayed_on_checksum", self.replayed_on_checksum)
        self.source = _optional_text("source", self.source)
        self.title = _optional_text("title", self.title, allow_none=False)
        self.analyst = _optional_text("analyst", self.analyst, allow_none=False)
        self.notes = _optional_text("notes", self.notes, allow_none=False)
        self.created_with = _optional_text("created_with", self.created_with, allow_none=False)
        if not self.created_with:
            self.created_with = f"modalnb {package_version()}"

    # --- serialisation -------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-safe dict, with ``format`` and ``version`` keys first."""
        d = asdict(self)
        d["band"] = list(self.band) if self.band else None
        d["window"] = list(self.window) if self.window else None
        d["hit_overrides"] = {str(k): v for k, v in sorted(self.hit_overrides.items())}
        if self.reference_channels is None:  # a one-setup recipe keeps its old form
            del d["reference_channels"]
        return {"format": RECIPE_FORMAT, "version": RECIPE_VERSION, **d}

    def to_json(self) -> str:
        """Indented JSON text (stable key order, so diffs between recipes are readable).

        Strict JSON: a non-finite number is a :class:`RecipeError`, never ``Infinity``.
        """
        try:
            return json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n"
        except ValueError:
            raise RecipeError("recipe holds a non-finite number (NaN or infinity); a recipe "
                              "is strict JSON. Hint: use finite numbers.") from None

    @classmethod
    def from_dict(cls, data: Any, *, source: str | None = None) -> Recipe:
        """Read a recipe dict, checking its format and version; unknown keys are refused."""
        where = f"{source}: " if source else ""
        if not isinstance(data, dict):
            raise RecipeError(f"{where}a recipe must be a JSON object, got {type(data).__name__}.")
        if data.get("format") != RECIPE_FORMAT:
            raise RecipeError(f"{where}not a modalnb recipe (key 'format' is {data.get('format')!r}, expected {RECIPE_FORMAT!r}).")
        version = data.get("version")
        if not isinstance(version, int) or isinstance(version, bool):
            raise RecipeError(f"{where}recipe 'version' must be an integer, was {version!r}.")
        if version > RECIPE_VERSION:
            raise RecipeError(
                f"{where}recipe version {version} was written by a newer modalnb; this one reads "
                f"versions up to {RECIPE_VERSION}. Hint: upgrade modalnb."
            )
        if version < 1:
            raise RecipeError(f"{where}recipe version {version} is not a known version.")
        body = {k: v for k, v in data.items() if k not in ("format", "version")}
        known = {f.name for f in fields(cls) if ADDED_IN.get(f.name, 1) <= version}
        later = sorted(k for k in body if ADDED_IN.get(k, 1) > version)
        if later:
            raise RecipeError(
                f"{where}recipe key {later[0]!r} is not a version-{version} key (added in "
                f"version {ADDED_IN[later[0]]}). Hint: set 'version' to {ADDED_IN[later[0]]}."
            )
        unknown = sorted(set(body) - known)
        if unknown:
            raise RecipeError(
                f"{where}unknown recipe key {unknown[0]!r}.{did_you_mean(unknown[0], known)} "
                "Refusing to guess what it means."
            )
        try:
            return cls(**body)
        except RecipeError as exc:
            raise RecipeError(f"{where}{exc}") from None
        except (TypeError, ValueError, OverflowError) as exc:  # a value no field check foresaw
            raise RecipeError(f"{where}a recipe value cannot be read: {exc}.") from None

    @classmethod
    def from_json(cls, text: str, *, source: str | None = None) -> Recipe:
        """Parse JSON text (see :meth:`from_dict`)."""
        where = f"{source}: " if source else ""
        try:
            data = json.loads(text, parse_constant=_refuse_constant)
        except json.JSONDecodeError as exc:
            raise RecipeError(f"{where}not valid JSON ({exc.msg} at line {exc.lineno}, column {exc.colno}).") from None
        except RecursionError:
            raise RecipeError(f"{where}not a recipe (JSON nested too deeply).") from None
        except RecipeError as exc:
            raise RecipeError(f"{where}{exc}") from None
        return cls.from_dict(data, source=source)

    # --- use -----------------------------------------------------------------------
    def fit_kwargs(self) -> dict[str, Any]:
        """Keyword arguments of :func:`modalnb.fit_modes` that this recipe fixes."""
        return {"band": self.band, "window": self.window, "n_modes": self.n_modes,
                "add_modes": list(self.add_modes) or None, "drop_modes": list(self.drop_modes) or None}


def _refuse_constant(name: str) -> Any:
    raise RecipeError(f"{name} is not a number a recipe may hold (strict JSON, finite numbers only).")


def recipe_for(records: xr.Dataset, recipe: Recipe | None = None, **changes: Any) -> Recipe:
    """A recipe bound to `records`, with `changes` applied.

    A recipe without a checksum gets the records' (:func:`modalnb.records_checksum`). A
    recipe made on other records keeps its own ``records_checksum`` (its provenance) and
    records these records' checksum in ``replayed_on_checksum``.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb import records_from_arrays
    >>> ds = records_from_arrays(np.zeros((1, 64)), 256.0)
    >>> recipe_for(ds, band=(1.0, 100.0)).records_checksum.startswith("sha256:")
    True
    """
    from .records import records_checksum

    base = recipe if recipe is not None else Recipe()
    checksum = records_checksum(records)
    if base.records_checksum and base.records_checksum != checksum:
        stamp = {"replayed_on_checksum": checksum}
    else:
        stamp = {"records_checksum": checksum, "replayed_on_checksum": None}
    return replace(base, **{**stamp, **changes})


def replay_note(recipe: Recipe, checksum: str) -> str | None:
    """One line saying `recipe` was made on other records than those of `checksum`, or None.

    Examples
    --------
    >>> replay_note(Recipe(records_checksum="sha256:1"), "sha256:2")[:40]
    'the recipe was made on other records (it'
    >>> replay_note(Recipe(records_checksum="sha256:1"), "sha256:1") is None
    True
    """
    if not recipe.records_checksum or recipe.records_checksum == checksum:
        return None
    return (f"the recipe was made on other records (its checksum {recipe.records_checksum[:19]}..., "
            f"these records {checksum[:19]}...); the table may differ from the original.")


def _as_bool(value: Any, name: str) -> bool:
    if isinstance(value, bool):
        return value
    raise RecipeError(f"recipe `{name}` must be true or false, was {value!r}.")


def save_recipe(recipe: Recipe, path: str | os.PathLike[str]) -> Path:
    """Write `recipe` as JSON, atomically.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "recipe.json"
    >>> load_recipe(save_recipe(Recipe(n_modes=3), p)).n_modes
    3
    """
    return atomic_write_text(path, recipe.to_json())


def content_hash(data: bytes) -> str:
    """SHA-256 of a recipe file's bytes (how a session notices another one changed it).

    Examples
    --------
    >>> content_hash(b"{}")[:15]
    'sha256:44136fa3'
    """
    return "sha256:" + hashlib.sha256(data).hexdigest()


def _read_bytes(path: str | os.PathLike[str]) -> bytes:
    p = Path(path)
    if p.is_dir():
        raise RecipeError(f"{p}: is a folder, not a recipe file. Hint: give the recipe's file name.")
    if not p.exists():
        raise RecipeFileNotFoundError(f"{p}: recipe file not found. Hint: check the path.")
    try:
        return p.read_bytes()
    except OSError as exc:
        raise RecipeError(f"{p}: cannot be read ({exc.strerror or exc}).") from None


def read_recipe_file(path: str | os.PathLike[str]) -> tuple[Recipe, str]:
    """The recipe in a file and the content hash (:func:`content_hash`) of what was read.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> p = save_recipe(Recipe(n_modes=2), pathlib.Path(tempfile.mkdtemp()) / "r.json")
    >>> r, h = read_recipe_file(p)
    >>> r.n_modes, h == content_hash(p.read_bytes())
    (2, True)
    """
    data = _read_bytes(path)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise RecipeError(f"{path}: not a text (UTF-8) file.") from None
    return Recipe.from_json(text, source=str(path)), content_hash(data)


def load_recipe(path: str | os.PathLike[str]) -> Recipe:
    """Read a recipe file; refuse (one-line :class:`RecipeError`) what cannot be read exactly.

    A missing file is a :class:`RecipeFileNotFoundError` (both a :class:`RecipeError`
    and a ``FileNotFoundError``).

    Examples
    --------
    >>> try:
    ...     load_recipe("no/such.recipe.json")
    ... except FileNotFoundError as exc:
    ...     print(type(exc).__name__)
    RecipeFileNotFoundError
    """
    return read_recipe_file(path)[0]


#: The fields that are the user's choices (merged field by field when two sessions write
#: one recipe file); the others are provenance, written by whoever writes.
CHOICE_FIELDS = ("band", "window", "n_modes", "add_modes", "drop_modes", "hit_overrides",
                 "check_thresholds", "correct_exponential_window", "reference_channels", "title",
                 "analyst", "notes")
_KEYED = ("hit_overrides", "check_thresholds")  # merged key by key
_SETS = ("add_modes", "drop_modes")  # merged element by element


def merge_recipes(base: Recipe, ours: Recipe, theirs: Recipe) -> tuple[Recipe, list[str]]:
    """Three-way merge of the choices in two recipes that both started from `base`.

    A choice changed on one side only is taken from that side; a choice changed on both
    sides to different values is a conflict, where `ours` wins and the conflict is
    described (one phrase each, for a warning). Hit overrides and check thresholds merge
    key by key, added and dropped modes frequency by frequency; provenance (checksums,
    source, version) comes from `ours`.

    Returns
    -------
    merged : Recipe
    conflicts : list of str
        Phrases like ``"hit 3: here accept, elsewhere reject"``.

    Examples
    --------
    >>> base = Recipe()
    >>> merged, conflicts = merge_recipes(base, Recipe(hit_overrides={3: False}),
    ...                                   Recipe(window=(0.1, 1.0)))
    >>> merged.hit_overrides, merged.window, conflicts
    ({3: False}, (0.1, 1.0), [])
    """
    changes: dict[str, Any] = {}
    conflicts: list[str] = []
    for name in CHOICE_FIELDS:
        b, o, t = getattr(base, name), getattr(ours, name), getattr(theirs, name)
        if name in _KEYED:
            out = dict(o)
            for key in sorted(set(b) | set(o) | set(t), key=str):
                bk, ok, tk = b.get(key), o.get(key), t.get(key)
                if tk == bk or tk == ok:
                    continue
                if ok == bk:  # changed elsewhere only
                    if tk is None:
                        out.pop(key, None)
                    else:
                        out[key] = tk
                else:
                    conflicts.append(_conflict(name, key, ok, tk))
            changes[name] = dict(sorted(out.items(), key=lambda kv: str(kv[0])))
        elif name in _SETS:
            added = set(t) - set(b)
            removed = set(b) - set(t)
            changes[name] = sorted((set(o) | added) - removed)
        elif t != b and t != o:
            if o == b:
                changes[name] = t
            else:
                conflicts.append(_conflict(name, None, o, t))
    return replace(ours, **changes), conflicts


def _conflict(name: str, key: Any, ours: Any, theirs: Any) -> str:
    def show(v: Any) -> str:
        if name == "hit_overrides":
            return {True: "accept", False: "reject", None: "automatic"}[v]
        return "automatic" if v is None else repr(v)

    what = f"hit {key}" if name == "hit_overrides" else (f"{name}.{key}" if key is not None else name)
    return f"{what}: here {show(ours)}, elsewhere {show(theirs)}"
