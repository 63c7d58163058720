"""Command line: ``modalnb check``, ``modalnb fit``, ``modalnb demo``, ``modalnb bench``.

Bad input ends with a non-zero exit and exactly one line on stderr naming the file and
the problem (``--debug`` shows the traceback instead).

Each command imports what it needs inside its function (``check`` never imports scipy,
lmfit, plotly or the benchmark), so a command's cold start pays only for its own work;
``python -X importtime -m modalnb.cli ...`` shows the bill.
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any

__all__ = ["main"]

EXIT_BAD_INPUT = 2


class _Parser(argparse.ArgumentParser):
    """argparse with a one-line error (no usage block), exit code 2."""

    def error(self, message: str) -> None:  # type: ignore[override]
        print(f"{self.prog}: error: {' '.join(message.split())} (see {self.prog} --help)",
              file=sys.stderr)
        sys.exit(EXIT_BAD_INPUT)


class _BadOption(Exception):
    """A command-line value that argparse cannot judge (printed as one line, exit 2)."""


def _check_out(out: Path) -> None:
    """Refuse an output folder that cannot be written, before any work."""
    if out.exists() and not out.is_dir():
        raise _BadOption(f"--out {out}: is an existing file, not a folder. Hint: give a folder "
                         "name (created if missing).")
    ancestor = out.parent if not out.exists() else out
    while not ancestor.exists() and ancestor != ancestor.parent:
        ancestor = ancestor.parent
    if not ancestor.is_dir():
        raise _BadOption(f"--out {out}: {ancestor} is a file, so the folder cannot be made there.")
    if not os.access(ancestor, os.W_OK | os.X_OK):
        raise _BadOption(f"--out {out}: cannot write in {ancestor} (no permission).")
    from ._files import check_output_folder

    check_output_folder(out)  # the writer's own rule (not the current folder, not a project)


def _thresholds_from_args(values: Sequence[str] | None) -> dict[str, float | int]:
    out: dict[str, float | int] = {}
    for item in values or ():
        name, sep, text = item.partition("=")
        if not sep or not name.strip():
            raise _BadOption(f"--threshold {item!r}: expected NAME=VALUE, e.g. clip_level=0.99.")
        try:
            value: float | int = int(text)
        except ValueError:
            try:
                value = float(text)
            except ValueError:
                raise _BadOption(f"--threshold {item!r}: {text!r} is not a number.") from None
        out[name.strip()] = value
    return out


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


def _add_fit_args(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("analysis choices (override the recipe)")
    g.add_argument("--band", nargs=2, type=float, metavar=("FMIN", "FMAX"), help="frequency band in Hz")
    g.add_argument("--window", nargs=2, type=float, metavar=("T0", "T1"), help="fit window, record times in s")
    g.add_argument("--modes", type=int, metavar="N", help="number of modes to keep")
    g.add_argument("--add-mode", dest="add_mode", type=float, action="append", metavar="HZ",
                   help="a mode the automatic search missed, near HZ (repeatable)")
    g.add_argument("--drop-mode", dest="drop_mode", type=float, action="append", metavar="HZ",
                   help="leave the fitted mode nearest HZ out of the table (repeatable)")
    g.add_argument("--accept-hit", dest="accept_hit", type=int, action="append", metavar="HIT",
                   help="use this hit whatever the hit checks say (repeatable)")
    g.add_argument("--reject-hit", dest="reject_hit", type=int, action="append", metavar="HIT",
                   help="leave this hit out (repeatable)")
    g.add_argument("--threshold", action="append", metavar="NAME=VALUE",
                   help="a hit-check threshold, e.g. clip_level=0.99 (repeatable; names in "
                   "`modalnb check` docs: help(modalnb.check_hits))")
    g.add_argument("--recipe", metavar="FILE", help="replay this recipe (JSON)")
    r = p.add_argument_group("report title block (kept in the recipe)")
    r.add_argument("--title", help="structure or test analysed, e.g. \"Bay 3 footbridge, deck\"")
    r.add_argument("--analyst", help="who analysed the records")
    r.add_argument("--notes", help="free notes shown in the report's title block")
    p.add_argument("--quiet", action="store_true", help="no progress messages")


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


class _Steps:
    """Progress feedback on stderr: each step's name, then its duration."""

    #: True while a step's line waits for its duration (an error starts a new line)
    line_open = False

    def __init__(self, quiet: bool = False):
        self.quiet = quiet
        self._t0: float | None = None

    def __call__(self, msg: str) -> None:
        import time

        now = time.perf_counter()
        if self._t0 is not None and not self.quiet:
            print(f" {now - self._t0:.1f} s", file=sys.stderr, flush=True)
        self._t0 = now
        if not self.quiet:
            print(f"modalnb: {msg}...", end="", file=sys.stderr, flush=True)
            _Steps.line_open = True

    def done(self) -> None:
        self("done")
        if not self.quiet:
            print("", file=sys.stderr, flush=True)
        _Steps.line_open = False


