"""pytest glue for report files: JSON report, Markdown (and the CI job summary), plots."""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pytest

from meanband.plugin.options import resolve_path, resolve_value

if TYPE_CHECKING:
    from meanband.record.row import ResultRow

PLUGIN_NAME = "meanband-reports"
_TRIAL_CHOICES = ("yes", "no")


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup(
        "meanband", "meanband: confidence intervals of the mean as test gates")
    group.addoption(
        "--meanband-report", metavar="PATH", default=None,
        help="Write every check (interval, band, verdict, diagnostics, notes, settings, "
        "environment and raw trials) to a JSON report at PATH",
    )
    group.addoption(
        "--meanband-report-trials", choices=_TRIAL_CHOICES, default=None,
        help="Whether the JSON report holds the raw trials: yes (default) or no (smaller file)",
    )
    group.addoption(
        "--meanband-markdown", metavar="PATH", default=None,
        help="Write the summary as a Markdown table with its notes to PATH",
    )
    group.addoption(
        "--meanband-job-summary", action="store_true", default=None,
        help="Append the Markdown summary to the file named by the CI job-summary variable "
        "(see --meanband-job-summary-var)",
    )
    group.addoption(
        "--meanband-job-summary-var", metavar="NAME", default=None,
        help="Environment variable that names the CI job-summary file "
        "(default: GITHUB_STEP_SUMMARY)",
    )
    group.addoption(
        "--meanband-plots", metavar="DIR", default=None,
        help="Draw an interval chart of all checks and, per check, a run chart, a normal Q-Q "
        "plot and a histogram into DIR (needs the 'plots' extra: matplotlib)",
    )
    group.addoption(
        "--meanband-plot-format", metavar="FORMATS", default=None,
        help="Image format of the plots: png (default), svg, or png,svg",
    )
    group.addoption(
        "--meanband-plot-checks", choices=("all", "failed", "none"), default=None,
        help="Which checks get a run chart, Q-Q plot and histogram: all (default), failed "
        "(FAIL or UNDECIDED) or none (the interval chart only)",
    )
    parser.addini("meanband_report", "Path of the JSON report (relative to the ini file)",
                  type="string", default="")
    parser.addini("meanband_report_trials", "Whether the JSON report holds the raw trials",
                  type="bool", default=True)
    parser.addini("meanband_markdown", "Path of the Markdown summary (relative to the ini file)",
                  type="string", default="")
    parser.addini("meanband_job_summary", "Append the Markdown summary to the CI job summary",
                  type="bool", default=False)
    parser.addini("meanband_job_summary_var",
                  "Environment variable that names the CI job-summary file",
                  type="string", default="GITHUB_STEP_SUMMARY")
    parser.addini("meanband_plots", "Directory for plots (relative to the ini file)",
                  type="string", default="")
    parser.addini("meanband_plot_format", "Image format of the plots: png, svg or png,svg",
                  type="string", default="png")
    parser.addini("meanband_plot_checks", "Which checks get per-check plots: all, failed, none",
                  type="string", default="all")


@dataclass(frozen=True)
class ReportSettings:
    """Where to write what, resolved once from options and ini keys."""

    report: Path | None
    trials: bool
    markdown: Path | None
    job_summary: bool
    job_summary_var: str
    plots: Path | None
    plot_formats: tuple[str, ...]
    plot_checks: str

    @property
    def wanted(self) -> bool:
        return bool(self.report or self.markdown or self.job_summary or self.plots)


def _ini_bool(config: pytest.Config, name: str) -> bool:
    try:
        return bool(config.getini(name))
    except (ValueError, pytest.UsageError) as exc:  # pytest names the value, not the key
        raise pytest.UsageError(f"ini key {name}: {exc}; write true or false") from exc


def _variable_name(text: Any) -> str:
    name = str(text)
    if not name or not name.replace("_", "").isalnum():
        raise ValueError(f"{name!r} is not an environment variable name; give one such as "
                         "GITHUB_STEP_SUMMARY")
    return name


def _plot_checks(text: Any) -> str:
    if text not in ("all", "failed", "none"):
        raise ValueError(f"{text!r}; choose all, failed or none")
    return str(text)


