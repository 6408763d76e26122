"""The ``meanband merge`` and ``meanband report`` commands: one report from many, and its summary."""

from __future__ import annotations

import argparse
import os
import shutil
import sys
from typing import Any, TextIO

from meanband.errors import MeanbandError

__all__ = ["register", "run_merge", "run_report"]

#: Exit codes: like pytest, 1 means some check did not pass; 2 is bad input.
EXIT_OK, EXIT_CHECKS_FAILED, EXIT_BAD_INPUT = 0, 1, 2


def register(subparsers: Any) -> None:
    """Add the ``merge`` and ``report`` commands to the console's subparsers."""
    from meanband.cli.plan import add_max_bytes

    merge = subparsers.add_parser(
        "merge",
        help="combine the JSON reports of several shards into one",
        description="Combine JSON reports (from --meanband-report) of shards run on several "
        "machines into one report. A check found in more than one report is an error, "
        "unless --pool is given.",
    )
    merge.add_argument("reports", nargs="+", metavar="REPORT", help="JSON reports to combine")
    merge.add_argument("-o", "--output", required=True, metavar="PATH",
                       help="where to write the combined report")
    add_max_bytes(merge)
    merge.add_argument("--pool", action="store_true",
                       help="pool the trials of a check found in several reports and decide it "
                       "afresh from all of them (for repeated runs of the same tests)")
    merge.set_defaults(handler=run_merge)

    report = subparsers.add_parser(
        "report",
        help="print the summary of a JSON report; write its Markdown and plots",
        description="Print the terminal summary of a JSON report, exactly as the run printed "
        "it, and optionally write the Markdown summary and plots from it. Exits 1 when some "
        "check did not pass, so it can gate a build after a merge.",
    )
    report.add_argument("report", metavar="REPORT", help="a JSON report")
    add_max_bytes(report)
    report.add_argument("-v", "--verbose", action="count", default=0,
                        help="more detail (as pytest's -v)")
    report.add_argument("-q", "--quiet", action="count", default=0,
                        help="less detail (as pytest's -q)")
    report.add_argument("--markdown", metavar="PATH", help="write the Markdown summary to PATH")
    report.add_argument("--job-summary", action="store_true",
                        help="append the Markdown summary to the CI job-summary file")
    report.add_argument("--job-summary-var", metavar="NAME", default=None,
                        help="environment variable naming the job-summary file "
                        "(default: GITHUB_STEP_SUMMARY)")
    report.add_argument("--plots", metavar="DIR", help="draw the plots into DIR")
    report.add_argument("--plot-format", metavar="FORMATS", default=("png",), type=_formats,
                        help="png (default), svg, or png,svg")
    report.add_argument("--plot-checks", choices=("all", "failed", "none"), default="all",
                        help="which checks get a run chart, Q-Q plot and histogram: all "
                        "(default), failed (FAIL or UNDECIDED) or none")
    report.add_argument("--trend-store", metavar="PATH|URL", default=None,
                        help="with --plots: also draw each check's trend over the newest runs "
                        "of this history store (a file or a PostgreSQL URL)")
    report.add_argument("--trend-label", metavar="LABEL", default=None,
                        help="with --trend-store: only runs with this label")
    report.set_defaults(handler=run_report)


def _trend_plots(args: argparse.Namespace, rows: list[Any], out: TextIO) -> None:
    from meanband.report.trend import STORE_TREND_RUNS, store_trends, write_trend_plots
    from meanband.store.database import store_location, where

    location = store_location(args.trend_store)
    keys = [(str(r.get("nodeid", "")), str(r.get("series", ""))) for r in rows]
    trends = store_trends(location, keys, label=args.trend_label)
    written = write_trend_plots(trends, args.plots, formats=args.plot_format)
    print(f"wrote {len(written)} trend picture(s) from the newest {STORE_TREND_RUNS} runs of "
          f"{where(location)} to {args.plots}", file=out)


