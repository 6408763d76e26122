"""pytest glue for baselines: record runs in the history store, compare checks with a baseline."""

from __future__ import annotations

import itertools
import math
import os
from collections.abc import Generator
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pytest

from meanband import defaults
from meanband.plugin.options import resolve_path, resolve_value

if TYPE_CHECKING:
    from meanband.stats.regression import Limits
    from meanband.store.baseline import Baseline

HISTORY_PLUGIN_NAME = "meanband-history"

_HELP = {
    "store": "History store for --meanband-record and --meanband-baseline: a file, or a "
    "PostgreSQL URL (postgresql://USER@HOST/DB) shared by many machines (default "
    ".meanband/history.sqlite under the rootdir).",
    "record": "Store this run's checks and trials in the history store, under LABEL (default: "
    "the git branch). Write the label with '=': --meanband-record=main.",
    "baseline": "Compare every check with the same check in stored runs: the newest runs with "
    "LABEL, run number N, or the newest run when no label is given (--meanband-baseline=main). "
    "A regressed check fails its test.",
    "baseline_runs": "How many of the label's newest runs make the baseline; their spread is "
    "the run-to-run noise the comparison allows for (default 5).",
    "regression_adjust": "Control of false 'regressed' verdicts across the run's checks: holm "
    "(family-wise, the default), bh (false discovery rate) or none.",
    "baseline_undecided": "What a comparison that cannot tell yet does to its test: pass (with "
    "a note, the default) or fail.",
    "baseline_max_age": "A baseline whose newest run is older than this many days gets a "
    "warning (default 30).",
    "run_noise": "Run-to-run spread of a timing assumed when no stored runs or calibration "
    "measured it, e.g. '3%%' (the default); 0 compares a one-run baseline on its trials alone.",
    "continue_sequence": "Retry of a CI job: n='until-decided' checks continue the trials that an "
    "earlier try of the same commit in the same pipeline (GITHUB_RUN_ID, CI_PIPELINE_ID, ... or "
    "MEANBAND_PIPELINE) stored, instead of looking at a fresh stream.",
    "compare_anywhere": "Compare with a baseline recorded on a machine or Python that times "
    "differently (by default such checks are 'cannot compare').",
    "max_increase": "How much slower than its baseline a timing may be before it counts as "
    "regressed, e.g. '5%%' (default 5%%).",
    "max_change": "How far a measured value (not a timing) may move from its baseline either "
    "way, e.g. '2%%' (default 5%%).",
    "record_partial": "Record the run even when it ran only part of its tests (-x stopped it, "
    "or -k, -m, --lf or --deselect narrowed it); by default such a run is not recorded.",
    "store_timeout": "Seconds to wait for another process that is writing the history store "
    "(default 10).",
}

#: Key of workerinput under which the controller hands workers the baseline to read.
_WORKER_KEY = "meanband_baseline"
#: ... and the earlier try whose sequences this run continues.
_EARLIER_WORKER_KEY = "meanband_earlier"
#: Test id -> series -> trials of an earlier try, for n="until-decided" to continue.
EARLIER_KEY = pytest.StashKey[dict[str, dict[str, Any]]]()


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("meanband")
    group.addoption("--meanband-store", dest="meanband_store", metavar="PATH|URL", default=None,
                    help=_HELP["store"])
    group.addoption("--meanband-record", dest="meanband_record", metavar="LABEL", nargs="?",
                    const="", default=None, help=_HELP["record"])
    group.addoption("--meanband-baseline", dest="meanband_baseline", metavar="LABEL", nargs="?",
                    const="latest", default=None, help=_HELP["baseline"])
    group.addoption("--meanband-baseline-runs", dest="meanband_baseline_runs", metavar="K",
                    default=None, help=_HELP["baseline_runs"])
    group.addoption("--meanband-regression-adjust", dest="meanband_regression_adjust",
                    metavar="METHOD", default=None, help=_HELP["regression_adjust"])
    group.addoption("--meanband-baseline-undecided", dest="meanband_baseline_undecided",
                    metavar="ACTION", default=None, help=_HELP["baseline_undecided"])
    group.addoption("--meanband-baseline-max-age", dest="meanband_baseline_max_age",
                    metavar="DAYS", default=None, help=_HELP["baseline_max_age"])
    group.addoption("--meanband-run-noise", dest="meanband_run_noise", metavar="FRACTION",
                    default=None, help=_HELP["run_noise"])
    group.addoption("--meanband-compare-anywhere", dest="meanband_compare_anywhere",
                    action="store_true", default=False, help=_HELP["compare_anywhere"])
    group.addoption("--meanband-continue-sequence", dest="meanband_continue_sequence",
                    action="store_true", default=False, help=_HELP["continue_sequence"])
    group.addoption("--meanband-max-increase", dest="meanband_max_increase", metavar="FRACTION",
                    default=None, help=_HELP["max_increase"])
    group.addoption("--meanband-max-change", dest="meanband_max_change", metavar="FRACTION",
                    default=None, help=_HELP["max_change"])
    group.addoption("--meanband-record-partial", dest="meanband_record_partial",
                    action="store_true", default=False, help=_HELP["record_partial"])
    group.addoption("--meanband-store-timeout", dest="meanband_store_timeout", metavar="SECONDS",
                    default=None, help=_HELP["store_timeout"])
    for name in ("store", "max_increase", "max_change", "store_timeout", "baseline_runs",
                 "regression_adjust", "baseline_undecided", "baseline_max_age", "run_noise"):
        parser.addini(f"meanband_{name}", _HELP[name], type="string", default=None)


