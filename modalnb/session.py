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

Autosave and two sessions on one recipe file: each write first compares the file's content
hash with the one this session last read or wrote. When another session (a second
notebook, a CLI run) changed the file meanwhile, its choices are merged with this
session's (:func:`modalnb.recipe.merge_recipes`: unrelated choices both kept; the same
choice changed on both sides keeps this session's and says so in one
:class:`~modalnb.RecipeConflictWarning` line) and the fit includes them. The
read-compare-write step holds an advisory lock on the recipe's folder (``fcntl.flock``,
where the platform has it), so two writers never interleave. A recipe file that cannot
be read or written (no permission, a folder in its place) never stops an analysis: it
opens without autosave, says so in one :class:`~modalnb.ModalnbWarning` line, and
:meth:`Analysis.autosave_to` names another file.

Nothing here imports ipywidgets or plotly; :meth:`Analysis.export` imports the report
writer (which uses plotly) only when called.
"""

from __future__ import annotations

import contextlib
import math
import os
import warnings
from collections.abc import Callable, Iterator
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from ._errors import (
    ModalnbError,
    OtherRecordsWarning,
    RecipeAutosaveWarning,
    RecipeConflictWarning,
    RecipeFileNotFoundError,
)
from ._files import atomic_write_text
from .estimate import mac_matrix
from .fitting import ModeFit
from .recipe import (
    Recipe,
    RecipeError,
    content_hash,
    merge_recipes,
    read_recipe_file,
    recipe_for,
    replay_note,
    save_recipe,
)
from .records import get_sample_rate, records_checksum, validate_records

__all__ = ["Analysis", "default_recipe_path", "recipe_path_problem"]

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


def recipe_path_problem(path: str | os.PathLike[str]) -> str | None:
    """Why a recipe cannot be autosaved at `path` (a short phrase), or None when it can.

    Examples
    --------
    >>> import tempfile
    >>> recipe_path_problem(tempfile.mkdtemp())
    'a folder is in its place'
    """
    p = Path(path)
    if p.is_dir():
        return "a folder is in its place"
    if not p.parent.is_dir():
        return f"its folder {str(p.parent)!r} does not exist"
    if p.exists():
        if not os.access(p, os.R_OK):
            return "it cannot be read (no permission)"
        if not os.access(p, os.W_OK):
            return "it cannot be written (no permission)"
    if not os.access(p.parent, os.W_OK | os.X_OK):
        return "its folder cannot be written (no permission)"
    return None


@contextlib.contextmanager
def _folder_lock(folder: Path) -> Iterator[None]:
    """Advisory exclusive lock on `folder` (``fcntl.flock`` on the folder itself, so no
    lock file is ever left behind); a no-op where the platform has no ``fcntl``."""
    try:
        import fcntl
    except ImportError:  # pragma: no cover - Windows
        yield
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        yield
        return
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)  # closing releases the lock


def _warn(category: type[Warning], message: str) -> None:
    # stacklevel 4: past _warn and the Analysis method, to the user's call
    warnings.warn(" ".join(message.split()), category, stacklevel=4)


class Analysis:
    """One analysis of one record set: records, recipe, hit checks, modal result.

    Parameters
    ----------
    records : xarray.Dataset
        A record set (:mod:`modalnb.records`).
    recipe : Recipe, optional
        Starting choices; default all automatic. It is bound to the records' checksum.
    recipe_path : path, optional
        Where every change is autosaved (atomically, merged with changes another session
        made to the same file). None: no autosave. A path that cannot be written (no
        permission, a folder in its place) is one :class:`~modalnb.ModalnbWarning` line
        and no autosave; :meth:`autosave_to` names another.
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
        A note worth showing (a recipe made on other records, no autosave, choices merged
        from another session).
    recipe_path : Path or None
        Where the recipe is autosaved (None: nowhere).
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
        _loaded_hash: str | None = None,
    ) -> None:
        validate_records(records, source=source)
        self.records = records
        self.source = source
        self.recipe_path: Path | None = None
        #: content hash of the recipe file as this session last read or wrote it
        self._seen_hash: str | None = None
        self.warning: str | None = None
        self.error: str | None = None
        self.busy: str | None = None
        self.result: xr.Dataset | None = None
        self.checks: xr.Dataset | None = None
        self._listeners: list[Listener] = []
        self._spectrum: tuple[tuple[int, ...], np.ndarray, np.ndarray] | None = None
        self._model_cache: tuple[tuple[int, int], Any] | None = None
        self._frf_cache: tuple[tuple[bool, ...], xr.Dataset] | None = None  # (hits used, H1)
        self._model_frf_cache: tuple[xr.Dataset, xr.Dataset] | None = None  # (result, model)
        self._pair_cache: tuple[tuple[Any, Any], xr.Dataset] | None = None
        #: the analysis model the test is compared with (:meth:`compare_with_model`), or None
        self.test_model: xr.Dataset | None = None
        self.test_model_source: str | None = None
        self._estimator: ModeFit | None = None
        self._estimator_key: Any = None
        #: True when :attr:`result` came from the fast refit (see :meth:`_fit`).
        self.preview = False
        checksum = records_checksum(records)
        note = replay_note(recipe, checksum) if recipe is not None else None
        if note:
            self.warning = note
            _warn(OtherRecordsWarning, note)
        changes: dict[str, Any] = {}
        if source and (recipe is None or not recipe.source):
            changes["source"] = source
        self.recipe = recipe_for(records, recipe, **changes)
        self._initial = self.recipe
        if recipe_path is not None:
            self._set_autosave(Path(recipe_path), _loaded_hash)
        if fit:
            self._apply(self.recipe, full=True)

    def _set_autosave(self, path: Path, seen_hash: str | None = None) -> bool:
        """Autosave to `path` if it can be written; otherwise warn (one line) and don't."""
        problem = recipe_path_problem(path)
        if problem:
            self._no_autosave(path, problem)
            return False
        self.recipe_path = path
        if seen_hash is None and path.is_file():
            with contextlib.suppress(OSError):
                seen_hash = content_hash(path.read_bytes())
        self._seen_hash = seen_hash
        return True

    def _no_autosave(self, path: Path, problem: str) -> None:
        self.recipe_path = None
        self._seen_hash = None
        self.warning = (f"{path}: {problem}; choices will not be autosaved there. "
                        "Hint: analysis.autosave_to('other.recipe.json').")
        _warn(RecipeAutosaveWarning, self.warning)

    def autosave_to(self, path: str | os.PathLike[str]) -> Path | None:
        """Autosave every change to `path` from now on, and save the current recipe there now.

        An existing file there is replaced by this session's recipe. Returns the path, or
        None (with one warning line, :attr:`warning`) when it cannot be written either.

        Examples
        --------
        >>> a = Analysis.open("tap.nc")               # doctest: +SKIP
        >>> a.autosave_to("/home/me/tap.recipe.json")  # doctest: +SKIP
        """
        p = Path(path)
        if not self._set_autosave(p):
            return None
        self._seen_hash = None  # replace whatever is there: the caller chose this file
        self.warning = None
        return self._autosave(self.recipe, force=True)

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
            there is no default (no autosave). When it cannot be read or written (no
            permission, a folder in its place, not a usable recipe), the analysis opens
            with automatic choices, leaves the file as it is, warns in one line and does not
            autosave (:meth:`autosave_to` names another file).
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
        recipe, seen = None, None
        if recipe_path is not None:
            p = Path(recipe_path)
            problem = recipe_path_problem(p)
            if p.is_file() and problem not in ("it cannot be read (no permission)",):
                try:
                    recipe, seen = read_recipe_file(p)
                except RecipeFileNotFoundError:
                    pass  # removed meanwhile: start afresh
                except RecipeError as exc:
                    # unreadable, or not a usable recipe: open anyway, never overwrite it
                    problem = str(exc).removeprefix(f"{p}: ").rstrip(".")
            if problem:
                a = cls(records, recipe, source=source, fit=False)
                a._no_autosave(p, problem)
                if fit:
                    a._apply(a.recipe, full=True)
                return a
        return cls(records, recipe, recipe_path=recipe_path, source=source, fit=fit,
                   _loaded_hash=seen)

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
        reported: set[str] = set()
        for attempt in range(3):
            if self.recipe_path is not None:
                recipe = self._merge_from_file(recipe, reported)
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
            # the last attempt writes even when the file changed during the fit (merged)
            if self.recipe_path is None or self._autosave(recipe, force=attempt == 2,
                                                          reported=reported) is not False:
                break
            # another session wrote while this one was fitting: merge its choices, refit
        self.recipe, self.result, self.checks, self.error = recipe, result, checks, None
        self.preview = preview
        self._notify("result")
        return True

    def _read_disk(self) -> tuple[Recipe | None, str | None, str | None]:
        """(recipe, content hash, problem) of the autosave file now."""
        assert self.recipe_path is not None
        try:
            data = self.recipe_path.read_bytes()
        except FileNotFoundError:
            return None, None, None
        except OSError as exc:
            return None, None, f"it cannot be read ({exc.strerror or exc})"
        h = content_hash(data)
        if h == self._seen_hash:
            return None, h, None
        try:
            return Recipe.from_json(data.decode("utf-8"), source=str(self.recipe_path)), h, None
        except (RecipeError, UnicodeDecodeError) as exc:
            return None, h, f"another program wrote something that is not a recipe ({exc})"

    def _merge_from_file(self, recipe: Recipe, reported: set[str]) -> Recipe:
        """`recipe` with the choices another session saved to the file since this one last
        read or wrote it (a three-way merge from :attr:`recipe`)."""
        theirs, h, problem = self._read_disk()
        if problem:
            assert self.recipe_path is not None
            self._no_autosave(self.recipe_path, problem)
            return recipe
        if theirs is None:
            return recipe
        merged, conflicts = merge_recipes(self.recipe, recipe, theirs)
        fresh = [c for c in conflicts if c not in reported]
        reported.update(conflicts)
        if fresh:
            self.warning = (f"{self.recipe_path}: another session changed the same choice "
                            f"({'; '.join(fresh)}); kept this session's.")
            _warn(RecipeConflictWarning, self.warning)
        elif merged != recipe:
            self.warning = f"{self.recipe_path}: merged choices saved by another session."
        self._seen_hash = h
        return merged

    def _autosave(self, recipe: Recipe, *, force: bool = False,
                  reported: set[str] | None = None) -> Path | None | bool:
        """Write `recipe` to :attr:`recipe_path` if the file is as this session last saw it.

        Returns the path written; False when another session changed the file meanwhile
        (nothing written; the caller merges and refits) unless `force`, which merges
        and writes; None when the file cannot be written (autosave stops, one warning).
        """
        path = self.recipe_path
        assert path is not None
        with _folder_lock(path.parent):
            theirs, h, problem = self._read_disk()
            if problem is None and h is not None and h != self._seen_hash:
                if not force:
                    return False
                if theirs is not None:
                    recipe, conflicts = merge_recipes(self.recipe, recipe, theirs)
                    fresh = [c for c in conflicts if c not in (reported or set())]
                    if fresh:
                        _warn(RecipeConflictWarning, f"{path}: another session changed the same "
                              f"choice ({'; '.join(fresh)}); kept this session's.")
            if problem and not force:
                self._no_autosave(path, problem)
                return None
            text = recipe.to_json()
            try:
                atomic_write_text(path, text)
            except OSError as exc:
                self._no_autosave(path, f"it cannot be written ({exc.strerror or exc})")
                return None
            self._seen_hash = content_hash(text.encode("utf-8"))
        return path

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
        # no warnings.catch_warnings here: it resets the kernel's process-wide warning
        # state, which stopped the widgets' figures from drawing in JupyterLab
        if preview:
            assert est is not None
            result = est.refit(window=recipe.window)
        else:
            est = ModeFit.from_recipe(recipe)
            est._replay_warned = True  # said once, when the analysis was made (__init__)
            est.fit(self.records)
            self._estimator, self._estimator_key = est, key
            result = est.result_
        return result, est.hit_checks_, preview

    # --- files ---------------------------------------------------------------------
    def save_recipe(self, path: str | os.PathLike[str] | None = None) -> Path:
        """Write the current recipe (atomically) to `path` or :attr:`recipe_path`."""
        target = path if path is not None else self.recipe_path
        if target is None:
            raise ModalnbError("no recipe path: give one, e.g. save_recipe('tap.recipe.json').")
        if self.recipe_path is not None and Path(target) == self.recipe_path:
            written = self._autosave(self.recipe, force=True)
            if written is None:
                raise ModalnbError(f"{self.warning}")
            return Path(target)
        return save_recipe(self.recipe, target)

    def export(
        self,
        out_dir: str | os.PathLike[str],
        *,
        table: bool = True,
        report: bool = True,
        title: str | None = None,
        analyst: str | None = None,
        notes: str | None = None,
        geometry: Any = None,
    ) -> dict[str, Path]:
        """Write the modal table files (CSV, netCDF, JSON, recipe; ``frf.nc`` when the records
        carry force) and/or ``report.html``.

        Parameters
        ----------
        out_dir : path
            Output folder.
        table, report : bool
            Write the table files / the HTML report.
        title, analyst, notes : str, optional
            The report's title block: the structure or test analysed, who analysed it,
            free notes. Given, they are stored in the recipe (and autosaved with it), so
            a replay writes the same title block; None keeps the recipe's.
        geometry : modalnb.geometry.Geometry, optional
            Node positions and lines for the report's moving shape view.

        Returns
        -------
        dict
            File name -> path written.
        """
        if self.result is None:
            raise ModalnbError("nothing to export yet: the fit has not succeeded. Hint: see `error`.")
        given = {k: v for k, v in (("title", title), ("analyst", analyst), ("notes", notes))
                 if v is not None}
        if given:  # title-block fields: no refit, but kept with the other choices
            self.recipe = replace(self.recipe, **given)
            if self.recipe_path is not None:
                self._autosave(self.recipe, force=True)
        if self.preview and not self._apply(self.recipe, full=True):
            raise ModalnbError(f"the full fit before export failed: {self.error}")
        from ._files import replaced_folder
        from .export import write_modal_table, write_report

        out = Path(out_dir)
        files: dict[str, Path] = {}
        extra = {"report.html": lambda path: write_report(
            self.records, self.result, self.checks, path, recipe=self.recipe, geometry=geometry,
        )} if report else {}
        if table:  # one set: the folder is replaced as a whole, the report with the table
            files.update(write_modal_table(self.result, out, recipe=self.recipe, checks=self.checks,
                                           extra_files=extra, records=self.records))
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

    # --- FRFs and the model against the test (modalnb.frf, modalnb.pair_modes) ---------
    def measured_frf(self) -> xr.Dataset:
        """H1 FRF and coherence per excitation over the hits the current result used.

        :func:`modalnb.frf` with ``accept=`` the result's hit decisions; cached, and
        computed again when the accepted hits change (the fit window does not enter: one
        transform per hit over the whole record). Raises :class:`~modalnb.RecordError`
        for records without force.

        Examples
        --------
        >>> a = Analysis(load_demo())                 # doctest: +SKIP
        >>> a.measured_frf()["coherence"].dims        # doctest: +SKIP
        ('excitation', 'channel', 'frequency')
        """
        from .frf import frf

        if self.result is None:
            raise ModalnbError("no result yet: the fit has not succeeded.")
        used = tuple(np.asarray(self.result["hit_accepted"].values, bool).tolist())
        if self._frf_cache is None or self._frf_cache[0] != used:
            self._frf_cache = (used, frf(self.records, accept=self.result))
        return self._frf_cache[1]

    def model_frf(self) -> xr.Dataset:
        """The current result's model FRF on the frequencies and excitations of
        :meth:`measured_frf` (:func:`modalnb.frf_compare.model_frf_for`); cached, computed
        again when the result changes (hits, window, band, modes). Exponentially windowed
        records: the model carries the window's damping, as the measured FRF does.
        Attribute ``model_note`` says where the table holds no model for an excitation."""
        from .frf_compare import model_frf_for

        measured = self.measured_frf()  # follows the result's hits: a new result for new hits
        if self._model_frf_cache is None or self._model_frf_cache[0] is not self.result:
            model, note = model_frf_for(measured, self.result)
            model.attrs["model_note"] = note
            self._model_frf_cache = (self.result, model)
        return self._model_frf_cache[1]

    def compare_with_model(self, model: Any) -> xr.Dataset:
        """Keep an analysis model to compare the test with; return :meth:`model_pairing`.

        Parameters
        ----------
        model : (modes_csv, shapes_csv) or xarray.Dataset
            As :func:`modalnb.pair_modes` takes it; the CSV files are read once, now.
        """
        from .pairing import read_model_modes

        if isinstance(model, (tuple, list)) and len(model) == 2:
            source = f"{os.fspath(model[0])} + {os.fspath(model[1])}"
            model = read_model_modes(*model)
        elif isinstance(model, xr.Dataset):
            source = "a model Dataset"
        else:
            raise ModalnbError("the model must be (modes_csv, shapes_csv) or an xarray.Dataset "
                               "with frequency_hz(mode) and shape(mode, dof).")
        pairing = self._pair_with(model)  # refuses a model sharing nothing with the test
        self.test_model, self.test_model_source = model, source
        return pairing

    def model_pairing(self) -> xr.Dataset | None:
        """:func:`modalnb.pair_modes` of the current result against :attr:`test_model`
        (None when no model was given); computed again for every new result."""
        if self.test_model is None:
            return None
        return self._pair_with(self.test_model)

    def _pair_with(self, model: xr.Dataset) -> xr.Dataset:
        from .pairing import pair_modes

        if self.result is None:
            raise ModalnbError("no result yet: the fit has not succeeded.")
        cached = self._pair_cache
        if cached is None or cached[0][0] is not self.result or cached[0][1] is not model:
            self._pair_cache = ((self.result, model), pair_modes(self.result, model))
        return self._pair_cache[1]
