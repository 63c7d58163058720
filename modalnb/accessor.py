"""The ``ds.modalnb`` accessor: convenience methods that only delegate to plain functions."""

from __future__ import annotations

from typing import Any

import xarray as xr

__all__ = ["ModalnbAccessor"]


@xr.register_dataset_accessor("modalnb")
class ModalnbAccessor:
    """Record-set helpers on any Dataset: ``ds.modalnb.validate()``, ``.check_hits()``...

    Examples
    --------
    >>> import numpy as np
    >>> import modalnb
    >>> ds = modalnb.records_from_arrays(np.zeros((1, 64)), 512.0)
    >>> ds.modalnb.sample_rate
    512.0
    """

    def __init__(self, ds: xr.Dataset):
        self._ds = ds

    def validate(self) -> xr.Dataset:
        """See :func:`modalnb.validate_records`."""
        from .records import validate_records

        return validate_records(self._ds)

    @property
    def sample_rate(self) -> float:
        """See :func:`modalnb.records.get_sample_rate`."""
        from .records import get_sample_rate

        return get_sample_rate(self._ds)

    def check_hits(self, **kwargs: Any) -> xr.Dataset:
        """See :func:`modalnb.check_hits`."""
        from .checks import check_hits

        return check_hits(self._ds, **kwargs)

    def save(self, path: Any) -> Any:
        """See :func:`modalnb.save_records`."""
        from .io import save_records

        return save_records(self._ds, path)

    def fit_modes(self, **kwargs: Any) -> xr.Dataset:
        """See :func:`modalnb.fit_modes`."""
        from .fitting import fit_modes

        return fit_modes(self._ds, **kwargs)
