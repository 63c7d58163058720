"""The measured FRF beside the modal model's FRF: one pairing for the panels, the report and ``frf.nc``.

:func:`compare_frf` runs :func:`modalnb.frf` over the hits a :func:`modalnb.fit_modes`
table accepted and :func:`modalnb.synthesise_frf` of that table on the same frequencies and
excitation labels, so a panel, the report and the exported file all show the same two
curves. Pure computation: no widgets, no plotting.

Lining up the excitations: a table whose hits name their excitation points (residues per
hit, ``excitation_node`` over ``hit``) is synthesised per excitation; a table with one
residue set is synthesised under the one measured excitation label. A table with one
residue set for records hit at several points holds no per-point model (the residues
mix the points), so ``model_frf`` is NaN and the attribute ``model_note`` says why.

Exponentially windowed records: the measured FRF is that of the windowed records and
cannot be un-windowed (:func:`modalnb.frf`); the model is evaluated with the window's
damping ``1/tau`` added to every pole (``synthesise_frf(..., windowed=True)``), so the two
compare. The attribute ``label`` says which FRF is drawn.
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from ._errors import ModalnbError
from ._numbers import format_quantity
from .frf import frf, synthesise_frf

__all__ = ["compare_frf", "model_frf_for", "frf_label"]


def frf_label(measured: xr.Dataset) -> str:
    """What the measured FRF is, in a few words (estimator; windowed records said so).

    Examples
    --------
    >>> import xarray as xr
    >>> frf_label(xr.Dataset(attrs={"estimator": "H1"}))
    'H1'
    >>> frf_label(xr.Dataset(attrs={"estimator": "H1", "exponential_window_tau_s": 0.5}))
    'H1 of the exponentially windowed records (tau = 500 ms; model with the window damping 1/tau added)'
    """
    est = str(measured.attrs.get("estimator", "H1"))
    tau = measured.attrs.get("exponential_window_tau_s")
    if tau is None:
        return est
    return (f"{est} of the exponentially windowed records (tau = "
            f"{format_quantity(float(tau), 'time')}; model with the window damping 1/tau added)")


def _grouped(table: xr.Dataset) -> bool:
    return ("excitation_node" in table.coords and table["excitation_node"].dims == ("hit",)
            and "hit_residue_real" in table.data_vars)


def model_frf_for(measured: xr.Dataset, table: xr.Dataset) -> tuple[xr.Dataset, str]:
    """The table's model FRF on the frequencies, excitations and channels of `measured`.

    Parameters
    ----------
    measured : xarray.Dataset
        A :func:`modalnb.frf` result.
    table : xarray.Dataset
        The :func:`modalnb.fit_modes` table of the same records.

    Returns
    -------
    model : xarray.Dataset
        ``frf(excitation, channel, frequency)`` complex, NaN where the table holds no model
        for an excitation.
    note : str
        ``"none"``, or why some excitation has no model.

    Raises
    ------
    ModalnbError
        The table was fitted without force (its residues are not per unit force).

    Examples
    --------
    >>> from modalnb.demo import load_demo                          # doctest: +SKIP
    >>> import modalnb                                              # doctest: +SKIP
    >>> ds = load_demo(); table = modalnb.fit_modes(ds)             # doctest: +SKIP
    >>> model, note = model_frf_for(modalnb.frf(ds, accept=table), table)  # doctest: +SKIP
    """
    names = [str(v) for v in measured["excitation"].values]
    if _grouped(table):
        model = synthesise_frf(table, measured, excitation=names, windowed=True)
        note = "none"
    elif len(names) == 1:
        model = synthesise_frf(table, measured, excitation=names[0], windowed=True)
        note = "none"
    else:
        one = synthesise_frf(table, measured, windowed=True)
        h = np.full((len(names), one.sizes["channel"], one.sizes["frequency"]), np.nan + 0j)
        model = one.isel(excitation=[0] * len(names)).assign_coords(
            excitation=np.array(names, dtype=object))
        model["frf"] = (model["frf"].dims, h, model["frf"].attrs)
        note = (f"the table holds one residue set for {len(names)} excitation points (no residues "
                "per excitation point), so it gives no model FRF per point")
    model = model.reindex(channel=measured["channel"].values)
    return model, note


def compare_frf(records: xr.Dataset, table: xr.Dataset, *, estimator: str = "H1",
                force_window: bool | float | None = None) -> xr.Dataset:
    """Measured FRF (over the table's accepted hits) and the table's model FRF, side by side.

    Parameters
    ----------
    records : xarray.Dataset
        The record set, with ``force``.
    table : xarray.Dataset
        Its :func:`modalnb.fit_modes` table (hit decisions ``hit_accepted``).
    estimator, force_window
        As :func:`modalnb.frf`.

    Returns
    -------
    xarray.Dataset
        The :func:`modalnb.frf` result (``frf``, ``coherence``, ``force_level_db``,
        ``n_hits``) plus ``model_frf(excitation, channel, frequency)`` complex (same units);
        attributes ``label`` (:func:`frf_label`), ``model_note``, ``model_windowed_records``
        and ``model_left_out`` (from :func:`modalnb.synthesise_frf`).

    Raises
    ------
    RecordError
        The records have no ``force``.
    ModalnbError
        The table holds no FRF (fitted without force), or an accepted hit has no pulse.

    Examples
    --------
    >>> from modalnb.demo import load_demo          # doctest: +SKIP
    >>> import modalnb                              # doctest: +SKIP
    >>> ds = load_demo()                            # doctest: +SKIP
    >>> both = compare_frf(ds, modalnb.fit_modes(ds))  # doctest: +SKIP
    >>> both["model_frf"].dims                      # doctest: +SKIP
    ('excitation', 'channel', 'frequency')
    """
    measured = frf(records, estimator=estimator, force_window=force_window, accept=table)
    model, note = model_frf_for(measured, table)
    out = measured.copy()
    out["model_frf"] = (("excitation", "channel", "frequency"), model["frf"].values, {
        "units": model["frf"].attrs.get("units", ""),
        "description": "FRF of the fitted modal model (modalnb.synthesise_frf)"})
    if not np.all(np.isnan(model["frf"].values)) and out["frf"].attrs.get("units") != \
            out["model_frf"].attrs["units"]:
        raise ModalnbError(
            f"the table's FRF is in {out['model_frf'].attrs['units']!r} but the records' in "
            f"{out['frf'].attrs.get('units')!r}: the table was fitted on other records.")
    out.attrs.update({
        "label": frf_label(measured),
        "model_note": note,
        "model_windowed_records": str(model.attrs.get("windowed_records", "no")),
        "model_left_out": str(model.attrs.get("left_out", "none")),
    })
    return out
