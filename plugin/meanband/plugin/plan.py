"""Trial planning in pytest: suggestions on each row, the plan file read and written."""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pytest

from meanband import defaults
from meanband.plugin.options import given, resolve_path, resolve_value

if TYPE_CHECKING:
    from meanband.store.planfile import Plan

PLAN_PLUGIN_NAME = "meanband-plan"
_COLLECTED_KEY = "meanband_collected"  # key in an xdist worker's workeroutput


def pytest_addoption(parser: pytest.Parser) -> None:
    group = parser.getgroup("meanband")
    group.addoption(
        "--meanband-plan", dest="meanband_plan", default=None, metavar="PATH",
        help="Read trial counts per test from this plan file (TOML). They rank below call "
        "arguments and markers, above the command line and the ini file.",
    )
    parser.addini(
        "meanband_plan", "Plan file of trial counts per test (TOML), relative to the ini file.",
        type="string", default=None,
    )
    group.addoption(
        "--meanband-max-read-bytes", dest="meanband_max_read_bytes", default=None, metavar="SIZE",
        help="Refuse a plan file larger than this: bytes, or with KiB, MiB, GiB (default "
        f"{defaults.MAX_READ_BYTES // 1024**2} MiB).",
    )
    parser.addini(
        "meanband_max_read_bytes", "Largest plan file meanband reads: bytes, or with KiB, MiB, "
        f"GiB (default {defaults.MAX_READ_BYTES // 1024**2} MiB).", type="string", default=None,
    )
    group.addoption(
        "--meanband-write-plan", dest="meanband_write_plan", default=None, metavar="PATH",
        help="Write the suggested trial count of every check, with its reason, to this plan "
        "file (TOML) at the end of the run.",
    )


def pytest_configure(config: pytest.Config) -> None:
    plan = None
    found = given(config, "plan")
    where = found.source if found is not None else ""
    path = resolve_path(config, "plan")
    source = None if path is None else _shown(path)
    max_bytes = _max_read_bytes(config)
    if source:
        from meanband.store.planfile import PlanError, read_plan

        try:
            plan = read_plan(source, max_bytes=max_bytes, setting=_LIMIT_SETTING)
        except PlanError as exc:
            raise pytest.UsageError(f"{where}: {exc}") from None
    config.pluginmanager.register(PlanPlugin(config, plan, max_bytes), PLAN_PLUGIN_NAME)


_LIMIT_SETTING = "--meanband-max-read-bytes or ini meanband_max_read_bytes"


def _max_read_bytes(config: pytest.Config) -> int:
    from meanband.store.reading import parse_size

    return resolve_value(config, "max_read_bytes", parse_size, defaults.MAX_READ_BYTES)


