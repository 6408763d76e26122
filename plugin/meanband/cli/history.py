"""``meanband history ...``: list, show, compare, export and prune stored runs."""

from __future__ import annotations

import argparse
import csv
import io
import json
import math
import os
import sys
from collections.abc import Callable, Sequence
from typing import Any

from meanband import defaults
from meanband.errors import TrialError
from meanband.report.tables import format_table
from meanband.store.database import store_location, where
from meanband.store.history import DEFAULT_STORE, HistoryStore, RunInfo, StoredCheck, StoreError
from meanband.units import format_number, format_value

__all__ = ["register"]

#: Exit status for a bad command line or a store that cannot be used.
USAGE_ERROR = 2
#: Exit status of ``history compare`` when some check regressed.
REGRESSION_FOUND = 1


def register(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add ``history`` and its subcommands to the ``meanband`` command."""
    history = subparsers.add_parser(
        "history", help="Stored runs: list, show, compare, export, trend, copy, prune, calibrate",
        description="Read and tidy the history store that --meanband-record writes.",
    )
    history.set_defaults(handler=lambda args: _usage(history))
    commands = history.add_subparsers(dest="history_command", metavar="SUBCOMMAND")

    listing = commands.add_parser("list", help="List stored runs, newest first")
    _store_option(listing)
    listing.set_defaults(handler=_guarded(_list))

    show = commands.add_parser("show", help="Show the checks of one run")
    show.add_argument("run", metavar="RUN", help=_RUN_HELP)
    _store_option(show)
    show.set_defaults(handler=_guarded(_show))

    compare = commands.add_parser(
        "compare", help="Compare run B with run A (A is the baseline)",
        description="Ratio interval of each check of RUN_B over the same check in RUN_A, and a "
        "verdict: regressed, no regression, or cannot tell yet. Exits 1 when a check regressed.",
    )
    compare.add_argument("run_a", metavar="RUN_A", help="The baseline run. " + _RUN_HELP)
    compare.add_argument("run_b", metavar="RUN_B", help="The run to judge. " + _RUN_HELP)
    compare.add_argument(
        "--max-increase", default=f"{defaults.MAX_INCREASE:.0%}",
        help="How much slower a timing may get before it counts as regressed (default 5%%)",
    )
    compare.add_argument(
        "--max-change", default=f"{defaults.MAX_CHANGE:.0%}",
        help="How far a measured value may move either way (default 5%%)",
    )
    compare.add_argument(
        "--confidence", type=float, default=defaults.CONFIDENCE,
        help=f"Confidence of the two-sided ratio interval (default {defaults.CONFIDENCE})",
    )
    _store_option(compare)
    compare.set_defaults(handler=_guarded(_compare))

    export = commands.add_parser("export", help="Write one run as JSON or CSV")
    export.add_argument("run", metavar="RUN", help=_RUN_HELP)
    export.add_argument("--format", choices=("json", "csv"), default="json", help="Output format")
    export.add_argument(
        "--output", "-o", metavar="FILE", default="-", help="Write here instead of standard output"
    )
    _store_option(export)
    export.set_defaults(handler=_guarded(_export))

    trend = commands.add_parser(
        "trend", help="Each check's run means over time, and where they changed",
        description="Run means with their intervals, oldest first, and change points in them "
        "found by PELT; each change point gets a permutation verdict that allows for the split "
        "having been chosen on the same data (see docs/history.md).",
    )
    trend.add_argument("--label", metavar="LABEL", default=None,
                       help="Only runs with this label (e.g. main)")
    trend.add_argument("--last", type=int, metavar="N", default=None,
                       help="Only the newest N runs (default all)")
    trend.add_argument("--check", metavar="TEXT", default=None,
                       help="Only checks whose node id or series contains TEXT")
    trend.add_argument("--alpha", type=float, default=0.05,
                       help="Chance of confirming a change that is not there, per check "
                       "(default 0.05)")
    trend.add_argument("--plots", metavar="DIR", default=None,
                       help="Also draw one trend picture per check into DIR")
    trend.add_argument("--plot-format", default="png", help="png, svg or png,svg (default png)")
    _store_option(trend)
    trend.set_defaults(handler=_guarded(_trend))

    copy = commands.add_parser(
        "copy", help="Copy runs from one store to another (file or PostgreSQL, either way)",
        description="Copy the runs of SRC into DST, oldest first, each with its checks and raw "
        "trials byte for byte, keeping label, time, commit and machine. Runs DST already holds "
        "are skipped, so the command can be run again.",
    )
    copy.add_argument("source", metavar="SRC", type=store_location,
                      help="The store to read: a file or a postgresql:// URL")
    copy.add_argument("target", metavar="DST", type=store_location,
                      help="The store to write (made if it does not exist)")
    copy.add_argument("--run", metavar="RUN", default=None,
                      help="Copy only this run. " + _RUN_HELP)
    copy.set_defaults(handler=_guarded(_copy))

    prune = commands.add_parser("prune", help="Delete all but the newest runs")
    prune.add_argument("--keep", type=int, required=True, metavar="N", help="How many runs to keep")
    _store_option(prune)
    prune.set_defaults(handler=_guarded(_prune))

    from meanband.cli.calibrate import register_calibrate

    register_calibrate(commands, _store_option, _guarded)


_RUN_HELP = "A run id (7 or #7), a label (newest run with it), or 'latest'."


def _store_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--store", metavar="PATH|URL", type=store_location, default=DEFAULT_STORE,
        help=f"The history store: a file, or a PostgreSQL URL (default {DEFAULT_STORE} in the "
        "current directory)",
    )


def _usage(parser: argparse.ArgumentParser) -> int:
    parser.print_help(sys.stderr)
    return USAGE_ERROR


def _guarded(command: Callable[[argparse.Namespace], int]) -> Callable[[argparse.Namespace], int]:
    """Report store and argument errors on stderr with exit status 2."""

    def run(args: argparse.Namespace) -> int:
        try:
            return command(args)
        except (StoreError, TrialError) as exc:
            print(f"meanband history: error: {exc}", file=sys.stderr)
            return USAGE_ERROR

    return run


# -- subcommands ---------------------------------------------------------------------------


def _list(args: argparse.Namespace) -> int:
    with HistoryStore(args.store, create=False, read_only=True) as store:
        runs = store.runs()
    if not runs:
        print(f"no runs in {where(args.store)}")
        return 0
    rows = [
        [
            str(run.id), run.label or "-", run.started, _short(run.commit), run.branch or "-",
            run.host, run.python, str(run.checks),
        ]
        for run in runs
    ]
    print(_table(["run", "label", "started", "commit", "branch", "host", "python", "checks"], rows))
    return 0


def _show(args: argparse.Namespace) -> int:
    with HistoryStore(args.store, create=False, read_only=True) as store:
        run = store.find_run(args.run)
        checks = store.checks(run.id)
    print(_run_heading(run))
    cpus = f", {run.cpus} CPUs" if run.cpus else ""
    print(f"machine {run.machine}{cpus}, {run.system}, meanband {run.meanband}")
    if not checks:
        print("(no checks recorded)")
        return 0
    rows = [
        [
            c.nodeid, c.series or "-", str(c.n), _value(c.mean, c.unit),
            _bounds(c), c.verdict or c.kind,
        ]
        for c in checks
    ]
    print(_table(["test", "series", "n", "mean", "interval", "verdict"], rows))
    return 0


def _compare(args: argparse.Namespace) -> int:
    from meanband.report.baseline import format_limit, format_ratio
    from meanband.stats.ratio import parse_fraction
    from meanband.stats.regression import REGRESSED, Limits, compare_check
    from meanband.stats.sample import check_confidence

    limits = Limits(
        max_increase=parse_fraction(args.max_increase, "--max-increase"),
        max_change=parse_fraction(args.max_change, "--max-change"),
    )
    confidence = check_confidence(args.confidence)
    with HistoryStore(args.store, create=False, read_only=True) as store:
        run_a, run_b = store.find_run(args.run_a), store.find_run(args.run_b)
        checks_a = {c.key: c for c in store.checks(run_a.id)}
        checks_b = {c.key: c for c in store.checks(run_b.id)}
    print(f"A (baseline): {_run_heading(run_a)}")
    print(f"B (judged):   {_run_heading(run_b)}")
    rows: list[list[str]] = []
    regressed = 0
    for key, b in checks_b.items():
        a = checks_a.get(key)
        if a is None:
            rows.append([b.nodeid, b.series or "-", "-", _value(b.mean, b.unit), "-", "-",
                         "only in B"])
            continue
        result = compare_check(
            b.values, a.values, unit=b.unit, source=b.source, baseline_unit=a.unit,
            baseline_run=f"run {run_a.id}", confidence=confidence, limits=limits,
        )
        if "ratio" not in result:
            rows.append([b.nodeid, b.series or "-", _value(a.mean, a.unit),
                         _value(b.mean, b.unit), "-", "-", f"{result['status']}: {result['reason']}"])
            continue
        regressed += result["status"] == REGRESSED
        rows.append([
            b.nodeid, b.series or "-", _value(a.mean, a.unit), _value(b.mean, b.unit),
            format_ratio(result["ratio"]), format_limit(result), result["status"],
        ])
    for key, a in checks_a.items():
        if key not in checks_b:
            rows.append([a.nodeid, a.series or "-", _value(a.mean, a.unit), "-", "-", "-",
                         "only in A"])
    level = f"{confidence:.0%}" if confidence * 100 == round(confidence * 100) else f"{confidence}"
    print(_table(["test", "series", "mean A", "mean B", f"B/A, {level} interval", "allowed",
                  "verdict"], rows))
    if regressed:
        print(f"{regressed} check(s) regressed from run {run_a.id} to run {run_b.id}")
        return REGRESSION_FOUND
    return 0


def _export(args: argparse.Namespace) -> int:
    with HistoryStore(args.store, create=False, read_only=True) as store:
        run = store.find_run(args.run)
        checks = store.checks(run.id)
    text = _as_json(run, checks) if args.format == "json" else _as_csv(run, checks)
    if args.output == "-":
        sys.stdout.write(text)
        return 0
    from meanband.store.atomic import write_atomic

    try:
        write_atomic(args.output, text)
    except OSError as exc:
        reason = os.strerror(exc.errno) if exc.errno else str(exc)
        raise StoreError(f"cannot write {args.output}: {reason}; choose a writable path with "
                         "--output") from exc
    print(f"wrote run {run.id} ({len(checks)} checks) to {args.output}")
    return 0


def _trend(args: argparse.Namespace) -> int:
    from meanband.report.trend import build_trends, trend_lines, write_trend_plots
    if not 0.0 < args.alpha < 1.0:
        raise TrialError(f"--alpha must lie between 0 and 1, got {args.alpha}")
    if args.last is not None and args.last < 1:
        raise StoreError(f"--last must be 1 or more, got {args.last}")
    with HistoryStore(args.store, create=False, read_only=True) as store:
        runs = [r for r in store.runs() if args.label is None or r.label == args.label]
        if args.last is not None:
            runs = runs[:args.last]
        history = [(run, store.checks(run.id)) for run in reversed(runs)]
    if not runs:
        which = f" labelled {args.label!r}" if args.label is not None else ""
        print(f"no runs{which} in {where(args.store)}")
        return 0
    if args.check:
        history = [(run, [c for c in checks if args.check in c.nodeid or args.check in c.series])
                   for run, checks in history]
    trends = build_trends(history, alpha=args.alpha)
    if not trends:
        print(f"no check with trials in the {len(runs)} run(s) chosen")
        return 0
    for trend in trends:
        print("\n".join(trend_lines(trend)))
    if args.plots:
        from meanband.errors import ReportError

        try:
            written = write_trend_plots(trends, args.plots, formats=args.plot_format)
        except (ReportError, OSError) as exc:
            raise StoreError(f"cannot draw the trend pictures: {exc}") from exc
        print(f"wrote {len(written)} picture(s) to {args.plots}")
    return 0


def _copy(args: argparse.Namespace) -> int:
    from meanband.store.transfer import copy_runs

    with HistoryStore(args.source, create=False, read_only=True) as source, \
            HistoryStore(args.target) as target:
        result = copy_runs(source, target, args.run)
    copied = ", ".join(f"{a}->{b}" for a, b in result.copied) or "none"
    print(f"copied {len(result.copied)} run(s) from {where(args.source)} to "
          f"{where(args.target)} (run ids {copied})")
    if result.already_there:
        print(f"{len(result.already_there)} run(s) were already there and were skipped")
    if result.floors:
        print(f"copied {result.floors} measured noise floor(s)")
    return 0


def _prune(args: argparse.Namespace) -> int:
    with HistoryStore(args.store, create=False) as store:
        deleted = store.prune(args.keep)
        left = len(store.runs())
    print(f"deleted {deleted} run(s) from {where(args.store)}; {left} kept")
    return 0


# -- output --------------------------------------------------------------------------------


def _as_json(run: RunInfo, checks: Sequence[StoredCheck]) -> str:
    """The run and every check with its raw trials. Non-finite numbers become the strings
    "inf", "-inf" and "nan", so the output is strict JSON."""
    document = {
        "run": run.to_dict(),
        "checks": [
            {**c.row, "values": c.values.tolist(), "warmup": c.warmup.tolist()} for c in checks
        ],
    }
    return json.dumps(_strict(document), indent=2, allow_nan=False) + "\n"


def _strict(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if isinstance(value, dict):
        return {k: _strict(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_strict(v) for v in value]
    return value


_CSV_COLUMNS = ["run", "nodeid", "series", "kind", "unit", "n", "mean", "low", "high", "verdict"]


def _as_csv(run: RunInfo, checks: Sequence[StoredCheck]) -> str:
    """One line per check: its summary (raw trials are in the JSON export)."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(_CSV_COLUMNS)
    for c in checks:
        writer.writerow([
            run.id, c.nodeid, c.series, c.kind, c.unit or "", c.n, repr(c.mean),
            "" if c.low is None else repr(c.low), "" if c.high is None else repr(c.high),
            c.verdict or "",
        ])
    return out.getvalue()


def _run_heading(run: RunInfo) -> str:
    where = f"commit {_short(run.commit)}" + (f" on {run.branch}" if run.branch else "")
    if run.dirty:
        where += " (uncommitted changes)"
    label = f" '{run.label}'" if run.label else ""
    return f"run {run.id}{label}, {run.started}, {where}, {run.host}, {run.python}"


def _short(commit: str | None) -> str:
    return commit[:10] if commit else "-"


def _value(value: float, unit: str | None) -> str:
    return format_value(value, unit) if math.isfinite(value) else format_number(value)


def _bounds(check: StoredCheck) -> str:
    """The interval as the summary writes it: ``<= 3.856 µs`` for an upper bound alone."""
    if check.low is None and check.high is None:
        return "-"
    if check.low is None:
        return f"<= {_value(check.high, check.unit)}"  # type: ignore[arg-type]
    if check.high is None:
        return f">= {_value(check.low, check.unit)}"
    return f"[{_value(check.low, check.unit)}, {_value(check.high, check.unit)}]"


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    """Left-aligned columns separated by two spaces, with a rule under the header."""
    return "\n".join(format_table(headers, rows, rule=True))
