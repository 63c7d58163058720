"""The analysis recipe: every user choice in one small, versioned, human-readable JSON file.

The same recipe and the same records give the same modal table, in a notebook or from
the command line. A recipe holds the frequency band, the time window, the model order (a
number of modes, or a list of mode frequencies to keep), the hit decisions the user
overrode, the hit-check thresholds, whether the acquisition's exponential window is
corrected, and the checksum of the records it was made on.
"""

from __future__ import annotations

import functools
import json
import os
from dataclasses import asdict, dataclass, field, fields, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ._errors import RecipeError
from ._files import atomic_write_text
from ._utils import check_band, frequency_list

if TYPE_CHECKING:
    import xarray as xr

__all__ = ["Recipe", "RecipeError", "load_recipe", "save_recipe", "recipe_for", "package_version",
           "RECIPE_FORMAT", "RECIPE_VERSION"]

#: Value of the ``format`` key that marks a modalnb recipe.
RECIPE_FORMAT = "modalnb-recipe"
#: Version written by this modalnb; older versions are read (migrated) or refused.
RECIPE_VERSION = 1


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
        a, b = (float(v) for v in value)
    except (TypeError, ValueError):
        raise RecipeError(f"recipe `{name}` must be two numbers [low, high] or null, was {value!r}.") from None
    if not a < b:
        raise RecipeError(f"recipe `{name}` must have low < high, was {value!r}.")
    return (a, b)


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
    records_checksum : str or None
        Checksum of the records the recipe was made on (:func:`modalnb.records_checksum`).
    source : str or None
        Where the records came from (informative).
    notes : str
        Free text.
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
    records_checksum: str | None = None
    source: str | None = None
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
        if not isinstance(self.check_thresholds, dict):
            raise RecipeError("recipe `check_thresholds` must be an object of keyword arguments.")
        self.correct_exponential_window = _as_bool(self.correct_exponential_window, "correct_exponential_window")
        if not self.created_with:
            self.created_with = f"modalnb {package_version()}"

    # --- serialisation -------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-safe dict, with ``format`` and ``version`` keys first."""
        d = asdict(self)
        d["band"] = list(self.band) if self.band else None
        d["window"] = list(self.window) if self.window else None
        d["hit_overrides"] = {str(k): v for k, v in sorted(self.hit_overrides.items())}
        return {"format": RECIPE_FORMAT, "version": RECIPE_VERSION, **d}

    def to_json(self) -> str:
        """Indented JSON text (stable key order, so diffs between recipes are readable)."""
        return json.dumps(self.to_dict(), indent=2) + "\n"

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
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(body) - known)
        if unknown:
            from ._utils import did_you_mean

            raise RecipeError(
                f"{where}unknown recipe key {unknown[0]!r}.{did_you_mean(unknown[0], known)} "
                "Refusing to guess what it means."
            )
        try:
            return cls(**body)
        except RecipeError as exc:
            raise RecipeError(f"{where}{exc}") from None

    @classmethod
    def from_json(cls, text: str, *, source: str | None = None) -> Recipe:
        """Parse JSON text (see :meth:`from_dict`)."""
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            where = f"{source}: " if source else ""
            raise RecipeError(f"{where}not valid JSON ({exc.msg} at line {exc.lineno}, column {exc.colno}).") from None
        return cls.from_dict(data, source=source)

    # --- use -----------------------------------------------------------------------
    def fit_kwargs(self) -> dict[str, Any]:
        """Keyword arguments of :func:`modalnb.fit_modes` that this recipe fixes."""
        return {"band": self.band, "window": self.window, "n_modes": self.n_modes,
                "add_modes": list(self.add_modes) or None, "drop_modes": list(self.drop_modes) or None}


def recipe_for(records: xr.Dataset, recipe: Recipe | None = None, **changes: Any) -> Recipe:
    """A recipe bound to `records` (their checksum), with `changes` applied.

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
    return replace(base, records_checksum=records_checksum(records), **changes)


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


def load_recipe(path: str | os.PathLike[str]) -> Recipe:
    """Read a recipe file; refuse (one-line :class:`RecipeError`) what cannot be read exactly."""
    p = Path(path)
    if not p.is_file():
        raise FileNotFoundError(2, "recipe file not found", str(p))
    try:
        text = p.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise RecipeError(f"{p}: not a text (UTF-8) file.") from None
    return Recipe.from_json(text, source=str(p))
