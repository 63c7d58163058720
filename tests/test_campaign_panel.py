"""The campaign panel (issue 11 §3): the sets table, the tracked mode against a label, the
MAC matrix, and one set opened in the analysis desk with the campaign's recipe.

The desk's fit of a set is computed by another path (the notebook state,
:class:`modalnb.session.Analysis`) than the campaign's (``run_recipe`` in a worker); the
two must give the same table, and the tracked frequencies agree with the eig truth
(scipy.linalg.eig, tests/test_campaign.py ``part_truth``).
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

pytest.importorskip("ipywidgets")

from test_campaign import N_SAMPLES, part_truth  # noqa: E402

from modalnb import fit_campaign  # noqa: E402
from modalnb.demo import production_campaign  # noqa: E402
from modalnb.widgets.campaign import campaign_panel  # noqa: E402


def test_panel_shows_the_campaign_and_opens_a_set_with_its_recipe(tmp_path):
    manifest = production_campaign(tmp_path / "d", n_parts=3, cracked=[2], seed=13, n_samples=N_SAMPLES)
    ds = fit_campaign(manifest, workers=0, tolerance=3.0, out=tmp_path / "out",
                      hit_overrides={"P003": {1: False}})
    panel = campaign_panel(ds)
    html = panel.table.value
    assert "P002" in html and "fail: mode 1" in html
    panel.mode.value = 2
    y = np.asarray(panel.freq_fig.data[0].y, float)
    truth = [part_truth(13, p, cracked=(p == 2))[1] for p in (1, 2, 3)]
    np.testing.assert_allclose(y, truth, rtol=5e-4)  # mode 2 of each part vs scipy.linalg.eig
    assert list(panel.freq_fig.data[0].x) == [1.0, 2.0, 3.0]  # against part_number
    z = np.asarray(panel.mac_fig.data[0].z, float)
    assert z.shape == (3, 3) and np.nanmin(z) > 0.99
    desk = panel.open_set("P003")
    assert desk is not None and desk.analysis.recipe.hit_overrides == {1: False}
    with xr.open_dataset(tmp_path / "out" / "sets" / "P003" / "modes.nc", engine="h5netcdf") as ref:
        np.testing.assert_allclose(desk.analysis.result["frequency_hz"].values, ref["frequency_hz"].values,
                                   rtol=1e-9)
    assert panel.open_set("P001") is not None and "P001" in panel.message.value
