"""The analysis state behind the notebook panels: records + recipe + latest checks/result.

:class:`Analysis` is plain Python (it never imports ipywidgets or plotly). Every user
choice is one method (:meth:`Analysis.set_window`, :meth:`Analysis.set_band`,
:meth:`Analysis.set_n_modes`, :meth:`Analysis.set_hit`, :meth:`Analysis.reset`); each
updates the recipe, refits, autosaves the recipe atomically beside the data and tells the
views through plain callbacks (:meth:`Analysis.subscribe`). A refit that fails keeps the
previous recipe and result and stores a one-line message in :attr:`Analysis.error`.

The result is always ``run_recipe(records, recipe)`` of the current recipe, so a saved
recipe replays headlessly (``modalnb fit --recipe``, :func:`modalnb.pipeline.run_recipe`)
to the same table.

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
from .pipeline import recipe_for, run_recipe
from .recipe import Recipe, RecipeError, load_recipe, save_recipe
from .records import get_sample_rate, records_checksum, validate_records

__all__ = ["Analysis", "default_recipe_path", "mac", "refit_model"]

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


def mac(a: Any, b: Any) -> float:
    """Modal assurance criterion of two (complex) shape vectors (Allemang & Brown 1982).

    ``MAC = |a^H b|^2 / ((a^H a)(b^H b))``, 1 for collinear shapes, 0 for orthogonal ones.

    Examples
    --------
    >>> round(mac([1, 2, 3], [2, 4, 6]), 12)
    1.0
    >>> mac([1, 0], [0, 1])
    0.0
    """
    a = np.asarray(a, dtype=complex).ravel()
    b = np.asarray(b, dtype=complex).ravel()
    den = float(np.real(np.vdot(a, a)) * np.real(np.vdot(b, b)))
    if not den > 0:
        return math.nan
    return float(abs(np.vdot(a, b)) ** 2 / den)


def _poles(result: xr.Dataset) -> np.ndarray:
    """Continuous-time poles (rad/s) of the result's modes (lambda = -zeta w + j w sqrt(1-zeta^2))."""
    fn = np.asarray(result["frequency_hz"].values, float)
    z = np.asarray(result["damping_ratio"].values, float)
    w = 2 * np.pi * fn
    return -z * w + 1j * w * np.sqrt(np.clip(1 - z**2, 0.0, None))