def resolve(config: pytest.Config) -> ReportSettings:
    """Read the report options; a bad value is a usage error naming the option or ini key."""
    from meanband.report.plots import check_formats

    trials_option = config.getoption("meanband_report_trials")
    trials = (trials_option == "yes") if trials_option else _ini_bool(
        config, "meanband_report_trials")
    job_summary = config.getoption("meanband_job_summary")
    if job_summary is None:
        job_summary = _ini_bool(config, "meanband_job_summary")
    variable = resolve_value(config, "job_summary_var", _variable_name, "GITHUB_STEP_SUMMARY")
    formats: tuple[str, ...] = resolve_value(config, "plot_format", check_formats, ("png",))
    plot_checks = resolve_value(config, "plot_checks", _plot_checks, "all")
    return ReportSettings(
        report=resolve_path(config, "report"),
        trials=trials,
        markdown=resolve_path(config, "markdown"),
        job_summary=job_summary,
        job_summary_var=variable,
        plots=resolve_path(config, "plots"),
        plot_formats=formats,
        plot_checks=plot_checks,
    )


def pytest_configure(config: pytest.Config) -> None:
    settings = resolve(config)
    if not settings.wanted or hasattr(config, "workerinput"):
        return
    if settings.plots is not None:
        from meanband.report.plots import PlotsUnavailable, require_matplotlib

        try:  # fail before the suite runs, not after
            require_matplotlib()
        except PlotsUnavailable as exc:
            raise pytest.UsageError(f"--meanband-plots: {exc}") from exc
    config.pluginmanager.register(ReportWriter(config, settings), PLUGIN_NAME)


def configuration(config: pytest.Config) -> dict[str, Any]:
    """The run's command line and meanband options, as builtin types; the password of a
    store URL is masked."""
    from meanband.store.database import mask_passwords

    options: dict[str, Any] = {}
    for name, value in sorted(vars(config.option).items()):
        if name.startswith("meanband"):
            options[name] = value if isinstance(value, (int, float, bool, type(None))) \
                else mask_passwords(str(value))
    workers = getattr(config.option, "numprocesses", None)
    return {
        "args": [mask_passwords(str(arg)) for arg in config.invocation_params.args],
        "options": options,
        "workers": workers if isinstance(workers, int) else None,
    }