def _base_recipe(args: argparse.Namespace) -> Any:
    """The ``--recipe`` file read (and the options checked) before any records are read."""
    from .recipe import load_recipe

    _thresholds_from_args(getattr(args, "threshold", None))
    return load_recipe(args.recipe) if getattr(args, "recipe", None) else None


def _recipe_from_args(args: argparse.Namespace, records: Any, base: Any = None):
    from .pipeline import recipe_for

    changes: dict[str, Any] = {}
    if getattr(args, "band", None):
        changes["band"] = tuple(args.band)
    if getattr(args, "window", None):
        changes["window"] = tuple(args.window)
    if getattr(args, "modes", None) is not None:
        changes["n_modes"] = args.modes
    if getattr(args, "add_mode", None):
        changes["add_modes"] = sorted({*(base.add_modes if base else []), *args.add_mode})
    if getattr(args, "drop_mode", None):
        changes["drop_modes"] = sorted({*(base.drop_modes if base else []), *args.drop_mode})
    if getattr(args, "accept_hit", None) or getattr(args, "reject_hit", None):
        both = set(args.accept_hit or ()) & set(args.reject_hit or ())
        if both:
            raise _BadOption(f"hit {min(both)} is given to both --accept-hit and --reject-hit.")
        overrides = dict(base.hit_overrides if base else {})
        overrides.update({h: True for h in args.accept_hit or ()})
        overrides.update({h: False for h in args.reject_hit or ()})
        changes["hit_overrides"] = overrides
    if getattr(args, "threshold", None):
        changes["check_thresholds"] = {**(base.check_thresholds if base else {}),
                                       **_thresholds_from_args(args.threshold)}
    if getattr(args, "source", None):
        changes["source"] = args.source
    if getattr(args, "reference_channel", None):
        changes["reference_channels"] = list(args.reference_channel)
    for name in ("title", "analyst", "notes"):
        if getattr(args, name, None) is not None:
            changes[name] = getattr(args, name)
    recipe = recipe_for(records, base, **changes)
    if recipe.replayed_on_checksum:  # the recipe keeps its own checksum (provenance)
        print(
            f"modalnb: warning: {args.recipe} was made on other records (checksum differs); "
            "the table may differ from the original",
            file=sys.stderr,
        )
    return recipe


def _no_hits_message(exc: Any, source: str) -> str:
    """The every-hit-rejected error in command-line terms (options, not API arguments)."""
    from .checks import CHECKS

    what = ", ".join(f"{n}: {k} hit{'s' if k != 1 else ''}" for n, k in exc.rejected_by.items())
    ways = ["accept hits with --accept-hit HIT (repeatable)"]
    for check in sorted(CHECKS, key=lambda c: -exc.rejected_by.get(c.name, 0)):
        if check.name in exc.rejected_by and check.thresholds:
            t = check.thresholds[0]
            ways.append(f"loosen the {check.name} check with --threshold {t.name}=VALUE "
                        f"(now {t.default!r})")
            break
    if "the user's decision" in exc.rejected_by:
        ways.append("drop --reject-hit (or the recipe's hit_overrides)")
    return (f"{source}: all {exc.n_hits} hits are rejected ({what}); nothing to fit. Hint: "
            f"{'; or '.join(ways)}; `modalnb check {source}` shows each hit's reason.")


