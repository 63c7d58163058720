"""Estimation engine (headless): shared-pole modal fits of ring-down record sets.

* :func:`fit_modes`, :class:`ModeFit`: natural frequencies, damping ratios, shapes and
  uncertainties (band-split matrix pencil + variable projection);
* :func:`mac`, :func:`mac_matrix`, :func:`mpc`: shape comparison;
* :func:`cross_checks`: log decrement, half-power and Hilbert damping beside each mode;
* :func:`model_traces`: the fitted model of every hit and channel, for plots;
* :func:`modal_conversions`: damping measures, stiffness and damping coefficient.
"""

from __future__ import annotations

from ._convert import modal_conversions
from ._fit import ModeFit, fit_modes
from ._model import model_traces
from ._shapes import mac, mac_matrix, mpc
from ._xcheck import cross_checks, with_cross_checks

__all__ = ("fit_modes", "cross_checks", "modal_conversions", "mac", "mac_matrix", "mpc", "ModeFit", "model_traces", "with_cross_checks")
