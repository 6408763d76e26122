"""``meanband plan``: suggested trial counts from a stored run, without running the tests."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from meanband import defaults
from meanband.errors import TrialError
from meanband.store.database import store_location

__all__ = [
    "add_max_bytes", "load_rows", "register", "rows_from_file", "rows_from_store", "stops_from_store",
]

#: Exit status for a bad command line, or a store or file that cannot be used.
USAGE_ERROR = 2
#: Stored runs whose stops teach the cap of a check collected until decided.
LEARN_RUNS = 10

Row = dict[str, Any]


class SourceError(TrialError):
    """The rows cannot be read: the message names the file and what to do."""


def register(subparsers: argparse._SubParsersAction[argparse.ArgumentParser]) -> None:
    """Add ``plan`` to the ``meanband`` command."""
    plan = subparsers.add_parser(
        "plan", help="Suggested trial counts of a stored run, and the plan file",
        description="Print the trial count each check of a stored run needs to decide at the "
        "stated power, with the reason, from the history store (the newest run unless RUN is "
        "given) or from a file of result rows. With --write, also write them as a plan file "
        "for --meanband-plan.",
    )
    plan.add_argument(
        "run", metavar="RUN", nargs="?", default=None,
        help="A run id (7 or #7), a label (newest run with it), or 'latest' (the default)",
    )
    source = plan.add_mutually_exclusive_group()
    source.add_argument(
        "--store", metavar="PATH|URL", type=store_location, default=None,
        help="The history store: a file or a PostgreSQL URL (default "
        ".meanband/history.sqlite in the current directory)",
    )
    source.add_argument(
        "--rows", metavar="FILE", type=Path, default=None,
        help="Read result rows from a JSON file instead: a meanband JSON report, or a JSON "
        "list of rows as meanband's hooks see them",
    )
    plan.add_argument(
        "--power", type=float, default=None,
        help=f"Power of the suggested counts (default: each check's own setting, else "
        f"{defaults.POWER})",
    )
    add_max_bytes(plan)
    plan.add_argument("--write", metavar="PLAN", type=Path, default=None,
                      help="Also write the suggestions to this plan file (TOML)")
    plan.add_argument("--all", action="store_true",
                      help="List every check, also those whose count is about right")
    plan.add_argument(
        "--learn-runs", metavar="K", type=_runs, default=LEARN_RUNS,
        help="A check that stops when decided gets its cap (max_n) from where it stopped in "
        f"this run and the K - 1 runs before it in the store (default {LEARN_RUNS})",
    )
    plan.set_defaults(handler=_guarded(_plan))


def add_max_bytes(parser: argparse.ArgumentParser) -> None:
    """The ``--max-bytes`` option of a command that reads JSON files."""
    from meanband.store.reading import parse_size

    def size(text: str) -> int:
        try:
            return parse_size(text)
        except ValueError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None

    parser.add_argument(
        "--max-bytes", metavar="SIZE", type=size, default=None,
        help=f"Refuse input files larger than this: bytes, or with KiB, MiB, GiB (default "
        f"{defaults.MAX_READ_BYTES // 1024**2} MiB)",
    )


def _guarded(command: Callable[[argparse.Namespace], int]) -> Callable[[argparse.Namespace], int]:
    def run(args: argparse.Namespace) -> int:
        from meanband.store.history import StoreError
        from meanband.store.report_json import ReportError

        try:
            return command(args)
        except BrokenPipeError:
            raise  # the reader of the output went away: ``meanband.cli.main`` ends quietly
        except (TrialError, OSError, StoreError, ReportError) as exc:
            from meanband.store.atomic import write_error_words

            print(f"meanband plan: error: {write_error_words(exc)}", file=sys.stderr)
            return USAGE_ERROR

    return run


# -- reading rows --------------------------------------------------------------------------------


def rows_from_store(path: str | Path, run: str | None = None) -> tuple[list[Row], str]:
    """Rows of one stored run (newest when ``run`` is None) and a line naming that run.

    Each stored check's ``row`` holds the row without its trials, which come back from the
    store's float64 column as ``values``.
    """
    from meanband.store.database import is_database_url
    from meanband.store.history import HistoryStore

    if not is_database_url(path) and not Path(path).exists():
        raise SourceError(
            f"no history store at {path}; record runs with --meanband-record, point --store at "
            "the store, or read rows from a file with --rows FILE"
        )
    with HistoryStore(path, create=False, read_only=True) as store:
        info = store.find_run(run)
        rows = []
        for check in store.checks(info.id):
            row = dict(check.row)
            row.setdefault("nodeid", check.nodeid)
            row.setdefault("series", check.series)
            row["values"] = [float(v) for v in check.values]
            rows.append(row)
    label = f" '{info.label}'" if info.label else ""
    return rows, f"run #{info.id}{label} of {info.started} in {path}"


def rows_from_file(path: str | Path, run: str | None = None, *,
                   max_bytes: int | None = None) -> tuple[list[Row], str]:
    """Rows from a JSON file: a meanband JSON report, or a plain list of rows.

    A report is checked against its schema and decoded by
    ``report_json``. Rows of several runs (a merged report) carry ``"run"``; the last run is
    taken unless ``run`` names another (its index).
    """
    from meanband.store import report_json
    from meanband.store.reading import ReadError, loads_json, read_text

    try:
        document = loads_json(read_text(path, max_bytes=max_bytes), source=str(path))
    except ReadError as exc:
        raise SourceError(str(exc)) from None
    except FileNotFoundError:
        raise SourceError(f"no rows file at {path}") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise SourceError(f"cannot read {path}: {exc}") from None
    except json.JSONDecodeError as exc:
        raise SourceError(f"{path} is not JSON: {exc.msg} (line {exc.lineno}, column "
                          f"{exc.colno})") from None
    if isinstance(document, dict) and document.get("format") == report_json.FORMAT:
        report_json.validate_report(document, source=str(path))
        document = report_json.decode_rows(document["rows"])
    else:
        rows = document.get("rows") if isinstance(document, dict) else document
        if not isinstance(rows, list):
            raise SourceError(f"{path} holds no result rows: expected a meanband JSON report or "
                              "a JSON list of row objects")
        report_json.validate_rows(rows, source=str(path))
        document = rows
    rows = document
    tags = sorted({r["run"] for r in rows if isinstance(r.get("run"), int)})
    if tags:
        wanted = tags[-1] if run in (None, "", "latest") else _run_index(run, tags, path)
        rows = [r for r in rows if r.get("run") == wanted]
        return rows, f"run {wanted} of {path}"
    if run not in (None, "", "latest"):
        raise SourceError(f"{path} holds a single run; drop RUN ({run!r})")
    return rows, str(path)


def _run_index(run: str, tags: list[int], path: str | Path) -> int:
    text = run[1:] if run.startswith("#") else run
    if not text.isdigit() or int(text) not in tags:
        raise SourceError(f"{path} has runs {', '.join(map(str, tags))}; no run {run!r}")
    return int(text)


def _runs(text: str) -> int:
    if not text.strip().isdigit() or int(text) < 1:
        raise argparse.ArgumentTypeError(f"a whole number of runs >= 1 is needed, got {text!r}")
    return int(text)


def stops_from_store(path: str | Path, run: str | None, runs: int) -> dict[tuple[str, str], list[Any]]:
    """Where each check collected until decided stopped in the ``runs - 1`` stored runs before
    ``run`` (newest when None), oldest first, by (test id, series)."""
    from meanband.record.suggestion import stop_of_row
    from meanband.store.history import HistoryStore

    stops: dict[tuple[str, str], list[Any]] = {}
    with HistoryStore(path, create=False, read_only=True) as store:
        newest = store.find_run(run)
        older = [info for info in store.runs() if info.id < newest.id][: max(runs - 1, 0)]
        for info in reversed(older):
            for check in store.checks(info.id):
                if check.row.get("sequential") and check.row.get("decision"):
                    stops.setdefault(check.key, []).append(stop_of_row(check.row))
    return stops


def load_rows(args: argparse.Namespace) -> tuple[list[Row], str]:
    """Rows chosen by the command line: ``--rows FILE`` or the history store."""
    if args.rows is not None:
        return rows_from_file(args.rows, args.run, max_bytes=args.max_bytes)
    from meanband.store.history import DEFAULT_STORE

    return rows_from_store(args.store or DEFAULT_STORE, args.run)


# -- the command ---------------------------------------------------------------------------------


def _plan(args: argparse.Namespace) -> int:
    from meanband.record.suggestion import suggestion_for_row
    from meanband.report.rows import row_name
    from meanband.report.tables import format_table
    from meanband.stats.suggest import check_power
    from meanband.store.planfile import entries_from_rows, write_plan

    power = None if args.power is None else check_power(args.power, "--power")
    rows, where = load_rows(args)
    checks = [r for r in rows if r.get("kind") == "check" and r.get("decision")]
    earlier: dict[tuple[str, str], list[Any]] = {}
    if args.rows is None and any(r.get("sequential") for r in checks):
        from meanband.store.history import DEFAULT_STORE

        earlier = stops_from_store(args.store or DEFAULT_STORE, args.run, args.learn_runs)
    index = {id(row): number for number, row in enumerate(rows)}
    lines = []
    for row in sorted(checks, key=lambda r: (str(r.get("nodeid")), str(r.get("series") or ""))):
        try:
            key = (str(row.get("nodeid")), str(row.get("series") or ""))
            suggestion = suggestion_for_row(row, power=power, earlier=earlier.get(key, ()))
        except (KeyError, TypeError, AttributeError) as exc:
            # The schema check above catches malformed rows; this names any it lets through.
            raise SourceError(f"{where}: row {index[id(row)]} ({row.get('nodeid')}) cannot be "
                              f"planned: {type(exc).__name__} at {exc}") from None
        verdict, n = row["decision"]["verdict"], row["decision"]["interval"]["n"]
        row["suggestion"] = None if suggestion is None else suggestion.to_dict()
        if suggestion is None:
            if args.all or verdict == "FAIL":
                why = "more trials would not change the verdict"
                lines.append((row_name(row), str(n), "-", f"{verdict} at n={n}; {why}"))
            continue
        quiet = suggestion.direction == "keep" or (
            suggestion.direction == "auto" and verdict != "UNDECIDED"
            and suggestion.max_n is None)
        if quiet and not args.all:
            continue
        shown = "-" if suggestion.n is None else str(suggestion.n)
        if suggestion.max_n is not None:
            shown = f"max_n={suggestion.max_n}"
        lines.append((row_name(row), str(n), shown, suggestion.reason))

    powers = {power} if power is not None else {
        (r.get("settings") or {}).get("power", defaults.POWER) for r in checks}
    single = next(iter(powers)) if len(powers) == 1 else None
    stated = f"{single * 100:g}% power" if single is not None else "each check's power"
    count = f"{len(checks)} check{'' if len(checks) == 1 else 's'}"
    print(f"suggested trial counts ({stated}) from {where}: {count}")
    if lines:
        for line in format_table(("test", "n", "suggest", "reason"), lines, right={1, 2}):
            print(line)
    else:
        print("every check's count is about right" if checks else "the run holds no checks")
    if args.write is not None:
        entries = entries_from_rows(rows)
        written = write_plan(args.write, entries, power=single)
        print(f"plan written to {written} ({len(entries)} entr{'y' if len(entries) == 1 else 'ies'})")
    return 0
