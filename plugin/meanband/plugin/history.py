"""pytest glue for baselines: record runs in the history store, compare checks with a baseline."""

from __future__ import annotations

import itertools
import math
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pytest

from meanband import defaults
from meanband.plugin.options import resolve_path, resolve_value

if TYPE_CHECKING:
    from meanband.stats.regression import Limits
    from meanband.store.history import StoredCheck

HISTORY_PLUGIN_NAME = "meanband-history"

_HELP = {
    "store": "History store for --meanband-record and --meanband-baseline: a file, or a "
    "PostgreSQL URL (postgresql://USER@HOST/DB) shared by many machines (default "
    ".meanband/history.sqlite under the rootdir).",
    "record": "Store this run's checks and trials in the history store, under LABEL (default: "
    "the git branch). Write the label with '=': --meanband-record=main.",
    "baseline": "Compare every check with the same check in a stored run: the newest run with "
    "LABEL, run number N, or the newest run when no label is given (--meanband-baseline=main).",
    "max_increase": "How much slower than its baseline a timing may be before it counts as "
    "regressed, e.g. '5%%' (default 5%%).",
    "max_change": "How far a measured value (not a timing) may move from its baseline either "
    "way, e.g. '2%%' (default 5%%).",
    "record_partial": "Record the run even when it ran only part of its tests (-x stopped it, "
    "or -k, -m, --lf or --deselect narrowed it); by default such a run is not recorded.",
    "store_timeout": "Seconds to wait for another process that is writing the history store "
    "(default 10).",
}


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("meanband")
    group.addoption("--meanband-store", dest="meanband_store", metavar="PATH|URL", default=None,
                    help=_HELP["store"])
    group.addoption("--meanband-record", dest="meanband_record", metavar="LABEL", nargs="?",
                    const="", default=None, help=_HELP["record"])
    group.addoption("--meanband-baseline", dest="meanband_baseline", metavar="LABEL", nargs="?",
                    const="latest", default=None, help=_HELP["baseline"])
    group.addoption("--meanband-max-increase", dest="meanband_max_increase", metavar="FRACTION",
                    default=None, help=_HELP["max_increase"])
    group.addoption("--meanband-max-change", dest="meanband_max_change", metavar="FRACTION",
                    default=None, help=_HELP["max_change"])
    group.addoption("--meanband-record-partial", dest="meanband_record_partial",
                    action="store_true", default=False, help=_HELP["record_partial"])
    group.addoption("--meanband-store-timeout", dest="meanband_store_timeout", metavar="SECONDS",
                    default=None, help=_HELP["store_timeout"])
    for name in ("store", "max_increase", "max_change", "store_timeout"):
        parser.addini(f"meanband_{name}", _HELP[name], type="string", default=None)


def pytest_configure(config: pytest.Config) -> None:
    if hasattr(config, "workerinput"):
        return  # only the controller reads and writes the store
    record = config.getoption("meanband_record")
    baseline = config.getoption("meanband_baseline")
    if record is None and baseline is None:
        return
    from meanband.errors import StoreError
    from meanband.stats.regression import Limits
    from meanband.store.history import DEFAULT_STORE

    args = [str(a) for a in config.invocation_params.args]
    for option, value in (("--meanband-record", record), ("--meanband-baseline", baseline)):
        # "--meanband-record tests/" takes the path as the label; "--meanband-record=main" is
        # what was meant even when a directory called main exists.
        separate = any(a == option and b == value for a, b in itertools.pairwise(args))
        if value and separate and os.path.exists(value):
            raise pytest.UsageError(
                f"{option} took {value!r} as its label, but that is a path; write the label "
                f"with '=' ({option}=LABEL) or put the option after the paths"
            )
    limits = Limits(
        max_increase=resolve_value(config, "max_increase", _relative("--meanband-max-increase"),
                                   defaults.MAX_INCREASE),
        max_change=resolve_value(config, "max_change", _relative("--meanband-max-change"),
                                 defaults.MAX_CHANGE),
    )
    timeout = resolve_value(config, "store_timeout", _timeout_seconds, defaults.STORE_TIMEOUT)
    store = _store_location(config, DEFAULT_STORE)
    plugin = HistoryPlugin(config, store, limits, timeout, record)
    if baseline is not None:
        try:
            plugin.load_baseline(baseline)
        except StoreError as exc:
            raise pytest.UsageError(f"--meanband-baseline: {exc}") from None
    config.pluginmanager.register(plugin, HISTORY_PLUGIN_NAME)


def _store_location(config: pytest.Config, default: Path) -> Path | str:
    """A PostgreSQL URL as given (option or ini key); a file path by the rule for paths."""
    from meanband.plugin.options import given
    from meanband.store.database import is_database_url

    found = given(config, "store")
    if found is not None and is_database_url(str(found.value)):
        return str(found.value)
    store = resolve_path(config, "store", default)
    assert store is not None
    return store


def _relative(option: str) -> Any:
    """A parser of relative amounts ("5%" or 0.05) whose errors name ``option``."""
    from meanband.stats.ratio import parse_fraction

    return lambda text: float(parse_fraction(text, option))


def _timeout_seconds(given: Any) -> float:
    try:
        seconds = float(given)
    except ValueError:
        raise ValueError(f"{given!r} is not a number of seconds") from None
    if not math.isfinite(seconds) or seconds < 0:
        raise ValueError(f"the wait must be 0 or more seconds, got {given!r}")
    return seconds


