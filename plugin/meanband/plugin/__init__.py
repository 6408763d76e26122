"""The pytest plugin: options, the ``meanband`` marker, the ``trials`` fixture and the summary."""

from __future__ import annotations

from collections import Counter
from collections.abc import Generator
from typing import TYPE_CHECKING, Any

import pytest

from meanband import defaults
from meanband.plugin.options import ini_value, option_value
from meanband.record.settings import (
    SettingError,
    marker_settings,
    resolve,
    unknown_setting_names,
    validate,
)

if TYPE_CHECKING:
    from meanband.record.recorder import Recorder
    from meanband.record.row import ResultRow
    from meanband.record.settings import Settings

#: Feature plugins, each with its own options in the ``meanband`` group.
pytest_plugins: list[str] = [
    "meanband.plugin.history", "meanband.plugin.reports", "meanband.plugin.plan",
    "meanband.plugin.timing",
]

RECORDER_KEY = pytest.StashKey["Recorder"]()
CONFIG_LAYERS_KEY = pytest.StashKey[list[tuple[str, dict[str, Any]]]]()
SUMMARY_PLUGIN_NAME = "meanband-summary"

#: (setting, option word, help text, ini type); option --meanband-<word>, ini meanband_<name>.
_SETTING_OPTIONS = (
    ("n", "n", f"Default number of trials per collection call (default {defaults.N}).", "string"),
    ("confidence", "confidence",
     f"Confidence level of the intervals (default {defaults.CONFIDENCE}).", "string"),
    ("min_n", "min-n", f"Warn when a check has fewer trials than this (default {defaults.MIN_N}).",
     "string"),
    ("normality_alpha", "normality-alpha", "Level of the normality test behind the 'normality "
     f"doubtful' note (default {defaults.NORMALITY_ALPHA}).", "string"),
    ("warmup", "warmup", "Default warm-up before timed trials: a count or a duration such as "
     "'200ms' (default 0).", "string"),
    ("method", "method", f"Default interval method (default '{defaults.METHOD}').", "string"),
    ("power", "power", f"Power at which trial counts are suggested (default {defaults.POWER}).",
     "string"),
    ("min_trial_time", "min-trial-time", "Shortest timed trial, e.g. '5ms'; calibration runs "
     "enough calls per trial to fill it (default: 1 ms or 1000 clock reads).", "string"),
    ("clock", "clock", "Clock of timed trials: 'wall' (elapsed) or 'cpu' (this process's CPU "
     "time) (default wall).", "string"),
    ("gc", "gc", "Keep garbage collection on during timed trials: on or off (default off).",
     "string"),
    ("min_uncertainty_ratio", "min-uncertainty-ratio", "Note a check whose test uncertainty "
     f"ratio (tolerance / 2U) is below this (default {defaults.MIN_UNCERTAINTY_RATIO:g}, i.e. "
     f"{defaults.MIN_UNCERTAINTY_RATIO:g}:1).", "string"),
    ("overdue_calibration", "overdue-calibration", "What a check made with an instrument past "
     "its calibration due date does: note or fail (default note).", "string"),
    ("time_limit", "time-limit", "Most time a test may spend timing, e.g. '2s'; trials stop "
     "early with a note (default: no limit).", "string"),
    ("max_trials", "max-trials", "Ceiling on any trial count asked for (n, a plan entry, "
     f"max_n); a larger count is an error (default {defaults.MAX_TRIALS:,}).", "string"),
    ("max_n", "max-n", "Cap of n='auto', n='until-decided' and n='looks:K' when the call gives "
     "no max_n (default: 1000 for auto, 200 for the others).", "string"),
)


def pytest_addhooks(pluginmanager: pytest.PytestPluginManager) -> None:
    from meanband.plugin import hookspecs
    pluginmanager.add_hookspecs(hookspecs)


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("meanband", "meanband: confidence intervals of the mean as test gates")
    for name, word, help_text, ini_type in _SETTING_OPTIONS:
        group.addoption(f"--meanband-{word}", dest=f"meanband_{name}", default=None,
                        metavar="VALUE", help=help_text)
        parser.addini(f"meanband_{name}", help_text, type=ini_type, default=None)  # type: ignore[arg-type]


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line(
        "markers",
        "meanband(n=None, confidence=None, warmup=None, min_n=None, normality_alpha=None, "
        "method=None, power=None, min_trial_time=None, clock=None, gc=None, time_limit=None, "
        "overdue_calibration=None, min_uncertainty_ratio=None, max_trials=None, max_n=None): "
        "settings for the test's `trials` fixture.",
    )
    config.stash[CONFIG_LAYERS_KEY] = _config_layers(config)
    if not hasattr(config, "workerinput"):
        config.pluginmanager.register(SummaryPlugin(config), SUMMARY_PLUGIN_NAME)