class ReportWriter:
    """Writes the requested files once the controller has every row."""

    def __init__(self, config: pytest.Config, settings: ReportSettings) -> None:
        self.config = config
        self.settings = settings
        self.messages: list[tuple[str, dict[str, bool]]] = []
        self.session: pytest.Session | None = None

    def pytest_sessionstart(self, session: pytest.Session) -> None:
        self.session = session

    def _say(self, text: str, **markup: bool) -> None:
        """Keep a line for the end of the terminal summary; problems show even under -q."""
        if markup or self.config.get_verbosity() >= 0:
            self.messages.append((text, markup))

    @pytest.hookimpl(trylast=True)
    def pytest_terminal_summary(self, terminalreporter: pytest.TerminalReporter) -> None:
        for text, markup in self.messages:  # set off from the summary, as pytest's own files are
            terminalreporter.write_sep("-", text, **markup)

    def pytest_meanband_session_finish(self, config: pytest.Config, rows: list[ResultRow]) -> None:
        if hasattr(config, "workerinput"):
            return
        from meanband.plugin.selection import not_run_reason
        from meanband.store.report_json import ReportError

        reason = None if self.session is None else not_run_reason(self.session)
        if reason is not None:
            # An earlier good report is worth more than an empty one from a run that ran nothing.
            self._say(f"meanband: no report files written: {reason}; any earlier files were "
                      "left as they were", yellow=True)
            return
        s = self.settings
        steps: list[tuple[str, Callable[[], None]]] = []
        if s.report is not None:
            steps.append(("JSON report", lambda: self._write_report(rows)))
        if s.markdown is not None or s.job_summary:
            steps.append(("Markdown summary", lambda: self._write_markdown(rows)))
        if s.plots is not None:
            steps.append(("plots", lambda: self._write_plots(rows)))
        from meanband.plugin.isolation import failures

        for what, step in steps:
            try:
                step()
            except (ReportError, OSError) as exc:
                # Every other file is still written; the failure is shown, never swallowed.
                self._say(f"meanband: could not write the {what}: {_in_words(exc)}", red=True,
                          bold=True)
                failures(config).output_failed = True
            except Exception as exc:  # e.g. a row value a plot cannot draw
                self._say(f"meanband: could not write the {what}: {type(exc).__name__}: {exc}; "
                          "the other files were written", red=True, bold=True)
                failures(config).output_failed = True

    def _write_report(self, rows: list[ResultRow]) -> None:
        from meanband.store import report_json
        report = report_json.build_report(
            rows, environment=report_json.environment(self.config.rootpath),
            configuration=configuration(self.config), include_trials=self.settings.trials,
        )
        path = report_json.write_report(report, self.settings.report)  # type: ignore[arg-type]
        self._say(f"meanband: wrote JSON report {_shown(path)} ({len(rows)} rows)")

    def _write_markdown(self, rows: list[ResultRow]) -> None:
        from meanband.report import markdown
        from meanband.store.report_json import ReportError

        text = markdown.format_markdown(rows)
        if self.settings.markdown is not None:
            path = markdown.write_markdown(text, self.settings.markdown)
            self._say(f"meanband: wrote Markdown summary {_shown(path)}")
        if self.settings.job_summary:
            try:
                path = markdown.append_job_summary(text, self.settings.job_summary_var)
            except ReportError as exc:
                self._say(f"meanband: no job summary written: {exc}", yellow=True)
            else:
                self._say(f"meanband: appended the summary to {_shown(path)} "
                          f"(from {self.settings.job_summary_var})")

    def _write_plots(self, rows: list[ResultRow]) -> None:
        from meanband.report import plots
        result = plots.write_plots(rows, self.settings.plots,  # type: ignore[arg-type]
                                   formats=self.settings.plot_formats,
                                   checks=self.settings.plot_checks)
        self._say(f"meanband: wrote {len(result.written)} plot files to "
                  f"{_shown(self.settings.plots)}")  # type: ignore[arg-type]
        for line in result.skipped_lines():
            self._say(f"meanband: {line}", yellow=True)
        self._write_trend_plots(rows)

    def _write_trend_plots(self, rows: list[ResultRow]) -> None:
        """With a history store in use, one trend picture per check of this run: its stored
        run means over time and their change points (``meanband history trend`` in pictures)."""
        history = self.config.pluginmanager.get_plugin("meanband-history")
        location = getattr(history, "store", None)
        if location is None:
            return
        from meanband.errors import StoreError, TrialError
        from meanband.report.trend import STORE_TREND_RUNS, store_trends, write_trend_plots
        from meanband.store.database import where

        label = getattr(history, "record", None) or None
        keys = [(str(r.get("nodeid", "")), str(r.get("series", ""))) for r in rows]
        try:
            trends = store_trends(location, keys, label=label)
        except (StoreError, TrialError) as exc:
            self._say(f"meanband: no trend pictures: {exc}", yellow=True)
            return
        if not trends:
            self._say(f"meanband: no trend pictures: {where(location)} holds fewer than two "
                      "runs of these checks" + (f" labelled {label!r}" if label else ""))
            return
        written = write_trend_plots(trends, self.settings.plots,  # type: ignore[arg-type]
                                    formats=self.settings.plot_formats)
        self._say(f"meanband: wrote {len(written)} trend picture(s) of the newest "
                  f"{STORE_TREND_RUNS} stored runs to {_shown(self.settings.plots)}"  # type: ignore[arg-type]
                  )


def _shown(path: Path) -> str:
    try:
        return os.path.relpath(path)
    except ValueError:  # another drive on Windows
        return str(path)


def _in_words(exc: BaseException) -> str:
    """An OSError as words and the file it is about ("Not a directory: taken/out.json")."""
    from meanband.store.atomic import write_error_words

    return write_error_words(exc)
