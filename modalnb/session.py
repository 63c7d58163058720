"""The analysis state behind the notebook panels: records + recipe + latest checks/result.

:class:`Analysis` is plain Python (it never imports ipywidgets or plotly). Every user
choice is one method (:meth:`Analysis.set_window`, :meth:`Analysis.set_band`,
:meth:`Analysis.set_n_modes`, :meth:`Analysis.set_hit`, :meth:`Analysis.reset`); each
updates the recipe, refits, autosaves the recipe atomically beside the data and tells the
views through plain callbacks (:meth:`Analysis.subscribe`). A refit that fails keeps the
previous recipe and result and stores a one-line message in :attr:`Analysis.error`.

A full fit is ``ModeFit.from_recipe(recipe).fit(records)`` of the current recipe, the
path of :func:`modalnb.run_recipe`, so a saved recipe replays headlessly (``modalnb fit
--recipe``) to the same table. A window change alone uses the estimator's fast refit (a
preview, :attr:`Analysis.preview`; the same variables); exports always come from a full
fit.

Nothing here imports ipywidgets or plotly; :meth:`Analysis.export` imports the report
writer (which uses plotly) only when called.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import ModalnbError
from .estimate import mac_matrix
from .fitting import ModeFit
from .recipe import Recipe, RecipeError, load_recipe, recipe_for, save_recipe
from .records import get_sample_rate, records_checksum, validate_records

__all__ = ["Analysis", "default_recipe_path"]

#: Events sent to subscribers: ``busy`` (a slow step starts; ``analysis.busy`` holds its
#: text), ``result`` (a new result), ``error`` (a refit failed; ``analysis.error``).
EVENTS = ("busy", "result", "error")

Listener = Callable[[str, "Analysis"], None]


def default_recipe_path(records_path: str | os.PathLike[str]) -> Path:
    """Where the recipe of a record file is autosaved: ``<stem>.recipe.json`` beside it.

    Examples
    --------
    >>> default_recipe_path("/data/bay3/tap.nc").name
    'tap.recipe.json'
    """
    p = Path(records_path)
    return p.with_name(p.stem + ".recipe.json")


class Analysis:
    """One analysis of one record set: records, recipe, hit checks, modal result.

    Parameters
    ----------
    records : xarray.Dataset
        A record set (:mod:`modalnb.records`).
    recipe : Recipe, optional
        Starting choices; default all automatic. It is bound to the records' checksum.
    recipe_path : path, optional
        Where every change is autosaved (atomically). None: no autosave.
    source : str, optional
        Where the records came from (shown in messages, kept in the recipe).
    fit : bool
        Fit at once (default). With False, call :meth:`refit` later.

    Attributes
    ----------
    recipe : Recipe
        The choices behind :attr:`result` (after a failed refit, still the last good one).
    result, checks : xarray.Dataset or None
        Output of :func:`modalnb.run_recipe` for :attr:`recipe` (after a window-only
        change, of the fast refit: see :attr:`preview`).
    error : str or None
        One-line message of the last failed refit (None after a good one).
    warning : str or None
        A note worth showing (a recipe made on other records).
    busy : str or None
        Text of the slow step under way (None when idle).

    Examples
    --------
    >>> from modalnb.demo import load_demo
    >>> a = Analysis(load_demo())                      # doctest: +SKIP
    >>> a.set_window(0.01, 1.0)                        # doctest: +SKIP
    >>> a.result["frequency_hz"].values                # doctest: +SKIP
    """

    def __init__(
        self,
        records: xr.Dataset,
        recipe: Recipe | None = None,
        *,
        recipe_path: str | os.PathLike[str] | None = None,
        source: str | None = None,
        fit: bool = True,
    ) -> None:
        validate_records(records, source=source)
        self.records = records
        self.source = source
        self.recipe_path = Path(recipe_path) if recipe_path is not None else None
        self.warning: str | None = None
        self.error: str | None = None
        self.busy: str | None = None
        self.result: xr.Dataset | None = None
        self.checks: xr.Dataset | None = None
        self._listeners: list[Listener] = []
        self._spectrum: tuple[tuple[int, ...], np.ndarray, np.ndarray] | None = None
        self._model_cache: tuple[tuple[int, int], Any] | None = None
        self._estimator: ModeFit | None = None
        self._estimator_key: Any = None
        #: True when :attr:`result` came from the fast refit (see :meth:`_fit`).
        self.preview = False
        checksum = records_checksum(records)
        if recipe is not None and recipe.records_checksum and recipe.records_checksum != checksum:
            self.warning = (
                "the recipe was made on other records (checksum differs); the table may "
                "differ from the original."
            )
        changes: dict[str, Any] = {}
        if source and (recipe is None or not recipe.source):
            changes["source"] = source
        self.recipe = recipe_for(records, recipe, **changes)
        self._initial = self.recipe
        if fit:
            self._apply(self.recipe, full=True)

    # --- construction --------------------------------------------------------------
    @classmethod
    def open(
        cls,
        path_or_records: str | os.PathLike[str] | xr.Dataset,
        recipe_path: str | os.PathLike[str] | None = None,
        *,
        fit: bool = True,
        **open_options: Any,
    ) -> Analysis:
        """Open records (a file or a Dataset) and restore their saved recipe if there is one.

        Parameters
        ----------
        path_or_records : path or xarray.Dataset
            A record file (anything :func:`modalnb.io.open_records` reads) or a record set.
        recipe_path : path, optional
            Recipe file to restore and autosave to. Default for a file:
            ``<stem>.recipe.json`` beside it (:func:`default_recipe_path`); for a Dataset
            there is no default (no autosave).
        fit : bool
            Fit at once (default True).
        **open_options
            Passed to :func:`modalnb.io.open_records`.

        Examples
        --------
        >>> a = Analysis.open("tap.nc")   # doctest: +SKIP
        >>> a.recipe_path.name            # doctest: +SKIP
        'tap.recipe.json'
        """
        if isinstance(path_or_records, xr.Dataset):
            records, source = path_or_records, None
        else:
            from .io import open_records

            source = str(path_or_records)
            records = open_records(path_or_records, **open_options)
            if recipe_path is None:
                recipe_path = default_recipe_path(path_or_records)
        recipe = None
        if recipe_path is not None and Path(recipe_path).is_file():
            recipe = load_recipe(recipe_path)
        return cls(records, recipe, recipe_path=recipe_path, source=source, fit=fit)

    # --- views ---------------------------------------------------------------------
    def subscribe(self, fn: Listener) -> Callable[[], None]:
        """Call ``fn(event, analysis)`` on every event (:data:`EVENTS`); returns an unsubscribe."""
        self._listeners.append(fn)

        def unsubscribe() -> None:
            if fn in self._listeners:
                self._listeners.remove(fn)

        return unsubscribe

    def _notify(self, event: str) -> None:
        for fn in list(self._listeners):
            fn(event, self)

    # --- the user's choices --------------------------------------------------------
    def set_window(self, t0: float | None, t1: float | None = None) -> bool:
        """Fit window (absolute record times, s); ``set_window(None)`` = automatic.

        Returns True when the refit worked; otherwise :attr:`error` says why and the
        previous recipe and result stay.
        """
        return self._change(window=None if t0 is None else self._pair("window", t0, t1))

    def set_band(self, f0: float | None, f1: float | None = None) -> bool:
        """Frequency band (Hz); ``set_band(None)`` = automatic (0 to 0.45 fs)."""
        return self._change(band=None if f0 is None else self._pair("band", f0, f1))

    @staticmethod
    def _pair(name: str, a: Any, b: Any) -> Any:
        try:
            return (float(a), float(b))
        except (TypeError, ValueError):
            return [a, b]  # the recipe refuses it with a one-line message

    def set_n_modes(self, n: int | None) -> bool:
        """Number of modes to keep (strongest by energy); None = automatic."""
        return self._change(n_modes=None if n is None else int(n))

    def add_mode(self, frequency_hz: float) -> bool:
        """Say a mode is at `frequency_hz` (Hz) that the automatic search missed; refit."""
        return self._edit_modes(frequency_hz, "add_modes", "drop_modes")

    def drop_mode(self, frequency_hz: float) -> bool:
        """Leave the fitted mode nearest `frequency_hz` (Hz) out of the table; refit."""
        return self._edit_modes(frequency_hz, "drop_modes", "add_modes")

    def _edit_modes(self, value: Any, into: str, out_of: str) -> bool:
        """Put the frequency `value` into one recipe list, removing it (within 5 %, the
        engine's ``drop_modes`` tolerance) from the other."""
        f = self._frequency(value)
        if f is None:
            return False
        other = [g for g in getattr(self.recipe, out_of) if abs(g - f) > 0.05 * f]
        return self._change(**{into: sorted({*getattr(self.recipe, into), f}), out_of: other})

    def clear_mode_edits(self) -> bool:
        """Forget every added and dropped mode; refit."""
        return self._change(add_modes=[], drop_modes=[])

    def _frequency(self, value: Any) -> float | None:
        try:
            f = float(value)
        except (TypeError, ValueError):
            f = float("nan")
        if not (0 < f < self.sample_rate / 2):
            self.error = (f"mode frequency must be a number between 0 and {self.sample_rate / 2:g} Hz "
                          f"(half the sample rate), was {value!r}.")
            self._notify("error")
            return None
        return f

    def set_hit(self, hit: int, accepted: bool | None) -> bool:
        """Accept (True) or reject (False) a hit, overriding the checks; None = automatic."""
        hits = [int(h) for h in self.records["hit"].values]
        if int(hit) not in hits:
            self.error = f"hit {hit} is not in the records (hits: {hits[0]}..{hits[-1]})."
            self._notify("error")
            return False
        overrides = dict(self.recipe.hit_overrides)
        if accepted is None:
            overrides.pop(int(hit), None)
        else:
            overrides[int(hit)] = bool(accepted)
        return self._change(hit_overrides=overrides)

    def reset(self) -> bool:
        """Back to the recipe this analysis started from."""
        return self._apply(replace(self._initial), full=True)

    def refit(self) -> bool:
        """Full fit with the current recipe, no shortcut (True when it worked)."""
        return self._apply(self.recipe, full=True)

    def _change(self, **changes: Any) -> bool:
        try:
            recipe = replace(self.recipe, **changes)
        except RecipeError as exc:
            self.error = str(exc)
            self._notify("error")
            return False
        return self._apply(recipe)

    def _apply(self, recipe: Recipe, *, full: bool = False) -> bool:
        self.busy = "fitting modes"
        self._notify("busy")
        try:
            result, checks, preview = self._fit(recipe, full=full)
        except (ModalnbError, np.linalg.LinAlgError) as exc:
            self.busy = None
            self.error = " ".join(str(exc).split()) or type(exc).__name__
            self._notify("error")
            return False
        self.busy = None
        self.recipe, self.result, self.checks, self.error = recipe, result, checks, None
        self.preview = preview
        if self.recipe_path is not None:
            save_recipe(recipe, self.recipe_path)
        self._notify("result")
        return True

    def _fit(self, recipe: Recipe, *, full: bool) -> tuple[xr.Dataset, xr.Dataset, bool]:
        """The fit of :func:`modalnb.run_recipe` (``ModeFit.from_recipe``), keeping the estimator.

        A change of the window alone uses the estimator's fast refit from the poles already
        found (``ModeFit.refit``): a *preview*, which :meth:`export` and :meth:`refit`
        replace by a full fit, so files always equal a replay of the recipe.
        """
        key = replace(recipe, window=None)  # everything but the window
        est = self._estimator
        preview = (not full and recipe.window is not None and est is not None
                   and self._estimator_key == key)
        if preview:
            assert est is not None
            result = est.refit(window=recipe.window)
        else:
            est = ModeFit.from_recipe(recipe).fit(self.records)
            self._estimator, self._estimator_key = est, key
            result = est.result_
        return result, est.hit_checks_, preview

    # --- files ---------------------------------------------------------------------
    def save_recipe(self, path: str | os.PathLike[str] | None = None) -> Path:
        """Write the current recipe (atomically) to `path` or :attr:`recipe_path`."""
        target = path if path is not None else self.recipe_path
        if target is None:
            raise ModalnbError("no recipe path: give one, e.g. save_recipe('tap.recipe.json').")
        return save_recipe(self.recipe, target)

    def export(
        self,
        out_dir: str | os.PathLike[str],
        *,
        table: bool = True,
        report: bool = True,
        title: str | None = None,
    ) -> dict[str, Path]:
        """Write the modal table files (CSV, netCDF, JSON, recipe) and/or ``report.html``.

        Returns
        -------
        dict
            File name -> path written.
        """
        if self.result is None:
            raise ModalnbError("nothing to export yet: the fit has not succeeded. Hint: see `error`.")
        if self.preview and not self._apply(self.recipe, full=True):
            raise ModalnbError(f"the full fit before export failed: {self.error}")
        from ._files import replaced_folder
        from .export import write_modal_table, write_report

        out = Path(out_dir)
        files: dict[str, Path] = {}
        extra = {"report.html": lambda path: write_report(
            self.records, self.result, self.checks, path,
            title=title or f"modalnb: {self.source or 'record set'}",
        )} if report else {}
        if table:  # one set: the folder is replaced as a whole, the report with the table
            files.update(write_modal_table(self.result, out, recipe=self.recipe, checks=self.checks,
                                           extra_files=extra))
        elif extra:  # the report alone replaces only the report
            with replaced_folder(out, replaces=("report.html",)) as stage:
                extra["report.html"](stage / "report.html")
            files["report.html"] = out / "report.html"
        return files

    # --- derived data for the views (plain numpy) ----------------------------------
    @property
    def sample_rate(self) -> float:
        return float(get_sample_rate(self.records))

    @property
    def hits(self) -> list[int]:
        return [int(h) for h in self.records["hit"].values]

    @property
    def channels(self) -> list[str]:
        return [str(c) for c in self.records["channel"].values]

    def accepted_hits(self) -> list[int]:
        """Hit labels the current result used."""
        if self.checks is None:
            return self.hits
        return [int(h) for h, a in zip(self.checks["hit"].values, self.checks["accepted"].values,
                                        strict=True) if bool(a)]

    def fit_window(self) -> tuple[float, float]:
        """The window the current result used (the recipe's, or the automatic one)."""
        if self.recipe.window is not None:
            return self.recipe.window
        if self.result is not None:
            for key in ("window", "window_s"):
                w = self.result.attrs.get(key)
                if w is not None and np.size(w) == 2:
                    return (float(np.ravel(w)[0]), float(np.ravel(w)[1]))
        t = self.records["time"].values
        return (float(max(t[0], 0.0)), float(t[-1]))

    def spectrum(self) -> tuple[np.ndarray, np.ndarray]:
        """Mean amplitude spectrum over accepted hits, summed over channels (t >= 0)."""
        acc = tuple(self.accepted_hits()) or tuple(self.hits)
        if self._spectrum is not None and self._spectrum[0] == acc:
            return self._spectrum[1], self._spectrum[2]
        t = self.records["time"].values
        use = t >= 0
        y = self.records["response"].sel(hit=list(acc)).values[:, :, use]
        mag = np.abs(np.fft.rfft(y, axis=-1)).mean(axis=0).sum(axis=0) / use.sum()
        freqs = np.fft.rfftfreq(int(use.sum()), 1.0 / self.sample_rate)
        self._spectrum = (acc, freqs, mag)
        return freqs, mag

    def model(self, hit: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Measured and modelled responses of one hit in the fit window.

        The model uses the result's poles; its amplitudes are solved by linear least
        squares on this hit's data (:func:`modalnb.estimate.model_traces`).

        Returns
        -------
        t : ndarray (N,)
        measured, model : ndarray (n_channel, N)
        """
        from .estimate import model_traces

        if self.result is None:
            raise ModalnbError("no result yet: the fit has not succeeded.")
        key = (id(self.result), int(hit))
        if self._model_cache is None or self._model_cache[0] != key:
            one = self.records.sel(hit=[int(hit)])
            m = model_traces(one, self.result).isel(hit=0)
            y = one["response"].isel(hit=0).sel(time=m["time"]).values
            self._model_cache = (key, (m["time"].values, y, m.values))
        return self._model_cache[1]

    def channel_quality(self, hit: int) -> list[dict[str, Any]]:
        """Per-channel fit quality of one hit: residual RMS, R^2 and residual/noise ratio."""
        t, y, m = self.model(hit)
        r = y - m
        rows = []
        for c, ch in enumerate(self.channels):
            ss = float(np.sum((y[c] - y[c].mean()) ** 2))
            rows.append({
                "channel": ch,
                "residual_rms": float(np.sqrt(np.mean(r[c] ** 2))),
                "r_squared": 1.0 - float(np.sum(r[c] ** 2)) / ss if ss > 0 else math.nan,
            })
        return rows

    def stabilisation(self) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
        """Poles versus model order as ``(order, frequency_hz, stable)`` arrays, or None.

        None when the estimation engine gives no such data with its result.
        """
        st = getattr(self._estimator, "stabilisation_", None)
        if st is None or "order" not in st or st.sizes.get("pole", 0) == 0:
            return None
        return (np.asarray(st["order"].values, float), np.asarray(st["frequency_hz"].values, float),
                np.asarray(st["stable"].values, bool))

    def stabilisation_table(self) -> xr.Dataset | None:
        """The engine's poles versus order as a Dataset (dim ``pole``: ``order``,
        ``frequency_hz``, ``damping_ratio``, ``stable``, ``mac``, ``stable_shape``, ...), or
        None when the engine gives no such data (see ``SharedPoleFit.stabilisation_``)."""
        st = getattr(self._estimator, "stabilisation_", None)
        if st is None or "order" not in st or st.sizes.get("pole", 0) == 0:
            return None
        return st

    def shapes(self) -> np.ndarray:
        """Complex shapes (mode, channel) from amplitude and phase of the result."""
        assert self.result is not None
        amp = self.result["shape_amplitude"].values
        ph = np.deg2rad(self.result["shape_phase_deg"].values)
        return amp * np.exp(1j * ph)

    def cross_checks(self) -> xr.Dataset | None:
        """The result, which holds the damping cross-checks beside each mode (``xcheck_*``).

        None while there is no result. See :func:`modalnb.estimate.cross_checks`.
        """
        return self.result

    def mac_modes(self) -> np.ndarray:
        """MAC matrix between the result's modes (Allemang & Brown 1982)."""
        return mac_matrix(self.shapes().T)

    def mac_hits(self, mode: int) -> tuple[list[int], np.ndarray]:
        """MAC matrix between accepted hits of one mode, from the per-hit residues."""
        assert self.result is not None
        hits = [h for h in self.accepted_hits() if h in self.result["hit"].values]
        re = self.result["hit_residue_real"].sel(mode=mode, hit=hits).values
        im = self.result["hit_residue_imag"].sel(mode=mode, hit=hits).values
        return hits, mac_matrix((re + 1j * im).T)