@contextmanager
def _named(source: str) -> Iterator[None]:
    """Errors of the analysis name the records they came from."""
    from ._errors import EstimationError, ModalnbError, NoAcceptedHitsError, RecipeError

    try:
        yield
    except NoAcceptedHitsError as exc:
        raise EstimationError(_no_hits_message(exc, source)) from exc
    except ModalnbError as exc:
        if source in str(exc) or isinstance(exc, RecipeError):  # a recipe error names its file
            raise
        # same class when it takes just a message (all but NoAcceptedHitsError)
        cls = type(exc) if type(exc).__init__ is ModalnbError.__init__ else ModalnbError
        raise cls(f"{source}: {exc}") from exc


def _fit_and_write(records: Any, recipe: Any, out: Path, steps: _Steps, title: str,
                   more: Any = None, post: Any = None, geometry: Any = None) -> Any:
    from .export import write_modal_table
    from .pipeline import run_recipe

    with _named(title.removeprefix("modalnb: ")), warnings.catch_warnings():
        # the CLI said it already, naming the recipe file (_recipe_from_args)
        from ._errors import OtherRecordsWarning

        warnings.simplefilter("ignore", OtherRecordsWarning)
        result, checks = run_recipe(records, recipe, progress=steps)
        if post is not None:
            result = post(result)
    from .export import write_report

    def report(path: Path) -> None:
        steps("writing the HTML report")
        write_report(records, result, checks, path, recipe=recipe, geometry=geometry)

    steps("writing the modal table")
    # one set: the report is written beside the table and the folder replaced as a whole
    extra = {"report.html": report, **(more(result, checks) if more else {})}
    write_modal_table(result, out, recipe=recipe, checks=checks, extra_files=extra,
                      records=records)  # frf.nc too when the records carry force
    steps.done()
    return result, checks


def _written(out: Path) -> str:
    """The files of the output set now in `out` (frf.nc only when the records carry force)."""
    from ._files import OUTPUT_FILES

    return ", ".join(n for n in OUTPUT_FILES if (out / n).is_file())


def _cmd_fit(args: argparse.Namespace) -> int:
    from .export import CAUTION, format_modal_table

    out = Path(args.out)
    _check_out(out)
    base = _base_recipe(args)
    steps = _Steps(args.quiet)
    steps("reading records")
    post = None
    if getattr(args, "setups", False):
        ds, post = _open_setups(args, base)
    else:
        if getattr(args, "reference_channel", None):
            raise _BadOption("--reference-channel needs --setups (several setups to glue).")
        ds = _open(args)
    args.source = ", ".join(args.records)
    with _named(args.source):
        recipe = _recipe_from_args(args, ds, base)
    result, _ = _fit_and_write(ds, recipe, out, steps, title=f"modalnb: {args.source}",
                               post=post)
    print(format_modal_table(result))
    print(f"wrote {_written(out)} to {out}")
    print(CAUTION)
    return 0


def _open_setups(args: argparse.Namespace, base: Any = None) -> tuple[Any, Any]:
    """The setups of ``fit --setups`` as one record set, and the gluing step after the fit."""
    from .io import open_records
    from .setups import combine_setups, read_setup_manifest, setup_node_shapes

    paths = list(args.records)
    if len(paths) == 1 and paths[0].lower().endswith(".csv"):
        listed = read_setup_manifest(paths[0])
        names = [n for n, _ in listed]
        files = [str(p) for _, p in listed]
    else:
        names = [Path(p).stem for p in paths]
        if len(set(names)) != len(names):
            names = [f"setup{i + 1}" for i in range(len(paths))]
        files = paths
    sets = []
    for f in files:
        with _named(f):
            sets.append(open_records(f, **_reader_options(args)))
    combined = combine_setups(sets, names=names)
    refs = getattr(args, "reference_channel", None) or (base.reference_channels if base else None)

    def post(result: Any) -> Any:
        return setup_node_shapes(result, combined, reference_channels=refs)

    from .setups import _check_glue, _meta_of, _reference_keys

    meta = _meta_of(combined)
    _check_glue(meta, _reference_keys(meta, refs))  # before the fit: fail fast
    return combined, post


