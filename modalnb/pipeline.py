"""One path from records + recipe to the modal table, shared by the CLI, the notebook
state object and ``fit_modes(records, recipe=...)``.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import xarray as xr

from .recipe import Recipe
from .records import records_checksum, validate_records

__all__ = ["run_recipe", "recipe_for", "recipe_checks", "fit_recipe", "fit_inputs", "finish_result"]


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
    validate_records(records)
    say = progress or (lambda _msg: None)
    say("checking hits")
    checks = recipe_checks(records, recipe)
    say("fitting modes")
    result, _ = fit_recipe(records, recipe, checks)
    return result, checks


def recipe_checks(records: xr.Dataset, recipe: Recipe) -> xr.Dataset:
    """The hit checks with the recipe's thresholds and overrides (:func:`modalnb.check_hits`)."""
    from .checks import check_hits

    return check_hits(records, overrides=recipe.hit_overrides or None, **recipe.check_thresholds)


def fit_recipe(records: xr.Dataset, recipe: Recipe, checks: xr.Dataset) -> tuple[xr.Dataset, Any]:
    """The fit step of :func:`run_recipe`: the table and the fitted ``ModeFit`` (for refits).

    The cross-checks run on the records the engine saw (:func:`fit_inputs`).
    """
    from .estimate import ModeFit

    fit_records, accept = fit_inputs(records, recipe, checks)
    est = ModeFit(**recipe.fit_kwargs(), accept=accept).fit(fit_records)
    return finish_result(est.result_, recipe, checks, fit_records), est


def fit_inputs(records: xr.Dataset, recipe: Recipe, checks: xr.Dataset) -> tuple[xr.Dataset, dict[int, bool]]:
    """The records the engine sees and the hit decisions, as `recipe` and `checks` say.

    When the recipe keeps the acquisition's exponential window uncorrected the engine is
    given the records without ``exponential_window_tau_s`` (so it removes nothing).

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> from modalnb.checks import check_hits
    >>> ds = load_demo()
    >>> _, accept = fit_inputs(ds, Recipe(), check_hits(ds))
    >>> sorted(h for h, ok in accept.items() if not ok)
    [4, 6]
    """
    accept = {int(h): bool(a) for h, a in zip(checks["hit"].values, checks["accepted"].values, strict=True)}
    fit_records = records
    if not recipe.correct_exponential_window and "exponential_window_tau_s" in records.attrs:
        fit_records = records.copy()
        del fit_records.attrs["exponential_window_tau_s"]
    return fit_records, accept


def finish_result(
    result: xr.Dataset, recipe: Recipe, checks: xr.Dataset, records: xr.Dataset | None = None
) -> xr.Dataset:
    """Attach the hit-check reasons and warnings, the recipe (JSON) and, given the records,
    the damping cross-checks (:func:`modalnb.estimate.cross_checks`) to a fit result."""
    if records is not None:
        from .estimate import with_cross_checks

        result = with_cross_checks(records, result)
    result = result.assign(hit_reason=("hit", [str(r) for r in checks["reason"].values]))
    result = result.assign(hit_warnings=("hit", [str(w) for w in checks["warnings"].values]))
    result.attrs["recipe"] = recipe.to_json()
    return result