def refit_model(
    t: np.ndarray, y: np.ndarray, poles: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares model of signals `y` (P, N) at times `t` (N,) with the given poles.

    With the poles fixed, a sum of decaying sinusoids (plus a constant offset) is linear
    in its amplitudes, so they follow from one linear least-squares solve (the inner step
    of variable projection, Golub & Pereyra 1973). Under- and overdamped poles alike: an
    underdamped pole gives the columns ``e^(-sigma t) cos(wd t)`` and ``... sin``; a pole
    with no imaginary part gives ``e^(-sigma t)`` and ``t e^(-sigma t)``.

    Returns
    -------
    model : ndarray (P, N)
    coefficients : ndarray (P, n_columns)

    Examples
    --------
    >>> t = np.arange(400) / 400.0
    >>> y = np.exp(-2 * t) * np.cos(2 * np.pi * 20 * t)
    >>> lam = np.array([-2 + 2j * np.pi * 20])
    >>> m, _ = refit_model(t, y[None], lam)
    >>> bool(np.allclose(m[0], y))
    True
    """
    t = np.asarray(t, float)
    tt = t - t[0]
    cols = [np.ones_like(tt)]
    for lam in np.asarray(poles, complex):
        if not np.isfinite(lam):
            continue
        env = np.exp(lam.real * tt)
        if abs(lam.imag) > 0:
            cols += [env * np.cos(lam.imag * tt), env * np.sin(lam.imag * tt)]
        else:
            cols += [env, tt * env]
    basis = np.stack(cols, axis=1)
    scale = np.linalg.norm(basis, axis=0)
    scale[scale == 0] = 1.0
    coef, *_ = np.linalg.lstsq(basis / scale, np.asarray(y, float).T, rcond=None)
    coef = coef / scale[:, None]
    return (basis @ coef).T, coef.T


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
        Output of :func:`modalnb.pipeline.run_recipe` for :attr:`recipe`.
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
            self.refit()

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
        return self._apply(replace(self._initial))

    def refit(self) -> bool:
        """Fit again with the current recipe (True when it worked)."""
        return self._apply(self.recipe)

    def _change(self, **changes: Any) -> bool:
        try:
            recipe = replace(self.recipe, **changes)
        except RecipeError as exc:
            self.error = str(exc)
            self._notify("error")
            return False
        return self._apply(recipe)

    def _apply(self, recipe: Recipe) -> bool:
        self.busy = "fitting modes"
        self._notify("busy")
        try:
            result, checks = run_recipe(self.records, recipe)
        except (ModalnbError, np.linalg.LinAlgError) as exc:
            self.busy = None
            self.error = " ".join(str(exc).split()) or type(exc).__name__
            self._notify("error")
            return False
        self.busy = None
        self.recipe, self.result, self.checks, self.error = recipe, result, checks, None
        if self.recipe_path is not None:
            save_recipe(recipe, self.recipe_path)
        self._notify("result")
        return True

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
        from .export import write_modal_table
        from .report import write_report

        out = Path(out_dir)
        files: dict[str, Path] = {}
        if table:
            files.update(write_modal_table(self.result, out, recipe=self.recipe, checks=self.checks))
        if report:
            out.mkdir(parents=True, exist_ok=True)
            files["report.html"] = write_report(
                self.records, self.result, self.checks, out / "report.html",
                title=title or f"modalnb: {self.source or 'record set'}",
            )
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
        squares on this hit's data (:func:`refit_model`).

        Returns
        -------
        t : ndarray (N,)
        measured, model : ndarray (n_channel, N)
        """
        if self.result is None:
            raise ModalnbError("no result yet: the fit has not succeeded.")
        key = (id(self.result), int(hit))
        if self._model_cache is not None and self._model_cache[0] == key:
            return self._model_cache[1]
        t0, t1 = self.fit_window()
        t = self.records["time"].values
        sel = (t >= t0) & (t <= t1)
        y = self.records["response"].sel(hit=int(hit)).values[:, sel]
        m, _ = refit_model(t[sel], y, _poles(self.result))
        self._model_cache = (key, (t[sel], y, m))
        return t[sel], y, m

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
        r = self.result
        if r is None or "stab_order" not in r:
            return None
        return (np.asarray(r["stab_order"].values, float), np.asarray(r["stab_frequency_hz"].values, float),
                np.asarray(r["stab_stable"].values, bool))

    def shapes(self) -> np.ndarray:
        """Complex shapes (mode, channel) from amplitude and phase of the result."""
        assert self.result is not None
        amp = self.result["shape_amplitude"].values
        ph = np.deg2rad(self.result["shape_phase_deg"].values)
        return amp * np.exp(1j * ph)

    def mac_modes(self) -> np.ndarray:
        """MAC matrix between the result's modes (Allemang & Brown 1982)."""
        s = self.shapes()
        n = s.shape[0]
        return np.array([[mac(s[i], s[j]) for j in range(n)] for i in range(n)])

    def mac_hits(self, mode: int) -> tuple[list[int], np.ndarray]:
        """MAC matrix between accepted hits of one mode, from the per-hit residues."""
        assert self.result is not None
        hits = [h for h in self.accepted_hits() if h in self.result["hit"].values]
        re = self.result["hit_residue_real"].sel(mode=mode, hit=hits).values
        im = self.result["hit_residue_imag"].sel(mode=mode, hit=hits).values
        r = re + 1j * im
        n = len(hits)
        return hits, np.array([[mac(r[i], r[j]) for j in range(n)] for i in range(n)])
