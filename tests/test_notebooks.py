"""Every notebook in notebooks/ runs top to bottom with nbclient, without an error output.

The quickstart then the reproduce-from-recipe notebook run in one working folder, as a user
and then a colleague would. Each notebook gets its own kernel (a separate Python process),
so the colleague's replay shares nothing with the quickstart but the two files on disk (the
records and the autosaved recipe); its exported table must equal the quickstart's export
file by file. Committed notebooks carry no outputs.
"""

from __future__ import annotations

import csv
import re
from pathlib import Path

import h5py
import nbclient  # a test dependency: missing, this module fails (never skips)
import nbformat
import numpy as np

NOTEBOOKS = Path(__file__).resolve().parents[1] / "notebooks"
ORDER = ["quickstart.ipynb", "reproduce_from_recipe.ipynb"]


def _all() -> list[Path]:
    found = sorted(NOTEBOOKS.glob("*.ipynb"))
    return sorted(found, key=lambda p: ORDER.index(p.name) if p.name in ORDER else len(ORDER))


def test_every_notebook_is_known_and_cleared():
    names = [p.name for p in _all()]
    assert set(ORDER) <= set(names)
    for p in _all():
        nb = nbformat.read(p, as_version=4)
        for cell in nb.cells:
            if cell.cell_type == "code":
                assert cell.outputs == [] and cell.execution_count is None, f"{p.name}: outputs not cleared"


def _run(path: Path, cwd: Path) -> nbformat.NotebookNode:
    nb = nbformat.read(path, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(cwd)}})
    client.execute()
    return nb


def _text(nb: nbformat.NotebookNode) -> str:
    out = []
    for cell in nb.cells:
        for o in cell.get("outputs", []):
            assert o.get("output_type") != "error", f"error output: {o.get('ename')}: {o.get('evalue')}"
            if o.get("output_type") == "stream":
                assert o.get("name") != "stderr" or "Warning" not in o.get("text", ""), o.get("text")
                out.append(o.get("text", ""))
            elif "text/plain" in o.get("data", {}):
                out.append(o["data"]["text/plain"])
    return "".join(out)


def test_notebooks_run_in_order_and_reproduce(tmp_path):
    texts = {p.name: _text(_run(p, tmp_path)) for p in _all()}
    work = tmp_path / "modalnb-quickstart"
    assert (work / "demo_campaign.recipe.json").is_file()  # autosaved beside the records
    assert (work / "modal-table" / "modes.csv").is_file()
    # the notebook's own comparison ran against the quickstart's export, and said equal
    said = re.findall(r"^identical to (\S+) : (True|False)$", texts["reproduce_from_recipe.ipynb"], re.M)
    assert said == [("modalnb-quickstart/modal-table/modes.csv", "True")]

    # the colleague's files (a fresh kernel: another process, nothing shared, replaying the
    # saved records and recipe) equal the quickstart's export: CSV text character for
    # character, netCDF values to the last bit (read with h5py, not with the xarray writer)
    mine, theirs = work / "modal-table", tmp_path / "modalnb-reproduced"
    for name in ("modes.csv", "shapes.csv", "hits.csv"):
        assert (theirs / name).read_text(encoding="utf-8") == (mine / name).read_text(encoding="utf-8"), name
    assert len(rows(mine / "modes.csv")) >= 3  # the demo's modes, not an empty table
    a, b = _h5_arrays(mine / "modes.nc"), _h5_arrays(theirs / "modes.nc")
    assert sorted(a) == sorted(b) and "frequency_hz" in a
    for name in a:
        assert a[name].dtype == b[name].dtype, name
        if a[name].dtype.kind == "f":
            assert np.array_equal(a[name].view(np.uint8), b[name].view(np.uint8)), name  # bit for bit
        else:
            assert np.array_equal(a[name], b[name]), name


def rows(p: Path) -> list[dict[str, str]]:
    with open(p, newline="") as fh:  # stdlib csv reader
        return list(csv.DictReader(fh))


def _h5_arrays(path: Path) -> dict[str, np.ndarray]:
    out: dict[str, np.ndarray] = {}
    with h5py.File(path, "r") as f:
        f.visititems(lambda name, obj: out.__setitem__(name, obj[()]) if isinstance(obj, h5py.Dataset) else None)
    return {k: np.asarray(v) for k, v in out.items()}
