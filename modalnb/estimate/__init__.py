"""Estimation engine (headless): shared-pole modal fits of ring-down record sets.

This package is the bottom of the estimation stack: it imports nothing from the hit
checks, recipes, pipeline, notebook state, exports or widgets. Which entry point is for
whom:

* users: :func:`modalnb.fit_modes` (one scripted fit), :class:`modalnb.ModeFit` (the same
  table, kept for repeated refits: widgets, sliders) and :func:`modalnb.run_recipe`
  (reproducible replay of a saved recipe; the CLI's path). Those run the hit checks,
  this engine and the cross-checks, and attach the recipe that replays them
  (:mod:`modalnb.fitting`).
* the engine itself, for benchmarks and tests of the estimator: :class:`SharedPoleFit`
  (explicit hit decisions, no hit checks, no recipe);
* tools on a table: :func:`mac`, :func:`mac_matrix`, :func:`mpc` (shape comparison),
  :func:`cross_checks` / :func:`with_cross_checks` (log decrement, half-power and Hilbert
  damping beside each mode), :func:`model_traces` (the fitted model of every hit and
  channel, for plots), :func:`modal_conversions` (damping measures, stiffness, damping
  coefficient).
"""

from __future__ import annotations

from ._convert import modal_conversions
from ._fit import SharedPoleFit
from ._model import model_traces
from ._shapes import mac, mac_matrix, mpc
from ._xcheck import cross_checks, with_cross_checks

__all__ = ("SharedPoleFit", "cross_checks", "modal_conversions", "mac", "mac_matrix", "mpc",
           "model_traces", "with_cross_checks")
