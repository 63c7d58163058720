"""The demo's files: writing the campaign (netCDF, truth JSON, hit 1 as CSV) and loading it.

The campaign is stored as 24-bit ADC codes (int32 with the LSB as ``scale_factor``), so
the netCDF file holds exactly the generator's quantised values.
"""

from __future__ import annotations

import argparse
import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._errors import ModalnbError
from .._files import atomic_write_text, atomic_write_with
from ..records import validate_records
from ._campaign import make_demo_campaign
from ._settings import CAMPAIGN_FILE, CSV_FILE, DEMO_SEED, DEMO_SETTINGS, TRUTH_FILE


def _encoding(ds: xr.Dataset) -> dict[str, dict[str, Any]]:
    bits = DEMO_SETTINGS.adc_bits
    enc = {}
    for var, fs_attr in (("response", "full_scale"), ("force", "force_full_scale")):
        lsb = float(ds.attrs[fs_attr]) / 2 ** (bits - 1)
        enc[var] = {
            "dtype": "int32",
            "scale_factor": lsb,
            "_FillValue": np.int32(-(2**31)),
            "zlib": True,
            "complevel": 6,
            "shuffle": True,
        }
    return enc


def _write_campaign(ds: xr.Dataset, path: Path) -> None:
    atomic_write_with(
        path,
        lambda p: ds.to_netcdf(p, engine="h5netcdf", encoding=_encoding(ds), invalid_netcdf=False),
    )


def _write_json(obj: dict[str, Any], path: Path) -> None:
    atomic_write_text(path, json.dumps(obj, indent=1) + "\n")


def _write_csv(ds: xr.Dataset, hit: int, path: Path) -> None:
    import csv

    one = ds.sel(hit=hit)
    names = ["time", "force", *[str(c) for c in ds["channel"].values]]
    cols = [one["time"].values, one["force"].values, *one["response"].values]

    def write(p: Path) -> None:
        with open(p, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(names)
            for row in zip(*cols, strict=True):
                w.writerow([f"{v:.10g}" for v in row])

    atomic_write_with(path, write)


def write_demo(
    folder: str | os.PathLike[str] | None,
    *,
    seed: int = DEMO_SEED,
    package_data: bool = True,
) -> list[Path]:
    """Generate the campaign and write it (netCDF4 + truth JSON) where needed.

    Writes, atomically, ``demo_campaign.nc``, ``demo_truth.json`` and ``demo_hit1.csv``
    (hit 1 as CSV: columns time, force, then one per channel) into `folder`, and, when
    `package_data` is true, the first two into the ``modalnb/data`` package folder.
    ``example_data/README.md`` is written by hand, not here.

    Parameters
    ----------
    folder : path or None
        Output folder (created if missing); None writes only the package data.
    seed : int
        Generator seed.
    package_data : bool
        Also refresh ``modalnb/data``.

    Returns
    -------
    list of Path
        Files written.

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as d:
    ...     sorted(p.name for p in write_demo(d, package_data=False))
    ['demo_campaign.nc', 'demo_hit1.csv', 'demo_truth.json']
    """
    ds, truth = make_demo_campaign(seed)
    written: list[Path] = []
    targets: list[Path] = []
    if folder is not None:
        targets.append(Path(folder))
    if package_data:
        targets.append(Path(__file__).resolve().parent.parent / "data")
    for target in targets:
        target.mkdir(parents=True, exist_ok=True)
        _write_campaign(ds, target / CAMPAIGN_FILE)
        _write_json(truth, target / TRUTH_FILE)
        written += [target / CAMPAIGN_FILE, target / TRUTH_FILE]
    if folder is not None:
        _write_csv(ds, 1, Path(folder) / CSV_FILE)
        written.append(Path(folder) / CSV_FILE)
    return written


def load_demo() -> xr.Dataset:
    """The shipped demo campaign (package data), loaded into memory and validated.

    Works from an installed wheel: the file is found with :mod:`importlib.resources`.

    Examples
    --------
    >>> ds = load_demo()
    >>> float(ds.attrs["sample_rate"])
    4096.0
    """
    from importlib.resources import as_file, files

    res = files("modalnb.data") / CAMPAIGN_FILE
    with as_file(res) as path:
        if not Path(path).is_file():
            raise ModalnbError(
                f"{path}: the demo campaign is missing from the package data. "
                "Hint: run `python -m modalnb.demo --write example_data/` or reinstall modalnb."
            )
        with xr.open_dataset(path, engine="h5netcdf") as ds:
            ds = ds.load()
    return validate_records(ds, source=str(path))


def load_demo_truth() -> dict[str, Any]:
    """True modal parameters of the shipped demo campaign (package data).

    Examples
    --------
    >>> truth = load_demo_truth()
    >>> [round(m["frequency_hz"]) for m in truth["modes"]]
    [33, 204, 572, 1122]
    """
    from importlib.resources import files

    res = files("modalnb.data") / TRUTH_FILE
    try:
        text = res.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ModalnbError(
            f"{TRUTH_FILE}: the demo truth is missing from the package data. "
            "Hint: run `python -m modalnb.demo --write example_data/` or reinstall modalnb."
        ) from None
    return json.loads(text)


def main(argv: Sequence[str] | None = None) -> int:
    """Command line: ``python -m modalnb.demo --write example_data/``.

    Examples
    --------
    >>> main(["--write", "example_data/"])  # doctest: +SKIP
    0
    """
    parser = argparse.ArgumentParser(
        prog="python -m modalnb.demo",
        description="Regenerate the demo campaign (package data and an example folder).",
    )
    parser.add_argument("--write", metavar="FOLDER", help="example folder to write into")
    parser.add_argument("--seed", type=int, default=DEMO_SEED, help="generator seed")
    parser.add_argument(
        "--no-package-data", action="store_true", help="do not refresh modalnb/data"
    )
    args = parser.parse_args(argv)
    if args.write is None and args.no_package_data:
        parser.error("nothing to write: give --write FOLDER or drop --no-package-data")
    for p in write_demo(args.write, seed=args.seed, package_data=not args.no_package_data):
        print(f"wrote {p} ({p.stat().st_size / 1e6:.2f} MB)")
    return 0