class PlanPlugin:
    """Supplies the plan layer of the settings, adds suggestions to rows, writes the plan."""

    def __init__(self, config: pytest.Config, plan: Plan | None,
                 max_bytes: int = defaults.MAX_READ_BYTES) -> None:
        self.config = config
        self.plan = plan
        self.max_bytes = max_bytes
        self.collected: set[str] = set()
        self.written: Path | None = None
        self.write_error: str | None = None

    # -- the plan layer ---------------------------------------------------------------------

    @pytest.hookimpl(trylast=True)
    def pytest_meanband_item_settings(self, item: pytest.Item) -> dict[str, Any] | None:
        if self.plan is None:
            return None
        entries = self.plan.for_test(item.nodeid)
        if not entries:
            return None
        settings = _entry_settings(entries.get(""))
        series = {name: _entry_settings(e) for name, e in entries.items() if name}
        series = {name: values for name, values in series.items() if values}
        if series:
            settings["series"] = series
        return settings or None

    # -- stale ids: which tests exist in this run ----------------------------------------------

    @pytest.hookimpl(tryfirst=True)
    def pytest_collection_modifyitems(self, items: list[pytest.Item]) -> None:
        # Before -k/-m deselect anything: a deselected test still exists.
        if self.plan is not None:
            self.collected.update(item.nodeid for item in items)

    @pytest.hookimpl(trylast=True)
    def pytest_sessionfinish(self, session: pytest.Session) -> None:
        workeroutput = getattr(self.config, "workeroutput", None)
        if workeroutput is not None and self.plan is not None:
            workeroutput[_COLLECTED_KEY] = sorted(self.collected)

    @pytest.hookimpl(optionalhook=True)
    def pytest_testnodedown(self, node: Any, error: Any) -> None:
        output = getattr(node, "workeroutput", None) or {}
        self.collected.update(output.get(_COLLECTED_KEY, ()))

    def stale(self) -> list[str]:
        """Plan ids with no test in this run's suite.

        A test id is stale when its file was collected but the test was not, or when its file
        no longer exists; ids from files this run did not look at are left alone.
        """
        if self.plan is None or not self.collected:
            return []
        root = Path(str(self.config.rootpath))
        files = {nodeid.split("::", 1)[0] for nodeid in self.collected}
        out = []
        for nodeid in self.plan.nodeids():
            if nodeid in self.collected:
                continue
            path = nodeid.split("::", 1)[0]
            if path in files or not (root / path).exists():
                out.append(nodeid)
        return out

    # -- suggestions and the written plan ----------------------------------------------------

    def pytest_meanband_result(self, config: pytest.Config, row: dict[str, Any]) -> None:
        from meanband.record.suggestion import suggestion_for_row

        suggestion = suggestion_for_row(row)
        if suggestion is None:
            return
        data = suggestion.to_dict()
        data["text"] = _summary_text(data, (row.get("sequential") or {}).get("max_n"))
        row["suggestion"] = data

    def pytest_meanband_session_finish(self, config: pytest.Config, rows: list[dict[str, Any]]
                                       ) -> None:
        self._write_plan(rows)

    def _write_plan(self, rows: list[dict[str, Any]]) -> None:
        target = self.config.getoption("meanband_write_plan")
        if not target or self.written is not None or hasattr(self.config, "workerinput"):
            return
        from meanband.store.planfile import PlanError, entries_from_rows, read_plan, write_plan

        path = Path(target)
        entries = entries_from_rows(rows)
        ran = {e.nodeid for e in entries} | {str(r.get("nodeid")) for r in rows}
        # Keep what an earlier run planned for tests this run did not reach (e.g. under -k).
        if path.exists():
            try:
                earlier = read_plan(path, max_bytes=self.max_bytes, setting=_LIMIT_SETTING)
            except PlanError as exc:
                self.write_error = f"{exc}; it was replaced"
            else:
                entries += [e for e in earlier.entries.values() if e.nodeid not in ran]
        powers = {(r.get("settings") or {}).get("power") for r in rows if r.get("suggestion")}
        power = powers.pop() if len(powers) == 1 else None
        try:
            self.written = write_plan(path, entries, power=power)
        except OSError as exc:
            self.write_error = f"could not write the plan file {path}: {exc}"
            from meanband.plugin.isolation import failures

            failures(self.config).output_failed = True  # a requested output failed: exit 1
            self.written = None

    def pytest_meanband_summary_lines(self, config: pytest.Config, rows: list[dict[str, Any]]
                                      ) -> list[str]:
        if not rows:  # no meanband section to sit in: each line names meanband itself
            return [f"meanband {line}" for line in self.lines(rows) if line]
        return self.lines(rows)

    def lines(self, rows: list[dict[str, Any]]) -> list[str]:
        """Lines about the plan: what was used, what is stale, where it was written."""
        out: list[str] = []
        if self.plan is not None:
            planned = self.plan.nodeids()
            reached = {r.get("nodeid") for r in rows} & set(planned)
            if self.config.get_verbosity() >= 0:
                out.append(f"plan {self.plan.source}: {len(reached)} of {len(planned)} planned "
                           "tests recorded trials in this run")
            stale = self.stale()
            if stale:
                out.append(f"plan {self.plan.source}: {len(stale)} planned test id(s) no longer "
                           "in the suite (rename or remove them, or rewrite the plan):")
                out.extend(f"  {nodeid}" for nodeid in stale)
            ran = {(r.get("nodeid"), r.get("series") or "") for r in rows}
            tests = {nodeid for nodeid, _ in ran}
            missing = [f"{i} [{s}]" for (i, s) in self.plan.entries
                       if s and i in tests and (i, s) not in ran]
            if missing:
                out.append(f"plan {self.plan.source}: planned series no longer recorded: "
                           + ", ".join(missing))
        if self.write_error:
            out.append(f"plan: {self.write_error}")
        if self.written is not None:
            out.append(f"plan written to {self.written}")
        if not out:
            return []
        return ["", *out] if self.config.get_verbosity() >= 0 else out


def _entry_settings(entry: Any) -> dict[str, Any]:
    """The settings a plan entry gives: its count and its cap, where set."""
    if entry is None:
        return {}
    return {name: getattr(entry, name) for name in ("n", "max_n")
            if getattr(entry, name) is not None}


def _summary_text(suggestion: dict[str, Any], cap: int | None = None) -> str:
    """The summary line: the reason, which leads with the verdict and count.

    Nothing for a count that is about right, nor for an n="auto" check that decided (unless a
    check that stops when decided is told a cap other than its ``cap``).
    """
    direction, reason = suggestion.get("direction"), str(suggestion.get("reason", ""))
    quiet_auto = (direction == "auto" and not reason.startswith("UNDECIDED")
                  and suggestion.get("max_n") in (None, cap))
    if direction == "keep" or quiet_auto:
        return ""
    return reason


def _shown(path: Path) -> str:
    """The path as the user would write it: relative to the current directory where it can be."""
    try:
        return os.path.relpath(path)
    except ValueError:  # another drive on Windows
        return str(path)
