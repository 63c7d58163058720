"""The noise-significance limit shared by the pencil stage and the refinement stage."""

from __future__ import annotations

import numpy as np


def significance_threshold(r: int) -> float:
    """Least energy / noise variance for a mode fitted to `r` signals (common practice).

    The energy a spurious mode takes from white noise is roughly chi-squared with 2r + 2
    degrees of freedom (mean 2r + 2, standard deviation 2 sqrt(r + 1)) plus a search gain;
    the limit ``2 r + 8 sqrt(2 r) + 30`` sits several standard deviations above it.

    Examples
    --------
    >>> round(float(significance_threshold(1)), 2)
    43.31
    """
    return 2.0 * r + 8.0 * np.sqrt(2.0 * r) + 30.0
