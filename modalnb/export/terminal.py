"""The modal table as aligned text for the terminal (the CLI's printout)."""

from __future__ import annotations

import math

import xarray as xr

from ._aside import ASIDE_TITLE, aside_rows
from ._rows import _value

__all__ = ["format_modal_table"]


def format_modal_table(result: xr.Dataset) -> str:
    """The modal table as aligned text with units in the header (for the terminal).

    When the fit set poles aside (residual terms, not modes), a second table
    "Poles set aside (not modes)" follows with the reason for each. A table with shapes
    over nodes (roving hammer, several setups) is followed by them: per mode the modal
    mass and phase collinearity, per node amplitude and phase of every mode.

    Examples
    --------
    >>> import xarray as xr
    >>> ds = xr.Dataset({"frequency_hz": ("mode", [12.5]), "frequency_hz_std": ("mode", [0.01]),
    ...                  "damping_ratio": ("mode", [0.012]), "damping_ratio_std": ("mode", [0.0004]),
    ...                  "regime": ("mode", ["underdamped"]), "status": ("mode", ["ok"])},
    ...                 coords={"mode": [1]})
    >>> print(format_modal_table(ds).splitlines()[0])
    mode  f_n [Hz]  ± [Hz]  zeta [%]  ± [%]  Q [-]  regime       status
    """
    header = ["mode", "f_n [Hz]", "± [Hz]", "zeta [%]", "± [%]", "Q [-]", "regime", "status"]
    rows = []
    for k in range(result.sizes.get("mode", 0)):
        def g(name: str, scale: float = 1.0, fmt: str = "{:.4g}", k: int = k) -> str:
            if name not in result:
                return "-"
            v = _value(result[name].values[k])
            if isinstance(v, float):
                return "nan" if math.isnan(v) else fmt.format(v * scale)
            return str(v)

        q = "-"
        if "damping_ratio" in result:
            z = float(result["damping_ratio"].values[k])
            q = f"{1 / (2 * z):.4g}" if z > 0 else "nan"
        if "q_factor" in result:
            q = g("q_factor")
        rows.append([
            str(_value(result["mode"].values[k])),
            g("frequency_hz", fmt="{:.6g}"),
            g("frequency_hz_std", fmt="{:.2g}"),
            g("damping_ratio", 100, "{:.4g}"),
            g("damping_ratio_std", 100, "{:.2g}"),
            q,
            g("regime"),
            g("status"),
        ])
    lines = _aligned(header, rows)
    aside = aside_rows(result)
    if aside:
        lines += ["", f"{ASIDE_TITLE}: residual terms kept in the model, left out of the table",
                  *_aligned(["pole", "f_n [Hz]", "± [Hz]", "zeta [%]", "reason"], [
                      [str(r["pole"]), _num(r["frequency_hz"], "{:.6g}"),
                       _num(r["frequency_hz_std"], "{:.2g}"),
                       _num(r["damping_ratio"], "{:.4g}", 100), str(r["reason"])]
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


def _num(v: object, fmt: str, scale: float = 1.0) -> str:
    if isinstance(v, (int, float)):
        return "nan" if math.isnan(float(v)) else fmt.format(float(v) * scale)
    return str(v)


def _aligned(header: list[str], rows: list[list[str]]) -> list[str]:
    widths = [max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True)).rstrip()]
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() for r in rows]
    return lines