def _cmd_demo(args: argparse.Namespace) -> int:
    from . import demo
    from .checks import format_hit_report
    from .export import CAUTION, format_modal_table

    _check_out(Path(args.out))
    base = _base_recipe(args)
    steps = _Steps(args.quiet)
    steps("loading the bundled demo campaign")
    ds = demo.load_demo()
    truth = demo.load_demo_truth()
    args.source = "bundled demo campaign"
    recipe = _recipe_from_args(args, ds, base)
    out = Path(args.out)
    result, checks = _fit_and_write(ds, recipe, out, steps, title="modalnb demo campaign")
    print(f"modalnb demo: {ds.attrs.get('title', 'demo campaign')}")
    print(format_hit_report(checks, source="bundled demo campaign"))
    print()
    print("Modal table")
    print(format_modal_table(result))
    print()
    print(_truth_comparison(result, truth))
    print(f"wrote {_written(out)} to {out}")
    print(CAUTION)
    return 0


def _truth_comparison(result: Any, truth: dict) -> str:
    """The demo's true modal parameters next to the estimates (nearest in frequency)."""
    import math

    from .export._cells import damping_cell, number_cell, pm_cell
    from .export.terminal import _aligned

    rows = []
    est_f = [float(v) for v in result["frequency_hz"].values]
    for k, m in enumerate(truth.get("modes", []), start=1):
        f_true, z_true = float(m["frequency_hz"]), float(m["damping_ratio"])
        j = min(range(len(est_f)), key=lambda i: abs(est_f[i] - f_true)) if est_f else None
        if j is None or abs(est_f[j] - f_true) > 0.05 * f_true:
            rows.append([str(k), number_cell(f_true, "frequency_hz"), "not found", "",
                         damping_cell(z_true), "", ""])
            continue
        f, fs = est_f[j], float(result["frequency_hz_std"].values[j])
        z, zs = float(result["damping_ratio"].values[j]), float(result["damping_ratio_std"].values[j])
        ef = (f - f_true) / fs if fs > 0 else math.nan
        ez = (z - z_true) / zs if zs > 0 else math.nan
        rows.append([str(k), number_cell(f_true, "frequency_hz"), pm_cell(f, fs, "Hz"), f"({ef:+.1f})",
                     damping_cell(z_true), pm_cell(z, zs, "%", scale=100), f"({ez:+.1f})"])
    lines = ["Compared with the demo's true values (generated physics):",
             *_aligned(["mode", "true f_n [Hz]", "estimate [Hz]", "(err/u)", "true damping [%]",
                        "estimate [%]", "(err/u)"], rows)]
    return "\n".join(lines)


