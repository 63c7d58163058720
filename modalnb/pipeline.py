"""One path from records + recipe to the modal table, shared by the CLI, the notebook
state object and ``fit_modes(records, recipe=...)``.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import xarray as xr

from .recipe import Recipe
from .records import records_checksum, validate_records

__all__ = ["run_recipe", "recipe_for"]


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
    base = recipe if recipe is not None else Recipe()
    return replace(base, records_checksum=records_checksum(records), **changes)


def run_recipe(records: xr.Dataset, recipe: Recipe, *, progress: Any = None) -> tuple[xr.Dataset, xr.Dataset]:
    """Hit checks, then the mode fit, exactly as `recipe` says.

    Parameters
    ----------
    records : xarray.Dataset
        A record set.
    recipe : Recipe
        Every choice (band, window, model order, hit overrides, check thresholds).
    progress : callable, optional
        Called with a short text before each step.

    Returns
    -------
    result : xarray.Dataset
        The modal table (:func:`modalnb.fit_modes` layout), with the recipe in
        ``attrs["recipe"]`` (JSON text).
    checks : xarray.Dataset
        The hit checks (:func:`modalnb.check_hits` layout) after the recipe's overrides.
    """
    from .checks import check_hits
    from .estimate import fit_modes

    validate_records(records)
    say = progress or (lambda _msg: None)
    say("checking hits")
    checks = check_hits(records, overrides=recipe.hit_overrides or None, **recipe.check_thresholds)
    accept = {int(h): bool(a) for h, a in zip(checks["hit"].values, checks["accepted"].values, strict=True)}
    say("fitting modes")
    result = fit_modes(
        records,
        **recipe.fit_kwargs(),
        accept=accept,
        correct_exponential_window=recipe.correct_exponential_window,
    )
    result = result.assign(hit_reason=("hit", [str(r) for r in checks["reason"].values]))
    result = result.assign(hit_warnings=("hit", [str(w) for w in checks["warnings"].values]))
    result.attrs["recipe"] = recipe.to_json()
    return result, checks
