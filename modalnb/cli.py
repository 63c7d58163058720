"""Command line: ``modalnb check``, ``modalnb demo``, ``modalnb bench``.

Bad input ends with a non-zero exit and exactly one line on stderr naming the file and
the problem (``--debug`` shows the traceback instead).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

__all__ = ["main"]

EXIT_BAD_INPUT = 2


def _reader_options(args: argparse.Namespace) -> dict[str, Any]:
    opts: dict[str, Any] = {}
    for name in ("units", "force_units", "delimiter", "decimal", "force_channel"):
        value = getattr(args, name, None)
        if value is not None:
            opts[name] = value
    if getattr(args, "calibration", None) is not None:
        cal = args.calibration
        opts["calibration"] = cal[0] if len(cal) == 1 else cal
    if getattr(args, "force_calibration", None) is not None:
        opts["force_calibration"] = args.force_calibration
    return opts


def _add_reader_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("records", nargs="+", help="record file(s): .nc, .csv, .wav, .npz; several files = one hit each")
    g = p.add_argument_group("reading options")
    g.add_argument("--units", help="response units (CSV, WAV), e.g. m/s^2")
    g.add_argument("--force-units", dest="force_units", help="force units (CSV, WAV), e.g. N")
    g.add_argument("--delimiter", help="CSV delimiter (default: detected)")
    g.add_argument("--decimal", choices=[".", ","], help="CSV decimal mark")
    g.add_argument("--calibration", type=float, nargs="+", help="WAV: response units at digital full scale (one value, or one per channel)")
    g.add_argument("--force-channel", dest="force_channel", type=int, help="WAV: index of the force channel")
    g.add_argument("--force-calibration", dest="force_calibration", type=float, help="WAV: force units at digital full scale")


def _open(args: argparse.Namespace):
    from .io import open_records

    paths = args.records
    target = paths[0] if len(paths) == 1 else list(paths)
    return open_records(target, **_reader_options(args))


def _cmd_check(args: argparse.Namespace) -> int:
    from .checks import check_hits, format_hit_report

    ds = _open(args)
    report = check_hits(ds)
    print(format_hit_report(report, source=", ".join(args.records)))
    return 0


def _cmd_demo(args: argparse.Namespace) -> int:
    from . import demo
    from .checks import check_hits, format_hit_report

    ds = demo.load_demo()
    out = Path(args.out) if args.out else None
    print("modalnb demo: the bundled example campaign (" + ds.attrs.get("title", "demo") + ")")
    report = check_hits(ds)
    print(format_hit_report(report, source="bundled demo campaign"))
    if out is not None:
        from .io import save_records

        out.mkdir(parents=True, exist_ok=True)
        save_records(ds, out / "records.nc")
        _atomic_text(out / "hit_report.txt", format_hit_report(report, source="bundled demo campaign") + "\n")
        print(f"wrote {out / 'records.nc'} and {out / 'hit_report.txt'}")
    return 0


def _atomic_text(path: Path, text: str) -> None:
    import os
    import tempfile

    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _cmd_bench(args: argparse.Namespace) -> int:
    from . import bench

    results = bench.run_bench(quick=args.quick)
    print(bench.format_bench(results))
    if args.json:
        bench.write_bench_json(results, args.json)
        print(f"wrote {args.json}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    """The ``modalnb`` argument parser."""
    from . import __version__

    p = argparse.ArgumentParser(
        prog="modalnb",
        description="Modal parameters from impact-hammer ring-down records. "
        "Results are estimates for engineering judgement, not a certification of safety.",
    )
    p.add_argument("--version", action="version", version=f"modalnb {__version__}")
    p.add_argument("--debug", action="store_true", help="show a full traceback on errors")
    sub = p.add_subparsers(dest="command", required=True)

    pc = sub.add_parser("check", help="check every hit (double hit, clipping, SNR, ...) and print the report")
    _add_reader_args(pc)
    pc.set_defaults(func=_cmd_check)

    pd = sub.add_parser("demo", help="run the main job on the bundled example campaign")
    pd.add_argument("--out", help="folder for the output files")
    pd.set_defaults(func=_cmd_demo)

    pb = sub.add_parser("bench", help="accuracy (vs the Cramér-Rao bound) and speed benchmark")
    pb.add_argument("--quick", action="store_true", help="few trials (a smoke run, under a minute)")
    pb.add_argument("--json", help="write the results as JSON to this file")
    pb.set_defaults(func=_cmd_bench)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``modalnb`` command.

    Examples
    --------
    >>> main(["--version"])  # doctest: +SKIP
    modalnb 0.1.0
    """
    from ._errors import ModalnbError

    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except (ModalnbError, FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        if args.debug:
            raise
        msg = str(exc)
        if isinstance(exc, OSError) and not isinstance(exc, ModalnbError) and exc.filename:
            msg = f"{exc.filename}: {exc.strerror or exc}"
        print(f"modalnb: error: {' '.join(msg.split())}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("modalnb: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