def _cmd_bench(args: argparse.Namespace) -> int:
    from tqdm.std import tqdm

    from .testing import bench

    bar = tqdm(total=0, desc="modalnb bench", unit="case", file=sys.stderr, leave=False,
               disable=not sys.stderr.isatty())
    last = [""]

    def progress(done: int, total: int, label: str) -> None:
        bar.total = total
        bar.n = done
        bar.set_postfix_str(label, refresh=True)
        # not a terminal (a CI log): a line when the step changes and every 5 %
        if bar.disable and (label != last[0] or done % max(total // 20, 1) == 0 or done == total):
            print(f"modalnb bench: {done}/{total} {label}", file=sys.stderr, flush=True)
            last[0] = label

    try:
        results = bench.run_bench(quick=args.quick, trials=args.trials, progress=progress,
                                  suite_trials=args.suite_trials)
    finally:
        bar.close()
    print(bench.format_bench(results))
    if args.json:
        bench.write_bench_json(results, args.json)
        print(f"wrote {args.json}")
    return 0


# --- modalnb campaign (test campaigns: many record sets, one recipe) ----------------------
def _add_campaign_parser(sub: Any, demo_parser: argparse.ArgumentParser,
                         bench_parser: argparse.ArgumentParser) -> None:
    pc = sub.add_parser("campaign", help="fit every record set of a manifest with one recipe and "
                        "track each mode across the sets (dask)")
    pc.add_argument("manifest", help="CSV: columns set, records (path relative to the manifest), then labels")
    pc.add_argument("--out", required=True, help="output folder (created, or resumed)")
    pc.add_argument("--recipe", metavar="FILE", help="one recipe (JSON) for every set")
    pc.add_argument("--reference", metavar="TABLE", help="modal table of `modalnb fit` (modes.nc or its "
                    "folder); default the first set that fits")
    pc.add_argument("--tolerance", type=float, metavar="PCT", help="production check: every reference "
                    "mode within PCT percent of the reference")
    pc.add_argument("--hit-overrides", dest="hit_overrides", metavar="FILE", help="CSV set,hit,accepted")
    pc.add_argument("--workers", type=int, metavar="N", help="local worker processes (default: CPU "
                    "count; 0 = no dask, one set after the other)")
    pc.add_argument("--scheduler", metavar="ADDRESS", help="an existing dask scheduler (tcp://host:8786)")
    pc.add_argument("--quiet", action="store_true", help="no progress bar")
    pc.set_defaults(func=_cmd_campaign)
    demo_parser.add_argument("--campaign", action="store_true", help="the campaign demo instead: 40 "
                             "generated cast brackets, a few cracked (modalnb campaign on them; "
                             "default --out modalnb-campaign-demo)")
    demo_parser.set_defaults(func=_cmd_demo_or_campaign)
    bench_parser.add_argument("--campaign", action="store_true", help="the test-campaign scale figures "
                              "instead (2 workers vs 1, overhead per set, 1 to 1000 sets; several minutes)")
    bench_parser.set_defaults(func=_cmd_bench_or_campaign)


def _cmd_bench_or_campaign(args: argparse.Namespace) -> int:
    if not args.campaign:
        return _cmd_bench(args)
    from .testing import bench_campaign

    quick = args.quick
    results = bench_campaign.run_campaign_bench(
        n_sets=8 if quick else 40, sizes=(1, 5, 10) if quick else (1, 10, 100, 1000),
        progress=lambda msg: print(f"modalnb bench: {msg}", file=sys.stderr, flush=True))
    print(bench_campaign.format_campaign_bench(results))
    if args.json:
        import json

        from ._files import atomic_write_text

        atomic_write_text(args.json, json.dumps(results, indent=2) + "\n")
        print(f"wrote {args.json}")
    return 0


def _campaign_summary(ds: Any, out: Path) -> str:
    status = [str(s) for s in ds["set_status"].values]
    verdict = [str(v) for v in ds["verdict"].values]
    sets = [str(s) for s in ds["set"].values]
    lines = [f"{len(sets)} sets: {status.count('ok')} fitted, {len(sets) - status.count('ok')} failed; "
             f"reference: {ds.attrs.get('reference', '')}"]
    for s, st, v in zip(sets, status, verdict, strict=True):
        if st != "ok" or v.startswith("fail"):
            lines.append(f"  {s}: {st if st != 'ok' else v}")
    lines.append(f"wrote tracked_modes.csv, sets.csv, campaign.nc, campaign_recipe.json, campaign.html, "
                 f"sets/ to {out}")
    return "\n".join(lines)


def _cmd_campaign(args: argparse.Namespace) -> int:
    from .campaign import fit_campaign
    from .export import CAUTION

    out = Path(args.out)
    ds = fit_campaign(args.manifest, recipe=args.recipe, reference=args.reference,
                      tolerance=args.tolerance, out=out, workers=args.workers,
                      scheduler=args.scheduler, progress=not args.quiet,
                      hit_overrides=args.hit_overrides)
    print(_campaign_summary(ds, out))
    print(CAUTION)
    return 0 if all(str(s) == "ok" for s in ds["set_status"].values) else 1


def _cmd_demo_roving(args: argparse.Namespace) -> int:
    """``modalnb demo --roving``: the roving-hammer test of a welded frame, generated, fitted,
    with the moving shape view on its geometry table and the FE truth beside it."""
    import json

    from .demo import write_roving_demo
    from .export import CAUTION, format_modal_table
    from .export.shape_view import SHAPE_VIEW_FILE, shape_view_html
    from .geometry import read_geometry
    from .io import open_records

    out = Path("modalnb-roving-demo" if args.out == "modalnb-demo" else args.out)
    _check_out(out)
    base = _base_recipe(args)
    steps = _Steps(args.quiet)
    steps("generating the roving-hammer test of a welded frame (75 hits)")
    paths = write_roving_demo(out / "roving-data")
    ds = open_records(paths["records"])
    truth = json.loads(paths["truth"].read_text(encoding="utf-8"))
    geometry = read_geometry(paths["nodes"], paths["lines"])
    args.source = "roving-hammer demo (generated)"
    recipe = _recipe_from_args(args, ds, base)

    def views(result: Any, checks: Any) -> dict[str, Any]:
        def write(path: Path) -> None:
            steps("writing the moving shape view")
            path.write_text(shape_view_html(ds, result, geometry, title="modalnb roving demo: mode "
                                            "shapes on the frame"), encoding="utf-8")
        return {SHAPE_VIEW_FILE: write}

    result, checks = _fit_and_write(ds, recipe, out, steps, title="modalnb roving-hammer demo",
                                    more=views, geometry=geometry)
    rejected = [f"hit {int(h)} ({r})" for h, a, r in zip(
        result["hit"].values, result["hit_accepted"].values, result["hit_reason"].values, strict=True)
        if not a]
    print(f"modalnb demo: {ds.attrs.get('title', 'roving-hammer demo')}")
    print(f"{int(result['hit_accepted'].values.sum())} of {ds.sizes['hit']} hits used; left out: "
          f"{', '.join(rejected) or 'none'}")
    print()
    print("Modal table")
    print(format_modal_table(result))
    print()
    print(_truth_comparison(result, truth).replace("generated physics", "finite-element model, "
                                                   "scipy.linalg.eigh"))
    print(f"wrote modes.csv, shapes.csv, hits.csv, poles_set_aside.csv, modes.nc, modes.json, "
          f"recipe.json, report.html, {SHAPE_VIEW_FILE} to {out}")
    print(f"the generated test (records, FE truth, geometry table {paths['nodes'].name} + "
          f"{paths['lines'].name}) is in {out / 'roving-data'}")
    print(CAUTION)
    return 0


def _cmd_demo_or_campaign(args: argparse.Namespace) -> int:
    if getattr(args, "roving", False):
        if args.campaign:
            raise _BadOption("give --roving or --campaign, not both.")
        return _cmd_demo_roving(args)
    if not args.campaign:
        return _cmd_demo(args)
    import json

    from .campaign import fit_campaign
    from .demo import production_campaign
    from .export import CAUTION

    out = Path("modalnb-campaign-demo" if args.out == "modalnb-demo" else args.out)
    if not args.quiet:
        print("modalnb demo: generating 40 cast brackets (a few cracked)...", file=sys.stderr)
    manifest = production_campaign(out / "parts-data")
    ds = fit_campaign(manifest, tolerance=3.0, out=out, progress=not args.quiet)
    truth = json.loads((out / "parts-data" / "truth.json").read_text(encoding="utf-8"))
    cracked = sorted(k for k, v in truth["parts"].items() if v["cracked"])
    flagged = sorted(str(s) for s, v in zip(ds["set"].values, ds["verdict"].values, strict=True)
                     if str(v).startswith("fail"))
    print("modalnb demo: end-of-line tap test of 40 cast brackets, tolerance 3 % on every mode")
    print(_campaign_summary(ds, out))
    print(f"cracked parts (the generator's truth): {', '.join(cracked)}")
    print(f"parts flagged by the verdict:          {', '.join(flagged) or 'none'}")
    print(CAUTION)
    return 0 if all(str(s) == "ok" for s in ds["set_status"].values) else 1


def build_parser() -> argparse.ArgumentParser:
    """The ``modalnb`` argument parser."""
    from . import __version__

    p = _Parser(
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

    pf = sub.add_parser("fit", help="hit checks, mode fit, modal table files and HTML report")
    _add_reader_args(pf)
    _add_fit_args(pf)
    pf.add_argument("--out", required=True, help="output folder (created or updated)")
    gs = pf.add_argument_group("several setups (roving sensors)")
    gs.add_argument("--setups", action="store_true",
                    help="the record files are setups, one record set each (or one CSV setup "
                         "manifest: columns setup,records): one fit with poles shared over "
                         "every setup, shapes glued through the reference sensors")
    gs.add_argument("--reference-channel", dest="reference_channel", action="append",
                    metavar="NAME", help="a reference sensor's channel name (repeat for "
                    "several; default: every node and direction sensed in more than one setup)")
    pf.set_defaults(func=_cmd_fit)

    pd = sub.add_parser("demo", help="run the main job on the bundled example campaign")
    pd.add_argument("--out", default="modalnb-demo", help="output folder (default: modalnb-demo)")
    pd.add_argument("--roving", action="store_true", help="the roving-hammer demo instead: a welded "
                    "frame hit at 25 nodes (75 hits, two fixed accelerometers), its finite-element "
                    "truth and the moving shape view (default --out modalnb-roving-demo)")
    _add_fit_args(pd)
    pd.set_defaults(func=_cmd_demo)

    pb = sub.add_parser("bench", help="accuracy (vs the Cramér-Rao bound) and a suite of generated "
                        "campaigns (speed, refit, accuracy, mode list)")
    pb.add_argument("--quick", action="store_true",
                    help="few trials and three campaigns (a CI smoke run, about a minute)")
    pb.add_argument("--json", help="write the results as JSON to this file")
    pb.add_argument("--trials", type=int, default=None,
                    help="noise realisations per accuracy case (default 200, or 12 with --quick)")
    pb.add_argument("--suite-trials", dest="suite_trials", type=int, default=None,
                    help="noise realisations per generated campaign (default 2, or 1 with --quick)")
    pb.set_defaults(func=_cmd_bench)
    _add_campaign_parser(sub, pd, pb)
    return p


def _term_as_interrupt() -> Any:
    """Turn SIGTERM into KeyboardInterrupt (as Ctrl-C), so a terminated run cleans up its
    staging folder; only where SIGTERM still has its default action (main thread).
    Returns a function that puts the default back."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread() \
            or signal.getsignal(signal.SIGTERM) is not signal.SIG_DFL:
        return lambda: None

    def interrupt(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    signal.signal(signal.SIGTERM, interrupt)
    return lambda: signal.signal(signal.SIGTERM, signal.SIG_DFL)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``modalnb`` command.

    Examples
    --------
    >>> main(["--version"])  # doctest: +SKIP
    modalnb 0.1.0
    """
    from ._errors import ModalnbError, ModalnbWarning

    parser = build_parser()
    args = parser.parse_args(argv)
    restore = _term_as_interrupt()
    shown = warnings.showwarning

    def one_line(message, category, filename, lineno, file=None, line=None):  # noqa: ANN001
        if isinstance(category, type) and issubclass(category, ModalnbWarning):
            _end_progress_line()
            print(f"modalnb: warning: {' '.join(str(message).split())}", file=sys.stderr)
        else:
            shown(message, category, filename, lineno, file, line)

    warnings.showwarning = one_line
    try:
        return int(args.func(args) or 0)
    except (ModalnbError, FileNotFoundError, IsADirectoryError, PermissionError,
            _BadOption) as exc:
        if args.debug:
            raise
        msg = str(exc)
        if isinstance(exc, OSError) and not isinstance(exc, ModalnbError) and exc.filename:
            msg = f"{exc.filename}: {exc.strerror or exc}"
        _end_progress_line()
        print(f"modalnb: error: {' '.join(msg.split())}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        _end_progress_line()
        print("modalnb: interrupted", file=sys.stderr)
        return 130
    finally:
        restore()
        warnings.showwarning = shown


def _end_progress_line() -> None:
    if _Steps.line_open:
        print("", file=sys.stderr, flush=True)
        _Steps.line_open = False


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