class HistoryPlugin:
    """Compares rows with the baseline as they arrive; records the run at the end."""

    def __init__(
        self, config: pytest.Config, store: Path | str, limits: Limits, timeout: float,
        record: str | None,
    ) -> None:
        self.config = config
        self.store = store
        self.limits = limits
        self.timeout = timeout
        self.record = record
        self.baseline_run: Any = None
        self.baseline_checks: dict[tuple[str, str], StoredCheck] = {}
        self.session: pytest.Session | None = None
        self.recorded: tuple[int, str] | None = None
        self.record_error: str | None = None
        self.record_skipped: str | None = None
        self._environment: dict[str, Any] | None = None

    def load_baseline(self, ref: str) -> None:
        from meanband.store.history import HistoryStore

        with HistoryStore(self.store, create=False, read_only=True, timeout=self.timeout) as store:
            self.baseline_run = store.find_run(ref)
            self.baseline_checks = {c.key: c for c in store.checks(self.baseline_run.id)}

    def environment(self) -> dict[str, Any]:
        """This run's commit, machine and Python, looked up once."""
        if self._environment is None:
            from meanband.store.environment import capture_environment

            self._environment = capture_environment(self.config.rootpath)
        return self._environment

    def pytest_sessionstart(self, session: pytest.Session) -> None:
        self.session = session

    def pytest_meanband_result(self, config: pytest.Config, row: dict[str, Any]) -> None:
        if self.baseline_run is not None:
            row["baseline"] = self._compare(row)

    def _compare(self, row: dict[str, Any]) -> dict[str, Any]:
        from meanband.stats.regression import compare_check

        run = self.baseline_run
        about = {"run": run.id, "label": run.label, "started": run.started, "commit": run.commit}
        stored = self.baseline_checks.get((row.get("nodeid", ""), row.get("series", "")))
        settings = row.get("settings") or {}
        result = compare_check(
            row.get("values") or [], None if stored is None else stored.values,
            unit=row.get("unit"), source=row.get("source"),
            baseline_unit=None if stored is None else stored.unit, baseline_run=f"run {run.id}",
            confidence=settings.get("confidence", defaults.CONFIDENCE), limits=self.limits,
            power=settings.get("power", defaults.POWER),
        )
        return {**about, **result}

    def pytest_meanband_session_finish(
        self, config: pytest.Config, rows: list[dict[str, Any]]
    ) -> None:
        from meanband.stats.regression import REGRESSED

        failed = any((r.get("baseline") or {}).get("status") == REGRESSED for r in rows)
        if self.record is not None and rows:  # a run without checks is no baseline
            reason = self._not_recorded_reason()
            if reason is None:
                failed |= not self._record(rows)
            else:
                self.record_skipped = reason
        if failed and self.session is not None and self.session.exitstatus == pytest.ExitCode.OK:
            self.session.exitstatus = pytest.ExitCode.TESTS_FAILED

    def _not_recorded_reason(self) -> str | None:
        """Why this run makes no baseline: it did not run, or ran only part of, its selection."""
        from meanband.plugin.selection import not_run_reason, partial_reason

        if self.session is None:
            return None
        reason = not_run_reason(self.session)
        if reason is None and not self.config.getoption("meanband_record_partial"):
            partial = partial_reason(self.session)
            if partial is not None:
                reason = (f"{partial}, so this run was not recorded; add "
                          "--meanband-record-partial to record it anyway")
        elif reason is not None:
            reason += ", so this run was not recorded"
        return reason

    def _record(self, rows: list[dict[str, Any]]) -> bool:
        from meanband.store.history import HistoryStore, StoreError

        environment = self.environment()
        label = self.record or environment.get("branch") or ""
        try:
            with HistoryStore(self.store, timeout=self.timeout) as store:
                run_id = store.record_run(rows, label=label, environment=environment)
        except StoreError as exc:
            self.record_error = str(exc)
            return False
        self.recorded = (run_id, label)
        return True

    def pytest_meanband_summary_lines(
        self, config: pytest.Config, rows: list[dict[str, Any]]
    ) -> list[str]:
        lines: list[str] = []
        if not rows and self.record is not None:
            lines.append("meanband: no test recorded trials, so there was nothing to record")
        if self.baseline_run is not None:
            elsewhere = machine_difference(self.baseline_run, self.environment())
            if elsewhere:
                lines.append(f"note: {elsewhere}")
        if self.recorded is not None:
            run_id, label = self.recorded
            named = f" '{label}'" if label else ""
            from meanband.store.database import where

            lines += ["", f"meanband: recorded run {run_id}{named} in {where(self.store)}"]
        if self.record_skipped is not None:
            lines += ["", f"meanband: {self.record_skipped}"]
        if self.record_error is not None:
            lines += ["", f"meanband: ERROR: this run was not recorded: {self.record_error}"]
        return lines


def machine_difference(run: Any, environment: dict[str, Any]) -> str | None:
    """A warning when the baseline ran on another kind of machine or Python: timing ratios then
    compare the machines as well as the code. Host names alone are not compared, since CI
    runners of one kind get a new name each time."""
    from meanband.store.environment import python_words

    then = (run.machine, run.cpus, run.python)
    now = (environment.get("machine"), environment.get("cpu_count"), python_words(environment))
    if then == now:
        return None
    return (
        f"the baseline ran on {run.host} ({then[0]}, {then[1]} CPUs, {then[2]}), this run on "
        f"{environment.get('hostname')} ({now[0]}, {now[1]} CPUs, {now[2]}); timing ratios "
        "compare the machines as well as the code"
    )