def _config_layers(config: pytest.Config) -> list[tuple[str, dict[str, Any]]]:
    """Command-line and ini layers, validated now so a bad value is a usage error.

    One layer per given value, named for where it came from (``option --meanband-n``), every
    option above every ini key, so a later error can name the exact source.
    """
    options: list[tuple[str, dict[str, Any]]] = []
    inis: list[tuple[str, dict[str, Any]]] = []
    for name, _word, _help, _type in _SETTING_OPTIONS:
        try:
            for layers, found in ((options, option_value(config, name)),
                                  (inis, ini_value(config, name))):
                if found is not None:
                    layers.append((found.source, {name: validate(name, found.value, found.source)}))
        except SettingError as exc:
            raise pytest.UsageError(str(exc)) from None
    try:
        resolve([*options, *inis])  # a count above the ceiling would make every test run on
    except SettingError as exc:
        raise pytest.UsageError(str(exc)) from None
    return [*options, *inis]


@pytest.fixture
def trials(request: pytest.FixtureRequest) -> Recorder:
    """Collect repeated trials and check that the interval of their mean lies in a band."""
    from meanband.plugin.timing import timing_session
    from meanband.record.recorder import Recorder

    item = request.node
    config = request.config
    layers: list[tuple[str, dict[str, Any]]] = []
    for marker in reversed(list(item.iter_markers("meanband"))):
        where = f"marker @pytest.mark.meanband on {item.nodeid}"
        if marker.args:
            raise SettingError(f"{where}: give settings as keywords, e.g. meanband(n=40)")
        unknown = unknown_setting_names(marker.kwargs)
        if unknown:
            raise SettingError(f"{where}: {unknown}")
        layers.insert(0, (where, marker_settings(**marker.kwargs)))
    plan = dict(config.hook.pytest_meanband_item_settings(item=item) or {})
    series_plans = plan.pop("series", None) or {}
    tail: list[tuple[str, dict[str, Any]]] = config.stash[CONFIG_LAYERS_KEY]

    def with_plan(source: str, values: dict[str, Any]) -> Settings:
        return resolve([*layers, *([(source, values)] if values else []), *tail])

    from meanband.plugin.history import EARLIER_KEY

    planned = getattr(config.pluginmanager.get_plugin("meanband-plan"), "plan", None)
    entry = f"plan file {planned.source}: entry" if planned is not None else "plan entry"
    recorder = Recorder(
        with_plan(f"{entry} for {item.nodeid}", plan), item.nodeid,
        earlier=config.stash.get(EARLIER_KEY, {}).get(item.nodeid),
        series_settings={
            name: with_plan(f"{entry} for {item.nodeid} [{name}]", dict(values))
            for name, values in series_plans.items()
        },
        other_series=with_plan("", {}),
        timing=timing_session(config),
    )
    # Timings fall back to batch means when lag-1 r is in doubt, unless someone chose the
    # method: a marker, the plan (for the test or any of its series), an option or ini key.
    chosen = [values for _, values in [*layers, *tail]]
    chosen += [plan, *(dict(values) for values in series_plans.values())]
    recorder.method_chosen = any(values.get("method") is not None for values in chosen)
    item.stash[RECORDER_KEY] = recorder
    return recorder


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(
    item: pytest.Item, call: pytest.CallInfo[None]
) -> Generator[None, pytest.TestReport, pytest.TestReport]:
    recorder = item.stash.get(RECORDER_KEY, None) if call.when == "call" else None
    rows = recorder.all_rows() if recorder is not None else []
    checks_per_series = Counter(r["series"] for r in rows if r.get("decision"))
    seen: Counter[str] = Counter()
    for row in rows:
        if row.get("decision"):
            index = seen[row["series"]]
            seen[row["series"]] += 1
            numbered = checks_per_series[row["series"]] > 1
            item.user_properties.extend(_junit_properties(row, index if numbered else None))
    report = yield
    if rows:
        from meanband.store.environment import load_per_cpu

        load = load_per_cpu()
        for row in rows:
            row.setdefault("load", load)
        report.meanband_rows = rows  # type: ignore[attr-defined]
    return report