def _formats(text: str) -> tuple[str, ...]:
    from meanband.report.plots import check_formats
    from meanband.store.report_json import ReportError

    try:
        return check_formats(text)
    except ReportError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from exc


def _fail(command: str, message: object, err: TextIO) -> int:
    from meanband.store.atomic import write_error_words

    words = write_error_words(message) if isinstance(message, BaseException) else message
    print(f"meanband {command}: error: {words}", file=err)
    return EXIT_BAD_INPUT


def run_merge(args: argparse.Namespace, out: TextIO | None = None,
              err: TextIO | None = None) -> int:
    """``meanband merge A.json B.json ... -o ALL.json [--pool]``."""
    from meanband.report.merge import merge_reports
    from meanband.store.report_json import ReportError, load_report, write_report

    out, err = out or sys.stdout, err or sys.stderr
    try:
        loaded = [(name, load_report(name, max_bytes=args.max_bytes))
                  for name in args.reports]
        merged = merge_reports(loaded, pool=args.pool)
        path = write_report(merged, args.output)
    except BrokenPipeError:
        raise
    except (ReportError, OSError) as exc:
        return _fail("merge", exc, err)
    pooled = sum(1 for row in merged["rows"] if "pooled" in row)
    count = merged["totals"]
    print(f"merged {len(loaded)} reports into {path}: {count['rows']} rows, "
          f"{count['checks']} checks ({count['PASS']} PASS, {count['FAIL']} FAIL, "
          f"{count['UNDECIDED']} UNDECIDED)" + (f", {pooled} pooled" if pooled else ""), file=out)
    return EXIT_OK


def run_report(args: argparse.Namespace, out: TextIO | None = None,
               err: TextIO | None = None) -> int:
    """``meanband report ALL.json [-v] [--markdown PATH] [--plots DIR]``."""
    from meanband.report import markdown
    from meanband.report.terminal import format_summary
    from meanband.store.report_json import ReportError, load_report

    out, err = out or sys.stdout, err or sys.stderr
    try:
        report = load_report(args.report, max_bytes=args.max_bytes)
    except ReportError as exc:
        return _fail("report", exc, err)
    rows = report["rows"]
    # A terminal's width (or COLUMNS) is honoured; a pipe or a file gets lines as long as
    # their content.
    fitted = _is_terminal(out) or "COLUMNS" in os.environ
    width = shutil.get_terminal_size().columns if fitted else None
    for line in format_summary(rows, args.verbose - args.quiet, width):
        print(line, file=out)
    try:
        if args.markdown or args.job_summary:
            text = markdown.format_markdown(rows)
            if args.markdown:
                markdown.write_markdown(text, args.markdown)
                print(f"wrote Markdown summary {args.markdown}", file=out)
            if args.job_summary:
                variable = args.job_summary_var or markdown.DEFAULT_SUMMARY_VARIABLE
                path = markdown.append_job_summary(text, variable)
                print(f"appended the summary to {path} (from {variable})", file=out)
        if args.plots:
            from meanband.report import plots
            result = plots.write_plots(rows, args.plots, formats=args.plot_format,
                                       checks=args.plot_checks)
            print(f"wrote {len(result.written)} plot files to {args.plots}", file=out)
            for line in result.skipped_lines():
                print(line, file=err)
            if args.trend_store:
                _trend_plots(args, rows, out)
        elif args.trend_store:
            return _fail("report", "--trend-store draws into the --plots folder; give --plots DIR",
                         err)
    except BrokenPipeError:
        raise  # the reader of the output went away: ``meanband.cli.main`` ends quietly
    except (ReportError, OSError) as exc:
        return _fail("report", exc, err)
    except MeanbandError as exc:  # a store that cannot be read
        return _fail("report", exc, err)
    totals = report["totals"]
    return EXIT_CHECKS_FAILED if totals["FAIL"] or totals["UNDECIDED"] else EXIT_OK


def _is_terminal(stream: TextIO) -> bool:
    isatty = getattr(stream, "isatty", None)
    return bool(isatty and isatty())
