"""The plan file: suggested trial counts per test and series, in TOML that teams commit."""

from __future__ import annotations

import math
import os
import re
import sys
import tempfile
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any

from meanband.errors import TrialError

__all__ = [
    "FORMAT_VERSION",
    "Plan",
    "PlanEntry",
    "PlanError",
    "dumps_plan",
    "entries_from_rows",
    "loads_plan",
    "read_plan",
    "write_plan",
]

#: Bumped when the layout changes in a way an older reader would misread.
FORMAT_VERSION = 1

_HEADER = (
    "# meanband trial plan: the trial count each check needs, with the reason.\n"
    "# Written by --meanband-write-plan; read with --meanband-plan (or ini meanband_plan).\n"
    "# Counts may be edited by hand; a call argument or a marker still wins over this file.\n"
)
_ENTRY_KEYS = ("n", "max_n", "reason", "saves_seconds")
_TEST_KEYS = (*_ENTRY_KEYS, "series")


class PlanError(TrialError):
    """A plan file that cannot be read: the message names the file and, where known, the line."""


@dataclass(frozen=True, slots=True)
class PlanEntry:
    """The planned count of one series of one test (``series=""`` is the default series).

    ``max_n`` is the cap for a check that chooses its own count (n="until-decided", "looks:K",
    "auto"), learned from where its runs stopped; such an entry has no ``n``.
    """

    nodeid: str
    series: str
    n: int | None
    reason: str = ""
    saves_seconds: float | None = None
    max_n: int | None = None


@dataclass(frozen=True)
class Plan:
    """A read plan: entries by (test id, series), plus the power the counts were planned for."""

    entries: dict[tuple[str, str], PlanEntry] = field(default_factory=dict)
    power: float | None = None
    source: str = "<plan>"

    def nodeids(self) -> list[str]:
        """Test ids with at least one entry, in file order."""
        return list(self._by_test)

    def for_test(self, nodeid: str) -> dict[str, PlanEntry]:
        """Entries of one test by series name (empty when the plan does not mention it)."""
        return dict(self._by_test.get(nodeid, {}))

    @cached_property
    def _by_test(self) -> dict[str, dict[str, PlanEntry]]:
        # Looked up once per test at set-up: index by test id rather than scan every entry.
        index: dict[str, dict[str, PlanEntry]] = {}
        for (nodeid, series), entry in self.entries.items():
            index.setdefault(nodeid, {})[series] = entry
        return index


def entries_from_rows(rows: Iterable[Mapping[str, Any]]) -> list[PlanEntry]:
    """Plan entries from result rows that carry a ``"suggestion"``.

    A series with several checks gets the largest count any of them asks for. A check that
    failed decisively keeps the count it ran with: more trials would not change its verdict.
    A check whose count ``n="auto"`` chose has no entry; one that stops when decided has an
    entry when its suggestion moves the cap (``max_n``).
    """
    chosen: dict[tuple[str, str], PlanEntry] = {}
    for row in rows:
        if row.get("kind") != "check" or not row.get("decision"):
            continue
        key = (str(row["nodeid"]), str(row.get("series") or ""))
        suggestion = row.get("suggestion")
        decision = row["decision"]
        if suggestion and suggestion.get("direction") == "auto":
            if suggestion.get("max_n") is None:
                continue  # the mode picks this count at run time
            entry = PlanEntry(key[0], key[1], None, str(suggestion.get("reason", "")),
                              max_n=int(suggestion["max_n"]))
        elif suggestion:
            entry = PlanEntry(
                key[0], key[1], suggestion.get("n"), str(suggestion.get("reason", "")),
                suggestion.get("saves_seconds"),
            )
        elif decision.get("verdict") == "FAIL":
            n = int(decision["interval"]["n"])
            entry = PlanEntry(
                key[0], key[1], n,
                f"failed decisively at {n} trials: more trials would not change the verdict",
            )
        else:
            continue
        previous = chosen.get(key)
        if previous is None or _larger(entry, previous):
            chosen[key] = entry
    return sorted(chosen.values(), key=lambda e: (e.nodeid, e.series))


