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
from pathlib import Path
from typing import Any

from meanband import defaults
from meanband.errors import TrialError
from meanband.report.tables import format_table
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
        "history", help="Stored runs: list, show, compare, export, prune, calibrate",
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

    prune = commands.add_parser("prune", help="Delete all but the newest runs")
    prune.add_argument("--keep", type=int, required=True, metavar="N", help="How many runs to keep")
    _store_option(prune)
    prune.set_defaults(handler=_guarded(_prune))

    from meanband.cli.calibrate import register_calibrate

    register_calibrate(commands, _store_option, _guarded)


_RUN_HELP = "A run id (7 or #7), a label (newest run with it), or 'latest'."


def _store_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--store", metavar="PATH", type=Path, default=DEFAULT_STORE,
        help=f"The history store (default {DEFAULT_STORE} in the current directory)",
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
        print(f"no runs in {args.store}")
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


def _prune(args: argparse.Namespace) -> int:
    with HistoryStore(args.store, create=False) as store:
        deleted = store.prune(args.keep)
        left = len(store.runs())
    print(f"deleted {deleted} run(s) from {args.store}; {left} kept")
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
    if check.low is None and check.high is None:
        return "-"
    low = "-inf" if check.low is None else _value(check.low, check.unit)
    high = "inf" if check.high is None else _value(check.high, check.unit)
    return f"[{low}, {high}]"


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    """Left-aligned columns separated by two spaces, with a rule under the header."""
    return "\n".join(format_table(headers, rows, rule=True))
