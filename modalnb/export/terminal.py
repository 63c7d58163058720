"""The modal table as aligned text for the terminal (the CLI's printout).

Every number goes through the one formatter (:mod:`modalnb._numbers`, via :mod:`._cells`):
each value with its standard uncertainty as ``value ± u``, both rounded to the same
decimal place as JCGM 100:2008 (GUM) 7.2.6 says, damping in per cent.
"""

from __future__ import annotations

import math

import xarray as xr

from ._aside import ASIDE_TITLE, aside_rows
from ._cells import damping_cell, number_cell, pm_cell
from ._rows import _value

__all__ = ["format_modal_table"]


def format_modal_table(result: xr.Dataset) -> str:
    """The modal table as aligned text with units in the header (for the terminal).

    Natural frequency and damping ratio are written ``value ± u`` (standard uncertainty,
    GUM 7.2.6: u to at most two significant digits, the value to the same place); damping
    in per cent; the quality factor Q to 3 significant digits. When the fit set poles
    aside (residual terms, not modes), a second table "Poles set aside (not modes)"
    follows with the reason for each. A table with shapes over nodes (roving hammer,
    several setups) is followed by them: per mode the modal mass and phase collinearity,
    per node amplitude and phase of every mode.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"frequency_hz": ("mode", [12.5]), "frequency_hz_std": ("mode", [0.01]),
    ...                  "damping_ratio": ("mode", [0.012]), "damping_ratio_std": ("mode", [0.0004]),
    ...                  "regime": ("mode", ["underdamped"]), "status": ("mode", ["ok"])},
    ...                 coords={"mode": [1]})
    >>> print(format_modal_table(ds))
    mode  f_n [Hz]        damping [%]    Q     regime       status
    1     12.500 ± 0.010  1.200 ± 0.040  41.7  underdamped  ok
    """
    header = ["mode", "f_n [Hz]", "damping [%]", "Q", "regime", "status"]
    rows = []

    def var(name: str, k: int) -> object:
        return _value(result[name].values[k]) if name in result else None

    for k in range(result.sizes.get("mode", 0)):
        z = var("damping_ratio", k)
        q = var("q_factor", k)
        if q is None and isinstance(z, float) and z > 0:
            q = 1 / (2 * z)
        rows.append([
            str(_value(result["mode"].values[k])),
            pm_cell(var("frequency_hz", k), var("frequency_hz_std", k), "Hz"),
            pm_cell(z, var("damping_ratio_std", k), "%", scale=100),
            number_cell(q, "ratio"),
            str(var("regime", k) or "-"),
            str(var("status", k) or "-"),
        ])
    lines = _aligned(header, rows)
    aside = aside_rows(result)
    if aside:
        lines += ["", f"{ASIDE_TITLE}: residual terms kept in the model, left out of the table",
                  *_aligned(["pole", "f_n [Hz]", "damping [%]", "reason"], [
                      [str(r["pole"]), pm_cell(r["frequency_hz"], r["frequency_hz_std"], "Hz"),
                       damping_cell(r["damping_ratio"]), str(r["reason"])]
                      for r in aside])]
    if "node_shape_amplitude" in result.data_vars:
        lines += ["", *_node_lines(result)]
    return "\n".join(lines)


def _node_lines(result: xr.Dataset) -> list[str]:
    """The shapes over nodes as text (numbers through :mod:`modalnb._numbers`)."""
    from .._numbers import format_quantity

    def q(v: float, kind: str) -> str:
        return "-" if not math.isfinite(v) else format_quantity(v, kind, unit=False)

    modes = [str(_value(m)) for m in result["mode"].values]
    per_mode = [[m, q(float(result["modal_mass_kg"].values[k]), "amplitude"),
                 q(float(result["node_shape_mpc"].values[k]), "ratio"),
                 str(_value(result["node_shape_status"].values[k]))]
                for k, m in enumerate(modes)]
    out = ["Shapes over nodes: modal mass of the unit-maximum shape, phase collinearity",
           *_aligned(["mode", "modal mass [kg]", "MPC [-]", "node shape status"], per_mode), ""]
    amp = result["node_shape_amplitude"].values
    ph = result["node_shape_phase_deg"].values
    rows = []
    for j, node in enumerate(result["node"].values.tolist()):
        role = str(_value(result["node_role"].values[j])) if "node_role" in result.coords else ""
        d = str(_value(result["node_direction"].values[j])) if "node_direction" in result.coords else ""
        rows.append([str(node), d, role] + [
            "-" if not math.isfinite(float(amp[k, j])) else
            f"{q(float(amp[k, j]), 'amplitude')} at {q(float(ph[k, j]), 'phase_deg')}°"
            for k in range(len(modes))])
    out += ["Node shapes: amplitude (largest 1) at phase [deg], direction signs applied",
            *_aligned(["node", "dir", "role", *[f"mode {m}" for m in modes]], rows)]
    return out


def _aligned(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)).rstrip()]
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() for r in rows]
    return lines