def _larger(entry: PlanEntry, previous: PlanEntry) -> bool:
    if previous.n is None:
        return entry.n is not None
    return entry.n is not None and entry.n > previous.n


def dumps_plan(entries: Iterable[PlanEntry], *, power: float | None = None) -> str:
    """The plan as TOML text (written by tomli-w), tests sorted by id for stable diffs."""
    import tomli_w

    tests: dict[str, dict[str, Any]] = {}
    for entry in sorted(entries, key=lambda e: (e.nodeid, e.series)):
        table: dict[str, Any] = {}
        if entry.n is not None:
            table["n"] = int(entry.n)
        if entry.max_n is not None:
            table["max_n"] = int(entry.max_n)
        table["reason"] = entry.reason
        if entry.saves_seconds is not None:
            table["saves_seconds"] = round(float(entry.saves_seconds), 6)
        test = tests.setdefault(entry.nodeid, {})
        if entry.series:
            test.setdefault("series", {})[entry.series] = table
        else:
            test.update(table)
    # Keys of a test's own entry first, its series after, so each test reads top to bottom.
    for nodeid, test in tests.items():
        if "series" in test:
            tests[nodeid] = {k: v for k, v in test.items() if k != "series"} | {
                "series": test["series"]
            }
    meta: dict[str, Any] = {"version": FORMAT_VERSION}
    if power is not None:
        meta["power"] = float(power)
    return _HEADER + "\n" + tomli_w.dumps({"plan": meta, "tests": tests})


def write_plan(path: str | os.PathLike[str], entries: Iterable[PlanEntry], *,
               power: float | None = None) -> Path:
    """Write the plan atomically (a reader never sees half a file); returns the path."""
    target = Path(path)
    text = dumps_plan(entries, power=power)
    target.parent.mkdir(parents=True, exist_ok=True)
    handle, temporary = tempfile.mkstemp(prefix=".plan-", suffix=".toml", dir=target.parent)
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            stream.write(text)
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise
    return target


def read_plan(path: str | os.PathLike[str], *, max_bytes: int | None = None,
              setting: str = "--meanband-max-read-bytes") -> Plan:
    """Read a plan file; a missing, unreadable, malformed or too large file raises PlanError.

    ``max_bytes`` defaults to ``defaults.MAX_READ_BYTES``; ``setting`` names what raises it.
    """
    from meanband.store.reading import ReadError, read_text

    source = str(path)
    try:
        text = read_text(path, max_bytes=max_bytes, setting=setting)
    except ReadError as exc:
        raise PlanError(f"plan file {exc}") from None
    except FileNotFoundError:
        raise PlanError(
            f"plan file {source} does not exist; write one with --meanband-write-plan PATH "
            "or `meanband plan --write PATH`"
        ) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise PlanError(f"cannot read plan file {source}: {exc}") from None
    return loads_plan(text, source=source)


