"""Reproducible replay: records + recipe in, the modal table and the hit checks out.

The CLI (``modalnb fit``), ``fit_modes(records, recipe=...)`` and the notebook state all
replay a recipe through the fitting layer (:class:`modalnb.fitting.ModeFit`), so the
table is the one :func:`modalnb.fit_modes` gives for the same choices.
"""

from __future__ import annotations

from typing import Any

import xarray as xr

from .fitting import ModeFit, hit_checks
from .recipe import Recipe, recipe_for
from .records import validate_records

__all__ = ["run_recipe", "recipe_for", "recipe_checks", "fit_recipe"]


def run_recipe(records: xr.Dataset, recipe: Recipe, *, progress: Any = None) -> tuple[xr.Dataset, xr.Dataset]:
    """Hit checks, then the mode fit, exactly as `recipe` says.

    The entry point for reproducible replay (the CLI's path): the same records and recipe
    give the same table, in any process.

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

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> table, checks = run_recipe(load_demo(), Recipe(n_modes=2))
    >>> table.sizes["mode"], sorted(int(h) for h in checks["hit"][~checks["accepted"]])
    (2, [4, 6])
    """
    validate_records(records)
    say = progress or (lambda _msg: None)
    say("checking hits")
    checks = recipe_checks(records, recipe)
    say("fitting modes")
    result, _ = fit_recipe(records, recipe, checks)
    return result, checks


def recipe_checks(records: xr.Dataset, recipe: Recipe) -> xr.Dataset:
    """The hit checks with the recipe's thresholds and overrides (:func:`modalnb.check_hits`)."""
    return hit_checks(records, recipe.hit_overrides, recipe.check_thresholds)


def fit_recipe(records: xr.Dataset, recipe: Recipe, checks: xr.Dataset) -> tuple[xr.Dataset, ModeFit]:
    """The fit step of :func:`run_recipe`, given its hit checks: the table and the fitted
    :class:`modalnb.ModeFit` (for refits)."""
    est = ModeFit.from_recipe(recipe)
    est._fit_checked(records, checks, dict(recipe.hit_overrides))
    return est.result_, est