def _junit_properties(row: ResultRow, index: int | None) -> list[tuple[str, object]]:
    """``meanband[series].index.field`` properties; series and index only where needed: n, the
    interval (mean, low, high), its unit, the band (as written, and its edges) and the verdict."""
    decision = row["decision"]
    if decision is None:
        return []
    prefix = "meanband"
    if row.get("series"):
        prefix += f"[{row['series']}]"
    if index is not None:
        prefix += f".{index}"
    from meanband.units import format_band

    interval, band = decision["interval"], decision["band"]
    unit = row.get("unit")
    # Numbers stay in the trials' unit (seconds for timings), named beside them, with the band.
    return [
        (f"{prefix}.n", interval["n"]),
        (f"{prefix}.mean", interval["mean"]),
        (f"{prefix}.low", interval["low"]),
        (f"{prefix}.high", interval["high"]),
        (f"{prefix}.unit", unit or ""),
        (f"{prefix}.band", format_band(band["low"], band["high"], unit)),
        (f"{prefix}.band_low", band["low"]),
        (f"{prefix}.band_high", band["high"]),
        (f"{prefix}.verdict", decision["verdict"]),
    ]


class SummaryPlugin:
    """Collects result rows on the controller and prints the summary at the end.

    Every call of meanband's own hooks goes through ``isolation.call_isolated``: a failing
    exporter or third-party hook becomes one error line, never a lost test result.
    """

    def __init__(self, config: pytest.Config) -> None:
        self.config = config
        self.rows: list[ResultRow] = []
        self.session: pytest.Session | None = None

    def pytest_sessionstart(self, session: pytest.Session) -> None:
        self.session = session

    def pytest_deselected(self, items: list[pytest.Item]) -> None:
        from meanband.plugin.selection import count_deselected

        count_deselected(self.config, len(items))

    def pytest_runtest_logreport(self, report: pytest.TestReport) -> None:
        from meanband.plugin.isolation import call_isolated, failures
        from meanband.record.row import plain_row

        for row in getattr(report, "meanband_rows", None) or ():
            call_isolated(self.config, "pytest_meanband_result", {"config": self.config, "row": row})
            clean, refused = plain_row(row)
            for message in refused:
                failures(self.config).add("a key added to a result row", message)
            self.rows.append(clean)

    def pytest_sessionfinish(self, session: pytest.Session) -> None:
        from meanband.plugin.isolation import call_isolated, settle_exit_status

        # Called even with no rows: a shard that ran no checks still writes its (empty) files.
        call_isolated(self.config, "pytest_meanband_session_finish",
                      {"config": self.config, "rows": self.rows})
        settle_exit_status(session)

    def pytest_terminal_summary(self, terminalreporter: pytest.TerminalReporter) -> None:
        from meanband.plugin.isolation import call_isolated, failures, settle_exit_status
        from meanband.report.tables import fit_lines

        lines: list[str] = []
        verbosity = self.config.get_verbosity()
        width = self.config.get_terminal_writer().fullwidth
        try:
            from meanband.report.terminal import format_summary

            lines = format_summary(self.rows, verbosity, width)
        except Exception as exc:  # the test results above must stay readable
            failures(self.config).add("printing the meanband summary",
                                      f"{type(exc).__name__}: {exc}")
        # Features add what only the live session knows (a run recorded, a plan written, ...)
        # through one hook; everything that rows alone say is in format_summary.
        for extra in call_isolated(self.config, "pytest_meanband_summary_lines",
                                   {"config": self.config, "rows": self.rows}):
            lines.extend(fit_lines(list(extra or ()), width))
        errors = failures(self.config).lines
        if self.session is not None:
            settle_exit_status(self.session)  # a summary hook may have failed just now
        if lines:
            if verbosity < 0 or not self.rows:
                for line in lines:
                    if line or self.rows:
                        terminalreporter.write_line(line)
            else:
                terminalreporter.write_sep("=", "meanband")
                for line in lines:
                    terminalreporter.write_line(line)
        for line in errors:
            terminalreporter.write_line(line, red=True, bold=True)