def loads_plan(text: str, *, source: str = "<plan>") -> Plan:
    """Parse plan TOML; errors name ``source`` and the line (tomllib reports it for syntax)."""
    if sys.version_info >= (3, 11):
        import tomllib
    else:  # pragma: no cover - exercised on Python 3.10 only
        import tomli as tomllib

    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlanError(f"plan file {source} is not valid TOML: {exc}") from None
    except RecursionError:
        raise PlanError(f"plan file {source}: arrays or tables are nested too deeply to read; "
                        "a plan is three levels deep: was the right file given?") from None

    def fail(message: str, needle: str | tuple[str, ...] | None = None,
             key: str | None = None) -> PlanError:
        line = _line_of(text, needle, key) if needle else None
        where = f"{source}, line {line}" if line else source
        return PlanError(f"plan file {where}: {message}")

    unknown = sorted(set(data) - {"plan", "tests"})
    if unknown:
        raise fail(f"unknown top-level key {unknown[0]!r}; a plan has [plan] and [tests.\"id\"]",
                   unknown[0])
    meta = data.get("plan", {})
    if not isinstance(meta, dict):
        raise fail("'plan' must be a table", "plan")
    version = meta.get("version", FORMAT_VERSION)
    if version != FORMAT_VERSION:
        raise fail(f"format version {version!r} is not one this meanband reads "
                   f"(it reads {FORMAT_VERSION}); rewrite it with --meanband-write-plan",
                   "version")
    power = meta.get("power")
    if power is not None and not (_is_number(power) and 0 < power < 1):
        raise fail(f"plan.power must be a number between 0 and 1, got {power!r}", "power")

    tests = data.get("tests", {})
    if not isinstance(tests, dict):
        raise fail("'tests' must be a table of test ids", "tests")
    entries: dict[tuple[str, str], PlanEntry] = {}
    for nodeid, table in tests.items():
        if not isinstance(table, dict):
            raise fail(f"tests.{nodeid!r} must be a table with n = ...", nodeid)
        bad = sorted(set(table) - set(_TEST_KEYS))
        if bad:
            raise fail(f"tests.{nodeid!r} has unknown key {bad[0]!r}; "
                       f"known keys: {', '.join(_TEST_KEYS)}", nodeid)
        own = {k: v for k, v in table.items() if k != "series"}
        if own:
            entries[(nodeid, "")] = _entry(nodeid, "", own, fail)
        series = table.get("series", {})
        if not isinstance(series, dict):
            raise fail(f"tests.{nodeid!r}.series must be a table of series names", nodeid)
        for name, sub in series.items():
            if not name:
                raise fail(f"tests.{nodeid!r}.series has an empty name; put the default "
                           "series' n in the test's own table", nodeid)
            if not isinstance(sub, dict):
                raise fail(f"tests.{nodeid!r}.series.{name!r} must be a table with n = ...",
                           nodeid)
            bad = sorted(set(sub) - set(_ENTRY_KEYS))
            if bad:
                raise fail(f"tests.{nodeid!r}.series.{name!r} has unknown key {bad[0]!r}; "
                           f"known keys: {', '.join(_ENTRY_KEYS)}", nodeid)
            entries[(nodeid, name)] = _entry(nodeid, name, sub, fail)
    return Plan(entries, None if power is None else float(power), source)


def _entry(nodeid: str, series: str, table: Mapping[str, Any], fail: Any) -> PlanEntry:
    anchor = (nodeid, "series", series) if series else nodeid
    label = f"tests.{nodeid!r}" + (f".series.{series!r}" if series else "")
    n = table.get("n")
    if n is not None and (isinstance(n, bool) or not isinstance(n, int) or n < 2):
        raise fail(f"{label}.n must be a whole number of trials >= 2, got {n!r}", anchor, "n")
    cap = table.get("max_n")
    if cap is not None and (isinstance(cap, bool) or not isinstance(cap, int) or cap < 2):
        raise fail(f"{label}.max_n must be a whole number of trials >= 2, got {cap!r}",
                   anchor, "max_n")
    reason = table.get("reason", "")
    if not isinstance(reason, str):
        raise fail(f"{label}.reason must be a string, got {reason!r}", anchor, "reason")
    saves = table.get("saves_seconds")
    if saves is not None and not (_is_number(saves) and saves >= 0):
        raise fail(f"{label}.saves_seconds must be a number >= 0, got {saves!r}",
                   anchor, "saves_seconds")
    return PlanEntry(nodeid, series, n, reason, None if saves is None else float(saves), cap)


def _is_number(value: Any) -> bool:
    return (isinstance(value, (int, float)) and not isinstance(value, bool)
            and math.isfinite(value))


def _line_of(text: str, needle: str | tuple[str, ...], key: str | None = None) -> int | None:
    """1-based line of the first line that mentions ``needle`` (then of ``key =`` below it)."""
    needles = (needle,) if isinstance(needle, str) else needle
    lines = text.splitlines()
    start = None
    for number, line in enumerate(lines, start=1):
        stripped = line.strip()
        if not stripped.startswith("#") and all(part in stripped for part in needles):
            start = number
            break
    if start is None or key is None:
        return start
    assignment = re.compile(rf"^\s*{re.escape(key)}\s*=")
    for number in range(start, len(lines) + 1):
        if assignment.match(lines[number - 1]):
            return number
        if number > start and lines[number - 1].lstrip().startswith("["):
            break
    return start