@dataclass(frozen=True)
class BaselineSettings:
    """How checks are judged against the baseline, resolved once from options and ini."""

    limits: Limits
    keep: int
    adjustment: str
    undecided: str
    max_age: float
    anywhere: bool
    run_noise: float


def pytest_configure(config: pytest.Config) -> None:
    record = config.getoption("meanband_record")
    baseline = config.getoption("meanband_baseline")
    carry_on = bool(config.getoption("meanband_continue_sequence"))
    if record is None and baseline is None and not carry_on:
        return
    from meanband.errors import StoreError
    from meanband.store.database import store_location
    from meanband.store.history import DEFAULT_STORE

    worker = getattr(config, "workerinput", None)
    if worker is not None:
        handed = worker.get(_WORKER_KEY)
        earlier = worker.get(_EARLIER_WORKER_KEY)
        if handed is not None:  # the controller chose the runs; read them without a writer
            plugin = HistoryPlugin(config, store_location(handed["store"]), _settings(config),
                                   float(handed["timeout"]), None)
            plugin.load_runs(handed["runs"], handed["mismatch"])
            config.pluginmanager.register(plugin, HISTORY_PLUGIN_NAME)
        if earlier is not None:
            _read_earlier(config, store_location(earlier["store"]), int(earlier["run"]),
                          float(earlier["timeout"]))
        return
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
    settings = _settings(config)
    timeout = resolve_value(config, "store_timeout", _timeout_seconds, defaults.STORE_TIMEOUT)
    store = _store_location(config, DEFAULT_STORE)
    plugin = HistoryPlugin(config, store, settings, timeout, record)
    if carry_on:
        plugin.find_earlier_try()
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


def _settings(config: pytest.Config) -> BaselineSettings:
    from meanband.stats.multiplicity import check_adjustment
    from meanband.stats.regression import Limits

    return BaselineSettings(
        limits=Limits(
            max_increase=resolve_value(config, "max_increase",
                                       _relative("--meanband-max-increase"), defaults.MAX_INCREASE),
            max_change=resolve_value(config, "max_change", _relative("--meanband-max-change"),
                                     defaults.MAX_CHANGE),
        ),
        keep=resolve_value(config, "baseline_runs", _run_count, defaults.BASELINE_RUNS),
        adjustment=resolve_value(config, "regression_adjust", check_adjustment,
                                 defaults.REGRESSION_ADJUST),
        undecided=resolve_value(config, "baseline_undecided", _pass_or_fail,
                                defaults.BASELINE_UNDECIDED),
        max_age=resolve_value(config, "baseline_max_age", _days, defaults.BASELINE_MAX_AGE_DAYS),
        anywhere=bool(config.getoption("meanband_compare_anywhere")),
        run_noise=resolve_value(config, "run_noise", _relative("--meanband-run-noise"),
                                defaults.ASSUMED_RUN_NOISE),
    )


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


def _run_count(given: Any) -> int:
    try:
        count = int(str(given).strip())
    except ValueError:
        raise ValueError(f"{given!r} is not a whole number of runs") from None
    if count < 1:
        raise ValueError(f"a baseline needs at least 1 run, got {count}")
    return count


def _pass_or_fail(given: Any) -> str:
    word = str(given).strip().lower()
    if word not in ("pass", "fail"):
        raise ValueError(f"{given!r} is neither 'pass' nor 'fail'")
    return word


def _days(given: Any) -> float:
    try:
        days = float(given)
    except ValueError:
        raise ValueError(f"{given!r} is not a number of days") from None
    if not math.isfinite(days) or days <= 0:
        raise ValueError(f"the age must be more than 0 days, got {given!r}")
    return days


