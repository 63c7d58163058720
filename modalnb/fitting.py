"""The fitting layer: hit checks, the estimation engine, cross-checks and the recipe, in
one table.

Which entry point is for whom (all three give the same table for the same choices):

* :func:`fit_modes`: one scripted fit (``modalnb.fit_modes(records, band=...)``);
* :class:`ModeFit`: the same table, kept for repeated refits (widgets, sliders, the
  notebook state): ``ModeFit(...).fit(records).result_`` and ``refit(window=(t0, t1))``;
* :func:`modalnb.run_recipe`: reproducible replay of a saved recipe, with the hit checks
  (the CLI's path, :mod:`modalnb.pipeline`).

Every table is made by one finisher, :func:`finish_table`: the engine's table
(:class:`modalnb.estimate.SharedPoleFit`) plus the hit checks' reasons and warnings, the
damping cross-checks and the recipe (JSON) that replays the call.

This module sits above the engine (:mod:`modalnb.estimate`), the hit checks
(:mod:`modalnb.checks`) and the recipe (:mod:`modalnb.recipe`), and below the pipeline,
the notebook state, the CLI and the widgets.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any

import numpy as np
import xarray as xr

from ._errors import EstimationError, NoAcceptedHitsError, OtherRecordsWarning
from .checks import check_hits
from .estimate import SharedPoleFit, with_cross_checks
from .estimate._fit import accept_decisions
from .node_shapes import with_node_shapes
from .recipe import Recipe, load_recipe, package_version, replay_note
from .records import validate_records

__all__ = ["ModeFit", "fit_modes", "finish_table", "hit_checks", "engine_records", "require_accepted_hits"]


def _overrides(records: xr.Dataset, accept: Any) -> dict[int, bool]:
    """The caller's hit decisions as ``{hit: bool}`` (a mapping names some hits, a
    sequence decides every hit); one-line :class:`EstimationError` otherwise."""
    hits = [int(h) for h in np.asarray(records["hit"].values).tolist()]
    if accept is None:
        return {}
    if isinstance(accept, Mapping):
        out: dict[int, bool] = {}
        for key, val in accept.items():
            try:
                label = int(key)
            except (TypeError, ValueError):
                label = None
            if label is None or label not in hits or isinstance(key, bool):
                raise EstimationError(
                    f"`accept` names hit {key!r}, which is not in the records (hits {hits})."
                )
            out[label] = bool(val)
        return out
    # one decision per hit: the engine's own rule for that form
    return {h: bool(a) for h, a in zip(hits, accept_decisions(records, accept).tolist(),
                                        strict=True)}


def hit_checks(
    records: xr.Dataset,
    overrides: Mapping[int, bool] | None = None,
    check_thresholds: Mapping[str, Any] | None = None,
) -> xr.Dataset:
    """:func:`modalnb.check_hits` with the caller's decisions as overrides.

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> chk = hit_checks(load_demo(), {4: True})
    >>> bool(chk["accepted"].sel(hit=4)), bool(chk["accepted"].sel(hit=6))
    (True, False)
    """
    return check_hits(records, overrides=dict(overrides) if overrides else None,
                      **dict(check_thresholds or {}))


def require_accepted_hits(checks: xr.Dataset) -> None:
    """Raise :class:`~modalnb.NoAcceptedHitsError` when the hit checks accept no hit.

    The message names what rejected the hits (each check, or the caller's decisions) and
    the API's ways out; ``rejected_by`` holds the counts for a caller (the CLI) that words
    its own hint.

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> require_accepted_hits(hit_checks(load_demo(), {h: False for h in range(1, 9)}))
    Traceback (most recent call last):
    ...
    modalnb._errors.NoAcceptedHitsError: all 8 hits are rejected (the user's decision: 8 hits)...
    """
    from .checks import CHECK_NAMES

    accepted = np.asarray(checks["accepted"].values, bool)
    if accepted.any():
        return
    by: dict[str, int] = {}
    for reason in (str(r) for r in checks["reason"].values):
        names = [n for n in CHECK_NAMES if any(part.strip().startswith(n)
                                               for part in reason.split(";"))]
        if reason.startswith("rejected by user"):
            names = ["the user's decision"]
        for n in names or ["unknown"]:
            by[n] = by.get(n, 0) + 1
    what = ", ".join(f"{n}: {k} hit{'s' if k != 1 else ''}" for n, k in by.items())
    checks_named = [n for n in by if n in CHECK_NAMES]
    hint = "accept hits with `accept={hit: True}`"
    if checks_named:
        hint += (f", loosen the check's threshold (`check_thresholds`), or leave {checks_named[0]!r} "
                 "out of the rejecting checks")
    raise NoAcceptedHitsError(
        f"all {accepted.size} hits are rejected ({what}); nothing to fit. Hint: {hint}.",
        rejected_by=by, n_hits=accepted.size,
    )


def engine_records(records: xr.Dataset, correct_exponential_window: bool = True) -> xr.Dataset:
    """The records the engine (and the cross-checks) see.

    When the acquisition's exponential window is to be left uncorrected, the records
    without ``exponential_window_tau_s`` (so the engine removes nothing).

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> ds = records_from_arrays(np.zeros((1, 64)), 256.0)
    >>> ds.attrs["exponential_window_tau_s"] = 0.5
    >>> "exponential_window_tau_s" in engine_records(ds, False).attrs
    False
    """
    if correct_exponential_window or "exponential_window_tau_s" not in records.attrs:
        return records
    out = records.copy()
    del out.attrs["exponential_window_tau_s"]
    return out


def finish_table(
    table: xr.Dataset, checks: xr.Dataset, recipe: Recipe, records: xr.Dataset | None = None
) -> xr.Dataset:
    """The one finisher of the modal table, shared by every entry point.

    Adds to the engine's table the damping cross-checks (computed on `records`, the
    records the engine saw; :func:`modalnb.estimate.with_cross_checks`), the hit checks'
    ``hit_reason``, ``hit_warnings`` and ``hit_notes``, the recipe that replays the fit
    (``attrs["recipe"]``, JSON) and ``attrs["modalnb_version"]``. For a roving-hammer
    record set (hits at more than one node) also the shapes over nodes
    (:func:`modalnb.node_shapes.with_node_shapes`: ``node_shape_amplitude``,
    ``node_shape_phase_deg``, ``node_shape_mass_normalised`` over (mode, node), ...).

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> res = ModeFit().fit(load_demo()).result_
    >>> sorted(k for k in res.data_vars if k.startswith("hit_"))  # doctest: +NORMALIZE_WHITESPACE
    ['hit_accepted', 'hit_notes', 'hit_reason', 'hit_residue_imag', 'hit_residue_real', 'hit_warnings']
    """
    if records is not None:
        table = with_cross_checks(records, table)
        table = with_node_shapes(table, records)
    table = table.assign(
        hit_reason=("hit", [str(r) for r in checks["reason"].values]),
        hit_warnings=("hit", [str(w) for w in checks["warnings"].values]),
        hit_notes=("hit", [str(w) for w in checks["notes"].values] if "notes" in checks
                   else [""] * checks.sizes["hit"]),
    )
    table.attrs["recipe"] = recipe.to_json()
    table.attrs["modalnb_version"] = package_version()
    return table


class ModeFit:
    """Shared-pole modal estimator for a record set (scikit-learn style), for repeated refits.

    The table of :meth:`fit` is the table of :func:`fit_modes` with the same choices (one
    finisher, :func:`finish_table`); keep the estimator when the window changes often (a
    slider, the notebook state): :meth:`refit` starts from the poles already found.

    Parameters
    ----------
    band, window, n_modes, accept, max_order, scatter, blas_threads, add_modes, drop_modes
        As in :func:`fit_modes`.
    check_thresholds : mapping, optional
        Keyword arguments of :func:`modalnb.check_hits` (as in a recipe).
    correct_exponential_window : bool
        Undo the acquisition's exponential window when the records say one was applied
        (default True).

    Attributes
    ----------
    result_ : xarray.Dataset
        The modal table (see :func:`fit_modes`).
    window_ : (float, float)
        Times (s) of the first and last sample the last fit or refit used (the constructor's
        ``window`` is never changed by :meth:`refit`).
    hit_checks_ : xarray.Dataset
        The hit checks (:func:`modalnb.check_hits` layout) with the caller's decisions.
    minimizer_result_ : lmfit.MinimizerResult or None
        The final refinement (scipy's trust-region reflective ``least_squares``: Branch,
        Coleman & Li 1999, SIAM J. Sci. Comput. 21(1)) as an lmfit result (Newville et al.
        2014, LMFIT), built the first time it is read (lmfit is imported only then; after a
        converged Levenberg-Marquardt it starts from the table's poles and runs then;
        ``fit_report()`` works; parameters ``m<k>_sigma``,
        ``m<k>_u`` are the packed poles of every fitted mode, including those outside the
        band or dropped from the table).
    stabilisation_ : xarray.Dataset
        Poles versus order of the pencils, for a stabilisation chart.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.testing.synth import free_decay
    >>> t = np.arange(2048) / 2048.0
    >>> x = free_decay(t, 50.0, 0.01) + 1e-4 * np.random.default_rng(0).standard_normal(2048)
    >>> fit = ModeFit(accept=[True]).fit(records_from_arrays(x, 2048.0))
    >>> round(float(fit.result_["frequency_hz"][0]), 2)
    50.0
    >>> _ = fit.refit(window=(0.1, 0.9))
    >>> fit.window, fit.window_
    (None, (0.10009765625, 0.89990234375))
    """

    def __init__(
        self,
        *,
        band: tuple[float, float] | None = None,
        window: tuple[float, float] | None = None,
        n_modes: int | None = None,
        accept: Mapping[int, bool] | Sequence[bool] | None = None,
        max_order: int | None = None,
        scatter: bool = True,
        blas_threads: int | None = 1,
        add_modes: Sequence[float] | None = None,
        drop_modes: Sequence[float] | None = None,
        check_thresholds: Mapping[str, Any] | None = None,
        correct_exponential_window: bool = True,
    ):
        self.band = band
        self.window = window
        self.n_modes = n_modes
        self.accept = accept
        self.max_order = max_order
        self.scatter = scatter
        self.blas_threads = blas_threads
        self.add_modes = add_modes
        self.drop_modes = drop_modes
        self.check_thresholds = check_thresholds
        self.correct_exponential_window = correct_exponential_window

    @classmethod
    def from_recipe(cls, recipe: Recipe | str | os.PathLike[str], **options: Any) -> ModeFit:
        """An estimator with every choice of `recipe` (a :class:`modalnb.Recipe` or its file).

        `options` are the engine options a recipe does not hold (``max_order``,
        ``scatter``, ``blas_threads``). The table's ``attrs["recipe"]`` is this recipe.

        Examples
        --------
        >>> from modalnb.recipe import Recipe
        >>> ModeFit.from_recipe(Recipe(n_modes=2)).n_modes
        2
        """
        rec = recipe if isinstance(recipe, Recipe) else load_recipe(recipe)
        est = cls(**rec.fit_kwargs(), accept=dict(rec.hit_overrides) or None,
                  check_thresholds=dict(rec.check_thresholds),
                  correct_exponential_window=rec.correct_exponential_window, **options)
        est._recipe_base = rec
        return est

    # ------------------------------------------------------------------ public
    def fit(self, records: xr.Dataset) -> ModeFit:
        """Hit checks, then the engine, then the finisher; returns self."""
        validate_records(records)
        overrides = _overrides(records, self.accept)
        return self._fit_checked(records, hit_checks(records, overrides, self.check_thresholds),
                                 overrides)

    def refit(
        self,
        window: tuple[float, float] | None = None,
        accept: Mapping[int, bool] | Sequence[bool] | None = None,
    ) -> xr.Dataset:
        """Re-estimate in `window` (None: automatic) starting from the current poles.

        `accept` (None: the decisions of the last fit) changes the hit decisions; the hit
        checks run again with them. The constructor's parameters are not changed; the
        window used goes to ``window_``. Returns the new ``result_``; modes that vanish in
        the new window are dropped. A refit is a fast preview: a fresh :meth:`fit` with the
        same choices (what ``attrs["recipe"]`` replays) can differ slightly.
        """
        self._check_fitted()
        if accept is not None:
            self._overrides = _overrides(self._records, accept)
            self.hit_checks_ = hit_checks(self._records, self._overrides, self.check_thresholds)
        self._engine.refit(window=window, accept=self._decisions(self.hit_checks_))
        self._finish(window)
        return self.result_

    @property
    def minimizer_result_(self) -> Any:
        """The final refinement as an ``lmfit.MinimizerResult`` (None without one)."""
        try:
            eng = self._engine
        except AttributeError:
            raise AttributeError(
                f"{type(self).__name__!r} has no 'minimizer_result_' before 'fit'"
            ) from None
        return eng.minimizer_result_

    def fit_report(self) -> str:
        """lmfit's text report of the final refinement (``lmfit.fit_report``)."""
        self._check_fitted()
        return self._engine.fit_report()

    # ---------------------------------------------------------------- internals
    def _check_fitted(self) -> None:
        if not hasattr(self, "result_"):
            raise EstimationError(
                f"This {type(self).__name__} instance is not fitted yet. Call 'fit' with the "
                "records before using this method."
            )

    @staticmethod
    def _decisions(checks: xr.Dataset) -> dict[int, bool]:
        return {int(h): bool(a) for h, a in zip(checks["hit"].values, checks["accepted"].values,
                                                 strict=True)}

    def _fit_checked(self, records: xr.Dataset, checks: xr.Dataset,
                     overrides: dict[int, bool]) -> ModeFit:
        """The engine and the finisher, given the hit checks of `records` (run_recipe's
        steps, so it can report them one by one)."""
        self._records = records
        self._overrides = overrides
        self._fit_records = engine_records(records, self.correct_exponential_window)
        self.hit_checks_ = checks
        require_accepted_hits(checks)
        self._engine = SharedPoleFit(
            band=self.band, window=self.window, n_modes=self.n_modes,
            accept=self._decisions(checks), max_order=self.max_order, scatter=self.scatter,
            blas_threads=self.blas_threads, add_modes=self.add_modes, drop_modes=self.drop_modes,
        ).fit(self._fit_records)
        base = getattr(self, "_recipe_base", None)
        if base is not None:  # provenance of a replay: keep the recipe's own checksum
            checksum = str(self._engine.result_.attrs["input_checksum"])
            note = replay_note(base, checksum)
            if note and not getattr(self, "_replay_warned", False):
                import warnings

                warnings.warn(note, OtherRecordsWarning, stacklevel=3)
            replayed_on = checksum if note else None
            if base.replayed_on_checksum != replayed_on:
                self._recipe_base = replace(base, replayed_on_checksum=replayed_on)
        self._finish(self.window)
        return self

    def _finish(self, window: Any) -> None:
        eng = self._engine
        self.window_ = eng.window_
        self.stabilisation_ = eng.stabilisation_
        self.result_ = finish_table(eng.result_, self.hit_checks_, self._recipe(window),
                                    self._fit_records)

    def _recipe(self, window: Any) -> Recipe:
        """The recipe that replays this fit: its choices, the caller's decisions as overrides."""
        base = getattr(self, "_recipe_base", None)
        win = None if window is None else tuple(float(v) for v in window)
        if base is not None:
            if win == base.window and self._overrides == base.hit_overrides:
                return base
            return replace(base, window=win, hit_overrides=dict(self._overrides))
        return Recipe(
            band=None if self.band is None else tuple(self.band), window=win,
            n_modes=None if self.n_modes is None else int(self.n_modes),
            hit_overrides=dict(self._overrides), add_modes=list(self.add_modes or []),
            drop_modes=list(self.drop_modes or []),
            check_thresholds=dict(self.check_thresholds or {}),
            correct_exponential_window=bool(self.correct_exponential_window),
            records_checksum=str(self._engine.result_.attrs["input_checksum"]),
            source=str(self._records.attrs.get("source", "")) or None,
        )


def fit_modes(
    records: xr.Dataset,
    band: tuple[float, float] | None = None,
    window: tuple[float, float] | None = None,
    n_modes: int | None = None,
    *,
    accept: Mapping[int, bool] | Sequence[bool] | None = None,
    max_order: int | None = None,
    scatter: bool = True,
    recipe: Any = None,
    blas_threads: int | None = 1,
    add_modes: Sequence[float] | None = None,
    drop_modes: Sequence[float] | None = None,
    check_thresholds: Mapping[str, Any] | None = None,
) -> xr.Dataset:
    """Natural frequencies, damping ratios and shapes of a record set, with uncertainties.

    The entry point for one scripted fit: hit checks, the estimation engine
    (:class:`modalnb.estimate.SharedPoleFit`), the damping cross-checks and the recipe
    that replays the call, in one table. The same table comes from
    ``ModeFit(...).fit(records).result_`` (keep that for repeated refits) and from
    :func:`modalnb.run_recipe` of ``attrs["recipe"]`` (reproducible replay).

    One pole per mode for the whole record set: the poles are estimated jointly over
    all channels and accepted hits, the residues per channel and hit.

    Parameters
    ----------
    records : xarray.Dataset
        Record set (:mod:`modalnb.records`).
    band : (float, float), optional
        Only modes with natural frequency in (fmin, fmax) Hz are reported (all modes up to
        0.45 fs, ``modalnb._utils.BAND_LIMIT_FRACTION``, are fitted, so modes outside the
        band do not bias those inside).
    window : (float, float), optional
        Absolute times (s) of the samples used. Default: from the end of the last force
        contact (latest over accepted hits; after a double hit, its second tap) to the
        record end; without force from the first sample with t >= 0.
    n_modes : int, optional
        Report only the N strongest in-band modes (by fitted energy).
    accept : mapping or sequence of bool, optional
        Hit decisions; default exactly those of :func:`modalnb.checks.check_hits`. A
        mapping ``{hit: bool}`` overrides the automatic decision of the hits it names; a
        sequence gives one decision per hit. The checks always run (their reasons and
        warnings go into the table); the caller's decisions are overrides, as in a recipe.
    max_order : int, optional
        Highest pencil order per sub-band (default 20). Not part of a recipe: a replay
        uses the default.
    scatter : bool
        Compute the hit-to-hit scatter (per-hit pole refits) when >= 3 hits are accepted.
        Not part of a recipe: a replay computes it.
    add_modes : sequence of float, optional
        Frequencies (Hz) of modes the automatic search missed: each seeds a pole (1 %
        damping) that the fit refines and keeps (status "added by the user", with a warning
        when its energy is within noise).
    drop_modes : sequence of float, optional
        Frequencies (Hz) of fitted modes to leave out of the table (the nearest mode within
        5 %). The mode stays in the fitted model, so its neighbours are not biased.
    blas_threads : int or None
        BLAS threads during the fit (default 1: fastest on a busy machine and inside
        dask workers; None leaves the thread pools as they are).
    check_thresholds : mapping, optional
        Keyword arguments of :func:`modalnb.check_hits` (as in a recipe).
    recipe : modalnb.Recipe or path, optional
        Replay an analysis recipe (a :class:`modalnb.Recipe` or its JSON file): hit checks
        with the recipe's thresholds and overrides, then this fit with its band, window and
        model order (the same table as :func:`modalnb.run_recipe` and ``modalnb fit
        --recipe``). Then `band`, `window`, `n_modes`, `accept`, `add_modes`, `drop_modes`
        and `check_thresholds` must not be given.

    Returns
    -------
    xarray.Dataset
        Over ``mode``: ``frequency_hz``, ``damping_ratio``, their ``_std`` (1 sigma from the
        covariance of the projected Jacobian scaled by the residual variance) and
        ``_scatter`` (standard deviation of per-hit refits; NaN with a status note below 3
        accepted hits), ``regime``, ``status``, ``damped_frequency_hz``, ``q_factor``,
        ``loss_factor``, ``log_decrement``, ``decay_time_constant_s``,
        ``decay_rate_db_per_s``, ``mode_energy``. Over (mode, channel): ``shape_amplitude``,
        ``shape_phase_deg``, ``residue_real``/``residue_imag`` (per unit force, integrated
        force spectrum at the pole, where force exists). Over (mode, hit, channel):
        ``hit_residue_real``/``_imag`` (NaN for rejected hits). Over channel: ``fit_r2``,
        ``channel_note``, ``residual_noise_ratio`` (residual RMS over the pre-trigger
        noise). Over ``aside_pole`` (fitted poles that are residual terms, not modes; see
        :mod:`modalnb.estimate._select`): ``aside_frequency_hz``, ``aside_damping_ratio``,
        ``aside_frequency_hz_std``, ``aside_energy``, ``aside_reason``. Over hit: ``hit_accepted``, ``hit_reason``, ``hit_warnings`` (of
        the hit checks). The damping cross-checks of :func:`modalnb.estimate.cross_checks`
        (``xcheck_*``, each with its known bias in the attrs). For a roving-hammer record
        set (hits' ``excitation_node`` naming more than one node): the shapes over nodes of
        :func:`modalnb.node_shapes` (``node_shape_amplitude``, ``node_shape_phase_deg``,
        ``node_shape_mass_normalised`` over (mode, node); ``node_shape_mpc``,
        ``modal_mass_kg``, ``node_shape_status`` over mode; coords ``node_direction``,
        ``node_role``), the hits' excitation coords, and the channel coord ``node`` renamed
        ``channel_node``. Attributes: ``recipe`` (JSON
        that replays the call), ``settings`` (JSON; ``fit_quality`` says whether the model
        fits the data), ``band``, ``window``,
        ``input_checksum``, ``modalnb_version``.

    Notes
    -----
    1. Preparation: accepted hits, window, exponential window undone exactly, each channel
       weighted by 1/noise (pre-trigger) or by its residual RMS after a first fit; a
       constant offset per signal is a linear term, not a mode.
    2. Poles: the weighted signals are compressed to their leading principal components;
       candidates come from band-split matrix pencils (Hua & Sarkar 1990) swept over
       orders, kept when stable across orders and energetic (energy ranking).
    3. Refinement: variable projection (Golub & Pereyra 1973; shared poles over data
       sets, Golub & LeVeque 1979) with Kaufman's (1975) Jacobian, Levenberg-Marquardt
       until Bates & Watts' (1981) relative offset is below 0.001 (the step left is a
       negligible fraction of a standard deviation); a final ``scipy.optimize.least_squares``
       pass (trust-region reflective, Branch, Coleman & Li 1999) runs when the iteration
       budget ended the loop first, otherwise from the converged point when its report is
       asked. A mode is (sigma, u = wd^2), continuous through
       critical damping (repeated-pole basis, Fermo et al. 2013); modes whose
       energy is within noise are dropped.
    4. Residue of an oscillating mode: ``x(t) = 2 Re(r exp(lambda t))`` with t = 0 the
       record origin; of an overdamped one the residue of the slower pole; of a critical
       one ``a + b/sigma`` of ``(a + b t) exp(-sigma t)``.

    Examples
    --------
    >>> import numpy as np
    >>> from modalnb.records import records_from_arrays
    >>> from modalnb.testing.synth import free_decay
    >>> t = np.arange(2048) / 2048.0
    >>> x = free_decay(t, [40.0, 90.0], [0.01, 0.02], [1.0, 0.5])
    >>> x = x + 1e-4 * np.random.default_rng(1).standard_normal(t.size)
    >>> res = fit_modes(records_from_arrays(x, 2048.0), accept=[True])
    >>> np.round(res["frequency_hz"].values, 2)
    array([40., 90.])
    """
    if recipe is not None:
        given = [name for name, v in (("band", band), ("window", window), ("n_modes", n_modes),
                                      ("accept", accept), ("add_modes", add_modes),
                                      ("drop_modes", drop_modes),
                                      ("check_thresholds", check_thresholds)) if v is not None]
        if given:
            raise EstimationError(
                f"fit_modes: pass either recipe= or {', '.join(given)}, not both (the recipe "
                "holds every choice). Hint: edit the recipe instead."
            )
        est = ModeFit.from_recipe(recipe, max_order=max_order, scatter=scatter,
                                  blas_threads=blas_threads)
    else:
        est = ModeFit(band=band, window=window, n_modes=n_modes, accept=accept,
                      max_order=max_order, scatter=scatter, blas_threads=blas_threads,
                      add_modes=add_modes, drop_modes=drop_modes,
                      check_thresholds=check_thresholds)
    return est.fit(records).result_