class HistoryPlugin:
    """Compares each check with the baseline while its test runs; records the run at the end.

    A regressed check fails its own test (so pytest's outcome, JUnit, ``--lf`` and ``-x`` see
    it); what only the whole run can decide (the full step-down of the suite-level adjustment)
    fails the session.
    """

    def __init__(
        self, config: pytest.Config, store: Path | str, settings: BaselineSettings, timeout: float,
        record: str | None,
    ) -> None:
        self.config = config
        self.store = store
        self.settings = settings
        self.timeout = timeout
        self.record = record
        self.baseline: Baseline | None = None
        self.mismatch: list[str] = []
        self.comparisons = 0
        self.session: pytest.Session | None = None
        self.recorded: tuple[int, str] | None = None
        self.record_error: str | None = None
        self.record_skipped: str | None = None
        self.late: list[str] = []
        self.earlier_run: int | None = None
        self.earlier_words: str | None = None
        self._environment: dict[str, Any] | None = None

    @property
    def limits(self) -> Limits:
        return self.settings.limits

    # -- reading the baseline once ---------------------------------------------------------

    def load_baseline(self, ref: str) -> None:
        from meanband.store.baseline import load_baseline
        from meanband.store.environment import fingerprint_difference
        from meanband.store.history import HistoryStore

        with HistoryStore(self.store, create=False, read_only=True, timeout=self.timeout) as store:
            self.baseline = load_baseline(store, ref, self.settings.keep,
                                          assumed=self.settings.run_noise)
        now = self.environment().get("fingerprint")
        differences: list[str] = []
        for run in self.baseline.runs:
            for words in fingerprint_difference(run.fingerprint, now):
                if words not in differences:
                    differences.append(words)
        self.mismatch = differences

    def load_runs(self, run_ids: list[int], mismatch: list[str]) -> None:
        """A worker reads exactly the runs the controller chose, read-only."""
        from meanband.store.baseline import read_baseline
        from meanband.store.history import HistoryStore

        with HistoryStore(self.store, create=False, read_only=True, timeout=self.timeout) as store:
            self.baseline = read_baseline(store, run_ids, assumed=self.settings.run_noise)
        self.mismatch = list(mismatch)

    def find_earlier_try(self) -> None:
        """The newest stored run of this commit in this CI pipeline, whose n="until-decided"
        trials this run continues; the summary says what was found."""
        from meanband.errors import StoreError
        from meanband.store.history import HistoryStore, NoHistoryYet
        from meanband.store.sequence import earlier_try

        env = self.environment()
        pipeline = (env.get("fingerprint") or {}).get("pipeline")
        if not pipeline:
            self.earlier_words = ("no CI pipeline id in the environment (set MEANBAND_PIPELINE), "
                                  "so n='until-decided' checks start afresh")
            return
        if isinstance(self.store, Path) and not self.store.exists():
            self.earlier_words = f"no earlier try in this pipeline ({pipeline}): no store yet"
            return
        try:
            with HistoryStore(self.store, create=False, read_only=True,
                              timeout=self.timeout) as store:
                run = earlier_try(store, env.get("commit"), pipeline)
        except NoHistoryYet:
            self.earlier_words = (f"no earlier try in this pipeline ({pipeline}): the database "
                                  "holds no history yet")
            return
        except StoreError as exc:
            raise pytest.UsageError(f"--meanband-continue-sequence: {exc}") from None
        if run is None:
            self.earlier_words = (f"no earlier try of this commit in this pipeline ({pipeline}); "
                                  "n='until-decided' checks start afresh")
            return
        self.earlier_run = run.id
        count = _read_earlier(self.config, self.store, run.id, self.timeout)
        self.earlier_words = (f"n='until-decided' checks continue the sequences of run {run.id} "
                              f"(the same commit, {pipeline}): {count} series")

    @pytest.hookimpl(optionalhook=True)
    def pytest_configure_node(self, node: Any) -> None:
        """pytest-xdist: hand each worker the store and the run ids of the baseline."""
        if self.earlier_run is not None:
            node.workerinput[_EARLIER_WORKER_KEY] = {
                "store": str(self.store), "run": self.earlier_run, "timeout": self.timeout}
        if self.baseline is not None:
            node.workerinput[_WORKER_KEY] = {
                "store": str(self.store), "runs": self.baseline.run_ids,
                "mismatch": self.mismatch, "timeout": self.timeout,
            }

    def environment(self) -> dict[str, Any]:
        """This run's commit, machine and Python, looked up once."""
        if self._environment is None:
            from meanband.store.environment import capture_environment

            self._environment = capture_environment(self.config.rootpath)
        return self._environment

    def pytest_sessionstart(self, session: pytest.Session) -> None:
        self.session = session

    def pytest_collection_finish(self, session: pytest.Session) -> None:
        """The size of the family of comparisons: baseline checks of the tests that will run."""
        if self.baseline is None:
            return
        selected = {item.nodeid for item in session.items}
        self.comparisons = sum(1 for nodeid, _ in self.baseline.checks if nodeid in selected)

    # -- judging each check while its test runs --------------------------------------------

    @pytest.hookimpl(wrapper=True)
    def pytest_runtest_makereport(
        self, item: pytest.Item, call: pytest.CallInfo[None]
    ) -> Generator[None, pytest.TestReport, pytest.TestReport]:
        report = yield
        rows = getattr(report, "meanband_rows", None)
        if self.baseline is None or not rows:
            return report
        from meanband.report.baseline import baseline_properties, failure_block

        blocks: list[str] = []
        for row in rows:
            if row.get("baseline") is None:
                row["baseline"] = self.compare(row)
            info = row["baseline"]
            # JUnit reads the properties of the item when the test is torn down.
            properties = baseline_properties(row)
            item.user_properties.extend(properties)
            report.user_properties.extend(properties)
            if self._fails_test(info):
                blocks.append("\n".join(failure_block(row, self.settings.adjustment)))
        if blocks:
            text = "\n\n".join(blocks)
            if report.passed:
                report.outcome = "failed"
                report.longrepr = text
            else:
                report.sections.append(("meanband baseline", text))
        return report

    def _fails_test(self, info: dict[str, Any]) -> bool:
        from meanband.stats.regression import CANNOT_TELL, REGRESSED

        status = info.get("status")
        return status == REGRESSED or (status == CANNOT_TELL and
                                       self.settings.undecided == "fail")

    def compare(self, row: dict[str, Any]) -> dict[str, Any]:
        """The row's ``baseline`` entry: the verdict against the baseline runs, or why none."""
        from meanband.errors import TrialError
        from meanband.stats.bands import side_alpha
        from meanband.stats.multiplicity import immediate_threshold
        from meanband.stats.regression import (
            CANNOT_COMPARE,
            NOT_COMPARED,
            compare_with_runs,
            is_timing,
            not_compared,
            unequal_counts,
        )
        from meanband.store.environment import busy_difference

        assert self.baseline is not None
        about: dict[str, Any] = {**self.baseline.describe(),
                                 "adjustment": self.settings.adjustment,
                                 "comparisons": self.comparisons}
        key = (row.get("nodeid", ""), row.get("series", ""))
        stored = self.baseline.checks.get(key)
        where = _runs_words(self.baseline.run_ids)
        unmatched = not_compared(row.get("source"), stored is not None and bool(stored.runs),
                                 row.get("unit"), None if stored is None else stored.unit, where)
        if unmatched is not None:
            return {**about, **unmatched}
        assert stored is not None
        timing = is_timing(row.get("unit"), row.get("source"))
        if timing and self.mismatch and not self.settings.anywhere:
            return {**about, "status": CANNOT_COMPARE,
                    "reason": "the baseline ran on a machine that times differently ("
                              + "; ".join(self.mismatch)
                              + "); --meanband-compare-anywhere compares anyway"}
        if timing:
            per_run = round(sum(r.size for r in stored.runs) / len(stored.runs))
            uneven = unequal_counts(len(row.get("values") or []), per_run, where)
            if uneven is not None:
                return {**about, **uneven}
        busy = busy_difference(row.get("load"), list(stored.loads)) if timing else None
        if busy is not None and not self.settings.anywhere:
            return {**about, "status": CANNOT_COMPARE,
                    "reason": f"{busy}; --meanband-compare-anywhere compares anyway"}
        settings = row.get("settings") or {}
        confidence = settings.get("confidence", defaults.CONFIDENCE)
        alpha = side_alpha(confidence, "two-sided")
        threshold = immediate_threshold(alpha, self.comparisons, self.settings.adjustment)
        try:
            result = compare_with_runs(
                row.get("values") or [], list(stored.runs), stored.between, timing=timing,
                confidence=confidence, limits=self.limits, threshold=threshold,
                power=settings.get("power", defaults.POWER),
            )
        except TrialError as exc:
            return {**about, "status": NOT_COMPARED, "reason": str(exc)}
        floor = self.baseline.floors.get(key)
        if floor is not None:
            result["noise"]["floor"] = floor.between_sd
        return {**about, **result}

    # -- the end of the session ------------------------------------------------------------

    @pytest.hookimpl(tryfirst=True)
    def pytest_meanband_session_finish(
        self, config: pytest.Config, rows: list[dict[str, Any]]
    ) -> None:
        failed = bool(self._adjust_at_end(rows))
        if self.record is not None and rows:  # a run without checks is no baseline
            reason = self._not_recorded_reason()
            if reason is None:
                failed |= not self._record(rows)
            else:
                self.record_skipped = reason
        if failed and self.session is not None and self.session.exitstatus == pytest.ExitCode.OK:
            self.session.exitstatus = pytest.ExitCode.TESTS_FAILED

    def _adjust_at_end(self, rows: list[dict[str, Any]]) -> list[str]:
        """The full Holm step-down or BH step-up over all p-values of the run: checks it adds
        are regressed too, but their tests have already reported, so the session fails."""
        from meanband.report.rows import row_name
        from meanband.stats.bands import side_alpha
        from meanband.stats.multiplicity import adjusted_rejections
        from meanband.stats.regression import REGRESSED

        judged = [r for r in rows if (r.get("baseline") or {}).get("p_value") is not None]
        if not judged or self.settings.adjustment == "none":
            return []
        family = max(int(r["baseline"].get("comparisons") or 0) for r in judged)
        by_level: dict[float, list[dict[str, Any]]] = {}
        for row in judged:
            alpha = side_alpha(float(row["baseline"]["ratio"]["confidence"]), "two-sided")
            by_level.setdefault(alpha, []).append(row)
        for alpha, group in by_level.items():
            p_values = [float(r["baseline"]["p_value"]) for r in group]
            for row, rejected in zip(group, adjusted_rejections(
                    p_values, alpha, self.settings.adjustment, family), strict=True):
                info = row["baseline"]
                if rejected and info["status"] != REGRESSED:
                    info["status"] = REGRESSED
                    info["found_at_end"] = True
                    info.pop("suggested_n", None)
                    self.late.append(row_name(row))
        return self.late

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
        if self.baseline is not None:
            lines += self._baseline_warnings()
        if self.earlier_words is not None:
            lines.append(f"meanband: {self.earlier_words}")
        if self.late:
            which = self.settings.adjustment
            lines += ["", f"meanband: REGRESSION: {len(self.late)} check(s) regressed by the "
                      f"{'Holm step-down' if which == 'holm' else 'Benjamini-Hochberg step-up'} "
                      "over the whole run, after their tests had passed; the session fails:"]
            lines += [f"  {name}" for name in self.late]
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

    def _baseline_warnings(self) -> list[str]:
        assert self.baseline is not None
        lines: list[str] = []
        age = self.baseline.age_days()
        if age is not None and age > self.settings.max_age:
            lines.append(
                f"meanband: WARNING: the baseline's newest run ({_runs_words([self.baseline.newest.id])}, "
                f"{self.baseline.newest.started}) is {age:.0f} days old, older than "
                f"{self.settings.max_age:g} days; record a fresh one with --meanband-record"
            )
        if self.mismatch:
            if self.settings.anywhere:
                lines.append("meanband: WARNING: compared with a baseline from a machine that "
                             f"times differently ({'; '.join(self.mismatch)}), as "
                             "--meanband-compare-anywhere asked")
            else:
                lines.append("meanband: WARNING: the baseline ran on a machine that times "
                             f"differently ({'; '.join(self.mismatch)}); no timing was compared. "
                             "Record a baseline on this kind of machine, or add "
                             "--meanband-compare-anywhere")
        elsewhere = [machine_difference(run, self.environment()) for run in self.baseline.runs
                     if run.fingerprint is None]
        for words in dict.fromkeys(w for w in elsewhere if w):
            lines.append(f"note: {words}")
        return lines


def _read_earlier(config: pytest.Config, path: Path | str, run_id: int, timeout: float) -> int:
    """Put the earlier try's n="until-decided" trials where the trials fixture finds them."""
    from meanband.store.history import HistoryStore
    from meanband.store.sequence import earlier_sequences

    with HistoryStore(path, create=False, read_only=True, timeout=timeout) as store:
        found = earlier_sequences(store, run_id)
    config.stash[EARLIER_KEY] = found
    return sum(len(series) for series in found.values())


def _runs_words(run_ids: list[int]) -> str:
    if len(run_ids) == 1:
        return f"run {run_ids[0]}"
    return "runs " + ", ".join(str(i) for i in run_ids)


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
